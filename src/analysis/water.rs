//! The numbers a report hands on, computed in one place: per fit (water content at field
//! capacity and wilting point, available water, air entry, inflection points, conductivity),
//! each with its 95 % interval; per layer (available water over its lab cores, a
//! random-effects mean with its interval) and per site (the profile's available water in mm
//! down to a root-zone depth, with its interval).
//!
//! Everything is computed on read from the stored fits and the campaign's current field
//! capacity and wilting point suctions, so changing those (`porewise set`) needs no refit.
//!
//! Intervals of a fit's values: the delta method with the analytic gradients of
//! [`crate::model::derived::gradient`] and the fit's covariance, checked against Monte Carlo
//! draws of the parameters where the value may not be linear enough ([`crate::fit::delta`]).
//! Suctions (air entry, h at Se = 1/2) and conductivities get theirs on the log scale, as the
//! suction parameters do. Parameters fixed or held on a bound are treated as known.
//!
//! Layers: a layer's available water is the random-effects mean of its lab cores
//! (DerSimonian & Laird 1986, [`crate::fit::pooling`]), each core's within-core variance the
//! square of its available water's standard error and the between-core variance tau^2 pooled
//! over the campaign's layers with two or more fitted lab cores ([`between_cores`]). The
//! profile's interval adds the layers' variances (the layers taken as independent).

use std::collections::BTreeMap;
use std::str::FromStr;

use rusqlite::Connection;
use serde::{Deserialize, Serialize};

use crate::fit::delta::{Checker, Interval95, MC_DRAWS, SEARCH_DRAWS, known_parameters};
use crate::fit::pooling::{Study, Z975, pooled_tau2, random_effects_mean};
use crate::fit::{FitReport, IntervalScale};
use crate::model::conductivity::{ConductivityForm, ConductivityModel, DEFAULT_PORE_CONNECTIVITY};
use crate::model::derived::gradient::{
    air_entry_gradient, available_water_gradient, conductivity_gradient, half_saturation_gradient,
    theta_gradient,
};
use crate::model::derived::{
    DerivedValues, air_entry_estimate, derive, suction_at_half_saturation, theta_at_kpa,
};
use crate::model::domain::{LayerRef, SampleKind};
use crate::model::number::significant;
use crate::model::retention::{ModelKind, RetentionCurve};
use crate::model::texture::TextureClass;
use crate::model::units::CM_PER_KPA;
use crate::store::fits::{self, FitState, Selection};
use crate::store::{CampaignSettings, Result, layers};

/// Default depth to which a profile's available water is summed, cm (common practice for
/// a crop root zone).
pub const DEFAULT_ROOT_ZONE_CM: f64 = 100.0;

/// 95 % intervals of a fit's derived values (`None` where the value or its interval does not
/// exist); see the module documentation for how they are obtained.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct DerivedIntervals {
    /// theta at field capacity, m3/m3.
    pub theta_field_capacity: Option<Interval95>,
    /// theta at the wilting point, m3/m3.
    pub theta_wilting_point: Option<Interval95>,
    /// Available water, m3/m3.
    pub plant_available_water: Option<Interval95>,
    /// The air-entry estimate, cm (log scale).
    pub air_entry_cm: Option<Interval95>,
    /// The suction at Se = 1/2, cm (log scale).
    pub suction_at_half_saturation_cm: Option<Interval95>,
    /// K at field capacity, cm/day (log scale; Ks treated as known).
    pub k_field_capacity_cm_per_day: Option<Interval95>,
    /// K at the wilting point, cm/day (log scale; Ks treated as known).
    pub k_wilting_point_cm_per_day: Option<Interval95>,
    /// Parameters treated as known: fixed, or held on a bound (no covariance entry).
    pub known_parameters: Vec<String>,
    /// Why the fit's values have no intervals, when they have none.
    pub missing: Option<String>,
}

/// Derived values of one fit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FitDerived {
    /// Water contents, available water, air entry, inflection points.
    pub values: DerivedValues,
    /// Their 95 % intervals (and those of the K values).
    pub intervals: DerivedIntervals,
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

