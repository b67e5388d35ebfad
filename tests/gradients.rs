//! Every analytic derivative against central finite differences: d theta / d parameter for each
//! model over realistic parameter ranges (proptest), at h = 0 and at very large suction, and the
//! specific water capacity C(h) against a numerical derivative of theta(h). Also: values and
//! gradients stay finite at every corner of the parameter bounds.
#![allow(clippy::float_cmp)]

use porewise::model::retention::ModelKind;
use proptest::prelude::*;

/// Parameter ranges for the property tests: (lower, upper, sampled in log space).
type Range = (f64, f64, bool);

/// Realistic ranges per model (common practice values, somewhat widened).
fn ranges(kind: ModelKind) -> Vec<Range> {
    let theta_r = (0.0, 0.2, false);
    let theta_s = (0.3, 0.7, false);
    match kind {
        ModelKind::VanGenuchten => vec![theta_r, theta_s, (1e-3, 0.5, true), (1.05, 8.0, false)],
        ModelKind::VanGenuchtenFreeM => vec![
            theta_r,
            theta_s,
            (1e-3, 0.5, true),
            (1.05, 8.0, false),
            (0.05, 3.0, true),
        ],
        ModelKind::BrooksCorey => vec![theta_r, theta_s, (1.0, 150.0, true), (0.05, 3.0, true)],
        ModelKind::Kosugi => vec![theta_r, theta_s, (1.0, 1e5, true), (0.3, 4.0, false)],
        ModelKind::FredlundXing => vec![
            theta_s,
            (1.0, 1e5, true),
            (0.5, 8.0, false),
            (0.3, 4.0, false),
            (100.0, 1e6, true),
        ],
        ModelKind::Durner => vec![
            theta_r,
            theta_s,
            (0.1, 0.9, false),
            (0.01, 0.5, true),
            (1.2, 6.0, false),
            (1e-4, 0.01, true),
            (1.05, 3.0, false),
        ],
        ModelKind::Campbell => vec![theta_s, (1.0, 150.0, true), (2.0, 15.0, false)],
    }
}

/// Map unit-interval draws onto a model's ranges.
fn params_from_unit(kind: ModelKind, u: &[f64]) -> Vec<f64> {
    ranges(kind)
        .iter()
        .zip(u)
        .map(|(&(lo, hi, log), &t)| {
            if log {
                (lo.ln() + t * (hi.ln() - lo.ln())).exp()
            } else {
                lo + t * (hi - lo)
            }
        })
        .collect()
}

/// The break point of a piecewise model, where derivatives jump.
fn break_point(kind: ModelKind, p: &[f64]) -> Option<f64> {
    match kind {
        ModelKind::BrooksCorey => Some(p[2]),
        ModelKind::Campbell => Some(p[1]),
        _ => None,
    }
}

/// Check the analytic gradient at (h, p) against central differences.
fn check_gradient(kind: ModelKind, h: f64, p: &[f64]) -> Result<(), String> {
    let model = kind.curve();
    let mut grad = vec![f64::NAN; p.len()];
    let value = model.value_and_gradient(h, p, &mut grad);
    if value.to_bits() != model.value(h, p).to_bits() && (value - model.value(h, p)).abs() > 1e-15 {
        return Err(format!(
            "value_and_gradient value {value} differs from value"
        ));
    }
    for (k, &g) in grad.iter().enumerate() {
        if !g.is_finite() {
            return Err(format!(
                "d/d{} = {g} at h = {h}, p = {p:?}",
                kind.params()[k].name
            ));
        }
        let step = if p[k] == 0.0 { 1e-7 } else { 1e-6 * p[k].abs() };
        let mut up = p.to_vec();
        let mut down = p.to_vec();
        up[k] += step;
        down[k] -= step;
        let fd = (model.value(h, &up) - model.value(h, &down)) / (2.0 * step);
        // Compare the change in theta over one step: relative 1e-6, absolute 1e-12 m3/m3.
        let tol = 1e-6 * g.abs().max(fd.abs()) + 1e-12 / step;
        if (g - fd).abs() > tol {
            return Err(format!(
                "{} d/d{}: analytic {g:e}, finite difference {fd:e} at h = {h}, p = {p:?}",
                kind,
                kind.params()[k].name
            ));
        }
    }
    Ok(())
}

