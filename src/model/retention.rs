//! The published retention models: which ones exist, their parameters and bounds, and dispatch.
//!
//! Each model lives in its own file under `retention/` as a unit struct that implements
//! [`CurveModel`] (theta(h) and its analytic gradient, for the least-squares driver) and
//! [`RetentionModel`] (effective saturation, specific water capacity, inverse). x is always the
//! suction head h in cm (h >= 0, positive when drier) and y the volumetric water content (m3/m3).
//!
//! Bounds are closed intervals `[lower, upper]`: every value inside gives a finite curve. Where
//! the physical bound is open (n > 1, w1 in (0, 1)) the interval stops just inside it.

use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

use super::curve::{CurveModel, ParamSpec};

pub mod brooks_corey;
pub mod campbell;
pub mod durner;
pub mod fredlund_xing;
pub mod kosugi;
pub mod van_genuchten;
pub mod van_genuchten_free_m;

pub use brooks_corey::BrooksCorey;
pub use campbell::Campbell;
pub use durner::Durner;
pub use fredlund_xing::FredlundXing;
pub use kosugi::Kosugi;
pub use van_genuchten::VanGenuchten;
pub use van_genuchten_free_m::VanGenuchtenFreeM;

/// A retention model, by its published name; serialized as its identifier (`van-genuchten`, ...).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ModelKind {
    /// van Genuchten (1980) with the Mualem restriction m = 1 - 1/n.
    VanGenuchten,
    /// van Genuchten (1980) with m free.
    VanGenuchtenFreeM,
    /// Brooks & Corey (1964).
    BrooksCorey,
    /// Kosugi (1996) lognormal.
    Kosugi,
    /// Fredlund & Xing (1994) with its correction term.
    FredlundXing,
    /// Durner (1994) bimodal van Genuchten, m_i = 1 - 1/n_i.
    Durner,
    /// Campbell (1974) power law.
    Campbell,
}

impl ModelKind {
    /// Every model, in the order of the design table (also the column order of fit exports).
    pub const ALL: [ModelKind; 7] = [
        ModelKind::VanGenuchten,
        ModelKind::VanGenuchtenFreeM,
        ModelKind::BrooksCorey,
        ModelKind::Kosugi,
        ModelKind::FredlundXing,
        ModelKind::Durner,
        ModelKind::Campbell,
    ];

