//! Retention and measured conductivity fitted together.
//!
//! The retention parameters, the saturated conductivity Ks and Mualem's pore-connectivity
//! exponent L are estimated from both data sets at once: water-content residuals theta(h) -
//! theta_obs (m3/m3) and conductivity residuals log10 K - log10 K_obs. Both go through the
//! one Levenberg-Marquardt driver ([`fit_curve_with`]) as a single [`CurveModel`]
//! ([`JointCurve`]) whose x is the index of a measurement; its values and analytic gradients
//! come from the retention model and the closed-form Mualem conductivity
//! ([`ConductivityModel::relative`], [`conductivity_gradient`]).
//!
//! The two sets are weighted by their own noise: each residual divided by its set's
//! standard deviation, estimated from the fit and refitted until the estimates stop moving
//! (each set's share of the degrees of freedom in proportion to its readings), or by a
//! weight the user gives the conductivity set. The report keeps both SSEs, statistics per
//! set and jointly, and the standard errors and covariance of every parameter (s^2 (J'WJ)^-1
//! over the weighted residuals).

use std::f64::consts::LN_10;

use serde::{Deserialize, Serialize};

use super::config::{Domain, FitOptions};
use super::driver::{Canonical, Hooks, Readings, fit_curve_with};
use super::error::FitError;
use super::models::fit_model;
use super::report::{FitReport, ParamMatrix};
use crate::model::conductivity::{ConductivityModel, DEFAULT_PORE_CONNECTIVITY};
use crate::model::curve::{CurveModel, ParamSpec};
use crate::model::derived::gradient::conductivity_gradient;
use crate::model::retention::ModelKind;

/// The saturated conductivity parameter: cm/day, from 1e-6 (a tight clay liner) to 1e7
/// (open gravel), wide enough for any soil core (common practice).
pub const KS_SPEC: ParamSpec = ParamSpec {
    name: "ks_cm_per_day",
    unit: "cm/day",
    lower: 1e-6,
    upper: 1e7,
};

/// Mualem's pore-connectivity exponent L. Fitted values of soils are mostly negative to
/// small positive (from memory: reviews of fitted L report most values between about -8 and
/// 3); -10 to 10 leaves room on both sides.
pub const PORE_CONNECTIVITY_SPEC: ParamSpec = ParamSpec {
    name: "pore_connectivity",
    unit: "-",
    lower: -10.0,
    upper: 10.0,
};

/// Fewest conductivity readings for which L is estimated by default (Ks and L take two, and
/// one is left to judge the fit); with fewer it is held at Mualem's 0.5.
pub const MIN_K_POINTS_FOR_FREE_L: usize = 3;

/// Noise estimates below these are taken as these (m3/m3, log10 units), so that noise-free
/// data do not give infinite weights.
const SIGMA_THETA_FLOOR: f64 = 1e-7;
const SIGMA_LOG_K_FLOOR: f64 = 1e-7;
/// The first noise estimate of log10 K before any joint fit (a factor of 1.6).
const FIRST_SIGMA_LOG_K: f64 = 0.2;
/// The weights are consistent when no set's standard deviation moves more than this
/// (relative) from one refit to the next.
const CONSISTENT: f64 = 1e-6;
/// Refits at most, when the weights keep moving.
const MAX_REFITS: usize = 30;

/// Why a joint fit could not be made.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum JointError {
    /// The input cannot be fitted jointly; the message says why.
    #[error("{0}")]
    Input(String),
    /// The retention start or the joint fit itself failed.
    #[error(transparent)]
    Fit(#[from] FitError),
}

/// Where a conductivity was measured.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum KPoint {
    /// At a suction, cm: K(h).
    Suction(f64),
    /// At a volumetric water content, m3/m3: K(theta).
    Water(f64),
}

