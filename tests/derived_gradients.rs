//! Every gradient of a derived value (`model::derived::gradient`) against central finite
//! differences of the value itself, computed the way reports compute it: theta at FC and PWP,
//! available water, h at Se = 1/2, the air-entry estimate, the slope against ln h, and K(h)
//! for every conductivity model, over seeded random parameter sets of every model.
#![allow(clippy::float_cmp)]

use porewise::model::conductivity::{ConductivityForm, ConductivityModel};
use porewise::model::derived::gradient::{
    air_entry_gradient, available_water_gradient, conductivity_gradient, half_saturation_gradient,
    slope_ln_h_gradient, theta_gradient,
};
use porewise::model::derived::{air_entry_estimate, slope_vs_ln_h, suction_at_half_saturation};
use porewise::model::retention::{ModelKind, RetentionCurve};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

const FC_CM: f64 = 336.5;
const PWP_CM: f64 = 15296.0;

/// Realistic parameter ranges per model (lower, upper, log spacing): common practice values,
/// kept a little inside the bounds so that a finite-difference step stays inside them.
fn ranges(kind: ModelKind) -> Vec<(f64, f64, bool)> {
    let theta_r = (0.01, 0.15, false);
    let theta_s = (0.32, 0.6, false);
    match kind {
        ModelKind::VanGenuchten => vec![theta_r, theta_s, (2e-3, 0.3, true), (1.1, 5.0, false)],
        ModelKind::VanGenuchtenFreeM => vec![
            theta_r,
            theta_s,
            (2e-3, 0.3, true),
            (1.1, 5.0, false),
            (0.1, 2.0, true),
        ],
        ModelKind::BrooksCorey => vec![theta_r, theta_s, (2.0, 100.0, true), (0.1, 2.0, true)],
        ModelKind::Kosugi => vec![theta_r, theta_s, (20.0, 2e4, true), (0.5, 3.0, false)],
        ModelKind::FredlundXing => vec![
            theta_s,
            (5.0, 2e3, true),
            (0.8, 5.0, false),
            (0.4, 2.5, false),
            (1e3, 1e5, true),
        ],
        ModelKind::Durner => vec![
            theta_r,
            theta_s,
            (0.2, 0.8, false),
            (0.03, 0.3, true),
            (1.5, 5.0, false),
            (3e-4, 5e-3, true),
            (1.2, 2.5, false),
        ],
        ModelKind::Campbell => vec![theta_s, (2.0, 100.0, true), (2.0, 12.0, false)],
    }
}

fn draw(kind: ModelKind, rng: &mut ChaCha8Rng) -> Vec<f64> {
    ranges(kind)
        .iter()
        .map(|&(lo, hi, log)| {
            let u: f64 = rng.random();
            if log {
                (lo.ln() + u * (hi.ln() - lo.ln())).exp()
            } else {
                lo + u * (hi - lo)
            }
        })
        .collect()
}

/// Central differences of `f` at `p`, relative step `rel`.
fn central(p: &[f64], rel: f64, f: &dyn Fn(&[f64]) -> Option<f64>) -> Option<Vec<f64>> {
    (0..p.len())
        .map(|k| {
            let step = rel * p[k].abs().max(1e-3);
            let mut up = p.to_vec();
            let mut down = p.to_vec();
            up[k] += step;
            down[k] -= step;
            Some((f(&up)? - f(&down)?) / (2.0 * step))
        })
        .collect()
}

/// Analytic and numerical gradients agree per component: within `rel` of the larger, or
/// within an absolute floor scaled to the value's change over a relative step of the
/// parameter (`floor` times |value| / |p_k|).
fn agree(
    what: &str,
    p: &[f64],
    value: f64,
    analytic: &[f64],
    numeric: &[f64],
    rel: f64,
    floor: f64,
) -> Result<(), String> {
    for k in 0..p.len() {
        let (a, n) = (analytic[k], numeric[k]);
        let tol = rel * a.abs().max(n.abs()) + floor * value.abs() / p[k].abs().max(1e-3);
        if (a - n).abs() > tol {
            return Err(format!(
                "{what}: d/dp[{k}] analytic {a:e} vs numeric {n:e} at p = {p:?}"
            ));
        }
    }
    Ok(())
}

fn curve(kind: ModelKind, p: &[f64]) -> Option<RetentionCurve> {
    RetentionCurve::new(kind, p.to_vec()).ok()
}

/// Draws per model.
const CASES: usize = 60;

#[test]
fn water_contents_and_available_water_follow_their_differences() {
    for kind in ModelKind::ALL {
        let mut rng = ChaCha8Rng::seed_from_u64(1401);
        for _ in 0..CASES {
            let p = draw(kind, &mut rng);
            for h in [FC_CM, PWP_CM] {
                let theta = |q: &[f64]| curve(kind, q).map(|c| c.theta(h));
                let a = theta_gradient(kind, &p, h).expect("gradient");
                let n = central(&p, 1e-6, &theta).expect("numeric");
                agree(
                    &format!("{kind} theta({h})"),
                    &p,
                    theta(&p).expect("v"),
                    &a,
                    &n,
                    1e-5,
                    1e-9,
                )
                .unwrap_or_else(|e| panic!("{e}"));
            }
            let aw = |q: &[f64]| curve(kind, q).map(|c| c.theta(FC_CM) - c.theta(PWP_CM));
            let a = available_water_gradient(kind, &p, FC_CM, PWP_CM).expect("gradient");
            let n = central(&p, 1e-6, &aw).expect("numeric");
            // The floor on the scale of a water content (AW itself may be nearly 0).
            assert!(aw(&p).is_some());
            agree("AW", &p, 1.0, &a, &n, 1e-5, 1e-9).unwrap_or_else(|e| panic!("{kind}: {e}"));
        }
    }
}

