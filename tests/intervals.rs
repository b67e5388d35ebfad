//! 95 % intervals of fitted parameters: positive scale parameters (suctions and inverse
//! suctions) on the log scale, and breakpoints sitting on a measured suction flagged as kinks.
#![allow(clippy::float_cmp)]

use porewise::fit::{FitOptions, FitReport, IntervalScale, ParamEstimate, Readings, fit_model};
use porewise::model::retention::ModelKind;
use statrs::distribution::{ContinuousCDF, StudentsT};

fn fit(kind: ModelKind, h: &[f64], y: &[f64]) -> FitReport {
    fit_model(kind, &Readings::new(h, y), &FitOptions::new()).expect("fits")
}

fn param<'a>(r: &'a FitReport, name: &str) -> &'a ParamEstimate {
    r.parameter(name).expect("parameter")
}

/// Readings of `kind` with `truth` at `h`, plus a fixed scatter of +-`size`.
fn readings(kind: ModelKind, truth: &[f64], h: &[f64], size: f64) -> Vec<f64> {
    let scatter = [1.0, -1.0, 0.5, -0.5, 0.0];
    h.iter()
        .enumerate()
        .map(|(i, &x)| kind.curve().value(x, truth) + size * scatter[i % 5])
        .collect()
}

#[test]
fn suction_parameters_have_log_scale_intervals_that_stay_positive() {
    // Few, scattered readings: h_e is poorly determined. Its Wald interval on the original
    // scale reaches below 0 cm; on the log scale it cannot.
    let h = [0.0, 10.0, 100.0, 1000.0, 15000.0];
    let y = readings(ModelKind::Campbell, &[0.42, 20.0, 4.0], &h, 0.03);
    let r = fit(ModelKind::Campbell, &h, &y);
    let h_e = param(&r, "h_e_cm");
    let (value, se) = (h_e.value, h_e.se.expect("se"));
    let dof = (r.n_points - r.n_free_params) as f64;
    // Student t quantile from statrs (a general-purpose library), two-sided 95 %.
    let t = StudentsT::new(0.0, 1.0, dof).expect("t").inverse_cdf(0.975);
    assert!(
        value - t * se < 0.0,
        "the original-scale interval would be negative here"
    );
    let ci = h_e.ci95.expect("interval");
    assert_eq!(h_e.ci95_scale, Some(IntervalScale::Log));
    assert!(ci[0] > 0.0, "{ci:?}");
    // exp(ln h_e -+ t se / h_e): the estimate is the geometric midpoint.
    assert!(
        (ci[0] / (value * (-t * se / value).exp()) - 1.0).abs() < 1e-9,
        "{ci:?}"
    );
    assert!(
        (ci[1] / (value * (t * se / value).exp()) - 1.0).abs() < 1e-9,
        "{ci:?}"
    );
    // Water contents and exponents keep the symmetric interval.
    for name in ["theta_s", "b"] {
        let p = param(&r, name);
        assert_eq!(p.ci95_scale, Some(IntervalScale::Linear), "{name}");
        let ci = p.ci95.expect("interval");
        let half = t * p.se.expect("se");
        assert!(
            (ci[0] - (p.value - half)).abs() < 1e-12 && (ci[1] - (p.value + half)).abs() < 1e-12
        );
    }
}

