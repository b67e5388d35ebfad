//! How much the texture prior changes four-reading fits: error in available water against the
//! known truth, with and without the prior, on seeded synthetic samples.
//!
//! Each sample: a USDA class drawn uniformly from the twelve; its true van Genuchten
//! parameters drawn from that class's distribution in the transformed scale
//! (`ClassParameters::transformed`: theta_r, theta_s, ln alpha, ln(n - 1) normal), with the
//! spread multiplied by `spread` (1: the truth comes from the prior itself, the prior's best
//! case; 2: the prior is twice too confident); theta_r < theta_s - 0.05 and the model's bounds
//! kept by redrawing. Four readings at one of two designs, noise sd 0.01 m3/m3 (the prior
//! fit is told 0.01):
//! - A: 0, 6, 33 and 1500 kPa (the demo core's: the two plates of available water measured);
//! - B: 0, 3, 100 and 1000 kPa (neither field capacity nor wilting point measured).
//!
//! Compared, for available water between 33 and 1500 kPa (m3/m3):
//! - `prior`: van Genuchten with the class prior (`fit::prior`, maximum a posteriori);
//! - `theta_r=0`: van Genuchten to the readings alone with theta_r held at 0 (the usual way
//!   to fit four readings without a prior; 4 parameters cannot be fitted to 4 readings);
//! - `class mean`: the class-mean curve, no readings (texture only).
//!
//! Prints per design and spread: RMSE, median and 90th percentile of |error|, mean error
//! (bias), the share of samples where the prior's error is smaller than `theta_r=0`'s, and the
//! coverage of the truth by the prior fit's 95 % interval (the report's delta method with
//! normal quantiles). Then the demo's four-reading core, both ways.
//!
//! `POREWISE_BENCH_SAMPLES` (default 1000), `POREWISE_BENCH_SEED` (default 1988).
//! `cargo bench --bench prior`, or in a debug build `cargo test --release --bench prior`.

use porewise::analysis::texture::class_prior;
use porewise::analysis::water::available_water_between;
use porewise::fit::prior::{PriorOptions, fit_with_prior};
use porewise::fit::{FitOptions, Readings, fit_model};
use porewise::model::retention::ModelKind;
use porewise::model::texture::TextureClass;
use porewise::model::units::CM_PER_KPA;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};
use rayon::prelude::*;

const FC_KPA: f64 = 33.0;
const PWP_KPA: f64 = 1500.0;
const NOISE: f64 = 0.01;

