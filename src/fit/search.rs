//! Global search before the local solver: where on the parameter space to start it.
//!
//! Levenberg-Marquardt finds the minimum of the basin it starts in. The retention models other
//! than van Genuchten have sums of squares with several basins (a sharp and a smooth
//! Brooks-Corey fit of a sand, a bimodal curve fitted either mode first, a Fredlund-Xing fit
//! with its correction doing the work of the shape), so the driver asks this module for starts
//! that cover the space and keeps the best of the runs from them.
//!
//! Two ways of covering it, both pure computation on the readings:
//!
//! - Breakpoint models (Brooks-Corey, Campbell): between two consecutive measured suctions the
//!   curve is smooth, readings at or below the air entry sit at theta_s and those above it on
//!   theta_r + c h^(-e). Dropping the link between c and the air entry leaves a one-dimensional
//!   search over the exponent e with theta_r and c solved by linear least squares, whose
//!   minimum is a lower bound on the interval's best sum of squares and, when the air entry it
//!   implies lies in the interval, the interval's optimum itself ([`interval_plans`]). The
//!   driver solves the intervals in the order of their bounds and stops when no bound is below
//!   the best fit found (branch and bound).
//! - The others: a grid over the shape parameters (the linear theta_r and theta_s solved at
//!   each point, as in [`projection`](super::projection)); the grid's local minima, best first,
//!   are the starts ([`grid_starts`]).

use super::problem::Data;
use super::projection::{Linear, Weights, solve_linear};
use crate::model::curve::CurveModel;
use crate::model::golden::golden_minimum;

/// Beyond a breakpoint b (Brooks-Corey's h_b, Campbell's h_e) the curve is
/// theta = theta_r + (theta_s - theta_r) (b / h)^e: a power law in h.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct PowerLaw {
    /// Position of the exponent's parameter.
    pub exponent: usize,
    /// Whether that parameter is the exponent's inverse (Campbell's b: e = 1 / b).
    pub inverse: bool,
    /// Position of theta_r (`None`: the curve tends to 0).
    pub theta_r: Option<usize>,
    /// Position of theta_s.
    pub theta_s: usize,
}

/// Bounds and fixed values of every parameter, as the driver sets them up.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Limits<'a> {
    pub lower: &'a [f64],
    pub upper: &'a [f64],
    pub fixed: &'a [Option<f64>],
}

impl Limits<'_> {
    /// The fixed value of parameter k, or its interval.
    fn range(&self, k: usize) -> Result<f64, (f64, f64)> {
        match self.fixed[k] {
            Some(v) => Ok(v),
            None => Err((self.lower[k], self.upper[k])),
        }
    }
}

/// One interval of the breakpoint: its edges, a lower bound on its best sum of squares and a
/// start inside it.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct IntervalPlan {
    pub edges: (f64, f64),
    pub lower_bound: f64,
    /// The relaxed optimum (its breakpoint held inside the interval), and when that breakpoint
    /// fell outside, also the best point of the exponent grid whose breakpoint lies inside.
    pub starts: Vec<Vec<f64>>,
}

/// Points of the coarse grid of the one-dimensional exponent search.
const EXPONENT_GRID: usize = 24;
/// Golden-section steps refining the best grid point (the bracket shrinks by 0.618 a step).
const GOLDEN_STEPS: usize = 40;

/// The weighted least-squares fit of r + c u_i to y_i with r in `r_range` (or fixed, or absent)
/// and c >= 0: (sse, r, c).
fn power_fit(
    u: &[f64],
    y: &[f64],
    w: &[f64],
    r_range: Option<Result<f64, (f64, f64)>>,
) -> (f64, f64, f64) {
    let sse = |r: f64, c: f64| -> f64 {
        u.iter()
            .zip(y)
            .zip(w)
            .map(|((&ui, &yi), &wi)| wi * (r + c * ui - yi).powi(2))
            .sum()
    };
    // The best c >= 0 for a given r.
    let c_given = |r: f64| -> f64 {
        let (mut a, mut b) = (0.0, 0.0);
        for ((&ui, &yi), &wi) in u.iter().zip(y).zip(w) {
            a += wi * ui * ui;
            b += wi * ui * (yi - r);
        }
        if a > 0.0 { (b / a).max(0.0) } else { 0.0 }
    };
    match r_range {
        None => {
            let c = c_given(0.0);
            (sse(0.0, c), 0.0, c)
        }
        Some(Ok(r)) => {
            let c = c_given(r);
            (sse(r, c), r, c)
        }
        Some(Err((lo, hi))) => {
            let (mut sw, mut su, mut sy) = (0.0, 0.0, 0.0);
            for ((&ui, &yi), &wi) in u.iter().zip(y).zip(w) {
                sw += wi;
                su += wi * ui;
                sy += wi * yi;
            }
            if sw <= 0.0 {
                return (0.0, lo.max(0.0).min(hi), 0.0);
            }
            let (ubar, ybar) = (su / sw, sy / sw);
            let (mut var, mut cov) = (0.0, 0.0);
            for ((&ui, &yi), &wi) in u.iter().zip(y).zip(w) {
                var += wi * (ui - ubar) * (ui - ubar);
                cov += wi * (ui - ubar) * (yi - ybar);
            }
            if var > 1e-300 {
                let c = cov / var;
                let r = ybar - c * ubar;
                if c >= 0.0 && (lo..=hi).contains(&r) {
                    return (sse(r, c), r, c);
                }
            }
            // On an edge of the box: r at a bound, or c = 0 (r the clamped mean).
            let candidates = [
                (lo, c_given(lo)),
                (hi, c_given(hi)),
                (ybar.clamp(lo, hi), 0.0),
            ];
            candidates
                .into_iter()
                .map(|(r, c)| (sse(r, c), r, c))
                .min_by(|a, b| a.0.total_cmp(&b.0))
                .unwrap_or((f64::INFINITY, lo, 0.0))
        }
    }
}