/// Check C(h) = -d theta / dh against central differences in h.
fn check_capacity(kind: ModelKind, h: f64, p: &[f64]) -> Result<(), String> {
    let model = kind.retention();
    let c = model
        .capacity(h, p)
        .ok_or_else(|| format!("{kind}: no capacity at h = {h}"))?;
    let step = 1e-6 * h;
    let fd = -(model.value(h + step, p) - model.value(h - step, p)) / (2.0 * step);
    let tol = 1e-6 * c.abs().max(fd.abs()) + 1e-12 / step;
    if c < 0.0 || (c - fd).abs() > tol {
        return Err(format!(
            "{kind} C({h}): analytic {c:e}, finite difference {fd:e}, p = {p:?}"
        ));
    }
    Ok(())
}

fn unit_vec(len: usize) -> impl Strategy<Value = Vec<f64>> {
    proptest::collection::vec(0.0..1.0f64, len)
}

fn check_model(kind: ModelKind, u: &[f64], log_h: f64) -> Result<(), TestCaseError> {
    let p = params_from_unit(kind, u);
    let h = 10f64.powf(log_h);
    if let Some(hb) = break_point(kind, &p)
        && (h / hb).ln().abs() < 1e-4
    {
        return Ok(());
    }
    check_gradient(kind, h, &p).map_err(TestCaseError::fail)?;
    check_capacity(kind, h, &p).map_err(TestCaseError::fail)?;
    Ok(())
}

macro_rules! gradient_property {
    ($name:ident, $kind:expr) => {
        proptest! {
            #![proptest_config(ProptestConfig::with_cases(400))]
            #[test]
            fn $name(u in unit_vec($kind.params().len()), log_h in -2.0..6.5f64) {
                check_model($kind, &u, log_h)?;
            }
        }
    };
}

gradient_property!(
    van_genuchten_gradient_matches_finite_differences,
    ModelKind::VanGenuchten
);
gradient_property!(
    van_genuchten_free_m_gradient_matches_finite_differences,
    ModelKind::VanGenuchtenFreeM
);
gradient_property!(
    brooks_corey_gradient_matches_finite_differences,
    ModelKind::BrooksCorey
);
gradient_property!(
    kosugi_gradient_matches_finite_differences,
    ModelKind::Kosugi
);
gradient_property!(
    fredlund_xing_gradient_matches_finite_differences,
    ModelKind::FredlundXing
);
gradient_property!(
    durner_gradient_matches_finite_differences,
    ModelKind::Durner
);
gradient_property!(
    campbell_gradient_matches_finite_differences,
    ModelKind::Campbell
);

#[test]
fn gradients_at_zero_and_at_very_large_suction() {
    for kind in ModelKind::ALL {
        for u in [0.1, 0.5, 0.9] {
            let p = params_from_unit(kind, &vec![u; kind.params().len()]);
            for h in [0.0, 1e7, 1e9] {
                // FD at h = 0 stays at h = 0, so the checks hold exactly there.
                check_gradient(kind, h, &p).unwrap_or_else(|e| panic!("{e}"));
            }
            let mut grad = vec![f64::NAN; p.len()];
            let theta_s = kind.retention().theta_s(&p);
            assert_eq!(kind.curve().value_and_gradient(0.0, &p, &mut grad), theta_s);
            // At saturation only theta_s moves the curve (d/dn is 0, not 0 * ln 0 = NaN).
            for (spec, g) in kind.params().iter().zip(&grad) {
                let expected = if spec.name == "theta_s" { 1.0 } else { 0.0 };
                assert_eq!(*g, expected, "{kind} d/d{} at h = 0", spec.name);
            }
        }
    }
}

#[test]
fn values_and_gradients_are_finite_at_every_corner_of_the_bounds() {
    let suctions = [0.0, 1e-300, 1e-3, 1.0, 1e3, 1e7, 1e12, 1e300];
    for kind in ModelKind::ALL {
        let specs = kind.params();
        let mut grad = vec![0.0; specs.len()];
        for corner in 0..(1u32 << specs.len()) {
            let p: Vec<f64> = specs
                .iter()
                .enumerate()
                .map(|(i, s)| {
                    if corner >> i & 1 == 1 {
                        s.upper
                    } else {
                        s.lower
                    }
                })
                .collect();
            for h in suctions {
                let v = kind.curve().value_and_gradient(h, &p, &mut grad);
                assert!(v.is_finite(), "{kind} theta({h}) = {v} at {p:?}");
                assert!(
                    grad.iter().all(|g| g.is_finite()),
                    "{kind} gradient {grad:?} at h = {h}, {p:?}"
                );
                if let Some(c) = kind.retention().capacity(h, &p) {
                    let ordered = kind.retention().theta_r(&p) < kind.retention().theta_s(&p);
                    assert!(
                        c.is_finite() && (c >= 0.0 || !ordered),
                        "{kind} C({h}) = {c} at {p:?}"
                    );
                }
            }
        }
    }
}
