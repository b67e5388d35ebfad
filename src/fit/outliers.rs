//! Suspect readings: statistical and physical checks over a whole campaign's samples.
//!
//! A sample has too few readings to judge itself (with 8 points and 4 parameters an internally
//! studentized residual cannot exceed sqrt(n - p) = 2), so the measurement noise is estimated
//! from every sample at once, one level per method and source (a lab's pressure plates share
//! one noise level across all its cores), and each reading is judged against it:
//!
//! - **leave-one-out**: the sample is refitted without the reading (same model and fixed
//!   values) and the prediction error at its suction is divided by its standard deviation
//!   sigma * sqrt(1/w + g' (J'WJ)^-1 g) (g the model gradient there, J the Jacobian of the
//!   fit without the reading), so the extrapolation at either end of the curve is not mistaken
//!   for an error. Leverage and Cook's distance of the reading in the full fit explain why it
//!   mattered.
//! - **saturation**: water content above the porosity 1 - rho_b / rho_s (particle density
//!   2.65 g/cm3, common practice) by more than a tolerance.
//! - **monotonic**: water content rising with suction (on one branch) by more than the noise
//!   of the difference; the reading of the pair that departs further from the curve is blamed.
//!
//! Masking (one wild point hiding another) is guarded by a forward search: the worst reading
//! over the threshold is set aside, the sample refitted and the rest tested again, until none
//! is over it; every reading set aside on statistics alone is then tested again against the
//! final curve and put back when it fits it. The noise is estimated twice: from the full fits,
//! robustly (1.4826 x the median absolute leverage-adjusted residual), then again from the
//! cleaned fits, and the checks rerun with it.
//!
//! Pure computation: no I/O; the store and the stateless `fit --input` build the samples.

use std::collections::BTreeMap;
use std::fmt::Write as _;

use nalgebra::DMatrix;
use rayon::prelude::*;
use serde::Serialize;

use super::config::FitOptions;
use super::driver::Readings;
use super::models::{fit_auto, fit_model};
use super::report::FitReport;
use crate::model::domain::Branch;
use crate::model::retention::ModelKind;

/// Particle density of mineral soil, g/cm3 (common practice).
pub const PARTICLE_DENSITY_G_CM3: f64 = 2.65;

/// Thresholds of the checks; `Default` holds the defaults chosen by the seeded tests in
/// `tests/outliers.rs`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct OutlierOptions {
    /// A leave-one-out error beyond this many of its standard deviations is suspect (default 3.5).
    pub threshold_sd: f64,
    /// A rise of water content with suction beyond this many standard deviations of the
    /// difference is suspect (default 3).
    pub monotonic_sd: f64,
    /// Water content may exceed the porosity by this much, m3/m3, before it is suspect
    /// (default 0.02: bulk density and packing are not exact).
    pub saturation_tolerance: f64,
    /// Particle density used for the porosity, g/cm3 (default 2.65, common practice).
    pub particle_density_g_cm3: f64,
    /// At most this fraction of a sample's readings is set aside (default 1/3, at least 1).
    pub max_fraction: f64,
    /// Lowest noise level used, m3/m3 (default 0.002: lab water contents carry about three
    /// decimals).
    pub min_noise: f64,
    /// A method (of one source) needs this many residuals for its own noise level; fewer
    /// borrow the method's campaign-wide level, then the campaign's (default 12).
    pub min_group: usize,
    /// Noise level when the campaign has too few residuals to estimate one, m3/m3 (default 0.01).
    pub default_noise: f64,
}

impl Default for OutlierOptions {
    fn default() -> Self {
        Self {
            threshold_sd: 3.5,
            monotonic_sd: 3.0,
            saturation_tolerance: 0.02,
            particle_density_g_cm3: PARTICLE_DENSITY_G_CM3,
            max_fraction: 1.0 / 3.0,
            min_noise: 0.002,
            min_group: 12,
            default_noise: 0.01,
        }
    }
}

impl OutlierOptions {
    /// Check the thresholds (positive and finite).
    ///
    /// # Errors
    /// A message naming the first bad value.
    pub fn validate(&self) -> Result<(), String> {
        let positive = [
            ("threshold", self.threshold_sd),
            ("monotonic threshold", self.monotonic_sd),
            ("particle density", self.particle_density_g_cm3),
            ("largest fraction set aside", self.max_fraction),
            ("lowest noise", self.min_noise),
            ("default noise", self.default_noise),
        ];
        for (name, v) in positive {
            if !(v.is_finite() && v > 0.0) {
                return Err(format!("{name} {v}: expected a positive number"));
            }
        }
        if !(self.saturation_tolerance.is_finite() && self.saturation_tolerance >= 0.0) {
            return Err(format!(
                "saturation tolerance {}: expected 0 or more m3/m3",
                self.saturation_tolerance
            ));
        }
        Ok(())
    }
}

