//! The numbers a report hands on, computed in one place: per fit (water content at field
//! capacity and wilting point, available water, air entry, inflection points, conductivity),
//! per layer (available water over its lab cores) and per site (the profile's available
//! water in mm down to a root-zone depth).
//!
//! Everything is computed on read from the stored fits and the campaign's current field
//! capacity and wilting point suctions, so changing those (`porewise set`) needs no refit.

use std::str::FromStr;

use rusqlite::Connection;
use serde::Serialize;

use crate::fit::FitReport;
use crate::model::conductivity::{ConductivityForm, ConductivityModel, DEFAULT_PORE_CONNECTIVITY};
use crate::model::derived::{DerivedValues, derive};
use crate::model::domain::{LayerRef, SampleKind};
use crate::model::retention::{ModelKind, RetentionCurve};
use crate::model::units::CM_PER_KPA;
use crate::store::fits::{self, FitState, Selection};
use crate::store::{CampaignSettings, Result, layers};

/// Default depth to which a profile's available water is summed, cm (common practice for
/// a crop root zone).
pub const DEFAULT_ROOT_ZONE_CM: f64 = 100.0;

/// Derived values of one fit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FitDerived {
    /// Water contents, available water, air entry, inflection points.
    pub values: DerivedValues,
    /// Saturated conductivity of the sample's layer, cm/day, when known.
    pub ks_cm_per_day: Option<f64>,
    /// The conductivity model of the K values (`None` for a model without a closed form).
    pub conductivity_model: Option<ConductivityModel>,
    /// K at field capacity, cm/day (needs Ks and a model with a conductivity form).
    pub k_field_capacity_cm_per_day: Option<f64>,
    /// K at the wilting point, cm/day.
    pub k_wilting_point_cm_per_day: Option<f64>,
}

/// The retention curve of a report, when its model and parameters are valid.
pub fn curve_of(report: &FitReport) -> Option<RetentionCurve> {
    let kind = ModelKind::from_str(&report.model).ok()?;
    RetentionCurve::new(kind, report.values()).ok()
}

/// The conductivity model for a fit of `kind` with the form asked for: that form where the
/// model has it (Brooks-Corey has Burdine's and Mualem's), otherwise the model's usual pairing.
pub fn conductivity_model_for(
    kind: ModelKind,
    form: Option<ConductivityForm>,
) -> Option<ConductivityModel> {
    ConductivityModel::select(kind, form)
        .or_else(|_| ConductivityModel::select(kind, None))
        .ok()
}

/// Derived values of a fit under the campaign's field capacity and wilting point; the
/// conductivity in the form asked for (see [`conductivity_model_for`]).
pub fn derive_fit(
    report: &FitReport,
    settings: &CampaignSettings,
    ks_cm_per_day: Option<f64>,
    form: Option<ConductivityForm>,
) -> Option<FitDerived> {
    let curve = curve_of(report)?;
    let values = derive(&curve, settings.fc_kpa, settings.pwp_kpa);
    let model = conductivity_model_for(curve.kind(), form);
    let k_at = |kpa: f64| {
        let (model, ks) = (model?, ks_cm_per_day?);
        model.conductivity(
            kpa * CM_PER_KPA,
            curve.params(),
            ks,
            DEFAULT_PORE_CONNECTIVITY,
        )
    };
    Some(FitDerived {
        values,
        ks_cm_per_day,
        conductivity_model: model,
        k_field_capacity_cm_per_day: k_at(settings.fc_kpa),
        k_wilting_point_cm_per_day: k_at(settings.pwp_kpa),
    })
}

/// Available water of one layer.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LayerWater {
    /// Site and depths.
    pub layer: LayerRef,
    /// Horizon label.
    pub horizon: Option<String>,
    /// Lab cores taken from the layer.
    pub lab_cores: usize,
    /// Lab cores with a current fit that gives available water (these make the mean).
    pub fitted_cores: usize,
    /// Of those, cores whose current fit is stale.
    pub stale_cores: usize,
    /// Mean plant-available water over the fitted lab cores, m3/m3.
    pub available_water: Option<f64>,
    /// Mean available water of the layer's field pairings, shown beside (not in the sum), m3/m3.
    pub field_available_water: Option<f64>,
    /// Thickness of the layer inside the root zone, cm.
    pub depth_in_zone_cm: f64,
    /// Available water of the layer's part of the root zone, mm.
    pub water_mm: Option<f64>,
}

/// A site's profile available water down to a depth.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SiteProfile {
    /// Site code.
    pub site: String,
    /// Depth the sum goes down to, cm.
    pub root_zone_cm: f64,
    /// Field capacity and wilting point suctions used, kPa.
    pub fc_kpa: f64,
    /// Wilting point suction, kPa.
    pub pwp_kpa: f64,
    /// Layers top down (those starting below the root zone too, with zero depth in it).
    pub layers: Vec<LayerWater>,
    /// Sum over layers with available water, mm.
    pub total_mm: f64,
    /// Depth of the root zone covered by layers with available water, cm.
    pub covered_cm: f64,
}

