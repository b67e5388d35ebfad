//! The result of one fit: estimates, statistics and per-reading diagnostics.
//!
//! Everything is computed from the Jacobian in the physical (original) parameters at the
//! optimum. A value that does not apply (no degrees of freedom, a singular Jacobian, a
//! parameter on a bound) is `None`, which serialises as JSON `null`; no field is ever NaN.

use serde::{Deserialize, Serialize};

pub use super::transform::Side;

/// Why the solver run that was kept stopped.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Termination {
    /// The relative change of the sum of squares or of the step fell below the tolerance.
    Converged,
    /// The residuals are orthogonal to every Jacobian column (gradient test).
    Orthogonal,
    /// The residuals are exactly zero.
    ResidualsZero,
    /// No further progress is possible in double precision (a tolerance was met at machine epsilon).
    PrecisionLimit,
    /// The evaluation budget ran out.
    MaxEvaluations,
    /// The model produced NaN or infinity along the way.
    Numerical,
    /// A parameter ran off towards an infinite bound.
    Runaway,
}

impl Termination {
    /// True for the stops that leave a (local) optimum: converged, orthogonal, zero, precision.
    pub fn is_optimum(self) -> bool {
        matches!(
            self,
            Termination::Converged
                | Termination::Orthogonal
                | Termination::ResidualsZero
                | Termination::PrecisionLimit
        )
    }
}

impl std::fmt::Display for Termination {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Termination::Converged => "converged",
            Termination::Orthogonal => "converged (gradient)",
            Termination::ResidualsZero => "residuals zero",
            Termination::PrecisionLimit => "at the limit of double precision",
            Termination::MaxEvaluations => "evaluation budget exhausted",
            Termination::Numerical => "NaN or infinity in the model",
            Termination::Runaway => "a parameter ran off to infinity",
        })
    }
}

/// The scale a 95 % interval was formed on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum IntervalScale {
    /// value -+ t se.
    Linear,
    /// exp(ln value -+ t se / value): the Wald interval of ln p (delta method), for positive
    /// scale parameters (suctions and inverse suctions), so it never includes impossible values.
    Log,
}

impl std::fmt::Display for IntervalScale {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            IntervalScale::Linear => "linear scale",
            IntervalScale::Log => "log scale",
        })
    }
}

/// One parameter's estimate.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ParamEstimate {
    /// Identifier (unit in the name), as in the model's parameter list.
    pub name: String,
    /// Display unit.
    pub unit: String,
    /// Estimated (or fixed) value.
    pub value: f64,
    /// Standard error sqrt(Cov_kk); `None` when fixed, on a bound, with no degrees of freedom
    /// or with a singular Jacobian.
    pub se: Option<f64>,
    /// 95 % Wald interval with t(0.975, dof) (Student t), when se is known; on the scale
    /// `ci95_scale` says: value -+ t se, or for positive scale parameters (alpha, h_b, h_e,
    /// h_m, a, h_r) exp(ln value -+ t se / value).
    pub ci95: Option<[f64; 2]>,
    /// The scale of `ci95` (`None` when there is no interval, and in reports stored before
    /// intervals stated their scale, which were all linear).
    #[serde(default)]
    pub ci95_scale: Option<IntervalScale>,
    /// The measured suction (cm) a breakpoint parameter (h_b, h_e) sits on, if it does: the
    /// curve has a kink there, the derivative is one-sided, and `se` and `ci95` are
    /// approximate.
    #[serde(default)]
    pub kink_cm: Option<f64>,
    /// Fixed by the caller (not estimated).
    pub fixed: bool,
    /// The estimate ended on this bound and was refitted held there (active set).
    pub at_bound: Option<Side>,
}

/// A symmetric matrix over named parameters (the free ones off their bounds).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ParamMatrix {
    /// Row and column names.
    pub names: Vec<String>,
    /// Row-major values.
    pub rows: Vec<Vec<f64>>,
}

