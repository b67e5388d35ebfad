//! Levenberg-Marquardt for two parameters: the trust-region method of the `levenberg-marquardt`
//! crate (Moré 1978, MINPACK's lmder: the same scaling, step bound, ratio tests, radius
//! updates and termination tests, and its lmpar search for the damping), written out for two
//! columns: a 2x2 triangular factor on the stack, no generic matrix code, no allocation.
//!
//! The factor is built by Givens rotations, row by row. Householder reflections (as the crate
//! does) measured no faster here, and sent one of the 10,000 bench samples into the other of
//! two nearly equal minima; the rotations reach the crate's minimum on all of them.
//!
//! After variable projection the van Genuchten fit has two shape parameters, so this is its
//! common case. The generic solver stays the reference: `FitOptions::with_reference_solver`
//! runs it instead, and the tests compare both on seeded sample sets.

use levenberg_marquardt::{LeastSquaresProblem, MinimizationReport, TerminationReason};
use nalgebra::allocator::Allocator;
use nalgebra::{DefaultAllocator, Dim, U2};

/// The solver's settings (the same meaning as the crate's builder methods).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Settings {
    /// Relative reduction of the sum of squares below which a run has converged.
    pub ftol: f64,
    /// Relative size of the trust region below which a run has converged.
    pub xtol: f64,
    /// Cosine between the residuals and the Jacobian's columns below which a run stops.
    pub gtol: f64,
    /// Initial trust-region radius as a multiple of the scaled parameter norm.
    pub stepbound: f64,
    /// Evaluations allowed are `patience * (parameters + 1)`.
    pub patience: usize,
}

/// The QR factorization of one Jacobian with the rotated residuals: J = Q R, R upper
/// triangular 2x2, and z = the first two entries of Q'r. Built row by row with Givens
/// rotations (no storage beyond these numbers), as stable as the QR the generic solver uses.
#[derive(Debug, Clone, Copy, Default)]
struct Factor {
    r00: f64,
    r01: f64,
    r11: f64,
    z: [f64; 2],
}

impl Factor {
    /// Add the row (a, b) of the Jacobian with residual c.
    fn push(&mut self, a: f64, b: f64, c: f64) {
        let (mut b, mut c) = (b, c);
        if a != 0.0 {
            let rr = norm2(self.r00, a);
            let (cs, sn) = (self.r00 / rr, a / rr);
            self.r00 = rr;
            let r01 = cs * self.r01 + sn * b;
            b = -sn * self.r01 + cs * b;
            self.r01 = r01;
            let z0 = cs * self.z[0] + sn * c;
            c = -sn * self.z[0] + cs * c;
            self.z[0] = z0;
        }
        if b != 0.0 {
            let rr = norm2(self.r11, b);
            let (cs, sn) = (self.r11 / rr, b / rr);
            self.r11 = rr;
            self.z[1] = cs * self.z[1] + sn * c;
        }
    }

    /// The norms of the Jacobian's two columns.
    fn column_norms(&self) -> [f64; 2] {
        [self.r00.abs(), norm2(self.r01, self.r11)]
    }

    /// J'r = R'z.
    fn gradient(&self) -> [f64; 2] {
        [
            self.r00 * self.z[0],
            self.r01 * self.z[0] + self.r11 * self.z[1],
        ]
    }

    /// ||J p|| = ||R p||.
    fn j_norm(&self, p: [f64; 2]) -> f64 {
        norm2(self.r00 * p[0] + self.r01 * p[1], self.r11 * p[1])
    }
}

