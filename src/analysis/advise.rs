//! Which suction to measure next: for each sample with a current fit, the one more lab reading
//! that would shrink the uncertainty of available water (or of the parameters jointly) most,
//! and by how much; over the campaign, the samples where that reading pays most, worst first.
//! `porewise advise` and the fit card's advice line both come from here.
//!
//! The new reading is taken to have weight 1 and the noise of the fit: its own residual
//! standard deviation s = sqrt(SSE / (n - k)) when it has at least [`MIN_OWN_DOF`] degrees of
//! freedom, otherwise the campaign's pooled noise of the methods its readings were measured by
//! ([`method_noise`]). Nothing is refitted: the parameters stay where they are and one row is
//! added to the information matrix ([`crate::fit::design`]). Intervals are 95 % Wald
//! half-widths with Student's t(nu), nu the degrees of freedom of the noise estimate (the fit's
//! n - k, or the pool's), the same t now and after: the difference is what a reading at that
//! suction tells, not the extra degree of freedom any reading would bring (which would narrow
//! every interval by t(nu + 1) / t(nu) whatever the suction).

use std::collections::HashMap;
use std::str::FromStr;

use rusqlite::Connection;
use serde::Serialize;

use crate::fit::FitReport;
use crate::fit::design::{
    Criterion, Information, best_candidate, candidate_effects, information_matrix,
};
use crate::model::derived::available_water_gradient;
use crate::model::domain::SampleKind;
use crate::model::retention::{ModelKind, RetentionCurve};
use crate::model::units::CM_PER_KPA;
use crate::store::fits::{self, FitState, SampleInfo, Selection};
use crate::store::{CampaignSettings, Result, readings};

/// The suction steps labs usually offer, cm (common practice: hanging column or sandbox from
/// 1 to 100 cm, pressure plates at 330 cm = 33 kPa, 1000, 3000 and 5000 cm, and the wilting
/// point plate at 15,300 cm, about 1500 kPa).
pub const DEFAULT_CANDIDATES_CM: [f64; 11] = [
    1.0, 3.0, 10.0, 30.0, 60.0, 100.0, 330.0, 1000.0, 3000.0, 5000.0, 15300.0,
];

/// Fewest degrees of freedom (n - k) for a fit's own residual standard deviation to be used as
/// its noise; with fewer, the pooled campaign noise of its methods.
pub const MIN_OWN_DOF: usize = 3;

/// Fewest pooled degrees of freedom for a method's own pooled noise; with fewer, every
/// method's residuals pooled together.
pub const MIN_POOL_DOF: f64 = 5.0;

/// What the next reading should make more certain.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum AdviceTarget {
    /// Available water theta(FC) - theta(PWP): its delta-method variance, smallest after.
    #[default]
    AvailableWater,
    /// The parameters jointly: det(J'WJ), largest after (D-optimality).
    Parameters,
}

impl AdviceTarget {
    /// The identifier (`available-water`, `parameters`).
    pub fn id(self) -> &'static str {
        match self {
            AdviceTarget::AvailableWater => "available-water",
            AdviceTarget::Parameters => "parameters",
        }
    }
}

impl FromStr for AdviceTarget {
    type Err = String;

    fn from_str(s: &str) -> std::result::Result<Self, String> {
        match s.trim().to_ascii_lowercase().as_str() {
            "available-water" => Ok(AdviceTarget::AvailableWater),
            "parameters" => Ok(AdviceTarget::Parameters),
            other => Err(format!(
                "unknown target {other:?}; expected available-water or parameters"
            )),
        }
    }
}

/// What to advise on and which suctions may be chosen.
#[derive(Debug, Clone, PartialEq)]
pub struct AdviseOptions {
    /// What the reading should make more certain.
    pub target: AdviceTarget,
    /// The suctions a lab can set, cm (0 or more, finite).
    pub candidates_cm: Vec<f64>,
}

impl Default for AdviseOptions {
    fn default() -> Self {
        Self {
            target: AdviceTarget::AvailableWater,
            candidates_cm: DEFAULT_CANDIDATES_CM.to_vec(),
        }
    }
}

