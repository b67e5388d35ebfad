//! Joint retention and conductivity fits: recovery and time per sample.
//!
//! For each model with a Mualem form (van Genuchten, free m, Brooks-Corey, Kosugi, Durner):
//! - noise-free recovery: one sample of invented true parameters, its water contents at 11
//!   lab suctions and K at 9 evaporation-like suctions; the largest relative error of any
//!   parameter (retention, Ks, L) after the joint fit;
//! - noisy samples (`POREWISE_BENCH_SAMPLES`, default 200; seed `POREWISE_BENCH_SEED`, default
//!   1616): the true parameters jittered per sample, noise sd 0.005 m3/m3 on theta and 0.1 on
//!   log10 K; the median relative error of Ks and the median absolute error of L, the share of
//!   samples whose 95 % interval of Ks and of L holds the truth, the share converged, the mean
//!   number of refits for consistent weights, and the time per joint fit (median and mean,
//!   microseconds, one core), beside the time of the retention-only fit of the same sample.

use std::time::Instant;

use porewise::fit::joint::{
    JointData, JointOptions, JointReport, KPoint, fit_joint, joint_conductivity_model,
};
use porewise::fit::{FitOptions, Readings, fit_model};
use porewise::model::retention::ModelKind;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};

const H_THETA: [f64; 11] = [
    0.0, 10.0, 31.6, 63.0, 100.0, 200.0, 336.5, 1000.0, 3000.0, 5000.0, 15_296.0,
];
const H_K: [f64; 9] = [5.0, 15.0, 40.0, 80.0, 150.0, 250.0, 400.0, 600.0, 900.0];

/// Invented true parameters: retention, Ks (cm/day), L.
fn truth(kind: ModelKind) -> (Vec<f64>, f64, f64) {
    match kind {
        ModelKind::VanGenuchten => (vec![0.06, 0.43, 0.025, 1.6], 35.0, -0.8),
        ModelKind::VanGenuchtenFreeM => (vec![0.05, 0.41, 0.03, 1.9, 0.35], 20.0, 0.9),
        ModelKind::BrooksCorey => (vec![0.04, 0.39, 18.0, 0.45], 60.0, 1.3),
        ModelKind::Kosugi => (vec![0.07, 0.45, 250.0, 1.4], 12.0, -0.3),
        _ => (vec![0.03, 0.47, 0.35, 0.08, 3.0, 0.002, 1.5], 80.0, 0.5),
    }
}

/// The truth jittered: scale-like parameters by a lognormal factor, the rest kept.
fn jitter(kind: ModelKind, rng: &mut ChaCha8Rng) -> (Vec<f64>, f64, f64) {
    let unit: Normal<f64> = Normal::new(0.0, 1.0).expect("unit normal");
    let (mut p, ks, l) = truth(kind);
    for (v, spec) in p.iter_mut().zip(kind.params()) {
        if spec.unit == "1/cm" || spec.unit == "cm" {
            *v *= (0.2 * unit.sample(rng)).exp();
        }
    }
    let ks = ks * (0.5 * unit.sample(rng)).exp();
    let l = l + 0.5 * unit.sample(rng);
    (p, ks, l)
}

struct Sample {
    theta: Vec<f64>,
    k: Vec<f64>,
}

fn sample(kind: ModelKind, p: &[f64], ks: f64, l: f64, noise: Option<&mut ChaCha8Rng>) -> Sample {
    let model = joint_conductivity_model(kind).expect("Mualem form");
    let mut theta: Vec<f64> = H_THETA.iter().map(|&h| kind.curve().value(h, p)).collect();
    let mut k: Vec<f64> = H_K
        .iter()
        .map(|&h| model.conductivity(h, p, ks, l).expect("K"))
        .collect();
    if let Some(rng) = noise {
        let unit: Normal<f64> = Normal::new(0.0, 1.0).expect("unit normal");
        for t in &mut theta {
            *t = (*t + 0.005 * unit.sample(rng)).clamp(0.0, 1.0);
        }
        for v in &mut k {
            *v *= 10f64.powf(0.1 * unit.sample(rng));
        }
    }
    Sample { theta, k }
}

