//! Fitting the published retention models by kind, and `auto`: every model the readings
//! allow, ranked by AICc with Akaike weights.

use serde::{Deserialize, Serialize};

use super::config::FitOptions;
use super::driver::{Hooks, Readings, fit_curve_with};
use super::error::FitError;
use super::projection;
use super::report::FitReport;
use super::stats::min_points_for_aicc;
use crate::model::retention::{ModelKind, van_genuchten};

/// The parameter of a model that is a breakpoint in suction (a kink in the curve), if any.
///
/// Brooks-Corey's h_b and Campbell's h_e: below them theta = theta_s, above them a power law,
/// so the sum of squares has kinks where they equal a measured suction and the driver searches
/// them interval by interval.
pub fn breakpoint_of(kind: ModelKind) -> Option<&'static str> {
    match kind {
        ModelKind::BrooksCorey => Some("h_b_cm"),
        ModelKind::Campbell => Some("h_e_cm"),
        _ => None,
    }
}

/// Fit one retention model to readings (suction in cm, theta in m3/m3).
///
/// Adds the model's breakpoint search and canonical form to [`fit_curve`](super::fit_curve),
/// and marks a result with theta_r not below theta_s as not converged.
///
/// # Errors
/// As [`fit_curve`](super::fit_curve).
pub fn fit_model(
    kind: ModelKind,
    readings: &Readings<'_>,
    options: &FitOptions,
) -> Result<FitReport, FitError> {
    let mut options = options.clone();
    if let Some(b) = breakpoint_of(kind)
        && options.breakpoint.is_none()
    {
        options = options.with_breakpoint(b);
    }
    let canon: fn(&mut [f64]) = match kind {
        ModelKind::Durner => |p| ModelKind::Durner.canonicalize(p),
        _ => |_| {},
    };
    let index = |name: &str| kind.params().iter().position(|s| s.name == name);
    let hooks = Hooks {
        canonicalize: Some(canon),
        linear: index("theta_s").map(|s| (index("theta_r"), s)),
        first_guess: match kind {
            ModelKind::VanGenuchten => Some(van_genuchten::first_guess),
            _ => None,
        },
        kernel: (kind == ModelKind::VanGenuchten).then_some(projection::Kernel::VanGenuchten),
    };
    let mut report = fit_curve_with(kind.curve(), kind.id(), readings, &options, &hooks)?;
    if let Err(e) = kind.check_params(&report.values()) {
        report.converged = false;
        let note = format!("not converged: {e}");
        report.message = Some(match report.message.take() {
            Some(m) => format!("{note}; {m}"),
            None => note,
        });
    }
    Ok(report)
}

/// One model's place in an `auto` ranking.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RankedFit {
    /// The fit.
    pub report: FitReport,
    /// AICc minus the best AICc (0 for the best).
    pub delta_aicc: f64,
    /// Akaike weight exp(-delta/2) / sum over the ranked models.
    pub akaike_weight: f64,
}

/// A model `auto` did not rank, and why.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct SkippedModel {
    /// Model identifier.
    pub model: String,
    /// Why: too few readings, an error, or a fit that did not converge.
    pub reason: String,
}

/// The outcome of `auto` for one set of readings.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AutoFit {
    /// Converged fits, best (lowest AICc) first.
    pub ranked: Vec<RankedFit>,
    /// Models not ranked, in the order tried.
    pub skipped: Vec<SkippedModel>,
    /// The best model's report when no model could be ranked but some fit was made (for display).
    pub fallback: Option<FitReport>,
}

impl AutoFit {
    /// The AICc-best fit, if any model could be ranked.
    pub fn best(&self) -> Option<&FitReport> {
        self.ranked.first().map(|r| &r.report)
    }
}

/// Fit every model in `kinds` that the readings allow (more readings than free parameters + 2,
/// so AICc, which counts the error variance too, exists) and rank the converged fits by AICc.
///
/// Fixed values in `options` apply to the models that have those parameters.
pub fn fit_auto(kinds: &[ModelKind], readings: &Readings<'_>, options: &FitOptions) -> AutoFit {
    let options = options.clone().with_lenient_names(true);
    let n = readings.x.len();
    let mut fits = Vec::new();
    let mut skipped = Vec::new();
    let mut fallback: Option<FitReport> = None;
    for &kind in kinds {
        let free = kind
            .params()
            .iter()
            .filter(|s| !options.fixed.iter().any(|(name, _)| name == s.name))
            .count();
        if n < min_points_for_aicc(free) {
            skipped.push(SkippedModel {
                model: kind.id().to_string(),
                reason: format!(
                    "{n} readings for {free} free parameters: auto needs at least {}",
                    min_points_for_aicc(free)
                ),
            });
            continue;
        }
        match fit_model(kind, readings, &options) {
            Ok(r) if r.converged && r.aicc.is_some() => fits.push(r),
            Ok(r) => {
                skipped.push(SkippedModel {
                    model: kind.id().to_string(),
                    reason: r
                        .message
                        .clone()
                        .unwrap_or_else(|| "no AICc (zero residuals)".to_string()),
                });
                if fallback.as_ref().is_none_or(|f| r.sse < f.sse) {
                    fallback = Some(r);
                }
            }
            Err(e) => skipped.push(SkippedModel {
                model: kind.id().to_string(),
                reason: e.to_string(),
            }),
        }
    }
    fits.sort_by(|a, b| {
        a.aicc
            .unwrap_or(f64::INFINITY)
            .total_cmp(&b.aicc.unwrap_or(f64::INFINITY))
    });
    let best = fits.first().and_then(|r| r.aicc).unwrap_or(0.0);
    let deltas: Vec<f64> = fits
        .iter()
        .map(|r| r.aicc.unwrap_or(f64::INFINITY) - best)
        .collect();
    let total: f64 = deltas.iter().map(|d| (-0.5 * d).exp()).sum();
    let ranked = fits
        .into_iter()
        .zip(deltas)
        .map(|(report, delta)| RankedFit {
            report,
            delta_aicc: delta,
            akaike_weight: (-0.5 * delta).exp() / total,
        })
        .collect();
    AutoFit {
        ranked,
        skipped,
        fallback,
    }
}