/// One sample's readings as the checks see them (suction in cm, water content in m3/m3).
#[derive(Debug, Clone, PartialEq)]
pub struct OutlierSample {
    /// Suction head per reading, cm.
    pub h_cm: Vec<f64>,
    /// Water content per reading, m3/m3.
    pub theta: Vec<f64>,
    /// Fit weights, if any.
    pub weights: Option<Vec<f64>>,
    /// Noise group of each reading: its method (`unspecified` when not recorded).
    pub method: Vec<String>,
    /// Noise group of each reading: where it came from (an import file; empty when unknown).
    pub source: Vec<String>,
    /// Hysteresis branch of each reading (drying and unknown are compared together).
    pub branch: Vec<Branch>,
    /// Readings the user reviewed and kept: never set aside, never suggested.
    pub keep: Vec<bool>,
    /// Dry bulk density, g/cm3, for the porosity check.
    pub bulk_density_g_cm3: Option<f64>,
    /// The model to judge with; `None` picks the AICc-best of `auto` on all readings.
    pub model: Option<ModelKind>,
    /// Fixed parameters and bounds of the sample's fits.
    pub options: FitOptions,
}

impl OutlierSample {
    /// Readings with every grouping default: one method `unspecified`, no source, drying
    /// branch, nothing kept, no bulk density, `auto`, default options.
    pub fn new(h_cm: Vec<f64>, theta: Vec<f64>) -> Self {
        let n = h_cm.len();
        Self {
            h_cm,
            theta,
            weights: None,
            method: vec!["unspecified".to_string(); n],
            source: vec![String::new(); n],
            branch: vec![Branch::Unknown; n],
            keep: vec![false; n],
            bulk_density_g_cm3: None,
            model: None,
            options: FitOptions::new(),
        }
    }

    fn len(&self) -> usize {
        self.h_cm.len().min(self.theta.len())
    }

    fn weight(&self, i: usize) -> f64 {
        self.weights
            .as_ref()
            .and_then(|w| w.get(i))
            .copied()
            .unwrap_or(1.0)
    }

    fn key(&self, i: usize) -> (String, String) {
        (
            self.method.get(i).cloned().unwrap_or_default(),
            self.source.get(i).cloned().unwrap_or_default(),
        )
    }

    fn kept(&self, i: usize) -> bool {
        self.keep.get(i).copied().unwrap_or(false)
    }
}

/// Where a noise level came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum NoiseBasis {
    /// The residuals of this method and source.
    Own,
    /// Too few of its own: the method's residuals across every source.
    Method,
    /// Too few for the method: every residual of the campaign.
    Campaign,
    /// Too few residuals anywhere: the default level.
    Default,
}

/// The noise level of one method and source.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NoiseLevel {
    /// Method.
    pub method: String,
    /// Source (import file), empty when unknown.
    pub source: String,
    /// Standard deviation of one reading, m3/m3.
    pub sd: f64,
    /// Residuals of this method and source behind the estimate.
    pub residuals: usize,
    /// Which residuals the level was estimated from.
    pub basis: NoiseBasis,
}

impl NoiseLevel {
    /// `pressure plate in lab-a.csv`, or the method alone without a source.
    pub fn label(&self) -> String {
        if self.source.is_empty() {
            self.method.clone()
        } else {
            format!("{} in {}", self.method, self.source)
        }
    }
}

/// The campaign's noise levels.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct Noise {
    /// One level per method and source, sorted by method then source.
    pub levels: Vec<NoiseLevel>,
    /// The level of every residual pooled, m3/m3 (`None` with too few residuals).
    pub campaign_sd: Option<f64>,
}

impl Noise {
    fn level(&self, method: &str, source: &str) -> Option<&NoiseLevel> {
        self.levels
            .iter()
            .find(|l| l.method == method && l.source == source)
    }
}

/// What one check found about a reading.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(rename_all = "snake_case", tag = "check")]
pub enum Check {
    /// The reading departs from the curve fitted without it.
    LeaveOneOut {
        /// Observed minus predicted, m3/m3.
        error: f64,
        /// The error over its standard deviation.
        z: f64,
        /// Standard deviation of the error, m3/m3 (noise and the refit's uncertainty).
        error_sd: f64,
        /// Leverage in the fit with the reading.
        leverage: Option<f64>,
        /// Cook's distance in the fit with the reading, with the campaign's noise level.
        cooks_distance: Option<f64>,
    },
    /// The reading and its neighbour in suction depart together from the curve fitted
    /// without both (two wild readings that would mask each other one at a time).
    LeavePairOut {
        /// Observed minus predicted, m3/m3.
        error: f64,
        /// The error over its standard deviation.
        z: f64,
        /// Standard deviation of the error, m3/m3.
        error_sd: f64,
        /// Suction of the neighbour set aside with it, cm.
        other_h_cm: f64,
    },
    /// The water content is above the porosity.
    Saturation {
        /// Porosity 1 - rho_b / rho_s.
        porosity: f64,
        /// Bulk density used, g/cm3.
        bulk_density_g_cm3: f64,
        /// Water content minus porosity, m3/m3.
        excess: f64,
    },
    /// The water content is higher than at a lower suction (or lower than at a higher one).
    Monotonic {
        /// Suction of the other reading of the pair, cm.
        other_h_cm: f64,
        /// The rise of water content from the wetter to the drier reading, m3/m3.
        rise: f64,
        /// The rise over the standard deviation of a difference of two readings.
        z: f64,
    },
}