/// The measurements of one joint fit.
#[derive(Debug, Clone, Copy)]
pub struct JointData<'a> {
    /// Retention suctions, cm.
    pub h_cm: &'a [f64],
    /// Retention water contents, m3/m3.
    pub theta: &'a [f64],
    /// Optional weight per retention reading (relative, within the set).
    pub theta_weights: Option<&'a [f64]>,
    /// Where each conductivity was measured.
    pub k_at: &'a [KPoint],
    /// Measured conductivity, cm/day (positive).
    pub k_cm_per_day: &'a [f64],
}

/// How the two data sets are weighted against each other.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case", tag = "kind")]
pub enum Weighting {
    /// Each set's residuals divided by its own estimated standard deviation, iterated until
    /// the estimates are consistent with the fit.
    Estimated,
    /// Water-content residuals as they are (m3/m3) and log10 K residuals times sqrt(w).
    User {
        /// The weight of the conductivity set.
        weight: f64,
    },
}

/// What to fit and how.
#[derive(Debug, Clone, PartialEq)]
pub struct JointOptions {
    /// The retention model (one with a Mualem conductivity form).
    pub kind: ModelKind,
    /// Retention parameters held fixed (by name).
    pub fixed: Vec<(String, f64)>,
    /// Ks held at this value (cm/day), e.g. the core's measured Ks; free when `None`.
    pub ks_cm_per_day: Option<f64>,
    /// L held at this value; `None`: free when there are [`MIN_K_POINTS_FOR_FREE_L`]
    /// conductivity readings or more, else held at 0.5.
    pub pore_connectivity: Option<f64>,
    /// How the sets are weighted.
    pub weighting: Weighting,
}

impl JointOptions {
    /// Defaults for a model: nothing fixed, estimated weights.
    pub fn new(kind: ModelKind) -> Self {
        Self {
            kind,
            fixed: Vec::new(),
            ks_cm_per_day: None,
            pore_connectivity: None,
            weighting: Weighting::Estimated,
        }
    }
}

/// The Mualem conductivity model a retention model is fitted with jointly; `None` for the
/// models without one (Fredlund-Xing: no closed form; Campbell: its own exponent, no L).
pub fn joint_conductivity_model(kind: ModelKind) -> Option<ConductivityModel> {
    match kind {
        ModelKind::VanGenuchten => Some(ConductivityModel::MualemVanGenuchten),
        ModelKind::VanGenuchtenFreeM => Some(ConductivityModel::MualemVanGenuchtenFreeM),
        ModelKind::BrooksCorey => Some(ConductivityModel::MualemBrooksCorey),
        ModelKind::Kosugi => Some(ConductivityModel::MualemKosugi),
        ModelKind::Durner => Some(ConductivityModel::MualemDurner),
        ModelKind::Campbell | ModelKind::FredlundXing => None,
    }
}

/// Statistics of one data set at the joint solution, unweighted, in the set's own unit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SetStatistics {
    /// Readings.
    pub n: usize,
    /// Sum of squared residuals (m3/m3 squared, or log10 K squared).
    pub sse: f64,
    /// sqrt(SSE / n).
    pub rmse: f64,
    /// 1 - SSE / SST; `None` when the set does not vary.
    pub r2: Option<f64>,
    /// The standard deviation the set was weighted by (estimated weighting), in its unit.
    pub sigma: Option<f64>,
    /// Residual per reading, in input order.
    pub residuals: Vec<f64>,
}

/// A joint fit: the driver's report over every parameter, and what each set contributes.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct JointReport {
    /// The retention model.
    pub kind: ModelKind,
    /// The conductivity model fitted with it.
    pub conductivity_model: ConductivityModel,
    /// The fit over the weighted residuals of both sets: every parameter (retention, then
    /// `ks_cm_per_day` and `pore_connectivity`) with its standard error, the covariance, and
    /// the joint statistics (weighted SSE, s, AICc over both sets). Its readings are indexed
    /// retention first, then conductivity.
    pub fit: FitReport,
    /// The weighting used.
    pub weighting: Weighting,
    /// Refits made to make the estimated weights consistent (1 for a user weight).
    pub refits: usize,
    /// Whether the estimated weights reached consistency within the refits allowed.
    pub weights_consistent: bool,
    /// Water-content residuals, m3/m3.
    pub retention: SetStatistics,
    /// log10 K residuals (K in cm/day).
    pub conductivity: SetStatistics,
    /// What the fit says about its choices (weights, L held, measured Ks).
    pub notes: Vec<String>,
}

