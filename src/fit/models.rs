//! Fitting the published retention models by kind, and `auto`: every model the readings
//! allow, ranked by AICc with Akaike weights.

use serde::{Deserialize, Serialize};

use super::config::FitOptions;
use super::driver::{Canonical, Hooks, Readings, Screen, fit_curve_with};
use super::error::FitError;
use super::projection;
use super::report::FitReport;
use super::search::{Axis, Factored, Mixture, MixtureGrid, PowerLaw, log_values};
use super::stats::min_points_for_aicc;
use crate::model::retention::fredlund_xing::{self, H_DRY_CM};
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

/// The power law beyond a breakpoint model's air entry.
fn power_law_of(kind: ModelKind) -> Option<PowerLaw> {
    match kind {
        ModelKind::BrooksCorey => Some(PowerLaw {
            exponent: 3,
            inverse: false,
            theta_r: Some(0),
            theta_s: 1,
        }),
        ModelKind::Campbell => Some(PowerLaw {
            exponent: 2,
            inverse: true,
            theta_r: None,
            theta_s: 0,
        }),
        _ => None,
    }
}

/// The wettest non-zero and the driest suction of the readings (cm), for grid ranges.
fn suction_span(x: &[f64]) -> (f64, f64) {
    let lo = x
        .iter()
        .copied()
        .filter(|&h| h > 0.0)
        .fold(f64::INFINITY, f64::min);
    let hi = x.iter().copied().fold(0.0, f64::max);
    if lo.is_finite() && hi > lo {
        (lo, hi)
    } else {
        (1.0, 1e4)
    }
}

/// `per_decade` log-spaced values over [lo, hi] clipped to [min, max].
fn decades(lo: f64, hi: f64, min: f64, max: f64, per_decade: f64) -> Vec<f64> {
    let (lo, hi) = (lo.max(min), hi.min(max));
    let count = ((hi / lo).log10() * per_decade).ceil().max(1.0) as usize + 1;
    log_values(lo, hi, count)
}

fn kosugi_axes(x: &[f64], _: &[f64]) -> Vec<Axis> {
    let (lo, hi) = suction_span(x);
    // The readings' range more finely, and out to the bounds (a very wide curve centred far
    // outside the readings is sometimes the best fit).
    let mut h_m = decades(lo / 10.0, hi * 10.0, 0.01, 1e6, 3.0);
    h_m.extend([0.01, 1e6]);
    h_m.sort_by(f64::total_cmp);
    h_m.dedup();
    vec![
        Axis {
            param: 2,
            values: h_m,
        },
        Axis {
            param: 3,
            values: vec![0.1, 0.25, 0.5, 0.8, 1.2, 1.8, 2.7, 4.0, 6.0],
        },
    ]
}

fn free_m_axes(x: &[f64], _: &[f64]) -> Vec<Axis> {
    let (lo, hi) = suction_span(x);
    vec![
        Axis {
            param: 2,
            values: decades(0.1 / hi, 10.0 / lo, 1e-5, 10.0, 2.0),
        },
        Axis {
            param: 3,
            values: vec![1.05, 1.25, 1.6, 2.2, 3.5, 6.0, 10.0, 15.0],
        },
        Axis {
            param: 4,
            values: vec![0.005, 0.02, 0.06, 0.15, 0.35, 0.7, 1.3, 2.5],
        },
    ]
}

/// ln ln(e + (h/a)^n), the log of Fredlund-Xing's core (0 at h = 0).
fn fredlund_xing_ln_core(h: f64, a: f64, n: f64) -> f64 {
    if h <= 0.0 {
        return 0.0;
    }
    let t = n * (h / a).ln() - 1.0;
    // ln(e + r^n) = 1 + softplus(n ln r - 1).
    let softplus = if t > 0.0 {
        t + (-t).exp().ln_1p()
    } else {
        t.exp().ln_1p()
    };
    softplus.ln_1p()
}

/// Grid values of Fredlund-Xing's a, n, m and h_r.
fn fredlund_xing_values(x: &[f64], _: &[f64]) -> [Vec<f64>; 4] {
    let (lo, hi) = suction_span(x);
    [
        merge_close(
            gaps(x, 0.01, 1e6),
            &decades(lo / 3.0, hi * 3.0, 0.01, 1e6, 2.0),
            1.25,
        ),
        vec![0.4, 0.8, 1.5, 3.0, 6.0, 12.0, 20.0],
        vec![0.03, 0.1, 0.3, 0.7, 1.5, 3.5, 8.0],
        vec![1.0, 10.0, 100.0, 1e3, 1e4, 1e5, 1e6, H_DRY_CM],
    ]
}

/// One Durner mode: van Genuchten's Se with m = 1 - 1/n.
fn durner_mode(h: f64, alpha: f64, n: f64) -> f64 {
    ModelKind::VanGenuchten
        .curve()
        .value(h, &[0.0, 1.0, alpha, n])
}

/// Suction scales placed by the readings: the geometric middle of each pair of consecutive
/// measured (non-zero) suctions, and a decade beyond each end; clipped to [min, max].
///
/// A steep curve drops between two measured suctions, and where between them does not change
/// its fit to them much, so one value per gap covers the steep cases.
fn gaps(x: &[f64], min: f64, max: f64) -> Vec<f64> {
    let mut h: Vec<f64> = x.iter().copied().filter(|&v| v > 0.0).collect();
    h.sort_by(f64::total_cmp);
    h.dedup();
    let (Some(&lo), Some(&hi)) = (h.first(), h.last()) else {
        return vec![1.0_f64.clamp(min, max)];
    };
    let mut out = vec![lo / 10.0];
    out.extend(h.windows(2).map(|w| (w[0] * w[1]).sqrt()));
    out.push(hi * 10.0);
    for v in &mut out {
        *v = v.clamp(min, max);
    }
    out.dedup();
    out
}