impl ParamMatrix {
    /// The entry for two named parameters.
    pub fn get(&self, a: &str, b: &str) -> Option<f64> {
        let i = self.names.iter().position(|n| n == a)?;
        let j = self.names.iter().position(|n| n == b)?;
        Some(self.rows[i][j])
    }
}

/// One reading's fit and influence diagnostics.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ReadingFit {
    /// x (suction in cm for retention models).
    pub x: f64,
    /// Observed y (water content).
    pub observed: f64,
    /// Fitted y at x.
    pub fitted: f64,
    /// observed - fitted (unweighted).
    pub residual: f64,
    /// Diagonal of the hat matrix W^1/2 J (J' W J)^-1 J' W^1/2.
    pub leverage: Option<f64>,
    /// e_i / (s sqrt(1 - h_ii)), e_i the weighted residual, s the residual standard deviation.
    pub studentized: Option<f64>,
    /// As `studentized` with s estimated without reading i (externally studentized).
    pub studentized_external: Option<f64>,
    /// Cook's distance: studentized^2 h_ii / (p (1 - h_ii)), p the parameters in the covariance.
    pub cooks_distance: Option<f64>,
}

/// The result of fitting one model to one set of readings.
///
/// With n readings, k free parameters (estimated, bounds included; fixed ones excluded) and
/// SSE = sum w_i (y_i - f_i)^2 (w_i = 1 without weights), the information criteria are from the
/// Gaussian likelihood with its constants dropped. The error variance is estimated too, so
/// they count K = k + 1 parameters (Burnham & Anderson 2002, section 2.2, for least squares):
/// AIC = n ln(SSE/n) + 2K, AICc = AIC + 2K(K+1)/(n-K-1), BIC = n ln(SSE/n) + K ln n. AICc
/// exists when n > K + 1 = k + 2, the rule `auto` uses.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FitReport {
    /// Model identifier (`van-genuchten`, ...).
    pub model: String,
    /// Every parameter of the model, in its order.
    pub parameters: Vec<ParamEstimate>,
    /// Weighted sum of squared residuals.
    pub sse: f64,
    /// sqrt(SSE / n).
    pub rmse: f64,
    /// Residual standard deviation s = sqrt(SSE / (n - k)); `None` when n = k.
    pub residual_sd: Option<f64>,
    /// 1 - SSE / SST with SST = sum w_i (y_i - weighted mean)^2.
    pub r2: Option<f64>,
    /// Akaike information criterion (see the type's documentation).
    pub aic: Option<f64>,
    /// AIC with the small-sample correction; `None` when n <= k + 1 or SSE = 0.
    pub aicc: Option<f64>,
    /// Bayesian (Schwarz) information criterion.
    pub bic: Option<f64>,
    /// Number of readings n.
    pub n_points: usize,
    /// Number of free (estimated) parameters k.
    pub n_free_params: usize,
    /// Parameters counted by AIC, AICc and BIC: K = k + 1 (the error variance is estimated
    /// too). 0 in a report stored before the variance was counted; see [`Self::upgrade_stored`].
    #[serde(default)]
    pub n_criteria_params: usize,
    /// The fit passed every check: the solver stopped at an optimum, the SSE is finite and
    /// no better than a horizontal line is not the result, no parameter ran away.
    pub converged: bool,
    /// Why the fit is not converged, or notes on it (parameters on bounds, singular Jacobian).
    pub message: Option<String>,
    /// Why the kept solver run stopped.
    pub termination: Termination,
    /// Residual evaluations over every run (starts, active set, intervals).
    pub evaluations: usize,
    /// Solver runs made.
    pub runs: usize,
    /// s^2 (J' W J)^-1 over the free parameters off their bounds.
    pub covariance: Option<ParamMatrix>,
    /// Correlations from the covariance.
    pub correlation: Option<ParamMatrix>,
    /// Per reading, in input order.
    pub readings: Vec<ReadingFit>,
    /// The prior of a maximum a posteriori fit (`fit::prior`); `None` for a fit to the
    /// readings alone (absent from reports stored before priors existed).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub prior: Option<super::prior::PriorBasis>,
}

