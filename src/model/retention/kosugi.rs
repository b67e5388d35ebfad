//! Kosugi (1996) lognormal: Se = Q(ln(h / h_m) / sigma), Q the complementary normal CDF.

use std::f64::consts::{FRAC_1_SQRT_2, SQRT_2};

use statrs::function::erf::{erfc, erfc_inv};

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

/// Q(z) = P(Z > z) for a standard normal Z.
#[inline]
pub(crate) fn normal_q(z: f64) -> f64 {
    0.5 * erfc(z * FRAC_1_SQRT_2)
}

/// The standard normal density.
#[inline]
fn normal_pdf(z: f64) -> f64 {
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