#[test]
fn every_suction_and_inverse_suction_parameter_is_on_the_log_scale() {
    let h = [
        0.0, 5.0, 10.0, 20.0, 50.0, 100.0, 330.0, 1000.0, 3000.0, 15000.0, 50000.0,
    ];
    let cases: [(ModelKind, &[f64], &[&str]); 4] = [
        (
            ModelKind::VanGenuchten,
            &[0.06, 0.43, 0.03, 1.7],
            &["alpha_per_cm"],
        ),
        (
            ModelKind::BrooksCorey,
            &[0.05, 0.42, 30.0, 0.45],
            &["h_b_cm"],
        ),
        (ModelKind::Kosugi, &[0.05, 0.42, 200.0, 1.5], &["h_m_cm"]),
        (
            ModelKind::FredlundXing,
            &[0.42, 50.0, 2.0, 1.0, 3000.0],
            &["a_cm", "h_r_cm"],
        ),
    ];
    for (kind, truth, log_names) in cases {
        let y = readings(kind, truth, &h, 0.003);
        let r = fit(kind, &h, &y);
        for p in &r.parameters {
            let Some(ci) = p.ci95 else { continue };
            let want = if log_names.contains(&p.name.as_str()) {
                IntervalScale::Log
            } else {
                IntervalScale::Linear
            };
            assert_eq!(p.ci95_scale, Some(want), "{kind} {}", p.name);
            assert!(
                ci[0] <= p.value && p.value <= ci[1],
                "{kind} {} {ci:?}",
                p.name
            );
            if want == IntervalScale::Log {
                assert!(ci[0] > 0.0, "{kind} {} {ci:?}", p.name);
            }
        }
    }
}

#[test]
fn a_breakpoint_on_a_measured_suction_is_marked_as_a_kink() {
    // The best h_b of these readings is the measured 50 cm itself: the sum of squares has a
    // kink there and the Jacobian only the derivative from one side.
    let h = [
        0.0, 5.0, 10.0, 20.0, 50.0, 100.0, 330.0, 1000.0, 3000.0, 15000.0,
    ];
    let truth = [0.05, 0.42, 50.0, 0.45];
    let scatter = [-2.0, 0.0, 2.0, -1.0, 1.0, -2.0, 0.0, 2.0, -1.0, 1.0];
    let y: Vec<f64> = h
        .iter()
        .zip(scatter)
        .map(|(&x, s)| ModelKind::BrooksCorey.curve().value(x, &truth) + 0.002 * s)
        .collect();
    let r = fit(ModelKind::BrooksCorey, &h, &y);
    let h_b = param(&r, "h_b_cm");
    assert_eq!(h_b.value, 50.0, "{r:?}");
    assert_eq!(h_b.kink_cm, Some(50.0));
    let message = r.message.as_deref().unwrap_or("");
    assert!(
        message.contains("h_b_cm sits on the measured suction 50 cm")
            && message.contains("one-sided derivative and are approximate"),
        "{message}"
    );
    // A report stored by an earlier version (no criteria count, intervals on the original
    // scale without a scale, no kink) reads back as the current one.
    let mut json = serde_json::to_value(&r).expect("encodes");
    let obj = json.as_object_mut().expect("object");
    obj.remove("n_criteria_params");
    obj.insert("message".into(), serde_json::Value::Null);
    for p in obj["parameters"].as_array_mut().expect("parameters") {
        let p = p.as_object_mut().expect("parameter");
        p.remove("ci95_scale");
        p.remove("kink_cm");
    }
    let mut old: FitReport = serde_json::from_value(json).expect("decodes");
    assert!(old.upgrade_stored());
    assert_eq!(old, r);
    // The other parameters are not breakpoints.
    assert!(
        r.parameters
            .iter()
            .filter(|p| p.name != "h_b_cm")
            .all(|p| p.kink_cm.is_none())
    );
    // Off the readings there is no kink.
    let y: Vec<f64> = h
        .iter()
        .map(|&x| {
            ModelKind::BrooksCorey
                .curve()
                .value(x, &[0.05, 0.42, 30.0, 0.45])
        })
        .zip([
            0.002, -0.002, 0.001, -0.001, 0.0, 0.002, -0.002, 0.001, -0.001, 0.0,
        ])
        .map(|(v, s)| v + s)
        .collect();
    let r = fit(ModelKind::BrooksCorey, &h, &y);
    assert!(
        param(&r, "h_b_cm").kink_cm.is_none(),
        "{:?}",
        param(&r, "h_b_cm")
    );
}