/// Where the noise of a sample's next reading comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum NoiseBasis {
    /// The fit's own residual standard deviation.
    Fit,
    /// The campaign's pooled noise of the methods of the sample's readings.
    Pooled,
}

impl NoiseBasis {
    /// A word for tables: `fit` or `pooled`.
    pub fn label(self) -> &'static str {
        match self {
            NoiseBasis::Fit => "fit",
            NoiseBasis::Pooled => "pooled",
        }
    }
}

/// The noise a sample's advice assumes.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NoiseUsed {
    /// Standard deviation of one reading of weight 1, m3/m3.
    pub sd: f64,
    /// Degrees of freedom of the estimate (for Student's t).
    pub dof: usize,
    /// Where it comes from.
    pub basis: NoiseBasis,
}

/// One candidate suction's effect.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct StepEffect {
    /// The suction, cm.
    pub h_cm: f64,
    /// det(J'WJ) after / before: how many times the determinant grows.
    pub det_ratio: f64,
    /// The target's expected 95 % half-width after the reading: available water in m3/m3, or
    /// for the parameters the geometric mean of their relative half-widths in % (see
    /// [`FitAdvice::now`]).
    pub after: f64,
}

/// The advice for one fit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FitAdvice {
    /// Model identifier of the fit.
    pub model: String,
    /// What the advice makes more certain.
    pub target: AdviceTarget,
    /// The noise assumed for the new reading.
    pub noise: NoiseUsed,
    /// Available water of the fit, m3/m3 (with the available-water target).
    pub available_water: Option<f64>,
    /// The target's 95 % half-width now: available water, m3/m3, t(nu) sigma sqrt(g'M^-1 g);
    /// or for the parameters, in %, t(nu) times the geometric mean relative standard error
    /// (det of the covariance scaled by the values, to the power 1/(2k): the k-th root of the
    /// joint region's size, correlations included).
    pub now: f64,
    /// Every candidate, in the order given.
    pub steps: Vec<StepEffect>,
    /// Index of the best candidate in `steps`.
    pub best: usize,
}

impl FitAdvice {
    /// The best candidate.
    pub fn best_step(&self) -> &StepEffect {
        &self.steps[self.best]
    }

    /// How much the best reading takes off the half-width (m3/m3, or % points).
    pub fn gain(&self) -> f64 {
        self.now - self.best_step().after
    }

    /// The share of the half-width the best reading takes off, %.
    pub fn shrink_pct(&self) -> Option<f64> {
        (self.now > 0.0).then(|| 100.0 * self.gain() / self.now)
    }
}

/// The advice for one sample.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SampleAdvice {
    /// The sample.
    #[serde(skip)]
    pub sample: SampleInfo,
    /// Where its fitting stands (a stale fit is advised on, and says so).
    #[serde(skip)]
    pub state: FitState,
    /// The current fit's id.
    pub fit_id: i64,
    /// The advice.
    pub advice: FitAdvice,
}

/// A selected sample that got no advice, and why.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Skipped {
    /// Sample code.
    pub sample: String,
    /// Why.
    pub reason: String,
}

/// The advice over a selection: samples where one more reading pays most first.
#[derive(Debug, Clone, PartialEq)]
pub struct CampaignAdvice {
    /// Advised samples, largest gain first (ties in site, depth and code order).
    pub ranked: Vec<SampleAdvice>,
    /// Selected samples without advice.
    pub skipped: Vec<Skipped>,
}

/// One method's pooled noise.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PooledLevel {
    /// Method (lower case, trimmed; `unspecified` when not recorded).
    pub method: String,
    /// Pooled variance of one reading of weight 1, (m3/m3)^2.
    pub variance: f64,
    /// Pooled degrees of freedom: the sum of 1 - h over its readings.
    pub dof: f64,
    /// Readings behind it.
    pub readings: usize,
}