impl Check {
    /// The stored rule name of the check.
    pub fn rule(&self) -> &'static str {
        match self {
            Check::LeaveOneOut { .. } => "leave-one-out",
            Check::LeavePairOut { .. } => "leave-pair-out",
            Check::Saturation { .. } => "saturation",
            Check::Monotonic { .. } => "monotonic",
        }
    }
}

/// A suspect reading of one sample.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Finding {
    /// Index of the reading in the sample.
    pub index: usize,
    /// Every check that found it, the strongest first.
    pub checks: Vec<Check>,
    /// How bad, in noise standard deviations (the strongest check); higher is worse.
    pub score: f64,
    /// Human text with the numbers behind it.
    pub reason: String,
}

/// The checks' result for one sample.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SampleReview {
    /// The model judged with (`None` when no model could be fitted).
    pub model: Option<ModelKind>,
    /// Suspect readings, worst first.
    pub findings: Vec<Finding>,
    /// The fit without the suspect readings, if one converged.
    pub cleaned: Option<FitReport>,
    /// Indices of the readings in `cleaned`, in its order.
    pub cleaned_indices: Vec<usize>,
}

/// The checks' result for a campaign: its noise and every sample's findings, in input order.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Review {
    /// The noise levels the final pass used.
    pub noise: Noise,
    /// One entry per input sample.
    pub samples: Vec<SampleReview>,
}

impl Review {
    /// Number of suspect readings over every sample.
    pub fn suspects(&self) -> usize {
        self.samples.iter().map(|s| s.findings.len()).sum()
    }
}

/// Run every check over a campaign's samples: estimate the noise, judge, re-estimate from the
/// cleaned fits, judge again. Samples run in parallel.
pub fn review(samples: &[OutlierSample], options: &OutlierOptions) -> Review {
    // Pass 1: the model of each sample and its fit with every reading.
    let first: Vec<(Option<ModelKind>, Option<Subset>)> = samples
        .par_iter()
        .map(|s| {
            let all: Vec<usize> = (0..s.len()).collect();
            if let Some(kind) = s.model {
                (Some(kind), Subset::fit(s, kind, &all))
            } else {
                let best = choose_model(s);
                (best, best.and_then(|k| Subset::fit(s, k, &all)))
            }
        })
        .collect();
    let models: Vec<Option<ModelKind>> = first.iter().map(|(k, _)| *k).collect();
    let fits: Vec<Option<&Subset>> = first.iter().map(|(_, f)| f.as_ref()).collect();
    let noise = estimate_noise(samples, &fits, options);
    let judged = judge_all(samples, &models, &noise, options);
    // Pass 2: the noise again from the cleaned fits, and the checks with it.
    let cleaned: Vec<Option<Subset>> = judged
        .iter()
        .map(|r| {
            r.cleaned.as_ref().map(|report| Subset {
                indices: r.cleaned_indices.clone(),
                report: report.clone(),
            })
        })
        .collect();
    let refs: Vec<Option<&Subset>> = cleaned.iter().map(Option::as_ref).collect();
    let noise = estimate_noise(samples, &refs, options);
    let samples = judge_all(samples, &models, &noise, options);
    Review { noise, samples }
}

fn judge_all(
    samples: &[OutlierSample],
    models: &[Option<ModelKind>],
    noise: &Noise,
    options: &OutlierOptions,
) -> Vec<SampleReview> {
    samples
        .par_iter()
        .zip(models.par_iter())
        .map(|(s, &model)| {
            let sigma: Vec<f64> = (0..s.len())
                .map(|i| {
                    let (m, src) = s.key(i);
                    noise
                        .level(&m, &src)
                        .map_or(options.default_noise, |l| l.sd)
                })
                .collect();
            check_sample(s, model, &sigma, options)
        })
        .collect()
}

/// The AICc-best model of `auto` on every reading of the sample.
fn choose_model(sample: &OutlierSample) -> Option<ModelKind> {
    let n = sample.len();
    let weights = sample.weights.as_deref().filter(|w| w.len() == n);
    let readings = Readings {
        x: &sample.h_cm[..n],
        y: &sample.theta[..n],
        weights,
    };
    let auto = fit_auto(&ModelKind::ALL, &readings, &sample.options);
    auto.best()
        .or(auto.fallback.as_ref())
        .and_then(|r| r.model.parse().ok())
}