/// A power-law fit beyond the breakpoint: (sse, e, r, c).
type PowerFit = (f64, f64, f64, f64);

/// The best exponent e in [lo, hi] (a log grid, then golden section around its best point) for
/// the readings beyond the breakpoint, and the best grid point that `feasible(e, r, c)`
/// accepts (when the overall best is not accepted, that is where a start can go).
fn exponent_search(
    ln_h: &[f64],
    y: &[f64],
    w: &[f64],
    range: Result<f64, (f64, f64)>,
    r_range: Option<Result<f64, (f64, f64)>>,
    feasible: &dyn Fn(f64, f64, f64) -> bool,
) -> (PowerFit, Option<PowerFit>) {
    let mut u = vec![0.0; ln_h.len()];
    let mut at = |e: f64| -> (f64, f64, f64) {
        for (ui, &l) in u.iter_mut().zip(ln_h) {
            *ui = (-e * l).exp();
        }
        power_fit(&u, y, w, r_range)
    };
    let (lo, hi) = match range {
        Ok(e) => {
            let (sse, r, c) = at(e);
            return ((sse, e, r, c), None);
        }
        Err(bounds) => bounds,
    };
    let (l_lo, l_hi) = (lo.ln(), hi.ln());
    let step = (l_hi - l_lo) / (EXPONENT_GRID - 1) as f64;
    let mut best = (f64::INFINITY, 0usize);
    let mut best_feasible: Option<PowerFit> = None;
    for i in 0..EXPONENT_GRID {
        let e = (l_lo + step * i as f64).exp();
        let (sse, r, c) = at(e);
        if sse < best.0 {
            best = (sse, i);
        }
        if feasible(e, r, c) && best_feasible.is_none_or(|f| sse < f.0) {
            best_feasible = Some((sse, e, r, c));
        }
    }
    // Golden section on ln e over the grid cells either side of the best point.
    let centre = l_lo + step * best.1 as f64;
    let (a, b) = ((centre - step).max(l_lo), (centre + step).min(l_hi));
    let (refined, _) = golden_minimum(|l| at(l.exp()).0, a, b, 0.0, GOLDEN_STEPS);
    // Never worse than the grid's best point.
    let best = [refined, centre]
        .into_iter()
        .map(|l| {
            let (sse, r, c) = at(l.exp());
            (sse, l.exp(), r, c)
        })
        .min_by(|p, q| p.0.total_cmp(&q.0))
        .unwrap_or((f64::INFINITY, centre.exp(), 0.0, 0.0));
    (best, best_feasible)
}

