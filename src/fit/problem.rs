//! The adapter between a [`CurveModel`] and the `levenberg-marquardt` crate.
//!
//! The solver moves the unbounded q of the free parameters; residuals are
//! sqrt(w_i) (f(x_i; p(q)) - y_i) and the Jacobian is J_phys * dp/dq (chain rule). Value and
//! gradient come from one model call, so the Jacobian of the point just evaluated is kept and
//! handed over when the solver asks for it (it always asks at the last accepted point).

use std::cell::{Cell, RefCell};

use levenberg_marquardt::LeastSquaresProblem;
use nalgebra::{DMatrix, DVector, Dyn, Owned};

use super::transform::{Saturation, Side, Transform};
use crate::model::curve::CurveModel;

/// Readings of one fit, already validated.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Data<'a> {
    pub x: &'a [f64],
    pub y: &'a [f64],
    /// sqrt of the weights, when weighted.
    pub sqrt_w: Option<&'a [f64]>,
}

/// A solver run's view of the problem.
pub(crate) struct Problem<'a> {
    model: &'a dyn CurveModel,
    data: Data<'a>,
    /// Index into the full parameter vector of each free parameter.
    free: &'a [usize],
    transforms: &'a [Transform],
    /// Full physical parameter vector; fixed entries hold their values.
    full: RefCell<Vec<f64>>,
    grad: RefCell<Vec<f64>>,
    q: DVector<f64>,
    /// The Jacobian computed along with the last residuals, tagged with the parameter
    /// generation it belongs to.
    jacobian: RefCell<Option<(u64, DMatrix<f64>)>>,
    /// Bumped by every `set_params`.
    generation: u64,
    watch: Watch,
}

/// Stops a run at an accepted step where a free parameter saturates (for the active set).
pub(crate) struct Watch {
    enabled: bool,
    saturated: Cell<Option<(usize, Saturation)>>,
    /// q at the previous accepted point, to tell a parameter heading for a bound.
    previous: RefCell<Vec<f64>>,
}

impl Watch {
    pub(crate) fn new(enabled: bool, n: usize) -> Self {
        Self {
            enabled,
            saturated: Cell::new(None),
            previous: RefCell::new(Vec::with_capacity(n)),
        }
    }

    /// The free parameter (position among the solver's) that saturated, if a run was stopped.
    pub(crate) fn saturated(&self) -> Option<(usize, Saturation)> {
        self.saturated.get()
    }

    /// Called at each accepted point q: true when the run must stop because a parameter
    /// saturated, or came close to a finite bound while still moving towards it (the driver
    /// holds it on the bound and releases it if the gradient says so).
    pub(crate) fn stops_at(&self, transforms: &[Transform], q: &[f64]) -> bool {
        if !self.enabled {
            return false;
        }
        let mut previous = self.previous.borrow_mut();
        let have_previous = previous.len() == q.len();
        for (j, (t, &qj)) in transforms.iter().zip(q).enumerate() {
            let heading = |side: Side| {
                have_previous
                    && match side {
                        Side::Lower => qj < previous[j],
                        Side::Upper => qj > previous[j],
                    }
            };
            let (saturation, near) = t.saturation_and_near_bound(qj);
            let hit =
                saturation.or_else(|| near.filter(|&side| heading(side)).map(Saturation::Pinned));
            if let Some(s) = hit {
                self.saturated.set(Some((j, s)));
                return true;
            }
        }
        previous.clear();
        previous.extend_from_slice(q);
        false
    }
}

impl<'a> Problem<'a> {
    pub(crate) fn new(
        model: &'a dyn CurveModel,
        data: Data<'a>,
        free: &'a [usize],
        transforms: &'a [Transform],
        full: Vec<f64>,
        q: DVector<f64>,
        watch_saturation: bool,
    ) -> Self {
        let n = full.len();
        Self {
            model,
            data,
            free,
            transforms,
            full: RefCell::new(full),
            grad: RefCell::new(vec![0.0; n]),
            q,
            jacobian: RefCell::new(None),
            generation: 0,
            watch: Watch::new(watch_saturation, free.len()),
        }
    }

