//! Unit tests of the driver with a private van Genuchten model (m = 1 - 1/n).

#![allow(clippy::float_cmp)]

use super::*;
use crate::model::curve::{CurveModel, ParamSpec};

/// van Genuchten (1980), m = 1 - 1/n; written here so the driver is tested on its own.
struct Vg;

const VG: [ParamSpec; 4] = [
    ParamSpec {
        name: "theta_r",
        unit: "m3/m3",
        lower: 0.0,
        upper: 0.5,
    },
    ParamSpec {
        name: "theta_s",
        unit: "m3/m3",
        lower: 0.2,
        upper: 0.7,
    },
    ParamSpec {
        name: "alpha_per_cm",
        unit: "1/cm",
        lower: 1e-5,
        upper: 10.0,
    },
    ParamSpec {
        name: "n",
        unit: "-",
        lower: 1.01,
        upper: 15.0,
    },
];

impl CurveModel for Vg {
    fn params(&self) -> &[ParamSpec] {
        &VG
    }
    fn value(&self, h: f64, p: &[f64]) -> f64 {
        let mut g = [0.0; 4];
        self.value_and_gradient(h, p, &mut g)
    }
    fn value_and_gradient(&self, h: f64, p: &[f64], grad: &mut [f64]) -> f64 {
        let (tr, ts, alpha, n) = (p[0], p[1], p[2], p[3]);
        let m = 1.0 - 1.0 / n;
        let x = alpha * h;
        if x <= 0.0 {
            grad.copy_from_slice(&[0.0, 1.0, 0.0, 0.0]);
            return ts;
        }
        let lnx = x.ln();
        let u = (n * lnx).exp();
        let b = 1.0 + u;
        let lnb = u.ln_1p();
        let s = (-m * lnb).exp();
        let d = ts - tr;
        grad[0] = 1.0 - s;
        grad[1] = s;
        grad[2] = d * (-m * n * u * s / (alpha * b));
        grad[3] = d * s * (-lnb / (n * n) - m * u * lnx / b);
        tr + d * s
    }
    fn initial_guesses(&self, x: &[f64], y: &[f64]) -> Vec<Vec<f64>> {
        let ymax = y.iter().copied().fold(f64::MIN, f64::max);
        let ymin = y.iter().copied().fold(f64::MAX, f64::min);
        let mid = 0.5 * (ymax + ymin);
        let mut best = (f64::MAX, 100.0);
        for (&h, &t) in x.iter().zip(y) {
            if (t - mid).abs() < best.0 && h > 0.0 {
                best = ((t - mid).abs(), h);
            }
        }
        vec![vec![ymin * 0.5, ymax, 1.0 / best.1, 1.6]]
    }
}

const H: [f64; 9] = [0.0, 10.0, 30.0, 60.0, 100.0, 330.0, 1000.0, 3000.0, 15000.0];

fn curve(p: &[f64]) -> Vec<f64> {
    H.iter().map(|&h| Vg.value(h, p)).collect()
}

#[test]
fn recovers_a_noise_free_curve() {
    let truth = [0.065, 0.41, 0.075, 1.89];
    let y = curve(&truth);
    let r = fit_curve(&Vg, "vg", &Readings::new(&H, &y), &FitOptions::new()).unwrap();
    assert!(r.converged, "{r:?}");
    for (got, want) in r.values().iter().zip(truth) {
        assert!((got - want).abs() <= 1e-7 * want, "{got} vs {want}");
    }
    assert!(r.sse < 1e-20);
    assert_eq!(r.n_free_params, 4);
    assert_eq!(r.readings.len(), 9);
}

#[test]
fn fixed_parameters_leave_the_vector() {
    let truth = [0.0, 0.41, 0.075, 1.89];
    let mut y = curve(&truth);
    y[3] += 0.004;
    let opts = FitOptions::new().with_fixed("theta_r", 0.0);
    let r = fit_curve(&Vg, "vg", &Readings::new(&H, &y), &opts).unwrap();
    let tr = r.parameter("theta_r").unwrap();
    assert!(tr.fixed && tr.value == 0.0 && tr.se.is_none());
    assert_eq!(r.n_free_params, 3);
    assert_eq!(r.covariance.as_ref().unwrap().names.len(), 3);
    assert!(r.parameter("n").unwrap().se.is_some());
}