/// For each interval between consecutive `edges` of the breakpoint parameter `b`: a lower
/// bound on the best sum of squares with the breakpoint inside it, and a start there.
///
/// `base` supplies the values of parameters this search does not set (none for Brooks-Corey
/// and Campbell). Weighted readings are honoured.
pub(crate) fn interval_plans(
    law: PowerLaw,
    b: usize,
    data: &Data<'_>,
    limits: Limits<'_>,
    edges: &[f64],
    base: &[f64],
) -> Vec<IntervalPlan> {
    let m = data.x.len();
    let w: Vec<f64> = (0..m)
        .map(|i| data.sqrt_w.map_or(1.0, |s| s[i] * s[i]))
        .collect();
    let exponent_range = match limits.range(law.exponent) {
        Ok(v) if law.inverse => Ok(1.0 / v),
        Ok(v) => Ok(v),
        Err((lo, hi)) if law.inverse => Err((1.0 / hi, 1.0 / lo)),
        Err(bounds) => Err(bounds),
    };
    let r_range = law.theta_r.map(|r| limits.range(r));
    let s_range = limits.range(law.theta_s);
    let mut plans = Vec::with_capacity(edges.len());
    let mut ln_h = Vec::with_capacity(m);
    let mut y_dry = Vec::with_capacity(m);
    let mut w_dry = Vec::with_capacity(m);
    for pair in edges.windows(2) {
        let (a, z) = (pair[0], pair[1]);
        // Readings at or below the lower edge are saturated; those at or above the upper
        // edge lie on the power law.
        let (mut sw, mut swy) = (0.0, 0.0);
        ln_h.clear();
        y_dry.clear();
        w_dry.clear();
        for ((&x, &y), &wi) in data.x.iter().zip(data.y).zip(&w) {
            if x <= a {
                sw += wi;
                swy += wi * y;
            } else if x >= z {
                ln_h.push(x.ln());
                y_dry.push(y);
                w_dry.push(wi);
            }
        }
        let theta_s = match s_range {
            Ok(s) => Some(s),
            Err((lo, hi)) => (sw > 0.0).then(|| (swy / sw).clamp(lo, hi)),
        };
        let wet_sse: f64 = theta_s.map_or(0.0, |s| {
            (0..m)
                .filter(|&i| data.x[i] <= a)
                .map(|i| w[i] * (data.y[i] - s).powi(2))
                .sum()
        });
        // A breakpoint implied by theta_s, theta_r and c = (theta_s - theta_r) b^e.
        let implied = |s: f64, e: f64, r: f64, c: f64| -> Option<f64> {
            let v = (c / (s - r)).powf(1.0 / e);
            (s > r && c > 0.0 && v.is_finite()).then_some(v)
        };
        let inside = |e: f64, r: f64, c: f64| -> bool {
            theta_s.is_none_or(|s| implied(s, e, r, c).is_some_and(|v| (a..=z).contains(&v)))
        };
        let ((dry_sse, e, r, c), feasible) = if ln_h.is_empty() {
            let e = match exponent_range {
                Ok(e) => e,
                Err(_) => exponent_of(law, base[law.exponent]),
            };
            let r = law.theta_r.map_or(0.0, |k| base[k]);
            ((0.0, e, r, 0.0), None)
        } else {
            exponent_search(&ln_h, &y_dry, &w_dry, exponent_range, r_range, &inside)
        };
        let mid = if a > 0.0 && z.is_finite() {
            (a * z).sqrt()
        } else {
            0.5 * (a + z)
        };
        let start_at = |e: f64, r: f64, c: f64| -> Vec<f64> {
            let theta_s = theta_s.unwrap_or_else(|| {
                let s = r + c * mid.powf(-e);
                match s_range {
                    Ok(v) => v,
                    Err((lo, hi)) => s.clamp(lo, hi),
                }
            });
            let breakpoint = implied(theta_s, e, r, c).map_or(mid, |v| v.clamp(a, z));
            let mut start = base.to_vec();
            start[b] = breakpoint;
            start[law.exponent] = if law.inverse { 1.0 / e } else { e };
            if let Some(k) = law.theta_r {
                start[k] = r;
            }
            start[law.theta_s] = theta_s;
            for (k, v) in start.iter_mut().enumerate() {
                if let Some(f) = limits.fixed[k] {
                    *v = f;
                } else {
                    *v = v.clamp(limits.lower[k], limits.upper[k]);
                }
            }
            start
        };
        let mut starts = vec![start_at(e, r, c)];
        if !inside(e, r, c)
            && let Some((_, e, r, c)) = feasible
        {
            starts.push(start_at(e, r, c));
        }
        plans.push(IntervalPlan {
            edges: (a, z),
            lower_bound: wet_sse + dry_sse,
            starts,
        });
    }
    plans.sort_by(|p, q| p.lower_bound.total_cmp(&q.lower_bound));
    plans
}

/// The exponent a parameter value stands for.
fn exponent_of(law: PowerLaw, value: f64) -> f64 {
    if law.inverse { 1.0 / value } else { value }
}

/// The strides of a row-major grid of these dimensions (last axis fastest).
fn strides_of(dims: &[usize]) -> Vec<usize> {
    (0..dims.len())
        .map(|d| dims[d + 1..].iter().product())
        .collect()
}

