//! The bounded multi-start Levenberg-Marquardt driver over any [`CurveModel`].
//!
//! One fit: validate the readings, map the free parameters to unbounded ones, run the solver
//! from the model's best guess; a parameter that reaches a bound is held there and the rest
//! refitted (an active set, released again when the gradient points inside); more starts only
//! when the result looks doubtful; breakpoint parameters are searched interval by interval;
//! then a sanity check and the statistics.

use levenberg_marquardt::{LevenbergMarquardt, TerminationReason};
use nalgebra::{DMatrix, DVector};

use super::config::{Domain, FitOptions};
use super::error::FitError;
use super::lm2;
use super::problem::{Data, Problem};
use super::projection::{self, Kernel, Linear};
use super::report::{FitReport, ParamEstimate, ParamMatrix, ReadingFit, Termination};
use super::search::{self, Axis, Factored, Limits, Mixture, MixtureGrid, PowerLaw};
use super::stats::{self, Inversion};
use super::transform::{Saturation, Side, Transform};
use crate::model::curve::CurveModel;

/// R2 below which a first result is doubtful enough to try more starts.
const DOUBTFUL_R2: f64 = 0.9;
/// Relative SSE gain needed for a refit held on a bound (or released from it) to be kept.
const SSE_TIE: f64 = 1e-12;
/// Extra starts for a converged fit with a low R2.
const POOR_EXTRA_STARTS: usize = 2;
/// Relative slack on a breakpoint interval's lower bound before it is skipped (the bound comes
/// from a one-dimensional search that is itself refined only to about this precision).
const INTERVAL_BOUND_SLACK: f64 = 1e-7;
/// The solver's first-step factor from a screened start or a rough solution: they are
/// already in their basin, and a long first step can leave it.
const SCREENED_STEP_BOUND: f64 = 1.0;
/// Share of its interval (or of a decade, for a suction scale) within which a parameter is
/// polished once more held on its bound.
const NEAR_BOUND_PROBE: f64 = 0.1;
/// Tolerance and patience of the rough runs from screened starts.
const ROUGH_TOLERANCE: f64 = 1e-4;
const ROUGH_PATIENCE: usize = 5;
/// At most this many runs finish a flat valley from the best point ([`finish_valley`]).
const VALLEY_RUNS: usize = 6;
/// A run that lowers the sum of squares by less than this share ends the valley runs.
const VALLEY_GAIN: f64 = 1e-9;
/// Rough results whose SSEs agree this closely are taken to be one minimum (polished once).
const SAME_ROUGH_MINIMUM: f64 = 1e-3;
/// How many solutions' SSEs a fit keeps for the note on several minima (the lowest ones).
const FOUND_KEPT: usize = 32;
/// A minimum whose SSE is below this many times the best is a rival worth a note.
const RIVAL_MINIMUM: f64 = 2.0;
/// Relative SSE difference above which two solutions count as different minima.
const DISTINCT_MINIMUM: f64 = 1e-6;

/// The readings of one fit: x (suction, cm), y (water content) and optional weights.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Readings<'a> {
    /// x values (suctions in cm for retention models).
    pub x: &'a [f64],
    /// y values (volumetric water content for retention models).
    pub y: &'a [f64],
    /// Optional weight per reading (each residual is multiplied by sqrt(w)).
    pub weights: Option<&'a [f64]>,
}

impl<'a> Readings<'a> {
    /// Unweighted readings.
    pub fn new(x: &'a [f64], y: &'a [f64]) -> Self {
        Self {
            x,
            y,
            weights: None,
        }
    }

    /// The same readings with a weight for each.
    #[must_use]
    pub fn with_weights(self, weights: &'a [f64]) -> Self {
        Self {
            weights: Some(weights),
            ..self
        }
    }
}

/// Check the readings before any fitting.
fn validate(readings: &Readings<'_>, domain: Domain) -> Result<(), FitError> {
    let Readings { x, y, weights } = *readings;
    if x.len() != y.len() || weights.is_some_and(|w| w.len() != x.len()) {
        return Err(FitError::LengthMismatch {
            x: x.len(),
            y: y.len(),
            weights: weights.map(<[f64]>::len).filter(|&w| w != x.len()),
        });
    }
    for (i, (&xi, &yi)) in x.iter().zip(y).enumerate() {
        if !xi.is_finite() {
            return Err(FitError::NonFinite {
                what: "suction",
                index: i + 1,
                value: xi,
            });
        }
        if !yi.is_finite() {
            return Err(FitError::NonFinite {
                what: "theta",
                index: i + 1,
                value: yi,
            });
        }
        if domain == Domain::Suction && xi < 0.0 {
            return Err(FitError::NegativeSuction {
                index: i + 1,
                value: xi,
            });
        }
        if domain == Domain::Suction && !(0.0..=1.0).contains(&yi) {
            return Err(FitError::WaterContentOutOfRange {
                index: i + 1,
                value: yi,
            });
        }
    }
    if let Some(w) = weights {
        for (i, &wi) in w.iter().enumerate() {
            if !wi.is_finite() {
                return Err(FitError::NonFinite {
                    what: "weight",
                    index: i + 1,
                    value: wi,
                });
            }
            if wi <= 0.0 {
                return Err(FitError::BadWeight {
                    index: i + 1,
                    value: wi,
                });
            }
        }
    }
    let spread = |v: &[f64]| {
        let lo = v.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        (lo, hi - lo)
    };
    if x.len() > 1 {
        let (x0, range) = spread(x);
        if range <= 0.0 {
            return Err(FitError::SuctionsAllEqual { value: x0 });
        }
        let (y0, range) = spread(y);
        if range <= 0.0 {
            return Err(FitError::FlatData { value: y0 });
        }
    }
    Ok(())
}

/// Bounds and fixed values of every parameter after the options are applied.
#[derive(Debug, Clone)]
struct Setup {
    lower: Vec<f64>,
    upper: Vec<f64>,
    fixed: Vec<Option<f64>>,
    breakpoint: Option<usize>,
}

fn unknown(model: &dyn CurveModel, id: &str, name: &str) -> FitError {
    FitError::UnknownParameter {
        model: id.to_string(),
        name: name.to_string(),
        known: model
            .params()
            .iter()
            .map(|p| p.name)
            .collect::<Vec<_>>()
            .join(", "),
    }
}