impl JointReport {
    /// The retention parameters, in the model's order.
    pub fn retention_values(&self) -> Vec<f64> {
        let n = self.kind.params().len();
        self.fit.values()[..n].to_vec()
    }

    /// Ks, cm/day.
    pub fn ks(&self) -> f64 {
        self.fit.values()[self.kind.params().len()]
    }

    /// L.
    pub fn pore_connectivity(&self) -> f64 {
        self.fit.values()[self.kind.params().len() + 1]
    }

    /// K(h), cm/day, of the fitted curve.
    pub fn conductivity_at(&self, h_cm: f64) -> Option<f64> {
        self.conductivity_model.conductivity(
            h_cm,
            &self.retention_values(),
            self.ks(),
            self.pore_connectivity(),
        )
    }
}

/// Retention and log10 conductivity as one curve over the index of a measurement: x = i for
/// retention reading i, x = n_theta + j for conductivity reading j.
pub struct JointCurve<'a> {
    kind: ModelKind,
    k_model: ConductivityModel,
    params: Vec<ParamSpec>,
    h_cm: &'a [f64],
    k_at: &'a [KPoint],
    starts: Vec<Vec<f64>>,
}

impl<'a> JointCurve<'a> {
    /// The joint curve of a model over these measurements, with its starting points.
    pub fn new(
        kind: ModelKind,
        k_model: ConductivityModel,
        h_cm: &'a [f64],
        k_at: &'a [KPoint],
        starts: Vec<Vec<f64>>,
    ) -> Self {
        let mut params = kind.params().to_vec();
        params.push(KS_SPEC);
        params.push(PORE_CONNECTIVITY_SPEC);
        Self {
            kind,
            k_model,
            params,
            h_cm,
            k_at,
            starts,
        }
    }

    fn n_ret(&self) -> usize {
        self.kind.params().len()
    }

    /// The measurement an x stands for.
    fn index(&self, x: f64) -> Option<Measurement> {
        if !(x >= 0.0 && x.fract() == 0.0) {
            return None;
        }
        let i = x as usize;
        if i < self.h_cm.len() {
            return Some(Measurement::Theta(self.h_cm[i]));
        }
        self.k_at
            .get(i - self.h_cm.len())
            .map(|&k| Measurement::LogK(k))
    }

    /// The suction of a conductivity reading under parameters `p`.
    fn suction_of(&self, at: KPoint, p: &[f64]) -> Option<f64> {
        match at {
            KPoint::Suction(h) => Some(h),
            KPoint::Water(theta) => self.kind.retention().suction_at(theta, p),
        }
    }

    /// log10 K at suction h with retention parameters p, Ks and L.
    fn log_k(&self, h: f64, p: &[f64], ks: f64, l: f64) -> f64 {
        match self.k_model.relative(h, p, l) {
            Some(kr) if kr > 0.0 && ks > 0.0 => (ks * kr).log10(),
            _ => f64::NAN,
        }
    }
}

/// What one x of a [`JointCurve`] measures.
#[derive(Debug, Clone, Copy)]
enum Measurement {
    Theta(f64),
    LogK(KPoint),
}