/// One fit's curve with the delta method and its Monte Carlo check: every value and its
/// interval come from here, whoever shows them.
struct Derivation<'a> {
    kind: ModelKind,
    curve: RetentionCurve,
    checker: Option<Checker<'a>>,
}

impl<'a> Derivation<'a> {
    fn of(report: &'a FitReport) -> Option<Derivation<'a>> {
        let curve = curve_of(report)?;
        Some(Derivation {
            kind: curve.kind(),
            curve,
            checker: Checker::of(report),
        })
    }

    fn params(&self) -> &[f64] {
        self.curve.params()
    }

    /// The interval of `value` with gradient `grad`, `f` computing the value from a curve
    /// (the same function that computed `value`, for the Monte Carlo check).
    fn interval(
        &self,
        value: Option<f64>,
        grad: Option<Vec<f64>>,
        scale: IntervalScale,
        f: &dyn Fn(&RetentionCurve) -> Option<f64>,
    ) -> Option<Interval95> {
        self.interval_over(value, grad, scale, f, MC_DRAWS)
    }

    /// As [`Self::interval`], the Monte Carlo check over the first `draws` draws.
    fn interval_over(
        &self,
        value: Option<f64>,
        grad: Option<Vec<f64>>,
        scale: IntervalScale,
        f: &dyn Fn(&RetentionCurve) -> Option<f64>,
        draws: usize,
    ) -> Option<Interval95> {
        let (checker, value, grad) = (self.checker.as_ref()?, value?, grad?);
        let kind = self.kind;
        let g = |q: &[f64]| {
            RetentionCurve::new(kind, q.to_vec())
                .ok()
                .and_then(|c| f(&c))
        };
        checker.interval_over(value, &grad, scale, &g, draws)
    }

    /// Draws of the Monte Carlo check for the air entry and h at Se = 1/2: fewer where the
    /// model finds them by a numerical search (its inflection, or an inverse by bisection).
    fn search_draws(&self) -> usize {
        match self.kind {
            ModelKind::FredlundXing | ModelKind::Durner => SEARCH_DRAWS,
            _ => MC_DRAWS,
        }
    }

    /// Available water under these suctions, with its interval.
    fn available_water(&self, fc_kpa: f64, pwp_kpa: f64) -> (Option<f64>, Option<Interval95>) {
        let aw_of = |c: &RetentionCurve| {
            let aw = theta_at_kpa(c, fc_kpa)? - theta_at_kpa(c, pwp_kpa)?;
            aw.is_finite().then_some(aw)
        };
        let value = aw_of(&self.curve);
        let grad = available_water_gradient(
            self.kind,
            self.params(),
            fc_kpa * CM_PER_KPA,
            pwp_kpa * CM_PER_KPA,
        );
        let interval = self.interval(value, grad, IntervalScale::Linear, &aw_of);
        (value, interval)
    }
}

/// Why a report's derived values have no intervals, if they have none.
fn missing_intervals(report: &FitReport) -> Option<String> {
    if report.covariance.is_some() {
        return None;
    }
    Some(if report.n_points <= report.n_free_params {
        format!(
            "no intervals: {} readings for {} free parameters leave no degrees of freedom",
            report.n_points, report.n_free_params
        )
    } else {
        "no intervals: the fit has no covariance (its Jacobian is singular)".to_string()
    })
}

/// A fit's available water under the campaign's suctions with its 95 % interval, as
/// [`derive_fit`] gives them (layers and profiles use this).
pub fn fit_available_water(
    report: &FitReport,
    settings: &CampaignSettings,
) -> Option<(f64, Option<Interval95>)> {
    let d = Derivation::of(report)?;
    let (value, interval) = d.available_water(settings.fc_kpa, settings.pwp_kpa);
    value.map(|v| (v, interval))
}

/// A fit's available water between two suctions (kPa) with its 95 % interval, as
/// [`fit_available_water`] gives it under a campaign's settings.
pub fn available_water_between(
    report: &FitReport,
    fc_kpa: f64,
    pwp_kpa: f64,
) -> Option<(f64, Option<Interval95>)> {
    let d = Derivation::of(report)?;
    let (value, interval) = d.available_water(fc_kpa, pwp_kpa);
    value.map(|v| (v, interval))
}

/// Derived values of a fit under the campaign's field capacity and wilting point, with their
/// 95 % intervals; the conductivity in the form asked for (see [`conductivity_model_for`]).
pub fn derive_fit(
    report: &FitReport,
    settings: &CampaignSettings,
    ks_cm_per_day: Option<f64>,
    form: Option<ConductivityForm>,
) -> Option<FitDerived> {
    let d = Derivation::of(report)?;
    let (kind, p) = (d.kind, d.params());
    let (fc_kpa, pwp_kpa) = (settings.fc_kpa, settings.pwp_kpa);
    let values = derive(&d.curve, fc_kpa, pwp_kpa);
    let model = conductivity_model_for(kind, form);
    let l = DEFAULT_PORE_CONNECTIVITY;
    let k_at = |c: &RetentionCurve, kpa: f64| {
        let (model, ks) = (model?, ks_cm_per_day?);
        model.conductivity(kpa * CM_PER_KPA, c.params(), ks, l)
    };
    let k_interval = |kpa: f64| {
        let (model, ks) = (model?, ks_cm_per_day?);
        let grad = conductivity_gradient(model, kpa * CM_PER_KPA, p, ks, l);
        d.interval(k_at(&d.curve, kpa), grad, IntervalScale::Log, &|c| {
            k_at(c, kpa)
        })
    };
    let theta_interval = |kpa: f64, value: Option<f64>| {
        let grad = theta_gradient(kind, p, kpa * CM_PER_KPA);
        d.interval(value, grad, IntervalScale::Linear, &|c| {
            theta_at_kpa(c, kpa)
        })
    };
    let intervals = DerivedIntervals {
        theta_field_capacity: theta_interval(fc_kpa, values.theta_field_capacity),
        theta_wilting_point: theta_interval(pwp_kpa, values.theta_wilting_point),
        plant_available_water: d.available_water(fc_kpa, pwp_kpa).1,
        air_entry_cm: d.interval_over(
            values.air_entry.map(|a| a.suction_cm),
            air_entry_gradient(kind, p),
            IntervalScale::Log,
            &|c| air_entry_estimate(c).map(|a| a.suction_cm),
            d.search_draws(),
        ),
        suction_at_half_saturation_cm: d.interval_over(
            values.suction_at_half_saturation_cm,
            half_saturation_gradient(kind, p),
            IntervalScale::Log,
            &suction_at_half_saturation,
            d.search_draws(),
        ),
        k_field_capacity_cm_per_day: k_interval(fc_kpa),
        k_wilting_point_cm_per_day: k_interval(pwp_kpa),
        known_parameters: if report.covariance.is_some() {
            known_parameters(report)
        } else {
            Vec::new()
        },
        missing: missing_intervals(report),
    };
    Some(FitDerived {
        values,
        intervals,
        ks_cm_per_day,
        conductivity_model: model,
        k_field_capacity_cm_per_day: k_at(&d.curve, fc_kpa),
        k_wilting_point_cm_per_day: k_at(&d.curve, pwp_kpa),
    })
}

/// A 95 % interval of a layer's or a profile's available water (normal, see
/// [`crate::fit::pooling`]).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SumInterval {
    /// Lower end.
    pub lo95: f64,
    /// Upper end.
    pub hi95: f64,
    /// Standard error.
    pub se: f64,
}