/// The campaign's noise per method, pooled over the current fits' residuals.
///
/// A reading i of a fit with residual e_i, weight w_i and leverage h_ii has E[w_i e_i^2] =
/// sigma^2 (1 - h_ii), and the 1 - h_ii of a fit sum to its n - k, so sum w e^2 / sum (1 - h)
/// over a method's readings is the pooled residual variance of the fits, split by method (the
/// fit's own s^2 when one fit and one method). It pools residual variances, like each fit's own
/// s^2; the outlier review estimates its noise levels robustly from leave-one-out refits
/// instead, which would cost a refit of every reading.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct MethodNoise {
    /// One level per method, sorted by method.
    pub levels: Vec<PooledLevel>,
    /// Every reading pooled together (`None` without residuals).
    pub all: Option<PooledLevel>,
}

impl MethodNoise {
    /// Pool residuals given as (method, w e^2, 1 - h) triples.
    pub fn from_residuals<'a>(residuals: impl IntoIterator<Item = (&'a str, f64, f64)>) -> Self {
        let mut by: std::collections::BTreeMap<String, (f64, f64, usize)> =
            std::collections::BTreeMap::new();
        let mut all = (0.0, 0.0, 0usize);
        for (method, we2, free) in residuals {
            if !(we2.is_finite() && we2 >= 0.0 && free.is_finite() && free > 0.0) {
                continue;
            }
            let e = by.entry(method.to_string()).or_default();
            e.0 += we2;
            e.1 += free;
            e.2 += 1;
            all.0 += we2;
            all.1 += free;
            all.2 += 1;
        }
        let level = |method: String, (sum, dof, n): (f64, f64, usize)| PooledLevel {
            method,
            variance: sum / dof,
            dof,
            readings: n,
        };
        MethodNoise {
            levels: by.into_iter().map(|(m, v)| level(m, v)).collect(),
            all: (all.2 > 0).then(|| level("all methods".into(), all)),
        }
    }

    /// The level used for readings of `method`: its own with at least [`MIN_POOL_DOF`]
    /// degrees of freedom, else every method's together (also needing [`MIN_POOL_DOF`]).
    pub fn level(&self, method: &str) -> Option<&PooledLevel> {
        let enough = |l: &&PooledLevel| l.dof >= MIN_POOL_DOF && l.variance > 0.0;
        self.levels
            .iter()
            .find(|l| l.method == method)
            .filter(enough)
            .or_else(|| self.all.as_ref().filter(enough))
    }

    /// The noise of a sample whose readings were measured by `methods` (one entry per
    /// reading): the mean of their levels' variances, with the smallest of their degrees of
    /// freedom. `None` when a method has no level.
    pub fn for_readings(&self, methods: &[String]) -> Option<NoiseUsed> {
        if methods.is_empty() {
            return None;
        }
        let mut sum = 0.0;
        let mut dof = f64::INFINITY;
        for m in methods {
            let l = self.level(m)?;
            sum += l.variance;
            dof = dof.min(l.dof);
        }
        let variance = sum / methods.len() as f64;
        (variance > 0.0 && variance.is_finite()).then(|| NoiseUsed {
            sd: variance.sqrt(),
            dof: dof.floor() as usize,
            basis: NoiseBasis::Pooled,
        })
    }
}

/// A reading's method as the noise groups it: trimmed, lower case, `unspecified` when empty
/// (as the outlier review groups them).
pub fn method_key(method: Option<&str>) -> String {
    method
        .map(str::trim)
        .filter(|m| !m.is_empty())
        .unwrap_or("unspecified")
        .to_lowercase()
}

/// What a fit's readings were: weight and method of each, in the report's order.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct FitReadings {
    /// Weight of each reading (1 when it has none).
    pub weights: Vec<f64>,
    /// Method key of each reading ([`method_key`]).
    pub methods: Vec<String>,
}

impl FitReadings {
    /// Look the fit's reading ids up among a sample's stored readings (a reading no longer
    /// there counts with weight 1 and method `unspecified`).
    pub fn of(reading_ids: &[i64], stored: &[readings::StoredReading]) -> Self {
        let by_id: HashMap<i64, &readings::StoredReading> =
            stored.iter().map(|r| (r.id, r)).collect();
        let mut out = FitReadings::default();
        for id in reading_ids {
            let r = by_id.get(id);
            out.weights
                .push(r.and_then(|r| r.reading.weight).unwrap_or(1.0));
            out.methods.push(method_key(
                r.and_then(|r| r.reading.method.as_ref())
                    .map(crate::model::domain::Method::as_str),
            ));
        }
        out
    }
}

