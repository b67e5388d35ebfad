//! Variable projection for curves linear in theta_r and theta_s.
//!
//! Every retention model is f = theta_r + (theta_s - theta_r) g(x; shape) (or theta_s g). For
//! given shape parameters the best theta_r and theta_s follow from a weighted linear least
//! squares fit, so the solver moves only the shape parameters and each evaluation solves the
//! linear part exactly (Golub & Pereyra 1973, SIAM J. Numer. Anal. 10(2); the Jacobian below
//! is their exact one, not Kaufman's approximation). The inner solve keeps theta_r and theta_s
//! in their bounds (the best point of the box's edges when the free optimum is outside), so the
//! sum of squares stays continuously differentiable in the shape parameters.
//!
//! The residual vector is padded with zero rows up to the solver's row count, which lets small
//! problems use fixed-size storage (no allocation in the solver); zero rows change nothing.

use std::cell::RefCell;

use levenberg_marquardt::{LeastSquaresProblem, LevenbergMarquardt, MinimizationReport};
use nalgebra::allocator::{Allocator, Reallocator};
use nalgebra::{
    Const, DefaultAllocator, Dim, DimMax, DimMaximum, DimMin, Dyn, OMatrix, OVector, Owned, U1,
};

use super::problem::{Data, Watch};
use super::transform::{Saturation, Transform};
use crate::model::curve::CurveModel;
use crate::model::retention::van_genuchten;

/// The linear parameters of a model and which of them the inner least squares solves.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Linear {
    /// Position of theta_r in the full vector (`None`: f = theta_s g).
    pub r: Option<usize>,
    /// Position of theta_s.
    pub s: usize,
    /// Whether each is solved (otherwise held at its value in the full vector).
    pub r_free: bool,
    pub s_free: bool,
    /// Bounds of each while solved.
    pub r_bounds: (f64, f64),
    pub s_bounds: (f64, f64),
}

/// Which linear parameters are free inside their bounds at the inner solution (the others
/// held or on a bound): f = r + d g with d = s - r.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Mode {
    /// Both free: the columns 1 and g.
    Both,
    /// theta_s alone: the column g (theta_r fixed).
    Upper,
    /// theta_r alone: the column 1 - g (theta_s fixed).
    Lower,
    /// Neither.
    Neither,
}

/// A shape function the evaluation calls directly instead of through [`CurveModel`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Kernel {
    /// van Genuchten with m = 1 - 1/n: parameters `theta_r, theta_s, alpha, n`, used when
    /// exactly alpha and n are the free shape parameters.
    VanGenuchten,
}

/// Relative spread of the shape term below which the linear parameters are not separable.
const DEGENERATE: f64 = 1e-13;

/// The result of one evaluation.
struct Evaluation<M: Dim, N: Dim>
where
    DefaultAllocator: Allocator<M> + Allocator<M, N>,
{
    residuals: OVector<f64, M>,
    jacobian: OMatrix<f64, M, N>,
    /// theta_r (or the held value, or 0) and theta_s.
    ends: (f64, f64),
}

/// A value and the parameter generation it belongs to.
struct Tagged<T> {
    generation: u64,
    value: T,
}

/// An evaluated point: q, theta_r and theta_s, SSE.
struct Best<N: Dim>
where
    DefaultAllocator: Allocator<N>,
{
    q: OVector<f64, N>,
    ends: (f64, f64),
    sse: f64,
}

/// Per-point work buffers of the evaluations.
struct Scratch {
    /// Full parameter vector with theta_r = 0 and theta_s = 1, so the model returns g.
    unit: Vec<f64>,
    grad: Vec<f64>,
    /// One allocation for the per-reading buffers, m values each, in this order: g; the free
    /// linear columns (g - mean g when both are free); r + (s - r) g - y (the unweighted
    /// residual); d g / d q_j for each shape parameter j.
    per_reading: Vec<f64>,
}

/// The weights of the readings and what follows from them alone, computed once per run.
pub(crate) struct Weights {
    /// w_i (1 when unweighted).
    pub w: Vec<f64>,
    sum_w: f64,
    /// Weighted mean of y.
    y_mean: f64,
}

impl Weights {
    pub(crate) fn of(data: &Data<'_>) -> Self {
        let w: Vec<f64> = match data.sqrt_w {
            Some(s) => s.iter().map(|v| v * v).collect(),
            None => vec![1.0; data.x.len()],
        };
        let sum_w: f64 = w.iter().sum();
        let mut swy = 0.0;
        for (wi, yi) in w.iter().zip(data.y) {
            swy += wi * yi;
        }
        Self {
            w,
            sum_w,
            y_mean: swy / sum_w,
        }
    }
}

