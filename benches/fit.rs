//! Fit benchmark: 10,000 synthetic van Genuchten samples of 6-14 readings.
//!
//! Prints fits per second on one core and on all cores (rayon), the share of fits whose SSE
//! is within 1e-6 relative of the best of many random restarts, and writes the samples to a
//! CSV (`sample,suction_cm,theta`) so a baseline script can be timed on the same data. With
//! `POREWISE_BASELINE=/path/to/script.py` set it runs `python3 script CSV [N]` itself and prints
//! the per-fit ratio. `POREWISE_BENCH_SAMPLES` changes the sample count (default 10,000),
//! `POREWISE_BASELINE_SAMPLES` the baseline's (default all), `POREWISE_BENCH_RESTARTS` the random
//! restarts per sample (default 40); `POREWISE_BENCH_TOL`, `_STEP`, `_PATIENCE` change the fit
//! options; `POREWISE_TRACE=INDEX` fits one sample and prints it; `--breakdown` groups the fits
//! by solver runs; `--one-core` stops after the one-core timing (for instruction counts under
//! callgrind); `POREWISE_BENCH_DUMP=FILE` writes each sample's SSE and best restart SSE.
//! The same samples are also fitted with the generic solver (`with_reference_solver`), the
//! reference of the two-parameter one: time ratio and agreement of the optima are printed
//! (`POREWISE_BENCH_NO_REFERENCE=1` skips it, e.g. under callgrind;
//! `POREWISE_BENCH_GENERIC=1` times the generic solver as the main one).
//!
//! Parameters are drawn around the Carsel & Parrish (1988) class means (Water Resour. Res.
//! 24(5), values from memory, high confidence); noise sd 0.005-0.01 m3/m3. Seeded (ChaCha8).

/// The program's allocator (src/main.rs), so the bench times fits as the program runs them.
#[global_allocator]
static ALLOCATOR: mimalloc::MiMalloc = mimalloc::MiMalloc;

use std::io::Write;
use std::time::Instant;

use porewise::fit::{FitOptions, Readings, fit_curve, fit_model};
use porewise::model::curve::{CurveModel, ParamSpec};
use porewise::model::retention::ModelKind;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};
use rayon::prelude::*;

/// Carsel & Parrish (1988) class means: theta_r, theta_s, alpha (1/cm), n.
const CLASSES: [[f64; 4]; 12] = [
    [0.045, 0.43, 0.145, 2.68],
    [0.057, 0.41, 0.124, 2.28],
    [0.065, 0.41, 0.075, 1.89],
    [0.078, 0.43, 0.036, 1.56],
    [0.034, 0.46, 0.016, 1.37],
    [0.067, 0.45, 0.020, 1.41],
    [0.100, 0.39, 0.059, 1.48],
    [0.095, 0.41, 0.019, 1.31],
    [0.089, 0.43, 0.010, 1.23],
    [0.100, 0.38, 0.027, 1.23],
    [0.070, 0.36, 0.005, 1.09],
    [0.068, 0.38, 0.008, 1.09],
];

/// Suctions a lab run may use, cm (hanging column, sandbox, plates, dewpoint; common practice).
const POOL: [f64; 16] = [
    0.0, 2.0, 5.0, 10.0, 20.0, 30.0, 60.0, 100.0, 200.0, 330.0, 500.0, 1000.0, 3000.0, 5000.0,
    15000.0, 50000.0,
];

struct Sample {
    h: Vec<f64>,
    theta: Vec<f64>,
}

fn generate(count: usize) -> Vec<Sample> {
    let mut rng = ChaCha8Rng::seed_from_u64(20_261_202);
    let vg = ModelKind::VanGenuchten.curve();
    let z = Normal::new(0.0, 1.0).expect("normal");
    (0..count)
        .map(|_| {
            let c = CLASSES[rng.random_range(0..CLASSES.len())];
            let mut z1 = || -> f64 { z.sample(&mut rng) };
            let p = [
                (c[0] * (0.4 * z1()).exp()).min(0.3),
                (c[1] + 0.03 * z1()).clamp(0.3, 0.65),
                c[2] * (0.4 * z1()).exp(),
                1.0 + (c[3] - 1.0) * (0.25 * z1()).exp(),
            ];
            let k = rng.random_range(6..=14);
            let mut idx: Vec<usize> = (0..POOL.len()).collect();
            for i in 0..k {
                let j = rng.random_range(i..idx.len());
                idx.swap(i, j);
            }
            let mut h: Vec<f64> = idx[..k].iter().map(|&i| POOL[i]).collect();
            h.sort_by(f64::total_cmp);
            let sd = rng.random_range(0.005..0.01);
            let theta = h
                .iter()
                // A reading cannot be negative: noise below zero is cut at 0.
                .map(|&x| (vg.value(x, &p) + sd * z.sample(&mut rng)).max(0.0))
                .collect();
            Sample { h, theta }
        })
        .collect()
}