impl SumInterval {
    pub(crate) fn around(value: f64, se: f64) -> Option<SumInterval> {
        let half = Z975 * se;
        (value.is_finite() && half.is_finite()).then_some(SumInterval {
            lo95: value - half,
            hi95: value + half,
            se,
        })
    }

    /// Half the width (the `±`).
    pub fn half_width(&self) -> f64 {
        0.5 * (self.hi95 - self.lo95)
    }

    pub(crate) fn scaled(self, factor: f64) -> SumInterval {
        SumInterval {
            lo95: self.lo95 * factor,
            hi95: self.hi95 * factor,
            se: self.se * factor,
        }
    }
}

/// The between-core variance of available water, pooled over the campaign's layers.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct BetweenCores {
    /// tau^2, (m3/m3)^2: DerSimonian & Laird's estimate pooled over the layers.
    pub tau2: f64,
    /// tau = sqrt(tau^2), m3/m3.
    pub tau: f64,
    /// Layers it came from (those with two or more fitted lab cores with a standard error).
    pub layers: usize,
    /// Lab cores in those layers.
    pub cores: usize,
}

impl BetweenCores {
    /// `τ² = 1.2e-4 (m3/m3)², τ = 0.011 m3/m3, pooled over 5 layers (14 cores)`.
    pub fn describe(&self) -> String {
        format!(
            "τ² = {:.1e} (m3/m3)², τ = {} m3/m3, pooled over {} layer{} ({} cores)",
            self.tau2,
            significant(self.tau, 2).unwrap_or_default(),
            self.layers,
            if self.layers == 1 { "" } else { "s" },
            self.cores
        )
    }
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
    /// Available water of the layer, m3/m3: the random-effects mean over the fitted lab
    /// cores (the plain mean where the layer has no interval).
    pub available_water: Option<f64>,
    /// Its 95 % interval, m3/m3.
    pub available_water_interval: Option<SumInterval>,
    /// Why the layer's available water has no interval, when it has none.
    pub interval_note: Option<String>,
    /// Mean available water of the layer's field pairings, shown beside (not in the sum), m3/m3.
    pub field_available_water: Option<f64>,
    /// Thickness of the layer inside the root zone, cm.
    pub depth_in_zone_cm: f64,
    /// Available water of the layer's part of the root zone, mm.
    pub water_mm: Option<f64>,
    /// Its 95 % interval, mm.
    pub water_mm_interval: Option<SumInterval>,
    /// USDA texture class, when sand, silt and clay are known.
    pub texture: Option<TextureClass>,
    /// Set when the available water is an estimate from the texture class (a layer without a
    /// fitted core, filled on request: `list profiles --fill-from-texture`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub estimate: Option<TextureEstimate>,
}