/// A solver run's view of a projected problem: M residual rows (>= the readings), N shape
/// parameters.
pub(crate) struct Projected<'a, M: Dim, N: Dim>
where
    DefaultAllocator: Allocator<M> + Allocator<N> + Allocator<M, N>,
{
    model: &'a dyn CurveModel,
    data: Data<'a>,
    rows: M,
    /// Index into the full parameter vector of each free shape parameter.
    shape: &'a [usize],
    transforms: &'a [Transform],
    linear: Linear,
    /// Whether the shape term is evaluated by [`Kernel::VanGenuchten`].
    van_genuchten: bool,
    /// Full physical parameter vector: held entries keep their values.
    full: Vec<f64>,
    weights: Weights,
    scratch: RefCell<Scratch>,
    q: OVector<f64, N>,
    /// The Jacobian at the current q (tagged with its generation), computed by `residuals`
    /// for `jacobian`.
    cached: RefCell<Option<Tagged<OMatrix<f64, M, N>>>>,
    /// The lowest-SSE evaluation so far.
    best: RefCell<Option<Best<N>>>,
    generation: u64,
    watch: Watch,
}

impl<'a, M: Dim, N: Dim> Projected<'a, M, N>
where
    DefaultAllocator: Allocator<M> + Allocator<N> + Allocator<M, N>,
{
    /// A problem over `shape` (free shape parameters with their maps), started at `full` (the
    /// shape entries at their start values; linear entries are ignored unless held).
    #[allow(clippy::too_many_arguments)]
    pub(crate) fn new(
        model: &'a dyn CurveModel,
        data: Data<'a>,
        rows: M,
        shape: &'a [usize],
        transforms: &'a [Transform],
        linear: Linear,
        kernel: Option<Kernel>,
        full: Vec<f64>,
        q: OVector<f64, N>,
        watch_saturation: bool,
    ) -> Self {
        let m = data.x.len();
        debug_assert!(rows.value() >= m);
        let mut unit = full.clone();
        if let Some(r) = linear.r {
            unit[r] = 0.0;
        }
        unit[linear.s] = 1.0;
        let scratch = Scratch {
            grad: vec![0.0; full.len()],
            unit,
            per_reading: vec![0.0; m * (3 + shape.len())],
        };
        Self {
            model,
            data,
            rows,
            shape,
            transforms,
            linear,
            van_genuchten: kernel == Some(Kernel::VanGenuchten) && shape == [2, 3],
            full,
            weights: Weights::of(&data),
            scratch: RefCell::new(scratch),
            q,
            cached: RefCell::new(None),
            best: RefCell::new(None),
            generation: 0,
            watch: Watch::new(watch_saturation, shape.len()),
        }
    }

    /// The shape parameter (position in `shape`) that saturated, if the run was stopped for it.
    pub(crate) fn saturated(&self) -> Option<(usize, Saturation)> {
        self.watch.saturated()
    }

    /// The full physical parameters and SSE at the current q (the solver's last accepted
    /// point), or `None` when the linear parameters cannot be solved there.
    pub(crate) fn solution(&self) -> Option<(Vec<f64>, f64)> {
        let known = self
            .best
            .borrow()
            .as_ref()
            .filter(|b| b.q == self.q)
            .map(|b| (b.ends, b.sse));
        let (ends, sse) = if let Some(v) = known {
            v
        } else {
            let e = self.evaluate()?;
            (e.ends, e.residuals.norm_squared())
        };
        let mut full = self.full.clone();
        for ((&k, t), &qk) in self.shape.iter().zip(self.transforms).zip(self.q.iter()) {
            full[k] = t.forward(qk).0;
        }
        self.set_ends(&mut full, ends);
        Some((full, sse))
    }

    fn set_ends(&self, full: &mut [f64], (r, s): (f64, f64)) {
        if let Some(ri) = self.linear.r {
            full[ri] = r;
        }
        full[self.linear.s] = s;
    }

    /// Residuals, Jacobian and linear parameters at q; `None` where the model is not finite or
    /// the linear parameters are not separable.
    fn evaluate(&self) -> Option<Evaluation<M, N>> {
        // Unweighted readings (the common case) skip the products by 1: the same numbers.
        if self.data.sqrt_w.is_some() {
            self.evaluate_with::<true>()
        } else {
            self.evaluate_with::<false>()
        }
    }

    /// [`Self::evaluate`] for weighted (`WEIGHTED`) or unweighted readings.
    #[allow(clippy::many_single_char_names)]
    fn evaluate_with<const WEIGHTED: bool>(&self) -> Option<Evaluation<M, N>> {
        let m = self.data.x.len();
        let k = self.shape.len();
        let mut guard = self.scratch.borrow_mut();
        let Scratch {
            unit,
            grad,
            per_reading,
        } = &mut *guard;
        let (g, rest) = per_reading.split_at_mut(m);
        let (basis, rest) = rest.split_at_mut(m);
        let (misfit, dg) = rest.split_at_mut(m);
        let mut dpdq = [0.0; 8];
        let mut dpdq_vec;
        let dpdq: &mut [f64] = if k <= dpdq.len() {
            &mut dpdq[..k]
        } else {
            dpdq_vec = vec![0.0; k];
            &mut dpdq_vec
        };
        for (j, ((&idx, t), &qj)) in self
            .shape
            .iter()
            .zip(self.transforms)
            .zip(self.q.iter())
            .enumerate()
        {
            let (p, d) = t.forward(qj);
            unit[idx] = p;
            dpdq[j] = d;
        }
        if self.van_genuchten {
            // The same numbers as the model's value_and_gradient at theta_r = 0, theta_s = 1.
            let (alpha, n) = (unit[2], unit[3]);
            let (dg_alpha, dg_n) = dg.split_at_mut(m);
            for (i, &x) in self.data.x.iter().enumerate() {
                let (gi, d_alpha, d_n) =
                    van_genuchten::se_and_gradient(x, alpha, n).unwrap_or((1.0, 0.0, 0.0));
                if !gi.is_finite() {
                    return None;
                }
                g[i] = gi;
                dg_alpha[i] = d_alpha * dpdq[0];
                dg_n[i] = d_n * dpdq[1];
            }
        } else {
            for i in 0..m {
                let gi = self.model.value_and_gradient(self.data.x[i], unit, grad);
                if !gi.is_finite() {
                    return None;
                }
                g[i] = gi;
                for (j, &idx) in self.shape.iter().enumerate() {
                    dg[j * m + i] = grad[idx] * dpdq[j];
                }
            }
        }
        let y = self.data.y;
        let r_held = self.linear.r.map_or(0.0, |r| self.full[r]);
        let s_held = self.full[self.linear.s];
        let (r, s, mode) =
            solve_linear_mode(&self.linear, r_held, s_held, &self.weights, y, &g[..m])?;
        let d = s - r;
        let w = &self.weights.w[..m];
        let w_at = |i: usize| if WEIGHTED { w[i] } else { 1.0 };
        let sum_w = self.weights.sum_w;
        // The free linear columns and their squared norm.
        let mean_g = if mode == Mode::Both {
            w.iter().zip(&g[..m]).map(|(wi, gi)| wi * gi).sum::<f64>() / sum_w
        } else {
            0.0
        };
        let mut basis_norm = 0.0;
        for (i, (b, &gi)) in basis.iter_mut().zip(&g[..m]).enumerate() {
            let wi = w_at(i);
            *b = match mode {
                Mode::Both => gi - mean_g,
                Mode::Upper => gi,
                Mode::Lower => 1.0 - gi,
                Mode::Neither => 0.0,
            };
            basis_norm += wi * *b * *b;
        }
        if mode != Mode::Neither && (basis_norm.is_nan() || basis_norm <= DEGENERATE * sum_w) {
            return None;
        }
        let sqrt_w = |i: usize| match self.data.sqrt_w {
            Some(s) if WEIGHTED => s[i],
            _ => 1.0,
        };
        let rows = self.rows;
        let mut residuals = OVector::<f64, M>::zeros_generic(rows, U1);
        for i in 0..m {
            let f = r + d * g[i] - y[i];
            misfit[i] = f;
            let e = sqrt_w(i) * f;
            if !e.is_finite() {
                return None;
            }
            residuals[i] = e;
        }
        // Jacobian column j: sqrt(w) (z - A N^-1 (A'z + dA' e)) with z = d * dg_j the model's
        // derivative at fixed linear parameters, A the free linear columns and N = A'A.
        let cols = N::from_usize(k);
        let mut jacobian = OMatrix::<f64, M, N>::zeros_generic(rows, cols);
        let (basis, misfit) = (&basis[..m], &misfit[..m]);
        for j in 0..k {
            let col = &dg[j * m..(j + 1) * m];
            // t = sum w dg (f - y); az = sum w basis z; wz = sum w z.
            let (mut t, mut az, mut wz) = (0.0, 0.0, 0.0);
            for i in 0..m {
                let z = d * col[i];
                t += w_at(i) * col[i] * misfit[i];
                az += w_at(i) * z * basis[i];
                wz += w_at(i) * z;
            }
            // v_i = z_i - shift - slope * basis_i.
            let (shift, slope) = match mode {
                Mode::Both => (wz / sum_w, (az + t) / basis_norm),
                Mode::Upper => (0.0, (az + t) / basis_norm),
                Mode::Lower => (0.0, -((t - az) / basis_norm)),
                Mode::Neither => (0.0, 0.0),
            };
            let mut out = jacobian.column_mut(j);
            for i in 0..m {
                let z = d * col[i];
                let v = sqrt_w(i) * (z - shift - slope * basis[i]);
                if !v.is_finite() {
                    return None;
                }
                out[i] = v;
            }
        }
        Some(Evaluation {
            residuals,
            jacobian,
            ends: (r, s),
        })
    }
}