/// Minimise `0.5 ||r(x)||^2` over the two parameters of `target`, from its current parameters.
pub(crate) fn minimize<M, O>(settings: &Settings, mut target: O) -> (O, MinimizationReport<f64>)
where
    M: Dim,
    O: LeastSquaresProblem<f64, M, U2>,
    DefaultAllocator: Allocator<M> + Allocator<M, U2> + Allocator<U2>,
{
    let mut report = MinimizationReport {
        termination: TerminationReason::ResidualsZero,
        number_of_evaluations: 1,
        objective_function: f64::NAN,
    };
    let done = |target: O, report: MinimizationReport<f64>, why: TerminationReason| {
        (
            target,
            MinimizationReport {
                termination: why,
                ..report
            },
        )
    };
    let start = target.params();
    let mut x = [start[0], start[1]];
    let Some(mut residuals) = target.residuals() else {
        return done(target, report, TerminationReason::User("residuals"));
    };
    let mut fnorm = residuals.norm();
    report.objective_function = 0.5 * fnorm * fnorm;
    if !fnorm.is_finite() {
        return done(
            target,
            report,
            TerminationReason::Numerical("residuals norm"),
        );
    }
    if fnorm <= f64::MIN_POSITIVE {
        return (target, report);
    }
    let max_fev = settings.patience * 3;
    let mut diag = [1.0, 1.0];
    let (mut delta, mut lambda, mut xnorm) = (0.0_f64, 0.0_f64, 0.0_f64);
    let (mut first_update, mut first_step) = (true, true);
    let eps = f64::EPSILON;
    loop {
        let Some(jacobian) = target.jacobian() else {
            return done(target, report, TerminationReason::User("jacobian"));
        };
        let mut n = Factor::default();
        for (i, r) in residuals.iter().enumerate() {
            n.push(jacobian[(i, 0)], jacobian[(i, 1)], *r);
        }
        let column_norms = n.column_norms();
        let gradient = n.gradient();
        // The largest cosine between the residuals and a column of the Jacobian.
        let mut gnorm = 0.0_f64;
        for k in 0..2 {
            if column_norms[k] != 0.0 {
                gnorm = gnorm.max((gradient[k] / (column_norms[k] * fnorm)).abs());
            }
        }
        if !gnorm.is_finite() {
            return done(target, report, TerminationReason::Numerical("jacobian"));
        }
        if gnorm <= settings.gtol {
            return done(target, report, TerminationReason::Orthogonal);
        }
        if first_update {
            for k in 0..2 {
                diag[k] = if column_norms[k] == 0.0 {
                    1.0
                } else {
                    column_norms[k]
                };
            }
            xnorm = scaled_norm(diag, x);
            if !xnorm.is_finite() {
                return done(target, report, TerminationReason::Numerical("subproblem x"));
            }
            delta = if xnorm == 0.0 {
                settings.stepbound
            } else {
                settings.stepbound * xnorm
            };
            first_update = false;
        } else {
            for k in 0..2 {
                diag[k] = diag[k].max(column_norms[k]);
            }
        }
        loop {
            let (step, pnorm, lam) = trust_region_step(&n, diag, delta, lambda);
            lambda = lam;
            if !pnorm.is_finite() {
                return done(
                    target,
                    report,
                    TerminationReason::Numerical("subproblem ||Dp||"),
                );
            }
            let temp1 = (n.j_norm(step) / fnorm).powi(2);
            let temp2 = (lambda.sqrt() * pnorm / fnorm).powi(2);
            if !temp1.is_finite() || !temp2.is_finite() {
                return done(
                    target,
                    report,
                    TerminationReason::Numerical("trust-region reduction"),
                );
            }
            let predicted = temp1 + temp2 / 0.5;
            let dir_der = -(temp1 + temp2);
            if first_step && pnorm < delta {
                delta = pnorm;
            }
            first_step = false;
            let trial = [x[0] - step[0], x[1] - step[1]];
            let mut q = target.params();
            q[0] = trial[0];
            q[1] = trial[1];
            target.set_params(&q);
            report.number_of_evaluations += 1;
            let Some(new_residuals) = target.residuals() else {
                return done(target, report, TerminationReason::User("residuals"));
            };
            let new_norm = new_residuals.norm();
            let actual = if new_norm * 0.1 < fnorm {
                1.0 - (new_norm / fnorm).powi(2)
            } else {
                -1.0
            };
            let ratio = if predicted == 0.0 {
                0.0
            } else {
                actual / predicted
            };
            if ratio <= 0.25 {
                let mut temp = if actual >= 0.0 {
                    0.5
                } else {
                    0.5 * dir_der / (dir_der + 0.5 * actual)
                };
                if new_norm * 0.1 >= fnorm || temp < 0.1 {
                    temp = 0.1;
                }
                delta = temp * delta.min(pnorm * 10.0);
                lambda /= temp;
            } else if lambda == 0.0 || ratio >= 0.75 {
                delta = pnorm / 0.5;
                lambda *= 0.5;
            }
            let good = ratio >= 1e-4;
            if good {
                x = trial;
                xnorm = scaled_norm(diag, x);
                if !xnorm.is_finite() {
                    return done(target, report, TerminationReason::Numerical("new x"));
                }
                fnorm = new_norm;
                report.objective_function = 0.5 * new_norm * new_norm;
                residuals = new_residuals;
            }
            let reset = |target: &mut O| {
                if !good {
                    let mut q = target.params();
                    q[0] = x[0];
                    q[1] = x[1];
                    target.set_params(&q);
                }
            };
            if fnorm <= f64::MIN_POSITIVE {
                reset(&mut target);
                return done(target, report, TerminationReason::ResidualsZero);
            }
            let ftol_check =
                actual.abs() <= settings.ftol && predicted <= settings.ftol && ratio * 0.5 <= 1.0;
            let xtol_check = delta <= settings.xtol * xnorm;
            if ftol_check || xtol_check {
                reset(&mut target);
                return done(
                    target,
                    report,
                    TerminationReason::Converged {
                        ftol: ftol_check,
                        xtol: xtol_check,
                    },
                );
            }
            if report.number_of_evaluations >= max_fev {
                reset(&mut target);
                return done(target, report, TerminationReason::LostPatience);
            }
            if actual.abs() <= eps && predicted <= eps && ratio * 0.5 <= 1.0 {
                reset(&mut target);
                return done(
                    target,
                    report,
                    TerminationReason::NoImprovementPossible("ftol"),
                );
            }
            if delta <= eps * xnorm {
                reset(&mut target);
                return done(
                    target,
                    report,
                    TerminationReason::NoImprovementPossible("xtol"),
                );
            }
            if gnorm <= eps {
                reset(&mut target);
                return done(
                    target,
                    report,
                    TerminationReason::NoImprovementPossible("gtol"),
                );
            }
            if good {
                break;
            }
        }
    }
}

