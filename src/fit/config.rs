//! What to fit and how: fixed parameters, bounds, weights, tolerances.

/// Where the x values live: suctions (0 or more) or any real number (test problems).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Domain {
    /// x is a suction in cm: negative values are an error.
    #[default]
    Suction,
    /// x may be any finite number.
    Any,
}

/// The options of one fit, built with the `with_*` methods.
///
/// Parameters are named as in the model's [`ParamSpec`](crate::model::curve::ParamSpec)s.
/// Names the model does not know are an error unless [`FitOptions::with_lenient_names`] is set
/// (so `auto` can apply `--fix theta_r=0` to the models that have a `theta_r`).
#[derive(Debug, Clone, PartialEq)]
pub struct FitOptions {
    pub(crate) fixed: Vec<(String, f64)>,
    pub(crate) bounds: Vec<(String, f64, f64)>,
    pub(crate) breakpoint: Option<String>,
    pub(crate) domain: Domain,
    pub(crate) lenient_names: bool,
    pub(crate) tolerance: f64,
    pub(crate) patience: usize,
    pub(crate) max_extra_starts: usize,
    pub(crate) step_bound: f64,
    pub(crate) reference_solver: bool,
}

impl Default for FitOptions {
    fn default() -> Self {
        Self {
            fixed: Vec::new(),
            bounds: Vec::new(),
            breakpoint: None,
            domain: Domain::Suction,
            lenient_names: false,
            tolerance: 1e-10,
            patience: 100,
            max_extra_starts: 6,
            step_bound: 100.0,
            reference_solver: false,
        }
    }
}

impl FitOptions {
    /// Defaults: nothing fixed, the model's bounds, suction domain, tolerances 1e-10.
    pub fn new() -> Self {
        Self::default()
    }

    /// Run the generic solver (the `levenberg-marquardt` crate) for every problem, also where
    /// the two-parameter solver would run: the reference that solver is tested against.
    #[must_use]
    pub fn with_reference_solver(mut self, yes: bool) -> Self {
        self.reference_solver = yes;
        self
    }

    /// Fix a parameter to a value (it leaves the vector the solver moves).
    #[must_use]
    pub fn with_fixed(mut self, name: &str, value: f64) -> Self {
        self.fixed.retain(|(n, _)| n != name);
        self.fixed.push((name.to_string(), value));
        self
    }

    /// Replace a parameter's bounds (infinite for none).
    #[must_use]
    pub fn with_bounds(mut self, name: &str, lower: f64, upper: f64) -> Self {
        self.bounds.retain(|(n, _, _)| n != name);
        self.bounds.push((name.to_string(), lower, upper));
        self
    }

    /// Name a parameter that is a breakpoint in x (Brooks-Corey `h_b_cm`, Campbell `h_e_cm`).
    ///
    /// The curve has a kink where the breakpoint equals a measured x, so the error surface is
    /// not smooth there; the driver then fits once per interval between sorted measured x
    /// values, where the model is smooth, and keeps the best.
    #[must_use]
    pub fn with_breakpoint(mut self, name: &str) -> Self {
        self.breakpoint = Some(name.to_string());
        self
    }

    /// Accept any finite x (negative too): for test problems that are not retention curves.
    #[must_use]
    pub fn with_domain(mut self, domain: Domain) -> Self {
        self.domain = domain;
        self
    }

    /// Ignore fixed values and bounds for parameters the model does not have.
    #[must_use]
    pub fn with_lenient_names(mut self, lenient: bool) -> Self {
        self.lenient_names = lenient;
        self
    }

    /// Relative tolerance on the sum of squares, the step and the gradient (default 1e-10).
    ///
    /// Values below about 1e-15 are raised to that, since they cannot be met in double precision.
    #[must_use]
    pub fn with_tolerance(mut self, tolerance: f64) -> Self {
        self.tolerance = if tolerance.is_finite() {
            tolerance.max(1e-15)
        } else {
            1e-10
        };
        self
    }

    /// Give up one run after `patience * (free parameters + 1)` evaluations (default 100).
    #[must_use]
    pub fn with_patience(mut self, patience: usize) -> Self {
        self.patience = patience.max(1);
        self
    }

    /// How many extra starting points to try when the first result looks doubtful (default 6).
    #[must_use]
    pub fn with_max_extra_starts(mut self, starts: usize) -> Self {
        self.max_extra_starts = starts;
        self
    }

    /// Factor for the solver's first trust-region radius (MINPACK's `factor`, default 100).
    #[must_use]
    pub fn with_step_bound(mut self, step_bound: f64) -> Self {
        if step_bound.is_finite() && step_bound > 0.0 {
            self.step_bound = step_bound;
        }
        self
    }

    /// The fixed values asked for, by name.
    pub fn fixed(&self) -> &[(String, f64)] {
        &self.fixed
    }
}
