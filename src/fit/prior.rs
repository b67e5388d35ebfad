//! van Genuchten with a prior: a maximum a posteriori fit for samples with few readings.
//!
//! The prior is a normal distribution of each parameter in a transformed scale
//! q = (theta_r, theta_s, ln alpha, ln(n - 1)) (a texture class's distribution, see
//! [`crate::model::texture`]). The fit minimises
//!
//! ```text
//! sum_i w_i ((theta(h_i; p) - theta_i) / s)^2  +  lambda sum_j ((q_j - mu_j) / sigma_j)^2
//! ```
//!
//! with s the readings' noise standard deviation (given: one sample's few readings cannot
//! estimate it) and lambda the prior's weight (1 for the prior as it is; 0 gives the
//! readings-only fit). The prior enters as extra residuals sqrt(lambda) (q_j - mu_j) / sigma_j,
//! so the solver is the same Levenberg-Marquardt on a longer residual vector, and the
//! covariance (J'J)^-1 of that vector (in q, carried to p by the delta method) includes the
//! prior: Cov = (J_r' W J_r / s^2 + lambda diag(1/sigma^2))^-1. It is the Laplace
//! approximation of the posterior, so its intervals use the normal quantile (the noise is
//! taken as known) rather than Student's t.
//!
//! Bounds: the van Genuchten model's (theta_r 0-0.5, theta_s 0.01-1, alpha 1e-5-10 1/cm,
//! n 1.001-15), with theta_r kept below theta_s; a parameter that ends on its bound is held
//! there and left out of the covariance, as in the readings-only fit.

use nalgebra::{Matrix4, Vector4};
use serde::{Deserialize, Serialize};

use super::report::{FitReport, ParamEstimate, ParamMatrix, ReadingFit, Side, Termination};
use super::{FitError, Readings, stats};
use crate::model::retention::ModelKind;
use crate::model::texture::Normal;

/// Degrees of freedom a prior fit's intervals are formed with: the noise is taken as known,
/// so the quantile is the normal one; t(0.975, 1000) = 1.962 stands for z = 1.960.
pub const PRIOR_DOF: usize = 1000;

/// Noise standard deviation of a water-content reading when none is known, m3/m3 (a
/// laboratory retention reading's usual scatter about a smooth curve, 0.005-0.02; common
/// practice).
pub const DEFAULT_NOISE_SD: f64 = 0.01;

/// What a fit with a prior was based on, kept in its report.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PriorBasis {
    /// The prior's name (`sandy loam, Carsel & Parrish 1988`).
    pub label: String,
    /// Where its numbers come from.
    pub source: String,
    /// The noise standard deviation of the readings assumed, m3/m3.
    pub noise_sd: f64,
    /// The prior's weight lambda (1: the prior as it is).
    pub weight: f64,
    /// The prior in the transformed scale q: mean and sd of theta_r, theta_s, ln alpha,
    /// ln(n - 1).
    pub mean_q: [f64; 4],
    /// Standard deviations of q.
    pub sd_q: [f64; 4],
    /// How far the fit sits from the prior's mean, in prior standard deviations:
    /// (q_j - mu_j) / sigma_j.
    pub pull_sd: [f64; 4],
    /// The readings-only fit's parameters, when one was made, for the side-by-side view.
    pub readings_only: Option<[f64; 4]>,
    /// The readings-only fit's weighted sum of squares, beside this fit's `sse`.
    #[serde(default)]
    pub readings_only_sse: Option<f64>,
    /// How far the prior moved each parameter from the readings-only fit, in that fit's
    /// standard errors (`None` where it has none).
    pub shift_se: Option<[Option<f64>; 4]>,
}

impl PriorBasis {
    /// `readings+texture prior` with readings, `texture only` without.
    pub fn basis(&self, n_points: usize) -> &'static str {
        if n_points == 0 {
            BASIS_TEXTURE_ONLY
        } else {
            BASIS_WITH_PRIOR
        }
    }
}

/// The basis word of a fit to readings alone.
pub const BASIS_READINGS: &str = "readings";
/// The basis word of a fit to readings with a texture prior.
pub const BASIS_WITH_PRIOR: &str = "readings+texture prior";
/// The basis word of an estimate from texture alone.
pub const BASIS_TEXTURE_ONLY: &str = "texture only";

