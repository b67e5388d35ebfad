//! Statistics at the optimum: covariance, intervals, information criteria, influence.
//!
//! 95 % intervals are Wald intervals with Student's t; for positive scale parameters (suctions
//! and inverse suctions: alpha, h_b, h_e, h_m, a, h_r) they are formed on the log scale (see
//! [`interval95`]). A breakpoint sitting exactly on a measured suction is flagged
//! ([`kink_suction`]): its standard error comes from a one-sided derivative.
//!
//! Cov = s^2 (J' W J)^-1 with J the Jacobian in the physical parameters, s^2 = SSE / (n - k).
//! (J' W J) is inverted by Cholesky after scaling its columns to unit length (the scaling keeps
//! badly scaled problems, such as the NIST ones, accurate); when Cholesky fails the SVD of the
//! scaled Jacobian gives a pseudo-inverse, and when that shows a rank deficiency there is no
//! covariance at all.

use std::sync::OnceLock;

use nalgebra::DMatrix;
use statrs::distribution::{ContinuousCDF, StudentsT};

use super::report::IntervalScale;
use crate::model::curve::ParamSpec;

/// Student t quantiles t(0.975, dof) for dof 1..=TABLE, computed once.
const T_TABLE: usize = 400;

/// t(0.975, dof): the half-width factor of a two-sided 95 % interval.
pub(crate) fn t975(dof: usize) -> Option<f64> {
    static TABLE: OnceLock<Vec<f64>> = OnceLock::new();
    if dof == 0 {
        return None;
    }
    let quantile = |d: usize| {
        StudentsT::new(0.0, 1.0, d as f64)
            .ok()
            .map(|t| t.inverse_cdf(0.975))
    };
    if dof <= T_TABLE {
        let table = TABLE.get_or_init(|| {
            (1..=T_TABLE)
                .map(|d| quantile(d).unwrap_or(f64::NAN))
                .collect()
        });
        table.get(dof - 1).copied().filter(|v| v.is_finite())
    } else {
        quantile(dof).filter(|v| v.is_finite())
    }
}

/// How (J' W J)^-1 was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Inversion {
    Cholesky,
    PseudoInverse,
}

/// (J' J)^-1 for a (weighted) Jacobian with full column rank, or `None` when it is singular.
pub(crate) fn inverse_normal_matrix(j: &DMatrix<f64>) -> Option<(DMatrix<f64>, Inversion)> {
    let p = j.ncols();
    if p == 0 {
        return Some((DMatrix::zeros(0, 0), Inversion::Cholesky));
    }
    let mut scale = vec![0.0; p];
    for (k, s) in scale.iter_mut().enumerate() {
        let norm = j.column(k).norm();
        if !(norm > 0.0 && norm.is_finite()) {
            return None;
        }
        *s = 1.0 / norm;
    }
    let mut js = j.clone();
    for (k, &s) in scale.iter().enumerate() {
        js.column_mut(k).scale_mut(s);
    }
    let a = js.tr_mul(&js);
    let (inv_scaled, how) = match a.cholesky() {
        Some(ch) => {
            let inv = ch.inverse();
            // Cholesky succeeds on some numerically singular matrices: check the condition.
            let diag_max = inv.diagonal().max();
            if diag_max.is_finite() && diag_max < 1e14 {
                (inv, Inversion::Cholesky)
            } else {
                pseudo_inverse(&js)?
            }
        }
        None => pseudo_inverse(&js)?,
    };
    let mut inv = inv_scaled;
    for r in 0..p {
        for c in 0..p {
            inv[(r, c)] *= scale[r] * scale[c];
        }
    }
    Some((inv, how))
}

