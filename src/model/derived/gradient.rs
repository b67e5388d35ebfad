//! Gradients of the derived values with respect to a curve's parameters, for the delta method
//! (and for anything else that needs the variance of a derived value, such as choosing the
//! next suction to measure).
//!
//! Every function returns d value / d p_k for every parameter of the model, in the model's
//! order and in the physical parameters (those a fit report's covariance is over); `None`
//! where the value does not exist or a derivative is not finite. A caller forming
//! g' Cov g uses the entries of the covariance's parameters only: fixed parameters and
//! parameters held on a bound have no covariance entries and are so treated as known.
//!
//! How each gradient is obtained:
//!
//! | value | gradient |
//! |---|---|
//! | theta(h) | the models' analytic d theta / d p ([`CurveModel::value_and_gradient`](crate::model::curve::CurveModel::value_and_gradient)) |
//! | available water | the difference of the two above |
//! | h at Se = 1/2 | implicit function theorem on theta(h, p) = theta_r + (theta_s - theta_r) / 2: dh/dp = (d theta/dp - d target/dp) / C(h), analytic C(h) |
//! | air entry, Brooks-Corey and Campbell | the parameter h_b or h_e itself (a unit vector) |
//! | air entry, smooth models | ln h_ae = u_i + (theta_s - theta(u_i)) / S(u_i), u = ln h, S = d theta / du, u_i the inflection (S'(u_i) = 0); the terms in d u_i / dp cancel there, so d ln h_ae / dp = (d theta_s/dp - d theta/dp) / S - (theta_s - theta_i) (dS/dp) / S^2 at fixed u_i, with the analytic mixed derivative dS/dp of [`slope_ln_h_gradient`]: analytic, no derivative of the inflection's position needed |
//! | K(h) = Ks Kr(h) | analytic d Kr / dp for every conductivity model; for van Genuchten with m free, the derivatives of the incomplete beta function I_z(a, b) with respect to a and b are central differences (its derivative in z is analytic); Ks is a measured input, treated as known |

use super::{air_entry_estimate, inflection_vs_ln_h, suction_at_half_saturation};
use crate::model::conductivity::ConductivityModel;
use crate::model::retention::fredlund_xing::{H_DRY_CM, correction};
use crate::model::retention::kosugi::{normal_pdf, normal_q, z_of};
use crate::model::retention::van_genuchten::mualem_m;
use crate::model::retention::van_genuchten_free_m::VgTerm;
use crate::model::retention::{ModelKind, RetentionCurve, ln_sigmoid, softplus_sigmoid};
use crate::model::special::{beta_reg, ln_beta};

fn all_finite(g: Vec<f64>) -> Option<Vec<f64>> {
    g.iter().all(|v| v.is_finite()).then_some(g)
}

fn index_of(kind: ModelKind, name: &str) -> Option<usize> {
    kind.param_index(name).ok()
}

fn unit_vector(len: usize, at: usize) -> Vec<f64> {
    let mut g = vec![0.0; len];
    g[at] = 1.0;
    g
}

/// d theta(h) / dp at suction `h_cm` (cm): the model's analytic gradient.
pub fn theta_gradient(kind: ModelKind, p: &[f64], h_cm: f64) -> Option<Vec<f64>> {
    if p.len() != kind.params().len() || !(h_cm >= 0.0 && h_cm.is_finite()) {
        return None;
    }
    let mut g = vec![0.0; p.len()];
    let theta = kind.curve().value_and_gradient(h_cm, p, &mut g);
    if !theta.is_finite() {
        return None;
    }
    all_finite(g)
}

/// d AW / dp, AW = theta(FC) - theta(PWP), with the field-capacity and wilting-point
/// suctions in cm.
pub fn available_water_gradient(
    kind: ModelKind,
    p: &[f64],
    fc_h_cm: f64,
    pwp_h_cm: f64,
) -> Option<Vec<f64>> {
    let fc = theta_gradient(kind, p, fc_h_cm)?;
    let pwp = theta_gradient(kind, p, pwp_h_cm)?;
    all_finite(fc.iter().zip(&pwp).map(|(a, b)| a - b).collect())
}

