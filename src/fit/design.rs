//! Which reading to add next, and locally D-optimal designs, for any [`CurveModel`].
//!
//! A fit's information matrix over its free parameters is M = J'WJ (J the Jacobian at the
//! optimum, W the weights), and its covariance s^2 M^-1. One more reading at x, of weight 1,
//! adds the row j = df(x)/dp, so M becomes M + jj' without any refit (the estimates are taken
//! as they are, which is what "expected" means here). Two consequences are exact:
//!
//! - D-optimality: det(M + jj') = det(M) (1 + j'M^-1 j) (the matrix determinant lemma), so the
//!   reading that shrinks the joint confidence region most is the one with the largest
//!   j'M^-1 j, its variance of prediction in units of the noise.
//! - A derived value g(p) with gradient g has the delta-method variance s^2 g'M^-1 g now and
//!   s^2 [g'M^-1 g - (g'M^-1 j)^2 / (1 + j'M^-1 j)] after the reading (Sherman-Morrison).
//!
//! [`d_optimal_design`] builds a whole design of n points on an interval from the same
//! quadratic forms: a greedy start (each point the best one-reading addition), then Fedorov's
//! exchange (Fedorov 1972, Theory of Optimal Experiments, chapter 3: moving a point from a to b
//! multiplies det M by (1 + d(b,b))(1 - d(a,a)) + d(a,b)^2, d(u,v) = j(u)'M^-1 j(v)), each move
//! polished by a golden-section search between grid points.
//!
//! Pure computation; no I/O. Every function returns `None` rather than NaN.

use nalgebra::{DMatrix, DVector};

use crate::model::curve::CurveModel;

/// Smallest pivot, relative to a unit diagonal, of an information matrix taken as invertible
/// (a condition number of about 1e12): below it a parameter is not determined by the readings.
const MIN_PIVOT: f64 = 1e-12;

/// The gradient of `model` at `x` with respect to the parameters `free` (indices into `p`),
/// in that order; `None` when the value or a derivative is not finite.
pub fn free_gradient(
    model: &dyn CurveModel,
    p: &[f64],
    free: &[usize],
    x: f64,
) -> Option<Vec<f64>> {
    let mut grad = vec![0.0; p.len()];
    let value = model.value_and_gradient(x, p, &mut grad);
    if !value.is_finite() {
        return None;
    }
    let row: Vec<f64> = free
        .iter()
        .map(|&i| grad.get(i).copied())
        .collect::<Option<_>>()?;
    row.iter().all(|v| v.is_finite()).then_some(row)
}

/// The information matrix M = sum w_i j_i j_i' of readings at `x` (weights 1 without
/// `weights`) over the parameters `free`; `None` when a gradient is not finite or the lengths
/// differ.
pub fn information_matrix(
    model: &dyn CurveModel,
    p: &[f64],
    free: &[usize],
    x: &[f64],
    weights: Option<&[f64]>,
) -> Option<Vec<Vec<f64>>> {
    if weights.is_some_and(|w| w.len() != x.len()) {
        return None;
    }
    let k = free.len();
    let mut m = vec![vec![0.0; k]; k];
    for (i, &xi) in x.iter().enumerate() {
        let w = weights.map_or(1.0, |w| w[i]);
        let j = free_gradient(model, p, free, xi)?;
        add_outer(&mut m, &j, w);
    }
    Some(m)
}

/// m += w j j'.
fn add_outer(m: &mut [Vec<f64>], j: &[f64], w: f64) {
    for (r, row) in m.iter_mut().enumerate() {
        for (c, v) in row.iter_mut().enumerate() {
            *v += w * j[r] * j[c];
        }
    }
}

/// An invertible information matrix, factored once so every quadratic form a'M^-1 b is cheap.
///
/// It is scaled to a unit diagonal before the Cholesky factorisation (parameters of a retention
/// model differ by orders of magnitude: alpha in 1/cm beside theta in m3/m3), which leaves the
/// forms unchanged and keeps the factorisation accurate.
#[derive(Debug, Clone)]
pub struct Information {
    scale: Vec<f64>,
    chol: nalgebra::Cholesky<f64, nalgebra::Dyn>,
    log_det: f64,
}