/// V S^-2 V' from the SVD of the scaled Jacobian, or `None` when its rank is deficient.
fn pseudo_inverse(js: &DMatrix<f64>) -> Option<(DMatrix<f64>, Inversion)> {
    let svd = js.clone().svd(false, true);
    let v_t = svd.v_t?;
    let s = &svd.singular_values;
    let s_max = s.max();
    let tol = s_max * (js.nrows().max(js.ncols()) as f64) * f64::EPSILON * 1e3;
    if s.iter().any(|&v| v <= tol) {
        return None;
    }
    let p = js.ncols();
    let mut inv = DMatrix::zeros(p, p);
    for (k, &sk) in s.iter().enumerate() {
        let row = v_t.row(k);
        let w = 1.0 / (sk * sk);
        for r in 0..p {
            for c in 0..p {
                inv[(r, c)] += w * row[r] * row[c];
            }
        }
    }
    Some((inv, Inversion::PseudoInverse))
}

/// AIC, AICc and BIC as documented on [`FitReport`](super::FitReport), for `n` readings, `k`
/// free parameters and the (weighted) sum of squares `sse`.
///
/// The error variance is estimated too (sigma^2 = SSE / n at the maximum of the Gaussian
/// likelihood), so the criteria count K = k + 1 parameters, as Burnham & Anderson (2002,
/// section 2.2) do for least squares: AIC = n ln(SSE/n) + 2K, AICc = AIC + 2K(K+1)/(n-K-1)
/// (`None` unless n > K + 1 = k + 2), BIC = n ln(SSE/n) + K ln n.
pub(crate) fn information_criteria(
    n: usize,
    k: usize,
    sse: f64,
) -> (Option<f64>, Option<f64>, Option<f64>) {
    if n == 0 || sse.is_nan() || sse <= 0.0 || !sse.is_finite() {
        return (None, None, None);
    }
    let kk = criteria_parameters(k);
    let nf = n as f64;
    let kf = kk as f64;
    let core = nf * (sse / nf).ln();
    let aic = core + 2.0 * kf;
    let aicc = (n > kk + 1).then(|| aic + 2.0 * kf * (kf + 1.0) / (nf - kf - 1.0));
    let bic = core + kf * nf.ln();
    (Some(aic), aicc, Some(bic))
}

/// AICc alone (see [`information_criteria`]): for recounting a stored ranking.
pub fn aicc(n: usize, k: usize, sse: f64) -> Option<f64> {
    information_criteria(n, k, sse).1
}

/// The parameters AIC, AICc and BIC count for `k` free ones: k + 1, the error variance being
/// estimated too (Burnham & Anderson 2002, section 2.2).
pub fn criteria_parameters(k: usize) -> usize {
    k + 1
}

/// The fewest readings for which AICc exists with `k` free parameters (n > k + 2).
pub fn min_points_for_aicc(k: usize) -> usize {
    criteria_parameters(k) + 2
}

/// Whether a parameter is a suction or an inverse suction (unit `cm` or `1/cm`, lower bound
/// above 0): a positive scale parameter, whose 95 % interval is formed on the log scale.
pub(crate) fn positive_scale(spec: &ParamSpec) -> bool {
    spec.lower > 0.0 && matches!(spec.unit, "cm" | "1/cm")
}

/// The 95 % interval of an estimate `value` with standard error `se` and t(0.975, n - k) `t`.
///
/// On the original scale, value -+ t se. For a positive scale parameter (`log_scale`) the
/// Wald interval is formed for ln p, whose standard error is se / p by the delta method, and
/// mapped back: [p exp(-t se / p), p exp(t se / p)], which stays positive (a Wald interval on
/// the original scale can include impossible negative suctions). `None` without se or t.
pub(crate) fn interval95(
    value: f64,
    se: Option<f64>,
    t: Option<f64>,
    log_scale: bool,
) -> Option<([f64; 2], IntervalScale)> {
    let (se, t) = (se?, t?);
    let interval = if log_scale && value > 0.0 {
        let half = t * se / value;
        (
            [value * (-half).exp(), value * half.exp()],
            IntervalScale::Log,
        )
    } else {
        ([value - t * se, value + t * se], IntervalScale::Linear)
    };
    interval.0.iter().all(|v| v.is_finite()).then_some(interval)
}