/// Whether a fit's own residuals are too few for its noise (then [`advise_fit`] needs the
/// pooled noise).
pub fn needs_pool(report: &FitReport) -> bool {
    let dof = report.n_points.saturating_sub(report.n_free_params);
    dof < MIN_OWN_DOF || !report.residual_sd.is_some_and(|s| s > 0.0 && s.is_finite())
}

/// The indices of the parameters the covariance is over: its names, or without one the
/// parameters neither fixed nor held on a bound.
fn free_indices(report: &FitReport) -> Option<Vec<usize>> {
    match &report.covariance {
        Some(cov) => cov
            .names
            .iter()
            .map(|n| report.parameters.iter().position(|p| &p.name == n))
            .collect(),
        None => Some(
            report
                .parameters
                .iter()
                .enumerate()
                .filter(|(_, p)| !p.fixed && p.at_bound.is_none())
                .map(|(i, _)| i)
                .collect(),
        ),
    }
}

/// The advice for one fit: which of `options.candidates_cm` to measure next, and what each
/// would do. `readings` gives the weight and method of the report's readings; `pool` is needed
/// only when [`needs_pool`] says so.
///
/// # Errors
/// Why there is no advice, in words for a listing: an unknown model, no free parameter, a
/// parameter the readings do not determine, no noise level, no finite candidate.
pub fn advise_fit(
    report: &FitReport,
    readings: &FitReadings,
    settings: &CampaignSettings,
    pool: Option<&MethodNoise>,
    options: &AdviseOptions,
) -> std::result::Result<FitAdvice, String> {
    let kind = ModelKind::from_str(&report.model).map_err(|e| e.to_string())?;
    let p = report.values();
    let curve = RetentionCurve::new(kind, p.clone()).map_err(|e| e.to_string())?;
    let free = free_indices(report).ok_or("its covariance names unknown parameters")?;
    if free.is_empty() {
        return Err("no parameter is estimated (all fixed or on bounds)".into());
    }
    let x: Vec<f64> = report.readings.iter().map(|r| r.x).collect();
    let weights = (readings.weights.len() == x.len()).then_some(&readings.weights[..]);
    let model = kind.curve();
    let info = information_matrix(model, &p, &free, &x, weights)
        .and_then(|m| Information::new(&m))
        .ok_or("its readings do not determine every free parameter")?;
    let noise = if needs_pool(report) {
        pool.and_then(|pool| pool.for_readings(&readings.methods))
            .ok_or("too few readings for its own noise, and no pooled noise for its methods")?
    } else {
        NoiseUsed {
            sd: report.residual_sd.unwrap_or_default(),
            dof: report.n_points - report.n_free_params,
            basis: NoiseBasis::Fit,
        }
    };
    let t = |dof: usize| crate::fit::t975(dof).ok_or("no degrees of freedom for an interval");
    let t = t(noise.dof)?;
    let sd = noise.sd;
    let k = free.len();
    let (g, available_water) = match options.target {
        AdviceTarget::AvailableWater => {
            let full = available_water_gradient(&curve, settings.fc_kpa, settings.pwp_kpa)
                .ok_or("available water has no finite gradient")?;
            let aw = crate::model::derived::derive(&curve, settings.fc_kpa, settings.pwp_kpa)
                .plant_available_water;
            (Some(free.iter().map(|&i| full[i]).collect::<Vec<_>>()), aw)
        }
        AdviceTarget::Parameters => (None, None),
    };
    let effects = candidate_effects(
        model,
        &p,
        &free,
        &info,
        &options.candidates_cm,
        g.as_deref(),
    );
    if effects.is_empty() {
        return Err("no candidate suction gives a finite curve".into());
    }
    let (now, steps, criterion): (f64, Vec<StepEffect>, Criterion) = match options.target {
        AdviceTarget::AvailableWater => {
            let now = t * sd * effects[0].variance_now.unwrap_or_default().sqrt();
            let steps = effects
                .iter()
                .map(|e| StepEffect {
                    h_cm: e.x,
                    det_ratio: e.det_ratio,
                    after: t * sd * e.variance_after.unwrap_or_default().sqrt(),
                })
                .collect();
            (now, steps, Criterion::DerivedVariance)
        }
        AdviceTarget::Parameters => {
            // ln of the geometric mean relative SE: ln sd - (ln det M + sum ln p^2) / (2k).
            let log_values: f64 = free.iter().map(|&i| p[i].abs().ln()).sum();
            if !log_values.is_finite() {
                return Err("a free parameter is 0, so no relative size".into());
            }
            let gm = (sd.ln() - (info.log_det() + 2.0 * log_values) / (2.0 * k as f64)).exp();
            let now = 100.0 * t * gm;
            let steps = effects
                .iter()
                .map(|e| StepEffect {
                    h_cm: e.x,
                    det_ratio: e.det_ratio,
                    after: 100.0 * t * gm * e.det_ratio.powf(-0.5 / k as f64),
                })
                .collect();
            (now, steps, Criterion::D)
        }
    };
    let best = best_candidate(&effects, criterion).ok_or("no candidate could be scored")?;
    if !(now.is_finite() && steps.iter().all(|s| s.after.is_finite())) {
        return Err("the interval is not finite".into());
    }
    Ok(FitAdvice {
        model: report.model.clone(),
        target: options.target,
        noise,
        available_water,
        now,
        steps,
        best,
    })
}