#[test]
fn theta_r_pinned_at_zero_is_held_there() {
    // A curve that wants a negative theta_r: the best bounded fit has theta_r = 0.
    let truth = [0.0, 0.41, 0.075, 1.89];
    let mut y = curve(&truth);
    for v in y.iter_mut().skip(6) {
        *v *= 0.6;
    }
    let r = fit_curve(&Vg, "vg", &Readings::new(&H, &y), &FitOptions::new()).unwrap();
    let tr = r.parameter("theta_r").unwrap();
    assert_eq!(tr.value, 0.0);
    assert_eq!(tr.at_bound, Some(Side::Lower));
    assert!(r.converged);
    assert!(
        r.message
            .as_deref()
            .unwrap_or("")
            .contains("theta_r on its lower bound")
    );
}

#[test]
fn bad_input_is_an_error_not_a_panic() {
    let y = curve(&[0.065, 0.41, 0.075, 1.89]);
    let opts = FitOptions::new();
    let err = |x: &[f64], y: &[f64]| fit_curve(&Vg, "vg", &Readings::new(x, y), &opts).unwrap_err();
    assert!(matches!(
        err(&H[..4], &y[..4]),
        FitError::TooFewPoints { points: 4, free: 4 }
    ));
    assert!(matches!(err(&H, &[0.3; 9]), FitError::FlatData { .. }));
    assert!(matches!(
        err(&[5.0; 9], &y),
        FitError::SuctionsAllEqual { .. }
    ));
    assert!(matches!(err(&H[..8], &y), FitError::LengthMismatch { .. }));
    let mut bad = y.clone();
    bad[2] = f64::NAN;
    assert!(matches!(
        err(&H, &bad),
        FitError::NonFinite {
            what: "theta",
            index: 3,
            ..
        }
    ));
    let mut wet = y.clone();
    wet[0] = -0.01;
    assert!(matches!(
        err(&H, &wet),
        FitError::WaterContentOutOfRange { index: 1, .. }
    ));
    let mut neg = H;
    neg[1] = -1.0;
    assert!(matches!(
        err(&neg, &y),
        FitError::NegativeSuction { index: 2, .. }
    ));
    let unknown = FitOptions::new().with_fixed("beta", 1.0);
    let e = fit_curve(&Vg, "vg", &Readings::new(&H, &y), &unknown).unwrap_err();
    assert!(e.to_string().contains("no parameter \"beta\""), "{e}");
}

#[test]
fn weights_scale_rows() {
    let truth = [0.065, 0.41, 0.075, 1.89];
    let mut y = curve(&truth);
    y[4] += 0.02;
    let w = [1.0, 1.0, 1.0, 1.0, 1e-6, 1.0, 1.0, 1.0, 1.0];
    let r = fit_curve(
        &Vg,
        "vg",
        &Readings::new(&H, &y).with_weights(&w),
        &FitOptions::new(),
    )
    .unwrap();
    // The outlier hardly counts, so the other readings are fitted almost exactly.
    assert!((r.parameter("n").unwrap().value - 1.89).abs() < 1e-3);
    let json = serde_json::to_string(&r).unwrap();
    let back: FitReport = serde_json::from_str(&json).unwrap();
    assert_eq!(back, r);
}

mod retention {
    use crate::fit::{FitOptions, Readings, fit_auto, fit_curve, fit_model};
    use crate::model::retention::ModelKind;

    const H: [f64; 10] = [
        0.0, 5.0, 10.0, 20.0, 50.0, 100.0, 330.0, 1000.0, 3000.0, 15000.0,
    ];

    fn curve(kind: ModelKind, p: &[f64]) -> Vec<f64> {
        H.iter().map(|&h| kind.curve().value(h, p)).collect()
    }

