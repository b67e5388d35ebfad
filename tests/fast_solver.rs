//! The two-parameter solver of the projected van Genuchten fit against the generic solver
//! (the `levenberg-marquardt` crate), which stays the reference: the same optimum on seeded
//! synthetic samples drawn from four models' shapes.

#[path = "common/synthetic.rs"]
mod synthetic;

use porewise::fit::{FitOptions, Readings, fit_model};
use porewise::model::retention::ModelKind;

/// Relative SSE difference within which two optima are the same: the fast path must reach the
/// reference's optimum to this on every sample.
const SAME_SSE: f64 = 1e-10;

#[test]
fn the_fast_solver_reaches_the_generic_solvers_optimum() {
    let fast = FitOptions::new();
    let reference = FitOptions::new().with_reference_solver(true);
    let mut worst = 0.0_f64;
    let mut compared = 0;
    let mut differ = Vec::new();
    let kinds = [
        ModelKind::VanGenuchten,
        ModelKind::BrooksCorey,
        ModelKind::Kosugi,
        ModelKind::Durner,
    ];
    for (k, kind) in kinds.into_iter().enumerate() {
        for (i, s) in synthetic::samples(kind, 500, 7100 + k as u64)
            .iter()
            .enumerate()
        {
            let readings = Readings::new(&s.h, &s.theta);
            let a = fit_model(ModelKind::VanGenuchten, &readings, &fast);
            let b = fit_model(ModelKind::VanGenuchten, &readings, &reference);
            let (Ok(a), Ok(b)) = (a, b) else {
                panic!("{kind:?} sample {i}: one solver failed");
            };
            compared += 1;
            let rel = (a.sse - b.sse).abs() / a.sse.max(b.sse);
            worst = worst.max(rel);
            if rel > SAME_SSE {
                differ.push(format!(
                    "{kind:?} {i}: {} vs {} ({rel:.2e}) {:?} | {:?}",
                    a.sse,
                    b.sse,
                    a.values(),
                    b.values()
                ));
            }
        }
    }
    println!("{compared} samples, worst relative SSE difference {worst:.2e}");
    println!("{}", differ.join("\n"));
    // The two-parameter solver follows the generic one's trust-region search step for step,
    // so the two reach the same minimum on every sample, also where a surface has two.
    assert!(
        differ.is_empty(),
        "{} of {compared} differ by more than {SAME_SSE:e}:\n{}",
        differ.len(),
        differ.join("\n")
    );
}