impl<M: Dim, N: Dim> LeastSquaresProblem<f64, M, N> for Projected<'_, M, N>
where
    DefaultAllocator: Allocator<M> + Allocator<N> + Allocator<M, N>,
{
    type ResidualStorage = Owned<f64, M>;
    type JacobianStorage = Owned<f64, M, N>;
    type ParameterStorage = Owned<f64, N>;

    fn set_params(&mut self, q: &OVector<f64, N>) {
        self.q.copy_from(q);
        self.generation += 1;
    }

    fn params(&self) -> OVector<f64, N> {
        self.q.clone()
    }

    fn residuals(&self) -> Option<OVector<f64, M>> {
        let Some(e) = self.evaluate() else {
            // A trial point where the model or the linear solve fails: a huge residual so the
            // step is rejected rather than the run aborted (the crate aborts on `None`).
            *self.cached.borrow_mut() = None;
            let mut r = OVector::<f64, M>::zeros_generic(self.rows, U1);
            r.rows_mut(0, self.data.x.len()).fill(f64::MAX.sqrt());
            return Some(r);
        };
        let Evaluation {
            residuals,
            jacobian,
            ends,
        } = e;
        let sse = residuals.norm_squared();
        let mut best = self.best.borrow_mut();
        if best.as_ref().is_none_or(|b| sse < b.sse) {
            *best = Some(Best {
                q: self.q.clone(),
                ends,
                sse,
            });
        }
        *self.cached.borrow_mut() = Some(Tagged {
            generation: self.generation,
            value: jacobian,
        });
        Some(residuals)
    }

    fn jacobian(&self) -> Option<OMatrix<f64, M, N>> {
        // Asked for at accepted points only: check saturation of the shape parameters here.
        if self.watch.stops_at(self.transforms, self.q.as_slice()) {
            return None;
        }
        let cached = self.cached.borrow_mut().take();
        match cached {
            Some(t) if t.generation == self.generation => Some(t.value),
            _ => self.evaluate().map(|e| e.jacobian),
        }
    }
}