    /// The identifier used by `--model` and every output.
    pub fn id(self) -> &'static str {
        match self {
            ModelKind::VanGenuchten => "van-genuchten",
            ModelKind::VanGenuchtenFreeM => "van-genuchten-free-m",
            ModelKind::BrooksCorey => "brooks-corey",
            ModelKind::Kosugi => "kosugi",
            ModelKind::FredlundXing => "fredlund-xing",
            ModelKind::Durner => "durner",
            ModelKind::Campbell => "campbell",
        }
    }

    /// The published name with its restriction, for reports and the terminal UI.
    pub fn display_name(self) -> &'static str {
        match self {
            ModelKind::VanGenuchten => "van Genuchten (m = 1 - 1/n)",
            ModelKind::VanGenuchtenFreeM => "van Genuchten (free m)",
            ModelKind::BrooksCorey => "Brooks-Corey",
            ModelKind::Kosugi => "Kosugi lognormal",
            ModelKind::FredlundXing => "Fredlund-Xing",
            ModelKind::Durner => "Durner bimodal",
            ModelKind::Campbell => "Campbell",
        }
    }

    /// The model's parameters (name, unit, bounds) in the order of every parameter slice.
    pub fn params(self) -> &'static [ParamSpec] {
        match self {
            ModelKind::VanGenuchten => &van_genuchten::PARAMS,
            ModelKind::VanGenuchtenFreeM => &van_genuchten_free_m::PARAMS,
            ModelKind::BrooksCorey => &brooks_corey::PARAMS,
            ModelKind::Kosugi => &kosugi::PARAMS,
            ModelKind::FredlundXing => &fredlund_xing::PARAMS,
            ModelKind::Durner => &durner::PARAMS,
            ModelKind::Campbell => &campbell::PARAMS,
        }
    }

    /// The model as the least-squares driver sees it.
    pub fn curve(self) -> &'static dyn CurveModel {
        self.retention()
    }

    /// The model with its retention-specific functions (Se, C(h), inverse).
    pub fn retention(self) -> &'static dyn RetentionModel {
        match self {
            ModelKind::VanGenuchten => &VanGenuchten,
            ModelKind::VanGenuchtenFreeM => &VanGenuchtenFreeM,
            ModelKind::BrooksCorey => &BrooksCorey,
            ModelKind::Kosugi => &Kosugi,
            ModelKind::FredlundXing => &FredlundXing,
            ModelKind::Durner => &Durner,
            ModelKind::Campbell => &Campbell,
        }
    }

    /// Position of a parameter by name.
    ///
    /// # Errors
    /// [`ParamError::Unknown`] (listing the model's names) when the model has no such parameter.
    pub fn param_index(self, name: &str) -> Result<usize, ParamError> {
        self.params()
            .iter()
            .position(|spec| spec.name == name)
            .ok_or_else(|| ParamError::Unknown {
                model: self,
                name: name.to_string(),
            })
    }

    /// Put equivalent parameter sets into one canonical form (after a fit, before a report).
    ///
    /// Only Durner has two equivalent orders: its modes are swapped so that mode 1 is the
    /// large-pore one (alpha1 >= alpha2), with w1 replaced by 1 - w1. Other models are unchanged.
    pub fn canonicalize(self, p: &mut [f64]) {
        if self == ModelKind::Durner {
            durner::canonicalize(p);
        }
    }

    /// Check a full parameter vector: its length, every value finite and within bounds, and
    /// theta_r below theta_s where the model has both.
    ///
    /// # Errors
    /// The first problem found, as a [`ParamError`].
    pub fn check_params(self, p: &[f64]) -> Result<(), ParamError> {
        let specs = self.params();
        if p.len() != specs.len() {
            return Err(ParamError::WrongCount {
                model: self,
                expected: specs.len(),
                found: p.len(),
            });
        }
        for (spec, &value) in specs.iter().zip(p) {
            if !value.is_finite() {
                return Err(ParamError::NotFinite {
                    name: spec.name,
                    value,
                });
            }
            if value < spec.lower || value > spec.upper {
                return Err(ParamError::OutOfBounds {
                    name: spec.name,
                    value,
                    lower: spec.lower,
                    upper: spec.upper,
                });
            }
        }
        let model = self.retention();
        let (theta_r, theta_s) = (model.theta_r(p), model.theta_s(p));
        if theta_r >= theta_s {
            return Err(ParamError::ResidualNotBelowSaturated { theta_r, theta_s });
        }
        Ok(())
    }

    /// Build a full, checked parameter vector from `name = value` pairs in any order.
    ///
    /// # Errors
    /// An unknown or repeated name, a missing parameter, or any failure of [`Self::check_params`].
    pub fn parameter_vector(self, pairs: &[(String, f64)]) -> Result<Vec<f64>, ParamError> {
        let specs = self.params();
        let mut values: Vec<Option<f64>> = vec![None; specs.len()];
        for (name, value) in pairs {
            let i = self.param_index(name)?;
            if values[i].replace(*value).is_some() {
                return Err(ParamError::Repeated {
                    name: specs[i].name,
                });
            }
        }
        let missing: Vec<&'static str> = specs
            .iter()
            .zip(&values)
            .filter(|(_, v)| v.is_none())
            .map(|(spec, _)| spec.name)
            .collect();
        if !missing.is_empty() {
            return Err(ParamError::Missing {
                model: self,
                missing,
            });
        }
        let p: Vec<f64> = values.into_iter().map(|v| v.unwrap_or(f64::NAN)).collect();
        self.check_params(&p)?;
        Ok(p)
    }

    /// The parameter names joined with commas, for messages.
    pub fn param_names(self) -> String {
        join_names(self.params().iter().map(|s| s.name))
    }
}

impl fmt::Display for ModelKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.id())
    }
}

impl FromStr for ModelKind {
    type Err = ParamError;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let wanted = s.trim();
        ModelKind::ALL
            .into_iter()
            .find(|kind| kind.id().eq_ignore_ascii_case(wanted))
            .ok_or_else(|| ParamError::UnknownModel(wanted.to_string()))
    }
}

/// A model with a checked parameter set: the value a report, the CLI or the UI passes around.
#[derive(Debug, Clone, PartialEq)]
pub struct RetentionCurve {
    kind: ModelKind,
    params: Vec<f64>,
}

