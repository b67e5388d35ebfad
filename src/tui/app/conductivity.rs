//! The conductivity view of a sample: its measured K, the fitted (joint fit) or predicted
//! (retention fit with the layer's Ks and L = 0.5) K(h) curve and its Ks, on log axes. Plain
//! data, built from library values.

use crate::fit::ParamEstimate;
use crate::model::conductivity::{ConductivityModel, DEFAULT_PORE_CONNECTIVITY};
use crate::model::retention::RetentionCurve;
use crate::store::conductivity::{JointRecord, SampleKs, StoredConductivity, Where};

/// Points of the K curve across the plot.
const K_CURVE_POINTS: usize = 120;

/// Where the K curve comes from.
#[derive(Debug, Clone, PartialEq)]
pub enum KCurveSource {
    /// A fit made with the measured conductivity: its Ks and L with their errors.
    Fitted {
        /// Fitted (or held) Ks.
        ks: Box<ParamEstimate>,
        /// Fitted (or held) L.
        l: Box<ParamEstimate>,
    },
    /// The retention fit's Mualem (or Burdine, Campbell) prediction from the layer's Ks.
    Predicted {
        /// The layer's Ks, cm/day.
        ks: f64,
    },
    /// No curve: no fit, or no Ks to scale a retention fit's prediction.
    None,
}

/// One measured K as the readings pane lists it in the K view.
#[derive(Debug, Clone, PartialEq)]
pub struct KReadingView {
    /// Conductivity reading id (as `list conductivity` shows it).
    pub id: i64,
    /// Where it was measured.
    pub at: Where,
    /// K, cm/day.
    pub k_cm_per_day: f64,
    /// Method as the lab wrote it.
    pub method: Option<String>,
    /// Left out of joint fits by a flag.
    pub excluded: bool,
    /// Its place on the plot (log10 h, log10 K), when it has one.
    pub point: Option<(f64, f64)>,
}

/// What the conductivity view draws.
#[derive(Debug, Clone, PartialEq)]
pub struct ConductivityPanel {
    /// Measured K as (log10 h, log10 K); K(theta) readings at the suction where the current
    /// fit holds that theta (left out without a fit).
    pub points: Vec<(f64, f64)>,
    /// Measured K left out of joint fits by a flag, placed as `points` are.
    pub excluded: Vec<(f64, f64)>,
    /// Every measured K in the order of `list conductivity`, for the readings pane.
    pub readings: Vec<KReadingView>,
    /// K(theta) readings that could not be placed on the suction axis.
    pub unplaced: usize,
    /// The K curve as (log10 h, log10 K).
    pub curve: Vec<(f64, f64)>,
    /// Where the curve comes from.
    pub source: KCurveSource,
    /// The conductivity model of the curve.
    pub model: Option<ConductivityModel>,
    /// The core's measured Ks and its layer's, cm/day.
    pub measured_ks: SampleKs,
}

impl ConductivityPanel {
    /// The panel of a sample from its conductivity readings, measured Ks, current fit's
    /// curve and joint record; `x` is the plot's log10 h range. `None` when there is nothing
    /// to show (no measured K, no joint fit and no Ks to predict with).
    pub fn new(
        readings: &[StoredConductivity],
        measured_ks: SampleKs,
        curve: Option<&RetentionCurve>,
        conductivity: Option<ConductivityModel>,
        joint: Option<&JointRecord>,
        x: [f64; 2],
    ) -> Option<ConductivityPanel> {
        let mut unplaced = 0;
        let mut points = Vec::new();
        let mut excluded = Vec::new();
        let mut listed = Vec::with_capacity(readings.len());
        for r in readings {
            let h = match r.reading.at {
                Where::Suction(h) => Some(h),
                Where::Water(theta) => curve.and_then(|c| c.suction_at(theta)),
            };
            let point = h
                .filter(|h| *h > 0.0)
                .map(|h| (h.log10(), r.reading.k_cm_per_day.log10()));
            match point {
                Some(point) if r.excluded => excluded.push(point),
                Some(point) => points.push(point),
                None => unplaced += 1,
            }
            listed.push(KReadingView {
                id: r.id,
                at: r.reading.at,
                k_cm_per_day: r.reading.k_cm_per_day,
                method: r.reading.method.clone(),
                excluded: r.excluded,
                point,
            });
        }
        let grid = |f: &dyn Fn(f64) -> Option<f64>| -> Vec<(f64, f64)> {
            (0..K_CURVE_POINTS)
                .filter_map(|i| {
                    let lx = x[0] + (x[1] - x[0]) * i as f64 / (K_CURVE_POINTS - 1) as f64;
                    f(10f64.powf(lx))
                        .filter(|k| *k > 0.0 && k.is_finite())
                        .map(|k| (lx, k.log10()))
                })
                .collect()
        };
        let (curve_pts, source, model) = if let Some(j) = joint {
            let r = &j.report;
            let nr = r.kind.params().len();
            (
                grid(&|h| r.conductivity_at(h)),
                KCurveSource::Fitted {
                    ks: Box::new(r.fit.parameters[nr].clone()),
                    l: Box::new(r.fit.parameters[nr + 1].clone()),
                },
                Some(r.conductivity_model),
            )
        } else if let (Some(c), Some(m), Some(ks)) = (curve, conductivity, measured_ks.layer) {
            (
                grid(&|h| m.conductivity(h, c.params(), ks, DEFAULT_PORE_CONNECTIVITY)),
                KCurveSource::Predicted { ks },
                Some(m),
            )
        } else {
            (Vec::new(), KCurveSource::None, None)
        };
        if points.is_empty()
            && excluded.is_empty()
            && curve_pts.is_empty()
            && measured_ks.value().is_none()
        {
            return None;
        }
        Some(ConductivityPanel {
            points,
            excluded,
            readings: listed,
            unplaced,
            curve: curve_pts,
            source,
            model,
            measured_ks,
        })
    }