impl Information {
    /// Factor a symmetric information matrix; `None` when it is not square, not finite, or not
    /// positive definite to within a condition number of about 1e12 (a parameter the readings
    /// do not determine).
    pub fn new(m: &[Vec<f64>]) -> Option<Information> {
        let k = m.len();
        if k == 0 || m.iter().any(|row| row.len() != k) {
            return None;
        }
        let scale: Vec<f64> = (0..k)
            .map(|i| {
                let d = m[i][i];
                (d.is_finite() && d > 0.0).then(|| 1.0 / d.sqrt())
            })
            .collect::<Option<_>>()?;
        let scaled = DMatrix::from_fn(k, k, |r, c| m[r][c] * scale[r] * scale[c]);
        if scaled.iter().any(|v| !v.is_finite()) {
            return None;
        }
        let chol = scaled.cholesky()?;
        let l = chol.l_dirty();
        let mut log_det = 0.0;
        for i in 0..k {
            let pivot = l[(i, i)] * l[(i, i)];
            if pivot.is_nan() || pivot <= MIN_PIVOT {
                return None;
            }
            // det M = det(S^-1 M~ S^-1) = det M~ / prod scale^2.
            log_det += pivot.ln() - 2.0 * scale[i].ln();
        }
        Some(Information {
            scale,
            chol,
            log_det,
        })
    }

    /// From the rows j_i of a design (weights 1 without `weights`).
    pub fn from_rows(rows: &[Vec<f64>], weights: Option<&[f64]>) -> Option<Information> {
        let k = rows.first()?.len();
        if rows.iter().any(|r| r.len() != k) || weights.is_some_and(|w| w.len() != rows.len()) {
            return None;
        }
        let mut m = vec![vec![0.0; k]; k];
        for (i, j) in rows.iter().enumerate() {
            add_outer(&mut m, j, weights.map_or(1.0, |w| w[i]));
        }
        Information::new(&m)
    }

    /// Number of parameters.
    pub fn dim(&self) -> usize {
        self.scale.len()
    }

    /// ln det M.
    pub fn log_det(&self) -> f64 {
        self.log_det
    }

    /// M^-1 a (scaled back).
    fn solve(&self, a: &[f64]) -> Option<DVector<f64>> {
        if a.len() != self.dim() {
            return None;
        }
        let b = DVector::from_iterator(a.len(), a.iter().zip(&self.scale).map(|(v, s)| v * s));
        Some(self.chol.solve(&b))
    }

    /// The quadratic form a'M^-1 b; `None` for a vector of the wrong length.
    pub fn form(&self, a: &[f64], b: &[f64]) -> Option<f64> {
        let x = self.solve(b)?;
        if a.len() != x.len() {
            return None;
        }
        let v: f64 = a
            .iter()
            .zip(&self.scale)
            .zip(x.iter())
            .map(|((a, s), x)| a * s * x)
            .sum();
        v.is_finite().then_some(v)
    }

    /// M^-1 as rows (the covariance in units of the noise variance).
    pub fn inverse(&self) -> Vec<Vec<f64>> {
        let inv = self.chol.inverse();
        let k = self.dim();
        (0..k)
            .map(|r| {
                (0..k)
                    .map(|c| inv[(r, c)] * self.scale[r] * self.scale[c])
                    .collect()
            })
            .collect()
    }
}

/// What one more reading at `x` (weight 1) would do, exactly, without a refit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CandidateEffect {
    /// Where the reading would be.
    pub x: f64,
    /// j'M^-1 j: the variance of the fitted curve at x in units of the noise variance.
    pub prediction_variance: f64,
    /// det(M + jj') / det M = 1 + j'M^-1 j: how many times the determinant grows (the joint
    /// confidence region's volume shrinks by its square root).
    pub det_ratio: f64,
    /// g'M^-1 g, the derived value's variance now in units of the noise variance (with a
    /// gradient g).
    pub variance_now: Option<f64>,
    /// g'(M + jj')^-1 g, by Sherman-Morrison.
    pub variance_after: Option<f64>,
}