impl RetentionCurve {
    /// A curve from a full parameter vector in the model's order.
    ///
    /// # Errors
    /// Any failure of [`ModelKind::check_params`].
    pub fn new(kind: ModelKind, params: Vec<f64>) -> Result<RetentionCurve, ParamError> {
        kind.check_params(&params)?;
        Ok(RetentionCurve { kind, params })
    }

    /// A curve from `name = value` pairs in any order.
    ///
    /// # Errors
    /// Any failure of [`ModelKind::parameter_vector`].
    pub fn from_pairs(
        kind: ModelKind,
        pairs: &[(String, f64)],
    ) -> Result<RetentionCurve, ParamError> {
        let params = kind.parameter_vector(pairs)?;
        Ok(RetentionCurve { kind, params })
    }

    /// The model.
    pub fn kind(&self) -> ModelKind {
        self.kind
    }

    /// The parameters, in the model's order.
    pub fn params(&self) -> &[f64] {
        &self.params
    }

    /// The value of a parameter by name.
    pub fn param(&self, name: &str) -> Option<f64> {
        self.kind.param_index(name).ok().map(|i| self.params[i])
    }

    /// theta_r (0 for models without one) and theta_s.
    pub fn theta_range(&self) -> (f64, f64) {
        let model = self.kind.retention();
        (model.theta_r(&self.params), model.theta_s(&self.params))
    }

    /// Volumetric water content at suction `h_cm` (>= 0, finite).
    pub fn theta(&self, h_cm: f64) -> f64 {
        self.kind.retention().value(h_cm, &self.params)
    }

    /// Effective saturation at suction `h_cm`, in [0, 1].
    pub fn effective_saturation(&self, h_cm: f64) -> f64 {
        self.kind
            .retention()
            .effective_saturation(h_cm, &self.params)
    }

    /// Specific water capacity C(h) = -d theta / dh per cm; `None` at a break point.
    pub fn capacity(&self, h_cm: f64) -> Option<f64> {
        self.kind.retention().capacity(h_cm, &self.params)
    }

    /// The smallest suction (cm) holding `theta`; `None` where the curve never falls so low.
    pub fn suction_at(&self, theta: f64) -> Option<f64> {
        self.kind.retention().suction_at(theta, &self.params)
    }
}

/// Parse one `NAME=VALUE` assignment (as given to `--set` or `--fix`).
///
/// # Errors
/// [`ParamError::Assignment`] when there is no `=`, the name is empty or the value is not a number.
pub fn parse_assignment(text: &str) -> Result<(String, f64), ParamError> {
    let bad = || ParamError::Assignment(text.to_string());
    let (name, value) = text.split_once('=').ok_or_else(bad)?;
    let name = name.trim();
    if name.is_empty() {
        return Err(bad());
    }
    let value: f64 = value.trim().parse().map_err(|_| bad())?;
    Ok((name.to_string(), value))
}

fn join_names<'a>(names: impl Iterator<Item = &'a str>) -> String {
    names.collect::<Vec<_>>().join(", ")
}

/// What is wrong with a model name or a parameter set.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum ParamError {
    /// No model has this identifier.
    #[error("unknown model {0:?}; expected one of {ids}", ids = join_names(ModelKind::ALL.iter().map(|k| k.id())))]
    UnknownModel(String),
    /// The model has no parameter of this name.
    #[error("{model} has no parameter {name:?}; its parameters are {names}", names = model.param_names())]
    Unknown {
        /// The model asked about.
        model: ModelKind,
        /// The name given.
        name: String,
    },
    /// A parameter was given twice.
    #[error("parameter {name} is given more than once")]
    Repeated {
        /// The repeated name.
        name: &'static str,
    },
    /// Some parameters were not given.
    #[error("{model} needs {list}; missing {missing}", list = model.param_names(), missing = missing.join(", "))]
    Missing {
        /// The model.
        model: ModelKind,
        /// The names not given, in model order.
        missing: Vec<&'static str>,
    },
    /// The vector has the wrong length.
    #[error("{model} takes {expected} parameters, got {found}")]
    WrongCount {
        /// The model.
        model: ModelKind,
        /// Its number of parameters.
        expected: usize,
        /// The number given.
        found: usize,
    },
    /// A value is NaN or infinite.
    #[error("parameter {name} = {value} is not a finite number")]
    NotFinite {
        /// The parameter.
        name: &'static str,
        /// The value given.
        value: f64,
    },
    /// A value lies outside the parameter's bounds.
    #[error("parameter {name} = {value} is outside its bounds [{lower}, {upper}]")]
    OutOfBounds {
        /// The parameter.
        name: &'static str,
        /// The value given.
        value: f64,
        /// Lowest allowed value.
        lower: f64,
        /// Highest allowed value.
        upper: f64,
    },
    /// theta_r must be below theta_s.
    #[error("theta_r = {theta_r} must be below theta_s = {theta_s}")]
    ResidualNotBelowSaturated {
        /// The residual water content given.
        theta_r: f64,
        /// The saturated water content given.
        theta_s: f64,
    },
    /// Not of the form `NAME=VALUE` with a number.
    #[error("expected NAME=VALUE with a number, got {0:?}")]
    Assignment(String),
}

