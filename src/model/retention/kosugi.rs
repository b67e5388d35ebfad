//! Kosugi (1996) lognormal: Se = Q(ln(h / h_m) / sigma), Q the complementary normal CDF.

use std::f64::consts::{FRAC_1_SQRT_2, SQRT_2};

use statrs::function::erf::erfc_inv;

use crate::model::curve::{CurveModel, ParamSpec};

use super::{
    DataShape, ModelKind, RetentionModel, THETA_R, THETA_S, finite, line_fit, rank_guesses,
    se_points, theta_r_candidates, theta_s_guess,
};

/// 1 / sqrt(2 pi).
const FRAC_1_SQRT_2PI: f64 = 0.398_942_280_401_432_7;

/// Bounds of the median-pore suction h_m: [0.01, 1e6] cm. It is the suction at Se = 1/2, which
/// for the finest classes lies beyond 10^5 cm (Carsel & Parrish 1988 clay: 2.8e5 cm).
pub(crate) const H_M: ParamSpec = ParamSpec {
    name: "h_m_cm",
    unit: "cm",
    lower: 0.01,
    upper: 1e6,
};

/// Bounds of sigma (standard deviation of ln pore radius): [0.05, 8]. Observed values are
/// 0.3-4 (common practice); below 0.05 the curve is a step, above 8 nearly flat over the lab range.
pub(crate) const SIGMA: ParamSpec = ParamSpec {
    name: "sigma",
    unit: "-",
    lower: 0.05,
    upper: 8.0,
};

/// `theta_r, theta_s, h_m_cm, sigma`.
pub(crate) const PARAMS: [ParamSpec; 4] = [THETA_R, THETA_S, H_M, SIGMA];

/// The complementary error function: musl's erfc through the `libm` crate (rust-lang),
/// within about one unit in the last place over the whole range, down to 1e-308 (the
/// series-based erfc used before was good to about 1e-10 relative only in the tail).
#[inline]
pub(crate) fn erfc(x: f64) -> f64 {
    libm::erfc(x)
}

/// Q(z) = P(Z > z) for a standard normal Z.
#[inline]
pub(crate) fn normal_q(z: f64) -> f64 {
    0.5 * erfc(z * FRAC_1_SQRT_2)
}

/// The standard normal density.
#[inline]
pub(crate) fn normal_pdf(z: f64) -> f64 {
    FRAC_1_SQRT_2PI * (-0.5 * z * z).exp()
}

/// z = ln(h / h_m) / sigma, -infinity at h = 0.
#[inline]
pub(crate) fn z_of(h: f64, h_m: f64, sigma: f64) -> f64 {
    (h / h_m).ln() / sigma
}

/// The Kosugi lognormal model.
#[derive(Debug, Clone, Copy, Default)]
pub struct Kosugi;

impl CurveModel for Kosugi {
    fn params(&self) -> &[ParamSpec] {
        &PARAMS
    }

    fn value(&self, h: f64, p: &[f64]) -> f64 {
        let (theta_r, theta_s, h_m, sigma) = (p[0], p[1], p[2], p[3]);
        if h <= 0.0 {
            return theta_s;
        }
        theta_r + (theta_s - theta_r) * normal_q(z_of(h, h_m, sigma))
    }

    fn value_and_gradient(&self, h: f64, p: &[f64], grad: &mut [f64]) -> f64 {
        let (theta_r, theta_s, h_m, sigma) = (p[0], p[1], p[2], p[3]);
        if h <= 0.0 {
            grad[..4].copy_from_slice(&[0.0, 1.0, 0.0, 0.0]);
            return theta_s;
        }
        let d = theta_s - theta_r;
        let z = z_of(h, h_m, sigma);
        let se = normal_q(z);
        let phi = normal_pdf(z);
        grad[0] = 1.0 - se;
        grad[1] = se;
        grad[2] = d * phi / (sigma * h_m);
        grad[3] = d * phi * z / sigma;
        theta_r + d * se
    }