fn setup(model: &dyn CurveModel, id: &str, options: &FitOptions) -> Result<Setup, FitError> {
    let specs = model.params();
    let index = |name: &str| specs.iter().position(|s| s.name == name);
    let mut lower: Vec<f64> = specs.iter().map(|s| s.lower).collect();
    let mut upper: Vec<f64> = specs.iter().map(|s| s.upper).collect();
    for (name, lo, hi) in &options.bounds {
        match index(name) {
            Some(k) => {
                if lo.is_nan() || hi.is_nan() || lo >= hi {
                    return Err(FitError::BadBounds {
                        name: name.clone(),
                        lower: *lo,
                        upper: *hi,
                    });
                }
                lower[k] = *lo;
                upper[k] = *hi;
            }
            None if options.lenient_names => {}
            None => return Err(unknown(model, id, name)),
        }
    }
    let mut fixed = vec![None; specs.len()];
    for (name, value) in &options.fixed {
        match index(name) {
            Some(k) => {
                if !value.is_finite() || *value < lower[k] || *value > upper[k] {
                    return Err(FitError::FixedOutsideBounds {
                        name: name.clone(),
                        value: *value,
                        lower: lower[k],
                        upper: upper[k],
                    });
                }
                fixed[k] = Some(*value);
            }
            None if options.lenient_names => {}
            None => return Err(unknown(model, id, name)),
        }
    }
    let breakpoint = match &options.breakpoint {
        Some(name) => match index(name) {
            Some(k) => Some(k),
            None if options.lenient_names => None,
            None => return Err(unknown(model, id, name)),
        },
        None => None,
    };
    Ok(Setup {
        lower,
        upper,
        fixed,
        breakpoint,
    })
}

/// The shared context of every solver run of one fit.
struct Context<'a> {
    model: &'a dyn CurveModel,
    data: Data<'a>,
    options: &'a FitOptions,
    /// The linear parameters (theta_r, theta_s) solved inside each run, if the model has them.
    linear: Option<(Option<usize>, usize)>,
    kernel: Option<Kernel>,
    /// The power law beyond a breakpoint, for the interval search.
    power_law: Option<PowerLaw>,
    evaluations: usize,
    runs: usize,
    /// SSE of every solution reached from a start or in a breakpoint interval (for the note
    /// on several minima); the first [`FOUND_KEPT`] are kept.
    found: [f64; FOUND_KEPT],
    found_count: usize,
    /// Rough runs (screened starts): a loose tolerance and a small budget.
    loose: bool,
    /// Polishing a rough solution: starts are taken as they are, even next to a bound.
    resume: bool,
    /// The two-parameter solver's settings for the current run (`None`: generic solver).
    fast: Option<lm2::Settings>,
}

/// A finished solution: full physical parameters and how it was reached.
#[derive(Debug, Clone)]
struct Candidate {
    p: Vec<f64>,
    sse: f64,
    termination: Termination,
    pinned: Vec<Option<Side>>,
}

/// One solver run's outcome.
struct Run {
    p: Vec<f64>,
    sse: f64,
    termination: Termination,
    saturated: Option<(usize, Saturation)>,
}

fn termination_of(reason: &TerminationReason) -> Termination {
    match reason {
        TerminationReason::Converged { .. } => Termination::Converged,
        TerminationReason::Orthogonal => Termination::Orthogonal,
        TerminationReason::ResidualsZero => Termination::ResidualsZero,
        TerminationReason::NoImprovementPossible(_) => Termination::PrecisionLimit,
        TerminationReason::LostPatience => Termination::MaxEvaluations,
        _ => Termination::Numerical,
    }
}