impl SiteProfile {
    /// Root-zone depth not covered by a layer with available water, cm (no layer there, or no
    /// fitted core): the total is a lower bound when this is above zero.
    pub fn uncovered_cm(&self) -> f64 {
        (self.root_zone_cm - self.covered_cm).max(0.0)
    }
}

/// Thickness of `[top, bottom)` inside `[0, root_zone)`, cm.
pub fn depth_in_zone(top_cm: f64, bottom_cm: f64, root_zone_cm: f64) -> f64 {
    (bottom_cm.min(root_zone_cm) - top_cm.min(root_zone_cm)).max(0.0)
}

fn mean(values: &[f64]) -> Option<f64> {
    (!values.is_empty()).then(|| values.iter().sum::<f64>() / values.len() as f64)
}

/// The available-water profile of every site (or one), from the current fits.
///
/// A layer's available water is the mean over its lab cores' current fits; field pairings are
/// shown beside it. Stale fits are used but counted, so a listing can say so.
///
/// # Errors
/// An SQLite error, or a stored fit that does not decode.
pub fn profiles(
    conn: &Connection,
    settings: &CampaignSettings,
    root_zone_cm: f64,
    site: Option<&str>,
) -> Result<Vec<SiteProfile>> {
    let selection = Selection {
        site: site.map(str::to_string),
        ..Selection::default()
    };
    let samples = fits::samples(conn, &selection)?;
    let summaries = fits::summaries(conn, &samples)?;
    let mut out: Vec<SiteProfile> = Vec::new();
    for row in layers::list(conn, site)? {
        let layer = row.stored.layer;
        let mut lab = Vec::new();
        let mut field = Vec::new();
        let mut lab_cores = 0;
        let mut stale = 0;
        for s in samples.iter().filter(|s| s.layer_id == row.stored.id) {
            if s.kind == SampleKind::LabCore {
                lab_cores += 1;
            }
            let Some(summary) = summaries.get(&s.id) else {
                continue;
            };
            let Some(fit) = fits::current(conn, s.id)? else {
                continue;
            };
            let aw = fit
                .report
                .as_ref()
                .and_then(|r| derive_fit(r, settings, None, None))
                .and_then(|d| d.values.plant_available_water);
            let Some(aw) = aw else { continue };
            match s.kind {
                SampleKind::LabCore => {
                    lab.push(aw);
                    if matches!(summary.state, FitState::Stale(_)) {
                        stale += 1;
                    }
                }
                SampleKind::FieldPairing => field.push(aw),
            }
        }
        let available_water = mean(&lab);
        let depth = depth_in_zone(layer.at.top_cm, layer.at.bottom_cm, root_zone_cm);
        let water = LayerWater {
            layer: layer.at.clone(),
            horizon: layer.horizon.clone(),
            lab_cores,
            fitted_cores: lab.len(),
            stale_cores: stale,
            available_water,
            field_available_water: mean(&field),
            depth_in_zone_cm: depth,
            // mm = m3/m3 * cm * 10 mm/cm
            water_mm: available_water.map(|aw| aw * depth * 10.0),
        };
        match out.last_mut() {
            Some(p) if p.site == layer.at.site => p.layers.push(water),
            _ => out.push(SiteProfile {
                site: layer.at.site.clone(),
                root_zone_cm,
                fc_kpa: settings.fc_kpa,
                pwp_kpa: settings.pwp_kpa,
                layers: vec![water],
                total_mm: 0.0,
                covered_cm: 0.0,
            }),
        }
    }
    for p in &mut out {
        // An empty f64 sum is -0.0; adding it to 0.0 gives 0.0, so a site without a fitted
        // layer shows 0, not -0.
        p.total_mm = 0.0 + p.layers.iter().filter_map(|l| l.water_mm).sum::<f64>();
        p.covered_cm = (0.0
            + p.layers
                .iter()
                .filter(|l| l.water_mm.is_some())
                .map(|l| l.depth_in_zone_cm)
                .sum::<f64>())
        .min(root_zone_cm);
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    #![allow(clippy::float_cmp)]

    use super::*;

    #[test]
    fn layers_are_cut_at_the_root_zone() {
        assert_eq!(depth_in_zone(0.0, 30.0, 50.0), 30.0);
        assert_eq!(depth_in_zone(30.0, 80.0, 50.0), 20.0);
        assert_eq!(depth_in_zone(60.0, 80.0, 50.0), 0.0);
    }
}
