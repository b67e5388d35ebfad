//! The invented demo campaign: a seeded generator of its source files.
//!
//! Four sites on a made-up river floodplain (a sandy levee, a loamy terrace, a silty backswamp
//! and a clay basin), three or four layers each, two lab cores per layer and 8-12 suction steps
//! per core. Each core's curve is van Genuchten (m = 1 - 1/n) with the Carsel & Parrish (1988)
//! class-mean parameters of its layer's texture, perturbed per core, plus Gaussian measurement
//! noise; a few readings are spoiled on purpose for the outlier review. Three invented labs
//! report in different units and separators, so the demo exercises the importer.
//!
//! The files are committed in `demo-db/`; a test checks that they equal what this generator
//! writes, so they cannot drift. Nothing here is real: names, places and values are invented.

pub mod conductivity;
pub mod logger;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};

use crate::model::retention::ModelKind;
use crate::model::units::{CM_PER_HPA, CM_PER_KPA, PARTICLE_DENSITY_G_CM3};

/// The seed of the demo generator; change it and every demo file changes.
pub const SEED: u64 = 0x00D0_5EED_2026;

/// One generated source file: its name inside `demo-db/` and its text.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct DemoFile {
    /// File name, e.g. `sites.csv`.
    pub name: &'static str,
    /// Full text, UTF-8.
    pub text: String,
}

/// Mean van Genuchten parameters of a texture class, Carsel & Parrish (1988) Table (class means
/// as reproduced in the reference notes; from memory, high): theta_r, theta_s, alpha (1/cm), n,
/// Ks (cm/day); plus a representative sand/silt/clay split (%) for the class (common practice:
/// a point inside the USDA class).
#[derive(Debug, Clone, Copy)]
struct Texture {
    theta_r: f64,
    theta_s: f64,
    alpha: f64,
    n: f64,
    ks: f64,
    sand: f64,
    silt: f64,
    clay: f64,
}

const SAND: Texture = Texture {
    theta_r: 0.045,
    theta_s: 0.43,
    alpha: 0.145,
    n: 2.68,
    ks: 712.8,
    sand: 92.0,
    silt: 5.0,
    clay: 3.0,
};
const LOAMY_SAND: Texture = Texture {
    theta_r: 0.057,
    theta_s: 0.41,
    alpha: 0.124,
    n: 2.28,
    ks: 350.2,
    sand: 82.0,
    silt: 12.0,
    clay: 6.0,
};
const SANDY_LOAM: Texture = Texture {
    theta_r: 0.065,
    theta_s: 0.41,
    alpha: 0.075,
    n: 1.89,
    ks: 106.1,
    sand: 65.0,
    silt: 25.0,
    clay: 10.0,
};
const LOAM: Texture = Texture {
    theta_r: 0.078,
    theta_s: 0.43,
    alpha: 0.036,
    n: 1.56,
    ks: 24.96,
    sand: 41.0,
    silt: 39.0,
    clay: 20.0,
};
const SANDY_CLAY_LOAM: Texture = Texture {
    theta_r: 0.100,
    theta_s: 0.39,
    alpha: 0.059,
    n: 1.48,
    ks: 31.44,
    sand: 58.0,
    silt: 15.0,
    clay: 27.0,
};
const CLAY_LOAM: Texture = Texture {
    theta_r: 0.095,
    theta_s: 0.41,
    alpha: 0.019,
    n: 1.31,
    ks: 6.24,
    sand: 32.0,
    silt: 34.0,
    clay: 34.0,
};
const SILT_LOAM: Texture = Texture {
    theta_r: 0.067,
    theta_s: 0.45,
    alpha: 0.020,
    n: 1.41,
    ks: 10.80,
    sand: 20.0,
    silt: 65.0,
    clay: 15.0,
};
const SILT: Texture = Texture {
    theta_r: 0.034,
    theta_s: 0.46,
    alpha: 0.016,
    n: 1.37,
    ks: 6.00,
    sand: 7.0,
    silt: 87.0,
    clay: 6.0,
};
const SILTY_CLAY_LOAM: Texture = Texture {
    theta_r: 0.089,
    theta_s: 0.43,
    alpha: 0.010,
    n: 1.23,
    ks: 1.68,
    sand: 10.0,
    silt: 56.0,
    clay: 34.0,
};
const SILTY_CLAY: Texture = Texture {
    theta_r: 0.070,
    theta_s: 0.36,
    alpha: 0.005,
    n: 1.09,
    ks: 0.48,
    sand: 6.0,
    silt: 47.0,
    clay: 47.0,
};
const CLAY: Texture = Texture {
    theta_r: 0.068,
    theta_s: 0.38,
    alpha: 0.008,
    n: 1.09,
    ks: 4.80,
    sand: 20.0,
    silt: 20.0,
    clay: 60.0,
};