/// A layer's retention curve estimated from its texture class, not measured.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TextureEstimate {
    /// The class.
    pub class: TextureClass,
    /// The estimate's basis word (`texture only`).
    pub basis: &'static str,
    /// How it was made and where its numbers come from.
    pub source: String,
    /// van Genuchten theta_r, theta_s (m3/m3), alpha (1/cm), n.
    pub parameters: [f64; 4],
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
    /// Its 95 % interval, mm: the layers' variances added (layers taken as independent).
    pub total_mm_interval: Option<SumInterval>,
    /// Why the total has no interval, when it has none.
    pub total_note: Option<String>,
    /// Depth of the root zone covered by layers with available water, cm.
    pub covered_cm: f64,
    /// The campaign's pooled between-core variance the layer intervals use.
    pub between_cores: Option<BetweenCores>,
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

/// One lab core's available water and its standard error.
#[derive(Debug, Clone, Copy)]
struct CoreWater {
    aw: f64,
    se: Option<f64>,
}

/// What one layer's samples give.
#[derive(Debug, Clone)]
struct LayerCores {
    layer: LayerRef,
    horizon: Option<String>,
    texture: Option<TextureClass>,
    lab_cores: usize,
    stale: usize,
    lab: Vec<CoreWater>,
    field: Vec<f64>,
}

impl LayerCores {
    /// The cores as studies of a random-effects mean: `None` unless each has a positive
    /// standard error.
    fn studies(&self) -> Option<Vec<Study>> {
        self.lab
            .iter()
            .map(|c| {
                c.se.filter(|se| *se > 0.0).map(|se| Study {
                    value: c.aw,
                    variance: se * se,
                })
            })
            .collect()
    }
}