/// Retention-specific functions of a model, beyond what the least-squares driver needs.
///
/// All take the same parameter slice as [`CurveModel::value`]; h is suction in cm.
pub trait RetentionModel: CurveModel {
    /// Which model this is.
    fn kind(&self) -> ModelKind;

    /// The water content the curve tends to at high suction (0 for models without theta_r).
    fn theta_r(&self, p: &[f64]) -> f64;

    /// The water content at h = 0.
    fn theta_s(&self, p: &[f64]) -> f64;

    /// Effective saturation Se = (theta - theta_r) / (theta_s - theta_r), in [0, 1].
    ///
    /// Computed from the model's shape function itself, not from theta: far from saturation
    /// theta - theta_r cancels and would lose every digit of a small Se.
    fn effective_saturation(&self, h: f64, p: &[f64]) -> f64;

    /// Specific water capacity C(h) = -d theta / dh, per cm of suction (>= 0).
    ///
    /// `None` where the derivative does not exist (the break point of a piecewise model).
    fn capacity(&self, h: f64, p: &[f64]) -> Option<f64>;

    /// The smallest suction (cm) at which the curve holds `theta`: 0 for theta >= theta_s,
    /// `None` where the curve never falls that low.
    fn suction_at(&self, theta: f64, p: &[f64]) -> Option<f64>;
}

/// Bounds of theta_r, m3/m3: 0 (oven-dry reference) to 0.5. Fitted residual contents of
/// mineral soils are 0-0.25 (common practice); 0.5 leaves room for clays and organic soils.
pub(crate) const THETA_R: ParamSpec = ParamSpec {
    name: "theta_r",
    unit: "m3/m3",
    lower: 0.0,
    upper: 0.5,
};

/// Bounds of theta_s, m3/m3: 0.01 to 1. Mineral soils hold 0.25-0.70 and peat up to about
/// 0.95 (common practice); a volumetric fraction cannot exceed 1.
pub(crate) const THETA_S: ParamSpec = ParamSpec {
    name: "theta_s",
    unit: "m3/m3",
    lower: 0.01,
    upper: 1.0,
};

/// Bounds of a van Genuchten alpha, 1/cm: 1e-5 to 10 (the design's range; observed values
/// are 0.001-0.5, common practice). 1e-5 puts the air entry beyond 10^5 cm, 10 below 0.1 cm.
pub(crate) const fn alpha_spec(name: &'static str) -> ParamSpec {
    ParamSpec {
        name,
        unit: "1/cm",
        lower: 1e-5,
        upper: 10.0,
    }
}

/// Bounds of a van Genuchten n: (1, 15], kept 1e-3 inside the open bound n > 1 so that
/// m = 1 - 1/n stays positive; observed values are 1.01-10 (common practice, the steepest
/// published curve has n = 10.4, van Genuchten 1980).
pub(crate) const fn n_spec(name: &'static str) -> ParamSpec {
    ParamSpec {
        name,
        unit: "-",
        lower: 1.001,
        upper: 15.0,
    }
}

/// log(1 + e^t) without overflow or cancellation.
#[inline]
pub(crate) fn softplus(t: f64) -> f64 {
    if t > 0.0 {
        t + (-t).exp().ln_1p()
    } else {
        t.exp().ln_1p()
    }
}

/// 1 / (1 + e^-t) without overflow (the reference for [`softplus_sigmoid`] in tests).
#[cfg(test)]
pub(crate) fn sigmoid(t: f64) -> f64 {
    if t >= 0.0 {
        1.0 / (1.0 + (-t).exp())
    } else {
        let e = t.exp();
        e / (1.0 + e)
    }
}

