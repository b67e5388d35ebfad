//! 95 % intervals of values derived from a fit: the delta method, checked against Monte Carlo.
//!
//! Delta method: Var(f(p)) ~ g' Cov g with g = df/dp (analytic, see
//! [`crate::model::derived::gradient`]) and Cov = s^2 (J'WJ)^-1 the report's covariance over
//! the free parameters off their bounds; fixed and held parameters have no covariance entries
//! and are treated as known. The interval is f -+ t(0.975, n - k) se, or for a positive value
//! that spans decades (a suction, a conductivity) exp(ln f -+ t se / f), the Wald interval of
//! ln f, as the parameters' own log-scale intervals. The curve's band ([`super::band`]) is the
//! same computation for theta(h), so the band at field capacity is the interval of theta(FC).
//!
//! The check: the delta method is exact for a value linear in the parameters when the
//! parameters are far from their bounds. Where a fit's report shows a reason to doubt it (a
//! free parameter whose 95 % interval reaches past one of its bounds, a breakpoint on a
//! measured suction, or n - k <= [`FEW_DOF`]), [`Checker::interval`] draws [`MC_DRAWS`]
//! parameter sets from the fitted distribution with a fixed seed and takes the 2.5 and 97.5
//! percentiles of the value; when that interval's width or centre differs from the delta
//! interval's by more than 10 % of its width, the Monte Carlo interval is given instead and
//! its note says so and why. An ordinary fit keeps the delta interval unchecked: on ordinary
//! synthetic samples the delta method covers the true value as it should and a parametric
//! bootstrap (refits to new noise) agrees with its widths, while parameter draws, which bend
//! the straight fitted ellipsoid through a model that is curved in its parameters, disagree
//! more often (`cargo bench --bench intervals` gives the figures).
//!
//! The draws are multivariate t with n - k degrees of freedom (so a value linear in the
//! parameters gets the t interval back) in each parameter's natural coordinate ([`natural`]:
//! water contents as they are, ln p for the positive parameters, ln(n - 1) for van
//! Genuchten's n > 1, the logit of Durner's weight), the covariance carried over from the
//! report's by the delta method; draws outside the model's bounds are rejected, which is what
//! makes them differ near a bound. In the physical parameters themselves the ellipsoid cuts
//! straight across the bent valley of good fits (alpha, n and theta_r trade off along a
//! curved ridge); in the natural coordinates the valley is straighter.

use std::cell::OnceCell;
use std::str::FromStr;

use nalgebra::{DMatrix, SymmetricEigen};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{ChiSquared, Distribution, StandardNormal};
use serde::{Deserialize, Serialize};

use super::report::{FitReport, IntervalScale};
use super::stats::t975;
use crate::model::number::significant;
use crate::model::retention::ModelKind;

/// Parameter draws of the Monte Carlo check.
pub const MC_DRAWS: usize = 2000;
/// Draws of the Monte Carlo check for a value found by a numerical search (the air entry
/// and the suction at Se = 1/2 of Fredlund-Xing and Durner): the width of a 95 % percentile
/// interval from 500 draws is within about 5 % of the one from many, half the 10 % the check
/// looks for.
pub const SEARCH_DRAWS: usize = 500;
/// Seed of the Monte Carlo check: the same fit always gets the same draws, so the same
/// campaign gives the same exports.
pub const MC_SEED: u64 = 0x1475_da7a;
/// The delta interval stands when the Monte Carlo interval's width and centre are within
/// this share of its width.
pub const AGREEMENT: f64 = 0.10;
/// Degrees of freedom n - k at or below which a fit counts as having few readings.
pub const FEW_DOF: usize = 2;

/// How an interval was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum IntervalMethod {
    /// The delta method with analytic gradients.
    DeltaMethod,
    /// Percentiles of the value over parameter draws from the fitted distribution.
    MonteCarlo,
}

impl std::fmt::Display for IntervalMethod {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            IntervalMethod::DeltaMethod => "delta method",
            IntervalMethod::MonteCarlo => "Monte Carlo",
        })
    }
}