fn fit(kind: ModelKind, s: &Sample) -> Option<JointReport> {
    let at: Vec<KPoint> = H_K.iter().map(|&h| KPoint::Suction(h)).collect();
    fit_joint(
        &JointData {
            h_cm: &H_THETA,
            theta: &s.theta,
            theta_weights: None,
            k_at: &at,
            k_cm_per_day: &s.k,
        },
        &JointOptions::new(kind),
    )
    .ok()
}

fn median(v: &mut [f64]) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn covers(r: &JointReport, index: usize, truth: f64) -> bool {
    r.fit.parameters[index]
        .ci95
        .is_some_and(|[lo, hi]| lo <= truth && truth <= hi)
}

fn main() {
    let n: usize = std::env::var("POREWISE_BENCH_SAMPLES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(200);
    let seed: u64 = std::env::var("POREWISE_BENCH_SEED")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(1616);
    println!(
        "joint retention + conductivity fits: {n} noisy samples per model (seed {seed}), \
         11 theta and 9 K(h) points each"
    );
    println!(
        "{:<22} {:>10} {:>9} {:>9} {:>8} {:>8} {:>6} {:>7} {:>10} {:>10} {:>10}",
        "model",
        "clean err",
        "Ks err",
        "L err",
        "Ks cov",
        "L cov",
        "conv",
        "refits",
        "us median",
        "us mean",
        "us ret."
    );
    for kind in [
        ModelKind::VanGenuchten,
        ModelKind::VanGenuchtenFreeM,
        ModelKind::BrooksCorey,
        ModelKind::Kosugi,
        ModelKind::Durner,
    ] {
        let (p, ks, l) = truth(kind);
        let clean = fit(kind, &sample(kind, &p, ks, l, None));
        let clean_err = clean.map_or(f64::NAN, |r| {
            let mut want = p.clone();
            want.extend([ks, l]);
            r.fit
                .values()
                .iter()
                .zip(&want)
                .map(|(a, b)| (a - b).abs() / b.abs())
                .fold(0.0, f64::max)
        });
        let mut rng = ChaCha8Rng::seed_from_u64(seed ^ (kind as u64).wrapping_mul(0x9E37));
        let nr = kind.params().len();
        let (mut ks_err, mut l_err, mut times, mut ret_times) = (vec![], vec![], vec![], vec![]);
        let (mut ks_cov, mut l_cov, mut converged, mut refits) = (0, 0, 0, 0);
        for _ in 0..n {
            let (p, ks, l) = jitter(kind, &mut rng);
            let _ = rng.random::<u32>();
            let s = sample(kind, &p, ks, l, Some(&mut rng));
            let t0 = Instant::now();
            let _ = fit_model(kind, &Readings::new(&H_THETA, &s.theta), &FitOptions::new());
            ret_times.push(t0.elapsed().as_secs_f64() * 1e6);
            let t0 = Instant::now();
            let r = fit(kind, &s);
            times.push(t0.elapsed().as_secs_f64() * 1e6);
            let Some(r) = r else { continue };
            converged += usize::from(r.fit.converged);
            refits += r.refits;
            ks_err.push((r.ks() - ks).abs() / ks);
            l_err.push((r.pore_connectivity() - l).abs());
            ks_cov += usize::from(covers(&r, nr, ks));
            l_cov += usize::from(covers(&r, nr + 1, l));
        }
        let mean = times.iter().sum::<f64>() / times.len() as f64;
        let share = |c: usize| 100.0 * c as f64 / n as f64;
        println!(
            "{:<22} {:>10.1e} {:>8.1}% {:>9.3} {:>7.1}% {:>7.1}% {:>5.0}% {:>7.1} {:>10.0} {:>10.0} {:>10.0}",
            kind.id(),
            clean_err,
            100.0 * median(&mut ks_err),
            median(&mut l_err),
            share(ks_cov),
            share(l_cov),
            share(converged),
            refits as f64 / n as f64,
            median(&mut times),
            mean,
            median(&mut ret_times),
        );
    }
}