impl Context<'_> {
    /// The solver's start for a parameter value (a guess kept off the bounds, a resumed
    /// solution not).
    fn inverse(&self, t: Transform, p: f64) -> f64 {
        if self.resume {
            t.inverse_resume(p)
        } else {
            t.inverse_start(p)
        }
    }

    /// Remember a finished solution for the note on several minima.
    fn record(&mut self, c: &Candidate) {
        if !self.loose && c.termination.is_optimum() && c.sse.is_finite() {
            if let Some(slot) = self.found.get_mut(self.found_count) {
                *slot = c.sse;
                self.found_count += 1;
            } else if let Some(worst) = self.found.iter_mut().max_by(|a, b| a.total_cmp(b))
                && c.sse < *worst
            {
                *worst = c.sse;
            }
        }
    }

    /// Weighted SSE at full parameters p (infinite when the model is not finite there).
    fn sse(&self, p: &[f64]) -> f64 {
        let mut sse = 0.0;
        for (i, (&x, &y)) in self.data.x.iter().zip(self.data.y).enumerate() {
            let sw = self.data.sqrt_w.map_or(1.0, |w| w[i]);
            let r = sw * (self.model.value(x, p) - y);
            sse += r * r;
        }
        if sse.is_finite() { sse } else { f64::INFINITY }
    }

    /// d SSE / d p_k at p (for the active-set release test).
    fn sse_gradient(&self, p: &[f64], k: usize) -> f64 {
        let mut grad = vec![0.0; p.len()];
        let mut g = 0.0;
        for (i, (&x, &y)) in self.data.x.iter().zip(self.data.y).enumerate() {
            let w = self.data.sqrt_w.map_or(1.0, |w| w[i] * w[i]);
            let f = self.model.value_and_gradient(x, p, &mut grad);
            g += 2.0 * w * (f - y) * grad[k];
        }
        g
    }

    /// One Levenberg-Marquardt run from `start`, holding `hold` fixed, within `lo`..`hi`.
    fn run(
        &mut self,
        start: &[f64],
        hold: &[Option<f64>],
        lo: &[f64],
        hi: &[f64],
        watch: bool,
    ) -> Run {
        let mut full: Vec<f64> = start.to_vec();
        let mut free = Vec::with_capacity(full.len());
        let mut transforms = Vec::with_capacity(full.len());
        for (k, h) in hold.iter().enumerate() {
            if let Some(v) = h {
                full[k] = *v;
            } else {
                free.push(k);
                transforms.push(Transform::for_bounds(lo[k], hi[k]));
            }
        }
        self.runs += 1;
        if free.is_empty() {
            let sse = self.sse(&full);
            self.evaluations += 1;
            return Run {
                p: full,
                sse,
                termination: Termination::Converged,
                saturated: None,
            };
        }
        let (tol, patience) = if self.loose {
            (ROUGH_TOLERANCE, ROUGH_PATIENCE.min(self.options.patience))
        } else {
            (self.options.tolerance, self.options.patience)
        };
        let stepbound = if self.loose || self.resume {
            SCREENED_STEP_BOUND.min(self.options.step_bound)
        } else {
            self.options.step_bound
        };
        let lm = LevenbergMarquardt::new()
            .with_ftol(tol)
            .with_xtol(tol)
            .with_gtol(tol)
            .with_patience(patience)
            .with_stepbound(stepbound);
        self.fast = (!self.options.reference_solver).then_some(lm2::Settings {
            ftol: tol,
            xtol: tol,
            gtol: tol,
            stepbound,
            patience,
        });
        if let Some(run) = self.run_projected(&lm, &full, &free, &transforms, hold, lo, hi, watch) {
            return run;
        }
        let q0 = DVector::from_iterator(
            free.len(),
            free.iter()
                .zip(&transforms)
                .map(|(&k, t)| self.inverse(*t, full[k].clamp(lo[k], hi[k]))),
        );
        let problem = Problem::new(self.model, self.data, &free, &transforms, full, q0, watch);
        let (problem, report) = lm.minimize(problem);
        self.evaluations += report.number_of_evaluations;
        let p = problem.physical(problem.q());
        let saturated = problem.saturated().map(|(j, s)| (free[j], s));
        let termination = match (&report.termination, saturated) {
            (_, Some((_, Saturation::Runaway))) => Termination::Runaway,
            (_, Some(_)) => Termination::Converged,
            (reason, None) => termination_of(reason),
        };
        // The solver's objective is half the SSE at the point it holds (the last accepted one);
        // recompute only when that point was a NaN stand-in or the solver stopped at once.
        let half = report.objective_function;
        let sse = if half.is_finite() && half < 1e290 && report.number_of_evaluations > 1 {
            2.0 * half
        } else {
            self.sse(&p)
        };
        Run {
            p,
            sse,
            termination,
            saturated,
        }
    }

    /// A run with the linear parameters solved inside (see [`projection`]), or `None` when the
    /// model has none free, no shape parameter is free, or the projection breaks down (the
    /// caller then runs the full problem).
    #[allow(clippy::too_many_arguments)]
    fn run_projected(
        &mut self,
        lm: &LevenbergMarquardt<f64>,
        full: &[f64],
        free: &[usize],
        transforms: &[Transform],
        hold: &[Option<f64>],
        lo: &[f64],
        hi: &[f64],
        watch: bool,
    ) -> Option<Run> {
        let (r, s) = self.linear?;
        let linear = Linear {
            r,
            s,
            r_free: r.is_some_and(|r| hold[r].is_none()),
            s_free: hold[s].is_none(),
            r_bounds: r.map_or((0.0, 0.0), |r| (lo[r], hi[r])),
            s_bounds: (lo[s], hi[s]),
        };
        if !linear.r_free && !linear.s_free {
            return None;
        }
        let is_linear = |k: usize| k == s || Some(k) == r;
        let mut shape = Vec::with_capacity(free.len());
        let mut shape_transforms = Vec::with_capacity(free.len());
        for (&k, &t) in free.iter().zip(transforms) {
            if !is_linear(k) {
                shape.push(k);
                shape_transforms.push(t);
            }
        }
        if shape.is_empty() {
            return None;
        }
        let q0: Vec<f64> = shape
            .iter()
            .zip(&shape_transforms)
            .map(|(&k, t)| self.inverse(*t, full[k].clamp(lo[k], hi[k])))
            .collect();
        let outcome = projection::minimize(
            projection::Spec {
                model: self.model,
                data: self.data,
                shape: &shape,
                transforms: &shape_transforms,
                linear,
                kernel: self.kernel,
                full: full.to_vec(),
                q0: &q0,
                watch,
                fast: self.fast,
            },
            lm,
        );
        let (p, sse) = outcome.solution?;
        if !sse.is_finite() {
            return None;
        }
        self.evaluations += outcome.report.number_of_evaluations;
        let saturated = outcome.saturated.map(|(j, s)| (shape[j], s));
        let termination = match (&outcome.report.termination, saturated) {
            (_, Some((_, Saturation::Runaway))) => Termination::Runaway,
            (_, Some(_)) => Termination::Converged,
            (reason, None) => termination_of(reason),
        };
        Some(Run {
            p,
            sse,
            termination,
            saturated,
        })
    }

    /// Solve from `start` with an active set for parameters that reach a finite bound.
    fn solve(&mut self, start: &[f64], fixed: &[Option<f64>], lo: &[f64], hi: &[f64]) -> Candidate {
        const FREE: [Option<Side>; 16] = [None; 16];
        if start.len() <= FREE.len() {
            self.solve_pinned(start, &FREE[..start.len()], fixed, lo, hi)
        } else {
            self.solve_pinned(start, &vec![None; start.len()], fixed, lo, hi)
        }
    }

    /// [`Self::solve`] with some parameters starting held on a bound (as an earlier run left
    /// them), so that a start on a bound is not moved inside it first.
    fn solve_pinned(
        &mut self,
        start: &[f64],
        pinned_at_start: &[Option<Side>],
        fixed: &[Option<f64>],
        lo: &[f64],
        hi: &[f64],
    ) -> Candidate {
        let n = start.len();
        let mut hold = fixed.to_vec();
        let mut pinned: Vec<Option<Side>> = vec![None; n];
        for (k, side) in pinned_at_start.iter().enumerate() {
            if let Some(side) = side
                && hold[k].is_none()
            {
                hold[k] = Some(if *side == Side::Lower { lo[k] } else { hi[k] });
                pinned[k] = Some(*side);
            }
        }
        let mut run = self.run(start, &hold, lo, hi, true);
        for _ in 0..n {
            match run.saturated {
                Some((k, Saturation::Pinned(side))) => {
                    let bound = if side == Side::Lower { lo[k] } else { hi[k] };
                    let mut trial_hold = hold.clone();
                    trial_hold[k] = Some(bound);
                    let trial = self.run(&run.p, &trial_hold, lo, hi, true);
                    if trial.sse <= run.sse * (1.0 + SSE_TIE) {
                        hold = trial_hold;
                        pinned[k] = Some(side);
                        run = trial;
                    } else {
                        // Held on the bound the fit is worse than where the parameter was
                        // when it came near it: the optimum is inside, finish the run there.
                        run = self.run(&run.p, &hold, lo, hi, false);
                        break;
                    }
                }
                _ => break,
            }
        }
        let mut best = Candidate {
            p: run.p,
            sse: run.sse,
            termination: run.termination,
            pinned,
        };
        // Release held parameters whose gradient points into the interval (KKT test), and
        // repeat while the released fit is better and leaves others on the wrong side.
        for _ in 0..n {
            let wrong_side: Vec<usize> = (0..n)
                .filter(|&k| match best.pinned[k] {
                    Some(Side::Lower) => self.sse_gradient(&best.p, k) < 0.0,
                    Some(Side::Upper) => self.sse_gradient(&best.p, k) > 0.0,
                    None => false,
                })
                .collect();
            if wrong_side.is_empty() {
                break;
            }
            let mut hold = fixed.to_vec();
            let mut from = best.p.clone();
            for (k, h) in hold.iter_mut().enumerate() {
                if best.pinned[k].is_some() && !wrong_side.contains(&k) {
                    *h = Some(best.p[k]);
                }
            }
            for &k in &wrong_side {
                let inside = 1e-3 * (hi[k] - lo[k]).min(1.0);
                from[k] = match best.pinned[k] {
                    Some(Side::Lower) => lo[k] + inside,
                    _ => hi[k] - inside,
                };
            }
            let released = self.run(&from, &hold, lo, hi, false);
            if released.sse >= best.sse * (1.0 - SSE_TIE) {
                break;
            }
            let mut pinned = best.pinned.clone();
            for &k in &wrong_side {
                pinned[k] = None;
            }
            best = Candidate {
                p: released.p,
                sse: released.sse,
                termination: released.termination,
                pinned,
            };
        }
        // Linear parameters the inner least squares left on a bound count as held there.
        if let Some((r, s)) = self.linear {
            for k in r.into_iter().chain([s]) {
                if fixed[k].is_none() && best.pinned[k].is_none() {
                    if best.p[k] <= lo[k] {
                        best.pinned[k] = Some(Side::Lower);
                    } else if best.p[k] >= hi[k] {
                        best.pinned[k] = Some(Side::Upper);
                    }
                }
            }
        }
        best
    }
}