/// theta_r and theta_s minimizing sum w (r + (s - r) g - y)^2 within their bounds, and
/// which of them ended inside; `None` when the shape does not separate them.
#[allow(clippy::inline_always)] // called once per evaluation in the hot loop
#[inline(always)]
fn solve_linear_mode(
    lin: &Linear,
    r_held: f64,
    s_held: f64,
    weights: &Weights,
    y: &[f64],
    g: &[f64],
) -> Option<(f64, f64, Mode)> {
    let m = g.len();
    let Weights {
        w,
        sum_w,
        y_mean: ybar,
    } = weights;
    let (w, sum_w, ybar) = (&w[..m], *sum_w, *ybar);
    let (r_lo, r_hi) = lin.r_bounds;
    let (s_lo, s_hi) = lin.s_bounds;
    // The best s for a given r (column g), and the best r for a given s (column 1 - g).
    let s_given_r = |r0: f64| -> Option<f64> {
        if !lin.s_free {
            return Some(s_held);
        }
        let (mut a, mut b) = (0.0, 0.0);
        for i in 0..m {
            a += w[i] * g[i] * g[i];
            b += w[i] * g[i] * (y[i] - r0);
        }
        // theta_s not below theta_r: at s = r the curve is flat, the diagonal below.
        (a > DEGENERATE * sum_w).then(|| (r0 + b / a).clamp(s_lo, s_hi).max(r0))
    };
    let r_given_s = |s0: f64| -> Option<f64> {
        if !lin.r_free {
            return Some(r_held);
        }
        let (mut a, mut b) = (0.0, 0.0);
        for i in 0..m {
            let u = 1.0 - g[i];
            a += w[i] * u * u;
            b += w[i] * u * (s0 - y[i]);
        }
        (a > DEGENERATE * sum_w).then(|| (s0 - b / a).clamp(r_lo, r_hi).min(s0))
    };
    let (r, s) = match (lin.r_free, lin.s_free) {
        (true, true) => {
            let mut swg = 0.0;
            for i in 0..m {
                swg += w[i] * g[i];
            }
            let gbar = swg / sum_w;
            let (mut var, mut cov) = (0.0, 0.0);
            for i in 0..m {
                let dgi = g[i] - gbar;
                var += w[i] * dgi * dgi;
                cov += w[i] * dgi * (y[i] - ybar);
            }
            let free = (var > DEGENERATE * sum_w).then(|| {
                let d = cov / var;
                (ybar - d * gbar, ybar + d * (1.0 - gbar))
            });
            match free {
                Some((r, s))
                    if (r_lo..=r_hi).contains(&r) && (s_lo..=s_hi).contains(&s) && r <= s =>
                {
                    (r, s)
                }
                // The bounded optimum lies on an edge of the box or on the diagonal r = s (a
                // flat curve at the mean; theta_r above theta_s is no retention curve): the
                // best of those.
                _ => {
                    let sse = |r: f64, s: f64| -> f64 {
                        (0..m)
                            .map(|i| w[i] * (r + (s - r) * g[i] - y[i]).powi(2))
                            .sum()
                    };
                    let flat = ybar.clamp(r_lo.max(s_lo), r_hi.min(s_hi));
                    let edges = [
                        s_given_r(r_lo).map(|s| (r_lo, s)),
                        s_given_r(r_hi).map(|s| (r_hi, s)),
                        r_given_s(s_lo).map(|r| (r, s_lo)),
                        r_given_s(s_hi).map(|r| (r, s_hi)),
                        (r_lo.max(s_lo) <= r_hi.min(s_hi)).then_some((flat, flat)),
                    ];
                    edges
                        .into_iter()
                        .flatten()
                        .filter(|(r, s)| r <= s && (s_lo..=s_hi).contains(s))
                        .map(|(r, s)| (sse(r, s), r, s))
                        .min_by(|a, b| a.0.total_cmp(&b.0))
                        .map(|(_, r, s)| (r, s))?
                }
            }
        }
        (false, true) => (r_held, s_given_r(r_held)?),
        (true, false) => (r_given_s(s_held)?, s_held),
        (false, false) => (r_held, s_held),
    };
    let r_inside = lin.r_free && r > r_lo && r < r_hi;
    let s_inside = lin.s_free && s > s_lo && s < s_hi;
    let mode = match (r_inside, s_inside) {
        (true, true) => Mode::Both,
        (false, true) => Mode::Upper,
        (true, false) => Mode::Lower,
        (false, false) => Mode::Neither,
    };
    Some((r, s, mode))
}

