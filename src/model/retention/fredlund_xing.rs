//! Fredlund & Xing (1994) with its correction term, in cm of suction:
//! theta = C(h) theta_s / ln(e + (h / a)^n)^m, C(h) = 1 - ln(1 + h / h_r) / ln(1 + h_dry / h_r).
//!
//! The paper writes suction in kPa; here every suction is in cm, and the oven-dry suction
//! h_dry = 10^6 kPa is 1.019716213e7 cm. The curve reaches theta = 0 at h_dry and stays there.

use std::f64::consts::E;

use crate::model::curve::{CurveModel, ParamSpec};
use crate::model::units::CM_PER_KPA;

use super::{
    DataShape, ModelKind, RetentionModel, THETA_S, finite, invert_by_bisection, line_fit,
    rank_guesses, softplus_sigmoid, theta_s_guess,
};

/// The oven-dry suction 10^6 kPa in cm, where the corrected curve reaches theta = 0.
pub const H_DRY_CM: f64 = CM_PER_KPA * 1e6;

/// Bounds of a (near the air-entry suction): [0.01, 1e6] cm, as the other suction scales.
pub(crate) const A: ParamSpec = ParamSpec {
    name: "a_cm",
    unit: "cm",
    lower: 0.01,
    upper: 1e6,
};

/// Bounds of n (slope at the bend): [0.05, 20]; the physical bound is n > 0, observed
/// values 0.5-10 (common practice).
pub(crate) const N: ParamSpec = ParamSpec {
    name: "n",
    unit: "-",
    lower: 0.05,
    upper: 20.0,
};

/// Bounds of m (the residual part): [0.01, 10]; the physical bound is m > 0, observed
/// values 0.3-4 (common practice).
pub(crate) const M: ParamSpec = ParamSpec {
    name: "m",
    unit: "-",
    lower: 0.01,
    upper: 10.0,
};

/// Bounds of the residual suction h_r: [1 cm, h_dry]. It is often fixed at 1500 or 3000 kPa
/// (15 296 or 30 591 cm, common practice); the correction is defined for any h_r > 0.
pub(crate) const H_R: ParamSpec = ParamSpec {
    name: "h_r_cm",
    unit: "cm",
    lower: 1.0,
    upper: H_DRY_CM,
};

/// `theta_s, a_cm, n, m, h_r_cm`.
pub(crate) const PARAMS: [ParamSpec; 5] = [THETA_S, A, N, M, H_R];

/// The residual suction used by the first starting guess: 1500 kPa (common practice).
const H_R_GUESS_CM: f64 = 1500.0 * CM_PER_KPA;

/// The correction term C(h) = 1 - ln(1 + h / h_r) / ln(1 + h_dry / h_r), 0 beyond h_dry.
///
/// Evaluated as ln(1 + (h_dry - h) / (h_r + h)) / ln(1 + h_dry / h_r), the same value
/// without the cancellation of 1 - (...) near h_dry, where C(h) itself tends to 0.
pub fn correction(h_cm: f64, h_r_cm: f64) -> f64 {
    if h_cm >= H_DRY_CM {
        0.0
    } else {
        ((H_DRY_CM - h_cm) / (h_r_cm + h_cm)).ln_1p() / (H_DRY_CM / h_r_cm).ln_1p()
    }
}

/// The pieces shared by theta, its gradient and C(h), at 0 < h < h_dry.
struct Terms {
    /// The correction C(h).
    corr: f64,
    /// ln(1 + h / h_r).
    a_num: f64,
    /// ln(1 + h_dry / h_r).
    b_den: f64,
    /// L = ln(e + (h/a)^n) >= 1.
    l: f64,
    /// L^(-m).
    lm: f64,
    /// (h/a)^n / (e + (h/a)^n).
    q: f64,
    /// ln(h / a).
    ln_r: f64,
}

impl Terms {
    #[inline]
    fn at(h: f64, a: f64, n: f64, m: f64, h_r: f64) -> Terms {
        let a_num = (h / h_r).ln_1p();
        let b_den = (H_DRY_CM / h_r).ln_1p();
        let ln_r = (h / a).ln();
        let t = n * ln_r - 1.0;
        let (sp, q) = softplus_sigmoid(t);
        let l = 1.0 + sp;
        Terms {
            corr: ((H_DRY_CM - h) / (h_r + h)).ln_1p() / b_den,
            a_num,
            b_den,
            l,
            lm: (-m * l.ln()).exp(),
            q,
            ln_r,
        }
    }
}

/// The Fredlund-Xing model (no theta_r: Se = theta / theta_s).
#[derive(Debug, Clone, Copy, Default)]
pub struct FredlundXing;

impl CurveModel for FredlundXing {
    fn params(&self) -> &[ParamSpec] {
        &PARAMS
    }

    fn value(&self, h: f64, p: &[f64]) -> f64 {
        let (theta_s, a, n, m, h_r) = (p[0], p[1], p[2], p[3], p[4]);
        if h <= 0.0 {
            theta_s
        } else if h >= H_DRY_CM {
            0.0
        } else {
            let t = Terms::at(h, a, n, m, h_r);
            theta_s * t.corr * t.lm
        }
    }

