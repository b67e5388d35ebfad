//! Intervals of the derived values: coverage on seeded synthetic samples with known true
//! parameters, and the delta method against Monte Carlo and a parametric bootstrap.
//!
//! Samples: `tests/common/synthetic.rs` (jittered class averages, 8-10 lab suctions with the
//! 33 and 1500 kPa plates, noise sd 0.005-0.01 m3/m3). Each sample is fitted with the model
//! that made it and its derived values are taken as every report takes them
//! (`analysis::derive_fit`, Ks = 20 cm/day).
//!
//! Prints per model:
//! - coverage: the share of samples whose 95 % interval (as shown: the delta method's, or the
//!   Monte Carlo one where the check found they disagree) contains the true value, for theta
//!   at FC and PWP, available water, air entry, h at Se = 1/2 and K at FC and PWP; the
//!   delta-method interval's own coverage beside it, and how often Monte Carlo was shown;
//! - agreement: for every sample, the Monte Carlo interval (2,000 parameter draws, forced,
//!   not screened) against the delta interval: the share whose width is within 10 % and the
//!   share whose width and centre are (the rule the reports use), and the median width ratio;
//! - bootstrap: for the first `POREWISE_BENCH_BOOT` samples (default 20), `POREWISE_BENCH_REFITS`
//!   refits (default 400) to the fitted curve plus normal noise of the fit's residual sd: the
//!   2.5-97.5 percentile width over the delta method's normal width 2 x 1.96 se (the bootstrap
//!   does not carry Student's t), median and the share within 10 %;
//! - microseconds per `derive_fit`.
//!
//! `POREWISE_BENCH_SAMPLES` samples per model (default 2000), `POREWISE_BENCH_SEED` (default
//! 1414), `POREWISE_BENCH_MODELS` a comma list of model ids (default all).

#[path = "../tests/common/synthetic.rs"]
mod synthetic;

use std::time::Instant;

use porewise::analysis::{FitDerived, derive_fit};
use porewise::fit::delta::{Checker, Interval95};
use porewise::fit::{FitOptions, IntervalScale, Readings, fit_model};
use porewise::model::conductivity::{ConductivityModel, DEFAULT_PORE_CONNECTIVITY};
use porewise::model::derived::gradient::{
    air_entry_gradient, available_water_gradient, conductivity_gradient, half_saturation_gradient,
    theta_gradient,
};
use porewise::model::derived::{air_entry_estimate, suction_at_half_saturation, theta_at_kpa};
use porewise::model::retention::{ModelKind, RetentionCurve};
use porewise::model::units::CM_PER_KPA;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};
use rayon::prelude::*;
use synthetic::{FC_KPA, PWP_KPA, Synthetic, settings};

const KS: f64 = 20.0;

const NAMES: [&str; 7] = [
    "theta_fc",
    "theta_pwp",
    "aw",
    "air_entry",
    "h_half",
    "k_fc",
    "k_pwp",
];