/// Relative distance within which a breakpoint counts as sitting on a measured suction.
pub(crate) const KINK_TOLERANCE: f64 = 1e-9;

/// The measured suction a breakpoint parameter (Brooks-Corey's h_b, Campbell's h_e) sits on,
/// within [`KINK_TOLERANCE`] relative, if any. There the sum of squares has a kink: the model
/// takes its saturated branch at h = h_b, so the Jacobian holds the derivative from one side
/// only, and the standard error built from it is not the two-sided one the theory assumes.
pub(crate) fn kink_suction(value: f64, suctions: &[f64]) -> Option<f64> {
    suctions
        .iter()
        .copied()
        .find(|&x| x > 0.0 && (value - x).abs() <= KINK_TOLERANCE * x)
}

/// The fit's note for a breakpoint on a measured suction (see [`kink_suction`]).
pub(crate) fn kink_note(name: &str, suction_cm: f64) -> String {
    format!(
        "{name} sits on the measured suction {suction_cm} cm, a kink of the curve: its \
         standard error and interval use a one-sided derivative and are approximate"
    )
}

/// Leverage, studentized residuals (internal, external) and Cook's distance of one reading.
pub(crate) struct Influence {
    pub leverage: Option<f64>,
    pub studentized: Option<f64>,
    pub external: Option<f64>,
    pub cooks: Option<f64>,
}