/// softplus(t) and sigmoid(t) together, with one exponential.
#[inline]
pub(crate) fn softplus_sigmoid(t: f64) -> (f64, f64) {
    let e = (-t.abs()).exp();
    let inv = 1.0 / (1.0 + e);
    if t > 0.0 {
        (t + e.ln_1p(), inv)
    } else {
        (e.ln_1p(), e * inv)
    }
}

/// ln(1 / (1 + e^-t)) = -softplus(-t), accurate at both ends.
#[inline]
pub(crate) fn ln_sigmoid(t: f64) -> f64 {
    -softplus(-t)
}

/// `Some(v)` when v is finite, so no NaN or infinity leaves the model layer.
#[inline]
pub(crate) fn finite(v: f64) -> Option<f64> {
    v.is_finite().then_some(v)
}

/// Smallest suction searched by the numerical inverse, cm.
pub(crate) const BISECTION_MIN_CM: f64 = 1e-6;

/// Invert a decreasing theta(h) by bisection in ln h on [`BISECTION_MIN_CM`, `h_max`].
///
/// Returns 0 when theta(min) is already at or below the target (theta >= the wet end), `None`
/// when theta(h_max) is still above it.
pub(crate) fn invert_by_bisection(
    model: &dyn CurveModel,
    p: &[f64],
    theta: f64,
    h_max: f64,
) -> Option<f64> {
    if !theta.is_finite() {
        return None;
    }
    if model.value(BISECTION_MIN_CM, p) <= theta {
        return Some(if model.value(0.0, p) <= theta {
            0.0
        } else {
            BISECTION_MIN_CM
        });
    }
    if model.value(h_max, p) > theta {
        return None;
    }
    let (mut lo, mut hi) = (BISECTION_MIN_CM.ln(), h_max.ln());
    // 200 halvings of an interval of about 40 in ln h reach far below one ulp.
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        if model.value(mid.exp(), p) > theta {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    finite((0.5 * (lo + hi)).exp())
}

/// Data summary shared by the models' starting guesses.
///
/// Sorted by suction; the wet and dry ends, and the suction where the data cross the middle
/// of their water-content range (interpolated in ln h), with the slope there in log h.
#[derive(Debug, Clone, Copy)]
pub(crate) struct DataShape {
    /// Highest water content observed.
    pub theta_max: f64,
    /// Lowest water content observed.
    pub theta_min: f64,
    /// Suction (cm) where the data cross halfway between theta_max and theta_min.
    pub h_half: f64,
    /// |d Se / d ln h| around the crossing, from the points on either side (> 0).
    pub slope_ln_h: f64,
}

impl DataShape {
    /// Summarize readings; `None` when there are none with finite values.
    pub fn of(x: &[f64], y: &[f64]) -> Option<DataShape> {
        let mut pts: Vec<(f64, f64)> = Vec::with_capacity(x.len().min(y.len()));
        pts.extend(
            x.iter()
                .zip(y)
                .filter(|(h, t)| h.is_finite() && t.is_finite() && **h >= 0.0)
                .map(|(&h, &t)| (h, t)),
        );
        if pts.is_empty() {
            return None;
        }
        pts.sort_by(|a, b| a.0.total_cmp(&b.0));
        let theta_max = pts.iter().map(|p| p.1).fold(f64::NEG_INFINITY, f64::max);
        let theta_min = pts.iter().map(|p| p.1).fold(f64::INFINITY, f64::min);
        let h_min = pts.iter().map(|p| p.0).find(|&h| h > 0.0).unwrap_or(1.0);
        let h_max = pts.last().map_or(1.0, |p| p.0).max(h_min);
        let range = theta_max - theta_min;
        let mid = theta_min + 0.5 * range;
        // Suction in ln h, h = 0 placed a decade below the smallest positive suction.
        let ln_h = |h: f64| if h > 0.0 { h.ln() } else { (h_min / 10.0).ln() };
        let mut h_half = (h_min * h_max).sqrt();
        let mut slope = 0.0;
        for w in pts.windows(2) {
            let ((h0, t0), (h1, t1)) = (w[0], w[1]);
            if t0 >= mid && t1 < mid {
                let (l0, l1) = (ln_h(h0), ln_h(h1));
                let f = (t0 - mid) / (t0 - t1);
                h_half = (l0 + f * (l1 - l0)).exp();
                if l1 > l0 && range > 0.0 {
                    slope = (t0 - t1) / range / (l1 - l0);
                }
                break;
            }
        }
        if !(slope > 0.0 && slope.is_finite()) {
            // Fall back to the average slope over the measured range.
            let span = ln_h(h_max) - ln_h(pts[0].0);
            slope = if span > 0.0 { 1.0 / span } else { 0.25 };
        }
        Some(DataShape {
            theta_max,
            theta_min,
            h_half,
            slope_ln_h: slope,
        })
    }
}

/// Clamp a guess into a parameter's bounds (a little inside, so a logistic map stays finite).
pub(crate) fn clamp_to(spec: &ParamSpec, value: f64) -> f64 {
    let span = spec.upper - spec.lower;
    let margin = if span.is_finite() { 1e-6 * span } else { 0.0 };
    let lo = spec.lower + margin;
    let hi = spec.upper - margin;
    if value.is_nan() {
        return 0.5 * (lo + hi);
    }
    value.clamp(lo, hi)
}

/// Clamp every value of a guess into the model's bounds.
pub(crate) fn clamp_all(specs: &[ParamSpec], p: &mut [f64]) {
    for (spec, v) in specs.iter().zip(p.iter_mut()) {
        *v = clamp_to(spec, *v);
    }
}

/// theta_s guess: just above the wettest reading (theta_s enters linearly; the fit moves it
/// easily, so the guess only has to keep the wettest reading below saturation).
pub(crate) fn theta_s_guess(shape: &DataShape) -> f64 {
    (shape.theta_max * 1.002).max(shape.theta_max + 1e-4)
}

/// Fractions of the driest reading tried as theta_r by the starting guesses.
pub(crate) const THETA_R_FRACTIONS: [f64; 3] = [0.0, 0.6, 0.9];

/// The theta_r candidates of the starting guesses (below the driest reading and theta_s).
pub(crate) fn theta_r_candidates(shape: &DataShape) -> [f64; 3] {
    let theta_s = theta_s_guess(shape);
    THETA_R_FRACTIONS.map(|f| (shape.theta_min * f).max(0.0).min(0.9 * theta_s))
}

/// Weighted least-squares line y = slope x + intercept through (x, y, weight) points;
/// `None` with fewer than two points or no spread in x.
///
/// The linearizations of the starting guesses weight each reading by (d theta / d y)^2, so that
/// readings where the transform stretches small water-content differences count little.
pub(crate) fn line_fit(
    points: impl Iterator<Item = (f64, f64, f64)> + Clone,
) -> Option<(f64, f64)> {
    let (mut count, mut sw, mut sx, mut sy) = (0, 0.0, 0.0, 0.0);
    for (x, y, w) in points.clone() {
        count += 1;
        sw += w;
        sx += w * x;
        sy += w * y;
    }
    if count < 2 || sw.is_nan() || sw <= 0.0 {
        return None;
    }
    let (mx, my) = (sx / sw, sy / sw);
    let (mut sxx, mut sxy) = (0.0, 0.0);
    for (x, y, w) in points {
        sxx += w * (x - mx) * (x - mx);
        sxy += w * (x - mx) * (y - my);
    }
    let slope = sxy / sxx;
    (sxx > 0.0 && slope.is_finite() && my.is_finite()).then_some((slope, my - slope * mx))
}

/// Readings as (ln h, Se) for a linearization: h > 0 and Se clearly inside (0, 1).
pub(crate) fn se_points<'a>(
    x: &'a [f64],
    y: &'a [f64],
    theta_r: f64,
    theta_s: f64,
) -> impl Iterator<Item = (f64, f64)> + Clone + 'a {
    x.iter().zip(y).filter_map(move |(&h, &t)| {
        let se = (t - theta_r) / (theta_s - theta_r);
        (h > 0.0 && h.is_finite() && se > 0.005 && se < 0.985).then(|| (h.ln(), se))
    })
}

