//! Campbell (1974): theta = theta_s (h / h_e)^(-1/b) above the air-entry suction h_e.

use crate::model::curve::{CurveModel, ParamSpec};

use super::{
    DataShape, ModelKind, RetentionModel, THETA_S, finite, line_fit, rank_guesses, theta_s_guess,
};

/// Bounds of the air-entry suction h_e: [0.01, 1e5] cm, as Brooks-Corey's h_b (the two are
/// the same parameter, Campbell being Brooks-Corey with theta_r = 0).
pub(crate) const H_E: ParamSpec = ParamSpec {
    name: "h_e_cm",
    unit: "cm",
    lower: 0.01,
    upper: 1e5,
};

/// Bounds of the exponent b: [0.05, 100]. Observed values are 2-15 (common practice,
/// Clapp & Hornberger 1978 table 2 spans 4.05-11.4); b = 1/lambda covers lambda 0.01-20.
pub(crate) const B: ParamSpec = ParamSpec {
    name: "b",
    unit: "-",
    lower: 0.05,
    upper: 100.0,
};

/// `theta_s, h_e_cm, b`.
pub(crate) const PARAMS: [ParamSpec; 3] = [THETA_S, H_E, B];

/// The Campbell model (no residual water content: Se = theta / theta_s).
///
/// At h = h_e exactly the saturated branch is used, as in Brooks-Corey.
#[derive(Debug, Clone, Copy, Default)]
pub struct Campbell;

impl CurveModel for Campbell {
    fn params(&self) -> &[ParamSpec] {
        &PARAMS
    }

    fn value(&self, h: f64, p: &[f64]) -> f64 {
        let (theta_s, h_e, b) = (p[0], p[1], p[2]);
        if h <= h_e {
            return theta_s;
        }
        theta_s * ((h_e / h).ln() / b).exp()
    }

    fn value_and_gradient(&self, h: f64, p: &[f64], grad: &mut [f64]) -> f64 {
        let (theta_s, h_e, b) = (p[0], p[1], p[2]);
        if h <= h_e {
            grad[..3].copy_from_slice(&[1.0, 0.0, 0.0]);
            return theta_s;
        }
        let r = (h_e / h).ln();
        let s = (r / b).exp();
        let theta = theta_s * s;
        grad[0] = s;
        grad[1] = theta / (b * h_e);
        grad[2] = -theta * r / (b * b);
        theta
    }

    /// theta_s just above the wettest reading (and 5 % above it); b and h_e from a straight
    /// line through the drier readings in ln theta against ln h (slope -1/b, weighted by
    /// theta^2), continued up to theta_s; then a flatter and a steeper variant. Ranked by SSE.
    fn initial_guesses(&self, x: &[f64], y: &[f64]) -> Vec<Vec<f64>> {
        let Some(shape) = DataShape::of(x, y) else {
            return vec![vec![0.4, 20.0, 5.0]];
        };
        let cut = 0.95 * shape.theta_max;
        let points = x
            .iter()
            .zip(y)
            .filter(move |&(&h, &t)| h > 0.0 && h.is_finite() && t > 0.0 && t < cut)
            .map(|(&h, &t)| (h.ln(), t.ln(), t * t));
        let line = line_fit(points).filter(|(slope, _)| *slope < 0.0);
        let mut candidates = Vec::new();
        for theta_s in [theta_s_guess(&shape), 1.05 * shape.theta_max] {
            let (b, h_e) = match line {
                Some((slope, intercept)) => {
                    (-1.0 / slope, ((theta_s.ln() - intercept) / slope).exp())
                }
                None => (5.0, shape.h_half * (-5.0 * std::f64::consts::LN_2).exp()),
            };
            candidates.push(vec![theta_s, h_e, b]);
            candidates.push(vec![theta_s, h_e * 0.5, b * 1.3]);
            candidates.push(vec![theta_s, h_e * 2.0, b * 0.7]);
        }
        rank_guesses(self, x, y, candidates, 3)
    }
}

impl RetentionModel for Campbell {
    fn kind(&self) -> ModelKind {
        ModelKind::Campbell
    }

    fn theta_r(&self, _p: &[f64]) -> f64 {
        0.0
    }

    fn theta_s(&self, p: &[f64]) -> f64 {
        p[0]
    }

    /// theta / theta_s: 1 up to h_e, (h_e / h)^(1/b) above it.
    fn effective_saturation(&self, h: f64, p: &[f64]) -> f64 {
        let (h_e, b) = (p[1], p[2]);
        if h <= h_e {
            1.0
        } else {
            ((h_e / h).ln() / b).exp()
        }
    }

    /// 0 below h_e, theta / (b h) above it, `None` at h = h_e where the one-sided limits differ.
    #[allow(clippy::float_cmp)] // the break point itself, exactly
    fn capacity(&self, h: f64, p: &[f64]) -> Option<f64> {
        let (_, h_e, b) = (p[0], p[1], p[2]);
        if h < h_e {
            Some(0.0)
        } else if h == h_e {
            None
        } else {
            finite(self.value(h, p) / (b * h))
        }
    }

    /// h = h_e (theta / theta_s)^(-b); 0 at saturation.
    fn suction_at(&self, theta: f64, p: &[f64]) -> Option<f64> {
        let (theta_s, h_e, b) = (p[0], p[1], p[2]);
        let s = theta / theta_s;
        if s.is_nan() || s <= 0.0 {
            None
        } else if s >= 1.0 {
            Some(0.0)
        } else {
            finite(h_e * (-b * s.ln()).exp())
        }
    }
}