fn scaled_norm(diag: [f64; 2], x: [f64; 2]) -> f64 {
    norm2(diag[0] * x[0], diag[1] * x[1])
}

/// The Levenberg-Marquardt step for radius `delta`: `step` solves
/// (J'J + lambda D^2) step = J'r with ||D step|| within 10 % of `delta`, or lambda = 0 when
/// the Gauss-Newton step is already that short. Returns the step, ||D step|| and lambda;
/// `previous` is the last lambda, where the search starts.
///
/// The search is MINPACK's lmpar as the generic solver runs it (Moré 1978, section 5): the same
/// bracket, the same first lambda, the same Newton corrections and stopping rules, at most ten
/// damped solves, each by Givens rotations that eliminate sqrt(lambda) D from the 2x2 factor.
/// Following it step for step keeps both solvers on the same path, so they reach the same
/// minimum where a surface has several.
#[allow(clippy::many_single_char_names, clippy::float_cmp)] // the factor's entries; exact zeros
fn trust_region_step(f: &Factor, d: [f64; 2], delta: f64, previous: f64) -> ([f64; 2], f64, f64) {
    const P1: f64 = 0.1;
    // MINPACK's dwarf: the smallest positive normal number.
    let dwarf = f64::MIN_POSITIVE;
    let (a, b, c) = (f.r00, f.r01, f.r11);
    let z = f.z;
    let scaled = |p: [f64; 2]| [d[0] * p[0], d[1] * p[1]];
    // Gauss-Newton step R p = z, with the columns beyond the rank left at zero.
    let non_singular = a != 0.0 && c != 0.0;
    let gauss_newton = if a == 0.0 {
        [0.0, 0.0]
    } else if c == 0.0 {
        [z[0] / a, 0.0]
    } else {
        let p1 = z[1] / c;
        [(z[0] - b * p1) / a, p1]
    };
    let dp = scaled(gauss_newton);
    let mut dp_norm = norm2(dp[0], dp[1]);
    let mut fp = dp_norm - delta;
    if fp <= delta * P1 {
        return (gauss_newton, dp_norm, 0.0);
    }
    // || (S')^-1 D (D p) / ||D p|| || for an upper triangular S = [[s00, s01], [0, s11]]:
    // d phi / d lambda at the current step, up to its sign and factor.
    let newton_norm = |s00: f64, s01: f64, s11: f64, p: [f64; 2], dp_norm: f64| {
        let q = [
            d[0] * (d[0] * p[0] / dp_norm),
            d[1] * (d[1] * p[1] / dp_norm),
        ];
        let y0 = q[0] / s00;
        let y1 = (q[1] - s01 * y0) / s11;
        norm2(y0, y1)
    };
    let mut lambda_lower = if non_singular {
        let norm = newton_norm(a, b, c, gauss_newton, dp_norm);
        ((fp / delta) / norm) / norm
    } else {
        0.0
    };
    // ||D^-1 J'r|| with J'r = R'z.
    let gnorm = norm2(a * z[0] / d[0], (b * z[0] + c * z[1]) / d[1]);
    let mut lambda_upper = {
        let upper = gnorm / delta;
        if upper == 0.0 {
            dwarf / delta.min(P1)
        } else {
            upper
        }
    };
    let mut lambda = previous.max(lambda_lower).min(lambda_upper);
    if lambda == 0.0 {
        lambda = gnorm / dp_norm;
    }
    let mut step;
    let mut iteration = 1;
    loop {
        if lambda == 0.0 {
            lambda = dwarf.max(lambda_upper * 0.001);
        }
        let root = lambda.sqrt();
        let (s00, s01, s11, p) = damped_solve(f, [root * d[0], root * d[1]]);
        step = p;
        let dp = scaled(step);
        dp_norm = norm2(dp[0], dp[1]);
        if iteration == 10 {
            break;
        }
        let fp_old = fp;
        fp = dp_norm - delta;
        if fp.abs() <= delta * P1 || (lambda_lower == 0.0 && fp <= fp_old && fp_old < 0.0) {
            break;
        }
        let norm = newton_norm(s00, s01, s11, step, dp_norm);
        let correction = ((fp / delta) / norm) / norm;
        if fp > 0.0 {
            lambda_lower = lambda_lower.max(lambda);
        } else {
            lambda_upper = lambda_upper.min(lambda);
        }
        lambda = lambda_lower.max(lambda + correction);
        iteration += 1;
    }
    (step, dp_norm, lambda)
}