/// A 95 % interval of a derived value.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Interval95 {
    /// Lower end, in the value's unit.
    pub lo95: f64,
    /// Upper end.
    pub hi95: f64,
    /// Standard error in the value's unit: the delta method's, or for a Monte Carlo interval
    /// its width over 2 t (on its scale), so that lo and hi are about value -+ t se.
    pub se: f64,
    /// The scale it was formed on (`log` for suctions and conductivities).
    pub scale: IntervalScale,
    /// How it was obtained.
    pub method: IntervalMethod,
    /// Why it is not the plain delta-method interval, when it is not.
    pub note: Option<String>,
}

impl Interval95 {
    /// Half the width, in the value's unit (the `±` of a symmetric interval).
    pub fn half_width(&self) -> f64 {
        0.5 * (self.hi95 - self.lo95)
    }

    /// Whether it is symmetric about `value` (a linear-scale delta interval), so that
    /// `value ± half-width` states it exactly.
    pub fn is_symmetric(&self) -> bool {
        self.scale == IntervalScale::Linear && self.method == IntervalMethod::DeltaMethod
    }
}

/// The delta method over one fit's covariance.
#[derive(Debug, Clone, PartialEq)]
pub struct Delta {
    kind: ModelKind,
    center: Vec<f64>,
    index: Vec<usize>,
    cov: Vec<Vec<f64>>,
    t: f64,
    dof: usize,
}

impl Delta {
    /// The delta method of a report; `None` without a covariance (no degrees of freedom, a
    /// singular Jacobian) or for a model this program does not know.
    pub fn of(report: &FitReport) -> Option<Delta> {
        let cov = report.covariance.as_ref()?;
        let kind = ModelKind::from_str(&report.model).ok()?;
        // A fit with a prior takes the noise as known: normal quantiles (see `fit::prior`).
        let dof = if report.prior.is_some() {
            super::prior::PRIOR_DOF
        } else {
            report.n_points.checked_sub(report.n_free_params)?
        };
        let t = t975(dof)?;
        let index = cov
            .names
            .iter()
            .map(|name| report.parameters.iter().position(|q| &q.name == name))
            .collect::<Option<Vec<_>>>()?;
        let square =
            cov.rows.len() == index.len() && cov.rows.iter().all(|r| r.len() == index.len());
        square.then(|| Delta {
            kind,
            center: report.values(),
            index,
            cov: cov.rows.clone(),
            t,
            dof,
        })
    }

    /// t(0.975, n - k), the half-width factor.
    pub fn t(&self) -> f64 {
        self.t
    }

    /// Degrees of freedom n - k.
    pub fn dof(&self) -> usize {
        self.dof
    }

    /// The model.
    pub fn kind(&self) -> ModelKind {
        self.kind
    }

    /// The fitted parameters, in the model's order.
    pub fn center(&self) -> &[f64] {
        &self.center
    }

    /// g' Cov g for a gradient over every parameter of the model (entries of parameters
    /// outside the covariance, fixed or held, are not used); `None` when not finite.
    pub fn variance(&self, grad: &[f64]) -> Option<f64> {
        if grad.len() != self.center.len() {
            return None;
        }
        let mut var = 0.0;
        for (r, &i) in self.index.iter().enumerate() {
            for (c, &j) in self.index.iter().enumerate() {
                var += grad[i] * self.cov[r][c] * grad[j];
            }
        }
        var.is_finite().then_some(var.max(0.0))
    }