/// A converged fit of some of a sample's readings.
#[derive(Debug, Clone)]
struct Subset {
    indices: Vec<usize>,
    report: FitReport,
}

impl Subset {
    fn fit(sample: &OutlierSample, kind: ModelKind, indices: &[usize]) -> Option<Self> {
        if indices.len() < 2 {
            return None;
        }
        let x: Vec<f64> = indices.iter().map(|&i| sample.h_cm[i]).collect();
        let y: Vec<f64> = indices.iter().map(|&i| sample.theta[i]).collect();
        let w: Option<Vec<f64>> = sample
            .weights
            .as_ref()
            .map(|_| indices.iter().map(|&i| sample.weight(i)).collect());
        let mut readings = Readings::new(&x, &y);
        if let Some(w) = &w {
            readings = readings.with_weights(w);
        }
        let options = sample.options.clone().with_lenient_names(true);
        let report = fit_model(kind, &readings, &options).ok()?;
        report.converged.then(|| Self {
            indices: indices.to_vec(),
            report,
        })
    }

    /// The prediction at reading `i` and the variance factor of its error:
    /// 1/w_i + g' (J'WJ)^-1 g over the parameters not fixed (those on a bound are kept, which
    /// errs towards a wider spread; dropped only when the matrix is singular with them).
    fn predict(&self, sample: &OutlierSample, kind: ModelKind, i: usize) -> Option<(f64, f64)> {
        let curve = kind.curve();
        let p = self.report.values();
        let np = p.len();
        let mut grad = vec![0.0; np];
        let pred = curve.value_and_gradient(sample.h_cm[i], &p, &mut grad);
        if !pred.is_finite() {
            return None;
        }
        let g_i = grad.clone();
        let mut rows: Vec<(f64, Vec<f64>)> = Vec::with_capacity(self.indices.len());
        for &k in &self.indices {
            curve.value_and_gradient(sample.h_cm[k], &p, &mut grad);
            rows.push((sample.weight(k), grad.clone()));
        }
        let est = &self.report.parameters;
        let free: Vec<usize> = (0..np).filter(|&j| !est[j].fixed).collect();
        let off_bound: Vec<usize> = free
            .iter()
            .copied()
            .filter(|&j| est[j].at_bound.is_none())
            .collect();
        let var = quadratic_form(&rows, &g_i, &free)
            .or_else(|| quadratic_form(&rows, &g_i, &off_bound))?;
        Some((pred, 1.0 / sample.weight(i) + var))
    }
}

/// g' (sum w g g')^-1 g over the parameter columns `cols`, or `None` when singular.
fn quadratic_form(rows: &[(f64, Vec<f64>)], g: &[f64], cols: &[usize]) -> Option<f64> {
    let k = cols.len();
    if k == 0 {
        return Some(0.0);
    }
    let mut j = DMatrix::zeros(rows.len(), k);
    for (r, (w, row)) in rows.iter().enumerate() {
        let sw = w.sqrt();
        for (c, &col) in cols.iter().enumerate() {
            j[(r, c)] = sw * row[col];
        }
    }
    let (inv, _) = super::stats::inverse_normal_matrix(&j)?;
    let gv: Vec<f64> = cols.iter().map(|&c| g[c]).collect();
    let mut q = 0.0;
    for a in 0..k {
        for b in 0..k {
            q += gv[a] * inv[(a, b)] * gv[b];
        }
    }
    (q.is_finite() && q >= 0.0).then_some(q)
}

/// 1.4826 x the median of absolute values: the standard deviation of normal values centred
/// on zero, robust to a minority of wild ones.
fn robust_sd(values: &mut [f64]) -> Option<f64> {
    if values.is_empty() {
        return None;
    }
    values.sort_by(f64::total_cmp);
    let n = values.len();
    let median = if n % 2 == 1 {
        values[n / 2]
    } else {
        0.5 * (values[n / 2 - 1] + values[n / 2])
    };
    Some(1.482_6 * median)
}