/// d h_50 / dp for the suction h_50 where Se = 1/2 (cm per unit of each parameter), by the
/// implicit function theorem: h_50 solves theta(h, p) = theta_r + (theta_s - theta_r) / 2, so
/// dh/dp = (d theta / dp - d target / dp) / C(h_50).
pub fn half_saturation_gradient(kind: ModelKind, p: &[f64]) -> Option<Vec<f64>> {
    let curve = RetentionCurve::new(kind, p.to_vec()).ok()?;
    let h = suction_at_half_saturation(&curve).filter(|h| *h > 0.0)?;
    let c = curve.capacity(h).filter(|c| *c > 0.0 && c.is_finite())?;
    let mut g = theta_gradient(kind, p, h)?;
    // The target theta_r + (theta_s - theta_r) / 2 moves by 1/2 with each end.
    for name in ["theta_r", "theta_s"] {
        if let Some(i) = index_of(kind, name) {
            g[i] -= 0.5;
        }
    }
    all_finite(g.into_iter().map(|v| v / c).collect())
}

/// d h_ae / dp for the air-entry estimate (cm per unit of each parameter); see the module
/// table for how it is obtained.
pub fn air_entry_gradient(kind: ModelKind, p: &[f64]) -> Option<Vec<f64>> {
    let curve = RetentionCurve::new(kind, p.to_vec()).ok()?;
    match kind {
        ModelKind::BrooksCorey => Some(unit_vector(p.len(), 2)),
        ModelKind::Campbell => Some(unit_vector(p.len(), 1)),
        _ => {
            let h_ae = air_entry_estimate(&curve)?.suction_cm;
            let point = inflection_vs_ln_h(&curve)?;
            let (s, ds) = slope_ln_h_gradient(kind, p, point.suction_cm)?;
            if s.is_nan() || s >= 0.0 {
                return None;
            }
            let dtheta = theta_gradient(kind, p, point.suction_cm)?;
            let (_, theta_s) = curve.theta_range();
            let gap = theta_s - point.theta;
            let at_s = index_of(kind, "theta_s");
            let g = (0..p.len())
                .map(|k| {
                    let d_theta_s = if Some(k) == at_s { 1.0 } else { 0.0 };
                    h_ae * ((d_theta_s - dtheta[k]) / s - gap * ds[k] / (s * s))
                })
                .collect();
            all_finite(g)
        }
    }
}