/// The campaign's pooled noise per method from every current fit's residuals (see
/// [`MethodNoise`]); readings with a leverage of 0.99 or more are left out, as the outlier
/// review leaves them out.
///
/// # Errors
/// An SQLite error, or a stored fit that does not decode.
pub fn method_noise(conn: &Connection) -> Result<MethodNoise> {
    let samples = fits::samples(conn, &Selection::all())?;
    let mut residuals: Vec<(String, f64, f64)> = Vec::new();
    for sample in &samples {
        let Some(fit) = fits::current(conn, sample.id)? else {
            continue;
        };
        let Some(report) = &fit.report else { continue };
        let stored = readings::of_sample(conn, sample.id)?;
        let info = FitReadings::of(&fit.reading_ids, &stored);
        for (i, r) in report.readings.iter().enumerate() {
            let Some(h) = r.leverage.filter(|h| *h < 0.99) else {
                continue;
            };
            let w = info.weights.get(i).copied().unwrap_or(1.0);
            let method = info
                .methods
                .get(i)
                .cloned()
                .unwrap_or_else(|| method_key(None));
            residuals.push((method, w * r.residual * r.residual, 1.0 - h));
        }
    }
    Ok(MethodNoise::from_residuals(
        residuals.iter().map(|(m, a, b)| (m.as_str(), *a, *b)),
    ))
}

/// The pooled noise, kept between loads while no fit was recorded (the terminal UI asks for
/// it with each sample whose fit has few degrees of freedom).
#[derive(Debug, Clone, Default)]
pub struct PoolCache {
    /// The newest fit id when the pool was computed; `None` before the first time.
    computed_at: Option<FitGeneration>,
    pool: MethodNoise,
}

/// The newest fit id of a campaign (`None` for a campaign without fits).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct FitGeneration(Option<i64>);

impl PoolCache {
    /// The pooled noise, recomputed when a fit was recorded since the last call.
    ///
    /// # Errors
    /// As [`method_noise`].
    pub fn get(&mut self, conn: &Connection) -> Result<&MethodNoise> {
        let now = FitGeneration(fits::latest_id(conn)?);
        if self.computed_at != Some(now) {
            self.pool = method_noise(conn)?;
            self.computed_at = Some(now);
        }
        Ok(&self.pool)
    }
}