impl CurveModel for JointCurve<'_> {
    fn params(&self) -> &[ParamSpec] {
        &self.params
    }

    fn value(&self, x: f64, p: &[f64]) -> f64 {
        let nr = self.n_ret();
        let (ret, ks, l) = (&p[..nr], p[nr], p[nr + 1]);
        match self.index(x) {
            Some(Measurement::Theta(h)) => self.kind.curve().value(h, ret),
            Some(Measurement::LogK(at)) => match self.suction_of(at, ret) {
                Some(h) => self.log_k(h, ret, ks, l),
                None => f64::NAN,
            },
            None => f64::NAN,
        }
    }

    fn value_and_gradient(&self, x: f64, p: &[f64], grad: &mut [f64]) -> f64 {
        let nr = self.n_ret();
        let (ret, ks, l) = (&p[..nr], p[nr], p[nr + 1]);
        grad.fill(0.0);
        match self.index(x) {
            Some(Measurement::Theta(h)) => {
                self.kind
                    .curve()
                    .value_and_gradient(h, ret, &mut grad[..nr])
            }
            Some(Measurement::LogK(at)) => {
                let Some(h) = self.suction_of(at, ret) else {
                    return f64::NAN;
                };
                let value = self.log_k(h, ret, ks, l);
                if !value.is_finite() {
                    return f64::NAN;
                }
                let kr = 10f64.powf(value) / ks;
                // d log10 K / dp at fixed h = (dKr/dp) / (Kr ln 10).
                let Some(dkr) = conductivity_gradient(self.k_model, h, ret, 1.0, l) else {
                    return f64::NAN;
                };
                for (g, d) in grad[..nr].iter_mut().zip(&dkr) {
                    *g = d / (kr * LN_10);
                }
                grad[nr] = 1.0 / (ks * LN_10);
                // Every Mualem form is Se^L times a factor free of L.
                let se = self.kind.retention().effective_saturation(h, ret);
                grad[nr + 1] = if se > 0.0 { se.log10() } else { 0.0 };
                if let KPoint::Water(_) = at {
                    // h moves with the parameters: theta(h(p), p) = theta_obs, so
                    // dh/dp = (d theta / dp) / C(h), C = -d theta / dh.
                    let capacity = self.kind.retention().capacity(h, ret).unwrap_or(0.0);
                    if h > 0.0 && capacity > 0.0 {
                        let step = 1e-5 * h;
                        let slope = (self.log_k(h + step, ret, ks, l)
                            - self.log_k(h - step, ret, ks, l))
                            / (2.0 * step);
                        let mut dtheta = vec![0.0; nr];
                        self.kind.curve().value_and_gradient(h, ret, &mut dtheta);
                        for (g, dt) in grad[..nr].iter_mut().zip(&dtheta) {
                            *g += slope * dt / capacity;
                        }
                    }
                }
                value
            }
            None => f64::NAN,
        }
    }

    fn initial_guesses(&self, _x: &[f64], _y: &[f64]) -> Vec<Vec<f64>> {
        self.starts.clone()
    }
}

/// Ks and L from the retention parameters by linear least squares in log10 K:
/// log10 K_j = log10 Ks + L log10 Se_j + log10 (Kr_j at L = 0). Either may be held.
fn ks_and_l_start(
    curve: &JointCurve<'_>,
    ret: &[f64],
    log_k: &[f64],
    ks_fixed: Option<f64>,
    l_fixed: Option<f64>,
) -> (f64, f64) {
    let mut rows = Vec::new();
    for (&at, &y) in curve.k_at.iter().zip(log_k) {
        let Some(h) = curve.suction_of(at, ret) else {
            continue;
        };
        let base = curve.log_k(h, ret, 1.0, 0.0);
        let se = curve.kind.retention().effective_saturation(h, ret);
        if base.is_finite() && se > 0.0 {
            rows.push((se.log10(), y - base));
        }
    }
    let clamp_l = |l: f64| {
        l.clamp(
            PORE_CONNECTIVITY_SPEC.lower + 0.5,
            PORE_CONNECTIVITY_SPEC.upper - 0.5,
        )
    };
    let clamp_ks = |ks: f64| ks.clamp(KS_SPEC.lower * 10.0, KS_SPEC.upper / 10.0);
    let mean = |v: &mut dyn Iterator<Item = f64>| {
        let (s, n) = v.fold((0.0, 0.0), |(s, n), x| (s + x, n + 1.0));
        (n > 0.0).then(|| s / n)
    };
    match (ks_fixed, l_fixed) {
        (Some(ks), Some(l)) => (ks, l),
        (Some(ks), None) => {
            // L = sum x (y - log Ks) / sum x^2.
            let (sxy, sxx) = rows.iter().fold((0.0, 0.0), |(a, b), &(x, y)| {
                (a + x * (y - ks.log10()), b + x * x)
            });
            let l = if sxx > 0.0 {
                sxy / sxx
            } else {
                DEFAULT_PORE_CONNECTIVITY
            };
            (ks, clamp_l(l))
        }
        (None, Some(l)) => {
            let c = mean(&mut rows.iter().map(|&(x, y)| y - l * x)).unwrap_or(0.0);
            (clamp_ks(10f64.powf(c)), l)
        }
        (None, None) => {
            let n = rows.len() as f64;
            let mx = mean(&mut rows.iter().map(|r| r.0));
            let my = mean(&mut rows.iter().map(|r| r.1));
            let (Some(mx), Some(my)) = (mx, my) else {
                return (1.0, DEFAULT_PORE_CONNECTIVITY);
            };
            let sxx: f64 = rows.iter().map(|r| (r.0 - mx).powi(2)).sum();
            let sxy: f64 = rows.iter().map(|r| (r.0 - mx) * (r.1 - my)).sum();
            let l = if n >= 2.0 && sxx > 1e-12 {
                clamp_l(sxy / sxx)
            } else {
                DEFAULT_PORE_CONNECTIVITY
            };
            (clamp_ks(10f64.powf(my - l * mx)), l)
        }
    }
}