/// theta_r and theta_s minimizing sum w (r + (s - r) g - y)^2 within their bounds (`r_held`,
/// `s_held` where the linear parameters are not free); `None` when g does not separate them.
pub(crate) fn solve_linear(
    lin: &Linear,
    r_held: f64,
    s_held: f64,
    weights: &Weights,
    y: &[f64],
    g: &[f64],
) -> Option<(f64, f64)> {
    solve_linear_mode(lin, r_held, s_held, weights, y, g).map(|(r, s, _)| (r, s))
}

/// What a projected run needs: the problem and its start.
pub(crate) struct Spec<'a> {
    pub model: &'a dyn CurveModel,
    pub data: Data<'a>,
    pub shape: &'a [usize],
    pub transforms: &'a [Transform],
    pub linear: Linear,
    pub kernel: Option<Kernel>,
    /// Full physical start (held entries at their values).
    pub full: Vec<f64>,
    /// Unbounded start of each shape parameter.
    pub q0: &'a [f64],
    pub watch: bool,
    /// Settings of the two-parameter solver ([`super::lm2`]), used for the van Genuchten
    /// kernel with two shape parameters; `None` runs the generic solver always.
    pub fast: Option<super::lm2::Settings>,
}

/// A projected run's outcome.
pub(crate) struct Outcome {
    /// Full parameters and SSE at the last accepted point, unless the linear parameters could
    /// not be solved there.
    pub solution: Option<(Vec<f64>, f64)>,
    /// The shape parameter (position in `shape`) that saturated, if the run was stopped for it.
    pub saturated: Option<(usize, Saturation)>,
    pub report: MinimizationReport<f64>,
}