/// van Genuchten started from one given point (for the random-restart reference).
struct FromStart(Vec<f64>);

impl CurveModel for FromStart {
    fn params(&self) -> &[ParamSpec] {
        ModelKind::VanGenuchten.params()
    }
    fn value(&self, x: f64, p: &[f64]) -> f64 {
        ModelKind::VanGenuchten.curve().value(x, p)
    }
    fn value_and_gradient(&self, x: f64, p: &[f64], grad: &mut [f64]) -> f64 {
        ModelKind::VanGenuchten
            .curve()
            .value_and_gradient(x, p, grad)
    }
    fn initial_guesses(&self, _: &[f64], _: &[f64]) -> Vec<Vec<f64>> {
        vec![self.0.clone()]
    }
}

/// Best SSE over `restarts` random starts (log-uniform alpha, uniform elsewhere).
fn best_of_restarts(s: &Sample, seed: u64, restarts: usize) -> f64 {
    best_fit_of_restarts(s, seed, restarts).0
}

/// Best SSE and parameters over `restarts` random starts.
fn best_fit_of_restarts(s: &Sample, seed: u64, restarts: usize) -> (f64, Vec<f64>) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let opts = FitOptions::new().with_max_extra_starts(0);
    let mut best = (f64::INFINITY, Vec::new());
    for _ in 0..restarts {
        let start = vec![
            rng.random_range(0.0..0.25),
            rng.random_range(0.3..0.65),
            10f64.powf(rng.random_range(-3.5..0.0)),
            rng.random_range(1.05..4.0),
        ];
        let fit = fit_curve(
            &FromStart(start),
            "vg",
            &Readings::new(&s.h, &s.theta),
            &opts,
        );
        if let Ok(r) = fit
            && r.sse < best.0
        {
            best = (r.sse, r.values());
        }
    }
    best
}

