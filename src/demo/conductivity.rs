//! The demo's measured conductivity: evaporation-experiment-like K(h) series for the lab cores
//! of the upper terrace `TER1`, with each core's Ks from a falling-head test.
//!
//! Each core's K follows Mualem's form of its own (generated) van Genuchten curve, with a Ks
//! about its layer's (lognormal, sd 0.3 in ln) and a pore-connectivity L drawn about Mualem's
//! 0.5 (normal, sd 0.8), at suctions an evaporation experiment covers (tensiometers from about
//! 10 to 800 cm; the wettest points are the least certain, as in the method), plus noise of
//! sd 0.1 in log10 K. The measured Ks on the first row differs from the curve's Ks by noise
//! of sd 0.25 in ln (a falling-head test on the same core). All of it is invented.

use std::fmt::Write as _;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};

use super::DemoFile;
use crate::model::conductivity::ConductivityModel;

/// Name of the conductivity file in `demo-db/`.
pub const FILE: &str = "conductivity-ter1.csv";
/// The site whose cores have conductivity data.
pub const SITE: &str = "TER1";
/// Seed of the conductivity data (its own, so the other files do not change with it).
const SEED: u64 = 0x00D0_5EED_0C0D;
/// Suctions an evaporation experiment reads, cm (a core takes 7 to 10 of them).
const SUCTIONS_CM: [f64; 10] = [
    12.0, 25.0, 45.0, 80.0, 130.0, 200.0, 300.0, 430.0, 600.0, 800.0,
];

/// The true curve of one core (drawn by the lab generator) and its layer's Ks.
#[derive(Debug, Clone, PartialEq)]
pub struct Core {
    /// Site code.
    pub site: &'static str,
    /// Layer top, cm.
    pub top_cm: f64,
    /// Layer bottom, cm.
    pub bottom_cm: f64,
    /// Sample code.
    pub code: String,
    /// van Genuchten theta_r.
    pub theta_r: f64,
    /// van Genuchten theta_s.
    pub theta_s: f64,
    /// van Genuchten alpha, 1/cm.
    pub alpha: f64,
    /// van Genuchten n.
    pub n: f64,
    /// The layer's Ks, cm/day.
    pub layer_ks: f64,
}

/// The conductivity file of these cores.
pub fn file(cores: &[Core]) -> DemoFile {
    let mut rng = ChaCha8Rng::seed_from_u64(SEED);
    let unit: Normal<f64> =
        Normal::new(0.0, 1.0).unwrap_or_else(|_| unreachable!("unit normal is valid"));
    let mut text = String::from(
        "site,top_cm,bottom_cm,sample,method,suction_cm,conductivity_cm_per_day,ks_cm_per_day,\
         measured_on,notes\n",
    );
    for (i, core) in cores.iter().enumerate() {
        let ks = core.layer_ks * (0.3 * unit.sample(&mut rng)).exp();
        let l = 0.5 + 0.8 * unit.sample(&mut rng);
        let measured_ks = ks * (0.25 * unit.sample(&mut rng)).exp();
        let count = rng.random_range(7..=10);
        let p = [core.theta_r, core.theta_s, core.alpha, core.n];
        let day = 10 + i;
        for (j, &h) in SUCTIONS_CM[SUCTIONS_CM.len() - count..].iter().enumerate() {
            let Some(k) = ConductivityModel::MualemVanGenuchten.conductivity(h, &p, ks, l) else {
                continue;
            };
            let k = k * 10f64.powf(0.1 * unit.sample(&mut rng));
            let ks_cell = if j == 0 {
                format!("{measured_ks:.3}")
            } else {
                String::new()
            };
            let notes = if j == 0 { "Ks by falling head" } else { "" };
            let _ = writeln!(
                text,
                "{},{:.0},{:.0},{},evaporation,{h:.0},{},{ks_cell},2026-06-{day:02},{notes}",
                core.site,
                core.top_cm,
                core.bottom_cm,
                core.code,
                significant3(k),
            );
        }
    }
    DemoFile { name: FILE, text }
}

/// A positive number to three significant digits, as a lab sheet writes it.
fn significant3(v: f64) -> String {
    crate::model::number::significant(v, 3).unwrap_or_default()
}