/// The basis word of a report.
pub fn basis_of(report: &FitReport) -> &'static str {
    report
        .prior
        .as_ref()
        .map_or(BASIS_READINGS, |p| p.basis(report.n_points))
}

/// A prior on the four van Genuchten parameters.
#[derive(Debug, Clone, PartialEq)]
pub struct Prior {
    /// Name, for the report.
    pub label: String,
    /// Source, for the report.
    pub source: String,
    /// Normal distributions of q = (theta_r, theta_s, ln alpha, ln(n - 1)).
    pub q: [Normal; 4],
}

/// How to fit with a prior.
#[derive(Debug, Clone, PartialEq)]
pub struct PriorOptions {
    /// Noise sd of the readings, m3/m3 (see [`DEFAULT_NOISE_SD`]).
    pub noise_sd: f64,
    /// The prior's weight lambda (1 as it is; towards 0 the readings-only fit).
    pub weight: f64,
    /// The readings-only fit, when made: a second start, and the side-by-side figures.
    pub readings_only: Option<FitReport>,
}

impl Default for PriorOptions {
    fn default() -> Self {
        Self {
            noise_sd: DEFAULT_NOISE_SD,
            weight: 1.0,
            readings_only: None,
        }
    }
}

const LOWER: [f64; 4] = [0.0, 0.01, 1e-5, 1.001];
const UPPER: [f64; 4] = [0.5, 1.0, 10.0, 15.0];
/// theta_s - theta_r is kept at least this, m3/m3.
const MIN_SPAN: f64 = 1e-3;

fn to_p(q: &Vector4<f64>) -> [f64; 4] {
    [q[0], q[1], q[2].exp(), 1.0 + q[3].exp()]
}

fn to_q(p: &[f64]) -> Vector4<f64> {
    Vector4::new(p[0], p[1], p[2].ln(), (p[3] - 1.0).ln())
}

/// dp/dq, diagonal.
fn dp_dq(q: &Vector4<f64>) -> [f64; 4] {
    [1.0, 1.0, q[2].exp(), q[3].exp()]
}

/// Put q inside the bounds; returns which parameters were moved onto one.
fn project(q: &mut Vector4<f64>) -> [Option<Side>; 4] {
    let lo = to_q(&LOWER);
    let hi = to_q(&UPPER);
    let mut held = [None; 4];
    for j in 0..4 {
        if q[j] <= lo[j] {
            q[j] = lo[j];
            held[j] = Some(Side::Lower);
        } else if q[j] >= hi[j] {
            q[j] = hi[j];
            held[j] = Some(Side::Upper);
        }
    }
    if q[0] > q[1] - MIN_SPAN {
        q[0] = (q[1] - MIN_SPAN).max(0.0);
        if held[0].is_none() {
            held[0] = Some(Side::Upper);
        }
    }
    held
}

struct Objective<'a> {
    h: &'a [f64],
    theta: &'a [f64],
    sqrt_w: Vec<f64>,
    prior: &'a [Normal; 4],
    noise: f64,
    sqrt_lambda: f64,
}

impl Objective<'_> {
    /// Residuals (readings first, then the four prior rows) and the Jacobian in q.
    fn eval(&self, q: &Vector4<f64>) -> Option<(Vec<f64>, Vec<[f64; 4]>)> {
        let p = to_p(q);
        let d = dp_dq(q);
        let vg = ModelKind::VanGenuchten.curve();
        let mut grad = [0.0; 4];
        let mut r = Vec::with_capacity(self.h.len() + 4);
        let mut jac = Vec::with_capacity(self.h.len() + 4);
        for (i, (&h, &y)) in self.h.iter().zip(self.theta).enumerate() {
            let f = vg.value_and_gradient(h, &p, &mut grad);
            let k = self.sqrt_w[i] / self.noise;
            r.push(k * (f - y));
            jac.push([
                k * grad[0] * d[0],
                k * grad[1] * d[1],
                k * grad[2] * d[2],
                k * grad[3] * d[3],
            ]);
        }
        for j in 0..4 {
            let k = self.sqrt_lambda / self.prior[j].sd;
            r.push(k * (q[j] - self.prior[j].mean));
            let mut row = [0.0; 4];
            row[j] = k;
            jac.push(row);
        }
        (r.iter().all(|v| v.is_finite()) && jac.iter().flatten().all(|v| v.is_finite()))
            .then_some((r, jac))
    }

    fn cost(&self, q: &Vector4<f64>) -> f64 {
        self.eval(q)
            .map_or(f64::INFINITY, |(r, _)| r.iter().map(|v| v * v).sum())
    }
}

