//! The design code against a published locally D-optimal design.
//!
//! Box, G. E. P. & Lucas, H. L. (1959), Design of experiments in non-linear situations,
//! Biometrika 46, 77-90: for the first-order consecutive reaction
//! y = t1 / (t1 - t2) (exp(-t2 x) - exp(-t1 x)) at t1 = 0.7, t2 = 0.2, the two-point design
//! that maximises det(J'J) puts its readings at x = 1.23 and 6.86. The same optimum from an
//! independent computation: scipy 1.17.1 (`scipy.optimize.minimize`, Nelder-Mead on
//! -det(J)^2 from the best point of a 401 x 401 grid on [0, 20]) gives 1.22947 and 6.85769.
//!
//! The design runs through `porewise::fit::design`, the code `porewise advise` uses: the
//! quadratic forms of the factored information matrix, the one-reading D step and Fedorov's
//! exchange.

use porewise::fit::design::{Information, candidate_effects, d_optimal_design, free_gradient};
use porewise::fit::{Domain, FitOptions, Readings, fit_curve};
use porewise::model::curve::{CurveModel, ParamSpec};

/// The consecutive first-order reaction A -> B -> C: the share of B at time x.
struct Reaction;

const SPECS: [ParamSpec; 2] = [
    ParamSpec {
        name: "t1",
        unit: "1/time",
        lower: 0.0,
        upper: f64::INFINITY,
    },
    ParamSpec {
        name: "t2",
        unit: "1/time",
        lower: 0.0,
        upper: f64::INFINITY,
    },
];

impl CurveModel for Reaction {
    fn params(&self) -> &[ParamSpec] {
        &SPECS
    }

    fn value(&self, x: f64, p: &[f64]) -> f64 {
        let (t1, t2) = (p[0], p[1]);
        t1 / (t1 - t2) * ((-t2 * x).exp() - (-t1 * x).exp())
    }

    fn value_and_gradient(&self, x: f64, p: &[f64], grad: &mut [f64]) -> f64 {
        let (t1, t2) = (p[0], p[1]);
        let (e1, e2) = ((-t1 * x).exp(), (-t2 * x).exp());
        let d = t1 - t2;
        // d/dt1 [t1/d] = -t2/d^2; d/dt2 [t1/d] = t1/d^2.
        grad[0] = -t2 / (d * d) * (e2 - e1) + t1 / d * x * e1;
        grad[1] = t1 / (d * d) * (e2 - e1) - t1 / d * x * e2;
        t1 / d * (e2 - e1)
    }

    fn initial_guesses(&self, _x: &[f64], _y: &[f64]) -> Vec<Vec<f64>> {
        vec![vec![1.0, 0.1]]
    }
}

const TRUE: [f64; 2] = [0.7, 0.2];

#[test]
fn the_gradient_is_right() {
    for x in [0.0, 0.5, 1.23, 3.0, 6.86, 15.0] {
        let mut g = [0.0; 2];
        Reaction.value_and_gradient(x, &TRUE, &mut g);
        for k in 0..2 {
            let h = 1e-6;
            let (mut up, mut down) = (TRUE, TRUE);
            up[k] += h;
            down[k] -= h;
            let numeric = (Reaction.value(x, &up) - Reaction.value(x, &down)) / (2.0 * h);
            assert!(
                (g[k] - numeric).abs() < 1e-8,
                "x={x} k={k}: {} vs {numeric}",
                g[k]
            );
        }
    }
}

#[test]
fn box_and_lucas_two_point_design_is_reproduced() {
    let design = d_optimal_design(&Reaction, &TRUE, &[0, 1], 2, 0.0, 20.0).expect("a design");
    let [a, b] = design.points[..] else {
        panic!("two points: {design:?}");
    };
    eprintln!("Box & Lucas design: {a:.6} {b:.6}");
    // Box & Lucas (1959): 1.23 and 6.86, to two decimals.
    assert!((a - 1.23).abs() <= 0.005, "first point {a}");
    assert!((b - 6.86).abs() <= 0.005, "second point {b}");
    // scipy 1.17.1 Nelder-Mead (see the module note): 1.22947, 6.85769.
    assert!((a - 1.229_47).abs() < 1e-4, "first point {a}");
    assert!((b - 6.857_69).abs() < 1e-4, "second point {b}");
}