/// Every layer (of one site, or all) with its cores' available water, top down per site.
fn gather(
    conn: &Connection,
    settings: &CampaignSettings,
    site: Option<&str>,
) -> Result<Vec<LayerCores>> {
    let selection = Selection {
        site: site.map(str::to_string),
        ..Selection::default()
    };
    let samples = fits::samples(conn, &selection)?;
    let summaries = fits::summaries(conn, &samples)?;
    let mut by_layer: BTreeMap<i64, Vec<&fits::SampleInfo>> = BTreeMap::new();
    for s in &samples {
        by_layer.entry(s.layer_id).or_default().push(s);
    }
    let mut out = Vec::new();
    for row in layers::list(conn, site)? {
        let layer = row.stored.layer;
        let mut cores = LayerCores {
            layer: layer.at.clone(),
            horizon: layer.horizon.clone(),
            texture: TextureClass::of_layer(layer.sand_pct, layer.silt_pct, layer.clay_pct),
            lab_cores: 0,
            stale: 0,
            lab: Vec::new(),
            field: Vec::new(),
        };
        for s in by_layer.get(&row.stored.id).map_or(&[][..], Vec::as_slice) {
            if s.kind == SampleKind::LabCore {
                cores.lab_cores += 1;
            }
            let Some(summary) = summaries.get(&s.id) else {
                continue;
            };
            let Some(fit) = fits::current(conn, s.id)? else {
                continue;
            };
            let Some((aw, interval)) = fit
                .report
                .as_ref()
                .and_then(|r| fit_available_water(r, settings))
            else {
                continue;
            };
            match s.kind {
                SampleKind::LabCore => {
                    cores.lab.push(CoreWater {
                        aw,
                        se: interval.map(|i| i.se),
                    });
                    if matches!(summary.state, FitState::Stale(_)) {
                        cores.stale += 1;
                    }
                }
                SampleKind::FieldPairing => cores.field.push(aw),
            }
        }
        out.push(cores);
    }
    Ok(out)
}

fn pool<'a>(layers: impl Iterator<Item = &'a LayerCores>) -> Option<BetweenCores> {
    let groups: Vec<Vec<Study>> = layers.filter_map(LayerCores::studies).collect();
    let pooled = pooled_tau2(&groups)?;
    Some(BetweenCores {
        tau2: pooled.tau2,
        tau: pooled.tau2.sqrt(),
        layers: pooled.groups,
        cores: pooled.studies,
    })
}

/// The between-core variance of the campaign's lab cores' available water under its field
/// capacity and wilting point, pooled over every layer with two or more fitted lab cores;
/// `None` when there is no such layer.
///
/// # Errors
/// An SQLite error, or a stored fit that does not decode.
pub fn between_cores(
    conn: &Connection,
    settings: &CampaignSettings,
) -> Result<Option<BetweenCores>> {
    Ok(pool(gather(conn, settings, None)?.iter()))
}

/// The available-water profile of every site (or one), from the current fits; the layer
/// intervals use the between-core variance pooled over the whole campaign.
///
/// A layer's available water is the random-effects mean over its lab cores' current fits;
/// field pairings are shown beside it. Stale fits are used but counted, so a listing can say
/// so.
///
/// # Errors
/// An SQLite error, or a stored fit that does not decode.
pub fn profiles(
    conn: &Connection,
    settings: &CampaignSettings,
    root_zone_cm: f64,
    site: Option<&str>,
) -> Result<Vec<SiteProfile>> {
    let all = gather(conn, settings, None)?;
    let pooled = pool(all.iter());
    Ok(build(
        all.into_iter()
            .filter(|l| site.is_none_or(|s| l.layer.site == s)),
        settings,
        root_zone_cm,
        pooled,
    ))
}

/// As [`profiles`] with the campaign's between-core variance already at hand (from
/// [`between_cores`] under the same settings), so only the site's fits are read.
///
/// # Errors
/// As [`profiles`].
pub fn profiles_pooled(
    conn: &Connection,
    settings: &CampaignSettings,
    root_zone_cm: f64,
    site: Option<&str>,
    pooled: Option<BetweenCores>,
) -> Result<Vec<SiteProfile>> {
    Ok(build(
        gather(conn, settings, site)?.into_iter(),
        settings,
        root_zone_cm,
        pooled,
    ))
}