/// Noise levels from the leverage-adjusted residuals e sqrt(w) / sqrt(1 - h) of the fits
/// (each has the variance of one reading's noise in the linearised model).
fn estimate_noise(
    samples: &[OutlierSample],
    fits: &[Option<&Subset>],
    options: &OutlierOptions,
) -> Noise {
    let mut by_key: BTreeMap<(String, String), Vec<f64>> = BTreeMap::new();
    let mut by_method: BTreeMap<String, Vec<f64>> = BTreeMap::new();
    let mut all = Vec::new();
    for (s, fit) in samples.iter().zip(fits) {
        // Every reading gets a group, even one without a residual, so it has a level.
        for i in 0..s.len() {
            by_key.entry(s.key(i)).or_default();
        }
        let Some(fit) = fit else { continue };
        for (pos, &i) in fit.indices.iter().enumerate() {
            let Some(rf) = fit.report.readings.get(pos) else {
                continue;
            };
            let Some(h) = rf.leverage.filter(|h| *h < 0.99) else {
                continue;
            };
            let r = (rf.residual * s.weight(i).sqrt() / (1.0 - h).sqrt()).abs();
            if !r.is_finite() {
                continue;
            }
            let key = s.key(i);
            by_method.entry(key.0.clone()).or_default().push(r);
            by_key.entry(key).or_default().push(r);
            all.push(r);
        }
    }
    let enough = |v: &Vec<f64>| v.len() >= options.min_group;
    let campaign_sd = if all.len() >= options.min_group.min(8) {
        robust_sd(&mut all)
    } else {
        None
    };
    let mut method_sd: BTreeMap<String, Option<f64>> = BTreeMap::new();
    for (m, v) in &mut by_method {
        method_sd.insert(m.clone(), if enough(v) { robust_sd(v) } else { None });
    }
    let levels = by_key
        .into_iter()
        .map(|((method, source), mut v)| {
            let residuals = v.len();
            let (sd, basis) = if enough(&v) {
                (robust_sd(&mut v), NoiseBasis::Own)
            } else if let Some(Some(sd)) = method_sd.get(&method) {
                (Some(*sd), NoiseBasis::Method)
            } else if let Some(sd) = campaign_sd {
                (Some(sd), NoiseBasis::Campaign)
            } else {
                (None, NoiseBasis::Default)
            };
            let sd = sd
                .filter(|v| v.is_finite())
                .unwrap_or(options.default_noise)
                .max(options.min_noise);
            NoiseLevel {
                method,
                source,
                sd,
                residuals,
                basis,
            }
        })
        .collect();
    Noise {
        levels,
        campaign_sd: campaign_sd.map(|v| v.max(options.min_noise)),
    }
}

/// One candidate of a round of the forward search.
#[derive(Debug, Clone)]
struct Candidate {
    checks: Vec<Check>,
    score: f64,
    /// Which candidate is set aside first: the one whose removal improves the fit of the
    /// others most (see [`Loo::gain`]), so a wild reading at the end of the curve, whose own
    /// prediction is uncertain, outranks the neighbour it drags off the curve.
    rank: f64,
}

impl Candidate {
    fn new() -> Self {
        Self {
            checks: Vec::new(),
            score: 0.0,
            rank: 0.0,
        }
    }

    fn add(&mut self, check: Check, score: f64, rank: f64) {
        self.checks.push(check);
        self.score = self.score.max(score);
        self.rank = self.rank.max(rank);
    }
}

/// Free parameters of a model under the sample's fixed values.
fn free_params(kind: ModelKind, options: &FitOptions) -> usize {
    kind.params()
        .iter()
        .filter(|p| !options.fixed().iter().any(|(n, _)| n == p.name))
        .count()
}