/// Rows up to which the residuals are padded to fixed-size storage.
const FIXED_ROWS: usize = 16;

/// Run the solver on a projected problem, with fixed-size storage when it is small.
///
/// One or two shape parameters (the common case) pad to 8, 12 or 16 rows, so the solver's QR
/// factorization does not work through many zero rows; more shape parameters pad to 16.
pub(crate) fn minimize(spec: Spec<'_>, lm: &LevenbergMarquardt<f64>) -> Outcome {
    let m = spec.data.x.len();
    if m <= FIXED_ROWS {
        let (r16, r12, r8) = (Const::<FIXED_ROWS>, Const::<12>, Const::<8>);
        // The two-parameter solver's settings where it runs (the van Genuchten kernel).
        let fast = spec
            .fast
            .filter(|_| spec.kernel == Some(Kernel::VanGenuchten));
        match (spec.shape.len(), m) {
            (1, 0..=8) => return run(spec, lm, r8, Const::<1>),
            (1, 9..=12) => return run(spec, lm, r12, Const::<1>),
            (1, _) => return run(spec, lm, r16, Const::<1>),
            (2, _) if let Some(settings) = fast => {
                return match m {
                    0..=8 => run_two(spec, &settings, r8),
                    9..=12 => run_two(spec, &settings, r12),
                    _ => run_two(spec, &settings, r16),
                };
            }
            (2, 0..=8) => return run(spec, lm, r8, Const::<2>),
            (2, 9..=12) => return run(spec, lm, r12, Const::<2>),
            (2, _) => return run(spec, lm, r16, Const::<2>),
            (3, _) => return run(spec, lm, r16, Const::<3>),
            (4, _) => return run(spec, lm, r16, Const::<4>),
            (5, _) => return run(spec, lm, r16, Const::<5>),
            _ => {}
        }
    }
    let (m, k) = (spec.data.x.len(), spec.shape.len());
    run(spec, lm, Dyn(m), Dyn(k))
}

/// A two-parameter projected problem through [`super::lm2`].
fn run_two<M>(spec: Spec<'_>, settings: &super::lm2::Settings, rows: M) -> Outcome
where
    M: Dim,
    DefaultAllocator: Allocator<M> + Allocator<Const<2>> + Allocator<M, Const<2>>,
{
    let (problem, report) = super::lm2::minimize(settings, problem_of(spec, rows, Const::<2>));
    outcome(&problem, report)
}

fn run<M, N>(spec: Spec<'_>, lm: &LevenbergMarquardt<f64>, rows: M, cols: N) -> Outcome
where
    M: DimMin<N> + DimMax<N>,
    N: Dim,
    DefaultAllocator:
        Allocator<M> + Allocator<N> + Allocator<M, N> + Reallocator<f64, M, N, DimMaximum<M, N>, N>,
{
    let (problem, report) = lm.minimize(problem_of(spec, rows, cols));
    outcome(&problem, report)
}

/// The projected problem of `spec` with `rows` residual rows and `cols` shape parameters.
fn problem_of<M: Dim, N: Dim>(spec: Spec<'_>, rows: M, cols: N) -> Projected<'_, M, N>
where
    DefaultAllocator: Allocator<M> + Allocator<N> + Allocator<M, N>,
{
    let q0 = OVector::<f64, N>::from_iterator_generic(cols, U1, spec.q0.iter().copied());
    Projected::new(
        spec.model,
        spec.data,
        rows,
        spec.shape,
        spec.transforms,
        spec.linear,
        spec.kernel,
        spec.full,
        q0,
        spec.watch,
    )
}

/// What a finished run reports.
fn outcome<M: Dim, N: Dim>(
    problem: &Projected<'_, M, N>,
    report: MinimizationReport<f64>,
) -> Outcome
where
    DefaultAllocator: Allocator<M> + Allocator<N> + Allocator<M, N>,
{
    Outcome {
        solution: problem.solution(),
        saturated: problem.saturated(),
        report,
    }
}
