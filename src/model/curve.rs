//! The contract between a parametric curve and the least-squares driver.
//!
//! A retention model (theta as a function of suction) and a NIST regression problem (y as a
//! function of x) are both a [`CurveModel`]: a value, its analytic gradient with respect to
//! every parameter, the parameters' names, units and bounds, and starting guesses from data.

/// One parameter of a curve: its name (unit in the name), unit and physical bounds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ParamSpec {
    /// Identifier used by `--set`, `--fix` and every output (for example `alpha_per_cm`).
    pub name: &'static str,
    /// Unit for display (`m3/m3`, `1/cm`, `cm`, `-`).
    pub unit: &'static str,
    /// Lowest value the fit may take (may be `f64::NEG_INFINITY` for unbounded problems).
    pub lower: f64,
    /// Highest value the fit may take (may be `f64::INFINITY`).
    pub upper: f64,
}

/// A parametric curve y = f(x; p) with analytic derivatives.
///
/// For retention models x is suction head in cm and y is volumetric water content.
pub trait CurveModel: Sync {
    /// The parameters, in the order used by every `p` slice.
    fn params(&self) -> &[ParamSpec];

    /// f(x; p).
    fn value(&self, x: f64, p: &[f64]) -> f64;

    /// f(x; p), writing df/dp_k into `grad` (length = number of parameters).
    ///
    /// Must be finite wherever `value` is (for example d theta / d n at h = 0 is 0, not NaN).
    fn value_and_gradient(&self, x: f64, p: &[f64], grad: &mut [f64]) -> f64;

    /// Starting points derived from the data, best guess first.
    fn initial_guesses(&self, x: &[f64], y: &[f64]) -> Vec<Vec<f64>>;
}