/// The effect of each candidate reading on the D-criterion and, with a derived value's
/// gradient `g` over the same parameters, on its variance. Candidates where the model or its
/// gradient is not finite are left out.
pub fn candidate_effects(
    model: &dyn CurveModel,
    p: &[f64],
    free: &[usize],
    info: &Information,
    candidates: &[f64],
    g: Option<&[f64]>,
) -> Vec<CandidateEffect> {
    let now = g.and_then(|g| info.form(g, g));
    candidates
        .iter()
        .filter_map(|&x| {
            let j = free_gradient(model, p, free, x)?;
            let d = info.form(&j, &j)?;
            let after = match (g, now) {
                (Some(g), Some(now)) => {
                    let c = info.form(g, &j)?;
                    // Never below 0 through rounding.
                    Some((now - c * c / (1.0 + d)).max(0.0))
                }
                _ => None,
            };
            Some(CandidateEffect {
                x,
                prediction_variance: d,
                det_ratio: 1.0 + d,
                variance_now: now,
                variance_after: after,
            })
        })
        .collect()
}

/// What a candidate should do best.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Criterion {
    /// Grow det M most (D-optimality).
    D,
    /// Leave the derived value's variance smallest.
    DerivedVariance,
}

/// The index of the best candidate under `criterion` (the first of equals); `None` when there
/// is none (or no derived variance for [`Criterion::DerivedVariance`]).
pub fn best_candidate(effects: &[CandidateEffect], criterion: Criterion) -> Option<usize> {
    let key = |e: &CandidateEffect| match criterion {
        Criterion::D => Some(-e.det_ratio),
        Criterion::DerivedVariance => e.variance_after,
    };
    let mut best: Option<(usize, f64)> = None;
    for (i, e) in effects.iter().enumerate() {
        let Some(k) = key(e).filter(|k| k.is_finite()) else {
            continue;
        };
        if best.is_none_or(|(_, b)| k < b) {
            best = Some((i, k));
        }
    }
    best.map(|(i, _)| i)
}

/// A design found by [`d_optimal_design`].
#[derive(Debug, Clone, PartialEq)]
pub struct ExactDesign {
    /// The points, ascending.
    pub points: Vec<f64>,
    /// ln det M of the design (weights 1).
    pub log_det: f64,
}

/// Points of a grid over [lower, upper] for [`d_optimal_design`] (spacing (upper - lower) / 2000).
pub const DESIGN_GRID: usize = 2001;