/// S = d theta / d ln h = -h C(h) at suction `h_cm` and its gradient dS/dp (the mixed
/// derivative d^2 theta / d ln h dp), analytic for every model; `None` at the break point of
/// Brooks-Corey and Campbell, where the slope jumps.
#[allow(clippy::float_cmp)] // the break point itself, exactly, as the models test it
pub fn slope_ln_h_gradient(kind: ModelKind, p: &[f64], h_cm: f64) -> Option<(f64, Vec<f64>)> {
    if p.len() != kind.params().len() || !(h_cm >= 0.0 && h_cm.is_finite()) {
        return None;
    }
    let h = h_cm;
    let zero = || Some((0.0, vec![0.0; p.len()]));
    let (s, g) = match kind {
        ModelKind::VanGenuchten | ModelKind::VanGenuchtenFreeM => {
            let (alpha, n) = (p[2], p[3]);
            let free = kind == ModelKind::VanGenuchtenFreeM;
            let m = if free { p[4] } else { mualem_m(n) };
            let Some(t) = term_slope(h, alpha, n, m) else {
                return zero();
            };
            let d = p[1] - p[0];
            let mut g = vec![-t.g, t.g, d * t.d_alpha];
            if free {
                g.extend([d * t.d_n, d * t.d_m]);
            } else {
                g.push(d * (t.d_n + t.d_m / (n * n)));
            }
            (d * t.g, g)
        }
        ModelKind::Durner => {
            let (d, w) = (p[1] - p[0], p[2]);
            let slope = |alpha: f64, n: f64| {
                term_slope(h, alpha, n, mualem_m(n)).map_or((0.0, 0.0, 0.0), |t| {
                    (t.g, t.d_alpha, t.d_n + t.d_m / (n * n))
                })
            };
            let (g1, a1, n1) = slope(p[3], p[4]);
            let (g2, a2, n2) = slope(p[5], p[6]);
            let mix = w * g1 + (1.0 - w) * g2;
            let g = vec![
                -mix,
                mix,
                d * (g1 - g2),
                d * w * a1,
                d * w * n1,
                d * (1.0 - w) * a2,
                d * (1.0 - w) * n2,
            ];
            (d * mix, g)
        }
        ModelKind::Kosugi => {
            let (d, h_m, sigma) = (p[1] - p[0], p[2], p[3]);
            if h <= 0.0 {
                return zero();
            }
            let z = z_of(h, h_m, sigma);
            let phi = normal_pdf(z);
            let g = vec![
                phi / sigma,
                -phi / sigma,
                -d * z * phi / (sigma * sigma * h_m),
                d * phi * (1.0 - z * z) / (sigma * sigma),
            ];
            (-d * phi / sigma, g)
        }
        ModelKind::BrooksCorey => {
            let (d, h_b, lambda) = (p[1] - p[0], p[2], p[3]);
            if h < h_b {
                return zero();
            }
            if h == h_b {
                return None;
            }
            let r = (h_b / h).ln();
            let se = (lambda * r).exp();
            let g = vec![
                lambda * se,
                -lambda * se,
                -lambda * lambda * d * se / h_b,
                -d * se * (1.0 + lambda * r),
            ];
            (-lambda * d * se, g)
        }
        ModelKind::Campbell => {
            let (theta_s, h_e, b) = (p[0], p[1], p[2]);
            if h < h_e {
                return zero();
            }
            if h == h_e {
                return None;
            }
            let r = (h_e / h).ln();
            let s = (r / b).exp();
            let theta = theta_s * s;
            let g = vec![
                -s / b,
                -theta / (b * b * h_e),
                theta / (b * b) + theta * r / (b * b * b),
            ];
            (-theta / b, g)
        }
        ModelKind::FredlundXing => {
            if h <= 0.0 || h >= H_DRY_CM {
                return zero();
            }
            fredlund_xing_slope(h, p)
        }
    };
    s.is_finite().then_some(())?;
    Some((s, all_finite(g)?))
}

/// One van Genuchten term's slope against ln h, g = d Se / d ln h = -m n Se sig, and its
/// derivatives with respect to alpha, n (m held) and m.
struct TermSlope {
    g: f64,
    d_alpha: f64,
    d_n: f64,
    d_m: f64,
}

fn term_slope(h: f64, alpha: f64, n: f64, m: f64) -> Option<TermSlope> {
    let t = VgTerm::at(h, alpha, n, m)?;
    // 1 - sig = 1 / (1 + (alpha h)^n) = exp(-ln(1 + (alpha h)^n)), exact at both ends.
    let one_minus = (-t.lnb).exp();
    let curvature = one_minus - m * t.sig;
    let g = -m * n * t.se * t.sig;
    Some(TermSlope {
        g,
        // g depends on alpha only through ln alpha + ln h: dg/dalpha = (d^2 Se / du^2) / alpha.
        d_alpha: g * n * curvature / alpha,
        d_n: -m * t.se * t.sig * (1.0 + n * t.ln_x * curvature),
        d_m: -n * t.se * t.sig * (1.0 - m * t.lnb),
    })
}