/// A layer's available water, its interval and why it has none.
fn layer_mean(
    cores: &LayerCores,
    pooled: Option<BetweenCores>,
) -> (Option<f64>, Option<SumInterval>, Option<String>) {
    let plain = mean(&cores.lab.iter().map(|c| c.aw).collect::<Vec<_>>());
    if cores.lab.is_empty() {
        return (None, None, None);
    }
    let Some(studies) = cores.studies() else {
        return (
            plain,
            None,
            Some(
                "no interval: a core's fit gives no standard error of its available water \
                 (plain mean)"
                    .into(),
            ),
        );
    };
    let Some(pooled) = pooled else {
        return (
            plain,
            None,
            Some(
                "no interval: no layer of the campaign has two fitted lab cores to estimate the \
                 between-core variance (plain mean)"
                    .into(),
            ),
        );
    };
    match random_effects_mean(&studies, pooled.tau2) {
        Some(re) => (
            Some(re.mean),
            SumInterval::around(re.mean, re.variance.sqrt()),
            None,
        ),
        None => (plain, None, Some("no interval (plain mean)".into())),
    }
}

fn build(
    layers: impl Iterator<Item = LayerCores>,
    settings: &CampaignSettings,
    root_zone_cm: f64,
    pooled: Option<BetweenCores>,
) -> Vec<SiteProfile> {
    let mut out: Vec<SiteProfile> = Vec::new();
    for cores in layers {
        let (available_water, interval, note) = layer_mean(&cores, pooled);
        let depth = depth_in_zone(cores.layer.top_cm, cores.layer.bottom_cm, root_zone_cm);
        // mm = m3/m3 * cm * 10 mm/cm
        let mm = depth * 10.0;
        let water = LayerWater {
            layer: cores.layer.clone(),
            horizon: cores.horizon.clone(),
            lab_cores: cores.lab_cores,
            fitted_cores: cores.lab.len(),
            stale_cores: cores.stale,
            available_water,
            available_water_interval: interval,
            interval_note: note,
            field_available_water: mean(&cores.field),
            depth_in_zone_cm: depth,
            water_mm: available_water.map(|aw| aw * mm),
            water_mm_interval: interval.map(|i| i.scaled(mm)),
            texture: cores.texture,
            estimate: None,
        };
        match out.last_mut() {
            Some(p) if p.site == cores.layer.site => p.layers.push(water),
            _ => out.push(SiteProfile {
                site: cores.layer.site.clone(),
                root_zone_cm,
                fc_kpa: settings.fc_kpa,
                pwp_kpa: settings.pwp_kpa,
                layers: vec![water],
                total_mm: 0.0,
                total_mm_interval: None,
                total_note: None,
                covered_cm: 0.0,
                between_cores: pooled,
            }),
        }
    }
    for p in &mut out {
        recompute_totals(p);
    }
    out
}

/// A profile's total, its interval and the covered depth from its layers' water (after the
/// layers were built, or after estimates were filled in).
pub(crate) fn recompute_totals(p: &mut SiteProfile) {
    let root_zone_cm = p.root_zone_cm;
    p.total_mm_interval = None;
    p.total_note = None;
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
    let counted = p
        .layers
        .iter()
        .filter(|l| l.water_mm.is_some() && l.depth_in_zone_cm > 0.0);
    let mut variance = 0.0;
    let mut lacking = None;
    for l in counted {
        match l.water_mm_interval {
            Some(i) => variance += i.se * i.se,
            None => {
                lacking.get_or_insert_with(|| {
                    format!(
                        "no interval: layer {}-{} cm has none",
                        significant(l.layer.top_cm, 6).unwrap_or_default(),
                        significant(l.layer.bottom_cm, 6).unwrap_or_default()
                    )
                });
            }
        }
    }
    match lacking {
        Some(note) => p.total_note = Some(note),
        None if p.covered_cm > 0.0 => {
            p.total_mm_interval = SumInterval::around(p.total_mm, variance.sqrt());
        }
        None => {}
    }
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