/// The positions of a row-major grid's local minima (no finite neighbour one step along any
/// axis is lower), best first, at most `keep`.
fn local_minima(values: &[f64], dims: &[usize], keep: usize) -> Vec<usize> {
    let strides = strides_of(dims);
    let mut minima: Vec<usize> = (0..values.len())
        .filter(|&flat| {
            let v = values[flat];
            v.is_finite()
                && strides.iter().zip(dims).all(|(&stride, &len)| {
                    let i = (flat / stride) % len;
                    let below = i > 0 && values[flat - stride] < v;
                    let above = i + 1 < len && values[flat + stride] < v;
                    !below && !above
                })
        })
        .collect();
    minima.sort_by(|&a, &b| values[a].total_cmp(&values[b]));
    minima.truncate(keep);
    minima
}

/// One axis of a screening grid: a parameter and the values it takes.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Axis {
    pub param: usize,
    pub values: Vec<f64>,
}

/// `count` values from `lo` to `hi`, evenly spaced in the logarithm.
pub(crate) fn log_values(lo: f64, hi: f64, count: usize) -> Vec<f64> {
    if count <= 1 || hi.partial_cmp(&lo) != Some(std::cmp::Ordering::Greater) {
        return vec![(lo * hi).sqrt()];
    }
    let (a, b) = (lo.ln(), hi.ln());
    (0..count)
        .map(|i| (a + (b - a) * i as f64 / (count - 1) as f64).exp())
        .collect()
}

/// Screen a grid of shape parameters and return up to `keep` of its local minima, best first,
/// as full parameter vectors (linear parameters solved, fixed ones at their values).
///
/// Axes of fixed parameters are dropped. Points where the model is not finite or the linear
/// parameters cannot be separated are skipped.
pub(crate) fn grid_starts(
    model: &dyn CurveModel,
    data: &Data<'_>,
    linear: Linear,
    limits: Limits<'_>,
    axes: &[Axis],
    base: &[f64],
    keep: usize,
) -> Vec<(f64, Vec<f64>)> {
    let axes: Vec<&Axis> = axes
        .iter()
        .filter(|a| limits.fixed[a.param].is_none() && !a.values.is_empty())
        .collect();
    let total: usize = axes.iter().map(|a| a.values.len()).product();
    if axes.is_empty() || total == 0 {
        return Vec::new();
    }
    let weights = Weights::of(data);
    let m = data.x.len();
    let mut unit = base.to_vec();
    for (k, v) in unit.iter_mut().enumerate() {
        if let Some(f) = limits.fixed[k] {
            *v = f;
        }
    }
    if let Some(r) = linear.r {
        unit[r] = 0.0;
    }
    unit[linear.s] = 1.0;
    let held_r = linear.r.and_then(|r| limits.fixed[r]).unwrap_or(0.0);
    let held_s = limits.fixed[linear.s].unwrap_or(1.0);
    let mut g = vec![0.0; m];
    let mut sse = vec![f64::INFINITY; total];
    let mut ends = vec![(0.0, 0.0); total];
    let mut index = vec![0usize; axes.len()];
    for flat in 0..total {
        for (axis, &i) in axes.iter().zip(&index) {
            unit[axis.param] = axis.values[i];
        }
        let mut finite = true;
        for (gi, &x) in g.iter_mut().zip(data.x) {
            *gi = model.value(x, &unit);
            finite &= gi.is_finite();
        }
        if finite && let Some((r, s)) = solve_linear(&linear, held_r, held_s, &weights, data.y, &g)
        {
            let mut e = 0.0;
            for ((&wi, &gi), &yi) in weights.w.iter().zip(&g).zip(data.y) {
                e += wi * (r + (s - r) * gi - yi).powi(2);
            }
            if e.is_finite() {
                sse[flat] = e;
                ends[flat] = (r, s);
            }
        }
        // Next index, last axis fastest.
        for d in (0..axes.len()).rev() {
            index[d] += 1;
            if index[d] < axes[d].values.len() {
                break;
            }
            index[d] = 0;
        }
    }
    let dims: Vec<usize> = axes.iter().map(|a| a.values.len()).collect();
    let strides = strides_of(&dims);
    local_minima(&sse, &dims, keep)
        .into_iter()
        .map(|flat| {
            let mut p = unit.clone();
            for (axis, &stride) in axes.iter().zip(&strides) {
                p[axis.param] = axis.values[(flat / stride) % axis.values.len()];
            }
            let (r, s) = ends[flat];
            if let Some(ri) = linear.r {
                p[ri] = r;
            }
            p[linear.s] = s;
            (sse[flat], p)
        })
        .collect()
}

/// The positions of a model whose shape is a correction times a power of a core:
/// theta = theta_s C(h; c) K(h; a, b)^(-m) (Fredlund-Xing: C its correction with c = h_r,
/// K = ln(e + (h/a)^b)).
#[derive(Debug, Clone, Copy)]
pub(crate) struct Factored {
    pub theta_s: usize,
    /// The core's two parameters, the power and the correction's parameter.
    pub core: [usize; 2],
    pub power: usize,
    pub correction: usize,
    /// C(h; c).
    pub correction_fn: fn(f64, f64) -> f64,
    /// ln K(h; a, b).
    pub ln_core: fn(f64, f64, f64) -> f64,
}