/// How an invented lab writes its sheets.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum LabStyle {
    /// Comma separated, suction in kPa, theta as a fraction.
    KpaFraction,
    /// Semicolon separated with decimal commas, suction in hPa, theta in percent.
    HpaPercent,
    /// Comma separated, suction as pF, gravimetric water content with the core's bulk density.
    PfGravimetric,
}

/// A site of the scenario with its profile.
struct SiteSpec {
    code: &'static str,
    name: &'static str,
    /// Offset from the scenario origin, in metres east and north.
    east_m: f64,
    north_m: f64,
    elevation_m: f64,
    notes: &'static str,
    lab: LabStyle,
    layers: &'static [(f64, f64, &'static str, Texture)],
}

const SITES: [SiteSpec; 4] = [
    SiteSpec {
        code: "LEV1",
        name: "Levee crest",
        east_m: 0.0,
        north_m: 0.0,
        elevation_m: 14.2,
        notes: "sandy natural levee beside the main channel",
        lab: LabStyle::KpaFraction,
        layers: &[
            (0.0, 20.0, "Ap", LOAMY_SAND),
            (20.0, 55.0, "C1", SAND),
            (55.0, 100.0, "C2", SAND),
            (100.0, 140.0, "2C", SANDY_LOAM),
        ],
    },
    SiteSpec {
        code: "TER1",
        name: "Upper terrace",
        east_m: 850.0,
        north_m: 420.0,
        elevation_m: 17.8,
        notes: "loamy terrace under pasture",
        lab: LabStyle::KpaFraction,
        layers: &[
            (0.0, 25.0, "A", LOAM),
            (25.0, 60.0, "Bt", SANDY_CLAY_LOAM),
            (60.0, 110.0, "BC", CLAY_LOAM),
        ],
    },
    SiteSpec {
        code: "BSW1",
        name: "Backswamp edge",
        east_m: -620.0,
        north_m: 1310.0,
        elevation_m: 12.9,
        notes: "silty backswamp, water table near 1.5 m in spring",
        lab: LabStyle::HpaPercent,
        layers: &[
            (0.0, 20.0, "Ah", SILT_LOAM),
            (20.0, 50.0, "Bg1", SILT),
            (50.0, 90.0, "Bg2", SILTY_CLAY_LOAM),
            (90.0, 130.0, "Cg", SILTY_CLAY),
        ],
    },
    SiteSpec {
        code: "BAS1",
        name: "Clay basin",
        east_m: -1480.0,
        north_m: 2050.0,
        elevation_m: 12.1,
        notes: "heavy clay in a closed basin; cracks in late summer",
        lab: LabStyle::PfGravimetric,
        layers: &[
            (0.0, 15.0, "Ap", CLAY_LOAM),
            (15.0, 45.0, "Bw", CLAY),
            (45.0, 90.0, "Bk", CLAY),
        ],
    },
];

/// The scenario's origin (decimal degrees, WGS 84): the sea at 0 N 0 E, chosen so nobody
/// mistakes the invented sites for a real place.
const ORIGIN_LAT: f64 = 0.012;
const ORIGIN_LON: f64 = 0.018;

