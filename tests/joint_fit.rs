//! Retention and measured conductivity fitted together (`porewise::fit::joint`): noise-free
//! synthetic data from every model with a Mualem form are recovered, the weights are
//! iterated to consistency on noisy data, and fixed Ks and L are held.

use porewise::fit::joint::{
    JointData, JointOptions, KPoint, Weighting, fit_joint, joint_conductivity_model,
};
use porewise::model::retention::ModelKind;

/// Lab suctions of a retention curve, cm (sandbox, pressure plates, dew point).
const H_THETA: [f64; 11] = [
    0.0, 10.0, 31.6, 63.0, 100.0, 200.0, 336.5, 1000.0, 3000.0, 5000.0, 15_296.0,
];
/// Suctions of an evaporation-like conductivity series, cm.
const H_K: [f64; 9] = [5.0, 15.0, 40.0, 80.0, 150.0, 250.0, 400.0, 600.0, 900.0];

/// A model with invented true parameters, Ks (cm/day) and L.
fn truth(kind: ModelKind) -> (Vec<f64>, f64, f64) {
    match kind {
        ModelKind::VanGenuchten => (vec![0.06, 0.43, 0.025, 1.6], 35.0, -0.8),
        ModelKind::VanGenuchtenFreeM => (vec![0.05, 0.41, 0.03, 1.9, 0.35], 20.0, 0.9),
        ModelKind::BrooksCorey => (vec![0.04, 0.39, 18.0, 0.45], 60.0, 1.3),
        ModelKind::Kosugi => (vec![0.07, 0.45, 250.0, 1.4], 12.0, -0.3),
        ModelKind::Durner => (vec![0.03, 0.47, 0.35, 0.08, 3.0, 0.002, 1.5], 80.0, 0.5),
        _ => unreachable!("no Mualem form"),
    }
}

/// Noise-free theta at `H_THETA` and K at `H_K` from the truth.
fn synthetic(kind: ModelKind, p: &[f64], ks: f64, l: f64) -> (Vec<f64>, Vec<KPoint>, Vec<f64>) {
    let theta = H_THETA.iter().map(|&h| kind.curve().value(h, p)).collect();
    let model = joint_conductivity_model(kind).expect("Mualem form");
    let k = H_K
        .iter()
        .map(|&h| model.conductivity(h, p, ks, l).expect("finite K"))
        .collect();
    (theta, H_K.iter().map(|&h| KPoint::Suction(h)).collect(), k)
}

fn max_relative_error(found: &[f64], want: &[f64]) -> f64 {
    found
        .iter()
        .zip(want)
        .map(|(f, w)| (f - w).abs() / w.abs().max(1e-300))
        .fold(0.0, f64::max)
}

#[test]
fn noise_free_data_of_every_mualem_model_are_recovered_to_1e_6() {
    for kind in [
        ModelKind::VanGenuchten,
        ModelKind::VanGenuchtenFreeM,
        ModelKind::BrooksCorey,
        ModelKind::Kosugi,
        ModelKind::Durner,
    ] {
        let (p, ks, l) = truth(kind);
        let (theta, k_at, k) = synthetic(kind, &p, ks, l);
        let data = JointData {
            h_cm: &H_THETA,
            theta: &theta,
            theta_weights: None,
            k_at: &k_at,
            k_cm_per_day: &k,
        };
        let report = fit_joint(&data, &JointOptions::new(kind)).expect("fits");
        let mut want = p.clone();
        want.extend([ks, l]);
        let err = max_relative_error(&report.fit.values(), &want);
        println!(
            "{kind:?}: largest relative error {err:.1e}, {} refits",
            report.refits
        );
        assert!(
            err < 1e-6,
            "{kind:?}: found {:?}, want {want:?} (relative error {err:.1e})",
            report.fit.values()
        );
        assert!(report.retention.sse < 1e-18, "{kind:?}");
        assert!(report.conductivity.sse < 1e-14, "{kind:?}");
    }
}

