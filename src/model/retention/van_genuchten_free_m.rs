//! van Genuchten (1980) with m free: Se = [1 + (alpha h)^n]^(-m).
//!
//! Also home of the one van Genuchten term that the restricted model and Durner's bimodal sum
//! are built from, evaluated through ln h so that no power overflows.

use crate::model::curve::{CurveModel, ParamSpec};

use super::{
    DataShape, ModelKind, RetentionModel, THETA_R, THETA_S, alpha_spec, finite, line_fit,
    linear_ends, n_spec, rank_guesses, se_points, softplus_sigmoid, theta_r_candidates,
    theta_s_guess,
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
        let (lnb, sig) = softplus_sigmoid(n * ln_x);
        Some(VgTerm {
            se: (-m * lnb).exp(),
            ln_x,
            sig,
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
        // 24 halvings of [1.001, 15] leave n within 1e-6: plenty for a starting guess.
        for _ in 0..24 {
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

/// Readings prepared once for the van Genuchten linearizations: ln h and -ln Se.
struct VgPoints {
    ln_h: Vec<f64>,
    neg_ln_se: Vec<f64>,
}

impl VgPoints {
    fn new(x: &[f64], y: &[f64], theta_r: f64, theta_s: f64) -> VgPoints {
        let (ln_h, neg_ln_se) = se_points(x, y, theta_r, theta_s)
            .map(|(ln_h, se)| (ln_h, -se.ln()))
            .unzip();
        VgPoints { ln_h, neg_ln_se }
    }

    /// The weighted line ln(Se^(-1/m) - 1) = n ln h + n ln alpha for a given m:
    /// (slope = n, intercept = n ln alpha). Weights (d Se / dy)^2 = (m Se (1 - Se^(1/m)))^2.
    fn line(&self, m: f64, buf: &mut Vec<(f64, f64, f64)>) -> Option<(f64, f64)> {
        buf.clear();
        for (&ln_h, &nls) in self.ln_h.iter().zip(&self.neg_ln_se) {
            let v = nls / m;
            // 1 - Se^(1/m) = 1 - e^-v, and ln(e^v - 1) = v + ln(1 - e^-v).
            let one_minus = -(-v).exp_m1();
            let w = m * (-nls).exp() * one_minus;
            buf.push((ln_h, v + one_minus.ln(), w * w));
        }
        line_fit(buf.iter().copied()).filter(|(slope, _)| *slope > 0.0)
    }
}

/// alpha and n with m held fixed, from one weighted straight line in ln h.
pub(crate) fn vg_linearized_fixed_m(
    x: &[f64],
    y: &[f64],
    theta_r: f64,
    theta_s: f64,
    m: f64,
) -> Option<(f64, f64)> {
    let mut buf = Vec::with_capacity(x.len());
    let (slope, intercept) = VgPoints::new(x, y, theta_r, theta_s).line(m, &mut buf)?;
    let alpha = (intercept / slope).exp();
    alpha.is_finite().then_some((alpha, slope))
}

/// alpha and n with m = 1 - 1/n: the n whose line (ln(Se^(-1/m) - 1) against ln h) has slope n.
///
/// The slope falls as n (so m) grows, so slope(n) - n has one root in the bounds of n; it is
/// bracketed around `n0` (widened to the bounds if needed) and found to 0.1 % by the Illinois
/// variant of regula falsi. A plain fixed-point iteration diverges for n < 2.
pub(crate) fn vg_linearized(
    x: &[f64],
    y: &[f64],
    theta_r: f64,
    theta_s: f64,
    n0: f64,
) -> Option<(f64, f64)> {
    let spec = n_spec("n");
    let pts = VgPoints::new(x, y, theta_r, theta_s);
    let mut buf = Vec::with_capacity(pts.ln_h.len());
    let mut g = |n: f64| pts.line(1.0 - 1.0 / n, &mut buf).map(|(s, c)| (s - n, c));
    let n0 = n0.clamp(spec.lower, spec.upper);
    // Bracket the root, widening n - 1 geometrically from the data-driven n0.
    let mut a = (1.0 + 0.7 * (n0 - 1.0)).max(spec.lower);
    let (mut ga, mut ca) = g(a)?;
    while ga <= 0.0 && a > spec.lower {
        a = (1.0 + 0.4 * (a - 1.0)).max(spec.lower);
        (ga, ca) = g(a)?;
    }
    let mut b = (1.0 + 1.4 * (n0 - 1.0)).min(spec.upper);
    let (mut gb, mut cb) = g(b)?;
    while gb >= 0.0 && b < spec.upper {
        b = (1.0 + 2.5 * (b - 1.0)).min(spec.upper);
        (gb, cb) = g(b)?;
    }
    let alpha_of = |n: f64, gn: f64, c: f64| {
        let alpha = (c / (gn + n)).exp();
        alpha.is_finite().then_some((alpha, n))
    };
    if ga <= 0.0 {
        return alpha_of(a, ga, ca);
    }
    if gb >= 0.0 {
        return alpha_of(b, gb, cb);
    }
    let mut side = 0i8;
    for _ in 0..10 {
        let c = (a * gb - b * ga) / (gb - ga);
        let (gc, cc) = g(c)?;
        if gc * gb > 0.0 {
            (b, gb, cb) = (c, gc, cc);
            if side == 1 {
                ga *= 0.5;
            }
            side = 1;
        } else {
            (a, ga, ca) = (c, gc, cc);
            if side == -1 {
                gb *= 0.5;
            }
            side = -1;
        }
        if gc.abs() < 1e-3 * c || (b - a).abs() < 1e-4 * c {
            return alpha_of(c, gc, cc);
        }
    }
    if ga.abs() <= gb.abs() {
        alpha_of(a, ga, ca)
    } else {
        alpha_of(b, gb, cb)
    }
}

/// (theta_r, theta_s, alpha, n) candidates with m = 1 - 1/n for the van Genuchten family's
/// guesses: the halfway guess, then for theta_r at 0, 0.6 and 0.9 of the driest reading alpha
/// and n from the linearization, with theta_r and theta_s then refitted by linear least squares
/// for that shape. The dry end's theta_r matters most for steep (sandy) curves, hence three.
pub(crate) fn vg_candidates(x: &[f64], y: &[f64], shape: &DataShape) -> Vec<[f64; 4]> {
    let theta_s = theta_s_guess(shape);
    let (alpha0, n0) = alpha_n_through_half(shape, |n| 1.0 - 1.0 / n);
    let mut out = vec![[0.5 * shape.theta_min, theta_s, alpha0, n0]];
    for theta_r in theta_r_candidates(shape) {
        if let Some((alpha, n)) = vg_linearized(x, y, theta_r, theta_s, n0) {
            let m = 1.0 - 1.0 / n;
            let (tr, ts) =
                linear_ends(x, y, |h| term_se(h, alpha, n, m), shape).unwrap_or((theta_r, theta_s));
            out.push([tr, ts, alpha, n]);
        }
    }
    out
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

    /// The m = 1 - 1/n candidates of the restricted model (see `vg_candidates`) and the
    /// linearized curve with m = 1, ranked by their SSE on the readings; best three kept.
    fn initial_guesses(&self, x: &[f64], y: &[f64]) -> Vec<Vec<f64>> {
        let Some(shape) = DataShape::of(x, y) else {
            return vec![vec![0.05, 0.4, 0.02, 1.5, 1.0 / 3.0]];
        };
        let theta_s = theta_s_guess(&shape);
        let mut candidates: Vec<Vec<f64>> = vg_candidates(x, y, &shape)
            .into_iter()
            .map(|[theta_r, theta_s, alpha, n]| vec![theta_r, theta_s, alpha, n, 1.0 - 1.0 / n])
            .collect();
        let theta_r = theta_r_candidates(&shape)[1];
        if let Some((alpha, n)) = vg_linearized_fixed_m(x, y, theta_r, theta_s, 1.0) {
            candidates.push(vec![theta_r, theta_s, alpha, n, 1.0]);
        }
        rank_guesses(self, x, y, candidates, 3)
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

    fn effective_saturation(&self, h: f64, p: &[f64]) -> f64 {
        term_se(h, p[2], p[3], p[4])
    }

    fn capacity(&self, h: f64, p: &[f64]) -> Option<f64> {
        term_neg_d_h(h, p[2], p[3], p[4]).map(|c| (p[1] - p[0]) * c)
    }

    fn suction_at(&self, theta: f64, p: &[f64]) -> Option<f64> {
        term_suction_at((theta - p[0]) / (p[1] - p[0]), p[2], p[3], p[4])
    }
}