/// Keep the better of two candidates: the lower SSE; within a tie, an optimum.
fn better(a: Candidate, b: Candidate) -> Candidate {
    let tie = (a.sse - b.sse).abs() <= SSE_TIE * a.sse.abs().max(b.sse.abs());
    let prefer_b = if tie {
        b.termination.is_optimum() && !a.termination.is_optimum()
    } else {
        b.sse < a.sse || a.sse.is_nan()
    };
    if prefer_b { b } else { a }
}

/// Starting points beyond the model's own: the best so far, shifted in the solver's space.
fn perturbed_start(
    base: &[f64],
    fixed: &[Option<f64>],
    lo: &[f64],
    hi: &[f64],
    index: usize,
) -> Vec<f64> {
    // A fixed sign pattern per start (bits of a small odd multiplier), magnitude 1.5 in q.
    let pattern = (index as u64 + 1).wrapping_mul(0x9E37_79B9_7F4A_7C15) >> 7;
    let mut p = base.to_vec();
    for (k, v) in p.iter_mut().enumerate() {
        if fixed[k].is_some() {
            continue;
        }
        let sign = if (pattern >> k) & 1 == 1 { 1.0 } else { -1.0 };
        let shift = sign * (1.0 + 0.25 * ((pattern >> (k + 16)) & 3) as f64);
        let t = Transform::for_bounds(lo[k], hi[k]);
        *v = match t {
            Transform::Identity => *v + shift * 0.5 * (v.abs() + 1.0),
            _ => t.forward(t.inverse_start(*v) + shift).0,
        };
    }
    p
}

/// Fit a curve model to readings.
///
/// `id` names the model in the report. The first of the model's starting guesses is tried
/// first; the others, and perturbed starts, only when the result looks doubtful (the solver
/// did not stop at an optimum, R2 < 0.9, or a parameter ended on a bound). The best SSE wins.
///
/// # Errors
/// [`FitError`] for input that cannot be fitted: mismatched lengths, NaN or infinity, a negative
/// suction, flat data, equal suctions, too few readings, unknown parameter names, bad bounds.
pub fn fit_curve(
    model: &dyn CurveModel,
    id: &str,
    readings: &Readings<'_>,
    options: &FitOptions,
) -> Result<FitReport, FitError> {
    fit_curve_with(model, id, readings, options, &Hooks::default())
}

/// A cheap starting point from the readings (x, y), if they allow one.
pub(crate) type FirstGuess = fn(&[f64], &[f64]) -> Option<Vec<f64>>;

/// Model-specific knowledge a caller may lend the driver.
#[derive(Debug, Clone, Copy, Default)]
pub(crate) struct Hooks {
    /// Map equivalent parameter sets onto one canonical form; applied to the kept solution
    /// before the statistics.
    pub canonicalize: Option<Canonical>,
    /// Positions of parameters that enter the curve as f = a (1 - g) + b g (theta_r, theta_s)
    /// or f = b g (theta_s alone): each run solves them by linear least squares inside (see
    /// [`projection`]) and moves only the others.
    pub linear: Option<(Option<usize>, usize)>,
    /// A cheap first start, tried before the model's own guesses are computed (those are
    /// then needed only for more starts).
    pub first_guess: Option<FirstGuess>,
    /// A shape function the projected solver may call directly (same numbers, no dynamic call).
    pub kernel: Option<Kernel>,
    /// The power law beyond the breakpoint (Brooks-Corey, Campbell): intervals are searched in
    /// the order of a lower bound on their best fit, and those that cannot win are skipped.
    pub power_law: Option<PowerLaw>,
    /// A grid over the shape parameters screened before the solver runs (see
    /// [`search::grid_starts`]); its best local minima are starts.
    pub screen: Option<Screen>,
}

/// Two orders of a model's parts that describe the same curve (Durner's modes), and how to
/// put a solution into the usual one.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Canonical {
    /// Whether a solution is out of the usual order.
    pub out_of_order: fn(&[f64]) -> bool,
    /// Parameters that trade places.
    pub swap: &'static [(usize, usize)],
    /// Parameters p that become lower + upper - p (a weight w becoming 1 - w with symmetric
    /// bounds).
    pub complement: &'static [usize],
    /// What the fit message says when a fixed parameter keeps the parts out of order.
    pub note: &'static str,
}

/// How a model's starts are screened before the solver runs.
#[derive(Debug, Clone, Copy)]
pub(crate) enum Screen {
    /// A grid over the shape parameters (axes from the readings); its `keep` best local
    /// minima become starts.
    Grid {
        axes: fn(&[f64], &[f64]) -> Vec<Axis>,
        keep: usize,
    },
    /// Only when the first fit leaves the curve's shape unresolved (a poor fit, or most of its
    /// fall between two readings): starts derived from that fit (a steeper and a flatter curve
    /// through the same middle), for a model whose first fit is usually right and must stay
    /// cheap.
    Probes { probes: fn(&[f64]) -> Vec<Vec<f64>> },
    /// Pairs of modes of a two-mode mixture (see [`search::mixture_starts`]): `mode(h, a, b)`
    /// is one mode's curve, `grids` the values of a and b from the readings.
    Mixture {
        mix: Mixture,
        mode: fn(f64, f64, f64) -> f64,
        grids: fn(&[f64], &[f64]) -> Vec<MixtureGrid>,
        keep: usize,
    },
    /// A correction times a power of a core (see [`search::factored_starts`]), with the grid
    /// values of the core's two parameters, the power and the correction's parameter.
    Factored {
        model: Factored,
        values: fn(&[f64], &[f64]) -> [Vec<f64>; 4],
        keep: usize,
    },
}

impl Screen {
    /// How many of the rough solutions from the screened starts are solved fully.
    fn polish(self) -> usize {
        match self {
            Screen::Probes { .. } => 1,
            Screen::Grid { .. } | Screen::Mixture { .. } | Screen::Factored { .. } => 3,
        }
    }

    /// Whether the screen runs only after a first fit that looks unresolved.
    fn only_when_doubtful(self) -> bool {
        matches!(self, Screen::Probes { .. })
    }
}

/// A first fit (of a model probed only when doubtful) is probed further when more than
/// [`UNRESOLVED_DROP`] of the readings' fall lies inside one gap between consecutive readings
/// a factor [`UNRESOLVED_GAP`] or more apart in suction; or when its R2 is below
/// [`UNRESOLVED_R2`] and a gap that wide holds more than [`POOR_FIT_DROP`] of the fitted
/// curve's fall over the readings.
const UNRESOLVED_DROP: f64 = 0.7;
const UNRESOLVED_GAP: f64 = 10.0;
const UNRESOLVED_R2: f64 = 0.95;
const POOR_FIT_DROP: f64 = 0.3;