    /// theta_s just above the wettest reading; for each theta_r candidate (fractions of the
    /// driest reading) sigma and h_m from the straight line Q^-1(Se) = (ln h - ln h_m) / sigma.
    /// Also the halfway guess: h_m where the data cross their middle and sigma from the slope
    /// there (|d Se / d ln h| = 1 / (sigma sqrt(2 pi))). Ranked by SSE, best three kept.
    fn initial_guesses(&self, x: &[f64], y: &[f64]) -> Vec<Vec<f64>> {
        let Some(shape) = DataShape::of(x, y) else {
            return vec![vec![0.05, 0.4, 100.0, 1.5]];
        };
        let theta_s = theta_s_guess(&shape);
        let sigma = FRAC_1_SQRT_2PI / shape.slope_ln_h;
        let mut candidates = vec![vec![0.5 * shape.theta_min, theta_s, shape.h_half, sigma]];
        for theta_r in theta_r_candidates(&shape) {
            // y = Q^-1(Se), |d Se / dy| = phi(y).
            let points = se_points(x, y, theta_r, theta_s).map(|(ln_h, se)| {
                let z = SQRT_2 * erfc_inv(2.0 * se);
                (ln_h, z, normal_pdf(z).powi(2))
            });
            if let Some((slope, intercept)) = line_fit(points)
                && slope > 0.0
            {
                candidates.push(vec![
                    theta_r,
                    theta_s,
                    (-intercept / slope).exp(),
                    1.0 / slope,
                ]);
            }
        }
        rank_guesses(self, x, y, candidates, 3)
    }
}

impl RetentionModel for Kosugi {
    fn kind(&self) -> ModelKind {
        ModelKind::Kosugi
    }

    fn theta_r(&self, p: &[f64]) -> f64 {
        p[0]
    }

    fn theta_s(&self, p: &[f64]) -> f64 {
        p[1]
    }

    /// Q(ln(h / h_m) / sigma); 1 at h = 0.
    fn effective_saturation(&self, h: f64, p: &[f64]) -> f64 {
        if h <= 0.0 {
            1.0
        } else {
            normal_q(z_of(h, p[2], p[3]))
        }
    }

    /// (theta_s - theta_r) phi(z) / (sigma h), 0 at h = 0 (the density vanishes faster).
    fn capacity(&self, h: f64, p: &[f64]) -> Option<f64> {
        let (theta_r, theta_s, h_m, sigma) = (p[0], p[1], p[2], p[3]);
        if h <= 0.0 {
            return Some(0.0);
        }
        finite((theta_s - theta_r) * normal_pdf(z_of(h, h_m, sigma)) / (sigma * h))
    }

    /// h = h_m exp(sigma Q^-1(Se)) with Q^-1(Se) = sqrt(2) erfc^-1(2 Se); 0 at saturation.
    fn suction_at(&self, theta: f64, p: &[f64]) -> Option<f64> {
        let (theta_r, theta_s, h_m, sigma) = (p[0], p[1], p[2], p[3]);
        let se = (theta - theta_r) / (theta_s - theta_r);
        if se.is_nan() || se <= 0.0 {
            None
        } else if se >= 1.0 {
            Some(0.0)
        } else {
            let z = SQRT_2 * erfc_inv(2.0 * se);
            finite(h_m * (sigma * z).exp())
        }
    }
}

#[cfg(test)]
#[allow(
    clippy::unreadable_literal,
    clippy::excessive_precision,
    clippy::float_cmp
)]
mod tests {
    use super::*;

    #[test]
    fn erfc_is_accurate_to_the_last_digits_far_into_the_tail() {
        // mpmath 1.3.0, 50 digits (tests/data/high_precision.py); the arguments are exact.
        let cases = [
            (-3.0, 1.9999779095030014146),
            (0.5, 0.47950012218695346232),
            (1.0, 0.15729920705028513066),
            (2.5, 0.00040695201744495893956),
            (5.0, 1.5374597944280348502e-12),
            (10.0, 2.088487583762544757e-45),
            (15.0, 7.2129941724512066666e-100),
            (20.0, 5.3958656116079009289e-176),
            (26.5, 2.2109076642637342759e-307),
        ];
        for (x, want) in cases {
            let got = erfc(x);
            let rel = (got - want).abs() / want;
            assert!(rel < 1e-15, "erfc({x}) = {got:e}, want {want:e} ({rel:e})");
        }
        assert_eq!(erfc(30.0), 0.0);
        assert_eq!(normal_q(f64::NEG_INFINITY), 1.0);
    }
}