/// Lab suction programmes, in each lab's own unit, wettest first (8-12 steps are drawn from these).
const KPA_STEPS: [f64; 12] = [
    0.0, 0.5, 1.0, 2.0, 3.0, 6.0, 10.0, 33.0, 100.0, 300.0, 500.0, 1500.0,
];
const HPA_STEPS: [f64; 12] = [
    0.0, 10.0, 20.0, 30.0, 60.0, 100.0, 200.0, 330.0, 1000.0, 3000.0, 5000.0, 15000.0,
];
const PF_STEPS: [f64; 11] = [0.0, 0.4, 1.0, 1.5, 1.8, 2.0, 2.5, 3.0, 3.4, 3.7, 4.2];

/// van Genuchten (1980) water content with m = 1 - 1/n (suction h in cm).
fn vg_theta(h: f64, theta_r: f64, theta_s: f64, alpha: f64, n: f64) -> f64 {
    ModelKind::VanGenuchten
        .curve()
        .value(h, &[theta_r, theta_s, alpha, n])
}

/// A spoiled reading planted for the review: which core and step, and what went wrong.
struct Planted {
    sample: &'static str,
    /// Index into the core's suction steps (0 = wettest); negative counts from the driest.
    step: i32,
    /// Added to the true water content (m3/m3).
    shift: f64,
    story: &'static str,
}

/// The deliberately bad readings, told in `demo-db/README.md`.
const PLANTED: [Planted; 5] = [
    Planted {
        sample: "LEV1-C2-b",
        step: -1,
        shift: 0.09,
        story: "core lost contact with the 1500 kPa plate and kept its water",
    },
    Planted {
        sample: "TER1-A-a",
        step: 2,
        shift: -0.11,
        story: "core drained on the bench before weighing",
    },
    Planted {
        sample: "BSW1-Bg1-b",
        step: -2,
        shift: 0.08,
        story: "weighing typo at the dry end",
    },
    Planted {
        sample: "BSW1-Bg1-b",
        step: -1,
        shift: 0.07,
        story: "second bad reading in the same core (guards against masking)",
    },
    Planted {
        sample: "BAS1-Bw-a",
        step: 4,
        shift: -0.09,
        story: "air leak in the sandbox",
    },
];

/// A CSV file being generated, quoted properly by the csv crate.
struct Sheet {
    writer: csv::Writer<Vec<u8>>,
}

impl Sheet {
    fn new(delimiter: u8, header: &str) -> Self {
        let mut writer = csv::WriterBuilder::new()
            .delimiter(delimiter)
            .from_writer(Vec::new());
        writer
            .write_record(header.split(','))
            .unwrap_or_else(|_| unreachable!("writing to memory cannot fail"));
        Self { writer }
    }

    fn row(&mut self, fields: &[String]) {
        self.writer
            .write_record(fields)
            .unwrap_or_else(|_| unreachable!("writing to memory cannot fail"));
    }

    fn finish(self, name: &'static str) -> DemoFile {
        let bytes = self
            .writer
            .into_inner()
            .unwrap_or_else(|_| unreachable!("writing to memory cannot fail"));
        DemoFile {
            name,
            text: String::from_utf8(bytes).unwrap_or_else(|_| unreachable!("fields are UTF-8")),
        }
    }
}

/// Write a number with `digits` decimals, with a decimal comma when `comma` is set.
fn num(value: f64, digits: usize, comma: bool) -> String {
    let text = format!("{value:.digits$}");
    if comma { text.replace('.', ",") } else { text }
}

/// Pick `count` of `steps` keeping the first (wettest) and last (driest) and the lab's order.
fn pick_steps(rng: &mut ChaCha8Rng, steps: &[f64], count: usize) -> Vec<f64> {
    let mut keep: Vec<bool> = vec![true; steps.len()];
    let mut dropped = 0;
    while steps.len() - dropped > count {
        let i = rng.random_range(1..steps.len() - 1);
        if keep[i] {
            keep[i] = false;
            dropped += 1;
        }
    }
    steps
        .iter()
        .zip(keep)
        .filter_map(|(s, k)| k.then_some(*s))
        .collect()
}