#[test]
fn half_saturation_suction_follows_its_difference() {
    for kind in ModelKind::ALL {
        let mut rng = ChaCha8Rng::seed_from_u64(1402);
        for _ in 0..CASES {
            let p = draw(kind, &mut rng);
            let h50 = |q: &[f64]| curve(kind, q).and_then(|c| suction_at_half_saturation(&c));
            let a = half_saturation_gradient(kind, &p).expect("gradient");
            let n = central(&p, 1e-5, &h50).expect("numeric");
            agree("h50", &p, h50(&p).expect("v"), &a, &n, 1e-4, 1e-8)
                .unwrap_or_else(|e| panic!("{kind}: {e}"));
        }
    }
}

#[test]
fn slope_against_ln_h_follows_its_difference() {
    for kind in ModelKind::ALL {
        let mut rng = ChaCha8Rng::seed_from_u64(1403);
        for _ in 0..CASES {
            let p = draw(kind, &mut rng);
            for h in [3.0, 50.0, 700.0, 15000.0, 2e5] {
                let slope = |q: &[f64]| curve(kind, q).and_then(|c| slope_vs_ln_h(&c, h));
                let Some((s, a)) = slope_ln_h_gradient(kind, &p, h) else {
                    continue;
                };
                let value = slope(&p).expect("value");
                assert!(
                    (s - value).abs() <= 1e-12 * value.abs() + 1e-300,
                    "{kind} S({h}) {s} vs {value}"
                );
                // Skip the piecewise models' neighbourhood of the break (one-sided there).
                let brk = match kind {
                    ModelKind::BrooksCorey => Some(p[2]),
                    ModelKind::Campbell => Some(p[1]),
                    _ => None,
                };
                if brk.is_some_and(|b| (h / b - 1.0).abs() < 1e-3) {
                    continue;
                }
                let n = central(&p, 1e-6, &slope).expect("numeric");
                agree(&format!("{kind} S({h})"), &p, value, &a, &n, 1e-5, 1e-9)
                    .unwrap_or_else(|e| panic!("{e}"));
            }
        }
    }
}

#[test]
fn air_entry_follows_its_difference() {
    for kind in ModelKind::ALL {
        let mut rng = ChaCha8Rng::seed_from_u64(1404);
        let mut checked = 0;
        for _ in 0..CASES {
            let p = draw(kind, &mut rng);
            let h_ae = |q: &[f64]| {
                curve(kind, q)
                    .and_then(|c| air_entry_estimate(&c))
                    .map(|a| a.suction_cm)
            };
            let Some(value) = h_ae(&p) else {
                continue;
            };
            let a = air_entry_gradient(kind, &p).expect("gradient");
            let n = central(&p, 1e-5, &h_ae).expect("numeric");
            agree(&format!("{kind} air entry"), &p, value, &a, &n, 1e-4, 1e-8)
                .unwrap_or_else(|e| panic!("{e}"));
            checked += 1;
        }
        assert!(checked > CASES / 2, "{kind}: only {checked} air entries");
    }
}

#[test]
fn conductivity_follows_its_difference() {
    let models = ModelKind::ALL.into_iter().flat_map(|kind| {
        let forms = if kind == ModelKind::BrooksCorey {
            vec![
                Some(ConductivityForm::Burdine),
                Some(ConductivityForm::Mualem),
            ]
        } else {
            vec![None]
        };
        forms
            .into_iter()
            .filter_map(move |f| ConductivityModel::select(kind, f).ok())
    });
    let mut seen = 0;
    for model in models {
        seen += 1;
        let kind = model.retention();
        let mut rng = ChaCha8Rng::seed_from_u64(1405);
        for _ in 0..CASES {
            let p = draw(kind, &mut rng);
            for (h, l) in [(FC_CM, 0.5), (PWP_CM, 0.5), (40.0, -1.0), (2000.0, 2.0)] {
                let k = |q: &[f64]| model.conductivity(h, q, 25.0, l);
                let value = k(&p).expect("K");
                let a = conductivity_gradient(model, h, &p, 25.0, l).expect("gradient");
                let n = central(&p, 1e-6, &k).expect("numeric");
                agree(
                    &format!("{model} K({h}, L={l})"),
                    &p,
                    value,
                    &a,
                    &n,
                    1e-4,
                    1e-9,
                )
                .unwrap_or_else(|e| panic!("{e}"));
            }
        }
    }
    assert_eq!(seen, 7, "every conductivity model");
}