/// Solve (R'R + diag(e)^2) p = R'z by eliminating the rows diag(e) from R with Givens
/// rotations (MINPACK's qrsolv): returns the new triangular factor S (s00, s01, s11) with
/// S'S = R'R + diag(e)^2, and p. A zero pivot of S leaves that component of p at zero.
#[allow(clippy::float_cmp)] // exact zeros, as qrsolv tests them
fn damped_solve(f: &Factor, e: [f64; 2]) -> (f64, f64, f64, [f64; 2]) {
    // The rotation that zeroes `below` against `diag` (qrsolv's formulas).
    let givens = |diag: f64, below: f64| -> (f64, f64) {
        if diag.abs() < below.abs() {
            let cot = diag / below;
            let sin = 0.5 / (0.25 + 0.25 * (cot * cot)).sqrt();
            (sin, sin * cot)
        } else {
            let tan = below / diag;
            let cos = 0.5 / (0.25 + 0.25 * (tan * tan)).sqrt();
            (cos * tan, cos)
        }
    };
    let (mut s00, mut s01, mut s11) = (f.r00, f.r01, f.r11);
    let mut rhs = f.z;
    // Row e0 * (1, 0): rotate into row 0, then the fill it leaves in column 1 into row 1.
    if e[0] != 0.0 {
        let mut row = [e[0], 0.0];
        let mut extra = 0.0;
        let (sin, cos) = givens(s00, row[0]);
        s00 = cos * s00 + sin * row[0];
        let t = cos * rhs[0] + sin * extra;
        extra = -sin * rhs[0] + cos * extra;
        rhs[0] = t;
        let t = cos * s01 + sin * row[1];
        row[1] = -sin * s01 + cos * row[1];
        s01 = t;
        if row[1] != 0.0 {
            let (sin, cos) = givens(s11, row[1]);
            s11 = cos * s11 + sin * row[1];
            rhs[1] = cos * rhs[1] + sin * extra;
        }
    }
    // Row e1 * (0, 1) into row 1.
    if e[1] != 0.0 {
        let (sin, cos) = givens(s11, e[1]);
        s11 = cos * s11 + sin * e[1];
        rhs[1] *= cos;
    }
    // Back substitution over the leading nonzero pivots.
    let p = if s00 == 0.0 {
        [0.0, 0.0]
    } else if s11 == 0.0 {
        [rhs[0] / s00, 0.0]
    } else {
        let p1 = rhs[1] / s11;
        [(rhs[0] - s01 * p1) / s00, p1]
    };
    (s00, s01, s11, p)
}