/// alpha and n values of a Durner mode.
///
/// Besides the grids, the unimodal van Genuchten fit's alpha and n, so that the fit plus a
/// small second mode (often a steep one in one gap between readings) is scored accurately.
fn durner_grids(x: &[f64], y: &[f64]) -> Vec<MixtureGrid> {
    let alpha = alpha_values(x, 2.0);
    let n = vec![1.1, 1.3, 1.7, 2.5, 4.0, 7.0, 15.0];
    let mut grids = vec![MixtureGrid {
        first: [alpha.clone(), n.clone()],
        second: [alpha.clone(), n.clone()],
        ordered: true,
    }];
    // The unimodal fit and its neighbourhood as one mode, every grid mode as the other.
    if let Ok(r) = fit_model(
        ModelKind::VanGenuchten,
        &Readings::new(x, y),
        &FitOptions::new(),
    ) && r.converged
    {
        let p = r.values();
        let (a, m) = (p[2], p[3] - 1.0);
        let near = MixtureGrid {
            first: [
                [0.7, 0.85, 1.0, 1.18, 1.4]
                    .iter()
                    .map(|f| (a * f).clamp(1e-5, 10.0))
                    .collect(),
                [0.85, 0.93, 1.0, 1.08, 1.18]
                    .iter()
                    .map(|f| (1.0 + m * f).clamp(1.001, 15.0))
                    .collect(),
            ],
            second: [alpha, n],
            ordered: false,
        };
        grids.push(near);
    }
    grids
}

/// `keep` and the values of `extra` not within a factor `ratio` of any value kept, sorted.
fn merge_close(keep: Vec<f64>, extra: &[f64], ratio: f64) -> Vec<f64> {
    let mut out = keep;
    for &x in extra {
        if out.iter().all(|&k| x > k * ratio || x * ratio < k) {
            out.push(x);
        }
    }
    out.sort_by(f64::total_cmp);
    out.dedup();
    out
}

/// alpha values for a grid: one per gap between readings (see [`gaps`]) and `per_decade`
/// a decade beyond the readings' range.
fn alpha_values(x: &[f64], per_decade: f64) -> Vec<f64> {
    let (lo, hi) = suction_span(x);
    let gap_alpha: Vec<f64> = gaps(x, 0.1, 1e5).iter().map(|h| 1.0 / h).collect();
    merge_close(
        gap_alpha,
        &decades(0.1 / hi, 10.0 / lo, 1e-5, 10.0, per_decade),
        1.25,
    )
}

/// A steeper van Genuchten curve with the same theta_r, theta_s and suction at Se = 1/2 as a
/// fitted one: where the readings leave the fall between two of them, the other minimum of the
/// sum of squares is usually a steeper curve (or reached from one).
fn van_genuchten_probes(p: &[f64]) -> Vec<Vec<f64>> {
    let (alpha, n) = (p[2], p[3]);
    let half = |n: f64| (2f64.powf(n / (n - 1.0)) - 1.0).powf(1.0 / n);
    let h_half = half(n) / alpha;
    [4.0]
        .iter()
        .map(|f| {
            let n2 = (1.0 + (n - 1.0) * f).clamp(1.01, 15.0);
            let mut q = p.to_vec();
            q[3] = n2;
            q[2] = (half(n2) / h_half).clamp(1e-5, 10.0);
            q
        })
        .collect()
}

/// The screening of each model (van Genuchten's only after a doubtful first fit).
fn screen_of(kind: ModelKind) -> Option<Screen> {
    let axes: fn(&[f64], &[f64]) -> Vec<Axis> = match kind {
        ModelKind::VanGenuchten => {
            return Some(Screen::Probes {
                probes: van_genuchten_probes,
            });
        }
        ModelKind::Kosugi => kosugi_axes,
        ModelKind::VanGenuchtenFreeM => free_m_axes,
        ModelKind::FredlundXing => {
            return Some(Screen::Factored {
                model: Factored {
                    theta_s: 0,
                    core: [1, 2],
                    power: 3,
                    correction: 4,
                    correction_fn: fredlund_xing::correction,
                    ln_core: fredlund_xing_ln_core,
                },
                values: fredlund_xing_values,
                keep: 8,
            });
        }
        ModelKind::Durner => {
            return Some(Screen::Mixture {
                mix: Mixture {
                    theta_r: 0,
                    theta_s: 1,
                    weight: 2,
                    modes: [[3, 4], [5, 6]],
                },
                mode: durner_mode,
                grids: durner_grids,
                keep: 12,
            });
        }
        _ => return None,
    };
    Some(Screen::Grid { axes, keep: 4 })
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
    let canonical = (kind == ModelKind::Durner).then_some(Canonical {
        out_of_order: |p| p[3] < p[5],
        swap: &[(3, 5), (4, 6)],
        complement: &[2],
        note: "modes out of the usual order (alpha1_per_cm below alpha2_per_cm)",
    });
    let index = |name: &str| kind.params().iter().position(|s| s.name == name);
    let hooks = Hooks {
        canonicalize: canonical,
        linear: index("theta_s").map(|s| (index("theta_r"), s)),
        first_guess: match kind {
            ModelKind::VanGenuchten => Some(van_genuchten::first_guess),
            _ => None,
        },
        kernel: (kind == ModelKind::VanGenuchten).then_some(projection::Kernel::VanGenuchten),
        power_law: power_law_of(kind),
        screen: screen_of(kind),
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