fn env_usize(name: &str, default: usize) -> usize {
    std::env::var(name)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

/// A value of the seven from a curve, as the reports compute it.
fn value_of(which: usize, c: &RetentionCurve) -> Option<f64> {
    let model = ConductivityModel::for_model(c.kind());
    let k =
        |kpa: f64| model?.conductivity(kpa * CM_PER_KPA, c.params(), KS, DEFAULT_PORE_CONNECTIVITY);
    match which {
        0 => theta_at_kpa(c, FC_KPA),
        1 => theta_at_kpa(c, PWP_KPA),
        2 => Some(theta_at_kpa(c, FC_KPA)? - theta_at_kpa(c, PWP_KPA)?),
        3 => air_entry_estimate(c).map(|a| a.suction_cm),
        4 => suction_at_half_saturation(c),
        5 => k(FC_KPA),
        _ => k(PWP_KPA),
    }
}

fn gradient_of(which: usize, kind: ModelKind, p: &[f64]) -> Option<Vec<f64>> {
    let (fc, pwp) = (FC_KPA * CM_PER_KPA, PWP_KPA * CM_PER_KPA);
    let k = |h: f64| {
        conductivity_gradient(
            ConductivityModel::for_model(kind)?,
            h,
            p,
            KS,
            DEFAULT_PORE_CONNECTIVITY,
        )
    };
    match which {
        0 => theta_gradient(kind, p, fc),
        1 => theta_gradient(kind, p, pwp),
        2 => available_water_gradient(kind, p, fc, pwp),
        3 => air_entry_gradient(kind, p),
        4 => half_saturation_gradient(kind, p),
        5 => k(fc),
        _ => k(pwp),
    }
}

fn scale_of(which: usize) -> IntervalScale {
    if which <= 2 {
        IntervalScale::Linear
    } else {
        IntervalScale::Log
    }
}

fn shown(d: &FitDerived, which: usize) -> Option<&Interval95> {
    let i = &d.intervals;
    match which {
        0 => i.theta_field_capacity.as_ref(),
        1 => i.theta_wilting_point.as_ref(),
        2 => i.plant_available_water.as_ref(),
        3 => i.air_entry_cm.as_ref(),
        4 => i.suction_at_half_saturation_cm.as_ref(),
        5 => i.k_field_capacity_cm_per_day.as_ref(),
        _ => i.k_wilting_point_cm_per_day.as_ref(),
    }
}

fn on_scale(v: f64, scale: IntervalScale) -> f64 {
    match scale {
        IntervalScale::Linear => v,
        IntervalScale::Log => v.ln(),
    }
}

/// Per sample and value: truth inside (shown, delta), MC shown, MC agreement.
#[derive(Default, Clone, Copy)]
#[allow(clippy::struct_excessive_bools)] // five independent yes/no tallies of one sample
struct Outcome {
    has: bool,
    inside_shown: bool,
    inside_delta: bool,
    mc_shown: bool,
    /// The fit has a cause for the Monte Carlo check (near a bound, a kink, few readings).
    special: bool,
    /// Forced Monte Carlo: width ratio and centre shift over the delta width, on the scale.
    ratio: Option<f64>,
    shift: Option<f64>,
}

struct SampleResult {
    outcomes: [Outcome; 7],
    micros: f64,
}

fn evaluate(s: &Synthetic) -> Option<SampleResult> {
    let report = fit_model(s.kind, &Readings::new(&s.h, &s.theta), &FitOptions::new()).ok()?;
    if !report.converged {
        return None;
    }
    let set = settings();
    let start = Instant::now();
    let derived = derive_fit(&report, &set, Some(KS), None)?;
    let micros = start.elapsed().as_secs_f64() * 1e6;
    let truth_curve = RetentionCurve::new(s.kind, s.truth.clone()).ok()?;
    let checker = Checker::of(&report);
    let p = report.values();
    let fitted = RetentionCurve::new(s.kind, p.clone()).ok()?;
    let mut outcomes = [Outcome::default(); 7];
    for (which, out) in outcomes.iter_mut().enumerate() {
        let (Some(truth), Some(interval)) = (value_of(which, &truth_curve), shown(&derived, which))
        else {
            continue;
        };
        let scale = scale_of(which);
        let value = value_of(which, &fitted)?;
        let grad = gradient_of(which, s.kind, &p)?;
        let Some(checker) = checker.as_ref() else {
            continue;
        };
        let delta = checker.delta().interval(value, &grad, scale)?;
        out.has = true;
        out.inside_shown = interval.lo95 <= truth && truth <= interval.hi95;
        out.inside_delta = delta.lo95 <= truth && truth <= delta.hi95;
        out.mc_shown = interval.method == porewise::fit::IntervalMethod::MonteCarlo;
        out.special = !checker.causes().is_empty();
        let f = |q: &[f64]| {
            RetentionCurve::new(s.kind, q.to_vec())
                .ok()
                .and_then(|c| value_of(which, &c))
        };
        if let Some((lo, hi, _)) = checker.monte_carlo(&f) {
            let (d_lo, d_hi) = (on_scale(delta.lo95, scale), on_scale(delta.hi95, scale));
            let (m_lo, m_hi) = (on_scale(lo, scale), on_scale(hi, scale));
            let width = d_hi - d_lo;
            if width > 0.0 {
                out.ratio = Some((m_hi - m_lo) / width);
                out.shift = Some(((m_lo + m_hi) - (d_lo + d_hi)).abs() / (2.0 * width));
            }
        }
    }
    Some(SampleResult { outcomes, micros })
}

fn median(mut v: Vec<f64>) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn pct(a: usize, b: usize) -> String {
    if b == 0 {
        "    –".into()
    } else {
        format!("{:5.1}", 100.0 * a as f64 / b as f64)
    }
}

/// Parametric bootstrap of one sample: percentile widths over the delta method's normal
/// width, per value (on its scale).
fn bootstrap(s: &Synthetic, refits: usize, seed: u64) -> Option<[Option<f64>; 7]> {
    let report = fit_model(s.kind, &Readings::new(&s.h, &s.theta), &FitOptions::new()).ok()?;
    let sd = report.residual_sd?;
    let p = report.values();
    let fitted = RetentionCurve::new(s.kind, p.clone()).ok()?;
    let checker = Checker::of(&report)?;
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let noise = Normal::new(0.0, sd).ok()?;
    let model = s.kind.curve();
    let mut values: Vec<Vec<f64>> = vec![Vec::new(); 7];
    for _ in 0..refits {
        let y: Vec<f64> =
            s.h.iter()
                .map(|&h| model.value(h, &p) + noise.sample(&mut rng))
                .collect();
        let Ok(r) = fit_model(s.kind, &Readings::new(&s.h, &y), &FitOptions::new()) else {
            continue;
        };
        let Ok(c) = RetentionCurve::new(s.kind, r.values()) else {
            continue;
        };
        for (which, list) in values.iter_mut().enumerate() {
            if let Some(v) = value_of(which, &c) {
                list.push(on_scale(v, scale_of(which)));
            }
        }
    }
    let mut out = [None; 7];
    for (which, list) in values.iter_mut().enumerate() {
        let (Some(value), Some(grad)) = (value_of(which, &fitted), gradient_of(which, s.kind, &p))
        else {
            continue;
        };
        let Some(var) = checker.delta().variance(&grad) else {
            continue;
        };
        let se = match scale_of(which) {
            IntervalScale::Linear => var.sqrt(),
            IntervalScale::Log => var.sqrt() / value,
        };
        if list.len() < refits / 2 || se <= 0.0 {
            continue;
        }
        list.sort_by(f64::total_cmp);
        let lo = porewise::fit::delta::quantile(list, 0.025);
        let hi = porewise::fit::delta::quantile(list, 0.975);
        out[which] = Some((hi - lo) / (2.0 * 1.959_964 * se));
    }
    Some(out)
}

fn main() {
    let count = env_usize("POREWISE_BENCH_SAMPLES", 2000);
    let seed = env_usize("POREWISE_BENCH_SEED", 1414) as u64;
    let boot = env_usize("POREWISE_BENCH_BOOT", 20);
    let refits = env_usize("POREWISE_BENCH_REFITS", 400);
    let models: Vec<ModelKind> = std::env::var("POREWISE_BENCH_MODELS").map_or_else(
        |_| ModelKind::ALL.to_vec(),
        |list| list.split(',').filter_map(|m| m.parse().ok()).collect(),
    );
    println!(
        "interval bench: {count} synthetic samples per model, seed {seed}, Ks {KS} cm/day, FC {FC_KPA} kPa, PWP {PWP_KPA} kPa\n"
    );
    for kind in models {
        let samples = synthetic::samples(kind, count, seed);
        let results: Vec<SampleResult> = samples.par_iter().filter_map(evaluate).collect();
        println!(
            "{kind}: {} of {count} samples fitted and converged; derive_fit median {:.0} us",
            results.len(),
            median(results.iter().map(|r| r.micros).collect())
        );
        println!(
            "  value       n    coverage shown  delta   MC shown   MC width<=10%  width+centre<=10%  median MC/delta width"
        );
        for (which, name) in NAMES.iter().enumerate() {
            let o: Vec<Outcome> = results
                .iter()
                .map(|r| r.outcomes[which])
                .filter(|o| o.has)
                .collect();
            let n = o.len();
            let ratios: Vec<f64> = o.iter().filter_map(|o| o.ratio).collect();
            let within = ratios.iter().filter(|r| (*r - 1.0).abs() <= 0.1).count();
            let both = o
                .iter()
                .filter(|o| {
                    o.ratio
                        .zip(o.shift)
                        .is_some_and(|(r, s)| (r - 1.0).abs() <= 0.1 && s <= 0.1)
                })
                .count();
            println!(
                "  {name:<10}{n:>5}    {}          {}   {}      {}          {}              {:.3}",
                pct(o.iter().filter(|o| o.inside_shown).count(), n),
                pct(o.iter().filter(|o| o.inside_delta).count(), n),
                pct(o.iter().filter(|o| o.mc_shown).count(), n),
                pct(within, ratios.len()),
                pct(both, ratios.len()),
                median(ratios)
            );
        }
        for special in [false, true] {
            println!(
                "  {} fits: coverage shown / delta (n)",
                if special {
                    "near a bound, kink or few readings"
                } else {
                    "ordinary"
                }
            );
            for (which, name) in NAMES.iter().enumerate() {
                let o: Vec<Outcome> = results
                    .iter()
                    .map(|r| r.outcomes[which])
                    .filter(|o| o.has && o.special == special)
                    .collect();
                let ratios: Vec<f64> = o.iter().filter_map(|o| o.ratio).collect();
                println!(
                    "    {name:<10} {} / {} ({})  MC width within 10 %: {} %",
                    pct(o.iter().filter(|o| o.inside_shown).count(), o.len()),
                    pct(o.iter().filter(|o| o.inside_delta).count(), o.len()),
                    o.len(),
                    pct(
                        ratios.iter().filter(|r| (*r - 1.0).abs() <= 0.1).count(),
                        ratios.len()
                    )
                );
            }
        }
        if boot > 0 {
            let rows: Vec<[Option<f64>; 7]> = samples
                .iter()
                .take(boot)
                .enumerate()
                .collect::<Vec<_>>()
                .par_iter()
                .filter_map(|(i, s)| bootstrap(s, refits, 7000 + *i as u64))
                .collect();
            println!(
                "  parametric bootstrap, {} samples x {refits} refits: percentile width / delta (z) width",
                rows.len()
            );
            for (which, name) in NAMES.iter().enumerate() {
                let r: Vec<f64> = rows.iter().filter_map(|row| row[which]).collect();
                let within = r.iter().filter(|v| (*v - 1.0).abs() <= 0.1).count();
                println!(
                    "  {name:<10}{:>5} samples  median {:.3}  within 10 %: {} %  range {:.3}-{:.3}",
                    r.len(),
                    median(r.clone()),
                    pct(within, r.len()),
                    r.iter().copied().fold(f64::INFINITY, f64::min),
                    r.iter().copied().fold(f64::NEG_INFINITY, f64::max),
                );
            }
        }
        println!();
    }
}