/// Whether a first fit leaves the curve's shape open (see [`UNRESOLVED_DROP`]): there another
/// steepness fits the readings about as well, and the sum of squares often has a second
/// minimum. Runs that did not stop at an optimum count as open.
fn unresolved(
    ctx: &Context<'_>,
    c: &Candidate,
    sst: f64,
    wide: &[(usize, usize)],
    fall: Option<(f64, f64, f64)>,
) -> bool {
    if !c.termination.is_optimum() || !c.sse.is_finite() {
        return true;
    }
    if wide.is_empty() {
        return false;
    }
    if fall.is_some() {
        return true;
    }
    let poor = sst > 0.0 && 1.0 - c.sse / sst < UNRESOLVED_R2;
    if !poor {
        return false;
    }
    let x = ctx.data.x;
    let f = |h: f64| ctx.model.value(h, &c.p);
    let fitted_span = spread(&mut x.iter().map(|&h| f(h)));
    fitted_span > 0.0
        && wide
            .iter()
            .any(|&(i, j)| f(x[i]) - f(x[j]) > POOR_FIT_DROP * fitted_span)
}

/// The largest minus the smallest value.
fn spread(v: &mut dyn Iterator<Item = f64>) -> f64 {
    let (lo, hi) = v.fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), t| {
        (lo.min(t), hi.max(t))
    });
    hi - lo
}

/// The gaps between consecutive readings a factor [`UNRESOLVED_GAP`] or more apart in suction,
/// as index pairs (wetter first). Most readings have none.
fn wide_gaps(x: &[f64]) -> Vec<(usize, usize)> {
    let mut wide = Vec::new();
    // Readings in suction order (the usual case): consecutive pairs, the first of equal
    // suctions on the wetter side and the first on the drier side.
    if x.is_sorted() {
        let mut i = 0;
        while i < x.len() {
            let mut j = i + 1;
            while j < x.len() && x[j] <= x[i] {
                j += 1;
            }
            if j < x.len() && x[i] > 0.0 && x[j] >= UNRESOLVED_GAP * x[i] {
                wide.push((i, j));
            }
            i = j;
        }
        return wide;
    }
    for (i, &a) in x.iter().enumerate().filter(|(_, a)| **a > 0.0) {
        // The next larger suction after a (its first reading).
        let next = x
            .iter()
            .enumerate()
            .filter(|(_, b)| **b > a)
            .min_by(|p, q| p.1.total_cmp(q.1));
        if let Some((j, &b)) = next
            && b >= UNRESOLVED_GAP * a
        {
            wide.push((i, j));
        }
    }
    wide
}

/// The wide gap holding more than [`UNRESOLVED_DROP`] of the readings' fall, as (wetter
/// suction, drier suction, share of the fall).
fn fall_in_one_gap(data: &Data<'_>, wide: &[(usize, usize)]) -> Option<(f64, f64, f64)> {
    let (x, y) = (data.x, data.y);
    let span = spread(&mut y.iter().copied());
    if span.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
        return None;
    }
    wide.iter()
        .map(|&(i, j)| (x[i], x[j], (y[i] - y[j]) / span))
        .filter(|g| g.2 > UNRESOLVED_DROP)
        .max_by(|a, b| a.2.total_cmp(&b.2))
}

/// The note for readings whose fall lies mostly in one gap: the steepness there is open.
fn gap_note((a, b, share): (f64, f64, f64)) -> String {
    format!(
        "{:.0} % of the readings' fall lies between {} and {} cm with no reading in between: curves of other steepness fit them nearly as well",
        share * 100.0,
        crate::model::number::significant(a, 4).unwrap_or_default(),
        crate::model::number::significant(b, 4).unwrap_or_default()
    )
}

/// Whether two starts agree to 1e-9 in every parameter.
fn same_start(a: &[f64], b: &[f64]) -> bool {
    a.iter()
        .zip(b)
        .all(|(x, y)| (x - y).abs() <= 1e-9 * x.abs().max(y.abs()).max(1.0))
}