/// sqrt(a^2 + b^2) without libm's hypot (its overflow guard costs more than the whole Givens
/// step here, and the Jacobian's entries are far from the overflow range).
#[inline]
fn norm2(a: f64, b: f64) -> f64 {
    (a * a + b * b).sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The factor of the rows of `j` (two columns) with residuals `r`.
    fn factor(j: &[[f64; 2]], r: &[f64]) -> Factor {
        let mut f = Factor::default();
        for (row, &c) in j.iter().zip(r) {
            f.push(row[0], row[1], c);
        }
        f
    }

    /// (J'J + lambda D^2) step - J'r, from the rows themselves.
    fn equation_error(j: &[[f64; 2]], r: &[f64], d: [f64; 2], lambda: f64, step: [f64; 2]) -> f64 {
        let mut a = [[0.0; 2]; 2];
        let mut g = [0.0; 2];
        for (row, &c) in j.iter().zip(r) {
            for i in 0..2 {
                g[i] += row[i] * c;
                for k in 0..2 {
                    a[i][k] += row[i] * row[k];
                }
            }
        }
        (0..2)
            .map(|i| {
                (a[i][0] * step[0] + a[i][1] * step[1] + lambda * d[i] * d[i] * step[i] - g[i])
                    .abs()
            })
            .fold(0.0, f64::max)
    }

    const J: [[f64; 2]; 4] = [[1.0, 0.5], [0.3, -1.2], [2.0, 0.1], [-0.7, 0.4]];
    const R: [f64; 4] = [0.3, -0.8, 1.1, 0.25];

    #[test]
    fn the_givens_factor_reproduces_the_normal_equations() {
        let f = factor(&J, &R);
        let g = f.gradient();
        let direct = [
            J.iter().zip(R).map(|(j, r)| j[0] * r).sum::<f64>(),
            J.iter().zip(R).map(|(j, r)| j[1] * r).sum::<f64>(),
        ];
        assert!((g[0] - direct[0]).abs() < 1e-14 && (g[1] - direct[1]).abs() < 1e-14);
        let norms = f.column_norms();
        let col = |k: usize| J.iter().map(|j| j[k] * j[k]).sum::<f64>().sqrt();
        assert!((norms[0] - col(0)).abs() < 1e-14 && (norms[1] - col(1)).abs() < 1e-14);
    }

    #[test]
    fn the_step_solves_the_damped_normal_equations_at_the_radius() {
        let f = factor(&J, &R);
        let d = [2.0, 0.9];
        // A radius the Gauss-Newton step exceeds: ||D step|| within 10 % of it.
        let (step, pnorm, lambda) = trust_region_step(&f, d, 0.05, 0.0);
        assert!(lambda > 0.0);
        assert!((pnorm - 0.05).abs() <= 0.005, "{pnorm}");
        assert!((norm2(d[0] * step[0], d[1] * step[1]) - pnorm).abs() < 1e-12);
        assert!(equation_error(&J, &R, d, lambda, step) < 1e-12);
        // A wide radius: the Gauss-Newton step, J'J step = J'r.
        let (step, _, lambda) = trust_region_step(&f, d, 1e6, 0.0);
        assert!(lambda.abs() <= 0.0, "{lambda}");
        assert!(equation_error(&J, &R, d, 0.0, step) < 1e-12);
    }

    #[test]
    fn an_ill_conditioned_gauss_newton_step_keeps_its_precision() {
        // Columns nearly parallel (condition about 1e7): the Gauss-Newton step from the QR
        // factor solves the normal equations to their own precision.
        let j = [
            [1.0, 1.0 + 1e-7],
            [1.0, 1.0 - 1e-7],
            [1.0, 1.0],
            [2.0, 2.0 + 3e-7],
        ];
        let r = [1e-3, -2e-3, 5e-4, 1e-3];
        let f = factor(&j, &r);
        let (step, _, lambda) = trust_region_step(&f, [1.0, 1.0], 1e12, 0.0);
        assert!(lambda.abs() <= 0.0, "{lambda}");
        // Residual of the least-squares problem is orthogonal to the columns, to the roundoff
        // of steps this long (about 1e4; the normal equations would miss by about 1e-2 of it).
        let size = step[0].abs().max(step[1].abs());
        assert!(size > 1e3, "{step:?}");
        let res: Vec<f64> = j
            .iter()
            .zip(r)
            .map(|(row, c)| c - row[0] * step[0] - row[1] * step[1])
            .collect();
        for k in 0..2 {
            let dot: f64 = j.iter().zip(&res).map(|(row, e)| row[k] * e).sum();
            assert!(dot.abs() < 1e-14 * size * 100.0, "column {k}: {dot}");
        }
    }

    #[test]
    fn a_singular_system_still_gives_a_step_of_the_radius() {
        // Two equal columns: J'J is singular, J'r in its range.
        let j = [[1.0, 1.0], [2.0, 2.0]];
        let r = [1.0, 0.5];
        let f = factor(&j, &r);
        let (step, pnorm, lambda) = trust_region_step(&f, [1.0, 1.0], 0.1, 0.0);
        assert!(
            lambda > 0.0 && (pnorm - 0.1).abs() <= 0.01,
            "{lambda} {pnorm}"
        );
        assert!((step[0] - step[1]).abs() < 1e-12);
    }
}
