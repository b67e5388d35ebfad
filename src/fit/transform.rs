//! Maps between the physical parameters and the unbounded ones the solver moves.
//!
//! Levenberg-Marquardt knows no bounds, so each free parameter p is written as a function of
//! an unbounded q: a logistic map onto a finite interval, an exponential for a half-open one,
//! the identity when the parameter has no bounds at all.

/// Distance from a finite bound, as a fraction of the bound's scale, at which a logistic
/// parameter counts as on it (the map's derivative has all but vanished there).
const AT_BOUND: f64 = 1e-9;
/// |q| beyond which a logistic parameter is on its bound whatever the scale (logistic(36) = 1 - 2e-16).
const LOGISTIC_SATURATION: f64 = 36.0;
/// q below which an exponential parameter counts as pinned to its finite bound (e^-20 = 2e-9).
pub(crate) const EXP_PINNED: f64 = -20.0;
/// q above which an exponential parameter counts as running off to infinity (e^40 = 2e17).
pub(crate) const EXP_RUNAWAY: f64 = 40.0;
/// Starting points are kept this fraction of the bound's scale inside a finite bound: outside
/// the band where a parameter heading for its bound is held there ([`NEAR_BOUND`]).
const START_MARGIN: f64 = 2e-2;
/// Margin inside a finite bound, as a fraction of the interval, of a resumed start.
const RESUME_MARGIN: f64 = 1e-12;

/// Which end of its interval a parameter sits on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Side {
    /// The lower bound.
    Lower,
    /// The upper bound.
    Upper,
}

/// What happened to q at an accepted solver step.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Saturation {
    /// The parameter reached a finite bound (to working precision).
    Pinned(Side),
    /// The parameter ran off towards an infinite bound.
    Runaway,
}

/// One parameter's map p = g(q).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Transform {
    /// p = q (no bounds).
    Identity,
    /// p = lo + (hi - lo) * logistic(q).
    Logistic { lo: f64, hi: f64 },
    /// p = lo + exp(q) (only a lower bound).
    ExpLower { lo: f64 },
    /// p = hi - exp(q) (only an upper bound).
    ExpUpper { hi: f64 },
}

impl Transform {
    /// The map for a parameter with these bounds (infinite where there is none).
    pub(crate) fn for_bounds(lo: f64, hi: f64) -> Self {
        match (lo.is_finite(), hi.is_finite()) {
            (true, true) => Transform::Logistic { lo, hi },
            (true, false) => Transform::ExpLower { lo },
            (false, true) => Transform::ExpUpper { hi },
            (false, false) => Transform::Identity,
        }
    }

    /// p and dp/dq at q.
    #[inline]
    pub(crate) fn forward(self, q: f64) -> (f64, f64) {
        match self {
            Transform::Identity => (q, 1.0),
            Transform::Logistic { lo, hi } => {
                // Evaluated so that neither tail overflows.
                let (s, one_minus_s) = if q >= 0.0 {
                    let e = (-q).exp();
                    (1.0 / (1.0 + e), e / (1.0 + e))
                } else {
                    let e = q.exp();
                    (e / (1.0 + e), 1.0 / (1.0 + e))
                };
                let width = hi - lo;
                let p = if s <= 0.5 {
                    lo + width * s
                } else {
                    hi - width * one_minus_s
                };
                (p, width * s * one_minus_s)
            }
            Transform::ExpLower { lo } => {
                let e = q.exp();
                (lo + e, e)
            }
            Transform::ExpUpper { hi } => {
                let e = q.exp();
                (hi - e, -e)
            }
        }
    }

    /// q for a starting value p, kept a little inside any finite bound.
    pub(crate) fn inverse_start(self, p: f64) -> f64 {
        match self {
            Transform::Identity => p,
            Transform::Logistic { lo, hi } => {
                let p = p.clamp(
                    lo + START_MARGIN * self.scale(lo),
                    hi - START_MARGIN * self.scale(hi),
                );
                let s = (p - lo) / (hi - lo);
                (s / (1.0 - s)).ln()
            }
            Transform::ExpLower { lo } => (p - lo).max(start_gap(lo)).ln(),
            Transform::ExpUpper { hi } => (hi - p).max(start_gap(hi)).ln(),
        }
    }

    /// q for a value an earlier run reached: as [`Self::inverse_start`], but only a hair
    /// inside a finite bound, so that polishing a solution does not move it first.
    pub(crate) fn inverse_resume(self, p: f64) -> f64 {
        match self {
            Transform::Logistic { lo, hi } => {
                let margin = RESUME_MARGIN * (hi - lo);
                let p = p.clamp(lo + margin, hi - margin);
                let s = (p - lo) / (hi - lo);
                (s / (1.0 - s)).ln()
            }
            _ => self.inverse_start(p),
        }
    }

    /// Whether q at an accepted step means the parameter is on a bound or running away.
    pub(crate) fn saturation(self, q: f64) -> Option<Saturation> {
        match self {
            Transform::Identity => None,
            Transform::Logistic { .. } => self.logistic_saturation(q, self.forward(q).0),
            Transform::ExpLower { .. } | Transform::ExpUpper { .. } => {
                let side = if matches!(self, Transform::ExpLower { .. }) {
                    Side::Lower
                } else {
                    Side::Upper
                };
                if q <= EXP_PINNED {
                    Some(Saturation::Pinned(side))
                } else if q >= EXP_RUNAWAY {
                    Some(Saturation::Runaway)
                } else {
                    None
                }
            }
        }
    }
}