/// Generate every demo source file, deterministically from [`SEED`].
pub fn generate() -> Vec<DemoFile> {
    let mut rng = ChaCha8Rng::seed_from_u64(SEED);
    let unit = Normal::new(0.0, 1.0).unwrap_or_else(|_| unreachable!("unit normal is valid"));

    let mut sites = Sheet::new(b',', "site,name,latitude,longitude,elevation_m,notes");
    let mut layers = Sheet::new(
        b',',
        "site,top_cm,bottom_cm,horizon,sand_pct,silt_pct,clay_pct,organic_carbon_pct,\
         bulk_density_g_cm3,ks_cm_per_day",
    );
    let mut lab_a = Sheet::new(
        b',',
        "site,top_cm,bottom_cm,sample,method,suction_kpa,theta,measured_on,notes",
    );
    let mut lab_b = Sheet::new(
        b';',
        "site,top_cm,bottom_cm,sample,method,suction_hpa,theta_pct,measured_on",
    );
    let mut lab_c = Sheet::new(
        b',',
        "site,top_cm,bottom_cm,sample,method,pf,water_g_per_g,bulk_density_g_cm3,measured_on",
    );
    // The true curves of the cores that get conductivity data (drawn above as for every core;
    // the conductivity file has its own generator, so the other files do not change).
    let mut k_cores = Vec::new();

    // Metres to degrees near the equator (WGS 84 mean radius, common practice).
    let deg_per_m = 1.0 / 111_195.0;
    for site in &SITES {
        sites.row(&[
            site.code.to_string(),
            site.name.to_string(),
            format!("{:.6}", ORIGIN_LAT + site.north_m * deg_per_m),
            format!("{:.6}", ORIGIN_LON + site.east_m * deg_per_m),
            format!("{:.1}", site.elevation_m),
            site.notes.to_string(),
        ]);
        for (depth_index, &(top, bottom, horizon, tex)) in site.layers.iter().enumerate() {
            // Porosity a little above the class theta_s; bulk density from it.
            // Porosity above the class theta_s: air stays trapped at "saturation" (common practice).
            let porosity = tex.theta_s + 0.04 + 0.005 * unit.sample(&mut rng);
            let bulk_density = PARTICLE_DENSITY_G_CM3 * (1.0 - porosity);
            let organic_carbon = (2.4 * (-(top + bottom) / 2.0 / 25.0).exp()).max(0.1);
            let ks = tex.ks * (0.35 * unit.sample(&mut rng)).exp();
            layers.row(&[
                site.code.to_string(),
                format!("{top:.0}"),
                format!("{bottom:.0}"),
                horizon.to_string(),
                format!("{:.0}", tex.sand),
                format!("{:.0}", tex.silt),
                format!("{:.0}", tex.clay),
                format!("{organic_carbon:.2}"),
                format!("{bulk_density:.2}"),
                format!("{ks:.3}"),
            ]);
            for core in ["a", "b"] {
                let code = format!("{}-{horizon}-{core}", site.code);
                // A core's saturated water content stays below its layer's porosity.
                let theta_s = (tex.theta_s + 0.012 * unit.sample(&mut rng)).min(porosity - 0.015);
                let theta_r = (tex.theta_r + 0.008 * unit.sample(&mut rng)).max(0.0);
                let alpha = tex.alpha * (0.15 * unit.sample(&mut rng)).exp();
                let n = 1.0 + (tex.n - 1.0) * (0.08 * unit.sample(&mut rng)).exp();
                let noise = rng.random_range(0.004..0.008);
                if site.code == conductivity::SITE {
                    k_cores.push(conductivity::Core {
                        site: site.code,
                        top_cm: top,
                        bottom_cm: bottom,
                        code: code.clone(),
                        theta_r,
                        theta_s,
                        alpha,
                        n,
                        layer_ks: ks,
                    });
                }
                // The core's own porosity varies about the layer's, but never below its theta_s.
                let core_porosity = (porosity + 0.008 * unit.sample(&mut rng)).max(theta_s + 0.015);
                let core_density = PARTICLE_DENSITY_G_CM3 * (1.0 - core_porosity);
                let count = rng.random_range(8..=12);
                let day = 3 + depth_index * 2 + usize::from(core == "b");
                let steps: Vec<f64> = match site.lab {
                    LabStyle::KpaFraction => pick_steps(&mut rng, &KPA_STEPS, count),
                    LabStyle::HpaPercent => pick_steps(&mut rng, &HPA_STEPS, count),
                    LabStyle::PfGravimetric => pick_steps(&mut rng, &PF_STEPS, count.min(11)),
                };
                let last = steps.len() as i32 - 1;
                for (i, &step) in steps.iter().enumerate() {
                    let h_cm = match site.lab {
                        LabStyle::KpaFraction => step * CM_PER_KPA,
                        LabStyle::HpaPercent => step * CM_PER_HPA,
                        LabStyle::PfGravimetric => 10f64.powf(step),
                    };
                    let mut theta =
                        vg_theta(h_cm, theta_r, theta_s, alpha, n) + noise * unit.sample(&mut rng);
                    for p in PLANTED.iter().filter(|p| p.sample == code) {
                        let at = if p.step < 0 {
                            last + 1 + p.step
                        } else {
                            p.step
                        };
                        if at == i as i32 {
                            theta += p.shift;
                        }
                    }
                    let theta = theta.clamp(0.001, 0.99);
                    let method = lab_method(h_cm);
                    let mut row = vec![
                        site.code.to_string(),
                        format!("{top:.0}"),
                        format!("{bottom:.0}"),
                        code.clone(),
                        method.to_string(),
                    ];
                    match site.lab {
                        LabStyle::KpaFraction => {
                            row.extend([
                                trim_zeros(step),
                                format!("{theta:.4}"),
                                format!("2026-06-{day:02}"),
                                String::new(),
                            ]);
                            lab_a.row(&row);
                        }
                        LabStyle::HpaPercent => {
                            row.extend([
                                trim_zeros(step),
                                num(theta * 100.0, 2, true),
                                format!("2026-07-{day:02}"),
                            ]);
                            lab_b.row(&row);
                        }
                        LabStyle::PfGravimetric => {
                            row.extend([
                                format!("{step:.1}"),
                                format!("{:.4}", theta / core_density),
                                format!("{core_density:.3}"),
                                format!("2026-08-{day:02}"),
                            ]);
                            lab_c.row(&row);
                        }
                    }
                }
            }
        }
    }
    sparse_additions(&mut layers, &mut lab_a);
    vec![
        sites.finish("sites.csv"),
        layers.finish("layers.csv"),
        lab_a.finish("lab-a-levee-terrace.csv"),
        lab_b.finish("lab-b-backswamp.csv"),
        lab_c.finish("lab-c-basin.csv"),
        conductivity::file(&k_cores),
        logger::file(),
    ]
}