/// Durner's modes in the usual order (as [`fit_model`] keeps them).
fn canonical_of(kind: ModelKind) -> Option<Canonical> {
    (kind == ModelKind::Durner).then_some(Canonical {
        out_of_order: |p| p[3] < p[5],
        swap: &[(3, 5), (4, 6)],
        complement: &[2],
        note: "modes out of the usual order (alpha1_per_cm below alpha2_per_cm)",
    })
}

/// Per-set statistics of residuals `r` against observations `y`.
fn set_statistics(r: Vec<f64>, y: &[f64], sigma: Option<f64>) -> SetStatistics {
    let n = r.len();
    let sse: f64 = r.iter().map(|v| v * v).sum();
    let mean = y.iter().sum::<f64>() / n.max(1) as f64;
    let sst: f64 = y.iter().map(|v| (v - mean).powi(2)).sum();
    SetStatistics {
        n,
        sse,
        rmse: (sse / n.max(1) as f64).sqrt(),
        r2: (sst > 0.0).then(|| 1.0 - sse / sst),
        sigma,
        residuals: r,
    }
}

/// Fit the retention and conductivity data of one sample together.
///
/// The retention model is first fitted alone (with its global search) for a start; Ks and L
/// start from a linear least-squares fit of log10 K on that curve. With estimated weights
/// the fit is repeated, each time from the previous solution, until the two sets' standard
/// deviations agree with the residuals they weight.
///
/// # Errors
/// [`JointError`] for data that cannot be fitted (too few readings, a model without a Mualem
/// form, a non-positive or non-finite K, a bad user weight) or a retention start that fails.
#[allow(clippy::too_many_lines)] // one procedure: start, weights, refits, statistics
pub fn fit_joint(data: &JointData<'_>, options: &JointOptions) -> Result<JointReport, JointError> {
    let kind = options.kind;
    let k_model = joint_conductivity_model(kind).ok_or_else(|| {
        JointError::Input(format!(
            "{} has no Mualem conductivity form to fit with measured conductivity (the joint \
             fit takes van Genuchten, van Genuchten with free m, Brooks-Corey, Kosugi and \
             Durner)",
            kind.display_name()
        ))
    })?;
    let n_theta = data.h_cm.len();
    let n_k = data.k_at.len();
    if data.k_cm_per_day.len() != n_k || data.theta.len() != n_theta {
        return Err(JointError::Input(
            "measurement lists of different lengths".to_string(),
        ));
    }
    if n_k == 0 {
        return Err(JointError::Input(
            "no conductivity readings: a joint fit needs measured K".to_string(),
        ));
    }
    if let Some((j, k)) = data
        .k_cm_per_day
        .iter()
        .enumerate()
        .find(|(_, k)| !(k.is_finite() && **k > 0.0))
    {
        return Err(JointError::Input(format!(
            "conductivity reading {} is {k} cm/day: expected a finite K above 0",
            j + 1
        )));
    }
    if let Weighting::User { weight } = options.weighting
        && !(weight.is_finite() && weight > 0.0)
    {
        return Err(JointError::Input(format!(
            "conductivity weight {weight}: expected a finite number above 0"
        )));
    }
    let mut notes = Vec::new();
    // The retention-only start.
    let mut ret_options = FitOptions::new();
    for (name, v) in &options.fixed {
        ret_options = ret_options.with_fixed(name, *v);
    }
    let mut readings = Readings::new(data.h_cm, data.theta);
    if let Some(w) = data.theta_weights {
        readings = readings.with_weights(w);
    }
    let retention_only = fit_model(kind, &readings, &ret_options)?;
    let ret0 = retention_only.values();
    let log_k: Vec<f64> = data.k_cm_per_day.iter().map(|k| k.log10()).collect();
    let l_fixed = match options.pore_connectivity {
        Some(l) => Some(l),
        None if n_k < MIN_K_POINTS_FOR_FREE_L => {
            notes.push(format!(
                "L held at {DEFAULT_PORE_CONNECTIVITY} (Mualem 1976): {n_k} conductivity \
                 reading{} (L is estimated from {MIN_K_POINTS_FOR_FREE_L})",
                if n_k == 1 { "" } else { "s" }
            ));
            Some(DEFAULT_PORE_CONNECTIVITY)
        }
        None => None,
    };
    if let Some(ks) = options.ks_cm_per_day {
        notes.push(format!(
            "Ks held at {} cm/day",
            crate::model::number::significant(ks, 6).unwrap_or_default()
        ));
    }
    let probe = JointCurve::new(kind, k_model, data.h_cm, data.k_at, Vec::new());
    let (ks0, l0) = ks_and_l_start(&probe, &ret0, &log_k, options.ks_cm_per_day, l_fixed);
    let mut start = ret0.clone();
    start.extend([ks0, l0]);
    let mut second = ret0;
    second.extend([
        options.ks_cm_per_day.unwrap_or(ks0),
        l_fixed.unwrap_or(DEFAULT_PORE_CONNECTIVITY),
    ]);
    let mut starts = vec![start, second];

    let mut fit_options = FitOptions::new().with_domain(Domain::Any);
    for (name, v) in &options.fixed {
        fit_options = fit_options.with_fixed(name, *v);
    }
    if let Some(ks) = options.ks_cm_per_day {
        fit_options = fit_options.with_fixed(KS_SPEC.name, ks);
    }
    if let Some(l) = l_fixed {
        fit_options = fit_options.with_fixed(PORE_CONNECTIVITY_SPEC.name, l);
    }
    let x: Vec<f64> = (0..n_theta + n_k).map(|i| i as f64).collect();
    let mut y: Vec<f64> = data.theta.to_vec();
    y.extend(&log_k);
    let hooks = Hooks {
        canonicalize: canonical_of(kind),
        ..Hooks::default()
    };
    let theta_w = |i: usize| data.theta_weights.map_or(1.0, |w| w[i]);
    let (mut sigma_theta, mut sigma_k) = match options.weighting {
        Weighting::Estimated => (
            retention_only
                .residual_sd
                .unwrap_or(0.01)
                .max(SIGMA_THETA_FLOOR),
            FIRST_SIGMA_LOG_K,
        ),
        Weighting::User { weight } => (1.0, 1.0 / weight.sqrt()),
    };
    let mut refits = 0;
    let mut consistent = matches!(options.weighting, Weighting::User { .. });
    let report = loop {
        let weights: Vec<f64> = (0..n_theta)
            .map(|i| theta_w(i) / (sigma_theta * sigma_theta))
            .chain((0..n_k).map(|_| 1.0 / (sigma_k * sigma_k)))
            .collect();
        let curve = JointCurve::new(kind, k_model, data.h_cm, data.k_at, starts.clone());
        let r = Readings::new(&x, &y).with_weights(&weights);
        let report = fit_curve_with(&curve, kind.id(), &r, &fit_options, &hooks)?;
        refits += 1;
        if matches!(options.weighting, Weighting::User { .. }) {
            break report;
        }
        // Each set's share of the degrees of freedom in proportion to its readings.
        let n = (n_theta + n_k) as f64;
        let k = report.n_free_params as f64;
        let share = |m: usize| (m as f64 * (1.0 - k / n)).max(1.0);
        let p = report.values();
        let sse_theta: f64 = (0..n_theta)
            .map(|i| theta_w(i) * (curve.value(i as f64, &p) - y[i]).powi(2))
            .sum();
        let sse_k: f64 = (0..n_k)
            .map(|j| (curve.value((n_theta + j) as f64, &p) - y[n_theta + j]).powi(2))
            .sum();
        let new_theta = (sse_theta / share(n_theta)).sqrt().max(SIGMA_THETA_FLOOR);
        let new_k = (sse_k / share(n_k)).sqrt().max(SIGMA_LOG_K_FLOOR);
        let moved =
            ((new_theta - sigma_theta).abs() / sigma_theta).max((new_k - sigma_k).abs() / sigma_k);
        sigma_theta = new_theta;
        sigma_k = new_k;
        starts = vec![p];
        if moved <= CONSISTENT {
            consistent = true;
            break report;
        }
        if refits >= MAX_REFITS {
            break report;
        }
    };
    // The statistics per set, from the kept solution.
    let curve = JointCurve::new(kind, k_model, data.h_cm, data.k_at, Vec::new());
    let p = report.values();
    let r_theta: Vec<f64> = (0..n_theta)
        .map(|i| curve.value(i as f64, &p) - y[i])
        .collect();
    let r_k: Vec<f64> = (0..n_k)
        .map(|j| curve.value((n_theta + j) as f64, &p) - y[n_theta + j])
        .collect();
    let estimated = matches!(options.weighting, Weighting::Estimated);
    match options.weighting {
        Weighting::Estimated => notes.push(format!(
            "each set weighted by its own noise, estimated from the fit: sd {} m3/m3 for \
             theta and {} for log10 K ({}{} refits)",
            crate::model::number::significant(sigma_theta, 3).unwrap_or_default(),
            crate::model::number::significant(sigma_k, 3).unwrap_or_default(),
            if consistent {
                "consistent after "
            } else {
                "not consistent after "
            },
            refits
        )),
        Weighting::User { weight } => notes.push(format!(
            "log10 K residuals weighted {} against theta residuals in m3/m3 (user weight)",
            crate::model::number::significant(weight, 6).unwrap_or_default()
        )),
    }
    Ok(JointReport {
        kind,
        conductivity_model: k_model,
        weighting: options.weighting,
        refits,
        weights_consistent: consistent,
        retention: set_statistics(r_theta, data.theta, estimated.then_some(sigma_theta)),
        conductivity: set_statistics(r_k, &log_k, estimated.then_some(sigma_k)),
        fit: report,
        notes,
    })
}