/// theta_r and theta_s by linear least squares for a fixed shape: theta = theta_r (1 - Se) +
/// theta_s Se, with `se(h)` the shape's effective saturation. The result is kept physical:
/// 0 <= theta_r <= the driest reading and theta_s >= the wettest. `None` when the shape does not
/// separate the two (all Se equal).
pub(crate) fn linear_ends(
    x: &[f64],
    y: &[f64],
    se: impl Fn(f64) -> f64,
    shape: &DataShape,
) -> Option<(f64, f64)> {
    let (mut suu, mut suv, mut svv, mut sut, mut svt) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for (&h, &t) in x.iter().zip(y) {
        let v = se(h);
        let u = 1.0 - v;
        suu += u * u;
        suv += u * v;
        svv += v * v;
        sut += u * t;
        svt += v * t;
    }
    let det = suu * svv - suv * suv;
    if det.is_nan() || det <= 1e-12 * (suu * svv).max(f64::MIN_POSITIVE) {
        return None;
    }
    let theta_r = (sut * svv - svt * suv) / det;
    let theta_s = (svt * suu - sut * suv) / det;
    let theta_s = theta_s.max(shape.theta_max).min(THETA_S.upper);
    // max/min rather than clamp: with odd data (theta_min < 0) the upper end can fall below 0.
    let theta_r = theta_r.min(shape.theta_min.min(0.95 * theta_s)).max(0.0);
    (theta_r.is_finite() && theta_s.is_finite()).then_some((theta_r, theta_s))
}

