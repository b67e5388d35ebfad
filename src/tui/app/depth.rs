//! The depth view's state: a site's layers with their curves, the parameter table, the
//! profile's available water, the cursor and the root-zone depth.

#[allow(clippy::wildcard_imports)] // the state's shared imports and helpers
use super::*;

/// One line of the depth view's parameter table.
#[derive(Debug, Clone, PartialEq)]
pub struct DepthRow {
    /// Sample id.
    pub sample_id: i64,
    /// Sample code.
    pub sample: String,
    /// Lab core or field pairing.
    pub kind: SampleKind,
    /// Index of its layer in [`DepthData::layers`].
    pub layer: usize,
    /// Model of the current fit.
    pub model: Option<String>,
    /// Fit standing.
    pub tag: FitTag,
    /// theta_r (0 for models without one) and theta_s.
    pub theta_r: Option<f64>,
    /// theta_s.
    pub theta_s: Option<f64>,
    /// The model's other parameters.
    pub shape: Vec<(String, f64)>,
    /// Plant-available water, m3/m3.
    pub available_water: Option<f64>,
    /// Half the width of its 95 % interval, m3/m3, and whether that interval is a Monte Carlo
    /// one (the delta method in doubt for this fit).
    pub available_water_pm: Option<(f64, bool)>,
    /// Air-entry suction, cm.
    pub air_entry_cm: Option<f64>,
    /// RMSE, m3/m3.
    pub rmse: Option<f64>,
}

/// A layer of the depth view, with its curves.
#[derive(Debug, Clone, PartialEq)]
pub struct DepthLayer {
    /// Upper boundary, cm.
    pub top_cm: f64,
    /// Lower boundary, cm.
    pub bottom_cm: f64,
    /// Horizon label.
    pub horizon: Option<String>,
    /// The legend mark drawn along its curves (so the legend needs no colour).
    pub mark: char,
    /// Each fitted sample's curve.
    pub curves: Vec<LayerCurve>,
    /// Available water of its fitted lab cores (their random-effects mean), m3/m3.
    pub available_water: Option<f64>,
    /// Its 95 % interval, m3/m3.
    pub available_water_interval: Option<SumInterval>,
    /// Mean available water of its field pairings, m3/m3 (beside the lab mean, not summed).
    pub field_available_water: Option<f64>,
    /// Its part of the root zone, cm.
    pub depth_in_zone_cm: f64,
    /// Available water of that part, mm.
    pub water_mm: Option<f64>,
    /// Its 95 % interval, mm.
    pub water_mm_interval: Option<SumInterval>,
    /// Lab cores and fitted lab cores.
    pub lab_cores: usize,
    /// Fitted lab cores (the mean).
    pub fitted_cores: usize,
    /// Of those, stale.
    pub stale_cores: usize,
    /// USDA texture class, when sand, silt and clay are known.
    pub texture: Option<crate::model::texture::TextureClass>,
}

/// A fitted sample's curve in the depth view.
#[derive(Debug, Clone, PartialEq)]
pub struct LayerCurve {
    /// The sample.
    pub sample_id: i64,
    /// A field pairing (drawn dotted) rather than a lab core.
    pub field: bool,
    /// Points (log10 h, theta), left to right.
    pub points: Vec<(f64, f64)>,
}

/// Legend marks of the depth view's layers, top down.
pub const LAYER_MARKS: [char; 10] = ['1', '2', '3', '4', '5', '6', '7', '8', '9', '0'];

/// One site's depth view.
#[derive(Debug, Clone, PartialEq)]
pub struct DepthData {
    /// Site code.
    pub site: String,
    /// Site name.
    pub name: Option<String>,
    /// Root-zone depth of the sums, cm.
    pub root_zone_cm: f64,
    /// Layers top down.
    pub layers: Vec<DepthLayer>,
    /// Parameter table rows, top down.
    pub rows: Vec<DepthRow>,
    /// Profile available water down to the root-zone depth, mm.
    pub total_mm: f64,
    /// Its 95 % interval, mm (layers taken as independent).
    pub total_mm_interval: Option<SumInterval>,
    /// Why the total has no interval, when it has none.
    pub total_note: Option<String>,
    /// The campaign's pooled between-core variance the layer intervals use.
    pub between_cores: Option<BetweenCores>,
    /// Root-zone depth with no fitted layer, cm (the total is a lower bound then).
    pub uncovered_cm: f64,
    /// FC and PWP suctions, kPa.
    pub fc_kpa: f64,
    /// Wilting point, kPa.
    pub pwp_kpa: f64,
    /// The profile with layers without a fitted core filled from their texture class, shown
    /// instead of the measured one when the user asks (key `e`); `None` when no layer has an
    /// estimate.
    pub texture_fill: Option<texture_fill::TextureFill>,
}

