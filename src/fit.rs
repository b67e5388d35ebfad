//! Fitting retention models to readings: bounded Levenberg-Marquardt, statistics, model choice.
//!
//! Pure computation over slices of suction (cm) and water content (m3/m3); no I/O. Any
//! [`CurveModel`](crate::model::curve::CurveModel) can be fitted, retention curves and the
//! NIST reference problems alike.

pub mod band;
mod config;
pub mod delta;
pub mod design;
mod driver;
mod error;
pub mod joint;
mod lm2;
mod models;
pub mod outliers;
pub mod pooling;
pub mod prior;
mod problem;
mod projection;
mod report;
mod search;
mod stats;
mod transform;

pub use config::{Domain, FitOptions};
pub use delta::{Checker, Delta, Interval95, IntervalMethod};
pub use driver::{Readings, fit_curve};
pub use error::FitError;
pub use models::{AutoFit, RankedFit, SkippedModel, breakpoint_of, fit_auto, fit_model};
pub use report::{
    FitReport, IntervalScale, ParamEstimate, ParamMatrix, ReadingFit, Side, Termination,
};
pub(crate) use stats::t975;
pub use stats::{aicc, criteria_parameters, min_points_for_aicc};

#[cfg(test)]
mod tests;