impl FitReport {
    /// The estimate of a named parameter.
    pub fn parameter(&self, name: &str) -> Option<&ParamEstimate> {
        self.parameters.iter().find(|p| p.name == name)
    }

    /// The parameter values in model order.
    pub fn values(&self) -> Vec<f64> {
        self.parameters.iter().map(|p| p.value).collect()
    }

    /// Bring a report stored by an earlier version (`n_criteria_params` 0) to the current
    /// conventions: AIC, AICc and BIC recomputed from n, k and SSE with the error variance
    /// counted; 95 % intervals recomputed from the standard errors, on the log scale for
    /// suctions and inverse suctions (unit `cm` or `1/cm`), with their scale; a breakpoint on
    /// a measured suction marked as a kink. Returns whether anything changed.
    pub fn upgrade_stored(&mut self) -> bool {
        if self.n_criteria_params != 0 {
            return false;
        }
        let (aic, aicc, bic) =
            super::stats::information_criteria(self.n_points, self.n_free_params, self.sse);
        self.aic = aic;
        self.aicc = aicc;
        self.bic = bic;
        self.n_criteria_params = super::stats::criteria_parameters(self.n_free_params);
        let t = super::stats::t975(self.n_points.saturating_sub(self.n_free_params));
        let breakpoint = self
            .model
            .parse()
            .ok()
            .and_then(super::models::breakpoint_of);
        let suctions: Vec<f64> = self.readings.iter().map(|r| r.x).collect();
        let mut notes = Vec::new();
        for p in &mut self.parameters {
            let log = matches!(p.unit.as_str(), "cm" | "1/cm") && p.value > 0.0;
            let interval = super::stats::interval95(p.value, p.se, t, log);
            p.ci95 = interval.map(|i| i.0);
            p.ci95_scale = interval.map(|i| i.1);
            if !p.fixed && breakpoint == Some(p.name.as_str()) {
                p.kink_cm = super::stats::kink_suction(p.value, &suctions);
                if let Some(h) = p.kink_cm {
                    notes.push(super::stats::kink_note(&p.name, h));
                }
            }
        }
        if !notes.is_empty() {
            let mut all: Vec<String> = self.message.take().into_iter().collect();
            all.extend(notes);
            self.message = Some(all.join("; "));
        }
        true
    }
}

#[cfg(test)]
#[allow(clippy::float_cmp)]
mod tests {
    use crate::fit::{FitOptions, Readings, fit_model};
    use crate::model::retention::ModelKind;

    #[test]
    fn reports_stored_by_an_earlier_version_are_upgraded() {
        let h = [0.0, 10.0, 30.0, 100.0, 330.0, 1000.0, 3000.0, 15000.0];
        let y = [0.41, 0.40, 0.36, 0.27, 0.19, 0.14, 0.11, 0.09];
        let report = fit_model(
            ModelKind::VanGenuchten,
            &Readings::new(&h, &y),
            &FitOptions::new(),
        )
        .expect("fits");
        assert_eq!(report.n_criteria_params, report.n_free_params + 1);
        assert!(report.aicc.is_some());
        // The same report as stored before: no n_criteria_params, criteria counting k only,
        // intervals on the original scale without their scale.
        let mut json = serde_json::to_value(&report).expect("encodes");
        let obj = json.as_object_mut().expect("object");
        obj.remove("n_criteria_params");
        for key in ["aic", "aicc", "bic"] {
            obj.insert(key.to_string(), serde_json::json!(-1.0));
        }
        for p in obj["parameters"].as_array_mut().expect("parameters") {
            let p = p.as_object_mut().expect("parameter");
            p.remove("ci95_scale");
            p.remove("kink_cm");
            p.insert("ci95".into(), serde_json::json!([-1.0, 1.0]));
        }
        let mut old: super::FitReport = serde_json::from_value(json).expect("decodes");
        assert_eq!(old.n_criteria_params, 0);
        assert!(old.parameters.iter().all(|p| p.ci95_scale.is_none()));
        assert!(old.upgrade_stored());
        assert_eq!(old, report);
        assert!(!old.upgrade_stored());
    }
}