/// The seed of the sparse additions (their own stream, so the rest of the demo stays as it was).
const SPARSE_SEED: u64 = SEED ^ 0x0015;

/// The layer described and sampled for texture but never cored (below `BAS1`'s cores).
pub const TEXTURE_ONLY_LAYER: &str = "BAS1:90-130";

/// The core whose plate run failed after four readings.
pub const FOUR_READING_CORE: &str = "TER1-A-c";

/// The four suctions of [`FOUR_READING_CORE`], kPa: saturation, the sandbox at 6 kPa, the
/// 33 kPa plate and the 1500 kPa plate (the steps between were lost).
const FOUR_STEPS_KPA: [f64; 4] = [0.0, 6.0, 33.0, 1500.0];

/// Two holes a real campaign has: a layer with texture but no core ([`TEXTURE_ONLY_LAYER`],
/// clay) and a core with only four readings ([`FOUR_READING_CORE`], a third core of the
/// terrace's loam), drawn from their own seeded stream.
fn sparse_additions(layers: &mut Sheet, lab_a: &mut Sheet) {
    let mut rng = ChaCha8Rng::seed_from_u64(SPARSE_SEED);
    let unit = Normal::new(0.0, 1.0).unwrap_or_else(|_| unreachable!("unit normal is valid"));
    let tex = CLAY;
    layers.row(&[
        "BAS1".to_string(),
        "90".to_string(),
        "130".to_string(),
        "Ck".to_string(),
        format!("{:.0}", tex.sand),
        format!("{:.0}", tex.silt),
        format!("{:.0}", tex.clay),
        "0.15".to_string(),
        "1.48".to_string(),
        String::new(),
    ]);
    let tex = LOAM;
    let theta_s = tex.theta_s + 0.012 * unit.sample(&mut rng);
    let theta_r = (tex.theta_r + 0.008 * unit.sample(&mut rng)).max(0.0);
    let alpha = tex.alpha * (0.15 * unit.sample(&mut rng)).exp();
    let n = 1.0 + (tex.n - 1.0) * (0.08 * unit.sample(&mut rng)).exp();
    for kpa in FOUR_STEPS_KPA {
        let h_cm = kpa * CM_PER_KPA;
        let theta = (vg_theta(h_cm, theta_r, theta_s, alpha, n) + 0.006 * unit.sample(&mut rng))
            .clamp(0.001, 0.99);
        lab_a.row(&[
            "TER1".to_string(),
            "0".to_string(),
            "25".to_string(),
            FOUR_READING_CORE.to_string(),
            lab_method(h_cm).to_string(),
            trim_zeros(kpa),
            format!("{theta:.4}"),
            "2026-06-20".to_string(),
            "plate run failed after the 1500 kPa step".to_string(),
        ]);
    }
}