impl Transform {
    /// [`saturation`](Self::saturation) and [`near_bound`](Self::near_bound) at q together,
    /// with one evaluation of the map (the solver's bound watch asks both at every step).
    pub(crate) fn saturation_and_near_bound(self, q: f64) -> (Option<Saturation>, Option<Side>) {
        match self {
            Transform::Logistic { .. } => {
                let p = self.forward(q).0;
                (self.logistic_saturation(q, p), self.logistic_near_bound(p))
            }
            _ => (self.saturation(q), None),
        }
    }

    /// Saturation of a logistic parameter at q, with p = forward(q).
    fn logistic_saturation(self, q: f64, p: f64) -> Option<Saturation> {
        let Transform::Logistic { lo, hi } = self else {
            return None;
        };
        if q <= -LOGISTIC_SATURATION || p - lo <= AT_BOUND * self.scale(lo) {
            Some(Saturation::Pinned(Side::Lower))
        } else if q >= LOGISTIC_SATURATION || hi - p <= AT_BOUND * self.scale(hi) {
            Some(Saturation::Pinned(Side::Upper))
        } else {
            None
        }
    }

    /// The bound a logistic parameter at p is close to, if any.
    fn logistic_near_bound(self, p: f64) -> Option<Side> {
        let Transform::Logistic { lo, hi } = self else {
            return None;
        };
        if p - lo <= NEAR_BOUND * self.scale(lo) {
            Some(Side::Lower)
        } else if hi - p <= NEAR_BOUND * self.scale(hi) {
            Some(Side::Upper)
        } else {
            None
        }
    }
}

/// Fraction of a parameter's scale within which it counts as near its bound.
const NEAR_BOUND: f64 = 1e-2;

impl Transform {
    /// The scale distances from a finite bound are measured in: the interval's width for a
    /// bound at 0, min(width, |bound|) otherwise (so alpha in [1e-5, 10] 1/cm counts as near
    /// its lower bound only within a fraction of 1e-5 of it).
    fn scale(self, bound: f64) -> f64 {
        match self {
            Transform::Logistic { lo, hi } if bound == 0.0 => hi - lo,
            Transform::Logistic { lo, hi } => (hi - lo).min(bound.abs()),
            _ => bound.abs().max(1.0),
        }
    }

    /// The bound a finite-interval parameter at q is close to, if any.
    ///
    /// Close means within 1 % of the interval's width for a bound at 0, and within 1 % of
    /// min(width, |bound|) otherwise, so a parameter spanning decades (alpha in [1e-5, 10]
    /// 1/cm) is near its lower bound only below 1.01e-5, and n in [1.001, 15] below 1.011.
    #[cfg(test)]
    fn near_bound(self, q: f64) -> Option<Side> {
        self.saturation_and_near_bound(q).1
    }
}

/// Smallest distance from a half-open bound at which a start is placed.
fn start_gap(bound: f64) -> f64 {
    (bound.abs() * 1e-6).max(1e-12)
}

#[cfg(test)]
#[allow(clippy::float_cmp)]
mod tests {
    use super::*;

    #[test]
    fn logistic_round_trips_and_derivative_matches() {
        let t = Transform::for_bounds(1e-5, 10.0);
        for p in [2e-5, 0.005, 0.145, 3.0, 9.7] {
            let q = t.inverse_start(p);
            let (back, d) = t.forward(q);
            assert!((back - p).abs() <= 1e-12 * p.max(1.0), "{p} -> {back}");
            let h = 1e-6;
            let fd = (t.forward(q + h).0 - t.forward(q - h).0) / (2.0 * h);
            assert!((fd - d).abs() <= 1e-6 * d.abs().max(1e-12), "{fd} vs {d}");
        }
        // Far tails stay finite and on the bounds.
        assert_eq!(t.forward(-800.0).0, 1e-5);
        assert_eq!(t.forward(800.0).0, 10.0);
        assert_eq!(t.saturation(-40.0), Some(Saturation::Pinned(Side::Lower)));
        assert_eq!(t.saturation(t.inverse_start(2e-5)), None);
        let q_of = |p: f64| {
            let s = (p - 1e-5) / (10.0 - 1e-5);
            (s / (1.0 - s)).ln()
        };
        assert_eq!(t.near_bound(q_of(1.005e-5)), Some(Side::Lower));
        assert_eq!(t.near_bound(q_of(2e-5)), None);
        // A start on the bound is placed outside the near band.
        assert_eq!(t.near_bound(t.inverse_start(1e-5)), None);
        // The combined check gives the same saturation as the separate one.
        for q in [-40.0, -30.0, -12.0, -5.0, 0.0, 5.0, 12.0, 30.0, 40.0] {
            assert_eq!(t.saturation_and_near_bound(q).0, t.saturation(q), "{q}");
        }
        assert_eq!(
            t.saturation_and_near_bound(-40.0),
            (Some(Saturation::Pinned(Side::Lower)), Some(Side::Lower))
        );
    }

    #[test]
    fn half_open_and_unbounded() {
        let lower = Transform::for_bounds(1.0, f64::INFINITY);
        let (p, d) = lower.forward(0.0);
        assert_eq!((p, d), (2.0, 1.0));
        assert_eq!(lower.saturation(41.0), Some(Saturation::Runaway));
        let upper = Transform::for_bounds(f64::NEG_INFINITY, 0.0);
        assert_eq!(upper.forward(0.0), (-1.0, -1.0));
        assert_eq!(
            Transform::for_bounds(f64::NEG_INFINITY, f64::INFINITY),
            Transform::Identity
        );
        // A start on a half-open bound moves just inside it.
        assert!(lower.forward(lower.inverse_start(1.0)).0 > 1.0);
    }
}