/// Fredlund-Xing: theta = theta_s C(h) P, P = L^-m, L = ln(e + (h/a)^n); with u = ln h,
/// S = theta_s (C_u P + C P_u).
fn fredlund_xing_slope(h: f64, p: &[f64]) -> (f64, Vec<f64>) {
    let (theta_s, a, n, m, h_r) = (p[0], p[1], p[2], p[3], p[4]);
    let ln_r = (h / a).ln();
    let (sp, q) = softplus_sigmoid(n * ln_r - 1.0);
    let one_minus_q = (-sp).exp();
    let l = 1.0 + sp;
    let ln_l = l.ln();
    let pw = (-m * ln_l).exp();
    let b_den = (H_DRY_CM / h_r).ln_1p();
    let a_num = (h / h_r).ln_1p();
    let corr = correction(h, h_r);
    let k = h / (h_r + h);
    let corr_u = -k / b_den;
    let qpl = q * pw / l;
    let p_u = -m * n * qpl;
    let s = theta_s * (corr_u * pw + corr * p_u);
    // Derivatives of L, q and P with respect to a, n and m.
    let (l_a, l_n) = (-n * q / a, q * ln_r);
    let (q_a, q_n) = (q * one_minus_q * (-n / a), q * one_minus_q * ln_r);
    let (p_a, p_n, p_m) = (-m * pw * l_a / l, -m * pw * l_n / l, -pw * ln_l);
    let qpl_a = q_a * pw / l + q * p_a / l - qpl * l_a / l;
    let qpl_n = q_n * pw / l + q * p_n / l - qpl * l_n / l;
    let pu_a = -m * n * qpl_a;
    let pu_n = -m * qpl - m * n * qpl_n;
    let pu_m = -n * qpl * (1.0 - m * ln_l);
    // The correction term's derivatives with respect to h_r.
    let dk_hr = -h / ((h_r + h) * (h_r + h));
    let db_hr = -H_DRY_CM / (h_r * (h_r + H_DRY_CM));
    let da_hr = -h / (h_r * (h_r + h));
    let corr_u_hr = -dk_hr / b_den + k * db_hr / (b_den * b_den);
    let corr_hr = -(da_hr * b_den - a_num * db_hr) / (b_den * b_den);
    let g = vec![
        corr_u * pw + corr * p_u,
        theta_s * (corr_u * p_a + corr * pu_a),
        theta_s * (corr_u * p_n + corr * pu_n),
        theta_s * (corr_u * p_m + corr * pu_m),
        theta_s * (corr_u_hr * pw + corr_hr * p_u),
    ];
    (s, g)
}

/// d K(h) / dp = Ks d Kr(h) / dp (cm/day per unit of each parameter when Ks is in cm/day),
/// with the conductivity model's own parameters (those of its retention model) and Mualem's
/// pore-connectivity exponent `pore_connectivity` (used by the Mualem forms). Ks and L are
/// treated as known.
pub fn conductivity_gradient(
    model: ConductivityModel,
    h_cm: f64,
    p: &[f64],
    ks: f64,
    pore_connectivity: f64,
) -> Option<Vec<f64>> {
    if p.len() != model.retention().params().len() || !(h_cm >= 0.0 && h_cm.is_finite()) {
        return None;
    }
    let kr = model.relative(h_cm, p, pore_connectivity)?;
    let g = relative_gradient(model, h_cm, p, pore_connectivity, kr)?;
    all_finite(g.into_iter().map(|v| ks * v).collect())
}

/// The Mualem bracket B = 1 - (1 - Se^(1/m))^m of one van Genuchten term and its
/// derivatives with respect to t = n ln(alpha h) and m.
fn bracket(t: &VgTerm, n: f64, m: f64) -> (f64, f64, f64) {
    let ln_s = ln_sigmoid(n * t.ln_x);
    let b = -(m * ln_s).exp_m1();
    let one_minus_b = (m * ln_s).exp();
    let one_minus_sig = (-t.lnb).exp();
    (b, -one_minus_b * m * one_minus_sig, -one_minus_b * ln_s)
}