    #[test]
    fn brooks_corey_breakpoint_is_searched_between_measured_suctions() {
        // h_b = 30 cm lies between the readings at 20 and 50 cm; start guesses sit elsewhere.
        let truth = [0.05, 0.42, 30.0, 0.45];
        let mut y = curve(ModelKind::BrooksCorey, &truth);
        let wiggle = [
            0.003, -0.002, 0.001, -0.003, 0.002, -0.001, 0.002, -0.002, 0.001, -0.001,
        ];
        for (v, w) in y.iter_mut().zip(wiggle) {
            *v += w;
        }
        let r = fit_model(
            ModelKind::BrooksCorey,
            &Readings::new(&H, &y),
            &FitOptions::new(),
        )
        .unwrap();
        assert!(r.converged, "{:?}", r.message);
        // Intervals whose lower bound cannot beat the best fit are skipped (10 intervals).
        assert!(
            r.runs < 10,
            "intervals should be pruned, got {} runs",
            r.runs
        );
        // A brute-force scan of h_b (others fitted with h_b held) finds nothing better.
        let mut best_scan = f64::INFINITY;
        for k in 0..=400 {
            let h_b = 10f64.powf(-1.0 + 5.0 * f64::from(k) / 400.0);
            let opts = FitOptions::new().with_fixed("h_b_cm", h_b);
            if let Ok(s) = fit_curve(
                ModelKind::BrooksCorey.curve(),
                "bc",
                &Readings::new(&H, &y),
                &opts,
            ) {
                best_scan = best_scan.min(s.sse);
            }
        }
        assert!(
            r.sse <= best_scan * (1.0 + 1e-9),
            "interval search {} vs scan {best_scan}",
            r.sse
        );
        // Without the interval search, the fit from the first guess is no better.
        let plain = fit_curve(
            ModelKind::BrooksCorey.curve(),
            "bc",
            &Readings::new(&H, &y),
            &FitOptions::new(),
        )
        .unwrap();
        assert!(r.sse <= plain.sse * (1.0 + 1e-12));
    }

    #[test]
    fn auto_ranks_by_aicc_with_weights_summing_to_one() {
        let truth = [0.06, 0.43, 0.03, 1.7];
        let mut y = curve(ModelKind::VanGenuchten, &truth);
        for (i, v) in y.iter_mut().enumerate() {
            *v += if i % 2 == 0 { 0.002 } else { -0.002 };
        }
        let auto = fit_auto(&ModelKind::ALL, &Readings::new(&H, &y), &FitOptions::new());
        assert!(!auto.ranked.is_empty());
        let total: f64 = auto.ranked.iter().map(|r| r.akaike_weight).sum();
        assert!((total - 1.0).abs() < 1e-12);
        assert_eq!(auto.ranked[0].delta_aicc, 0.0);
        for w in auto.ranked.windows(2) {
            assert!(w[0].report.aicc <= w[1].report.aicc);
        }
        // Durner (7 free parameters, K = 8 with the error variance) needs 10 readings for
        // AICc: with 10 it is tried, with 9 it is skipped, and so is Fredlund-Xing (5 free)
        // with 7.
        assert!(!auto.skipped.iter().any(|s| s.reason.contains("auto needs")));
        let nine = fit_auto(
            &ModelKind::ALL,
            &Readings::new(&H[..9], &y[..9]),
            &FitOptions::new(),
        );
        let durner = nine.skipped.iter().find(|s| s.model == "durner").unwrap();
        assert!(
            durner
                .reason
                .contains("9 readings for 7 free parameters: auto needs at least 10"),
            "{}",
            durner.reason
        );
        let few = fit_auto(
            &ModelKind::ALL,
            &Readings::new(&H[..7], &y[..7]),
            &FitOptions::new(),
        );
        let fx = few
            .skipped
            .iter()
            .find(|s| s.model == "fredlund-xing")
            .unwrap();
        assert!(fx.reason.contains("auto needs at least 8"), "{}", fx.reason);
        assert!(few.ranked.iter().any(|r| r.report.model == "van-genuchten"));
        // A fixed theta_r applies to the models that have one.
        let fixed = fit_auto(
            &[ModelKind::VanGenuchten, ModelKind::Campbell],
            &Readings::new(&H, &y),
            &FitOptions::new().with_fixed("theta_r", 0.0),
        );
        let vg = fixed
            .ranked
            .iter()
            .find(|r| r.report.model == "van-genuchten")
            .unwrap();
        assert_eq!(vg.report.n_free_params, 3);
    }
}

mod every_model {
    use crate::fit::{FitOptions, Readings, fit_model};
    use crate::model::retention::ModelKind;