fn env_usize(name: &str, default: usize) -> usize {
    std::env::var(name)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

fn main() {
    let count = env_usize("POREWISE_BENCH_SAMPLES", 10_000);
    let samples = generate(count);
    if let Ok(i) = std::env::var("POREWISE_TRACE") {
        let s = &samples[i.parse::<usize>().expect("index")];
        let r = fit_model(
            ModelKind::VanGenuchten,
            &Readings::new(&s.h, &s.theta),
            &FitOptions::new(),
        );
        println!(
            "{:?}\n{:?}\n{:?}",
            s.h,
            s.theta,
            r.map(|r| (r.sse, r.values(), r.runs, r.evaluations))
        );
        println!("best of restarts: {:?}", best_fit_of_restarts(s, 1, 40));
        println!(
            "guesses: {:?}",
            ModelKind::VanGenuchten
                .curve()
                .initial_guesses(&s.h, &s.theta)
        );
        return;
    }
    let csv_path = std::env::temp_dir().join("porewise-bench-vg-samples.csv");
    {
        let mut f = std::io::BufWriter::new(std::fs::File::create(&csv_path).expect("csv"));
        writeln!(f, "sample,suction_cm,theta").expect("write");
        for (i, s) in samples.iter().enumerate() {
            for (h, t) in s.h.iter().zip(&s.theta) {
                writeln!(f, "s{i:05},{h},{t:.6}").expect("write");
            }
        }
    }
    let env_f64 = |name: &str| std::env::var(name).ok().and_then(|v| v.parse::<f64>().ok());
    let mut opts = FitOptions::new();
    if let Some(t) = env_f64("POREWISE_BENCH_TOL") {
        opts = opts.with_tolerance(t);
    }
    if let Some(s) = env_f64("POREWISE_BENCH_STEP") {
        opts = opts.with_step_bound(s);
    }
    if let Some(p) = env_f64("POREWISE_BENCH_PATIENCE") {
        opts = opts.with_patience(p as usize);
    }
    if std::env::var("POREWISE_BENCH_GENERIC").is_ok() {
        opts = opts.with_reference_solver(true);
    }
    let fit = |s: &Sample| {
        fit_model(
            ModelKind::VanGenuchten,
            &Readings::new(&s.h, &s.theta),
            &opts,
        )
    };

    // Warm up, then one core.
    for s in samples.iter().take(200) {
        let _ = fit(s);
    }
    let t0 = Instant::now();
    let ours: Vec<_> = samples.iter().map(fit).collect();
    let one_core = t0.elapsed().as_secs_f64();
    // The generic solver on the same samples, same run: the reference of the two-parameter
    // solver (speed ratio and the same optimum).
    if std::env::var("POREWISE_BENCH_NO_REFERENCE").is_err() {
        let generic = opts.clone().with_reference_solver(true);
        let t0 = Instant::now();
        let slow: Vec<_> = samples
            .iter()
            .map(|s| {
                fit_model(
                    ModelKind::VanGenuchten,
                    &Readings::new(&s.h, &s.theta),
                    &generic,
                )
            })
            .collect();
        let generic_time = t0.elapsed().as_secs_f64();
        let (mut same, mut lower, mut higher, mut worst) = (0usize, 0usize, 0usize, 0.0_f64);
        let mut worst_at = 0;
        for (i, (a, b)) in ours.iter().zip(&slow).enumerate() {
            let (a, b) = (
                a.as_ref().map_or(f64::INFINITY, |r| r.sse),
                b.as_ref().map_or(f64::INFINITY, |r| r.sse),
            );
            let rel = (a - b).abs() / a.max(b);
            if rel <= 1e-10 || a.to_bits() == b.to_bits() {
                same += 1;
            } else if a < b {
                lower += 1;
            } else {
                higher += 1;
            }
            if rel.is_finite() && rel > worst {
                worst = rel;
                worst_at = i;
            }
        }
        println!(
            "generic solver, one core: {:.2} us/fit; two-parameter solver {:.2} us/fit = {:.2}x faster",
            generic_time / count as f64 * 1e6,
            one_core / count as f64 * 1e6,
            generic_time / one_core
        );
        println!(
            "same optimum (SSE within 1e-10 relative): {same}/{count}; two-parameter solver lower in {lower}, higher in {higher}; largest difference {worst:.1e} (sample {worst_at}: {:?} vs {:?})",
            ours[worst_at].as_ref().map(|r| (r.sse, r.values())),
            slow[worst_at].as_ref().map(|r| (r.sse, r.values()))
        );
    }
    if std::env::args().any(|a| a == "--one-core") {
        summary(&ours, count, one_core);
        return;
    }
    let threads = rayon::current_num_threads();
    let t0 = Instant::now();
    let par: Vec<_> = samples.par_iter().map(fit).collect();
    let all_cores = t0.elapsed().as_secs_f64();
    assert_eq!(par.len(), ours.len());

    let per_fit_us = summary(&ours, count, one_core);
    println!("CSV: {}", csv_path.display());
    println!(
        "all cores ({threads} threads): {:.0} fits/s, {:.2} us/fit wall",
        count as f64 / all_cores,
        all_cores / count as f64 * 1e6
    );
    if std::env::args().any(|a| a == "--breakdown") {
        breakdown(&ours);
    }

    let restarts = env_usize("POREWISE_BENCH_RESTARTS", 40);
    let t0 = Instant::now();
    let reference: Vec<f64> = samples
        .par_iter()
        .enumerate()
        .map(|(i, s)| best_of_restarts(s, 7_000_000 + i as u64, restarts))
        .collect();
    let mut good = 0usize;
    let mut worse = Vec::new();
    for (i, (r, &best)) in ours.iter().zip(&reference).enumerate() {
        let sse = r.as_ref().map_or(f64::INFINITY, |r| r.sse);
        if sse <= best * (1.0 + 1e-6) + 1e-15 {
            good += 1;
        } else {
            worse.push((i, sse, best));
        }
    }
    if let Ok(path) = std::env::var("POREWISE_BENCH_DUMP") {
        let mut f = std::io::BufWriter::new(std::fs::File::create(path).expect("dump"));
        for (r, best) in ours.iter().zip(&reference) {
            let sse = r.as_ref().map_or(f64::INFINITY, |r| r.sse);
            writeln!(f, "{sse:e} {best:e}").expect("write");
        }
    }
    println!(
        "SSE within 1e-6 of the best of {restarts} random restarts: {good}/{count} = {:.3} % ({:.1} s)",
        100.0 * good as f64 / count as f64,
        t0.elapsed().as_secs_f64()
    );
    for (i, sse, best) in worse.iter().take(20) {
        let info = ours[*i].as_ref().map(|r| {
            format!(
                "runs {} evals {} r2 {:.4} bound {} n_pts {} {:?}",
                r.runs,
                r.evaluations,
                r.r2.unwrap_or(f64::NAN),
                r.parameters.iter().any(|p| p.at_bound.is_some()),
                r.n_points,
                r.values()
            )
        });
        println!("  worse: s{i:05} sse {sse:.6e} vs best {best:.6e} {info:?}");
    }

    if let Ok(script) = std::env::var("POREWISE_BASELINE") {
        let limit = env_usize("POREWISE_BASELINE_SAMPLES", count);
        let out = std::process::Command::new("python3")
            .arg(&script)
            .arg(&csv_path)
            .arg(limit.to_string())
            .output();
        match out {
            Ok(o) if o.status.success() => {
                let text = String::from_utf8_lossy(&o.stdout);
                let per_fit: Option<f64> =
                    text.split_whitespace().nth(2).and_then(|v| v.parse().ok());
                println!("baseline: {}", text.trim());
                if let Some(b) = per_fit {
                    println!(
                        "baseline {:.1} us/fit vs ours {per_fit_us:.2} us/fit: ratio {:.0}x (one core)",
                        b * 1e6,
                        b * 1e6 / per_fit_us
                    );
                }
            }
            Ok(o) => println!("baseline failed: {}", String::from_utf8_lossy(&o.stderr)),
            Err(e) => println!("baseline could not run: {e}"),
        }
    } else {
        println!(
            "baseline: set POREWISE_BASELINE=path/to/vg_baseline.py to time it on the same CSV"
        );
    }
}

type Outcome = Result<porewise::fit::FitReport, porewise::fit::FitError>;

/// Print the one-core figures (and the sample set); returns microseconds per fit.
fn summary(ours: &[Outcome], count: usize, one_core: f64) -> f64 {
    let per_fit_us = one_core / count as f64 * 1e6;
    let (mut runs, mut evals, mut failed, mut not_conv) = (0usize, 0usize, 0usize, 0usize);
    for r in ours {
        match r {
            Ok(r) => {
                runs += r.runs;
                evals += r.evaluations;
                not_conv += usize::from(!r.converged);
            }
            Err(_) => failed += 1,
        }
    }
    println!("samples: {count} (6-14 readings, noise sd 0.005-0.01)");
    println!(
        "one core:  {:.0} fits/s, {per_fit_us:.2} us/fit (mean {:.2} solver runs, {:.1} evaluations per fit)",
        count as f64 / one_core,
        runs as f64 / count as f64,
        evals as f64 / count as f64
    );
    println!("errors: {failed}, not converged: {not_conv}");
    per_fit_us
}

/// Where the work goes: solver runs and evaluations by kind of result (printed with --breakdown).
fn breakdown(reports: &[Outcome]) {
    let mut groups: std::collections::BTreeMap<String, (usize, usize, usize)> =
        std::collections::BTreeMap::new();
    for r in reports.iter().flatten() {
        let key = format!(
            "runs={} bound={}",
            r.runs.min(9),
            r.parameters.iter().any(|p| p.at_bound.is_some())
        );
        let e = groups.entry(key).or_default();
        e.0 += 1;
        e.1 += r.evaluations;
        e.2 += r.runs;
    }
    for (k, (n, ev, _)) in groups {
        println!(
            "  {k}: {n} fits, {:.1} evaluations each",
            ev as f64 / n as f64
        );
    }
}