/// Screen a four-dimensional grid of a [`Factored`] model and return up to `keep` local
/// minima, best first. `values` are the grid values of the core's two parameters, the power
/// and the correction's parameter, in that order. The corrections and ln K are computed once
/// per value, so each grid point costs one exponential per reading.
pub(crate) fn factored_starts(
    f: Factored,
    data: &Data<'_>,
    limits: Limits<'_>,
    values: [&[f64]; 4],
    base: &[f64],
    keep: usize,
) -> Vec<(f64, Vec<f64>)> {
    let params = [f.core[0], f.core[1], f.power, f.correction];
    let axes: Vec<Vec<f64>> = params
        .iter()
        .zip(values)
        .map(|(&k, v)| match limits.fixed[k] {
            Some(fixed) => vec![fixed],
            None => v.to_vec(),
        })
        .collect();
    if axes.iter().any(Vec::is_empty) {
        return Vec::new();
    }
    let m = data.x.len();
    let w: Vec<f64> = (0..m)
        .map(|i| data.sqrt_w.map_or(1.0, |s| s[i] * s[i]))
        .collect();
    let dims = [axes[0].len(), axes[1].len(), axes[2].len(), axes[3].len()];
    let corrections: Vec<Vec<f64>> = axes[3]
        .iter()
        .map(|&c| data.x.iter().map(|&h| (f.correction_fn)(h, c)).collect())
        .collect();
    let (s_lo, s_hi) = (limits.lower[f.theta_s], limits.upper[f.theta_s]);
    let s_fixed = limits.fixed[f.theta_s];
    let total: usize = dims.iter().product();
    let mut sse = vec![f64::INFINITY; total];
    let mut ends = vec![0.0; total];
    let mut ln_core = vec![0.0; m];
    let mut g = vec![0.0; m];
    for (ia, &a) in axes[0].iter().enumerate() {
        for (ib, &b) in axes[1].iter().enumerate() {
            for (lk, &h) in ln_core.iter_mut().zip(data.x) {
                *lk = (f.ln_core)(h, a, b);
            }
            for (ip, &power) in axes[2].iter().enumerate() {
                for (ic, corr) in corrections.iter().enumerate() {
                    let (mut gg, mut gy) = (0.0, 0.0);
                    for i in 0..m {
                        g[i] = corr[i] * (-power * ln_core[i]).exp();
                        gg += w[i] * g[i] * g[i];
                        gy += w[i] * g[i] * data.y[i];
                    }
                    if gg.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
                        continue;
                    }
                    let s = s_fixed.unwrap_or_else(|| (gy / gg).clamp(s_lo, s_hi));
                    let e: f64 = (0..m).map(|i| w[i] * (s * g[i] - data.y[i]).powi(2)).sum();
                    if e.is_finite() {
                        let flat = ((ia * dims[1] + ib) * dims[2] + ip) * dims[3] + ic;
                        sse[flat] = e;
                        ends[flat] = s;
                    }
                }
            }
        }
    }
    let strides = strides_of(&dims);
    // The correction's parameter trades off against the whole shape, so the best point of
    // every value it takes is a start too, besides the grid's best local minima.
    let mut chosen = local_minima(&sse, &dims, keep);
    for ic in 0..dims[3] {
        let best = (0..total)
            .filter(|&flat| flat % dims[3] == ic && sse[flat].is_finite())
            .min_by(|&a, &b| sse[a].total_cmp(&sse[b]));
        if let Some(flat) = best
            && !chosen.contains(&flat)
        {
            chosen.push(flat);
        }
    }
    chosen
        .into_iter()
        .map(|flat| {
            let mut p = base.to_vec();
            for (d, &k) in params.iter().enumerate() {
                p[k] = axes[d][(flat / strides[d]) % dims[d]];
            }
            p[f.theta_s] = ends[flat];
            for (k, v) in p.iter_mut().enumerate() {
                *v = match limits.fixed[k] {
                    Some(fixed) => fixed,
                    None => v.clamp(limits.lower[k], limits.upper[k]),
                };
            }
            (sse[flat], p)
        })
        .collect()
}

/// The positions of a two-mode mixture's parameters:
/// theta = theta_r + (theta_s - theta_r) (w1 S(h; mode 1) + (1 - w1) S(h; mode 2)).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Mixture {
    pub theta_r: usize,
    pub theta_s: usize,
    pub weight: usize,
    /// Each mode's two shape parameters.
    pub modes: [[usize; 2]; 2],
}