fn normal_equations(r: &[f64], jac: &[[f64; 4]]) -> (Matrix4<f64>, Vector4<f64>) {
    let mut a = Matrix4::zeros();
    let mut g = Vector4::zeros();
    for (ri, row) in r.iter().zip(jac) {
        for i in 0..4 {
            g[i] += row[i] * ri;
            for j in 0..4 {
                a[(i, j)] += row[i] * row[j];
            }
        }
    }
    (a, g)
}

/// Projected Levenberg-Marquardt from one start; returns q, the cost, the iterations and the
/// parameters held on a bound.
fn solve(
    obj: &Objective<'_>,
    start: Vector4<f64>,
) -> (Vector4<f64>, f64, usize, [Option<Side>; 4]) {
    let mut q = start;
    let mut held = project(&mut q);
    let mut cost = obj.cost(&q);
    let mut lambda = 1e-3;
    let mut evaluations = 1;
    for _ in 0..400 {
        let Some((r, jac)) = obj.eval(&q) else { break };
        let (a, g) = normal_equations(&r, &jac);
        let mut improved = false;
        for _ in 0..30 {
            let mut m = a;
            for i in 0..4 {
                m[(i, i)] += lambda * a[(i, i)].max(1e-12);
            }
            let Some(step) = m.cholesky().map(|c| c.solve(&(-g))) else {
                lambda *= 10.0;
                continue;
            };
            let mut trial = q + step;
            let trial_held = project(&mut trial);
            let trial_cost = obj.cost(&trial);
            evaluations += 1;
            if trial_cost < cost {
                let relative = (cost - trial_cost) / cost.max(1e-300);
                q = trial;
                held = trial_held;
                cost = trial_cost;
                lambda = (lambda / 3.0).max(1e-12);
                improved = relative > 1e-14;
                break;
            }
            lambda *= 4.0;
        }
        if !improved {
            break;
        }
    }
    (q, cost, evaluations, held)
}

/// Fit van Genuchten (m = 1 - 1/n) to `readings` with `prior`; with no readings the result
/// is the prior's mode (the class mean, for a texture prior).
///
/// # Errors
/// A reading that is not finite, a negative suction, a water content outside 0..1, a weight
/// of 0 or less, columns of different lengths ([`FitError`]), or a noise sd or weight that is
/// not a positive finite number ([`FitError::BadWeight`] with index 0).
pub fn fit_with_prior(
    readings: &Readings<'_>,
    prior: &Prior,
    options: &PriorOptions,
) -> Result<FitReport, FitError> {
    let (h, theta) = (readings.x, readings.y);
    check(readings)?;
    for value in [options.noise_sd, options.weight] {
        if !(value.is_finite() && value > 0.0) {
            return Err(FitError::BadWeight { index: 0, value });
        }
    }
    let sqrt_w: Vec<f64> = match readings.weights {
        Some(w) => w.iter().map(|v| v.sqrt()).collect(),
        None => vec![1.0; h.len()],
    };
    let obj = Objective {
        h,
        theta,
        sqrt_w,
        prior: &prior.q,
        noise: options.noise_sd,
        sqrt_lambda: options.weight.sqrt(),
    };
    let mut starts = vec![Vector4::new(
        prior.q[0].mean,
        prior.q[1].mean,
        prior.q[2].mean,
        prior.q[3].mean,
    )];
    if let Some(plain) = &options.readings_only {
        let v = plain.values();
        if v.len() == 4 && v[2] > 0.0 && v[3] > 1.0 {
            starts.push(to_q(&v));
        }
    }
    if !h.is_empty() {
        for guess in ModelKind::VanGenuchten.curve().initial_guesses(h, theta) {
            if guess.len() == 4 && guess[2] > 0.0 && guess[3] > 1.0 {
                starts.push(to_q(&guess));
            }
        }
    }
    let mut best: Option<(Vector4<f64>, f64, [Option<Side>; 4])> = None;
    let mut evaluations = 0;
    let runs = starts.len();
    for start in starts {
        let (q, cost, evals, held) = solve(&obj, start);
        evaluations += evals;
        if best.as_ref().is_none_or(|b| cost < b.1) {
            best = Some((q, cost, held));
        }
    }
    let Some((q, cost, held)) = best.filter(|b| b.1.is_finite()) else {
        return Err(FitError::NoFiniteFit {
            reason: "van Genuchten with a prior: no start gave a finite sum".to_string(),
        });
    };
    Ok(report(
        &obj,
        prior,
        options,
        &q,
        cost,
        held,
        evaluations,
        runs,
    ))
}