/// A locally D-optimal exact design of `n` readings (weight 1 each) on [lower, upper] for the
/// parameters `free` of `model` at `p`: the points maximising det(J'J).
///
/// The search: a grid of [`DESIGN_GRID`] points; a greedy start from a lightly regularised
/// matrix, each point the best one-reading addition ([`candidate_effects`], [`Criterion::D`]);
/// then Fedorov exchanges, each best swap polished by a golden-section search between its
/// neighbouring grid points, until no move raises det M by more than a relative 1e-12.
/// `None` when the interval is not finite and ordered, `n` is smaller than the number of free
/// parameters, or no design determines them all.
pub fn d_optimal_design(
    model: &dyn CurveModel,
    p: &[f64],
    free: &[usize],
    n: usize,
    lower: f64,
    upper: f64,
) -> Option<ExactDesign> {
    let k = free.len();
    if k == 0 || n < k || !(lower.is_finite() && upper.is_finite() && lower < upper) {
        return None;
    }
    let step = (upper - lower) / (DESIGN_GRID - 1) as f64;
    let grid: Vec<f64> = (0..DESIGN_GRID)
        .map(|i| lower + step * i as f64)
        .filter(|&x| free_gradient(model, p, free, x).is_some())
        .collect();
    // A light ridge, in proportion to each parameter's typical squared derivative, makes the
    // empty design invertible so the greedy start can use the same one-reading rule.
    let mut ridge = vec![vec![0.0; k]; k];
    for &x in &grid {
        let j = free_gradient(model, p, free, x)?;
        for (i, v) in j.iter().enumerate() {
            ridge[i][i] += v * v / grid.len() as f64;
        }
    }
    if ridge
        .iter()
        .enumerate()
        .any(|(i, r)| r[i].is_nan() || r[i] <= 0.0)
    {
        return None;
    }
    let mut m: Vec<Vec<f64>> = ridge
        .iter()
        .enumerate()
        .map(|(i, r)| {
            let mut row = vec![0.0; k];
            row[i] = 1e-8 * r[i];
            row
        })
        .collect();
    let mut points = Vec::with_capacity(n);
    for _ in 0..n {
        let info = Information::new(&m)?;
        let effects = candidate_effects(model, p, free, &info, &grid, None);
        let best = effects[best_candidate(&effects, Criterion::D)?].x;
        add_outer(&mut m, &free_gradient(model, p, free, best)?, 1.0);
        points.push(best);
    }
    let rows = |points: &[f64]| -> Option<Vec<Vec<f64>>> {
        points
            .iter()
            .map(|&x| free_gradient(model, p, free, x))
            .collect()
    };
    let mut info = Information::from_rows(&rows(&points)?, None)?;
    for _ in 0..1000 {
        // Fedorov's exchange: the swap that raises det M most.
        let mut best: Option<(usize, f64, f64)> = None;
        for (i, &a) in points.iter().enumerate() {
            let ja = free_gradient(model, p, free, a)?;
            let daa = info.form(&ja, &ja)?;
            let ratio = |b: f64| -> Option<f64> {
                let jb = free_gradient(model, p, free, b)?;
                let dbb = info.form(&jb, &jb)?;
                let dab = info.form(&ja, &jb)?;
                Some((1.0 + dbb) * (1.0 - daa) + dab * dab)
            };
            for &b in &grid {
                if let Some(r) = ratio(b)
                    && best.is_none_or(|(_, _, q)| r > q)
                {
                    best = Some((i, b, r));
                }
            }
            if let Some((bi, b, _)) = best
                && bi == i
            {
                let lo = (b - step).max(lower);
                let hi = (b + step).min(upper);
                let x = golden_max(|x| ratio(x).unwrap_or(f64::NEG_INFINITY), lo, hi);
                if let Some(r) = ratio(x)
                    && r > best.map_or(f64::NEG_INFINITY, |b| b.2)
                {
                    best = Some((i, x, r));
                }
            }
        }
        let (i, b, r) = best?;
        if r.is_nan() || r <= 1.0 + 1e-12 {
            break;
        }
        points[i] = b;
        info = Information::from_rows(&rows(&points)?, None)?;
    }
    points.sort_by(f64::total_cmp);
    Some(ExactDesign {
        log_det: info.log_det(),
        points,
    })
}

/// The maximum of a unimodal `f` on [lo, hi] by golden-section search (to a relative 1e-13 of
/// the interval); never worse than the ends.
fn golden_max(f: impl Fn(f64) -> f64, lo: f64, hi: f64) -> f64 {
    crate::model::golden::golden_minimum(|x| -f(x), lo, hi, 1e-13, 80).0
}

#[cfg(test)]
mod tests {
    #![allow(clippy::float_cmp)]

    use super::*;
    use crate::model::retention::ModelKind;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    /// A random symmetric positive definite matrix with entries of very different scales
    /// (as the parameters of a retention model have), and two vectors.
    fn random_problem(rng: &mut ChaCha8Rng, k: usize) -> (Vec<Vec<f64>>, Vec<f64>, Vec<f64>) {
        let scales: Vec<f64> = (0..k).map(|i| 10f64.powi(i as i32 * 2 - 3)).collect();
        let rows: Vec<Vec<f64>> = (0..k + 3)
            .map(|_| {
                (0..k)
                    .map(|c| rng.random_range(-1.0..1.0) * scales[c])
                    .collect()
            })
            .collect();
        let mut m = vec![vec![0.0; k]; k];
        for r in &rows {
            add_outer(&mut m, r, 1.0);
        }
        let j = (0..k)
            .map(|c| rng.random_range(-1.0..1.0) * scales[c])
            .collect();
        let g = (0..k)
            .map(|c| rng.random_range(-1.0..1.0) / scales[c])
            .collect();
        (m, j, g)
    }