/// [`fit_curve`] with model-specific [`Hooks`].
pub(crate) fn fit_curve_with(
    model: &dyn CurveModel,
    id: &str,
    readings: &Readings<'_>,
    options: &FitOptions,
    hooks: &Hooks,
) -> Result<FitReport, FitError> {
    validate(readings, options.domain)?;
    let setup = setup(model, id, options)?;
    let free = setup.fixed.iter().filter(|f| f.is_none()).count();
    if free == 0 {
        return Err(FitError::NothingToFit {
            model: id.to_string(),
        });
    }
    let n = readings.x.len();
    if n <= free {
        return Err(FitError::TooFewPoints { points: n, free });
    }
    let sqrt_w: Option<Vec<f64>> = readings
        .weights
        .map(|w| w.iter().map(|v| v.sqrt()).collect());
    let data = Data {
        x: readings.x,
        y: readings.y,
        sqrt_w: sqrt_w.as_deref(),
    };
    let mut ctx = Context {
        model,
        data,
        options,
        linear: hooks.linear,
        kernel: hooks.kernel,
        power_law: hooks.power_law,
        evaluations: 0,
        runs: 0,
        found: [f64::INFINITY; FOUND_KEPT],
        found_count: 0,
        loose: false,
        resume: false,
        fast: None,
    };
    let sst = total_sum_of_squares(&data);
    let np = setup.lower.len();
    // The model's guesses, computed only when needed: after a cheap first guess, only for more
    // starts.
    let all_guesses = || {
        let mut guesses = model.initial_guesses(readings.x, readings.y);
        guesses.retain(|g| g.len() == np);
        if guesses.is_empty() {
            guesses.push(default_start(&setup));
        }
        guesses
    };
    let first = hooks
        .first_guess
        .and_then(|f| f(readings.x, readings.y))
        .filter(|g| g.len() == np);
    let (first, mut later) = if let Some(g) = first {
        (g, None)
    } else {
        let mut guesses = all_guesses();
        let first = guesses.remove(0);
        (first, Some(guesses))
    };
    let mut best = solve_start(&mut ctx, &setup, &first);
    let wide = wide_gaps(readings.x);
    let fall = if wide.is_empty() {
        None
    } else {
        fall_in_one_gap(&data, &wide)
    };
    let screen = hooks
        .screen
        .filter(|screen| !screen.only_when_doubtful() || unresolved(&ctx, &best, sst, &wide, fall));
    if let (Some(screen), Some((r, s))) = (screen, hooks.linear) {
        let limits = Limits {
            lower: &setup.lower,
            upper: &setup.upper,
            fixed: &setup.fixed,
        };
        let linear = Linear {
            r,
            s,
            r_free: r.is_some_and(|r| setup.fixed[r].is_none()),
            s_free: setup.fixed[s].is_none(),
            r_bounds: r.map_or((0.0, 0.0), |r| (setup.lower[r], setup.upper[r])),
            s_bounds: (setup.lower[s], setup.upper[s]),
        };
        let starts = match screen {
            Screen::Probes { probes } => {
                probes(&best.p).into_iter().map(|p| (f64::NAN, p)).collect()
            }
            Screen::Grid { axes, keep } => {
                let axes = axes(readings.x, readings.y);
                search::grid_starts(model, &data, linear, limits, &axes, &first, keep)
            }
            Screen::Mixture {
                mix,
                mode,
                grids,
                keep,
            } => {
                let grids = grids(readings.x, readings.y);
                search::mixture_starts(&mode, mix, &data, limits, &grids, &first, keep)
            }
            Screen::Factored {
                model: factored,
                values,
                keep,
            } => {
                let v = values(readings.x, readings.y);
                search::factored_starts(
                    factored,
                    &data,
                    limits,
                    [&v[0], &v[1], &v[2], &v[3]],
                    &first,
                    keep,
                )
            }
        };
        // A rough solve from every start, then a full one from the best few that ended in
        // different places.
        ctx.loose = true;
        ctx.resume = true;
        let mut rough: Vec<Candidate> = starts
            .iter()
            .map(|(_, start)| solve_start(&mut ctx, &setup, start))
            .filter(|c| c.sse.is_finite())
            .collect();
        ctx.loose = false;
        ctx.resume = false;
        rough.sort_by(|a, b| a.sse.total_cmp(&b.sse));
        let mut polished: Vec<f64> = Vec::new();
        for c in rough {
            if polished.len() >= screen.polish() {
                break;
            }
            if polished
                .iter()
                .any(|&v| (v - c.sse).abs() <= SAME_ROUGH_MINIMUM * v.max(c.sse))
            {
                continue;
            }
            // A probe that came back to the first fit's minimum (or above it) needs no polish.
            if screen.only_when_doubtful() && c.sse >= best.sse * (1.0 - DISTINCT_MINIMUM) {
                break;
            }
            polished.push(c.sse);
            ctx.resume = true;
            let full = ctx.solve_pinned(&c.p, &c.pinned, &setup.fixed, &setup.lower, &setup.upper);
            ctx.resume = false;
            ctx.record(&full);
            best = better(best, full);
        }
        // In the flat valleys of a steep part (a mode or a power on its bound) a run can stop
        // while the sum of squares still falls slowly: one more run from the best, with a
        // fresh trust region, finishes it.
        if !screen.only_when_doubtful() && best.sse.is_finite() {
            best = finish_valley(&mut ctx, &setup, best);
            // A steep part's steepness (or a scale beyond the readings) often gains a little
            // all the way to its bound with almost no slope on the way: try each free
            // parameter on its bounds.
            for k in 0..best.p.len() {
                if setup.fixed[k].is_some() || best.pinned[k].is_some() {
                    continue;
                }
                for (side, bound) in [(Side::Lower, setup.lower[k]), (Side::Upper, setup.upper[k])]
                {
                    if !bound.is_finite() {
                        continue;
                    }
                    let mut p = best.p.clone();
                    p[k] = bound;
                    // Near its bound (the last tenth of a linear interval, of a decade for a
                    // suction scale) the rest must move with it before the gain shows.
                    let near = if setup.lower[k] > 0.0 && setup.upper[k] / setup.lower[k] > 100.0 {
                        (best.p[k] / bound).ln().abs() < NEAR_BOUND_PROBE * std::f64::consts::LN_10
                    } else {
                        (best.p[k] - bound).abs()
                            < NEAR_BOUND_PROBE * (setup.upper[k] - setup.lower[k])
                    };
                    if !near && ctx.sse(&p) >= best.sse {
                        continue;
                    }
                    let mut pinned = best.pinned.clone();
                    pinned[k] = Some(side);
                    ctx.resume = true;
                    let there =
                        ctx.solve_pinned(&p, &pinned, &setup.fixed, &setup.lower, &setup.upper);
                    ctx.resume = false;
                    if there.sse < best.sse {
                        best = there;
                    }
                }
            }
        }
    }
    let failed = |c: &Candidate| !c.termination.is_optimum() || !c.sse.is_finite();
    let poor = |c: &Candidate| sst > 0.0 && 1.0 - c.sse / sst < DOUBTFUL_R2;
    // A failed run gets the full budget of extra starts; a poor fit (low R2, often just flat
    // noisy data) a second and third opinion. A fit on a bound has had its active-set refit
    // already (in the benchmark a further start there changed 1 sample in 3000 and cost 20 %).
    let budget = if failed(&best) {
        options.max_extra_starts
    } else if poor(&best) {
        options.max_extra_starts.min(POOR_EXTRA_STARTS)
    } else {
        0
    };
    let mut perturbation = 0;
    let mut continued = false;
    let mut next_guess = 0;
    for _ in 0..budget {
        // A run that stopped short (evaluation budget) first goes on from where it stopped.
        let start = if !continued && failed(&best) && best.sse.is_finite() {
            continued = true;
            best.p.clone()
        } else {
            let later = later.get_or_insert_with(|| {
                let mut guesses = all_guesses();
                guesses.retain(|g| !same_start(g, &first));
                guesses
            });
            next_guess += 1;
            if let Some(g) = later.get(next_guess - 1) {
                g.clone()
            } else {
                perturbation += 1;
                perturbed_start(
                    &best.p,
                    &setup.fixed,
                    &setup.lower,
                    &setup.upper,
                    perturbation,
                )
            }
        };
        let c = solve_start(&mut ctx, &setup, &start);
        best = better(best, c);
        if !failed(&best) && !poor(&best) {
            break;
        }
    }
    if !best.sse.is_finite() {
        return Err(FitError::NoFiniteFit {
            reason: best.termination.to_string(),
        });
    }
    let mut extra_notes: Vec<String> = fall.map(gap_note).into_iter().collect();
    if let Some(canon) = hooks.canonicalize
        && (canon.out_of_order)(&best.p)
    {
        let moved = |k: usize| {
            canon.complement.contains(&k) || canon.swap.iter().any(|&(a, b)| a == k || b == k)
        };
        let held: Vec<&str> = (0..setup.fixed.len())
            .filter(|&k| setup.fixed[k].is_some() && moved(k))
            .map(|k| model.params()[k].name)
            .collect();
        if held.is_empty() {
            for &(a, b) in canon.swap {
                best.p.swap(a, b);
                best.pinned.swap(a, b);
            }
            for &k in canon.complement {
                best.p[k] = setup.lower[k] + setup.upper[k] - best.p[k];
                best.pinned[k] = best.pinned[k].map(|side| match side {
                    Side::Lower => Side::Upper,
                    Side::Upper => Side::Lower,
                });
            }
        } else {
            extra_notes.push(format!(
                "{} (fixed {}: the parts cannot be swapped into their usual order)",
                canon.note,
                held.join(", ")
            ));
        }
    }
    let mut report = build_report(&ctx, id, &setup, &best, sst);
    if !extra_notes.is_empty() {
        let mut all = extra_notes;
        all.extend(report.message.take());
        report.message = Some(all.join("; "));
    }
    Ok(report)
}