/// Central difference of the incomplete beta function I_z(a, b) in a and in b.
fn beta_shape_derivatives(a: f64, b: f64, z: f64, one_minus_z: f64) -> Option<(f64, f64)> {
    let (da, db) = (1e-6 * a, 1e-6 * b);
    let i = |a, b| beta_reg(a, b, z, one_minus_z);
    let d_a = (i(a + da, b)? - i(a - da, b)?) / (2.0 * da);
    let d_b = (i(a, b + db)? - i(a, b - db)?) / (2.0 * db);
    Some((d_a, d_b))
}

#[allow(clippy::float_cmp)] // Kr = 0 exactly: nothing to differentiate
fn relative_gradient(
    model: ConductivityModel,
    h: f64,
    p: &[f64],
    l: f64,
    kr: f64,
) -> Option<Vec<f64>> {
    let mut g = vec![0.0; p.len()];
    if kr == 0.0 {
        return Some(g);
    }
    match model {
        ConductivityModel::MualemVanGenuchten | ConductivityModel::MualemVanGenuchtenFreeM => {
            let free = model == ConductivityModel::MualemVanGenuchtenFreeM;
            let (alpha, n) = (p[2], p[3]);
            let m = if free { p[4] } else { mualem_m(n) };
            let Some(t) = VgTerm::at(h, alpha, n, m) else {
                return Some(g);
            };
            // Se^L = exp(-L m ln(1 + (alpha h)^n)).
            let se_l = (-l * m * t.lnb).exp();
            let (d_t, d_m, d_n_shape) = if free {
                // Kr = Se^L I^2, I = I_z(m + 1/n, 1 - 1/n), z = Se^(1/m) = 1 / (1 + (alpha h)^n).
                let (a, b) = (m + 1.0 / n, 1.0 - 1.0 / n);
                let z = (-t.lnb).exp();
                let i = beta_reg(a, b, z, t.sig)?;
                // dI/dt = dI/dz dz/dt = -z^a (1 - z)^b / B(a, b).
                let ln_one_minus_z = ln_sigmoid(n * t.ln_x);
                let di_dt = -(a * -t.lnb + b * ln_one_minus_z - ln_beta(a, b)).exp();
                let (di_da, di_db) = beta_shape_derivatives(a, b, z, t.sig)?;
                let d_t = kr * (-l * m * t.sig) + se_l * 2.0 * i * di_dt;
                let d_m = kr * (-l * t.lnb) + se_l * 2.0 * i * di_da;
                // a = m + 1/n and b = 1 - 1/n move with n too.
                let d_n_shape = se_l * 2.0 * i * (-di_da + di_db) / (n * n);
                (d_t, d_m, d_n_shape)
            } else {
                let (b, db_dt, db_dm) = bracket(&t, n, m);
                let d_t = kr * (-l * m * t.sig) + se_l * 2.0 * b * db_dt;
                let d_m = kr * (-l * t.lnb) + se_l * 2.0 * b * db_dm;
                (d_t, d_m, 0.0)
            };
            g[2] = d_t * n / alpha;
            g[3] = d_t * t.ln_x + d_n_shape;
            if free {
                g[4] = d_m;
            } else {
                g[3] += d_m / (n * n);
            }
        }
        ConductivityModel::BurdineBrooksCorey | ConductivityModel::MualemBrooksCorey => {
            let (h_b, lambda) = (p[2], p[3]);
            if h > h_b {
                let c = if model == ConductivityModel::BurdineBrooksCorey {
                    3.0
                } else {
                    l + 2.0
                };
                let exponent = 2.0 + c * lambda;
                g[2] = kr * exponent / h_b;
                g[3] = kr * (h_b / h).ln() * c;
            }
        }
        ConductivityModel::Campbell => {
            let (h_e, b) = (p[1], p[2]);
            if h > h_e {
                let exponent = 2.0 + 3.0 / b;
                g[1] = kr * exponent / h_e;
                g[2] = kr * (h_e / h).ln() * (-3.0 / (b * b));
            }
        }
        ConductivityModel::MualemKosugi => {
            let (h_m, sigma) = (p[2], p[3]);
            if h > 0.0 {
                let z = z_of(h, h_m, sigma);
                let w = z + sigma;
                let (qz, qw) = (normal_q(z), normal_q(w));
                // dKr/dz with w held, and dKr/dw.
                let by_z = -l * kr * normal_pdf(z) / qz;
                let by_w = -2.0 * kr * normal_pdf(w) / qw;
                g[2] = (by_z + by_w) * (-1.0 / (sigma * h_m));
                g[3] = by_z * (-z / sigma) + by_w * (1.0 - z / sigma);
            }
        }
        ConductivityModel::MualemDurner => durner_relative_gradient(h, p, l, kr, &mut g)?,
    }
    Some(g)
}