/// The checks on one sample with per-reading noise `sigma` (m3/m3; a missing or non-positive
/// value is taken as `options.default_noise`).
pub fn check_sample(
    sample: &OutlierSample,
    model: Option<ModelKind>,
    sigma: &[f64],
    options: &OutlierOptions,
) -> SampleReview {
    let n = sample.len();
    // A missing or unusable noise level falls back to the default one.
    let sigma: Vec<f64> = (0..n)
        .map(|i| {
            sigma
                .get(i)
                .copied()
                .filter(|v| v.is_finite() && *v > 0.0)
                .unwrap_or(options.default_noise)
        })
        .collect();
    let sigma = &sigma[..];
    let mut active: Vec<usize> = (0..n).collect();
    let mut findings: Vec<Finding> = Vec::new();
    // Physical: above the porosity, whatever the curve.
    if let Some(bd) = sample
        .bulk_density_g_cm3
        .filter(|b| b.is_finite() && *b > 0.0)
    {
        let porosity = 1.0 - bd / options.particle_density_g_cm3;
        for i in 0..n {
            let excess = sample.theta[i] - porosity;
            if !sample.kept(i) && excess > options.saturation_tolerance {
                let check = Check::Saturation {
                    porosity,
                    bulk_density_g_cm3: bd,
                    excess,
                };
                let score = excess / sigma[i];
                findings.push(finding(i, vec![check], score, sample, sigma, options));
                active.retain(|&k| k != i);
            }
        }
    }
    let max_set_aside = ((n as f64 * options.max_fraction).floor() as usize).max(1);
    let p_free = model.map_or(usize::MAX, |k| free_params(k, &sample.options));
    let mut statistical_only: Vec<usize> = Vec::new();
    while findings.len() < max_set_aside {
        let full = model.and_then(|k| Subset::fit(sample, k, &active));
        let mut candidates: BTreeMap<usize, Candidate> = BTreeMap::new();
        let mut gains: BTreeMap<usize, f64> = BTreeMap::new();
        if let Some(kind) = model
            && active.len() > p_free
        {
            for (pos, &i) in active.iter().enumerate() {
                let Some(loo) = leave_one_out(sample, kind, &active, i, full.as_ref(), pos, sigma)
                else {
                    continue;
                };
                gains.insert(i, loo.gain);
                let Check::LeaveOneOut { z, .. } = loo.check else {
                    continue;
                };
                if z.abs() >= options.threshold_sd && !sample.kept(i) {
                    candidates.entry(i).or_insert_with(Candidate::new).add(
                        loo.check,
                        z.abs(),
                        loo.gain,
                    );
                }
            }
        }
        for (i, check, z) in monotonic(
            sample,
            &active,
            sigma,
            &gains,
            full.as_ref(),
            model,
            options,
        ) {
            let rank = gains.get(&i).copied().unwrap_or(z * z);
            candidates
                .entry(i)
                .or_insert_with(Candidate::new)
                .add(check, z, rank);
        }
        // Two neighbours that hold each other up: set both aside when that explains clearly
        // more than the best single reading does.
        let best_gain = gains.values().copied().fold(0.0, f64::max);
        if let (Some(kind), Some(full)) = (model, full.as_ref())
            && findings.len() + 2 <= max_set_aside
            && active.len() >= p_free.saturating_add(3)
            && let Some(pair) = worst_pair(sample, kind, &active, full, sigma, best_gain, options)
        {
            for (i, check) in pair {
                statistical_only.push(i);
                let score = match check {
                    Check::LeavePairOut { z, .. } => z.abs(),
                    _ => 0.0,
                };
                let mut checks = vec![check];
                if let Some(c) = candidates.remove(&i) {
                    checks.extend(c.checks);
                }
                findings.push(finding(i, checks, score, sample, sigma, options));
                active.retain(|&k| k != i);
            }
            continue;
        }
        let Some((&worst, _)) = candidates
            .iter()
            .max_by(|a, b| a.1.rank.total_cmp(&b.1.rank))
        else {
            break;
        };
        let Some(c) = candidates.remove(&worst) else {
            break;
        };
        let only_statistics = c
            .checks
            .iter()
            .all(|ch| matches!(ch, Check::LeaveOneOut { .. } | Check::LeavePairOut { .. }));
        if only_statistics {
            statistical_only.push(worst);
        }
        findings.push(finding(worst, c.checks, c.score, sample, sigma, options));
        active.retain(|&k| k != worst);
    }
    // Confirmation: a reading set aside on statistics alone goes back when the final curve
    // (without every suspect) predicts it within the threshold.
    if let Some(kind) = model {
        for &i in statistical_only.iter().rev() {
            let Some(fit) = Subset::fit(sample, kind, &active) else {
                break;
            };
            let Some((pred, factor)) = fit.predict(sample, kind, i) else {
                continue;
            };
            let z = (sample.theta[i] - pred) / (sigma[i] * factor.sqrt());
            if z.abs() < options.threshold_sd {
                findings.retain(|f| f.index != i);
                active.push(i);
                active.sort_unstable();
            }
        }
    }
    findings.sort_by(|a, b| b.score.total_cmp(&a.score).then(a.index.cmp(&b.index)));
    let cleaned = model.and_then(|k| Subset::fit(sample, k, &active));
    SampleReview {
        model,
        findings,
        cleaned_indices: cleaned
            .as_ref()
            .map(|c| c.indices.clone())
            .unwrap_or_default(),
        cleaned: cleaned.map(|c| c.report),
    }
}

/// A leave-one-out result: the check, and how much setting the reading aside improves the
/// fit of the others.
struct Loo {
    check: Check,
    /// chi2 of the fit with the reading minus chi2 of the fit without it (noise units): the
    /// likelihood-ratio statistic of a mean shift of this reading alone, which says which of
    /// two suspects explains the misfit better.
    gain: f64,
}

/// Sum of squared residuals in noise units of a fit.
fn chi2(fit: &Subset, sample: &OutlierSample, sigma: &[f64]) -> f64 {
    fit.indices
        .iter()
        .zip(&fit.report.readings)
        .map(|(&k, rf)| {
            let r = rf.residual / sigma[k];
            r * r * sample.weight(k)
        })
        .sum()
}