fn check(readings: &Readings<'_>) -> Result<(), FitError> {
    let (h, theta) = (readings.x, readings.y);
    let w = readings.weights;
    if h.len() != theta.len() || w.is_some_and(|w| w.len() != h.len()) {
        return Err(FitError::LengthMismatch {
            x: h.len(),
            y: theta.len(),
            weights: w.map(<[f64]>::len),
        });
    }
    for (i, (&x, &y)) in h.iter().zip(theta).enumerate() {
        let index = i + 1;
        for (what, value) in [("suction", x), ("theta", y)] {
            if !value.is_finite() {
                return Err(FitError::NonFinite { what, index, value });
            }
        }
        if x < 0.0 {
            return Err(FitError::NegativeSuction { index, value: x });
        }
        if !(0.0..=1.0).contains(&y) {
            return Err(FitError::WaterContentOutOfRange { index, value: y });
        }
        if let Some(value) = w.map(|w| w[i])
            && !(value.is_finite() && value > 0.0)
        {
            return Err(FitError::BadWeight { index, value });
        }
    }
    Ok(())
}

#[allow(clippy::too_many_arguments)]
fn report(
    obj: &Objective<'_>,
    prior: &Prior,
    options: &PriorOptions,
    q: &Vector4<f64>,
    cost: f64,
    held: [Option<Side>; 4],
    evaluations: usize,
    runs: usize,
) -> FitReport {
    let p = to_p(q);
    let d = dp_dq(q);
    let vg = ModelKind::VanGenuchten.curve();
    let specs = ModelKind::VanGenuchten.params();
    let n = obj.h.len();
    // The covariance over the parameters off their bounds: (J'J)^-1 of the whole residual
    // vector in q (readings over s, prior rows), then p = p(q) by the delta method.
    let free: Vec<usize> = (0..4).filter(|&j| held[j].is_none()).collect();
    let cov_p = obj.eval(q).and_then(|(r, jac)| {
        let (a, _) = normal_equations(&r, &jac);
        let k = free.len();
        let sub = nalgebra::DMatrix::from_fn(k, k, |i, j| a[(free[i], free[j])]);
        let inv = sub.cholesky()?.inverse();
        let cov = nalgebra::DMatrix::from_fn(k, k, |i, j| inv[(i, j)] * d[free[i]] * d[free[j]]);
        cov.iter().all(|v| v.is_finite()).then_some(cov)
    });
    let t = stats::t975(PRIOR_DOF);
    let mut parameters = Vec::with_capacity(4);
    for j in 0..4 {
        let se = cov_p.as_ref().and_then(|c| {
            let i = free.iter().position(|&f| f == j)?;
            let v = c[(i, i)];
            (v >= 0.0).then(|| v.sqrt())
        });
        let log = matches!(specs[j].unit, "cm" | "1/cm") && p[j] > 0.0;
        let interval = stats::interval95(p[j], se, t, log);
        parameters.push(ParamEstimate {
            name: specs[j].name.to_string(),
            unit: specs[j].unit.to_string(),
            value: p[j],
            se,
            ci95: interval.map(|i| i.0),
            ci95_scale: interval.map(|i| i.1),
            kink_cm: None,
            fixed: false,
            at_bound: held[j],
        });
    }
    let names: Vec<String> = free.iter().map(|&j| specs[j].name.to_string()).collect();
    let covariance = cov_p.as_ref().map(|c| ParamMatrix {
        names: names.clone(),
        rows: (0..free.len())
            .map(|i| (0..free.len()).map(|j| c[(i, j)]).collect())
            .collect(),
    });
    let correlation = cov_p.as_ref().map(|c| ParamMatrix {
        names,
        rows: (0..free.len())
            .map(|i| {
                (0..free.len())
                    .map(|j| c[(i, j)] / (c[(i, i)] * c[(j, j)]).sqrt())
                    .collect()
            })
            .collect(),
    });
    let mut sse = 0.0;
    let mut readings = Vec::with_capacity(n);
    for (i, (&h, &y)) in obj.h.iter().zip(obj.theta).enumerate() {
        let f = vg.value(h, &p);
        let w = obj.sqrt_w[i] * obj.sqrt_w[i];
        sse += w * (f - y) * (f - y);
        readings.push(ReadingFit {
            x: h,
            observed: y,
            fitted: f,
            residual: y - f,
            leverage: None,
            studentized: None,
            studentized_external: None,
            cooks_distance: None,
        });
    }
    let pull_sd: [f64; 4] = std::array::from_fn(|j| (q[j] - prior.q[j].mean) / prior.q[j].sd);
    let readings_only = options.readings_only.as_ref().and_then(|r| {
        let v = r.values();
        (v.len() == 4).then(|| [v[0], v[1], v[2], v[3]])
    });
    let shift_se = options.readings_only.as_ref().map(|r| {
        std::array::from_fn(|j| {
            let e = r.parameters.get(j)?;
            let se = e.se.filter(|s| *s > 0.0)?;
            Some((p[j] - e.value) / se)
        })
    });
    let prior_sse = cost - sse / (obj.noise * obj.noise);
    let mut notes = vec![format!(
        "van Genuchten with the {} prior (weight {}, readings' noise sd {} m3/m3 assumed): \
         a maximum a posteriori fit; sum of squared prior residuals {}",
        prior.label,
        crate::model::number::significant(options.weight, 3).unwrap_or_default(),
        crate::model::number::significant(obj.noise, 3).unwrap_or_default(),
        crate::model::number::significant(prior_sse, 3).unwrap_or_default(),
    )];
    for (j, side) in held.iter().enumerate() {
        if let Some(side) = side {
            let side = match side {
                Side::Lower => "lower",
                Side::Upper => "upper",
            };
            notes.push(format!("{} held on its {side} bound", specs[j].name));
        }
    }
    let k = free.len();
    FitReport {
        model: ModelKind::VanGenuchten.id().to_string(),
        parameters,
        sse,
        rmse: if n > 0 { (sse / n as f64).sqrt() } else { 0.0 },
        residual_sd: None,
        r2: r_squared(obj, sse),
        aic: None,
        aicc: None,
        bic: None,
        n_points: n,
        n_free_params: k,
        n_criteria_params: stats::criteria_parameters(k),
        converged: cov_p.is_some(),
        message: Some(notes.join("; ")),
        termination: Termination::Converged,
        evaluations,
        runs,
        covariance,
        correlation,
        readings,
        prior: Some(PriorBasis {
            label: prior.label.clone(),
            source: prior.source.clone(),
            noise_sd: obj.noise,
            weight: options.weight,
            mean_q: prior.q.map(|d| d.mean),
            sd_q: prior.q.map(|d| d.sd),
            pull_sd,
            readings_only,
            readings_only_sse: options.readings_only.as_ref().map(|r| r.sse),
            shift_se,
        }),
    }
}