/// The apparatus a lab uses at a suction (common practice): sandbox or hanging column at the
/// wet end, pressure plates from about 100 cm.
fn lab_method(h_cm: f64) -> &'static str {
    if h_cm < 50.0 {
        "hanging column"
    } else if h_cm < 100.0 {
        "sandbox"
    } else {
        "pressure plate"
    }
}

/// Print a lab step without trailing zeros (`0.5`, `33`, `1500`).
fn trim_zeros(value: f64) -> String {
    let text = format!("{value:.3}");
    text.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// The story of the planted bad readings, one line each (for `demo-db/README.md` and tests).
pub fn planted_readings() -> Vec<(&'static str, i32, f64, &'static str)> {
    PLANTED
        .iter()
        .map(|p| (p.sample, p.step, p.shift, p.story))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn generation_is_deterministic() {
        assert_eq!(generate(), generate());
    }

    #[test]
    fn every_core_has_8_to_12_steps_and_planted_samples_exist() {
        let files = generate();
        let mut per_sample = std::collections::BTreeMap::<String, usize>::new();
        for f in files.iter().filter(|f| f.name.starts_with("lab-")) {
            let sep = if f.text.lines().next().is_some_and(|l| l.contains(';')) {
                ';'
            } else {
                ','
            };
            for line in f.text.lines().skip(1) {
                let sample = line.split(sep).nth(3).expect("sample column");
                *per_sample.entry(sample.to_string()).or_default() += 1;
            }
        }
        // Two cores per cored layer and the four-reading core.
        assert_eq!(per_sample.len(), 2 * (4 + 3 + 4 + 3) + 1);
        assert_eq!(per_sample.remove(FOUR_READING_CORE), Some(4));
        assert!(
            per_sample.values().all(|&n| (8..=12).contains(&n)),
            "{per_sample:?}"
        );
        for (sample, ..) in planted_readings() {
            assert!(per_sample.contains_key(sample), "{sample} is not generated");
        }
    }
}