    /// Lab suctions, cm (common practice), dense enough for the 7-parameter Durner model.
    const H: [f64; 12] = [
        0.0, 3.0, 10.0, 30.0, 60.0, 100.0, 200.0, 330.0, 1000.0, 3000.0, 15000.0, 50000.0,
    ];

    #[test]
    fn each_model_fits_its_own_noise_free_curve() {
        let cases: [(ModelKind, &[f64]); 7] = [
            (ModelKind::VanGenuchten, &[0.05, 0.42, 0.03, 1.6]),
            (ModelKind::VanGenuchtenFreeM, &[0.05, 0.42, 0.03, 1.6, 0.5]),
            (ModelKind::BrooksCorey, &[0.05, 0.42, 25.0, 0.5]),
            (ModelKind::Kosugi, &[0.05, 0.45, 100.0, 1.5]),
            (ModelKind::FredlundXing, &[0.45, 102.0, 2.0, 1.0, 15_297.0]),
            (ModelKind::Durner, &[0.05, 0.5, 0.4, 0.1, 3.0, 0.005, 1.5]),
            (ModelKind::Campbell, &[0.45, 20.0, 4.0]),
        ];
        for (kind, p) in cases {
            kind.check_params(p).unwrap();
            let y: Vec<f64> = H.iter().map(|&h| kind.curve().value(h, p)).collect();
            let r = fit_model(kind, &Readings::new(&H, &y), &FitOptions::new()).unwrap();
            assert!(r.converged, "{kind}: {:?}", r.message);
            assert!(
                r.rmse < 1e-6,
                "{kind}: rmse {} with {:?}",
                r.rmse,
                r.values()
            );
        }
    }
}

mod odd_data {
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    use crate::fit::{FitOptions, Readings, fit_auto};
    use crate::model::retention::ModelKind;

    /// Odd but valid readings (repeated suctions, zeros, rising curves, tiny ranges) never
    /// panic and never give NaN in a report.
    #[test]
    fn odd_readings_never_panic_or_give_nan() {
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        for _ in 0..50 {
            let n = rng.random_range(2..12);
            let h: Vec<f64> = (0..n)
                .map(|_| match rng.random_range(0..4) {
                    0 => 0.0,
                    1 => 100.0,
                    _ => 10f64.powf(rng.random_range(-1.0..6.0)),
                })
                .collect();
            let theta: Vec<f64> = (0..n)
                .map(|_| match rng.random_range(0..4) {
                    0 => 0.0,
                    1 => 1.0,
                    _ => rng.random_range(0.0..0.6),
                })
                .collect();
            let auto = fit_auto(
                &ModelKind::ALL,
                &Readings::new(&h, &theta),
                &FitOptions::new(),
            );
            for r in auto
                .ranked
                .iter()
                .map(|r| &r.report)
                .chain(auto.fallback.iter())
            {
                let json = serde_json::to_string(r).unwrap();
                assert!(!json.contains("NaN") && r.sse.is_finite(), "{json}");
                assert!(r.parameters.iter().all(|p| p.value.is_finite()));
            }
        }
    }
}

mod projection {
    use levenberg_marquardt::{LeastSquaresProblem, differentiate_numerically};
    use nalgebra::{Const, OVector, U1};

    use super::{H, Vg, curve};
    use crate::fit::problem::Data;
    use crate::fit::projection::{Kernel, Linear, Projected};
    use crate::fit::transform::Transform;
    use crate::fit::{FitOptions, Readings, Side, fit_curve, fit_model};
    use crate::model::curve::CurveModel;
    use crate::model::retention::ModelKind;

    const SHAPE: [usize; 2] = [2, 3];

    /// A linear set, its held values, and theta_r / theta_s expected on a bound or held.
    type Case = (Linear, (f64, f64), Option<f64>, Option<f64>);

    fn noisy() -> Vec<f64> {
        let mut y = curve(&[0.065, 0.41, 0.075, 1.89]);
        let wiggle = [
            0.004, -0.003, 0.002, -0.004, 0.003, -0.002, 0.001, 0.003, -0.002,
        ];
        for (v, w) in y.iter_mut().zip(wiggle) {
            *v += w;
        }
        y
    }