/// The advice for one sample's current fit, reading what it needs from the campaign; `None`
/// for a sample without a current fit (or a fit without a report).
///
/// # Errors
/// An SQLite error or a stored fit that does not decode (the outer error); why there is no
/// advice (the inner one).
pub fn advise_sample(
    conn: &Connection,
    settings: &CampaignSettings,
    fit: &fits::StoredFit,
    stored: &[readings::StoredReading],
    pool: &mut PoolCache,
    options: &AdviseOptions,
) -> Result<Option<std::result::Result<FitAdvice, String>>> {
    let Some(report) = &fit.report else {
        return Ok(None);
    };
    let info = FitReadings::of(&fit.reading_ids, stored);
    let pool = if needs_pool(report) {
        Some(pool.get(conn)?)
    } else {
        None
    };
    Ok(Some(advise_fit(report, &info, settings, pool, options)))
}

/// The advice for every selected lab core with a current fit, largest gain first.
///
/// Field pairings are left out (their readings come from the field loggers, not a lab
/// order); one named in the selection is listed as skipped, and so is every selected lab
/// core without a current fit or without advice.
///
/// # Errors
/// An unknown code in the selection, an SQLite error or a stored fit that does not decode.
pub fn advise(
    conn: &Connection,
    settings: &CampaignSettings,
    selection: &Selection,
    options: &AdviseOptions,
) -> Result<CampaignAdvice> {
    selection.check(conn)?;
    let samples = fits::samples(conn, selection)?;
    let summaries = fits::summaries(conn, &samples)?;
    let mut pool = PoolCache::default();
    let mut ranked = Vec::new();
    let mut skipped = Vec::new();
    for sample in samples {
        let skip = |reason: String| Skipped {
            sample: sample.code.clone(),
            reason,
        };
        if sample.kind == SampleKind::FieldPairing {
            if selection.samples.contains(&sample.code) {
                skipped.push(skip(
                    "a field pairing: its readings come from the field loggers, not a lab order"
                        .into(),
                ));
            }
            continue;
        }
        let state = summaries
            .get(&sample.id)
            .map_or(FitState::None, |s| s.state.clone());
        let Some(fit) = fits::current(conn, sample.id)? else {
            skipped.push(skip(match &state {
                FitState::Failed(why) => format!("no current fit (its fits failed: {why})"),
                _ => "no current fit (porewise fit fits it)".into(),
            }));
            continue;
        };
        let stored = readings::of_sample(conn, sample.id)?;
        match advise_sample(conn, settings, &fit, &stored, &mut pool, options)? {
            Some(Ok(advice)) => ranked.push(SampleAdvice {
                sample,
                state,
                fit_id: fit.id,
                advice,
            }),
            Some(Err(reason)) => skipped.push(skip(reason)),
            None => skipped.push(skip("its current fit has no report".into())),
        }
    }
    // Stable: equal gains keep site, depth and code order.
    ranked.sort_by(|a, b| b.advice.gain().total_cmp(&a.advice.gain()));
    Ok(CampaignAdvice { ranked, skipped })
}

/// A suction in kPa as cm, checked: 0 or more, finite, at most the oven-dry 10^6 kPa.
///
/// # Errors
/// A message naming the value and what was expected.
pub fn candidate_from_kpa(kpa: f64) -> std::result::Result<f64, String> {
    if !(kpa.is_finite() && (0.0..=1e6).contains(&kpa)) {
        return Err(format!(
            "{kpa} kPa: expected a suction from 0 to 1000000 kPa (oven-dry)"
        ));
    }
    Ok(kpa * CM_PER_KPA)
}

#[cfg(test)]
mod tests {
    #![allow(clippy::float_cmp)]

    use super::*;
    use crate::fit::{FitOptions, Readings, fit_model};
    use nalgebra::{DMatrix, DVector};

    fn settings() -> CampaignSettings {
        CampaignSettings {
            name: "t".into(),
            description: None,
            fc_kpa: 33.0,
            pwp_kpa: 1500.0,
            created_at: chrono::Utc::now(),
        }
    }

    /// A van Genuchten core with a fixed wiggle, fitted.
    fn report(h: &[f64]) -> FitReport {
        let curve =
            RetentionCurve::new(ModelKind::VanGenuchten, vec![0.06, 0.41, 0.03, 1.6]).expect("ok");
        let wiggle = [
            0.004, -0.003, 0.005, -0.006, 0.002, 0.004, -0.005, 0.003, -0.002,
        ];
        let theta: Vec<f64> = h
            .iter()
            .zip(wiggle.iter().cycle())
            .map(|(&h, w)| curve.theta(h) + w)
            .collect();
        fit_model(
            ModelKind::VanGenuchten,
            &Readings::new(h, &theta),
            &FitOptions::new(),
        )
        .expect("fits")
    }

