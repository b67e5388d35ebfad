//! The outlier checks on generated campaigns with planted bad readings (seeded), the masking
//! case and the physical checks.
//!
//! The generator is ours: van Genuchten curves (m = 1 - 1/n) with parameters drawn over the
//! ranges of common mineral soils (from memory: theta_r 0.02-0.12, theta_s 0.35-0.55, alpha
//! 0.003-0.1 1/cm, n 1.2-2.8), 6 to 14 suctions log-spaced from 1 to 15,000 cm, two labs each
//! with a sandbox (to 100 cm) and pressure plates, each with its own Gaussian noise level of
//! 0.005-0.01 m3/m3, and gross errors of 0.05-0.15 m3/m3 planted at the wet end, at the dry
//! end, or twice in one sample.

use porewise::fit::outliers::{
    Check, OutlierOptions, OutlierSample, check_sample, leave_one_out_scores, review,
};
use porewise::model::domain::Branch;
use porewise::model::retention::ModelKind;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};

/// van Genuchten (m = 1 - 1/n) water content at suction h, cm.
fn vg(h: f64, theta_r: f64, theta_s: f64, alpha: f64, n: f64) -> f64 {
    let m = 1.0 - 1.0 / n;
    theta_r + (theta_s - theta_r) / (1.0 + (alpha * h).powf(n)).powf(m)
}

/// Where a sample's gross errors go.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Plant {
    Clean,
    WetEnd,
    DryEnd,
    Two,
}

/// Fewest readings of a sample with two planted errors.
const TWO_FEWEST: usize = 8;

struct Generated {
    samples: Vec<OutlierSample>,
    /// Planted reading indices per sample.
    planted: Vec<Vec<usize>>,
}

fn generate(seed: u64, count: usize, model: Option<ModelKind>) -> Generated {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    // Noise of (lab, method): two labs, sandbox and pressure plate.
    let noise: Vec<f64> = (0..4).map(|_| rng.random_range(0.005..0.01)).collect();
    let mut samples = Vec::with_capacity(count);
    let mut planted = Vec::with_capacity(count);
    for s in 0..count {
        let lab = usize::from(rng.random_bool(0.5));
        let plant = match s % 4 {
            0 => Plant::Clean,
            1 => Plant::WetEnd,
            2 => Plant::DryEnd,
            _ => Plant::Two,
        };
        // Two wild readings need six good ones for a four-parameter curve to be judged
        // (n - 2 >= p + 2); with fewer, any four readings fit the model exactly.
        let fewest = if plant == Plant::Two { TWO_FEWEST } else { 6 };
        let n_points = rng.random_range(fewest..=14usize);
        let theta_r = rng.random_range(0.02..0.12);
        let theta_s = rng.random_range(0.35..0.55);
        let alpha = 10f64.powf(rng.random_range(-2.5..-1.0));
        let n = rng.random_range(1.2..2.8);
        let porosity = theta_s + rng.random_range(0.0..0.04);
        let span = 15_000f64.log10();
        let mut h = Vec::with_capacity(n_points);
        let mut theta = Vec::with_capacity(n_points);
        let mut method = Vec::with_capacity(n_points);
        let mut source = Vec::with_capacity(n_points);
        for k in 0..n_points {
            let jitter = rng.random_range(-0.04..0.04);
            let hk = 10f64.powf(span * k as f64 / (n_points - 1) as f64 + jitter);
            let plate = hk > 100.0;
            let sd = noise[lab * 2 + usize::from(plate)];
            let e: f64 = Normal::new(0.0, sd).expect("normal").sample(&mut rng);
            h.push(hk);
            theta.push((vg(hk, theta_r, theta_s, alpha, n) + e).clamp(0.001, 0.999));
            method.push(if plate { "pressure plate" } else { "sandbox" }.to_string());
            source.push(format!("lab-{lab}.csv"));
        }
        let last = n_points - 1;
        let mut bad = Vec::new();
        match plant {
            Plant::Clean => {}
            Plant::WetEnd => bad.push(rng.random_range(0..=1usize)),
            Plant::DryEnd => bad.push(last - rng.random_range(0..=1usize)),
            Plant::Two => {
                let dry = last - rng.random_range(0..=1usize);
                // The second anywhere else, not next to the first.
                let others: Vec<usize> = (0..n_points).filter(|&k| k + 1 < dry).collect();
                bad.push(dry);
                bad.push(others[rng.random_range(0..others.len())]);
            }
        }
        for &k in &bad {
            let size = rng.random_range(0.05..0.15);
            let up = rng.random_bool(0.5);
            let shifted = theta[k] + if up { size } else { -size };
            theta[k] = if (0.001..=0.999).contains(&shifted) {
                shifted
            } else {
                theta[k] + if up { -size } else { size }
            };
        }
        let mut sample = OutlierSample::new(h, theta);
        sample.method = method;
        sample.source = source;
        sample.bulk_density_g_cm3 = Some(2.65 * (1.0 - porosity));
        sample.model = model;
        samples.push(sample);
        planted.push(bad);
    }
    Generated { samples, planted }
}