#[test]
fn no_pair_of_a_fine_grid_beats_the_design() {
    // Brute force over every pair of a 0.05 grid on [0, 20]: det(J'J) of the pair, computed
    // directly as det(J)^2 of the 2 x 2 Jacobian, never exceeds the design's.
    let design = d_optimal_design(&Reaction, &TRUE, &[0, 1], 2, 0.0, 20.0).expect("a design");
    let row = |x: f64| free_gradient(&Reaction, &TRUE, &[0, 1], x).expect("finite");
    let det = |a: f64, b: f64| {
        let (ja, jb) = (row(a), row(b));
        let d = ja[0] * jb[1] - ja[1] * jb[0];
        d * d
    };
    let ours = det(design.points[0], design.points[1]);
    assert!((ours.ln() - design.log_det).abs() < 1e-9);
    let grid: Vec<f64> = (0..=400).map(|i| f64::from(i) * 0.05).collect();
    let mut best = 0.0_f64;
    for (i, &a) in grid.iter().enumerate() {
        for &b in &grid[i + 1..] {
            best = best.max(det(a, b));
        }
    }
    assert!(best <= ours * (1.0 + 1e-12), "grid {best} > design {ours}");
    // The grid comes close (its spacing limits it), so the design is not a lucky corner.
    assert!(best > ours * 0.99, "grid {best}, design {ours}");
}

#[test]
fn after_a_fit_no_further_reading_beats_repeating_a_design_point() {
    // Fit the reaction to noise-free readings, two at each design point, through the ordinary
    // driver (x on any real line). By the general equivalence theorem (Kiefer & Wolfowitz
    // 1960, from memory) the optimal design has d(x) = j'M1^-1 j <= k = 2 everywhere, M1 the
    // information per reading, with equality on its support. Here M = 4 M1, so no fifth
    // reading grows det M by more than 1 + 2/4 = 1.5, and repeating a design point does
    // exactly that.
    let design = d_optimal_design(&Reaction, &TRUE, &[0, 1], 2, 0.0, 20.0).expect("a design");
    let x: Vec<f64> = design.points.iter().flat_map(|&x| [x, x]).collect();
    let y: Vec<f64> = x.iter().map(|&x| Reaction.value(x, &TRUE)).collect();
    let report = fit_curve(
        &Reaction,
        "box-lucas-reaction",
        &Readings::new(&x, &y),
        &FitOptions::new().with_domain(Domain::Any),
    )
    .expect("fits");
    let p = report.values();
    assert!(
        (p[0] - 0.7).abs() < 1e-6 && (p[1] - 0.2).abs() < 1e-6,
        "{p:?}"
    );
    let rows: Vec<Vec<f64>> = x
        .iter()
        .map(|&x| free_gradient(&Reaction, &p, &[0, 1], x).expect("finite"))
        .collect();
    let info = Information::from_rows(&rows, None).expect("determined");
    let mut candidates: Vec<f64> = (0..=400).map(|i| f64::from(i) * 0.05).collect();
    candidates.extend(&design.points);
    let effects = candidate_effects(&Reaction, &p, &[0, 1], &info, &candidates, None);
    assert_eq!(effects.len(), candidates.len());
    for e in &effects {
        assert!(e.det_ratio <= 1.5 + 1e-6, "{e:?}");
    }
    for e in &effects[effects.len() - 2..] {
        assert!((e.det_ratio - 1.5).abs() < 1e-6, "{e:?}");
    }
}