    fn matrix(m: &[Vec<f64>]) -> DMatrix<f64> {
        DMatrix::from_fn(m.len(), m.len(), |r, c| m[r][c])
    }

    #[test]
    fn sherman_morrison_matches_a_direct_inverse() {
        let mut rng = ChaCha8Rng::seed_from_u64(14);
        for k in 1..=6 {
            let (m, j, g) = random_problem(&mut rng, k);
            let info = Information::new(&m).expect("positive definite");
            let now = info.form(&g, &g).expect("form");
            let c = info.form(&g, &j).expect("form");
            let d = info.form(&j, &j).expect("form");
            let after = now - c * c / (1.0 + d);
            // Directly: (M + jj')^-1 by LU, then g' . g.
            let mut added = m.clone();
            add_outer(&mut added, &j, 1.0);
            let inv = matrix(&added).lu().try_inverse().expect("invertible");
            let gv = DVector::from_vec(g.clone());
            let direct = gv.dot(&(&inv * &gv));
            assert!(
                (after - direct).abs() <= 1e-9 * direct.abs(),
                "k={k}: {after} vs {direct}"
            );
            // And the inverse itself against LU's.
            let direct_now = matrix(&m).lu().try_inverse().expect("invertible");
            let ours = info.inverse();
            for r in 0..k {
                for c in 0..k {
                    let want = direct_now[(r, c)];
                    assert!(
                        (ours[r][c] - want).abs()
                            <= 1e-8 * (direct_now[(r, r)] * direct_now[(c, c)]).sqrt(),
                        "k={k} ({r},{c}): {} vs {want}",
                        ours[r][c]
                    );
                }
            }
        }
    }

    #[test]
    fn the_determinant_grows_by_one_plus_the_prediction_variance() {
        let mut rng = ChaCha8Rng::seed_from_u64(1959);
        for k in 1..=6 {
            let (m, j, _) = random_problem(&mut rng, k);
            let info = Information::new(&m).expect("positive definite");
            let direct = matrix(&m).determinant();
            assert!(
                (info.log_det() - direct.ln()).abs() < 1e-9,
                "k={k}: {} vs ln {direct}",
                info.log_det()
            );
            let mut added = m.clone();
            add_outer(&mut added, &j, 1.0);
            let direct_after = matrix(&added).determinant();
            let d = info.form(&j, &j).expect("form");
            assert!(
                ((1.0 + d) / (direct_after / direct) - 1.0).abs() < 1e-9,
                "k={k}: 1 + d = {} vs ratio {}",
                1.0 + d,
                direct_after / direct
            );
        }
    }

    #[test]
    fn singular_information_is_refused() {
        // Two identical rows cannot determine two parameters.
        assert!(Information::from_rows(&[vec![1.0, 2.0], vec![1.0, 2.0]], None).is_none());
        assert!(Information::new(&[vec![1.0, 0.0], vec![0.0, 0.0]]).is_none());
        assert!(Information::new(&[vec![f64::NAN]]).is_none());
        assert!(Information::new(&[]).is_none());
        assert!(Information::new(&[vec![2.0]]).is_some());
    }

    /// van Genuchten readings at the usual lab steps, and the curve's parameters.
    fn vg_design() -> (Vec<f64>, Vec<f64>) {
        (
            vec![0.0, 10.0, 30.0, 100.0, 330.0, 1000.0, 15300.0],
            vec![0.07, 0.41, 0.02, 1.45],
        )
    }