    /// The free parameter (position in `free`) that saturated, if the run was stopped for it.
    pub(crate) fn saturated(&self) -> Option<(usize, Saturation)> {
        self.watch.saturated()
    }

    /// The current q.
    pub(crate) fn q(&self) -> &DVector<f64> {
        &self.q
    }

    /// The full physical parameter vector at q.
    pub(crate) fn physical(&self, q: &DVector<f64>) -> Vec<f64> {
        let mut full = self.full.borrow().clone();
        for ((&k, t), &qk) in self.free.iter().zip(self.transforms).zip(q.iter()) {
            full[k] = t.forward(qk).0;
        }
        full
    }

    /// Residuals and the Jacobian in q at q, or `None` when the model gives NaN or infinity.
    fn evaluate(&self, q: &DVector<f64>) -> Option<(DVector<f64>, DMatrix<f64>)> {
        let m = self.data.x.len();
        let nf = self.free.len();
        let mut full = self.full.borrow_mut();
        let mut dpdq = [0.0; 16];
        let mut dpdq_vec;
        let dpdq: &mut [f64] = if nf <= dpdq.len() {
            &mut dpdq[..nf]
        } else {
            dpdq_vec = vec![0.0; nf];
            &mut dpdq_vec
        };
        for (j, ((&k, t), &qk)) in self
            .free
            .iter()
            .zip(self.transforms)
            .zip(q.iter())
            .enumerate()
        {
            let (p, d) = t.forward(qk);
            full[k] = p;
            dpdq[j] = d;
        }
        let mut grad = self.grad.borrow_mut();
        let mut r = DVector::zeros(m);
        let mut jac = DMatrix::zeros(m, nf);
        for i in 0..m {
            let f = self
                .model
                .value_and_gradient(self.data.x[i], &full, &mut grad);
            let sw = self.data.sqrt_w.map_or(1.0, |w| w[i]);
            let ri = sw * (f - self.data.y[i]);
            if !ri.is_finite() {
                return None;
            }
            r[i] = ri;
            for (j, &k) in self.free.iter().enumerate() {
                jac[(i, j)] = sw * grad[k] * dpdq[j];
            }
        }
        if jac.iter().any(|v| !v.is_finite()) {
            return None;
        }
        Some((r, jac))
    }
}

impl LeastSquaresProblem<f64, Dyn, Dyn> for Problem<'_> {
    type ResidualStorage = Owned<f64, Dyn>;
    type JacobianStorage = Owned<f64, Dyn, Dyn>;
    type ParameterStorage = Owned<f64, Dyn>;

    fn set_params(&mut self, q: &DVector<f64>) {
        self.q.copy_from(q);
        self.generation += 1;
    }

    fn params(&self) -> DVector<f64> {
        self.q.clone()
    }

    fn residuals(&self) -> Option<DVector<f64>> {
        if let Some((r, jac)) = self.evaluate(&self.q) {
            *self.jacobian.borrow_mut() = Some((self.generation, jac));
            Some(r)
        } else {
            // A NaN trial point: report a huge residual so the step is rejected rather than
            // the run aborted (the crate aborts on `None`).
            *self.jacobian.borrow_mut() = None;
            Some(DVector::from_element(self.data.x.len(), f64::MAX.sqrt()))
        }
    }

    fn jacobian(&self) -> Option<DMatrix<f64>> {
        // The solver asks for the Jacobian only at accepted points: check saturation here.
        if self.watch.stops_at(self.transforms, self.q.as_slice()) {
            return None;
        }
        let cached = self.jacobian.borrow_mut().take();
        match cached {
            Some((generation, jac)) if generation == self.generation => Some(jac),
            _ => self.evaluate(&self.q).map(|(_, jac)| jac),
        }
    }
}