impl DepthData {
    /// Gather the depth view of a site from its current fits and its profile.
    pub fn from_parts(
        site: &str,
        name: Option<String>,
        fits: &[SampleFit],
        profile: Option<&SiteProfile>,
        root_zone_cm: f64,
    ) -> DepthData {
        let mut layers: Vec<DepthLayer> = Vec::new();
        let mut rows = Vec::new();
        let mut layer_of: Vec<(f64, f64)> = Vec::new();
        for fit in fits {
            let key = (fit.sample.layer.top_cm, fit.sample.layer.bottom_cm);
            let li = if let Some(i) = layer_of.iter().position(|k| *k == key) {
                i
            } else {
                let water = profile.and_then(|p| {
                    p.layers.iter().find(|l| {
                        (l.layer.top_cm - key.0).abs() < 1e-9
                            && (l.layer.bottom_cm - key.1).abs() < 1e-9
                    })
                });
                layers.push(DepthLayer {
                    top_cm: key.0,
                    bottom_cm: key.1,
                    horizon: water.and_then(|w| w.horizon.clone()),
                    mark: LAYER_MARKS[layers.len() % LAYER_MARKS.len()],
                    curves: Vec::new(),
                    available_water: water.and_then(|w| w.available_water),
                    available_water_interval: water.and_then(|w| w.available_water_interval),
                    field_available_water: water.and_then(|w| w.field_available_water),
                    depth_in_zone_cm: water.map_or(0.0, |w| w.depth_in_zone_cm),
                    water_mm: water.and_then(|w| w.water_mm),
                    water_mm_interval: water.and_then(|w| w.water_mm_interval),
                    lab_cores: water.map_or(0, |w| w.lab_cores),
                    fitted_cores: water.map_or(0, |w| w.fitted_cores),
                    stale_cores: water.map_or(0, |w| w.stale_cores),
                    texture: water.and_then(|w| w.texture),
                });
                layer_of.push(key);
                layers.len() - 1
            };
            let report = fit.fit.as_ref().and_then(|f| f.report.as_ref());
            if let Some(stored) = &fit.fit {
                let (points, _) = curve_points(stored, PLOT_X_MAX);
                if !points.is_empty() {
                    layers[li].curves.push(LayerCurve {
                        sample_id: fit.sample.id,
                        field: fit.sample.kind == SampleKind::FieldPairing,
                        points,
                    });
                }
            }
            let curve = report.and_then(crate::analysis::water::curve_of);
            let (theta_r, theta_s) = curve.as_ref().map_or((None, None), |c| {
                let (r, s) = c.theta_range();
                (Some(r), Some(s))
            });
            let shape = report
                .map(|r| {
                    r.parameters
                        .iter()
                        .filter(|p| p.name != "theta_r" && p.name != "theta_s")
                        .map(|p| (p.name.clone(), p.value))
                        .collect()
                })
                .unwrap_or_default();
            let values = fit.derived.as_ref().map(|d| &d.values);
            rows.push(DepthRow {
                sample_id: fit.sample.id,
                sample: fit.sample.code.clone(),
                kind: fit.sample.kind,
                layer: li,
                model: fit.fit.as_ref().map(|f| f.model.clone()),
                tag: FitTag::of(&fit.state),
                theta_r,
                theta_s,
                shape,
                available_water: values.and_then(|v| v.plant_available_water),
                available_water_pm: fit
                    .derived
                    .as_ref()
                    .and_then(|d| d.intervals.plant_available_water.as_ref())
                    .map(|i| {
                        (
                            i.half_width(),
                            i.method == crate::fit::IntervalMethod::MonteCarlo,
                        )
                    }),
                air_entry_cm: values.and_then(|v| v.air_entry.map(|a| a.suction_cm)),
                rmse: report.map(|r| r.rmse),
            });
        }
        DepthData {
            site: site.to_string(),
            name,
            root_zone_cm,
            layers,
            rows,
            total_mm: profile.map_or(0.0, |p| p.total_mm),
            total_mm_interval: profile.and_then(|p| p.total_mm_interval),
            total_note: profile.and_then(|p| p.total_note.clone()),
            between_cores: profile.and_then(|p| p.between_cores),
            uncovered_cm: profile.map_or(root_zone_cm, SiteProfile::uncovered_cm),
            fc_kpa: profile.map_or(crate::store::campaign::DEFAULT_FC_KPA, |p| p.fc_kpa),
            pwp_kpa: profile.map_or(crate::store::campaign::DEFAULT_PWP_KPA, |p| p.pwp_kpa),
            texture_fill: profile.and_then(texture_fill::TextureFill::of),
        }
    }
}

/// The depth screen: which site, the root-zone depth, the loaded view and the table cursor.
#[derive(Debug, Clone, PartialEq)]
pub struct DepthState {
    /// Site code shown.
    pub site: Option<String>,
    /// Depth the profile's available water is summed to, cm.
    pub root_zone_cm: f64,
    /// The loaded view (for `site` and `root_zone_cm`).
    pub data: Option<DepthData>,
    /// Row of the parameter table.
    pub cursor: usize,
    /// Show layers without a fitted core filled with their texture estimate (key `e`).
    pub fill_texture: bool,
}

impl Default for DepthState {
    fn default() -> Self {
        Self {
            site: None,
            root_zone_cm: crate::analysis::water::DEFAULT_ROOT_ZONE_CM,
            data: None,
            cursor: 0,
            fill_texture: false,
        }
    }
}