    #[test]
    fn brute_force_agrees_with_the_chosen_candidate() {
        // For each candidate: the information matrix rebuilt with the extra row, inverted by
        // LU (no Sherman-Morrison, no determinant lemma), the covariance's determinant and the
        // available water's variance read from it; the chosen candidates must be the best.
        let model = ModelKind::VanGenuchten.curve();
        let (x, p) = vg_design();
        let free = [0, 1, 2, 3];
        let m = information_matrix(model, &p, &free, &x, None).expect("finite");
        let info = Information::new(&m).expect("determined");
        let curve =
            crate::model::retention::RetentionCurve::new(ModelKind::VanGenuchten, p.clone())
                .expect("valid");
        let g =
            crate::model::derived::available_water_gradient(&curve, 33.0, 1500.0).expect("finite");
        let candidates = [
            1.0, 3.0, 10.0, 30.0, 60.0, 100.0, 330.0, 1000.0, 3000.0, 5000.0, 15300.0,
        ];
        let effects = candidate_effects(model, &p, &free, &info, &candidates, Some(&g));
        assert_eq!(effects.len(), candidates.len());
        let mut brute = Vec::new();
        for &h in &candidates {
            let mut xs = x.clone();
            xs.push(h);
            let added = information_matrix(model, &p, &free, &xs, None).expect("finite");
            let cov = matrix(&added).lu().try_inverse().expect("invertible");
            let gv = DVector::from_vec(g.clone());
            brute.push((1.0 / cov.determinant(), gv.dot(&(&cov * &gv))));
        }
        let best_d = best_candidate(&effects, Criterion::D).expect("one");
        let best_var = best_candidate(&effects, Criterion::DerivedVariance).expect("one");
        let brute_d = (0..brute.len())
            .max_by(|&a, &b| brute[a].0.total_cmp(&brute[b].0))
            .expect("one");
        let brute_var = (0..brute.len())
            .min_by(|&a, &b| brute[a].1.total_cmp(&brute[b].1))
            .expect("one");
        assert_eq!(best_d, brute_d, "{effects:#?}\n{brute:#?}");
        assert_eq!(best_var, brute_var, "{effects:#?}\n{brute:#?}");
        for (e, (det, var)) in effects.iter().zip(&brute) {
            let ratio = det / matrix(&m).determinant();
            assert!((e.det_ratio / ratio - 1.0).abs() < 1e-6, "{e:?} {ratio}");
            let after = e.variance_after.expect("with g");
            assert!((after / var - 1.0).abs() < 1e-6, "{e:?} {var}");
            assert!(after <= e.variance_now.expect("with g"));
        }
        // The two criteria need not agree, but both pick a suction: not a degenerate answer.
        assert!(candidates.contains(&effects[best_d].x));
    }

    #[test]
    fn a_straight_line_puts_its_points_at_the_ends() {
        // y = a + b x on [0, 1]: the D-optimal two-point design is {0, 1}, and with four
        // points two at each end (a textbook result, common practice).
        struct Line;
        const SPECS: [crate::model::curve::ParamSpec; 2] = [
            crate::model::curve::ParamSpec {
                name: "a",
                unit: "-",
                lower: f64::NEG_INFINITY,
                upper: f64::INFINITY,
            },
            crate::model::curve::ParamSpec {
                name: "b",
                unit: "-",
                lower: f64::NEG_INFINITY,
                upper: f64::INFINITY,
            },
        ];
        impl CurveModel for Line {
            fn params(&self) -> &[crate::model::curve::ParamSpec] {
                &SPECS
            }
            fn value(&self, x: f64, p: &[f64]) -> f64 {
                p[0] + p[1] * x
            }
            fn value_and_gradient(&self, x: f64, p: &[f64], grad: &mut [f64]) -> f64 {
                grad[0] = 1.0;
                grad[1] = x;
                self.value(x, p)
            }
            fn initial_guesses(&self, _: &[f64], _: &[f64]) -> Vec<Vec<f64>> {
                vec![vec![0.0, 0.0]]
            }
        }
        let two = d_optimal_design(&Line, &[1.0, 2.0], &[0, 1], 2, 0.0, 1.0).expect("design");
        assert_eq!(two.points, vec![0.0, 1.0]);
        let four = d_optimal_design(&Line, &[1.0, 2.0], &[0, 1], 4, 0.0, 1.0).expect("design");
        assert_eq!(four.points, vec![0.0, 0.0, 1.0, 1.0]);
        assert!((four.log_det - 4f64.ln()).abs() < 1e-12, "{four:?}");
        assert!(d_optimal_design(&Line, &[1.0, 2.0], &[0, 1], 1, 0.0, 1.0).is_none());
        assert!(d_optimal_design(&Line, &[1.0, 2.0], &[0, 1], 2, 1.0, 0.0).is_none());
    }
}
