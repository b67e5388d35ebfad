//! van Genuchten (1980) with m free: Se = [1 + (alpha h)^n]^(-m).
//!
//! Also home of the one van Genuchten term that the restricted model and Durner's bimodal sum
//! are built from, evaluated through ln h so that no power overflows.

use crate::model::curve::{CurveModel, ParamSpec};

use super::{
    DataShape, ModelKind, RetentionModel, THETA_R, THETA_S, alpha_spec, clamp_all, end_guesses,
    finite, n_spec, sigmoid, softplus,
};

/// Bounds of the free exponent m: [0.001, 10]. m > 0 is the physical bound; fitted values
/// lie around 0.05-2 (common practice); beyond 10 the curve is a step that n already models.
const M: ParamSpec = ParamSpec {
    name: "m",
    unit: "-",
    lower: 1e-3,
    upper: 10.0,
};

/// `theta_r, theta_s, alpha_per_cm, n, m`.
pub(crate) const PARAMS: [ParamSpec; 5] =
    [THETA_R, THETA_S, alpha_spec("alpha_per_cm"), n_spec("n"), M];

/// One van Genuchten term Se = [1 + (alpha h)^n]^(-m) at h > 0 and its building blocks.
#[derive(Debug, Clone, Copy)]
pub(crate) struct VgTerm {
    /// Effective saturation of the term.
    pub se: f64,
    /// ln(alpha h).
    pub ln_x: f64,
    /// (alpha h)^n / (1 + (alpha h)^n).
    pub sig: f64,
    /// ln(1 + (alpha h)^n).
    pub lnb: f64,
}

impl VgTerm {
    /// Evaluate at suction h; `None` at h <= 0 (or alpha h = 0), where Se = 1 and every
    /// derivative with respect to alpha, n and m vanishes.
    #[inline]
    pub fn at(h: f64, alpha: f64, n: f64, m: f64) -> Option<VgTerm> {
        let x = alpha * h;
        if x <= 0.0 || x.is_nan() {
            return None;
        }
        let ln_x = x.ln();
        let t = n * ln_x;
        let lnb = softplus(t);
        Some(VgTerm {
            se: (-m * lnb).exp(),
            ln_x,
            sig: sigmoid(t),
            lnb,
        })
    }

    /// d Se / d alpha.
    #[inline]
    pub fn d_alpha(&self, alpha: f64, n: f64, m: f64) -> f64 {
        -m * n * self.se * self.sig / alpha
    }

    /// d Se / d n with m held fixed.
    #[inline]
    pub fn d_n(&self, m: f64) -> f64 {
        -m * self.se * self.ln_x * self.sig
    }

    /// d Se / d m.
    #[inline]
    pub fn d_m(&self) -> f64 {
        -self.se * self.lnb
    }

    /// -d Se / dh at the suction the term was evaluated at.
    #[inline]
    pub fn neg_d_h(&self, h: f64, n: f64, m: f64) -> f64 {
        m * n * self.se * self.sig / h
    }
}

/// Se of one term at any h >= 0.
#[inline]
pub(crate) fn term_se(h: f64, alpha: f64, n: f64, m: f64) -> f64 {
    VgTerm::at(h, alpha, n, m).map_or(1.0, |t| t.se)
}

/// -d Se / dh of one term at any h >= 0 (the limit at h = 0: 0 for n > 1, alpha m for n = 1).
#[allow(clippy::float_cmp)] // the limit at n = 1 exactly
pub(crate) fn term_neg_d_h(h: f64, alpha: f64, n: f64, m: f64) -> Option<f64> {
    match VgTerm::at(h, alpha, n, m) {
        Some(t) => finite(t.neg_d_h(h, n, m)),
        None if n > 1.0 => Some(0.0),
        None if n == 1.0 => finite(alpha * m),
        None => None,
    }
}

/// The suction where one term reaches `se`: (1/alpha) (Se^(-1/m) - 1)^(1/n).
///
/// 0 for se >= 1, `None` for se <= 0 (reached only at infinite suction).
pub(crate) fn term_suction_at(se: f64, alpha: f64, n: f64, m: f64) -> Option<f64> {
    if se.is_nan() || se <= 0.0 {
        return None;
    }
    if se >= 1.0 {
        return Some(0.0);
    }
    // Se^(-1/m) - 1 = expm1(-ln(Se) / m), exact near saturation.
    let inner = (-se.ln() / m).exp_m1();
    finite((inner.ln() / n).exp() / alpha)
}