    /// The delta-method interval of `value` with gradient `grad` on `scale` (log needs a
    /// positive value).
    pub fn interval(&self, value: f64, grad: &[f64], scale: IntervalScale) -> Option<Interval95> {
        let se = self.variance(grad)?.sqrt();
        let (lo, hi) = match scale {
            IntervalScale::Linear => (value - self.t * se, value + self.t * se),
            IntervalScale::Log => {
                if value.is_nan() || value <= 0.0 {
                    return None;
                }
                let half = self.t * se / value;
                (value * (-half).exp(), value * half.exp())
            }
        };
        (value.is_finite() && lo.is_finite() && hi.is_finite()).then_some(Interval95 {
            lo95: lo,
            hi95: hi,
            se,
            scale,
            method: IntervalMethod::DeltaMethod,
            note: None,
        })
    }
}

/// The names of a report's parameters that the delta method treats as known: fixed, or held
/// on a bound (no covariance entry).
pub fn known_parameters(report: &FitReport) -> Vec<String> {
    let in_cov = |name: &str| {
        report
            .covariance
            .as_ref()
            .is_some_and(|c| c.names.iter().any(|n| n == name))
    };
    report
        .parameters
        .iter()
        .filter(|p| !in_cov(&p.name))
        .map(|p| p.name.clone())
        .collect()
}

/// Parameter sets drawn from a fit's distribution.
#[derive(Debug, Clone, PartialEq)]
pub struct Draws {
    /// Accepted draws (within the model's bounds), each a full parameter vector.
    pub params: Vec<Vec<f64>>,
    /// Draws made, accepted or not.
    pub attempts: usize,
}

/// A parameter's natural coordinate for the Monte Carlo draws: the one in which its physical
/// domain is unbounded (or nearly so), so that the fitted distribution is closer to the
/// valley of good fits than a straight ellipsoid in the physical parameter.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Natural {
    /// The parameter itself (water contents).
    Linear,
    /// ln p (positive parameters: suctions, inverse suctions, exponents).
    Log,
    /// ln(p - 1) (van Genuchten's n, n > 1).
    LogAboveOne,
    /// ln(p / (1 - p)) (Durner's weight, 0 < w1 < 1).
    Logit,
}

/// The natural coordinate of parameter `index` of `kind` (see [`Natural`]).
pub fn natural(kind: ModelKind, index: usize) -> Natural {
    let spec = &kind.params()[index];
    match (kind, spec.name) {
        (_, "theta_r" | "theta_s") => Natural::Linear,
        (ModelKind::Durner, "w1") => Natural::Logit,
        (
            ModelKind::VanGenuchten | ModelKind::VanGenuchtenFreeM | ModelKind::Durner,
            "n" | "n1" | "n2",
        ) => Natural::LogAboveOne,
        _ => Natural::Log,
    }
}

impl Natural {
    /// u = T(p) and dT/dp; `None` outside the coordinate's domain.
    fn to_u(self, p: f64) -> Option<(f64, f64)> {
        let out = match self {
            Natural::Linear => (p, 1.0),
            Natural::Log => (p > 0.0).then(|| (p.ln(), 1.0 / p))?,
            Natural::LogAboveOne => (p > 1.0).then(|| ((p - 1.0).ln(), 1.0 / (p - 1.0)))?,
            Natural::Logit => {
                (p > 0.0 && p < 1.0).then(|| ((p / (1.0 - p)).ln(), 1.0 / (p * (1.0 - p))))?
            }
        };
        (out.0.is_finite() && out.1.is_finite()).then_some(out)
    }

    /// p = T^-1(u).
    fn to_p(self, u: f64) -> f64 {
        match self {
            Natural::Linear => u,
            Natural::Log => u.exp(),
            Natural::LogAboveOne => 1.0 + u.exp(),
            Natural::Logit => 1.0 / (1.0 + (-u).exp()),
        }
    }
}

/// The delta method with its check against Monte Carlo, for the values of one fit.
#[derive(Debug)]
pub struct Checker<'a> {
    delta: Delta,
    report: &'a FitReport,
    /// Each parameter's natural coordinate.
    scales: Vec<Natural>,
    /// The fitted parameters in natural coordinates.
    center_u: Vec<f64>,
    /// Columns of a square root of the covariance in natural coordinates, each over every
    /// parameter of the model (0 for those outside the covariance).
    roots: Vec<Vec<f64>>,
    draws: OnceCell<Draws>,
}

