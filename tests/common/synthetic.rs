//! Seeded synthetic lab samples with known true parameters, for the interval checks
//! (`tests/derived_intervals.rs`) and the coverage bench (`benches/intervals.rs`).
//!
//! True parameters: van Genuchten class averages of Carsel & Parrish (1988) for seven texture
//! classes (from memory; they only need to be typical), jittered per sample; the other models'
//! parameters are derived from the same draws so that the curves span the same range. The
//! suctions: the two pressure-plate steps at 33 and 1500 kPa (336.5 and 15296 cm), which a lab
//! nearly always measures, plus six to eight steps from a pool of common lab suctions (hanging
//! column, sandbox, plates; common practice). Noise: normal with a standard deviation drawn
//! from 0.005-0.01 m3/m3 per sample (a lab's scatter, common practice).
#![allow(dead_code)]

use porewise::model::retention::ModelKind;
use porewise::store::CampaignSettings;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};

/// Field capacity and wilting point of the checks, kPa (the campaign defaults).
pub const FC_KPA: f64 = 33.0;
/// Wilting point, kPa.
pub const PWP_KPA: f64 = 1500.0;

/// Common lab suctions other than the two plates, cm.
const POOL: [f64; 12] = [
    0.0, 3.0, 10.0, 20.0, 31.6, 63.0, 100.0, 200.0, 1000.0, 3000.0, 5000.0, 10000.0,
];

/// (theta_r, theta_s, alpha 1/cm, n) class averages, Carsel & Parrish (1988), from memory.
const CLASSES: [[f64; 4]; 7] = [
    [0.057, 0.41, 0.124, 2.28], // loamy sand
    [0.065, 0.41, 0.075, 1.89], // sandy loam
    [0.078, 0.43, 0.036, 1.56], // loam
    [0.067, 0.45, 0.020, 1.41], // silt loam
    [0.100, 0.39, 0.059, 1.48], // sandy clay loam
    [0.095, 0.41, 0.019, 1.31], // clay loam
    [0.089, 0.43, 0.010, 1.23], // silty clay loam
];

/// One synthetic sample.
#[derive(Debug, Clone)]
pub struct Synthetic {
    /// The model that made it.
    pub kind: ModelKind,
    /// Its true parameters.
    pub truth: Vec<f64>,
    /// Suctions, cm.
    pub h: Vec<f64>,
    /// Water contents with noise, m3/m3.
    pub theta: Vec<f64>,
    /// The noise standard deviation, m3/m3.
    pub noise_sd: f64,
}

/// Campaign settings with the default field capacity and wilting point.
pub fn settings() -> CampaignSettings {
    CampaignSettings {
        name: "synthetic".into(),
        description: None,
        fc_kpa: FC_KPA,
        pwp_kpa: PWP_KPA,
        created_at: chrono::DateTime::UNIX_EPOCH,
    }
}

fn jitter(rng: &mut ChaCha8Rng, sd: f64) -> f64 {
    Normal::new(0.0, sd).expect("normal").sample(rng).exp()
}

/// True parameters of `kind` for a jittered class average.
pub fn truth(kind: ModelKind, rng: &mut ChaCha8Rng) -> Vec<f64> {
    let [r, s, a, n] = CLASSES[rng.random_range(0..CLASSES.len())];
    let theta_r = r * rng.random_range(0.7..1.3);
    let theta_s = s + rng.random_range(-0.03..0.03);
    let alpha = a * jitter(rng, 0.3);
    let n = 1.0 + (n - 1.0) * jitter(rng, 0.15);
    match kind {
        ModelKind::VanGenuchten => vec![theta_r, theta_s, alpha, n],
        ModelKind::VanGenuchtenFreeM => {
            vec![
                theta_r,
                theta_s,
                alpha,
                n,
                (1.0 - 1.0 / n) * jitter(rng, 0.2),
            ]
        }
        ModelKind::BrooksCorey => vec![theta_r, theta_s, 0.5 / alpha, 0.9 * (n - 1.0)],
        ModelKind::Kosugi => {
            // h_m at van Genuchten's Se = 1/2 and sigma from the steepness.
            let m = 1.0 - 1.0 / n;
            let h_m = ((2f64.powf(1.0 / m) - 1.0).powf(1.0 / n)) / alpha;
            vec![theta_r, theta_s, h_m, (0.9 / (n - 1.0)).clamp(0.5, 3.5)]
        }
        ModelKind::Campbell => vec![theta_s, 0.4 / alpha, (1.0 / (n - 1.0)).clamp(2.0, 12.0)],
        ModelKind::FredlundXing => vec![theta_s, 1.0 / alpha, 1.3 * n, 1.0, 15296.0],
        ModelKind::Durner => vec![
            theta_r,
            theta_s,
            rng.random_range(0.25..0.5),
            alpha * 5.0,
            1.0 + 2.0 * (n - 1.0),
            alpha / 3.0,
            n,
        ],
    }
}

/// A sample of `kind`: its truth, lab-like suctions and noisy readings.
pub fn sample(kind: ModelKind, rng: &mut ChaCha8Rng) -> Synthetic {
    let truth = truth(kind, rng);
    let extra = rng.random_range(6..=8);
    let mut pool = POOL.to_vec();
    let mut h = vec![336.5, 15296.0];
    for _ in 0..extra {
        let i = rng.random_range(0..pool.len());
        h.push(pool.swap_remove(i));
    }
    h.sort_by(f64::total_cmp);
    let noise_sd = rng.random_range(0.005..0.01);
    let noise = Normal::new(0.0, noise_sd).expect("normal");
    let model = kind.curve();
    let theta = h
        .iter()
        .map(|&x| model.value(x, &truth) + noise.sample(rng))
        .collect();
    Synthetic {
        kind,
        truth,
        h,
        theta,
        noise_sd,
    }
}

/// `count` samples of `kind` from `seed`.
pub fn samples(kind: ModelKind, count: usize, seed: u64) -> Vec<Synthetic> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    (0..count).map(|_| sample(kind, &mut rng)).collect()
}