fn env_usize(name: &str, default: usize) -> usize {
    std::env::var(name)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

fn theta(p: &[f64], h_cm: f64) -> f64 {
    ModelKind::VanGenuchten.curve().value(h_cm, p)
}

fn aw(p: &[f64]) -> f64 {
    theta(p, FC_KPA * CM_PER_KPA) - theta(p, PWP_KPA * CM_PER_KPA)
}

/// True parameters of a class, drawn with the prior's spread times `spread`.
fn draw_truth(rng: &mut ChaCha8Rng, class: TextureClass, spread: f64) -> [f64; 4] {
    let q = class.carsel_parrish().transformed();
    loop {
        let z: [f64; 4] = std::array::from_fn(|j| {
            let d = Normal::new(q[j].mean, q[j].sd * spread).expect("sd");
            d.sample(rng)
        });
        let p = [z[0], z[1], z[2].exp(), 1.0 + z[3].exp()];
        if p[0] >= 0.0 && p[1] <= 0.7 && p[0] < p[1] - 0.05 && p[2] > 1e-4 && p[3] < 10.0 {
            return p;
        }
    }
}

struct Outcome {
    prior: Option<f64>,
    fixed: Option<f64>,
    mean: f64,
    covered: Option<bool>,
}

fn one(seed: u64, design: &[f64; 4], spread: f64) -> Outcome {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let class = TextureClass::ALL[rng.random_range(0..12)];
    let truth = draw_truth(&mut rng, class, spread);
    let noise = Normal::new(0.0, NOISE).expect("sd");
    let h: Vec<f64> = design.iter().map(|k| k * CM_PER_KPA).collect();
    let y: Vec<f64> = h
        .iter()
        .map(|&h| (theta(&truth, h) + noise.sample(&mut rng)).clamp(0.0, 1.0))
        .collect();
    let readings = Readings::new(&h, &y);
    let true_aw = aw(&truth);
    let options = PriorOptions {
        noise_sd: NOISE,
        ..PriorOptions::default()
    };
    let map = fit_with_prior(&readings, &class_prior(class), &options).ok();
    let derived = map
        .as_ref()
        .and_then(|r| available_water_between(r, FC_KPA, PWP_KPA));
    let fixed = fit_model(
        ModelKind::VanGenuchten,
        &readings,
        &FitOptions::new().with_fixed("theta_r", 0.0),
    )
    .ok()
    .filter(|r| r.converged)
    .map(|r| aw(&r.values()) - true_aw);
    Outcome {
        prior: derived.as_ref().map(|(v, _)| v - true_aw),
        fixed,
        mean: aw(&class.carsel_parrish().mean()) - true_aw,
        covered: derived
            .and_then(|(_, i)| i)
            .map(|i| i.lo95 <= true_aw && true_aw <= i.hi95),
    }
}

fn summary(errors: &mut [f64]) -> String {
    if errors.is_empty() {
        return "no fits".into();
    }
    let n = errors.len() as f64;
    let rmse = (errors.iter().map(|e| e * e).sum::<f64>() / n).sqrt();
    let bias = errors.iter().sum::<f64>() / n;
    let mut abs: Vec<f64> = errors.iter().map(|e| e.abs()).collect();
    abs.sort_by(f64::total_cmp);
    let q = |p: f64| abs[((abs.len() - 1) as f64 * p).round() as usize];
    format!(
        "RMSE {rmse:.4}  median |e| {:.4}  90 % |e| {:.4}  bias {bias:+.4}  (n {})",
        q(0.5),
        q(0.9),
        errors.len()
    )
}

fn main() {
    let samples = env_usize("POREWISE_BENCH_SAMPLES", 1000);
    let seed = env_usize("POREWISE_BENCH_SEED", 1988) as u64;
    println!(
        "available water (33-1500 kPa) error against the truth, m3/m3; {samples} samples, \
         seed {seed}, noise sd {NOISE}"
    );
    let designs: [(&str, [f64; 4]); 2] = [
        ("A: 0, 6, 33, 1500 kPa", [0.0, 6.0, 33.0, 1500.0]),
        ("B: 0, 3, 100, 1000 kPa", [0.0, 3.0, 100.0, 1000.0]),
    ];
    for (name, design) in &designs {
        for spread in [1.0, 2.0] {
            let out: Vec<Outcome> = (0..samples)
                .into_par_iter()
                .map(|i| one(seed * 1_000_003 + i as u64, design, spread))
                .collect();
            let mut prior: Vec<f64> = out.iter().filter_map(|o| o.prior).collect();
            let mut fixed: Vec<f64> = out.iter().filter_map(|o| o.fixed).collect();
            let mut mean: Vec<f64> = out.iter().map(|o| o.mean).collect();
            let both: Vec<(f64, f64)> = out
                .iter()
                .filter_map(|o| Some((o.prior?, o.fixed?)))
                .collect();
            let better = both.iter().filter(|(a, b)| a.abs() < b.abs()).count();
            let covered: Vec<bool> = out.iter().filter_map(|o| o.covered).collect();
            println!("\ndesign {name}, truth spread x{spread}");
            println!("  prior       {}", summary(&mut prior));
            println!("  theta_r=0   {}", summary(&mut fixed));
            println!("  class mean  {}", summary(&mut mean));
            println!(
                "  prior closer than theta_r=0 in {:.1} % of {} samples; prior 95 % interval \
                 covers the truth in {:.1} % of {}",
                100.0 * better as f64 / both.len().max(1) as f64,
                both.len(),
                100.0 * covered.iter().filter(|c| **c).count() as f64 / covered.len().max(1) as f64,
                covered.len()
            );
        }
    }
    demo_core();
}

/// The demo's four-reading core (TER1-A-c, loam) both ways, beside the layer's full cores.
fn demo_core() {
    let files = porewise::demo::generate();
    let Some(lab) = files.iter().find(|f| f.name == "lab-a-levee-terrace.csv") else {
        return;
    };
    let core = |code: &str| -> (Vec<f64>, Vec<f64>) {
        lab.text
            .lines()
            .skip(1)
            .map(|l| l.split(',').collect::<Vec<_>>())
            .filter(|c| c.get(3) == Some(&code))
            .filter_map(|c| {
                Some((
                    c.get(5)?.parse::<f64>().ok()? * CM_PER_KPA,
                    c.get(6)?.parse::<f64>().ok()?,
                ))
            })
            .unzip()
    };
    println!(
        "
demo: available water (33-1500 kPa) of the terrace's loam A horizon, m3/m3"
    );
    let (h, y) = core(porewise::demo::FOUR_READING_CORE);
    let readings = Readings::new(&h, &y);
    let options = PriorOptions {
        noise_sd: NOISE,
        ..PriorOptions::default()
    };
    if let Some((v, i)) = fit_with_prior(&readings, &class_prior(TextureClass::Loam), &options)
        .ok()
        .and_then(|r| available_water_between(&r, FC_KPA, PWP_KPA))
    {
        let half = i.map_or(f64::NAN, |i| i.half_width());
        println!(
            "  {} (4 readings) with the loam prior: {v:.4} ± {half:.4}",
            porewise::demo::FOUR_READING_CORE
        );
    }
    if let Ok(r) = fit_model(
        ModelKind::VanGenuchten,
        &readings,
        &FitOptions::new().with_fixed("theta_r", 0.0),
    ) {
        println!(
            "  {} readings only, theta_r = 0: {:.4}",
            porewise::demo::FOUR_READING_CORE,
            aw(&r.values())
        );
    }
    println!(
        "  loam class mean: {:.4}",
        aw(&TextureClass::Loam.carsel_parrish().mean())
    );
    for code in ["TER1-A-a", "TER1-A-b"] {
        let (h, y) = core(code);
        if let Ok(r) = fit_model(
            ModelKind::VanGenuchten,
            &Readings::new(&h, &y),
            &FitOptions::new(),
        ) {
            println!(
                "  {code} ({} readings, readings only): {:.4}",
                h.len(),
                aw(&r.values())
            );
        }
    }
}