impl<'a> Checker<'a> {
    /// The checker of a report; `None` where [`Delta::of`] is, or where a fitted parameter
    /// lies outside its natural coordinate's domain.
    pub fn of(report: &'a FitReport) -> Option<Checker<'a>> {
        let delta = Delta::of(report)?;
        let scales: Vec<Natural> = (0..delta.center.len())
            .map(|i| natural(delta.kind, i))
            .collect();
        let (center_u, jacobian): (Vec<f64>, Vec<f64>) = scales
            .iter()
            .zip(&delta.center)
            .map(|(s, &p)| s.to_u(p))
            .collect::<Option<Vec<_>>>()?
            .into_iter()
            .unzip();
        let k = delta.index.len();
        let cov = DMatrix::from_fn(k, k, |r, c| {
            delta.cov[r][c] * jacobian[delta.index[r]] * jacobian[delta.index[c]]
        });
        if cov.iter().any(|v| !v.is_finite()) {
            return None;
        }
        let eigen = SymmetricEigen::new(cov);
        let roots = (0..k)
            .map(|j| {
                let scale = eigen.eigenvalues[j].max(0.0).sqrt();
                let mut column = vec![0.0; delta.center.len()];
                for (r, &i) in delta.index.iter().enumerate() {
                    column[i] = eigen.eigenvectors[(r, j)] * scale;
                }
                column
            })
            .collect();
        Some(Checker {
            delta,
            report,
            scales,
            center_u,
            roots,
            draws: OnceCell::new(),
        })
    }

    /// Parameters from natural coordinates: the fitted ones, moved by `step` in u.
    fn params_at(&self, step: impl Fn(usize) -> f64) -> Vec<f64> {
        self.scales
            .iter()
            .zip(&self.center_u)
            .enumerate()
            .map(|(i, (s, u))| s.to_p(u + step(i)))
            .collect()
    }

    /// The delta method underneath.
    pub fn delta(&self) -> &Delta {
        &self.delta
    }

    fn valid(&self, p: &[f64]) -> bool {
        self.delta.kind.check_params(p).is_ok()
    }

    /// The parameter draws (made once per fit, on first use).
    pub fn draws(&self) -> &Draws {
        self.draws.get_or_init(|| self.make_draws(MC_DRAWS))
    }

    fn make_draws(&self, n: usize) -> Draws {
        let mut rng = ChaCha8Rng::seed_from_u64(MC_SEED);
        let nu = self.delta.dof as f64;
        let chi = ChiSquared::new(nu).ok();
        let mut params = Vec::with_capacity(n);
        let mut attempts = 0;
        while params.len() < n && attempts < 20 * n {
            attempts += 1;
            let z: Vec<f64> = (0..self.roots.len())
                .map(|_| StandardNormal.sample(&mut rng))
                .collect();
            let scale = chi
                .as_ref()
                .map_or(1.0, |c| (nu / c.sample(&mut rng)).sqrt());
            let p = self.params_at(|i| {
                scale
                    * z.iter()
                        .zip(&self.roots)
                        .map(|(zj, r)| zj * r[i])
                        .sum::<f64>()
            });
            if self.valid(&p) {
                params.push(p);
            }
        }
        Draws { params, attempts }
    }

    /// The 2.5 and 97.5 percentiles of `f` over the draws, and the share of draws where it
    /// exists; `None` when it exists for fewer than 95 % of them.
    pub fn monte_carlo(&self, f: &dyn Fn(&[f64]) -> Option<f64>) -> Option<(f64, f64, f64)> {
        self.monte_carlo_over(f, MC_DRAWS)
    }

    /// As [`Self::monte_carlo`] over the first `count` draws only (for a value that takes a
    /// numerical search to compute).
    pub fn monte_carlo_over(
        &self,
        f: &dyn Fn(&[f64]) -> Option<f64>,
        count: usize,
    ) -> Option<(f64, f64, f64)> {
        let draws = self.draws();
        let used = &draws.params[..count.min(draws.params.len())];
        let mut values: Vec<f64> = used
            .iter()
            .filter_map(|p| f(p))
            .filter(|v| v.is_finite())
            .collect();
        let share = values.len() as f64 / used.len().max(1) as f64;
        if values.len() < 100 || share < 0.95 {
            return None;
        }
        values.sort_by(f64::total_cmp);
        Some((quantile(&values, 0.025), quantile(&values, 0.975), share))
    }

    /// The 95 % interval of `value` (gradient `grad`, computed by `f` from a parameter
    /// vector) on `scale`: the delta method's, or the Monte Carlo one where they disagree
    /// (see the module documentation). `None` when the delta method has none.
    pub fn interval(
        &self,
        value: f64,
        grad: &[f64],
        scale: IntervalScale,
        f: &dyn Fn(&[f64]) -> Option<f64>,
    ) -> Option<Interval95> {
        self.interval_over(value, grad, scale, f, MC_DRAWS)
    }

    /// As [`Self::interval`] with the Monte Carlo check over the first `draws` draws: for a
    /// value found by a numerical search ([`SEARCH_DRAWS`]), whose 2,000 evaluations would
    /// take tens of milliseconds a fit.
    pub fn interval_over(
        &self,
        value: f64,
        grad: &[f64],
        scale: IntervalScale,
        f: &dyn Fn(&[f64]) -> Option<f64>,
        draws: usize,
    ) -> Option<Interval95> {
        let delta = self.delta.interval(value, grad, scale)?;
        let causes = self.causes();
        if delta.se <= 0.0 || causes.is_empty() {
            return Some(delta);
        }
        let draws = draws.min(MC_DRAWS);
        let Some((lo, hi, _)) = self.monte_carlo_over(f, draws) else {
            return Some(Interval95 {
                note: Some(format!(
                    "delta method, unchecked ({}): fewer than 95 % of {draws} parameter draws \
                     within the bounds give the value, so no Monte Carlo interval",
                    causes.join("; ")
                )),
                ..delta
            });
        };
        let (Some(d_lo), Some(d_hi), Some(m_lo), Some(m_hi)) = (
            on_scale(delta.lo95, scale),
            on_scale(delta.hi95, scale),
            on_scale(lo, scale),
            on_scale(hi, scale),
        ) else {
            return Some(delta);
        };
        let width = d_hi - d_lo;
        let differs = ((m_hi - m_lo) / width - 1.0)
            .abs()
            .max(((m_lo + m_hi) - (d_lo + d_hi)).abs() / (2.0 * width));
        if differs <= AGREEMENT {
            return Some(delta);
        }
        let se = match scale {
            IntervalScale::Linear => (m_hi - m_lo) / (2.0 * self.delta.t),
            IntervalScale::Log => value * (m_hi - m_lo) / (2.0 * self.delta.t),
        };
        let text = |v: f64| significant(v, 3).unwrap_or_default();
        Some(Interval95 {
            lo95: lo,
            hi95: hi,
            se,
            scale,
            method: IntervalMethod::MonteCarlo,
            note: Some(format!(
                "Monte Carlo ({draws} draws from the parameters' fitted distribution): the \
                 delta method's {}…{} differs from it by {} ({})",
                text(delta.lo95),
                text(delta.hi95),
                if differs >= 10.0 {
                    "more than ten times its width".to_string()
                } else {
                    format!("{} %", (100.0 * differs).round())
                },
                causes.join("; ")
            )),
        })
    }

    /// What may make the delta method unreliable for this fit, as far as its report shows
    /// it: a free parameter whose 95 % interval reaches past a bound, a breakpoint on a
    /// reading (a kink), or few degrees of freedom (n - k <= 2). Empty for an ordinary fit.
    pub fn causes(&self) -> Vec<String> {
        let mut out = Vec::new();
        let specs = self.delta.kind.params();
        for (spec, p) in specs.iter().zip(&self.report.parameters) {
            if let Some([lo, hi]) = p.ci95
                && (lo < spec.lower || hi > spec.upper)
            {
                out.push(format!("{} near its bound", p.name));
            }
            if p.kink_cm.is_some() {
                out.push(format!("{} at a kink", p.name));
            }
        }
        if self.delta.dof <= FEW_DOF {
            out.push(format!(
                "few readings: n - k = {}, t = {}",
                self.delta.dof,
                significant(self.delta.t, 3).unwrap_or_default()
            ));
        }
        out
    }
}

fn on_scale(v: f64, scale: IntervalScale) -> Option<f64> {
    match scale {
        IntervalScale::Linear => v.is_finite().then_some(v),
        IntervalScale::Log => (v > 0.0 && v.is_finite()).then(|| v.ln()),
    }
}

/// The `q` quantile of sorted values, linear between order statistics (type 7).
pub fn quantile(sorted: &[f64], q: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let pos = q * (sorted.len() - 1) as f64;
    let i = pos.floor() as usize;
    let frac = pos - i as f64;
    match sorted.get(i + 1) {
        Some(next) => sorted[i] + frac * (next - sorted[i]),
        None => sorted[i],
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::{FitOptions, Readings, fit_model};
    use crate::model::derived::gradient::theta_gradient;

    fn report() -> FitReport {
        let h = [0.0, 10.0, 30.0, 60.0, 100.0, 330.0, 1000.0, 3000.0, 15000.0];
        let y = [0.412, 0.405, 0.372, 0.33, 0.297, 0.224, 0.171, 0.131, 0.1];
        fit_model(
            ModelKind::VanGenuchten,
            &Readings::new(&h, &y),
            &FitOptions::new(),
        )
        .expect("fits")
    }

    #[test]
    fn quantiles_interpolate() {
        let v = [1.0, 2.0, 3.0, 4.0, 5.0];
        assert!((quantile(&v, 0.5) - 3.0).abs() < 1e-15);
        assert!((quantile(&v, 0.125) - 1.5).abs() < 1e-15);
        assert!((quantile(&v, 1.0) - 5.0).abs() < 1e-15);
    }

    #[test]
    fn a_value_linear_in_the_parameters_gets_the_t_interval_from_the_draws() {
        // theta_s itself: linear, so the Monte Carlo percentiles of multivariate t draws
        // approach the delta method's t interval (2,000 draws: within a few percent).
        let r = report();
        let checker = Checker::of(&r).expect("covariance");
        let mut g = vec![0.0; 4];
        g[1] = 1.0;
        let theta_s = r.values()[1];
        let d = checker
            .delta()
            .interval(theta_s, &g, IntervalScale::Linear)
            .expect("delta");
        let (lo, hi, share) = checker.monte_carlo(&|p| Some(p[1])).expect("mc");
        assert!(share > 0.99, "{share}");
        let ratio = (hi - lo) / (d.hi95 - d.lo95);
        assert!((ratio - 1.0).abs() < 0.06, "width ratio {ratio}");
        let se = r.parameter("theta_s").and_then(|p| p.se).expect("se");
        assert!((d.se / se - 1.0).abs() < 1e-12);
    }

    #[test]
    fn theta_at_field_capacity_keeps_the_delta_interval_on_an_ordinary_fit() {
        let r = report();
        let checker = Checker::of(&r).expect("covariance");
        let kind = ModelKind::VanGenuchten;
        let p = r.values();
        let g = theta_gradient(kind, &p, 336.5).expect("g");
        let f = |q: &[f64]| Some(kind.curve().value(336.5, q));
        let value = f(&p).expect("value");
        let i = checker
            .interval(value, &g, IntervalScale::Linear, &f)
            .expect("interval");
        assert_eq!(i.method, IntervalMethod::DeltaMethod, "{i:?}");
        assert!(i.lo95 < value && value < i.hi95);
    }
}
