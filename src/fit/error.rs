//! Why a fit could not even be attempted.

/// A fit that cannot be made from this input; the message says what to change.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum FitError {
    /// The suction, water-content (and weight) columns differ in length.
    #[error("{x} suctions but {y} water contents{}", weights.map_or(String::new(), |w| format!(" and {w} weights")))]
    LengthMismatch {
        /// Number of x values (suctions).
        x: usize,
        /// Number of y values (water contents).
        y: usize,
        /// Number of weights, when they disagree.
        weights: Option<usize>,
    },
    /// A value is NaN or infinite.
    #[error("reading {index}: {what} is {value}, expected a finite number")]
    NonFinite {
        /// Which value (`suction`, `theta`, `weight`).
        what: &'static str,
        /// Position of the reading, from 1.
        index: usize,
        /// The value found.
        value: f64,
    },
    /// A suction below zero (a pressure, not a suction).
    #[error("reading {index}: suction {value} cm is negative, expected 0 or more")]
    NegativeSuction {
        /// Position of the reading, from 1.
        index: usize,
        /// The value found.
        value: f64,
    },
    /// A water content outside 0..1 m3/m3 (retention fits only).
    #[error("reading {index}: water content {value} is outside 0..1 m3/m3")]
    WaterContentOutOfRange {
        /// Position of the reading, from 1.
        index: usize,
        /// The value found.
        value: f64,
    },
    /// A weight below or equal to zero.
    #[error("reading {index}: weight {value} must be greater than 0")]
    BadWeight {
        /// Position of the reading, from 1.
        index: usize,
        /// The value found.
        value: f64,
    },
    /// Not more readings than free parameters.
    #[error(
        "{points} readings for {free} free parameters: need at least {} (fix some parameters or measure more points)",
        free + 1
    )]
    TooFewPoints {
        /// Number of readings.
        points: usize,
        /// Number of parameters left free.
        free: usize,
    },
    /// Every water content is the same: no curve can be told from a horizontal line.
    #[error("every water content is {value}: flat data carry no curve")]
    FlatData {
        /// The common value.
        value: f64,
    },
    /// Every suction is the same: the curve's shape is not measured.
    #[error("every suction is {value} cm: readings at several suctions are needed")]
    SuctionsAllEqual {
        /// The common value.
        value: f64,
    },
    /// `--fix` or a bound names a parameter the model does not have.
    #[error("model {model} has no parameter {name:?} (it has {known})")]
    UnknownParameter {
        /// The model identifier.
        model: String,
        /// The name given.
        name: String,
        /// The model's parameter names, comma-separated.
        known: String,
    },
    /// Bounds that are not an interval.
    #[error("bounds for {name}: lower {lower} must be below upper {upper}")]
    BadBounds {
        /// The parameter.
        name: String,
        /// Lower bound given.
        lower: f64,
        /// Upper bound given.
        upper: f64,
    },
    /// A fixed value outside the parameter's bounds.
    #[error("{name} fixed at {value}, outside its bounds [{lower}, {upper}]")]
    FixedOutsideBounds {
        /// The parameter.
        name: String,
        /// The value given.
        value: f64,
        /// Lower bound.
        lower: f64,
        /// Upper bound.
        upper: f64,
    },
    /// Every parameter is fixed: there is nothing to fit.
    #[error("every parameter of {model} is fixed: nothing to fit")]
    NothingToFit {
        /// The model identifier.
        model: String,
    },
    /// The model could not be evaluated from any start (NaN or infinity everywhere tried).
    #[error("the model gives no finite values from any starting point: {reason}")]
    NoFiniteFit {
        /// What the solver reported.
        reason: String,
    },
}