/// Starts for a two-mode mixture from pairs of modes on a grid.
///
/// Each mode is a curve S(h; a, b) of two shape parameters; for a pair of modes the fit is
/// linear in theta_r, c1 = (theta_s - theta_r) w1 and c2 = (theta_s - theta_r)(1 - w1), so
/// every pair is scored by a three-column least squares (c1, c2 > 0, theta_r in its bounds).
/// Mode 1 is kept the one with the larger first parameter (the wetter mode) unless the user
/// fixed a mode's parameter. Returns up to `keep` pairs, best first, that differ from each
/// other by at least two grid steps in some mode parameter.
pub(crate) fn mixture_starts(
    mode: &dyn Fn(f64, f64, f64) -> f64,
    mix: Mixture,
    data: &Data<'_>,
    limits: Limits<'_>,
    grids: &[MixtureGrid],
    base: &[f64],
    keep: usize,
) -> Vec<(f64, Vec<f64>)> {
    let mut all: Vec<(f64, Vec<f64>)> = grids
        .iter()
        .flat_map(|g| pair_minima(mode, mix, data, limits, g, base, keep))
        .collect();
    all.sort_by(|a, b| a.0.total_cmp(&b.0));
    all.truncate(keep);
    all
}

/// The values each parameter of the two modes takes in one pair screen.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct MixtureGrid {
    /// Mode 1's two parameters' values.
    pub first: [Vec<f64>; 2],
    /// Mode 2's.
    pub second: [Vec<f64>; 2],
    /// Whether only pairs with mode 1's first parameter above mode 2's are scored (when both
    /// modes take the same values, the other order is the same curve).
    pub ordered: bool,
}