/// (planted found, planted, clean suggested, clean) over a generated campaign.
fn score(
    seed: u64,
    count: usize,
    model: Option<ModelKind>,
    options: &OutlierOptions,
) -> [usize; 4] {
    let g = generate(seed, count, model);
    let result = review(&g.samples, options);
    let mut tally = [0; 4];
    let mut by_kind = [[0usize; 2]; 4];
    for (k, (bad, r)) in g.planted.iter().zip(&result.samples).enumerate() {
        for i in bad {
            by_kind[k % 4][1] += 1;
            by_kind[k % 4][0] += usize::from(r.findings.iter().any(|f| f.index == *i));
        }
    }
    eprintln!("  found by kind (wet, dry, two): {:?}", &by_kind[1..]);
    for ((s, bad), r) in g.samples.iter().zip(&g.planted).zip(&result.samples) {
        for i in 0..s.h_cm.len() {
            let found = r.findings.iter().any(|f| f.index == i);
            if bad.contains(&i) {
                tally[1] += 1;
                tally[0] += usize::from(found);
            } else {
                tally[3] += 1;
                tally[2] += usize::from(found);
            }
        }
    }
    tally
}

#[test]
fn planted_outliers_are_found_and_clean_readings_left_alone() {
    let options = OutlierOptions::default();
    let mut total = [0; 4];
    for seed in [11, 12, 13] {
        let t = score(seed, 120, Some(ModelKind::VanGenuchten), &options);
        eprintln!(
            "seed {seed}: planted found {}/{} ({:.1} %), clean suggested {}/{} ({:.2} %)",
            t[0],
            t[1],
            100.0 * t[0] as f64 / t[1] as f64,
            t[2],
            t[3],
            100.0 * t[2] as f64 / t[3] as f64
        );
        for k in 0..4 {
            total[k] += t[k];
        }
    }
    let hit = total[0] as f64 / total[1] as f64;
    let false_alarm = total[2] as f64 / total[3] as f64;
    eprintln!(
        "all: planted found {}/{} ({:.1} %), clean suggested {}/{} ({:.2} %)",
        total[0],
        total[1],
        100.0 * hit,
        total[2],
        total[3],
        100.0 * false_alarm
    );
    assert!(
        hit >= 0.90,
        "found only {:.1} % of planted outliers",
        100.0 * hit
    );
    assert!(
        false_alarm <= 0.02,
        "{:.2} % of clean readings suggested",
        100.0 * false_alarm
    );
}

/// A clean van Genuchten sample of `n` readings from 1 to 15,000 cm with seeded noise sd 0.006.
fn clean_sample(n: usize, seed: u64) -> OutlierSample {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let noise = Normal::new(0.0, 0.006).expect("normal");
    let span = 15_000f64.log10();
    let h: Vec<f64> = (0..n)
        .map(|k| 10f64.powf(span * k as f64 / (n - 1) as f64))
        .collect();
    let theta = h
        .iter()
        .map(|&hk| vg(hk, 0.08, 0.45, 0.02, 1.6) + noise.sample(&mut rng))
        .collect();
    let mut s = OutlierSample::new(h, theta);
    s.model = Some(ModelKind::VanGenuchten);
    s
}

#[test]
fn one_wild_reading_does_not_mask_a_second() {
    let options = OutlierOptions::default();
    let mut s = clean_sample(12, 5);
    // Two readings in the middle of the curve, both low: each drags the curve towards the
    // other, so a single leave-one-out pass sees the second well inside the threshold.
    s.theta[6] -= 0.07;
    s.theta[7] -= 0.07;
    let sigma = vec![0.006; 12];
    let single = leave_one_out_scores(&s, ModelKind::VanGenuchten, &sigma);
    let masked = [6, 7]
        .iter()
        .filter(|&&i| single[i].is_some_and(|z| z.abs() < options.threshold_sd))
        .count();
    eprintln!("single pass z: {single:?}");
    assert!(masked >= 1, "no masking in this case: {single:?}");
    let review = check_sample(&s, Some(ModelKind::VanGenuchten), &sigma, &options);
    let found: Vec<usize> = review.findings.iter().map(|f| f.index).collect();
    assert!(found.contains(&6) && found.contains(&7), "found {found:?}");
    assert_eq!(found.len(), 2, "clean readings suggested: {found:?}");
    // The cleaned fit leaves both out.
    assert_eq!(review.cleaned_indices.len(), 10);
}