/// Influence of a reading with weighted residual `e`, Jacobian row `row` (weighted) and
/// (J'WJ)^-1 `inv`; `s2` the residual variance, `dof` = n - k, `p` the covariance size.
pub(crate) fn influence(
    e: f64,
    row: &[f64],
    inv: Option<&DMatrix<f64>>,
    s2: Option<f64>,
    dof: usize,
    sse: f64,
) -> Influence {
    let none = Influence {
        leverage: None,
        studentized: None,
        external: None,
        cooks: None,
    };
    let Some(inv) = inv else { return none };
    let p = row.len();
    let mut h = 0.0;
    for r in 0..p {
        let mut acc = 0.0;
        for c in 0..p {
            acc += inv[(r, c)] * row[c];
        }
        h += row[r] * acc;
    }
    if !h.is_finite() {
        return none;
    }
    let h = h.clamp(0.0, 1.0);
    let leverage = Some(h);
    let one_minus = 1.0 - h;
    let Some(s2) = s2.filter(|&v| v > 0.0 && one_minus > 1e-12) else {
        return Influence { leverage, ..none };
    };
    let t = e / (s2 * one_minus).sqrt();
    let cooks = (p > 0).then(|| t * t * h / (p as f64 * one_minus));
    let external = if dof > 1 {
        let s2_i = (sse - e * e / one_minus) / (dof as f64 - 1.0);
        (s2_i > 0.0).then(|| e / (s2_i * one_minus).sqrt())
    } else {
        None
    };
    Influence {
        leverage,
        studentized: Some(t),
        external,
        cooks,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn t_quantiles_match_tables() {
        // Common two-sided 95 % values (any statistics table): t(1) = 12.706, t(10) = 2.228.
        assert!((t975(1).unwrap() - 12.706_204_736).abs() < 1e-6);
        assert!((t975(10).unwrap() - 2.228_138_852).abs() < 1e-6);
        assert!((t975(1000).unwrap() - 1.962_339).abs() < 1e-5);
        assert!(t975(0).is_none());
    }

    #[test]
    fn singular_jacobian_has_no_inverse() {
        let j = DMatrix::from_row_slice(3, 2, &[1.0, 2.0, 2.0, 4.0, 3.0, 6.0]);
        assert!(inverse_normal_matrix(&j).is_none());
        let j = DMatrix::from_row_slice(3, 2, &[1.0, 0.0, 0.0, 1.0, 1.0, 1.0]);
        let (inv, how) = inverse_normal_matrix(&j).unwrap();
        assert_eq!(how, Inversion::Cholesky);
        // (J'J) = [[2,1],[1,2]], inverse [[2,-1],[-1,2]]/3.
        assert!((inv[(0, 0)] - 2.0 / 3.0).abs() < 1e-14);
        assert!((inv[(0, 1)] + 1.0 / 3.0).abs() < 1e-14);
    }

    #[test]
    fn intervals_of_positive_scale_parameters_stay_positive() {
        // A poorly determined h_e: 10 cm with SE 10.5 and t(0.975, 5) = 2.5706 gives
        // [-17, 37] cm on the original scale; on the log scale (delta method, se(ln p) = se / p)
        // it is 10 exp(-+2.5706 * 1.05).
        let t = t975(5);
        let (ci, scale) = interval95(10.0, Some(10.5), t, true).expect("interval");
        assert_eq!(scale, IntervalScale::Log);
        let half = t.unwrap() * 1.05;
        assert!((ci[0] - 10.0 * (-half).exp()).abs() < 1e-12, "{ci:?}");
        assert!((ci[1] - 10.0 * half.exp()).abs() < 1e-9, "{ci:?}");
        assert!(ci[0] > 0.0);
        // The geometric midpoint is the estimate.
        assert!(((ci[0] * ci[1]).sqrt() - 10.0).abs() < 1e-12);
        let (lin, scale) = interval95(10.0, Some(10.5), t, false).expect("interval");
        assert_eq!(scale, IntervalScale::Linear);
        assert!(lin[0] < 0.0 && (lin[1] - lin[0] - 2.0 * half * 10.0).abs() < 1e-9);
        assert_eq!(interval95(10.0, None, t, true), None);
        assert_eq!(interval95(10.0, Some(1.0), None, true), None);
        let spec = |unit: &'static str, lower: f64| ParamSpec {
            name: "p",
            unit,
            lower,
            upper: 1e5,
        };
        assert!(positive_scale(&spec("cm", 0.01)));
        assert!(positive_scale(&spec("1/cm", 1e-5)));
        assert!(!positive_scale(&spec("-", 1.001)));
        assert!(!positive_scale(&spec("m3/m3", 0.0)));
        assert!(!positive_scale(&spec("cm", 0.0)));
    }

    #[test]
    fn a_breakpoint_on_a_measured_suction_is_a_kink() {
        let x = [0.0, 10.0, 30.0, 100.0];
        assert_eq!(kink_suction(30.0, &x), Some(30.0));
        assert_eq!(kink_suction(30.0 * (1.0 + 1e-12), &x), Some(30.0));
        assert_eq!(kink_suction(30.0 * (1.0 + 1e-6), &x), None);
        assert_eq!(kink_suction(0.0, &x), None);
        assert_eq!(kink_suction(55.0, &x), None);
    }

    #[test]
    fn information_criteria_count_the_error_variance() {
        // K = k + 1 = 5 (Burnham & Anderson 2002, section 2.2, least squares).
        let (aic, aicc, bic) = information_criteria(10, 4, 0.01);
        let core = 10.0 * (0.001f64).ln();
        assert!((aic.unwrap() - (core + 10.0)).abs() < 1e-12);
        assert!((aicc.unwrap() - (core + 10.0 + 60.0 / 4.0)).abs() < 1e-12);
        assert!((bic.unwrap() - (core + 5.0 * 10f64.ln())).abs() < 1e-12);
        // n = 6 readings, k = 4: n - K - 1 = 0, no AICc; n = 7 has one.
        assert_eq!(information_criteria(6, 4, 0.01).1, None);
        assert!(information_criteria(7, 4, 0.01).1.is_some());
        assert_eq!(min_points_for_aicc(4), 7);
        assert_eq!(information_criteria(5, 2, 0.0), (None, None, None));
    }
}