#[test]
fn conductivity_at_a_water_content_is_fitted_too() {
    let kind = ModelKind::VanGenuchten;
    let (p, ks, l) = truth(kind);
    let model = joint_conductivity_model(kind).expect("Mualem");
    let theta: Vec<f64> = H_THETA.iter().map(|&h| kind.curve().value(h, &p)).collect();
    // Half the K readings at a suction, half at the water content the curve holds there.
    let mut k_at = Vec::new();
    let mut k = Vec::new();
    for (i, &h) in H_K.iter().enumerate() {
        k.push(model.conductivity(h, &p, ks, l).expect("K"));
        k_at.push(if i % 2 == 0 {
            KPoint::Suction(h)
        } else {
            KPoint::Water(kind.curve().value(h, &p))
        });
    }
    let data = JointData {
        h_cm: &H_THETA,
        theta: &theta,
        theta_weights: None,
        k_at: &k_at,
        k_cm_per_day: &k,
    };
    let report = fit_joint(&data, &JointOptions::new(kind)).expect("fits");
    let mut want = p;
    want.extend([ks, l]);
    let err = max_relative_error(&report.fit.values(), &want);
    assert!(err < 1e-6, "relative error {err:.1e}");
}

/// A seeded normal draw (Box-Muller over a small linear congruential generator, so the
/// test needs no random crate and the draws never change).
struct Draws(u64);

