//! Durner (1994) bimodal van Genuchten: Se = w1 Se1 + (1 - w1) Se2, Se_i = [1 + (alpha_i h)^n_i]^(-m_i),
//! m_i = 1 - 1/n_i.
//!
//! Mode 1 is the large-pore (wet-end) mode: the two orders of the modes describe the same curve,
//! so [`ModelKind::canonicalize`](super::ModelKind::canonicalize) swaps them when alpha1 < alpha2, and every starting guess has
//! alpha1 > alpha2. That keeps a fitted parameter set identifiable and comparable.

use crate::model::curve::{CurveModel, ParamSpec};

use super::van_genuchten::{VanGenuchten, mualem_m};
use super::van_genuchten_free_m::{VgTerm, term_neg_d_h, term_se, vg_candidates};
use super::{
    DataShape, ModelKind, RetentionModel, THETA_R, THETA_S, alpha_spec, invert_by_bisection,
    n_spec, rank_guesses, sse,
};

/// Bounds of the first mode's weight w1: [0.001, 0.999], just inside the open (0, 1); at
/// either end one mode vanishes and its alpha and n can no longer be estimated.
pub(crate) const W1: ParamSpec = ParamSpec {
    name: "w1",
    unit: "-",
    lower: 1e-3,
    upper: 0.999,
};

/// `theta_r, theta_s, w1, alpha1_per_cm, n1, alpha2_per_cm, n2`.
pub(crate) const PARAMS: [ParamSpec; 7] = [
    THETA_R,
    THETA_S,
    W1,
    alpha_spec("alpha1_per_cm"),
    n_spec("n1"),
    alpha_spec("alpha2_per_cm"),
    n_spec("n2"),
];

/// Largest suction searched by the numerical inverse, cm (far beyond oven-dry).
const H_SEARCH_MAX_CM: f64 = 1e15;

/// Swap the modes when alpha1 < alpha2 so that mode 1 is the large-pore one.
pub(crate) fn canonicalize(p: &mut [f64]) {
    if p.len() == PARAMS.len() && p[3] < p[5] {
        p.swap(3, 5);
        p.swap(4, 6);
        p[2] = 1.0 - p[2];
    }
}

/// The Durner bimodal model.
#[derive(Debug, Clone, Copy, Default)]
pub struct Durner;

/// The effective saturations of the two modes at h.
#[inline]
pub(crate) fn mode_saturations(h: f64, p: &[f64]) -> (f64, f64) {
    (
        term_se(h, p[3], p[4], mualem_m(p[4])),
        term_se(h, p[5], p[6], mualem_m(p[6])),
    )
}

/// d Se_i / d alpha_i and d Se_i / d n_i (through m_i = 1 - 1/n_i), and Se_i.
#[inline]
fn mode_gradient(h: f64, alpha: f64, n: f64) -> (f64, f64, f64) {
    let m = mualem_m(n);
    match VgTerm::at(h, alpha, n, m) {
        Some(t) => (t.se, t.d_alpha(alpha, n, m), t.d_n(m) + t.d_m() / (n * n)),
        None => (1.0, 0.0, 0.0),
    }
}

impl CurveModel for Durner {
    fn params(&self) -> &[ParamSpec] {
        &PARAMS
    }

    fn value(&self, h: f64, p: &[f64]) -> f64 {
        let (s1, s2) = mode_saturations(h, p);
        p[0] + (p[1] - p[0]) * (p[2] * s1 + (1.0 - p[2]) * s2)
    }

    fn value_and_gradient(&self, h: f64, p: &[f64], grad: &mut [f64]) -> f64 {
        let (theta_r, theta_s, w1) = (p[0], p[1], p[2]);
        let d = theta_s - theta_r;
        let (s1, da1, dn1) = mode_gradient(h, p[3], p[4]);
        let (s2, da2, dn2) = mode_gradient(h, p[5], p[6]);
        let se = w1 * s1 + (1.0 - w1) * s2;
        grad[0] = 1.0 - se;
        grad[1] = se;
        grad[2] = d * (s1 - s2);
        grad[3] = d * w1 * da1;
        grad[4] = d * w1 * dn1;
        grad[5] = d * (1.0 - w1) * da2;
        grad[6] = d * (1.0 - w1) * dn2;
        theta_r + d * se
    }

    /// The unimodal van Genuchten guesses (through the halfway point, and the best linearized
    /// one) each split into a wet mode (alpha x 4, steeper) and a dry mode (alpha / 4) of
    /// equal weight, a dominant fine-pore mode, and a dominant coarse one; alpha1 > alpha2 in
    /// all. Ranked by SSE on the readings, best three kept.
    fn initial_guesses(&self, x: &[f64], y: &[f64]) -> Vec<Vec<f64>> {
        let Some(shape) = DataShape::of(x, y) else {
            return vec![vec![0.05, 0.45, 0.4, 0.1, 3.0, 0.005, 1.5]];
        };
        let mut candidates = Vec::new();
        // The unimodal halfway guess and the unimodal candidate that fits best.
        let unimodal = vg_candidates(x, y, &shape);
        let best = unimodal
            .iter()
            .skip(1)
            .min_by(|a, b| {
                sse(&VanGenuchten, x, y, &a[..]).total_cmp(&sse(&VanGenuchten, x, y, &b[..]))
            })
            .copied();
        for [theta_r, theta_s, alpha, n] in std::iter::once(unimodal[0]).chain(best) {
            let steep = 1.0 + 2.0 * (n - 1.0);
            candidates.push(vec![
                theta_r,
                theta_s,
                0.5,
                alpha * 4.0,
                steep,
                alpha / 4.0,
                n,
            ]);
            candidates.push(vec![
                theta_r,
                theta_s,
                0.3,
                alpha * 10.0,
                steep,
                alpha / 2.0,
                n,
            ]);
            candidates.push(vec![
                theta_r,
                theta_s,
                0.7,
                alpha * 2.0,
                n,
                alpha / 10.0,
                steep,
            ]);
        }
        rank_guesses(self, x, y, candidates, 3)
    }
}

impl RetentionModel for Durner {
    fn kind(&self) -> ModelKind {
        ModelKind::Durner
    }

    fn theta_r(&self, p: &[f64]) -> f64 {
        p[0]
    }

    fn theta_s(&self, p: &[f64]) -> f64 {
        p[1]
    }

    /// w1 Se1 + (1 - w1) Se2.
    fn effective_saturation(&self, h: f64, p: &[f64]) -> f64 {
        let (s1, s2) = mode_saturations(h, p);
        p[2] * s1 + (1.0 - p[2]) * s2
    }

    fn capacity(&self, h: f64, p: &[f64]) -> Option<f64> {
        let c1 = term_neg_d_h(h, p[3], p[4], mualem_m(p[4]))?;
        let c2 = term_neg_d_h(h, p[5], p[6], mualem_m(p[6]))?;
        Some((p[1] - p[0]) * (p[2] * c1 + (1.0 - p[2]) * c2))
    }

    /// By bisection in ln h (a sum of two van Genuchten terms has no closed-form inverse).
    fn suction_at(&self, theta: f64, p: &[f64]) -> Option<f64> {
        if theta <= p[0] {
            return None;
        }
        invert_by_bisection(self, p, theta, H_SEARCH_MAX_CM)
    }
}