/// 1 - SSE / SST of the readings (weighted), `None` with fewer than two or no spread.
fn r_squared(obj: &Objective<'_>, sse: f64) -> Option<f64> {
    let w = |i: usize| obj.sqrt_w[i] * obj.sqrt_w[i];
    let sw: f64 = (0..obj.h.len()).map(w).sum();
    if obj.h.len() < 2 || sw <= 0.0 {
        return None;
    }
    let mean = obj
        .theta
        .iter()
        .enumerate()
        .map(|(i, y)| w(i) * y)
        .sum::<f64>()
        / sw;
    let sst: f64 = obj
        .theta
        .iter()
        .enumerate()
        .map(|(i, y)| w(i) * (y - mean) * (y - mean))
        .sum();
    (sst > 0.0).then(|| 1.0 - sse / sst)
}

#[cfg(test)]
#[allow(clippy::float_cmp)]
mod tests {
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;
    use rand_distr::{Distribution, Normal as Gauss};

    use super::*;
    use crate::fit::{FitOptions, fit_model};
    use crate::model::texture::TextureClass;

    fn texture(class: TextureClass) -> Prior {
        Prior {
            label: class.name().to_string(),
            source: "test".into(),
            q: class.carsel_parrish().transformed(),
        }
    }

    /// Readings of a van Genuchten curve at `h` with seeded noise of sd `sd`.
    fn sample(p: [f64; 4], h: &[f64], sd: f64, seed: u64) -> Vec<f64> {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let noise = Gauss::new(0.0, sd).expect("sd");
        let vg = ModelKind::VanGenuchten.curve();
        h.iter()
            .map(|&h| (vg.value(h, &p) + noise.sample(&mut rng)).clamp(0.0, 1.0))
            .collect()
    }