/// The leave-one-out check of reading `i` (at position `pos` of `active`).
fn leave_one_out(
    sample: &OutlierSample,
    kind: ModelKind,
    active: &[usize],
    i: usize,
    full: Option<&Subset>,
    pos: usize,
    sigma: &[f64],
) -> Option<Loo> {
    let rest: Vec<usize> = active.iter().copied().filter(|&k| k != i).collect();
    let fit = Subset::fit(sample, kind, &rest)?;
    let (pred, factor) = fit.predict(sample, kind, i)?;
    let error_sd = sigma[i] * factor.sqrt();
    let error = sample.theta[i] - pred;
    let z = error / error_sd;
    if !z.is_finite() {
        return None;
    }
    let gain = full.map_or(z * z, |f| {
        chi2(f, sample, sigma) - chi2(&fit, sample, sigma)
    });
    let (leverage, cooks_distance) = full
        .and_then(|f| f.report.readings.get(pos).map(|rf| (f, rf)))
        .map_or((None, None), |(f, rf)| {
            let p = f.report.parameters.iter().filter(|p| !p.fixed).count();
            let cooks = rf.leverage.filter(|h| *h < 1.0 && p > 0).map(|h| {
                let e = rf.residual * sample.weight(i).sqrt();
                e * e * h / (p as f64 * sigma[i] * sigma[i] * (1.0 - h) * (1.0 - h))
            });
            (rf.leverage, cooks)
        });
    Some(Loo {
        check: Check::LeaveOneOut {
            error,
            z,
            error_sd,
            leverage,
            cooks_distance,
        },
        gain,
    })
}

/// The pair of neighbours (in suction) whose joint removal improves the fit by more than
/// the best single removal plus threshold^2 (a second wild reading's worth), each of them off
/// the curve fitted without both by the threshold: both with their checks.
fn worst_pair(
    sample: &OutlierSample,
    kind: ModelKind,
    active: &[usize],
    full: &Subset,
    sigma: &[f64],
    best_gain: f64,
    options: &OutlierOptions,
) -> Option<[(usize, Check); 2]> {
    let mut order = active.to_vec();
    order.sort_by(|&a, &b| sample.h_cm[a].total_cmp(&sample.h_cm[b]));
    let chi2_full = chi2(full, sample, sigma);
    let t = options.threshold_sd;
    let mut best: Option<(f64, [(usize, Check); 2])> = None;
    for w in order.windows(2) {
        let (a, b) = (w[0], w[1]);
        if sample.kept(a) || sample.kept(b) {
            continue;
        }
        let rest: Vec<usize> = active
            .iter()
            .copied()
            .filter(|&k| k != a && k != b)
            .collect();
        let Some(fit) = Subset::fit(sample, kind, &rest) else {
            continue;
        };
        let gain = chi2_full - chi2(&fit, sample, sigma);
        if gain <= best_gain + t * t || best.as_ref().is_some_and(|(g, _)| *g >= gain) {
            continue;
        }
        let judge = |i: usize, other: usize| -> Option<Check> {
            let (pred, factor) = fit.predict(sample, kind, i)?;
            let error_sd = sigma[i] * factor.sqrt();
            let error = sample.theta[i] - pred;
            let z = error / error_sd;
            (z.is_finite() && z.abs() >= t).then_some(Check::LeavePairOut {
                error,
                z,
                error_sd,
                other_h_cm: sample.h_cm[other],
            })
        };
        if let (Some(ca), Some(cb)) = (judge(a, b), judge(b, a)) {
            best = Some((gain, [(a, ca), (b, cb)]));
        }
    }
    best.map(|(_, pair)| pair)
}

/// The leave-one-out z of every reading in one pass (no reading set aside), `None` where the
/// refit fails: what a single test would see, for display and for comparing with the forward
/// search of [`check_sample`].
pub fn leave_one_out_scores(
    sample: &OutlierSample,
    kind: ModelKind,
    sigma: &[f64],
) -> Vec<Option<f64>> {
    let active: Vec<usize> = (0..sample.len()).collect();
    let sigma: Vec<f64> = active
        .iter()
        .map(|&i| {
            sigma
                .get(i)
                .copied()
                .filter(|v| v.is_finite() && *v > 0.0)
                .unwrap_or(OutlierOptions::default().default_noise)
        })
        .collect();
    let sigma = &sigma[..];
    let full = Subset::fit(sample, kind, &active);
    active
        .iter()
        .map(|&i| {
            leave_one_out(sample, kind, &active, i, full.as_ref(), i, sigma).and_then(|l| {
                match l.check {
                    Check::LeaveOneOut { z, .. } => Some(z),
                    _ => None,
                }
            })
        })
        .collect()
}