    fn plain(n: usize, method: &str) -> FitReadings {
        FitReadings {
            weights: vec![1.0; n],
            methods: vec![method.to_string(); n],
        }
    }

    const H: [f64; 9] = [0.0, 10.0, 30.0, 60.0, 100.0, 330.0, 1000.0, 3000.0, 15000.0];

    #[test]
    fn the_information_matrix_gives_back_the_fits_covariance() {
        // s^2 M^-1 from the model's gradients at the readings must be the covariance the fit
        // stored, so "now" is the interval the fit card shows.
        let r = report(&H);
        let free = free_indices(&r).expect("known");
        let x: Vec<f64> = r.readings.iter().map(|r| r.x).collect();
        let model = ModelKind::VanGenuchten.curve();
        let m = information_matrix(model, &r.values(), &free, &x, None).expect("finite");
        let inv = Information::new(&m).expect("determined").inverse();
        let s2 = r.residual_sd.expect("dof").powi(2);
        let cov = r.covariance.as_ref().expect("covariance");
        for (i, row) in cov.rows.iter().enumerate() {
            for (j, &c) in row.iter().enumerate() {
                let scale = (cov.rows[i][i] * cov.rows[j][j]).sqrt();
                assert!(
                    (s2 * inv[i][j] - c).abs() <= 1e-6 * scale,
                    "({i},{j}): {} vs {c}",
                    s2 * inv[i][j]
                );
            }
        }
    }

    #[test]
    fn available_water_advice_agrees_with_a_brute_force_refit_free_covariance() {
        // Each candidate added as a row, the covariance s^2 (J'J)^-1 recomputed by LU, and the
        // available water's 95 % half-width read from it: the advice's numbers and choice.
        let r = report(&H);
        let advice = advise_fit(
            &r,
            &plain(H.len(), "plate"),
            &settings(),
            None,
            &AdviseOptions::default(),
        )
        .expect("advice");
        assert_eq!(advice.noise.basis, NoiseBasis::Fit);
        let s = r.residual_sd.expect("dof");
        let dof = r.n_points - r.n_free_params;
        let t0 = crate::fit::t975(dof).expect("t");
        let curve = RetentionCurve::new(ModelKind::VanGenuchten, r.values()).expect("ok");
        let g = DVector::from_vec(available_water_gradient(&curve, 33.0, 1500.0).expect("g"));
        let cov = r.covariance.as_ref().expect("cov");
        let cov_now = DMatrix::from_fn(4, 4, |i, j| cov.rows[i][j]);
        let now = t0 * g.dot(&(&cov_now * &g)).sqrt();
        assert!(
            (advice.now / now - 1.0).abs() < 1e-6,
            "{} vs {now}",
            advice.now
        );
        let model = ModelKind::VanGenuchten.curve();
        let mut brute = Vec::new();
        for &h in &DEFAULT_CANDIDATES_CM {
            let mut x: Vec<f64> = r.readings.iter().map(|r| r.x).collect();
            x.push(h);
            let m = information_matrix(model, &r.values(), &[0, 1, 2, 3], &x, None).expect("m");
            let inv = DMatrix::from_fn(4, 4, |i, j| m[i][j])
                .lu()
                .try_inverse()
                .expect("invertible");
            brute.push(t0 * s * g.dot(&(&inv * &g)).sqrt());
        }
        for (step, b) in advice.steps.iter().zip(&brute) {
            assert!((step.after / b - 1.0).abs() < 1e-6, "{step:?} vs {b}");
            assert!(step.after < advice.now);
        }
        let best = (0..brute.len())
            .min_by(|&a, &b| brute[a].total_cmp(&brute[b]))
            .expect("one");
        assert_eq!(advice.best, best, "{brute:?}");
        assert!(advice.gain() > 0.0);
        assert!(advice.shrink_pct().expect("now > 0") < 100.0);
    }