    const TWELVE: [f64; 12] = [
        0.0, 10.0, 20.0, 40.0, 70.0, 100.0, 200.0, 336.5, 1000.0, 3000.0, 8000.0, 15296.0,
    ];

    #[test]
    fn no_readings_give_the_class_mean() {
        for class in TextureClass::ALL {
            let r = fit_with_prior(
                &Readings::new(&[], &[]),
                &texture(class),
                &PriorOptions::default(),
            )
            .expect("fits");
            let mean = class.carsel_parrish().mean();
            for (e, m) in r.parameters.iter().zip(mean) {
                assert!(
                    (e.value - m).abs() <= 1e-9 * m.max(1e-3),
                    "{class}: {e:?} vs {m}"
                );
            }
            assert_eq!(basis_of(&r), BASIS_TEXTURE_ONLY);
            assert_eq!(r.n_points, 0);
            // The spread is the class's: theta_s's se is its published sd.
            let se = r.parameters[1].se.expect("se");
            assert!(
                (se - class.carsel_parrish().theta_s.sd).abs() < 1e-9,
                "{class}"
            );
        }
    }

    #[test]
    fn a_vanishing_prior_gives_the_readings_only_fit() {
        let truth = [0.07, 0.42, 0.03, 1.6];
        let theta = sample(truth, &TWELVE, 0.005, 7);
        let readings = Readings::new(&TWELVE, &theta);
        let plain =
            fit_model(ModelKind::VanGenuchten, &readings, &FitOptions::new()).expect("fits");
        let options = PriorOptions {
            weight: 1e-12,
            readings_only: None,
            ..PriorOptions::default()
        };
        let map = fit_with_prior(&readings, &texture(TextureClass::Loam), &options).expect("fits");
        for (a, b) in map.parameters.iter().zip(&plain.parameters) {
            assert!(
                (a.value - b.value).abs() <= 1e-5 * b.value.abs().max(1e-3),
                "{a:?} vs {b:?}"
            );
            // And the standard errors tend to the readings-only ones with s as the noise.
        }
        assert!((map.sse - plain.sse).abs() <= 1e-9 + 1e-6 * plain.sse);
        assert_eq!(basis_of(&map), BASIS_WITH_PRIOR);
        assert_eq!(basis_of(&plain), BASIS_READINGS);
    }