/// The best `keep` local minima of one pair screen.
fn pair_minima(
    mode: &dyn Fn(f64, f64, f64) -> f64,
    mix: Mixture,
    data: &Data<'_>,
    limits: Limits<'_>,
    grid_values: &MixtureGrid,
    base: &[f64],
    keep: usize,
) -> Vec<(f64, Vec<f64>)> {
    let m = data.x.len();
    let w: Vec<f64> = (0..m)
        .map(|i| data.sqrt_w.map_or(1.0, |s| s[i] * s[i]))
        .collect();
    let fixed = limits.fixed;
    // The values each mode parameter takes: its grid, or its fixed value.
    let values = |k: usize, grid: &[f64]| -> Vec<f64> {
        match fixed[k] {
            Some(v) => vec![v],
            None => grid.to_vec(),
        }
    };
    let [[a1, b1], [a2, b2]] = mix.modes;
    let axes = [
        values(a1, &grid_values.first[0]),
        values(b1, &grid_values.first[1]),
        values(a2, &grid_values.second[0]),
        values(b2, &grid_values.second[1]),
    ];
    // Mode vectors for every (a, b) either mode may take, keyed by grid position.
    let shape = |a: &[f64], b: &[f64]| -> Vec<Vec<f64>> {
        let mut out = Vec::with_capacity(a.len() * b.len());
        for &ai in a {
            for &bi in b {
                out.push(data.x.iter().map(|&h| mode(h, ai, bi)).collect());
            }
        }
        out
    };
    let modes1 = shape(&axes[0], &axes[1]);
    let same = axes[0] == axes[2] && axes[1] == axes[3];
    let modes2 = if same {
        Vec::new()
    } else {
        shape(&axes[2], &axes[3])
    };
    let modes2 = if same { &modes1 } else { &modes2 };
    let ordered = grid_values.ordered && fixed[a1].is_none() && fixed[a2].is_none();
    let (sw, swy): (f64, f64) =
        (0..m).fold((0.0, 0.0), |(a, b), i| (a + w[i], b + w[i] * data.y[i]));
    let swyy: f64 = (0..m).map(|i| w[i] * data.y[i] * data.y[i]).sum();
    let moments = |v: &[f64]| -> (f64, f64) {
        let mut s = 0.0;
        let mut sy = 0.0;
        for i in 0..m {
            s += w[i] * v[i];
            sy += w[i] * v[i] * data.y[i];
        }
        (s, sy)
    };
    let m1: Vec<(f64, f64)> = modes1.iter().map(|v| moments(v)).collect();
    let m2: Vec<(f64, f64)> = modes2.iter().map(|v| moments(v)).collect();
    let r_fixed = fixed[mix.theta_r];
    let (r_lo, r_hi) = (limits.lower[mix.theta_r], limits.upper[mix.theta_r]);
    let w_fixed = fixed[mix.weight];
    let dims = [axes[0].len(), axes[1].len(), axes[2].len(), axes[3].len()];
    let total: usize = dims.iter().product();
    let flat_of = |i: [usize; 4]| ((i[0] * dims[1] + i[1]) * dims[2] + i[2]) * dims[3] + i[3];
    let mut grid: Vec<(f64, f64, f64, f64)> = vec![(f64::INFINITY, 0.0, 0.0, 0.0); total];
    let n_b1 = axes[1].len();
    let n_b2 = axes[3].len();
    for (j, v1) in modes1.iter().enumerate() {
        let (ja, jb) = (j / n_b1, j % n_b1);
        for (k, v2) in modes2.iter().enumerate() {
            let (ka, kb) = (k / n_b2, k % n_b2);
            if ordered && axes[0][ja] <= axes[2][ka] {
                continue;
            }
            let g12: f64 = (0..m).map(|i| w[i] * v1[i] * v2[i]).sum();
            let g11: f64 = (0..m).map(|i| w[i] * v1[i] * v1[i]).sum();
            let g22: f64 = (0..m).map(|i| w[i] * v2[i] * v2[i]).sum();
            let (s1, y1) = m1[j];
            let (s2, y2) = m2[k];
            // Normal equations of [1, v1, v2] (or of [1, w v1 + (1 - w) v2] with w1 fixed).
            let solved = match w_fixed {
                None => solve_three(
                    [[sw, s1, s2], [s1, g11, g12], [s2, g12, g22]],
                    [swy, y1, y2],
                    r_fixed,
                    (r_lo, r_hi),
                )
                .filter(|p| p[1] > 0.0 && p[2] > 0.0),
                Some(wf) => {
                    let sv = wf * s1 + (1.0 - wf) * s2;
                    let yv = wf * y1 + (1.0 - wf) * y2;
                    let gv =
                        wf * wf * g11 + 2.0 * wf * (1.0 - wf) * g12 + (1.0 - wf) * (1.0 - wf) * g22;
                    solve_two([[sw, sv], [sv, gv]], [swy, yv], r_fixed, (r_lo, r_hi))
                        .filter(|p| p[1] > 0.0)
                        .map(|p| [p[0], wf * p[1], (1.0 - wf) * p[1]])
                }
            };
            let Some([r, c1, c2]) = solved else { continue };
            // SSE = sum w (y - r - c1 v1 - c2 v2)^2 from the moments.
            let p = [r, c1, c2];
            let g = [[sw, s1, s2], [s1, g11, g12], [s2, g12, g22]];
            let b = [swy, y1, y2];
            let mut sse = swyy;
            for a in 0..3 {
                sse -= 2.0 * p[a] * b[a];
                for c in 0..3 {
                    sse += p[a] * g[a][c] * p[c];
                }
            }
            if sse.is_finite() {
                grid[flat_of([ja, jb, ka, kb])] = (sse.max(0.0), r, c1, c2);
            }
        }
    }
    let scores: Vec<f64> = grid.iter().map(|g| g.0).collect();
    let strides = strides_of(&dims);
    let minima: Vec<[usize; 4]> = local_minima(&scores, &dims, keep)
        .into_iter()
        .map(|flat| std::array::from_fn(|d| (flat / strides[d]) % dims[d]))
        .collect();
    minima
        .into_iter()
        .map(|i| {
            let (sse, r, c1, c2) = grid[flat_of(i)];
            let [ja, jb, ka, kb] = i;
            let mut p = base.to_vec();
            p[mix.theta_r] = r;
            p[mix.theta_s] = r + c1 + c2;
            p[mix.weight] = c1 / (c1 + c2);
            p[a1] = axes[0][ja];
            p[b1] = axes[1][jb];
            p[a2] = axes[2][ka];
            p[b2] = axes[3][kb];
            for (k, v) in p.iter_mut().enumerate() {
                *v = match fixed[k] {
                    Some(f) => f,
                    None => v.clamp(limits.lower[k], limits.upper[k]),
                };
            }
            (sse, p)
        })
        .collect()
}

