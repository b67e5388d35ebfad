//! Brooks & Corey (1964): Se = (h_b / h)^lambda above the air-entry suction h_b, 1 below it.

use crate::model::curve::{CurveModel, ParamSpec};

use super::{
    DataShape, ModelKind, RetentionModel, THETA_R, THETA_S, finite, line_fit, rank_guesses,
    se_points, theta_r_candidates, theta_s_guess,
};

/// Bounds of the bubbling (air-entry) suction h_b: [0.01, 1e5] cm. Observed values are
/// 1-150 cm (common practice); 0.01 cm is below any lab resolution, and 10^5 cm (about
/// 10 MPa) is beyond the air entry of any soil.
pub(crate) const H_B: ParamSpec = ParamSpec {
    name: "h_b_cm",
    unit: "cm",
    lower: 0.01,
    upper: 1e5,
};

/// Bounds of the pore-size distribution index lambda: [0.01, 15]. Observed values are
/// 0.05-2 (common practice); lambda = m n = n - 1 matches the steepest van Genuchten n.
pub(crate) const LAMBDA: ParamSpec = ParamSpec {
    name: "lambda",
    unit: "-",
    lower: 0.01,
    upper: 15.0,
};

/// `theta_r, theta_s, h_b_cm, lambda`.
pub(crate) const PARAMS: [ParamSpec; 4] = [THETA_R, THETA_S, H_B, LAMBDA];

/// The Brooks-Corey model.
///
/// At h = h_b exactly the saturated branch is used (theta = theta_s, and the gradient is that
/// of the branch h <= h_b); the curve is continuous there but its slope jumps.
#[derive(Debug, Clone, Copy, Default)]
pub struct BrooksCorey;

impl CurveModel for BrooksCorey {
    fn params(&self) -> &[ParamSpec] {
        &PARAMS
    }

    fn value(&self, h: f64, p: &[f64]) -> f64 {
        let (theta_r, theta_s, h_b, lambda) = (p[0], p[1], p[2], p[3]);
        if h <= h_b {
            return theta_s;
        }
        theta_r + (theta_s - theta_r) * (lambda * (h_b / h).ln()).exp()
    }

    fn value_and_gradient(&self, h: f64, p: &[f64], grad: &mut [f64]) -> f64 {
        let (theta_r, theta_s, h_b, lambda) = (p[0], p[1], p[2], p[3]);
        if h <= h_b {
            grad[..4].copy_from_slice(&[0.0, 1.0, 0.0, 0.0]);
            return theta_s;
        }
        let d = theta_s - theta_r;
        let r = (h_b / h).ln();
        let se = (lambda * r).exp();
        grad[0] = 1.0 - se;
        grad[1] = se;
        grad[2] = d * lambda * se / h_b;
        grad[3] = d * se * r;
        theta_r + d * se
    }

    /// theta_s just above the wettest reading; for each theta_r candidate (fractions of the
    /// driest reading) lambda and h_b from the straight line ln Se = lambda (ln h_b - ln h)
    /// through the readings below saturation. Also the halfway guess: at Se = 1/2 the model has
    /// h = h_b 2^(1/lambda) and |d Se / d ln h| = lambda / 2. Ranked by SSE, best three kept.
    fn initial_guesses(&self, x: &[f64], y: &[f64]) -> Vec<Vec<f64>> {
        let Some(shape) = DataShape::of(x, y) else {
            return vec![vec![0.05, 0.4, 20.0, 0.5]];
        };
        let theta_s = theta_s_guess(&shape);
        let lambda = (2.0 * shape.slope_ln_h).clamp(0.05, 10.0);
        let h_b = shape.h_half * (-std::f64::consts::LN_2 / lambda).exp();
        let mut candidates = vec![vec![0.5 * shape.theta_min, theta_s, h_b, lambda]];
        for theta_r in theta_r_candidates(&shape) {
            // y = ln Se, d Se / dy = Se.
            let points =
                se_points(x, y, theta_r, theta_s).map(|(ln_h, se)| (ln_h, se.ln(), se * se));
            if let Some((slope, intercept)) = line_fit(points)
                && slope < 0.0
            {
                let lambda = -slope;
                candidates.push(vec![theta_r, theta_s, (intercept / lambda).exp(), lambda]);
            }
        }
        rank_guesses(self, x, y, candidates, 3)
    }
}

impl RetentionModel for BrooksCorey {
    fn kind(&self) -> ModelKind {
        ModelKind::BrooksCorey
    }

    fn theta_r(&self, p: &[f64]) -> f64 {
        p[0]
    }

    fn theta_s(&self, p: &[f64]) -> f64 {
        p[1]
    }

    /// 1 up to h_b, (h_b / h)^lambda above it.
    fn effective_saturation(&self, h: f64, p: &[f64]) -> f64 {
        let (h_b, lambda) = (p[2], p[3]);
        if h <= h_b {
            1.0
        } else {
            (lambda * (h_b / h).ln()).exp()
        }
    }

    /// 0 below h_b, lambda (theta_s - theta_r) Se / h above it, `None` at h = h_b where the
    /// left limit (0) and the right limit (lambda (theta_s - theta_r) / h_b) differ.
    #[allow(clippy::float_cmp)] // the break point itself, exactly
    fn capacity(&self, h: f64, p: &[f64]) -> Option<f64> {
        let (theta_r, theta_s, h_b, lambda) = (p[0], p[1], p[2], p[3]);
        if h < h_b {
            Some(0.0)
        } else if h == h_b {
            None
        } else {
            let se = (lambda * (h_b / h).ln()).exp();
            finite(lambda * (theta_s - theta_r) * se / h)
        }
    }

    /// h = h_b Se^(-1/lambda); 0 at saturation (the smallest suction holding theta_s).
    fn suction_at(&self, theta: f64, p: &[f64]) -> Option<f64> {
        let (theta_r, theta_s, h_b, lambda) = (p[0], p[1], p[2], p[3]);
        let se = (theta - theta_r) / (theta_s - theta_r);
        if se.is_nan() || se <= 0.0 {
            None
        } else if se >= 1.0 {
            Some(0.0)
        } else {
            finite(h_b * (-se.ln() / lambda).exp())
        }
    }
}