/// Rises of water content with suction among the active readings, each blamed on the reading
/// of its pair that departs further from the curve: (reading, check, z).
fn monotonic(
    sample: &OutlierSample,
    active: &[usize],
    sigma: &[f64],
    gains: &BTreeMap<usize, f64>,
    full: Option<&Subset>,
    model: Option<ModelKind>,
    options: &OutlierOptions,
) -> Vec<(usize, Check, f64)> {
    // How far a reading sits above the curve fitted with it, in noise units.
    let above = |i: usize| -> f64 {
        if let (Some(f), Some(kind)) = (full, model) {
            let fitted = kind.curve().value(sample.h_cm[i], &f.report.values());
            if fitted.is_finite() {
                return (sample.theta[i] - fitted) / sigma[i];
            }
        }
        0.0
    };
    let wetting = |i: usize| sample.branch.get(i) == Some(&Branch::Wetting);
    let mut best: BTreeMap<usize, (Check, f64)> = BTreeMap::new();
    for (a, &i) in active.iter().enumerate() {
        for &j in &active[a + 1..] {
            if wetting(i) != wetting(j) {
                continue;
            }
            let (wet, dry) = if sample.h_cm[i] < sample.h_cm[j] {
                (i, j)
            } else if sample.h_cm[j] < sample.h_cm[i] {
                (j, i)
            } else {
                continue;
            };
            let rise = sample.theta[dry] - sample.theta[wet];
            let sd = sigma[wet].hypot(sigma[dry]);
            let z = rise / sd;
            if z.is_nan() || z < options.monotonic_sd {
                continue;
            }
            // The wetter reading too low, or the drier one too high? The one whose setting
            // aside explains more of the misfit; without leave-one-out fits, the one further
            // off the curve.
            let wet_first = match (gains.get(&wet), gains.get(&dry)) {
                (Some(a), Some(b)) => a > b,
                _ => -above(wet) > above(dry),
            };
            let (blamed, other) = if wet_first { (wet, dry) } else { (dry, wet) };
            if sample.kept(blamed) {
                continue;
            }
            let check = Check::Monotonic {
                other_h_cm: sample.h_cm[other],
                rise,
                z,
            };
            if best.get(&blamed).is_none_or(|(_, old)| z > *old) {
                best.insert(blamed, (check, z));
            }
        }
    }
    best.into_iter().map(|(i, (c, z))| (i, c, z)).collect()
}

fn finding(
    index: usize,
    mut checks: Vec<Check>,
    score: f64,
    sample: &OutlierSample,
    sigma: &[f64],
    options: &OutlierOptions,
) -> Finding {
    let strength = |c: &Check| match c {
        Check::LeaveOneOut { z, .. } | Check::LeavePairOut { z, .. } => z.abs(),
        Check::Monotonic { z, .. } => *z,
        Check::Saturation { excess, .. } => excess / sigma[index],
    };
    checks.sort_by(|a, b| strength(b).total_cmp(&strength(a)));
    let reason = checks
        .iter()
        .map(|c| describe(c, sample, index, sigma[index], options))
        .collect::<Vec<_>>()
        .join("; ");
    Finding {
        index,
        checks,
        score,
        reason,
    }
}

/// A suction for reasons: whole cm from 10 cm up, one decimal below.
fn cm(h: f64) -> String {
    if h >= 10.0 {
        format!("{h:.0} cm")
    } else {
        format!("{h:.1} cm")
    }
}

fn describe(
    check: &Check,
    sample: &OutlierSample,
    i: usize,
    sigma: f64,
    options: &OutlierOptions,
) -> String {
    let (method, source) = sample.key(i);
    let group = if source.is_empty() {
        method
    } else {
        format!("{method}, {source}")
    };
    match check {
        Check::LeaveOneOut {
            error,
            z,
            error_sd,
            leverage,
            cooks_distance,
        } => {
            let mut text = format!(
                "leave-one-out error {error:+.3} m3/m3 = {:.1} sd (noise {sigma:.4} m3/m3 for \
                 {group}; sd of the error {error_sd:.4}",
                z.abs()
            );
            if let Some(h) = leverage {
                let _ = write!(text, "; leverage {h:.2}");
            }
            if let Some(d) = cooks_distance {
                let _ = write!(text, ", Cook's distance {d:.2}");
            }
            text.push(')');
            text
        }
        Check::LeavePairOut {
            error,
            z,
            error_sd,
            other_h_cm,
        } => format!(
            "error {error:+.3} m3/m3 = {:.1} sd from the curve without it and its neighbour at {} \
             (noise {sigma:.4} m3/m3 for {group}; sd of the error {error_sd:.4})",
            z.abs(),
            cm(*other_h_cm)
        ),
        Check::Saturation {
            porosity,
            bulk_density_g_cm3,
            excess,
        } => format!(
            "water content {:.3} m3/m3 above the porosity {porosity:.3} (bulk density \
             {bulk_density_g_cm3:.2} g/cm3, particle density {:.2}) by {excess:.3}, tolerance {:.3}",
            sample.theta[i], options.particle_density_g_cm3, options.saturation_tolerance
        ),
        Check::Monotonic {
            other_h_cm,
            rise,
            z,
        } => {
            let h = sample.h_cm[i];
            let (wet, dry) = if h < *other_h_cm {
                (h, *other_h_cm)
            } else {
                (*other_h_cm, h)
            };
            format!(
                "water content rises {rise:.3} m3/m3 from {} to {} = {z:.1} sd of a difference \
                 (noise {sigma:.4} m3/m3 for {group})",
                cm(wet),
                cm(dry)
            )
        }
    }
}