/// Runs from the best point, each with a fresh trust region, while one still lowers the sum
/// of squares by more than [`VALLEY_GAIN`] of it (at most [`VALLEY_RUNS`]): in the flat
/// valley of a steep part a run stops while the sum still falls slowly.
fn finish_valley(ctx: &mut Context<'_>, setup: &Setup, mut best: Candidate) -> Candidate {
    for _ in 0..VALLEY_RUNS {
        ctx.resume = true;
        let again = ctx.solve_pinned(
            &best.p,
            &best.pinned,
            &setup.fixed,
            &setup.lower,
            &setup.upper,
        );
        ctx.resume = false;
        if again.sse.is_nan() || again.sse >= best.sse {
            break;
        }
        let gain = (best.sse - again.sse) / best.sse;
        best = again;
        if gain <= VALLEY_GAIN {
            break;
        }
    }
    best
}

/// The note on a sum of squares with several minima, when the search reached another one
/// whose SSE is within [`RIVAL_MINIMUM`] times the best: then the readings hardly tell the two
/// fits apart, and which one a fit ends in depends on where it starts. A much worse minimum
/// is no rival and not mentioned.
fn several_minima_note(found: &[f64], best: f64) -> Option<String> {
    let distinct = |v: f64| v > best * (1.0 + DISTINCT_MINIMUM) + f64::MIN_POSITIVE;
    let mut rivals: Vec<f64> = found
        .iter()
        .copied()
        .filter(|&v| distinct(v) && v < RIVAL_MINIMUM * best)
        .collect();
    rivals.sort_by(f64::total_cmp);
    rivals.dedup_by(|a, b| *a <= *b * (1.0 + DISTINCT_MINIMUM));
    let next = *rivals.first()?;
    let others = if rivals.len() > 1 {
        format!(
            " (and {} more within {RIVAL_MINIMUM} times)",
            rivals.len() - 1
        )
    } else {
        String::new()
    };
    Some(format!(
        "several minima: another fit with an SSE {} higher{others} also matches the readings; the best was kept",
        percent_above(next, best)
    ))
}

/// How much higher `value` is than `base`, as a short percentage or factor.
fn percent_above(value: f64, base: f64) -> String {
    if base <= 0.0 {
        return "(best SSE 0)".to_string();
    }
    let ratio = value / base;
    if ratio >= 10.0 {
        format!("{ratio:.0} times")
    } else if ratio >= 2.0 {
        format!("{ratio:.1} times")
    } else {
        let pct = (ratio - 1.0) * 100.0;
        if pct >= 1.0 {
            format!("{pct:.0} %")
        } else {
            format!("{pct:.2} %")
        }
    }
}

/// A start for a model with no guesses: the middle of each interval (1 when unbounded).
fn default_start(setup: &Setup) -> Vec<f64> {
    setup
        .lower
        .iter()
        .zip(&setup.upper)
        .map(|(&lo, &hi)| match (lo.is_finite(), hi.is_finite()) {
            (true, true) => 0.5 * (lo + hi),
            (true, false) => lo + 1.0,
            (false, true) => hi - 1.0,
            (false, false) => 1.0,
        })
        .collect()
}

/// Solve from one start, interval by interval when the model has a free breakpoint.
fn solve_start(ctx: &mut Context<'_>, setup: &Setup, start: &[f64]) -> Candidate {
    let Some(b) = setup.breakpoint.filter(|&b| setup.fixed[b].is_none()) else {
        let c = ctx.solve(start, &setup.fixed, &setup.lower, &setup.upper);
        ctx.record(&c);
        return c;
    };
    let (lo_b, hi_b) = (setup.lower[b], setup.upper[b]);
    let mut edges: Vec<f64> = ctx
        .data
        .x
        .iter()
        .copied()
        .filter(|&x| x > lo_b && x < hi_b)
        .collect();
    edges.sort_by(f64::total_cmp);
    edges.dedup();
    edges.insert(0, lo_b);
    edges.push(hi_b);
    let mut lo = setup.lower.clone();
    let mut hi = setup.upper.clone();
    // With a power law beyond the breakpoint, each interval has a start near its optimum and a
    // lower bound on it: solve the intervals best bound first, and stop when no bound is below
    // the best fit found (allowing for the bound's own rounding).
    let plans: Vec<(f64, f64, f64, Vec<Vec<f64>>)> = match ctx.power_law {
        Some(law) => search::interval_plans(
            law,
            b,
            &ctx.data,
            Limits {
                lower: &setup.lower,
                upper: &setup.upper,
                fixed: &setup.fixed,
            },
            &edges,
            start,
        )
        .into_iter()
        .map(|p| (p.lower_bound, p.edges.0, p.edges.1, p.starts))
        .collect(),
        None => edges
            .windows(2)
            .map(|w| {
                let (a, z) = (w[0], w[1]);
                let mut s = start.to_vec();
                s[b] = if a > 0.0 && z.is_finite() {
                    (a * z).sqrt()
                } else if z.is_finite() {
                    0.5 * (a + z)
                } else {
                    2.0 * a.max(1.0)
                };
                (f64::NEG_INFINITY, a, z, vec![s])
            })
            .collect(),
    };
    let mut best: Option<Candidate> = None;
    for (bound, a, z, starts) in plans {
        if let Some(best) = &best
            && best.termination.is_optimum()
            && bound * (1.0 - INTERVAL_BOUND_SLACK) > best.sse
        {
            break;
        }
        lo[b] = a;
        hi[b] = z;
        let mut interval_best: Option<Candidate> = None;
        for s in &starts {
            // A planned start is next to its interval's optimum: take it as it is, short
            // steps.
            ctx.resume = ctx.power_law.is_some();
            let mut c = ctx.solve(s, &setup.fixed, &lo, &hi);
            ctx.resume = false;
            // Held on an interval edge is a kink, not a bound, unless the edge is the bound.
            c.pinned[b] = match c.pinned[b] {
                Some(Side::Lower) if a <= lo_b => Some(Side::Lower),
                Some(Side::Upper) if z >= hi_b => Some(Side::Upper),
                _ => None,
            };
            interval_best = Some(match interval_best {
                Some(prev) => better(prev, c),
                None => c,
            });
        }
        let Some(c) = interval_best else { continue };
        ctx.record(&c);
        best = Some(match best {
            Some(prev) => better(prev, c),
            None => c,
        });
    }
    best.unwrap_or_else(|| ctx.solve(start, &setup.fixed, &setup.lower, &setup.upper))
}

/// sum w (y - weighted mean)^2.
fn total_sum_of_squares(data: &Data<'_>) -> f64 {
    let w = |i: usize| data.sqrt_w.map_or(1.0, |s| s[i] * s[i]);
    let (mut sw, mut swy) = (0.0, 0.0);
    for (i, &y) in data.y.iter().enumerate() {
        sw += w(i);
        swy += w(i) * y;
    }
    let mean = swy / sw;
    data.y
        .iter()
        .enumerate()
        .map(|(i, &y)| w(i) * (y - mean) * (y - mean))
        .sum()
}