/// Solve the 3x3 normal equations for (r, c1, c2), r fixed or held in its bounds.
fn solve_three(
    g: [[f64; 3]; 3],
    b: [f64; 3],
    r_fixed: Option<f64>,
    (lo, hi): (f64, f64),
) -> Option<[f64; 3]> {
    let two_given = |r: f64| -> Option<[f64; 3]> {
        let rhs = [b[1] - g[1][0] * r, b[2] - g[2][0] * r];
        let det = g[1][1] * g[2][2] - g[1][2] * g[2][1];
        if det.abs() <= 1e-14 * (g[1][1] * g[2][2]).abs().max(1e-300) {
            return None;
        }
        Some([
            r,
            (rhs[0] * g[2][2] - g[1][2] * rhs[1]) / det,
            (g[1][1] * rhs[1] - g[2][1] * rhs[0]) / det,
        ])
    };
    if let Some(r) = r_fixed {
        return two_given(r);
    }
    let det = g[0][0] * (g[1][1] * g[2][2] - g[1][2] * g[2][1])
        - g[0][1] * (g[1][0] * g[2][2] - g[1][2] * g[2][0])
        + g[0][2] * (g[1][0] * g[2][1] - g[1][1] * g[2][0]);
    let scale = g[0][0] * g[1][1] * g[2][2];
    if det.abs() > 1e-12 * scale.abs() {
        let col = |k: usize| -> [[f64; 3]; 3] {
            let mut m = g;
            for (row, &v) in m.iter_mut().zip(&b) {
                row[k] = v;
            }
            m
        };
        let d3 = |m: [[f64; 3]; 3]| {
            m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1])
                - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
                + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0])
        };
        let r = d3(col(0)) / det;
        if (lo..=hi).contains(&r) {
            return Some([r, d3(col(1)) / det, d3(col(2)) / det]);
        }
        return two_given(r.clamp(lo, hi));
    }
    None
}

/// Solve the 2x2 normal equations for (r, c), r fixed or held in its bounds.
fn solve_two(
    g: [[f64; 2]; 2],
    b: [f64; 2],
    r_fixed: Option<f64>,
    (lo, hi): (f64, f64),
) -> Option<[f64; 2]> {
    let c_given = |r: f64| (g[1][1] > 0.0).then(|| [r, (b[1] - g[1][0] * r) / g[1][1]]);
    if let Some(r) = r_fixed {
        return c_given(r);
    }
    let det = g[0][0] * g[1][1] - g[0][1] * g[1][0];
    if det.abs() <= 1e-14 * (g[0][0] * g[1][1]).abs() {
        return None;
    }
    let r = (b[0] * g[1][1] - g[0][1] * b[1]) / det;
    if (lo..=hi).contains(&r) {
        Some([r, (g[0][0] * b[1] - g[1][0] * b[0]) / det])
    } else {
        c_given(r.clamp(lo, hi))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn power_fit_recovers_a_power_law_and_respects_bounds() {
        let h = [10.0_f64, 30.0, 100.0, 300.0, 1000.0];
        let u: Vec<f64> = h.iter().map(|x| x.powf(-0.5)).collect();
        let y: Vec<f64> = u.iter().map(|ui| 0.05 + 0.8 * ui).collect();
        let w = [1.0; 5];
        let (sse, r, c) = power_fit(&u, &y, &w, Some(Err((0.0, 0.5))));
        assert!(sse < 1e-25 && (r - 0.05).abs() < 1e-12 && (c - 0.8).abs() < 1e-12);
        // theta_r forced below its free optimum: held on the bound.
        let (_, r, _) = power_fit(&u, &y, &w, Some(Err((0.0, 0.01))));
        assert!((r - 0.01).abs() < 1e-15, "{r}");
        // Rising data: c held at 0, r the mean.
        let rising: Vec<f64> = y.iter().rev().copied().collect();
        let (_, r, c) = power_fit(&u, &rising, &w, Some(Err((0.0, 0.5))));
        assert!(c.abs() < 1e-15, "{c}");
        assert!((r - rising.iter().sum::<f64>() / 5.0).abs() < 1e-12);
    }

    #[test]
    fn exponent_search_finds_the_exponent() {
        let h = [5.0_f64, 10.0, 20.0, 60.0, 100.0, 330.0, 1000.0, 15000.0];
        let ln_h: Vec<f64> = h.iter().map(|x| x.ln()).collect();
        let y: Vec<f64> = h.iter().map(|x| 0.04 + 0.5 * x.powf(-1.3)).collect();
        let ((sse, e, r, c), feasible) = exponent_search(
            &ln_h,
            &y,
            &[1.0; 8],
            Err((0.01, 15.0)),
            Some(Err((0.0, 0.5))),
            &|e, _, _| e > 3.0,
        );
        assert!(sse < 1e-20, "{sse}");
        assert!((e - 1.3).abs() < 1e-6 && (r - 0.04).abs() < 1e-8 && (c - 0.5).abs() < 1e-6);
        // The best grid point the predicate accepts: the lowest exponent above 3.
        let (_, e_feasible, _, _) = feasible.expect("a feasible grid point");
        assert!(e_feasible > 3.0 && e_feasible < 4.5, "{e_feasible}");
    }

    #[test]
    fn log_values_span_the_interval() {
        let v = log_values(0.01, 100.0, 5);
        assert_eq!(v.len(), 5);
        assert!(
            (v[0] - 0.01).abs() < 1e-15
                && (v[2] - 1.0).abs() < 1e-12
                && (v[4] - 100.0).abs() < 1e-10
        );
    }
}