    #[test]
    fn parameter_advice_follows_the_determinant() {
        let r = report(&H);
        let options = AdviseOptions {
            target: AdviceTarget::Parameters,
            ..AdviseOptions::default()
        };
        let advice =
            advise_fit(&r, &plain(H.len(), "plate"), &settings(), None, &options).expect("advice");
        let best = advice
            .steps
            .iter()
            .enumerate()
            .max_by(|a, b| a.1.det_ratio.total_cmp(&b.1.det_ratio))
            .expect("steps")
            .0;
        assert_eq!(advice.best, best);
        assert!(advice.available_water.is_none());
        // The geometric mean relative SE from the stored covariance: det(Cov)^(1/2k) / gm(p).
        let cov = r.covariance.as_ref().expect("cov");
        let det = DMatrix::from_fn(4, 4, |i, j| cov.rows[i][j]).determinant();
        let gm_p = r.values().iter().map(|v| v.abs().ln()).sum::<f64>() / 4.0;
        let t0 = crate::fit::t975(r.n_points - 4).expect("t");
        let want = 100.0 * t0 * (det.ln() / 8.0 - gm_p).exp();
        assert!(
            (advice.now / want - 1.0).abs() < 1e-6,
            "{} vs {want}",
            advice.now
        );
    }

    #[test]
    fn few_degrees_of_freedom_use_the_pooled_noise_of_their_methods() {
        // Five readings for four parameters: one degree of freedom, so the pool.
        let h = [0.0, 30.0, 330.0, 3000.0, 15000.0];
        let r = report(&h);
        assert!(needs_pool(&r));
        let readings = FitReadings {
            weights: vec![1.0; 5],
            methods: ["column", "column", "plate", "plate", "plate"]
                .map(String::from)
                .to_vec(),
        };
        let none = advise_fit(&r, &readings, &settings(), None, &AdviseOptions::default());
        assert!(none.is_err());
        // Column: variance 4e-6 over 10 dof; plate: 1.6e-5 over 20 dof.
        let pool = MethodNoise::from_residuals(
            std::iter::repeat_n(("column", 4e-6, 1.0), 10)
                .chain(std::iter::repeat_n(("plate", 1.6e-5, 1.0), 20)),
        );
        assert_eq!(pool.levels.len(), 2);
        assert!((pool.level("column").expect("own").variance - 4e-6).abs() < 1e-18);
        let advice = advise_fit(
            &r,
            &readings,
            &settings(),
            Some(&pool),
            &AdviseOptions::default(),
        )
        .expect("advice");
        assert_eq!(advice.noise.basis, NoiseBasis::Pooled);
        // (2 * 4e-6 + 3 * 1.6e-5) / 5 = 1.12e-5, the smallest dof 10.
        assert!(
            (advice.noise.sd - 1.12e-5_f64.sqrt()).abs() < 1e-12,
            "{:?}",
            advice.noise
        );
        assert_eq!(advice.noise.dof, 10);
        // A method with too few residuals of its own takes every method's level.
        let thin = MethodNoise::from_residuals(
            std::iter::repeat_n(("column", 4e-6, 1.0), 2)
                .chain(std::iter::repeat_n(("plate", 1.6e-5, 1.0), 20)),
        );
        let all = thin.all.as_ref().expect("all");
        assert_eq!(thin.level("column"), Some(all));
        assert!(
            thin.level("dewpoint")
                .is_some_and(|l| l.method == "all methods")
        );
    }

    #[test]
    fn candidates_are_checked() {
        assert!((candidate_from_kpa(33.0).expect("ok") - 33.0 * CM_PER_KPA).abs() < 1e-12);
        assert!(candidate_from_kpa(-1.0).is_err());
        assert!(candidate_from_kpa(f64::NAN).is_err());
        assert!(candidate_from_kpa(2e6).is_err());
        assert_eq!("Parameters".parse(), Ok(AdviceTarget::Parameters));
        assert!("aw".parse::<AdviceTarget>().is_err());
        assert_eq!(method_key(Some("  Pressure Plate ")), "pressure plate");
        assert_eq!(method_key(Some(" ")), "unspecified");
    }
}