/// Statistics and diagnostics at the kept candidate.
fn build_report(
    ctx: &Context<'_>,
    id: &str,
    setup: &Setup,
    best: &Candidate,
    sst: f64,
) -> FitReport {
    let specs = ctx.model.params();
    let n = ctx.data.x.len();
    let np = specs.len();
    let k = setup.fixed.iter().filter(|f| f.is_none()).count();
    let cov_params: Vec<usize> = (0..np)
        .filter(|&j| setup.fixed[j].is_none() && best.pinned[j].is_none())
        .collect();
    let p = cov_params.len();
    let mut jac = DMatrix::zeros(n, p);
    let mut fitted = Vec::with_capacity(n);
    let mut e = Vec::with_capacity(n);
    let mut grad = vec![0.0; np];
    let mut sse = 0.0;
    for i in 0..n {
        let f = ctx
            .model
            .value_and_gradient(ctx.data.x[i], &best.p, &mut grad);
        let sw = ctx.data.sqrt_w.map_or(1.0, |w| w[i]);
        for (c, &j) in cov_params.iter().enumerate() {
            jac[(i, c)] = sw * grad[j];
        }
        let ei = sw * (ctx.data.y[i] - f);
        sse += ei * ei;
        fitted.push(f);
        e.push(ei);
    }
    let dof = n.saturating_sub(k);
    let s2 = (dof > 0).then(|| sse / dof as f64);
    let mut notes: Vec<String> = Vec::new();
    let inverse = if jac.iter().all(|v| v.is_finite()) {
        stats::inverse_normal_matrix(&jac)
    } else {
        None
    };
    if inverse.is_none() && p > 0 {
        notes.push("no standard errors: the Jacobian is singular (parameters not identifiable from these readings)".to_string());
    } else if let Some((_, Inversion::PseudoInverse)) = &inverse {
        notes.push(
            "standard errors from a pseudo-inverse: the Jacobian is nearly singular".to_string(),
        );
    }
    let inv = inverse.as_ref().map(|(m, _)| m);
    let cov = match (inv, s2) {
        (Some(inv), Some(s2)) => Some(inv * s2),
        _ => None,
    };
    let t = stats::t975(dof);
    let mut parameters = Vec::with_capacity(np);
    for (j, spec) in specs.iter().enumerate() {
        let value = best.p[j];
        let se = cov_params
            .iter()
            .position(|&c| c == j)
            .and_then(|c| cov.as_ref().map(|m| m[(c, c)]))
            .filter(|v| v.is_finite() && *v >= 0.0)
            .map(f64::sqrt);
        let interval = stats::interval95(value, se, t, stats::positive_scale(spec));
        let kink = (setup.breakpoint == Some(j) && setup.fixed[j].is_none())
            .then(|| stats::kink_suction(value, ctx.data.x))
            .flatten();
        if let Some(h) = kink {
            notes.push(stats::kink_note(spec.name, h));
        }
        if let Some(side) = best.pinned[j] {
            let bound = if side == Side::Lower {
                setup.lower[j]
            } else {
                setup.upper[j]
            };
            notes.push(format!(
                "{} on its {} bound {bound} (held there)",
                spec.name,
                if side == Side::Lower {
                    "lower"
                } else {
                    "upper"
                }
            ));
        }
        parameters.push(ParamEstimate {
            name: spec.name.to_string(),
            unit: spec.unit.to_string(),
            value,
            se,
            ci95: interval.map(|i| i.0),
            ci95_scale: interval.map(|i| i.1),
            kink_cm: kink,
            fixed: setup.fixed[j].is_some(),
            at_bound: best.pinned[j],
        });
    }
    if let Some(note) = several_minima_note(&ctx.found[..ctx.found_count], best.sse) {
        notes.push(note);
    } else if dof <= 1 && k >= 3 {
        // One reading more than parameters: the readings barely pin the curve down, and
        // other parameter sets often fit them about as well.
        notes.push(format!(
            "{dof} degree{} of freedom ({n} readings, {k} free parameters): other minima may fit the readings about as well",
            if dof == 1 { "" } else { "s" }
        ));
    }
    let names: Vec<String> = cov_params
        .iter()
        .map(|&j| specs[j].name.to_string())
        .collect();
    let (covariance, correlation) = match &cov {
        Some(m) if m.iter().all(|v| v.is_finite()) => {
            let rows = |f: &dyn Fn(usize, usize) -> f64| -> Vec<Vec<f64>> {
                (0..p).map(|r| (0..p).map(|c| f(r, c)).collect()).collect()
            };
            let cov_rows = rows(&|r, c| m[(r, c)]);
            let diag_ok = (0..p).all(|r| m[(r, r)] > 0.0);
            let corr = diag_ok.then(|| ParamMatrix {
                names: names.clone(),
                rows: rows(&|r, c| (m[(r, c)] / (m[(r, r)] * m[(c, c)]).sqrt()).clamp(-1.0, 1.0)),
            });
            (
                Some(ParamMatrix {
                    names,
                    rows: cov_rows,
                }),
                corr,
            )
        }
        _ => (None, None),
    };
    let mut readings = Vec::with_capacity(n);
    let mut row = vec![0.0; p];
    for i in 0..n {
        for (c, r) in row.iter_mut().enumerate() {
            *r = jac[(i, c)];
        }
        let inf = stats::influence(e[i], &row, inv, s2, dof, sse);
        readings.push(ReadingFit {
            x: ctx.data.x[i],
            observed: ctx.data.y[i],
            fitted: fitted[i],
            residual: ctx.data.y[i] - fitted[i],
            leverage: inf.leverage,
            studentized: inf.studentized,
            studentized_external: inf.external,
            cooks_distance: inf.cooks,
        });
    }
    let (aic, aicc, bic) = stats::information_criteria(n, k, sse);
    let r2 = (sst > 0.0).then(|| 1.0 - sse / sst);
    let mut converged = true;
    let mut problems: Vec<String> = Vec::new();
    if !best.termination.is_optimum() {
        converged = false;
        problems.push(format!("not converged: {}", best.termination));
    }
    if best.p.iter().any(|v| !v.is_finite()) || !sse.is_finite() {
        converged = false;
        problems.push("not converged: non-finite result".to_string());
    }
    if r2.is_some_and(|r| r < -1e-9) {
        converged = false;
        problems
            .push("not converged: the fit is worse than a horizontal line (R2 < 0)".to_string());
    }
    problems.extend(notes);
    FitReport {
        model: id.to_string(),
        parameters,
        sse,
        rmse: (sse / n as f64).sqrt(),
        residual_sd: s2.map(f64::sqrt),
        r2,
        aic,
        aicc,
        bic,
        n_points: n,
        n_free_params: k,
        n_criteria_params: stats::criteria_parameters(k),
        converged,
        message: (!problems.is_empty()).then(|| problems.join("; ")),
        termination: best.termination,
        evaluations: ctx.evaluations,
        runs: ctx.runs,
        covariance,
        correlation,
        readings,
        prior: None,
    }
}