    /// The projected problem at alpha = 0.05, n = 1.7 (away from the optimum, so the second
    /// term of the Jacobian matters), padded to 16 rows.
    fn problem<'a>(
        model: &'a dyn CurveModel,
        kernel: Option<Kernel>,
        y: &'a [f64],
        sqrt_w: Option<&'a [f64]>,
        transforms: &'a [Transform],
        linear: Linear,
        held: (f64, f64),
    ) -> Projected<'a, Const<16>, Const<2>> {
        let q = OVector::<f64, Const<2>>::from_iterator_generic(
            Const::<2>,
            U1,
            [0.05, 1.7]
                .iter()
                .zip(transforms)
                .map(|(&p, t)| t.inverse_start(p)),
        );
        let data = Data { x: &H, y, sqrt_w };
        let full = vec![held.0, held.1, 0.05, 1.7];
        Projected::new(
            model,
            data,
            Const::<16>,
            &SHAPE,
            transforms,
            linear,
            kernel,
            full,
            q,
            false,
        )
    }

    /// The maps of alpha and n in the projected tests.
    fn shape_transforms() -> [Transform; 2] {
        [
            Transform::for_bounds(1e-5, 10.0),
            Transform::for_bounds(1.01, 15.0),
        ]
    }

    /// theta_r and theta_s both solved, inside bounds that do not bind at the start.
    const BOTH_FREE: Linear = Linear {
        r: Some(0),
        s: 1,
        r_free: true,
        s_free: true,
        r_bounds: (0.0, 0.5),
        s_bounds: (0.2, 0.7),
    };

    /// The van Genuchten kernel gives the model's own numbers, bit for bit.
    #[test]
    #[allow(clippy::float_cmp)]
    fn van_genuchten_kernel_matches_the_model() {
        let y = noisy();
        let transforms = shape_transforms();
        let linear = BOTH_FREE;
        let model = ModelKind::VanGenuchten.curve();
        let at = |kernel| {
            let p = problem(model, kernel, &y, None, &transforms, linear, (0.0, 0.0));
            let r = p.residuals().expect("residuals");
            (r, p.jacobian().expect("jacobian"))
        };
        let (generic, kernel) = (at(None), at(Some(Kernel::VanGenuchten)));
        assert!(generic.0.iter().any(|&v| v != 0.0));
        assert_eq!(generic, kernel);
    }

    /// Golub-Pereyra Jacobian against central differences, for every way the linear
    /// parameters can be free, held or on a bound, with and without weights.
    #[test]
    fn projected_jacobian_matches_finite_differences() {
        let y = noisy();
        let transforms = shape_transforms();
        let sqrt_w: Vec<f64> = (0..H.len()).map(|i| 0.5 + 0.1 * i as f64).collect();
        let base = BOTH_FREE;
        let cases: [Case; 6] = [
            (base, (0.0, 0.0), None, None),
            (
                Linear {
                    r_bounds: (0.1, 0.5),
                    ..base
                },
                (0.0, 0.0),
                Some(0.1),
                None,
            ),
            (
                Linear {
                    s_bounds: (0.2, 0.35),
                    ..base
                },
                (0.0, 0.0),
                None,
                Some(0.35),
            ),
            (
                Linear {
                    r_bounds: (0.1, 0.5),
                    s_bounds: (0.2, 0.33),
                    ..base
                },
                (0.0, 0.0),
                None,
                None,
            ),
            (
                Linear {
                    r_free: false,
                    ..base
                },
                (0.03, 0.0),
                Some(0.03),
                None,
            ),
            (
                Linear {
                    s_free: false,
                    ..base
                },
                (0.0, 0.43),
                None,
                Some(0.43),
            ),
        ];
        let combinations = cases.into_iter().flat_map(|case| {
            [None, Some(Kernel::VanGenuchten)]
                .into_iter()
                .map(move |kernel| (case, kernel))
        });
        for ((linear, held, want_r, want_s), kernel) in combinations {
            for weights in [None, Some(sqrt_w.as_slice())] {
                let mut p = problem(&Vg, kernel, &y, weights, &transforms, linear, held);
                let analytic = p.jacobian().expect("jacobian");
                let numeric = differentiate_numerically(&mut p).expect("numeric");
                for (a, n) in analytic.iter().zip(numeric.iter()) {
                    assert!(
                        (a - n).abs() <= 1e-6 * n.abs().max(1e-3),
                        "{linear:?} {weights:?}: {a} vs {n}\n{analytic}\n{numeric}"
                    );
                }
                let (full, sse) = p.solution().expect("solution");
                let direct: f64 = H
                    .iter()
                    .zip(&y)
                    .enumerate()
                    .map(|(i, (&h, &t))| {
                        let w = weights.map_or(1.0, |w| w[i] * w[i]);
                        w * (Vg.value(h, &full) - t).powi(2)
                    })
                    .sum();
                assert!((sse - direct).abs() <= 1e-12 * direct, "{sse} vs {direct}");
                if let Some(r) = want_r {
                    assert_eq!(full[0], r, "{linear:?}");
                }
                if let Some(s) = want_s {
                    assert_eq!(full[1], s, "{linear:?}");
                }
                // No point of a grid over the box (held values kept) does better.
                let (r_lo, r_hi) = if linear.r_free {
                    linear.r_bounds
                } else {
                    (held.0, held.0)
                };
                let (s_lo, s_hi) = if linear.s_free {
                    linear.s_bounds
                } else {
                    (held.1, held.1)
                };
                assert!((r_lo..=r_hi).contains(&full[0]) && (s_lo..=s_hi).contains(&full[1]));
                for a in 0..=100 {
                    for b in 0..=100 {
                        let mut p = full.clone();
                        p[0] = r_lo + (r_hi - r_lo) * f64::from(a) / 100.0;
                        p[1] = s_lo + (s_hi - s_lo) * f64::from(b) / 100.0;
                        let grid: f64 = H
                            .iter()
                            .zip(&y)
                            .enumerate()
                            .map(|(i, (&h, &t))| {
                                let w = weights.map_or(1.0, |w| w[i] * w[i]);
                                w * (Vg.value(h, &p) - t).powi(2)
                            })
                            .sum();
                        assert!(
                            grid >= sse * (1.0 - 1e-12),
                            "{linear:?} {p:?}: {grid} < {sse}"
                        );
                    }
                }
            }
        }
    }

    /// The projected fit (`fit_model`) and the full four-parameter fit (`fit_curve` on the
    /// same curve, no projection) reach the same optimum, including one with theta_r on its
    /// bound and one with theta_r fixed.
    #[test]
    fn projected_fit_agrees_with_the_full_problem() {
        let interior = noisy();
        let mut on_bound = curve(&[0.0, 0.41, 0.075, 1.89]);
        for v in on_bound.iter_mut().skip(6) {
            *v *= 0.6;
        }
        let kind = ModelKind::VanGenuchten;
        let fixed = FitOptions::new().with_fixed("theta_r", 0.02);
        for (y, opts) in [
            (&interior, FitOptions::new()),
            (&on_bound, FitOptions::new()),
            (&interior, fixed),
        ] {
            let readings = Readings::new(&H, y);
            let projected = fit_model(kind, &readings, &opts).unwrap();
            let full = fit_curve(kind.curve(), kind.id(), &readings, &opts).unwrap();
            assert!(projected.converged && full.converged);
            assert!(
                (projected.sse - full.sse).abs() <= 1e-9 * full.sse,
                "{} vs {}",
                projected.sse,
                full.sse
            );
            for (a, b) in projected.parameters.iter().zip(&full.parameters) {
                assert!(
                    (a.value - b.value).abs() <= 1e-5 * b.value.abs().max(1e-3),
                    "{a:?} {b:?}"
                );
                assert_eq!(a.at_bound, b.at_bound, "{a:?} {b:?}");
                assert_eq!(a.se.is_some(), b.se.is_some());
                if let (Some(x), Some(z)) = (a.se, b.se) {
                    assert!((x - z).abs() <= 1e-4 * z, "{a:?} {b:?}");
                }
            }
        }
        let r = fit_model(kind, &Readings::new(&H, &on_bound), &FitOptions::new()).unwrap();
        let theta_r = r.parameter("theta_r").unwrap();
        assert_eq!(theta_r.value, 0.0);
        assert_eq!(theta_r.at_bound, Some(Side::Lower));
        assert!(theta_r.se.is_none());
    }
}