impl Draws {
    fn uniform(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        ((self.0 >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    fn normal(&mut self) -> f64 {
        let (u, v) = (self.uniform(), self.uniform());
        (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
    }
}

#[test]
fn estimated_weights_are_consistent_with_the_residuals() {
    let kind = ModelKind::VanGenuchten;
    let (p, ks, l) = truth(kind);
    let (mut theta, k_at, mut k) = synthetic(kind, &p, ks, l);
    let mut draws = Draws(1616);
    for t in &mut theta {
        *t += 0.004 * draws.normal();
    }
    for v in &mut k {
        *v *= 10f64.powf(0.15 * draws.normal());
    }
    let data = JointData {
        h_cm: &H_THETA,
        theta: &theta,
        theta_weights: None,
        k_at: &k_at,
        k_cm_per_day: &k,
    };
    let report = fit_joint(&data, &JointOptions::new(kind)).expect("fits");
    assert!(report.weights_consistent, "{:?}", report.notes);
    assert!(report.refits > 1);
    // At consistency each set's weighted SSE equals its share of the degrees of freedom, so
    // the joint residual variance s^2 is 1.
    let s = report.fit.residual_sd.expect("dof");
    assert!((s - 1.0).abs() < 1e-4, "s = {s}");
    let (st, sk) = (
        report.retention.sigma.expect("estimated"),
        report.conductivity.sigma.expect("estimated"),
    );
    assert!((0.001..0.01).contains(&st), "sigma theta {st}");
    assert!((0.05..0.4).contains(&sk), "sigma log10 K {sk}");
    // Every parameter has a standard error and the covariance covers all six.
    for e in &report.fit.parameters {
        assert!(e.se.is_some_and(|se| se > 0.0), "{}", e.name);
    }
    assert_eq!(
        report.fit.covariance.as_ref().map(|c| c.names.len()),
        Some(6)
    );
    assert!(
        report
            .notes
            .iter()
            .any(|n| n.contains("weighted by its own noise"))
    );
}

#[test]
fn fixed_ks_and_l_are_held_and_a_user_weight_is_stated() {
    let kind = ModelKind::Kosugi;
    let (p, ks, l) = truth(kind);
    let (theta, k_at, k) = synthetic(kind, &p, ks, l);
    let data = JointData {
        h_cm: &H_THETA,
        theta: &theta,
        theta_weights: None,
        k_at: &k_at,
        k_cm_per_day: &k,
    };
    let options = JointOptions {
        ks_cm_per_day: Some(15.0),
        pore_connectivity: Some(0.5),
        weighting: Weighting::User { weight: 0.01 },
        ..JointOptions::new(kind)
    };
    let report = fit_joint(&data, &options).expect("fits");
    assert!((report.ks() - 15.0).abs() < 1e-12);
    assert!((report.pore_connectivity() - 0.5).abs() < 1e-12);
    assert!(report.fit.parameters[4].fixed && report.fit.parameters[5].fixed);
    assert_eq!(report.refits, 1);
    assert!(report.notes.iter().any(|n| n.contains("user weight")));
    assert!(report.notes.iter().any(|n| n.contains("Ks held at 15")));
    // Wrong Ks and L: the conductivity residuals are no longer zero.
    assert!(report.conductivity.sse > 1e-4);
}

#[test]
fn few_conductivity_readings_hold_l_and_bad_input_is_refused() {
    let kind = ModelKind::VanGenuchten;
    let (p, ks, l) = truth(kind);
    let (theta, k_at, k) = synthetic(kind, &p, ks, l);
    let data = JointData {
        h_cm: &H_THETA,
        theta: &theta,
        theta_weights: None,
        k_at: &k_at[..2],
        k_cm_per_day: &k[..2],
    };
    let report = fit_joint(&data, &JointOptions::new(kind)).expect("fits");
    assert!(report.fit.parameters[5].fixed);
    assert!(report.notes.iter().any(|n| n.contains("L held at 0.5")));
    let bad = [1.0, 0.0];
    let data = JointData {
        k_cm_per_day: &bad,
        ..data
    };
    let err = fit_joint(&data, &JointOptions::new(kind)).expect_err("K of 0");
    assert!(err.to_string().contains("reading 2 is 0 cm/day"), "{err}");
    let err = fit_joint(&data, &JointOptions::new(ModelKind::FredlundXing)).expect_err("no form");
    assert!(
        err.to_string().contains("no Mualem conductivity form"),
        "{err}"
    );
}

/// Standard errors of one documented joint fit against an independent computation:
/// `tests/data/joint_se/joint_se.py` fitted the same data (`data.csv`) with scipy's
/// least_squares, the same weighting iterated to consistency, and a finite-difference
/// Jacobian (numpy 2.4, scipy 1.17; see the script's header).
#[test]
fn standard_errors_match_an_independent_computation() {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/joint_se");
    let text = std::fs::read_to_string(dir.join("data.csv")).expect("data");
    let (mut h_theta, mut theta, mut h_k, mut k) = (vec![], vec![], vec![], vec![]);
    for line in text.lines().skip(1) {
        let cells: Vec<&str> = line.split(',').collect();
        let h: f64 = cells[1].parse().expect("h");
        let v: f64 = cells[2].parse().expect("value");
        if cells[0] == "theta" {
            h_theta.push(h);
            theta.push(v);
        } else {
            h_k.push(KPoint::Suction(h));
            k.push(v);
        }
    }
    let reference: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("reference.json")).expect("ref"))
            .expect("json");
    let numbers = |key: &str| -> Vec<f64> {
        reference[key]
            .as_array()
            .expect("array")
            .iter()
            .map(|v| v.as_f64().expect("number"))
            .collect()
    };
    let data = JointData {
        h_cm: &h_theta,
        theta: &theta,
        theta_weights: None,
        k_at: &h_k,
        k_cm_per_day: &k,
    };
    let report = fit_joint(&data, &JointOptions::new(ModelKind::VanGenuchten)).expect("fits");
    assert!(report.weights_consistent);
    let values = report.fit.values();
    let want = numbers("values");
    let err = max_relative_error(&values, &want);
    assert!(err < 1e-6, "values {values:?} against {want:?}: {err:.1e}");
    let se: Vec<f64> = report
        .fit
        .parameters
        .iter()
        .map(|p| p.se.expect("se"))
        .collect();
    let want_se = numbers("standard_errors");
    let err = max_relative_error(&se, &want_se);
    println!("standard errors {se:?}\nreference       {want_se:?}\nrelative {err:.1e}");
    assert!(
        err < 1e-5,
        "standard errors {se:?} against {want_se:?}: {err:.1e}"
    );
    let sigma_theta = reference["sigma_theta"].as_f64().expect("sigma");
    let sigma_k = reference["sigma_log10_k"].as_f64().expect("sigma");
    assert!((report.retention.sigma.expect("sigma") / sigma_theta - 1.0).abs() < 1e-5);
    assert!((report.conductivity.sigma.expect("sigma") / sigma_k - 1.0).abs() < 1e-5);
}