/// alpha and n of a van Genuchten curve through the data's halfway point with its slope.
///
/// At Se = 1/2 the term has (alpha h)^n = 2^(1/m) - 1 and |d Se / d ln h| =
/// m n (1 - 2^(-1/m)) / 2; with `m_of_n` (1 - 1/n, or a fixed m) that slope is increasing in n,
/// so n is found by bisection in the bounds and alpha then follows from h_half.
pub(crate) fn alpha_n_through_half(shape: &DataShape, m_of_n: impl Fn(f64) -> f64) -> (f64, f64) {
    let slope_at = |n: f64| {
        let m = m_of_n(n);
        0.5 * m * n * (1.0 - (-std::f64::consts::LN_2 / m).exp())
    };
    let spec = n_spec("n");
    let (mut lo, mut hi) = (spec.lower, spec.upper);
    let target = shape.slope_ln_h;
    let n = if slope_at(hi) <= target {
        hi
    } else if slope_at(lo) >= target {
        lo
    } else {
        for _ in 0..50 {
            let mid = 0.5 * (lo + hi);
            if slope_at(mid) < target {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        0.5 * (lo + hi)
    };
    let m = m_of_n(n);
    let alpha = term_suction_at(0.5, 1.0, n, m).unwrap_or(1.0) / shape.h_half;
    (alpha, n)
}

/// The van Genuchten model with m free.
#[derive(Debug, Clone, Copy, Default)]
pub struct VanGenuchtenFreeM;

impl CurveModel for VanGenuchtenFreeM {
    fn params(&self) -> &[ParamSpec] {
        &PARAMS
    }

    fn value(&self, h: f64, p: &[f64]) -> f64 {
        p[0] + (p[1] - p[0]) * term_se(h, p[2], p[3], p[4])
    }

    fn value_and_gradient(&self, h: f64, p: &[f64], grad: &mut [f64]) -> f64 {
        let (theta_r, theta_s, alpha, n, m) = (p[0], p[1], p[2], p[3], p[4]);
        let d = theta_s - theta_r;
        let Some(t) = VgTerm::at(h, alpha, n, m) else {
            grad[..5].copy_from_slice(&[0.0, 1.0, 0.0, 0.0, 0.0]);
            return theta_s;
        };
        grad[0] = 1.0 - t.se;
        grad[1] = t.se;
        grad[2] = d * t.d_alpha(alpha, n, m);
        grad[3] = d * t.d_n(m);
        grad[4] = d * t.d_m();
        theta_r + d * t.se
    }

    /// theta_s and theta_r from the wet and dry ends, then m = 1 - 1/n (the usual restriction)
    /// through the halfway point, and two variants with a steeper and a flatter tail.
    fn initial_guesses(&self, x: &[f64], y: &[f64]) -> Vec<Vec<f64>> {
        let Some(shape) = DataShape::of(x, y) else {
            return vec![vec![0.05, 0.4, 0.02, 1.5, 1.0 / 3.0]];
        };
        let (theta_r, theta_s) = end_guesses(&shape, 0.5);
        let (alpha, n) = alpha_n_through_half(&shape, |n| 1.0 - 1.0 / n);
        let m = 1.0 - 1.0 / n;
        let mut guesses = vec![
            vec![theta_r, theta_s, alpha, n, m],
            // Same bend, m = 1 (Se^-1 - 1 = (alpha h)^n): a flatter wet end.
            {
                let (a, nn) = alpha_n_through_half(&shape, |_| 1.0);
                vec![0.0, theta_s, a, nn, 1.0]
            },
            // Burdine-like m = 1 - 2/n is steeper for a given n: use a small m.
            vec![theta_r, theta_s, alpha * 0.5, n * 1.5, 0.5 * m],
        ];
        for g in &mut guesses {
            clamp_all(&PARAMS, g);
        }
        guesses
    }
}

impl RetentionModel for VanGenuchtenFreeM {
    fn kind(&self) -> ModelKind {
        ModelKind::VanGenuchtenFreeM
    }

    fn theta_r(&self, p: &[f64]) -> f64 {
        p[0]
    }

    fn theta_s(&self, p: &[f64]) -> f64 {
        p[1]
    }

    fn capacity(&self, h: f64, p: &[f64]) -> Option<f64> {
        term_neg_d_h(h, p[2], p[3], p[4]).map(|c| (p[1] - p[0]) * c)
    }

    fn suction_at(&self, theta: f64, p: &[f64]) -> Option<f64> {
        term_suction_at((theta - p[0]) / (p[1] - p[0]), p[2], p[3], p[4])
    }
}