impl JointReport {
    /// The joint fit seen as a retention fit, for everything that reads retention fits
    /// (derived values and their intervals, bands, listings, the card): the retention
    /// parameters with their joint standard errors, the covariance restricted to them (the
    /// marginal covariance), the water-content statistics of the retention set (unweighted,
    /// m3/m3, with n and k of that set), and the retention readings' diagnostics at their
    /// suctions.
    pub fn retention_view(&self, h_cm: &[f64]) -> FitReport {
        let nr = self.kind.params().len();
        let mut fit = self.fit.clone();
        fit.model = self.kind.id().to_string();
        fit.parameters.truncate(nr);
        let names: Vec<String> = fit.parameters.iter().map(|p| p.name.clone()).collect();
        let restrict = |m: &ParamMatrix| {
            let keep: Vec<usize> = m
                .names
                .iter()
                .enumerate()
                .filter(|(_, n)| names.contains(n))
                .map(|(i, _)| i)
                .collect();
            ParamMatrix {
                names: keep.iter().map(|&i| m.names[i].clone()).collect(),
                rows: keep
                    .iter()
                    .map(|&i| keep.iter().map(|&j| m.rows[i][j]).collect())
                    .collect(),
            }
        };
        fit.covariance = fit.covariance.as_ref().map(restrict);
        fit.correlation = fit.correlation.as_ref().map(restrict);
        let n = self.retention.n;
        let k = fit
            .parameters
            .iter()
            .filter(|p| !p.fixed && p.at_bound.is_none())
            .count();
        fit.n_points = n;
        fit.n_free_params = k;
        fit.sse = self.retention.sse;
        fit.rmse = self.retention.rmse;
        fit.residual_sd = (n > k).then(|| (self.retention.sse / (n - k) as f64).sqrt());
        fit.r2 = self.retention.r2;
        let (aic, aicc, bic) = super::stats::information_criteria(n, k, fit.sse);
        fit.aic = aic;
        fit.aicc = aicc;
        fit.bic = bic;
        fit.n_criteria_params = super::stats::criteria_parameters(k);
        fit.readings.truncate(n);
        for (r, &h) in fit.readings.iter_mut().zip(h_cm) {
            r.x = h;
        }
        let mut notes = vec![format!(
            "fitted with {} measured conductivit{} ({})",
            self.conductivity.n,
            if self.conductivity.n == 1 { "y" } else { "ies" },
            self.conductivity_model.display_name()
        )];
        notes.extend(self.notes.iter().cloned());
        if let Some(m) = &self.fit.message {
            notes.push(m.clone());
        }
        fit.message = Some(notes.join("; "));
        fit
    }
}