    fn value_and_gradient(&self, h: f64, p: &[f64], grad: &mut [f64]) -> f64 {
        let (theta_s, a, n, m, h_r) = (p[0], p[1], p[2], p[3], p[4]);
        if h <= 0.0 {
            grad[..5].copy_from_slice(&[1.0, 0.0, 0.0, 0.0, 0.0]);
            return theta_s;
        }
        if h >= H_DRY_CM {
            grad[..5].fill(0.0);
            return 0.0;
        }
        let t = Terms::at(h, a, n, m, h_r);
        let base = t.corr * t.lm;
        // d L^-m / d L = -m L^-m / L; dL/da = -n q / a; dL/dn = q ln(h/a).
        let dl = -theta_s * t.corr * m * t.lm / t.l;
        let da_num = -h / (h_r * (h_r + h));
        let db_den = -H_DRY_CM / (h_r * (h_r + H_DRY_CM));
        let dcorr = -(da_num * t.b_den - t.a_num * db_den) / (t.b_den * t.b_den);
        grad[0] = base;
        grad[1] = dl * (-n * t.q / a);
        grad[2] = dl * t.q * t.ln_r;
        grad[3] = -theta_s * base * t.l.ln();
        grad[4] = theta_s * t.lm * dcorr;
        theta_s * base
    }

    /// theta_s just above the wettest reading; for m in {0.5, 1, 2} and h_r = 1500 kPa (common
    /// practice; also 3000 kPa with m = 1), a and n from the weighted straight line
    /// ln(exp(S^(-1/m)) - e) = n (ln h - ln a), S = theta / (theta_s C(h)). Also the halfway
    /// guess: with m = 1 the uncorrected curve is halfway at (h/a)^n = e^2 - e with
    /// |d Se / d ln h| = n (e^2 - e) / (4 e^2). Ranked by SSE on the readings, best three kept.
    #[allow(clippy::float_cmp)] // m is one of the listed constants
    fn initial_guesses(&self, x: &[f64], y: &[f64]) -> Vec<Vec<f64>> {
        let Some(shape) = DataShape::of(x, y) else {
            return vec![vec![0.4, 100.0, 2.0, 1.0, H_R_GUESS_CM]];
        };
        let theta_s = theta_s_guess(&shape);
        let y_half = E * E - E;
        let n = (shape.slope_ln_h * 4.0 * E * E / y_half).clamp(0.3, 15.0);
        let a = shape.h_half * (-y_half.ln() / n).exp();
        let mut candidates = vec![vec![theta_s, a, n, 1.0, H_R_GUESS_CM]];
        let h_r = H_R_GUESS_CM;
        for m in [0.5, 1.0, 2.0] {
            let points = x.iter().zip(y).filter_map(move |(&h, &t)| {
                let s = t / (theta_s * correction(h, h_r));
                // exp(S^(-1/m)) - e = e (exp(S^(-1/m) - 1) - 1), > 0 for 0 < S < 1;
                // |dS/dv| = m S q / L with L = S^(-1/m), q = 1 - e / e^L.
                let l = (-s.ln() / m).exp();
                let v = 1.0 + (l - 1.0).exp_m1().ln();
                let w = m * s * (-(1.0 - l).exp_m1()) / l;
                (h > 0.0 && s > 0.005 && s < 0.985 && v.is_finite()).then(|| (h.ln(), v, w * w))
            });
            if let Some((slope, intercept)) = line_fit(points)
                && slope > 0.0
            {
                let a = (-intercept / slope).exp();
                candidates.push(vec![theta_s, a, slope, m, h_r]);
                if m == 1.0 {
                    // The same curve with the other common residual suction.
                    candidates.push(vec![theta_s, a, slope, m, 2.0 * h_r]);
                }
            }
        }
        rank_guesses(self, x, y, candidates, 3)
    }
}

impl RetentionModel for FredlundXing {
    fn kind(&self) -> ModelKind {
        ModelKind::FredlundXing
    }

    fn theta_r(&self, _p: &[f64]) -> f64 {
        0.0
    }

    fn theta_s(&self, p: &[f64]) -> f64 {
        p[0]
    }

    /// theta / theta_s = C(h) / ln(e + (h / a)^n)^m: 1 at h = 0, 0 from h_dry on.
    fn effective_saturation(&self, h: f64, p: &[f64]) -> f64 {
        let (a, n, m, h_r) = (p[1], p[2], p[3], p[4]);
        if h <= 0.0 {
            1.0
        } else if h >= H_DRY_CM {
            0.0
        } else {
            let t = Terms::at(h, a, n, m, h_r);
            t.corr * t.lm
        }
    }

    /// theta_s [L^-m / ((h_r + h) ln(1 + h_dry/h_r)) + C(h) m n L^(-m-1) q / h]; at h = 0 the
    /// second term's limit (0 for n > 1, m / (a e) for n = 1, unbounded below); 0 beyond
    /// h_dry, `None` at h_dry where the curve has a kink.
    #[allow(clippy::float_cmp)] // the kink at h_dry and the limit at n = 1, exactly
    fn capacity(&self, h: f64, p: &[f64]) -> Option<f64> {
        let (theta_s, a, n, m, h_r) = (p[0], p[1], p[2], p[3], p[4]);
        if h > H_DRY_CM {
            return Some(0.0);
        }
        if h == H_DRY_CM {
            return None;
        }
        if h <= 0.0 {
            let first = 1.0 / (h_r * (H_DRY_CM / h_r).ln_1p());
            let second = if n > 1.0 {
                0.0
            } else if n == 1.0 {
                m / (a * E)
            } else {
                return None;
            };
            return finite(theta_s * (first + second));
        }
        let t = Terms::at(h, a, n, m, h_r);
        let first = t.lm / ((h_r + h) * t.b_den);
        let second = t.corr * m * t.lm / t.l * n * t.q / h;
        finite(theta_s * (first + second))
    }

    /// By bisection in ln h up to the oven-dry suction (no closed form with the correction).
    fn suction_at(&self, theta: f64, p: &[f64]) -> Option<f64> {
        if theta <= 0.0 {
            return (theta == 0.0).then_some(H_DRY_CM);
        }
        invert_by_bisection(self, p, theta, H_DRY_CM)
    }
}