#[test]
fn water_above_the_porosity_is_suspect() {
    let options = OutlierOptions::default();
    let mut s = clean_sample(10, 6);
    // Porosity 1 - 1.30 / 2.65 = 0.509; the wettest reading at 0.56 is 0.05 above it.
    s.bulk_density_g_cm3 = Some(1.30);
    s.theta[0] = 0.56;
    let sigma = vec![0.006; 10];
    let review = check_sample(&s, Some(ModelKind::VanGenuchten), &sigma, &options);
    let f = review
        .findings
        .iter()
        .find(|f| f.index == 0)
        .expect("the wet reading is suspect");
    let Some(Check::Saturation {
        porosity, excess, ..
    }) = f
        .checks
        .iter()
        .find(|c| matches!(c, Check::Saturation { .. }))
    else {
        panic!("no saturation check: {:?}", f.checks);
    };
    assert!((porosity - (1.0 - 1.30 / 2.65)).abs() < 1e-12);
    assert!((excess - (0.56 - porosity)).abs() < 1e-12);
    assert!(
        f.reason.contains("above the porosity 0.509"),
        "{}",
        f.reason
    );
    // Within the tolerance it is left alone (by the porosity check).
    s.theta[0] = 0.52;
    let review = check_sample(&s, Some(ModelKind::VanGenuchten), &sigma, &options);
    assert!(
        review.findings.iter().all(|f| !f
            .checks
            .iter()
            .any(|c| matches!(c, Check::Saturation { .. }))),
        "{:?}",
        review.findings
    );
}

#[test]
fn water_rising_with_suction_is_suspect_on_one_branch_only() {
    let options = OutlierOptions::default();
    // No model can be fitted to five readings judged with a seven-parameter one here, so
    // only the physical checks speak: the rise from 100 to 330 cm is 0.06 = 7 sd of a
    // difference, and the drier reading is further off the neighbours.
    let h = vec![1.0, 10.0, 100.0, 330.0, 1000.0, 15_000.0];
    let theta = vec![0.45, 0.44, 0.36, 0.42, 0.25, 0.12];
    let mut s = OutlierSample::new(h, theta);
    s.model = Some(ModelKind::Durner);
    let sigma = vec![0.006; 6];
    let review = check_sample(&s, s.model, &sigma, &options);
    assert_eq!(review.findings.len(), 1, "{:?}", review.findings);
    let f = &review.findings[0];
    let Some(Check::Monotonic {
        other_h_cm,
        rise,
        z,
    }) = f.checks.first()
    else {
        panic!("{:?}", f.checks);
    };
    assert!((rise - 0.06).abs() < 1e-12 && (z - 0.06 / (0.006 * 2f64.sqrt())).abs() < 1e-9);
    assert!([2, 3].contains(&f.index), "{f:?}");
    let other = if f.index == 2 { 330.0 } else { 100.0 };
    assert!((other_h_cm - other).abs() < 1e-9, "{f:?}");
    assert!(f.reason.contains("rises 0.060 m3/m3"), "{}", f.reason);
    // A small rise (within the noise) is not suspect.
    let mut small = s.clone();
    small.theta[3] = 0.365;
    assert!(
        check_sample(&small, small.model, &sigma, &options)
            .findings
            .is_empty()
    );
    // A wetting reading is not compared with drying ones.
    let mut wetting = s.clone();
    wetting.branch[3] = Branch::Wetting;
    assert!(
        check_sample(&wetting, wetting.model, &sigma, &options)
            .findings
            .is_empty()
    );
}

#[test]
fn noise_is_estimated_per_method_and_source() {
    let g = generate(21, 60, Some(ModelKind::VanGenuchten));
    let result = review(&g.samples, &OutlierOptions::default());
    assert_eq!(result.noise.levels.len(), 4);
    for level in &result.noise.levels {
        // The generator draws each level from 0.005-0.01; the robust estimate lands near.
        assert!(
            (0.0035..0.012).contains(&level.sd),
            "{}: {}",
            level.label(),
            level.sd
        );
    }
}

#[test]
fn odd_input_gives_no_finding_and_no_panic() {
    let options = OutlierOptions::default();
    // NaN, a short noise vector, too few readings, flat data: nothing to judge, no panic.
    let mut s = OutlierSample::new(
        vec![1.0, 10.0, f64::NAN, 1000.0],
        vec![0.4, 0.38, 0.3, f64::NAN],
    );
    s.model = Some(ModelKind::VanGenuchten);
    let r = check_sample(&s, s.model, &[0.01], &options);
    assert!(r.findings.is_empty(), "{:?}", r.findings);
    let flat = OutlierSample::new(vec![1.0, 10.0, 100.0], vec![0.3; 3]);
    assert!(review(&[flat], &options).samples[0].findings.is_empty());
    assert!(review(&[], &options).samples.is_empty());
    assert!(
        OutlierOptions {
            threshold_sd: f64::NAN,
            ..options
        }
        .validate()
        .is_err()
    );
}