impl JointReport {
    /// K(h), cm/day, with its 95 % delta-method interval over every parameter of the joint
    /// fit (Ks and L included), formed on the log scale with t(0.975, n - k) of the joint fit.
    /// The interval is `None` when the fit has no covariance.
    pub fn conductivity_interval(
        &self,
        h_cm: f64,
    ) -> Option<(f64, Option<super::delta::Interval95>)> {
        let p = self.retention_values();
        let (ks, l) = (self.ks(), self.pore_connectivity());
        let k = self.conductivity_model.conductivity(h_cm, &p, ks, l)?;
        let Some(cov) = self.fit.covariance.as_ref() else {
            return Some((k, None));
        };
        let mut grad = conductivity_gradient(self.conductivity_model, h_cm, &p, ks, l)?;
        grad.push(k / ks);
        let se = self.kind.retention().effective_saturation(h_cm, &p);
        grad.push(if se > 0.0 { k * se.ln() } else { 0.0 });
        let names: Vec<&str> = self
            .fit
            .parameters
            .iter()
            .map(|e| e.name.as_str())
            .collect();
        let mut variance = 0.0;
        for (a, ga) in names.iter().zip(&grad) {
            for (b, gb) in names.iter().zip(&grad) {
                if let Some(c) = cov.get(a, b) {
                    variance += ga * c * gb;
                }
            }
        }
        if !(variance.is_finite() && variance >= 0.0 && k > 0.0) {
            return Some((k, None));
        }
        let sd = variance.sqrt();
        let dof = self.fit.n_points.saturating_sub(self.fit.n_free_params);
        if dof == 0 {
            return Some((k, None));
        }
        let Some(t) = super::stats::t975(dof) else {
            return Some((k, None));
        };
        let half = t * sd / k;
        Some((
            k,
            Some(super::delta::Interval95 {
                lo95: k * (-half).exp(),
                hi95: k * half.exp(),
                se: sd,
                scale: super::report::IntervalScale::Log,
                method: super::delta::IntervalMethod::DeltaMethod,
                note: Some("over every parameter of the joint fit, Ks and L included".to_string()),
            }),
        ))
    }
}