    #[test]
    fn twelve_good_readings_move_less_than_a_standard_error() {
        // Loam-like truths near the class mean, 12 readings with 0.005 noise: the prior moves
        // each parameter by less than the readings-only fit's standard error, and its
        // standard errors are never larger (the noise given as that fit's own s).
        let mut checked = 0;
        for seed in 0..20 {
            let truth = [0.07, 0.43, 0.03, 1.55];
            let theta = sample(truth, &TWELVE, 0.005, 100 + seed);
            let readings = Readings::new(&TWELVE, &theta);
            let plain =
                fit_model(ModelKind::VanGenuchten, &readings, &FitOptions::new()).expect("fits");
            let Some(s) = plain.residual_sd else { continue };
            if plain.parameters.iter().any(|p| p.at_bound.is_some()) {
                continue;
            }
            let options = PriorOptions {
                noise_sd: s,
                weight: 1.0,
                readings_only: Some(plain.clone()),
            };
            let map =
                fit_with_prior(&readings, &texture(TextureClass::Loam), &options).expect("fits");
            let shift = map.prior.as_ref().and_then(|p| p.shift_se).expect("shift");
            for (j, d) in shift.iter().enumerate() {
                let d = d.expect("se");
                assert!(d.abs() < 1.0, "seed {seed} parameter {j}: moved {d} se");
                let (a, b) = (map.parameters[j].se, plain.parameters[j].se);
                assert!(
                    a.expect("se") <= b.expect("se") * (1.0 + 1e-9),
                    "seed {seed} {j}"
                );
            }
            checked += 1;
        }
        assert!(checked >= 15, "{checked}");
    }

    #[test]
    fn standard_errors_shrink_with_the_prior_on_sparse_samples() {
        // Five readings, noise as given: the prior fit's se never exceeds the readings-only
        // fit's se computed with the same noise (the readings-only fit's covariance is
        // s^2 (J'J)^-1; rescaled to the assumed noise to compare like with like).
        let h = [0.0, 60.0, 336.5, 1000.0, 15296.0];
        for seed in 0..20 {
            let theta = sample([0.065, 0.41, 0.07, 1.9], &h, 0.01, 300 + seed);
            let readings = Readings::new(&h, &theta);
            let plain =
                fit_model(ModelKind::VanGenuchten, &readings, &FitOptions::new()).expect("fits");
            let Some(s) = plain.residual_sd.filter(|s| *s > 0.0) else {
                continue;
            };
            let options = PriorOptions {
                noise_sd: 0.01,
                weight: 1.0,
                readings_only: Some(plain.clone()),
            };
            let map = fit_with_prior(&readings, &texture(TextureClass::SandyLoam), &options)
                .expect("fits");
            for (a, b) in map.parameters.iter().zip(&plain.parameters) {
                if let (Some(a), Some(b)) = (a.se, b.se) {
                    assert!(a <= b * 0.01 / s * 1.05, "seed {seed}: {a} > {b}");
                }
            }
        }
    }

    #[test]
    fn bad_options_and_readings_are_errors() {
        let prior = texture(TextureClass::Loam);
        let bad = PriorOptions {
            noise_sd: 0.0,
            ..PriorOptions::default()
        };
        assert!(fit_with_prior(&Readings::new(&[], &[]), &prior, &bad).is_err());
        let neg = fit_with_prior(
            &Readings::new(&[-1.0], &[0.3]),
            &prior,
            &PriorOptions::default(),
        );
        assert!(matches!(
            neg,
            Err(FitError::NegativeSuction { index: 1, .. })
        ));
        let wet = fit_with_prior(
            &Readings::new(&[1.0], &[1.3]),
            &prior,
            &PriorOptions::default(),
        );
        assert!(matches!(wet, Err(FitError::WaterContentOutOfRange { .. })));
    }

    #[test]
    fn the_report_round_trips_and_old_reports_have_no_prior() {
        let h = [0.0, 336.5, 1000.0, 15296.0];
        let theta = [0.41, 0.2, 0.15, 0.09];
        let r = fit_with_prior(
            &Readings::new(&h, &theta),
            &texture(TextureClass::SandyLoam),
            &PriorOptions::default(),
        )
        .expect("fits");
        let json = serde_json::to_string(&r).expect("encodes");
        let back: FitReport = serde_json::from_str(&json).expect("decodes");
        assert_eq!(back, r);
        let mut plain = serde_json::to_value(&r).expect("encodes");
        plain.as_object_mut().expect("object").remove("prior");
        let old: FitReport = serde_json::from_value(plain).expect("decodes");
        assert!(old.prior.is_none());
        // The prior's report gets intervals with normal quantiles despite n = k.
        assert!(crate::fit::Delta::of(&r).is_some());
        assert!(r.aicc.is_none(), "a prior fit is not ranked by AICc");
    }
}