/// Priesack & Durner (2006): Kr = Se^L (N / D)^2 with N = sum w_i alpha_i B_i and
/// D = sum w_i alpha_i; d Kr = Kr (L dSe / Se + 2 dN / N - 2 dD / D).
fn durner_relative_gradient(h: f64, p: &[f64], l: f64, kr: f64, g: &mut [f64]) -> Option<()> {
    let w = [p[2], 1.0 - p[2]];
    let modes = [(p[3], p[4]), (p[5], p[6])];
    // Per mode: Se_i, dSe_i/dalpha, dSe_i/dn, B_i, dB_i/dalpha, dB_i/dn.
    let mut parts = [[1.0, 0.0, 0.0, 1.0, 0.0, 0.0]; 2];
    for (part, (alpha, n)) in parts.iter_mut().zip(modes) {
        let m = mualem_m(n);
        if let Some(t) = VgTerm::at(h, alpha, n, m) {
            let (b, db_dt, db_dm) = bracket(&t, n, m);
            *part = [
                t.se,
                t.d_alpha(alpha, n, m),
                t.d_n(m) + t.d_m() / (n * n),
                b,
                db_dt * n / alpha,
                db_dt * t.ln_x + db_dm / (n * n),
            ];
        }
    }
    let se = w[0] * parts[0][0] + w[1] * parts[1][0];
    let num = w[0] * modes[0].0 * parts[0][3] + w[1] * modes[1].0 * parts[1][3];
    let den = w[0] * modes[0].0 + w[1] * modes[1].0;
    if !(se > 0.0 && num > 0.0 && den > 0.0) {
        return None;
    }
    let combine = |d_se: f64, d_num: f64, d_den: f64| {
        kr * (l * d_se / se + 2.0 * d_num / num - 2.0 * d_den / den)
    };
    g[2] = combine(
        parts[0][0] - parts[1][0],
        modes[0].0 * parts[0][3] - modes[1].0 * parts[1][3],
        modes[0].0 - modes[1].0,
    );
    for (i, (alpha, _)) in modes.iter().enumerate() {
        let part = parts[i];
        g[3 + 2 * i] = combine(w[i] * part[1], w[i] * (part[3] + alpha * part[4]), w[i]);
        g[4 + 2 * i] = combine(w[i] * part[2], w[i] * alpha * part[5], 0.0);
    }
    Some(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn brooks_corey_air_entry_is_its_parameter() {
        let g = air_entry_gradient(ModelKind::BrooksCorey, &[0.05, 0.4, 20.0, 0.5]).expect("g");
        assert_eq!(g, vec![0.0, 0.0, 1.0, 0.0]);
    }

    #[test]
    fn slope_matches_the_capacity() {
        let p = [0.05, 0.4, 0.02, 1.6];
        let (s, _) = slope_ln_h_gradient(ModelKind::VanGenuchten, &p, 80.0).expect("s");
        let curve = RetentionCurve::new(ModelKind::VanGenuchten, p.to_vec()).expect("curve");
        let c = curve.capacity(80.0).expect("c");
        assert!(
            (s / (-80.0 * c) - 1.0).abs() < 1e-12,
            "{s} vs {}",
            -80.0 * c
        );
    }
}