/// Sum of squared residuals of parameters `p` on the readings.
pub(crate) fn sse(model: &dyn CurveModel, x: &[f64], y: &[f64], p: &[f64]) -> f64 {
    x.iter()
        .zip(y)
        .map(|(&h, &t)| (model.value(h, p) - t).powi(2))
        .sum()
}

/// Clamp candidates into the bounds, order them by SSE on the readings (best first), drop
/// those within 1e-9 of an earlier one in every parameter, and keep at most `keep`.
pub(crate) fn rank_guesses(
    model: &dyn CurveModel,
    x: &[f64],
    y: &[f64],
    candidates: Vec<Vec<f64>>,
    keep: usize,
) -> Vec<Vec<f64>> {
    let mut scored: Vec<(f64, Vec<f64>)> = candidates
        .into_iter()
        .map(|mut p| {
            clamp_all(model.params(), &mut p);
            let score = sse(model, x, y, &p);
            (if score.is_nan() { f64::INFINITY } else { score }, p)
        })
        .collect();
    scored.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut out: Vec<Vec<f64>> = Vec::with_capacity(keep);
    for (_, p) in scored {
        let duplicate = out.iter().any(|q| {
            q.iter()
                .zip(&p)
                .all(|(a, b)| (a - b).abs() <= 1e-9 * a.abs().max(b.abs()).max(1.0))
        });
        if !duplicate && out.len() < keep {
            out.push(p);
        }
    }
    out
}

#[cfg(test)]
#[allow(clippy::float_cmp, clippy::unreadable_literal)]
mod tests {
    use super::*;

    #[test]
    fn ids_round_trip_through_from_str_display_and_serde() {
        for kind in ModelKind::ALL {
            assert_eq!(kind.id().parse::<ModelKind>(), Ok(kind));
            assert_eq!(kind.to_string(), kind.id());
            let json = serde_json::to_string(&kind).expect("serializes");
            assert_eq!(json, format!("\"{}\"", kind.id()));
            let back: ModelKind = serde_json::from_str(&json).expect("deserializes");
            assert_eq!(back, kind);
            assert_eq!(kind.retention().kind(), kind);
            assert_eq!(kind.curve().params(), kind.params());
        }
        assert!("van-genuchten-2".parse::<ModelKind>().is_err());
    }

    #[test]
    fn parameter_names_follow_the_design_table() {
        let names = |k: ModelKind| k.param_names();
        assert_eq!(
            names(ModelKind::VanGenuchten),
            "theta_r, theta_s, alpha_per_cm, n"
        );
        assert_eq!(
            names(ModelKind::VanGenuchtenFreeM),
            "theta_r, theta_s, alpha_per_cm, n, m"
        );
        assert_eq!(
            names(ModelKind::BrooksCorey),
            "theta_r, theta_s, h_b_cm, lambda"
        );
        assert_eq!(names(ModelKind::Kosugi), "theta_r, theta_s, h_m_cm, sigma");
        assert_eq!(
            names(ModelKind::FredlundXing),
            "theta_s, a_cm, n, m, h_r_cm"
        );
        assert_eq!(
            names(ModelKind::Durner),
            "theta_r, theta_s, w1, alpha1_per_cm, n1, alpha2_per_cm, n2"
        );
        assert_eq!(names(ModelKind::Campbell), "theta_s, h_e_cm, b");
    }