    /// The log10 K window: a decade beyond the values shown, at most ten decades deep.
    pub fn y_range(&self) -> [f64; 2] {
        let ks = [
            self.measured_ks.sample,
            self.measured_ks.layer,
            match &self.source {
                KCurveSource::Fitted { ks, .. } => Some(ks.value),
                KCurveSource::Predicted { ks } => Some(*ks),
                KCurveSource::None => None,
            },
        ];
        let values = self
            .points
            .iter()
            .map(|p| p.1)
            .chain(ks.into_iter().flatten().map(f64::log10));
        let (lo, hi) = values.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(v), b.max(v))
        });
        let (lo, hi) = if lo.is_finite() {
            (lo, hi)
        } else {
            (-3.0, 2.0)
        };
        let top = hi.ceil() + 0.5;
        let bottom = (lo.floor() - 1.0).max(top - 10.0);
        [bottom, top]
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::retention::ModelKind;
    use crate::store::conductivity::ConductivityReading;

    fn reading(at: Where, k: f64) -> StoredConductivity {
        StoredConductivity {
            id: 1,
            sample_id: 1,
            reading: ConductivityReading {
                sample: "A".into(),
                at,
                k_cm_per_day: k,
                method: None,
                measured_on: None,
                notes: None,
                batch: None,
                line: 2,
                uid: crate::model::domain::Uid::random(),
            },
            layer: crate::model::domain::LayerRef {
                site: "S".into(),
                top_cm: 0.0,
                bottom_cm: 10.0,
            },
            source_file: None,
            excluded: false,
        }
    }

    #[test]
    fn a_retention_fit_predicts_k_from_the_layer_ks_and_theta_readings_are_placed() {
        let curve =
            RetentionCurve::new(ModelKind::VanGenuchten, vec![0.05, 0.4, 0.02, 1.5]).expect("ok");
        let theta = curve.theta(100.0);
        let readings = [
            reading(Where::Suction(10.0), 2.0),
            reading(Where::Water(theta), 0.1),
        ];
        let ks = SampleKs {
            sample: None,
            layer: Some(20.0),
        };
        let model = ConductivityModel::for_model(ModelKind::VanGenuchten);
        let p = ConductivityPanel::new(&readings, ks, Some(&curve), model, None, [0.0, 4.0])
            .expect("panel");
        assert_eq!(p.points.len(), 2);
        assert!((p.points[1].0 - 2.0).abs() < 1e-9, "{:?}", p.points);
        assert_eq!(p.source, KCurveSource::Predicted { ks: 20.0 });
        // At h = 1 cm the prediction is close to Ks (the curve starts at log10 h = 0).
        let first = p.curve[0];
        assert!(first.0.abs() < 1e-12 && first.1 < 20f64.log10() && first.1 > 1.0);
        // Without a fit K(theta) cannot be placed; without anything at all there is no panel.
        let p = ConductivityPanel::new(&readings, ks, None, model, None, [0.0, 4.0]).expect("p");
        assert_eq!((p.points.len(), p.unplaced), (1, 1));
        assert!(
            ConductivityPanel::new(&[], SampleKs::default(), None, None, None, [0.0, 4.0])
                .is_none()
        );
    }
}