    #[test]
    fn bounds_are_finite_and_ordered() {
        for kind in ModelKind::ALL {
            for spec in kind.params() {
                assert!(spec.lower.is_finite() && spec.upper.is_finite(), "{spec:?}");
                assert!(spec.lower < spec.upper, "{spec:?}");
            }
        }
    }

    #[test]
    fn parameter_vector_reports_each_problem() {
        let vg = ModelKind::VanGenuchten;
        let pairs = |list: &[(&str, f64)]| -> Vec<(String, f64)> {
            list.iter().map(|(n, v)| ((*n).to_string(), *v)).collect()
        };
        let ok = vg
            .parameter_vector(&pairs(&[
                ("n", 1.56),
                ("theta_r", 0.078),
                ("alpha_per_cm", 0.036),
                ("theta_s", 0.43),
            ]))
            .expect("complete set");
        assert_eq!(ok, vec![0.078, 0.43, 0.036, 1.56]);
        let missing = vg.parameter_vector(&pairs(&[("theta_r", 0.1)]));
        assert!(
            matches!(missing, Err(ParamError::Missing { ref missing, .. }) if missing.len() == 3)
        );
        let unknown = vg.parameter_vector(&pairs(&[("lambda", 0.1)]));
        let message = unknown.expect_err("unknown").to_string();
        assert!(message.contains("alpha_per_cm"), "{message}");
        let nan = vg.parameter_vector(&pairs(&[
            ("theta_r", f64::NAN),
            ("theta_s", 0.4),
            ("alpha_per_cm", 0.1),
            ("n", 2.0),
        ]));
        assert!(matches!(
            nan,
            Err(ParamError::NotFinite {
                name: "theta_r",
                ..
            })
        ));
        let out = vg.parameter_vector(&pairs(&[
            ("theta_r", 0.0),
            ("theta_s", 0.4),
            ("alpha_per_cm", 0.1),
            ("n", 0.5),
        ]));
        assert!(matches!(
            out,
            Err(ParamError::OutOfBounds { name: "n", .. })
        ));
        let order = vg.parameter_vector(&pairs(&[
            ("theta_r", 0.45),
            ("theta_s", 0.4),
            ("alpha_per_cm", 0.1),
            ("n", 2.0),
        ]));
        assert!(matches!(
            order,
            Err(ParamError::ResidualNotBelowSaturated { .. })
        ));
        let twice = vg.parameter_vector(&pairs(&[("n", 2.0), ("n", 3.0)]));
        assert!(matches!(twice, Err(ParamError::Repeated { name: "n" })));
    }

    #[test]
    fn theta_r_must_be_below_theta_s() {
        let err = ModelKind::VanGenuchten
            .check_params(&[0.45, 0.4, 0.1, 2.0])
            .expect_err("theta_r above theta_s");
        assert!(matches!(err, ParamError::ResidualNotBelowSaturated { .. }));
    }

    #[test]
    fn assignments_parse_or_say_why_not() {
        assert_eq!(parse_assignment(" n = 1.5 "), Ok(("n".to_string(), 1.5)));
        assert!(parse_assignment("n").is_err());
        assert!(parse_assignment("=1").is_err());
        assert!(parse_assignment("n=abc").is_err());
    }

    #[test]
    fn stable_helpers_do_not_overflow() {
        assert_eq!(softplus(1000.0), 1000.0);
        assert_eq!(softplus(-1000.0), 0.0);
        assert!((softplus(0.0) - 2f64.ln()).abs() < 1e-15);
        assert_eq!(sigmoid(1000.0), 1.0);
        assert_eq!(sigmoid(-1000.0), 0.0);
        for t in [-800.0, -3.0, 0.0, 2.5, 800.0] {
            assert_eq!(softplus_sigmoid(t), (softplus(t), sigmoid(t)), "{t}");
        }
        assert!((ln_sigmoid(-50.0) + 50.0).abs() < 1e-12);
    }

    #[test]
    fn data_shape_finds_the_crossing() {
        let h = [0.0, 10.0, 100.0, 1000.0, 15000.0];
        let t = [0.40, 0.38, 0.25, 0.12, 0.08];
        let shape = DataShape::of(&h, &t).expect("data");
        assert_eq!(shape.theta_max, 0.40);
        assert_eq!(shape.theta_min, 0.08);
        assert!(shape.h_half > 100.0 && shape.h_half < 1000.0, "{shape:?}");
        assert!(shape.slope_ln_h > 0.0);
        assert!(DataShape::of(&[], &[]).is_none());
    }
}
