//! The schema of `campaign.json`: the whole campaign (or one site) as one JSON document.
//!
//! Layout (schema version [`SCHEMA_VERSION`]):
//!
//! ```text
//! { "format": "porewise-campaign", "schema_version": 5,
//!   "program": {"name", "version"}, "exported_at", "fingerprint_sha256",
//!   "data": { "campaign", "scope", "imports": [..],
//!             "sites": [ { ..., "profile", "layers": [ { ..., "water", "samples": [
//!                 { ..., "fit_state", "readings": [ { ..., "provenance", "flags": [..] } ],
//!                   "fit": { ..., "parameters", "statistics", "covariance", "correlation",
//!                            "residuals", "ranking", "derived" } } ] } ] } ] } }
//! ```
//!
//! Units are canonical and in the field names where a field has one (`suction_cm`,
//! `theta_m3_m3`, `*_kpa`, `*_mm`); parameter values are in the unit their name carries
//! (`alpha_per_cm`, `h_b_cm`; `theta_*` in m3/m3; the others are dimensionless). A value that
//! does not apply is `null`, never NaN. Sites are ordered by code, layers top down, samples by
//! code, readings by suction then id, flags by id.
//!
//! `fingerprint_sha256` is the SHA-256 of the compact JSON of `data` as porewise writes it
//! (field order as documented here): everything but the program, the export time and the
//! fingerprint itself. Two exports of the same campaign file with the same options have the
//! same fingerprint, whichever porewise version of the same schema version wrote them.
//!
//! Version 3 added the 95 % intervals: each fit's `derived.intervals` (per value `lo95`,
//! `hi95`, `se`, `scale`, `method`, `note`; the parameters taken as known; why there are none),
//! each layer's `available_water_interval` and `water_mm_interval` (with `interval_note`), the
//! profile's `total_mm_interval` (with `total_note`) and the campaign's `between_cores`, the
//! pooled between-core variance of available water the layer intervals use.
//!
//! Version 4 added texture: each layer's `texture_class` and, for a layer with a class and
//! no fitted lab core, its `texture_estimate` (class-mean curve, available water with the
//! class spread as interval, source); each fit's `basis` and `prior`.
//! Version 4 also added measured conductivity: each sample's `ks_cm_per_day` (measured) and
//! `conductivity_readings` (K in cm/day at `suction_cm` or `theta_m3_m3`, with provenance and
//! whether the current fit used it), and for a fit made with them `fit.joint` (the
//! conductivity model, `ks_cm_per_day` and `pore_connectivity` with their errors, the
//! covariance of every parameter, the weighting, the statistics of each set and jointly).
//!
//! Version 5 added `excluded` to each conductivity reading: a flag leaves it out of joint
//! fits (`porewise flag DB ID --conductivity`); and each layer's `pedotransfer_estimate`
//! (Saxton & Rawls 2006, for a layer with sand, clay and organic carbon and no fitted core).
//!
//! A few members reuse the fit engine's documented types ([`ParamEstimate`], [`ParamMatrix`],
//! [`Termination`], [`DerivedValues`], [`Ranking`]), the analysis' interval types
//! ([`DerivedIntervals`], [`SumInterval`], [`BetweenCores`]) and the store's [`FitState`]; a change to
//! any of them is a change of this schema and bumps [`SCHEMA_VERSION`] (a test lists every key
//! path of the document, so such a change cannot go unnoticed).

use std::collections::BTreeMap;
use std::io::{self, Seek, SeekFrom, Write};

use chrono::{DateTime, NaiveDate, SecondsFormat, Utc};
use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use super::snapshot::{LayerPart, ReadingFlag, SamplePart, SitePart, Snapshot};
use crate::analysis::texture::{
    LayerEstimate, PedotransferEstimate, layer_estimate, pedotransfer_estimate,
};
use crate::analysis::water::{BetweenCores, DerivedIntervals, LayerWater, SumInterval};
use crate::fit::prior::{BASIS_READINGS, PriorBasis, basis_of};
use crate::fit::{FitReport, Interval95, ParamEstimate, ParamMatrix, Termination};
use crate::model::conductivity::{ConductivityForm, ConductivityModel};
use crate::model::derived::DerivedValues;
use crate::model::domain::{Branch, FlagOrigin, FlagStatus, SampleKind};
use crate::model::number::hex;
use crate::model::texture::TextureClass;
use crate::store::fits::{FitState, Ranking, StoredFit};

/// The version of this document layout; bumped on any change to it.
pub const SCHEMA_VERSION: u32 = 5;

/// The value of the `format` member, naming what the document is.
pub const FORMAT: &str = "porewise-campaign";

/// The whole document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CampaignDocument {
    /// Always [`FORMAT`].
    pub format: String,
    /// [`SCHEMA_VERSION`] of the writer.
    pub schema_version: u32,
    /// The program that wrote the file.
    pub program: ProgramInfo,
    /// When the export was made (UTC, RFC 3339); the only member that changes between two
    /// exports of the same campaign.
    pub exported_at: String,
    /// SHA-256 (hex) of the compact JSON of `data`.
    pub fingerprint_sha256: String,
    /// The campaign's content.
    pub data: CampaignData,
}

/// Name and version of the writing program.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct ProgramInfo {
    /// `porewise`.
    pub name: String,
    /// Its version (Cargo package version).
    pub version: String,
}

/// Everything the fingerprint covers.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CampaignData {
    /// The campaign's settings row.
    pub campaign: CampaignInfo,
    /// What the export covers.
    pub scope: Scope,
    /// Every imported file, oldest first (readings point at them by `id`).
    pub imports: Vec<ImportInfo>,
    /// The sites, by code.
    pub sites: Vec<SiteData>,
}

/// The campaign's settings.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CampaignInfo {
    /// Name.
    pub name: String,
    /// Free text.
    pub description: Option<String>,
    /// When the campaign file was created (UTC, RFC 3339).
    pub created_at: String,
    /// Suction at field capacity used by every derived value, kPa.
    pub field_capacity_kpa: f64,
    /// Suction at the permanent wilting point, kPa.
    pub wilting_point_kpa: f64,
    /// The between-core variance of available water under these suctions, pooled over the
    /// campaign's layers with two or more fitted lab cores (DerSimonian & Laird 1986): `tau2`
    /// in (m3/m3)^2, `tau` in m3/m3, the `layers` and `cores` it came from; `null` when no
    /// layer has two fitted lab cores.
    pub between_cores: Option<BetweenCores>,
}

/// What the export covers.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Scope {
    /// The one site exported, or `null` for the whole campaign.
    pub site: Option<String>,
    /// Depth down to which profile available water is summed, cm.
    pub root_zone_cm: f64,
    /// The conductivity form asked for at export (`mualem`, `burdine`), used where a fit's
    /// model has it; `null`: the form recorded with each fit. Each fit's `derived` names the
    /// conductivity model its K values come from.
    pub conductivity: Option<ConductivityForm>,
}

/// One imported file (provenance of sites, layers, samples and readings).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ImportInfo {
    /// Import id (local to the campaign file).
    pub id: i64,
    /// The file as the user named it.
    pub file_name: String,
    /// SHA-256 of its bytes, hex.
    pub sha256: String,
    /// `sites`, `layers`, `lab` or `logger`.
    pub kind: String,
    /// Data rows in the file.
    pub rows: u64,
    /// Forced past an earlier import of the same content.
    pub forced: bool,
    /// When it was imported (UTC, RFC 3339).
    pub imported_at: String,
}

/// One site.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SiteData {
    /// Code.
    pub code: String,
    /// Descriptive name.
    pub name: Option<String>,
    /// WGS 84 latitude, decimal degrees.
    pub latitude_deg: Option<f64>,
    /// WGS 84 longitude, decimal degrees.
    pub longitude_deg: Option<f64>,
    /// Elevation above sea level, m.
    pub elevation_m: Option<f64>,
    /// Free text.
    pub notes: Option<String>,
    /// Stable identifier (UUID).
    pub uid: String,
    /// The profile's available water down to the root-zone depth; `null` without layers.
    pub profile: Option<ProfileData>,
    /// Layers, top down.
    pub layers: Vec<LayerData>,
}

/// A site's available water down to the root-zone depth.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ProfileData {
    /// Depth of the sum, cm.
    pub root_zone_cm: f64,
    /// Sum over the layers with available water, mm.
    pub total_mm: f64,
    /// Its 95 % interval, mm (`lo95`, `hi95`, `se`; the layers taken as independent).
    pub total_mm_interval: Option<SumInterval>,
    /// Why the total has no interval, when it has none.
    pub total_note: Option<String>,
    /// Depth of the root zone covered by layers with available water, cm.
    pub covered_cm: f64,
    /// Depth not covered (no layer, or no fitted lab core): the total is a lower bound when
    /// this is above zero, cm.
    pub uncovered_cm: f64,
}

/// One layer.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LayerData {
    /// Upper boundary, cm below the surface.
    pub top_cm: f64,
    /// Lower boundary, cm below the surface.
    pub bottom_cm: f64,
    /// Horizon label.
    pub horizon: Option<String>,
    /// Sand, mass %.
    pub sand_pct: Option<f64>,
    /// Silt, mass %.
    pub silt_pct: Option<f64>,
    /// Clay, mass %.
    pub clay_pct: Option<f64>,
    /// USDA texture class (`silty clay loam`), when sand, silt and clay are known.
    pub texture_class: Option<String>,
    /// Organic carbon, mass %.
    pub organic_carbon_pct: Option<f64>,
    /// Dry bulk density, g/cm3.
    pub bulk_density_g_cm3: Option<f64>,
    /// Saturated hydraulic conductivity, cm/day.
    pub ks_cm_per_day: Option<f64>,
    /// Stable identifier (UUID).
    pub uid: String,
    /// The layer's available water and its share of the profile sum.
    pub water: Option<LayerWaterData>,
    /// For a layer with a texture class and no fitted lab core: its estimate from the class
    /// (basis `texture only`, not in the profile sum).
    pub texture_estimate: Option<TextureEstimateData>,
    /// For a layer with sand, clay and organic carbon and no fitted lab core: the Saxton &
    /// Rawls (2006) pedotransfer estimate (schema 5; not in the profile sum).
    pub pedotransfer_estimate: Option<PedotransferEstimate>,
    /// Samples, by code.
    pub samples: Vec<SampleData>,
}

/// A layer's van Genuchten curve and available water estimated from its texture class.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TextureEstimateData {
    /// USDA texture class.
    pub class: String,
    /// `texture only`.
    pub basis: String,
    /// How it was made and where its numbers come from.
    pub source: String,
    /// The class mean: theta_r, theta_s (m3/m3), alpha_per_cm (1/cm), n.
    pub parameters: BTreeMap<String, f64>,
    /// Available water under the campaign's suctions, m3/m3.
    pub available_water_m3_m3: f64,
    /// Its 95 % interval from the class spread.
    pub available_water_interval: Option<Interval95>,
}

impl From<LayerEstimate> for TextureEstimateData {
    fn from(e: LayerEstimate) -> Self {
        let names = ["theta_r", "theta_s", "alpha_per_cm", "n"];
        Self {
            class: e.class.name().to_string(),
            basis: e.basis.to_string(),
            source: e.source,
            parameters: names
                .iter()
                .map(ToString::to_string)
                .zip(e.parameters)
                .collect(),
            available_water_m3_m3: e.available_water,
            available_water_interval: e.interval,
        }
    }
}

/// A layer's available water (mean over its lab cores' current fits).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LayerWaterData {
    /// Lab cores taken from the layer.
    pub lab_cores: usize,
    /// Lab cores whose current fit gives available water (they make the mean).
    pub fitted_cores: usize,
    /// Of those, cores whose fit is stale.
    pub stale_cores: usize,
    /// Plant-available water of the layer, m3/m3: the random-effects mean over the fitted lab
    /// cores (their plain mean when the layer has no interval).
    pub available_water_m3_m3: Option<f64>,
    /// Its 95 % interval, m3/m3 (`lo95`, `hi95`, `se`).
    pub available_water_interval: Option<SumInterval>,
    /// Why the layer has no interval, when it has none.
    pub interval_note: Option<String>,
    /// Mean available water of the field pairings (not in the sum), m3/m3.
    pub field_available_water_m3_m3: Option<f64>,
    /// Thickness of the layer inside the root zone, cm.
    pub depth_in_root_zone_cm: f64,
    /// Available water of that part, mm.
    pub water_mm: Option<f64>,
    /// Its 95 % interval, mm.
    pub water_mm_interval: Option<SumInterval>,
}

/// One sample.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SampleData {
    /// Code.
    pub code: String,
    /// `lab_core` or `field_pairing`.
    pub kind: SampleKind,
    /// Day it was taken.
    pub collected_on: Option<NaiveDate>,
    /// Dry bulk density of the sample, g/cm3.
    pub bulk_density_g_cm3: Option<f64>,
    /// Free text.
    pub notes: Option<String>,
    /// Stable identifier (UUID).
    pub uid: String,
    /// Where its fitting stands: `{"state": "current" | "stale" | "failed" | "none",
    /// "detail": ...}` (stale: the reasons; failed: the last message).
    pub fit_state: FitState,
    /// Readings, by suction.
    pub readings: Vec<ReadingData>,
    /// The core's measured saturated conductivity, cm/day (schema 4).
    pub ks_cm_per_day: Option<f64>,
    /// Measured conductivity readings: K(h) by suction, then K(theta) (schema 4).
    pub conductivity_readings: Vec<ConductivityReadingData>,
    /// The current fit, if any.
    pub fit: Option<FitData>,
}

/// One measured conductivity (schema 4).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ConductivityReadingData {
    /// Id (local to the campaign file).
    pub id: i64,
    /// Stable identifier (UUID).
    pub uid: String,
    /// Suction it was measured at, cm (K(h)); `null` for K(theta).
    pub suction_cm: Option<f64>,
    /// Water content it was measured at, m3/m3 (K(theta)); `null` for K(h).
    pub theta_m3_m3: Option<f64>,
    /// Hydraulic conductivity, cm/day.
    pub k_cm_per_day: f64,
    /// Method as the lab wrote it.
    pub method: Option<String>,
    /// Day measured.
    pub measured_on: Option<NaiveDate>,
    /// Free text.
    pub notes: Option<String>,
    /// File and line it came from.
    pub provenance: ProvenanceData,
    /// Used by the current fit (a fit made with conductivity).
    pub used_in_fit: bool,
    /// Left out of joint fits by a flag (schema 5).
    pub excluded: bool,
}

/// What a fit made with measured conductivity adds (schema 4): Ks and L with their
/// errors, the covariance of every parameter, the statistics of each set and jointly.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct JointFitData {
    /// The conductivity model fitted.
    pub conductivity_model: crate::model::conductivity::ConductivityModel,
    /// Fitted (or held) Ks, cm/day.
    pub ks_cm_per_day: ParamEstimate,
    /// Fitted (or held) Mualem L.
    pub pore_connectivity: ParamEstimate,
    /// Where a held Ks came from (`sample`, `layer`).
    pub ks_source: Option<String>,
    /// s^2 (J'WJ)^-1 over every free parameter of the joint fit.
    pub covariance: Option<ParamMatrix>,
    /// The weighting of the two sets.
    pub weighting: crate::fit::joint::Weighting,
    /// Refits made for consistent weights, and whether they became consistent.
    pub refits: usize,
    /// Whether the estimated weights became consistent.
    pub weights_consistent: bool,
    /// Water-content statistics (m3/m3).
    pub retention: crate::fit::joint::SetStatistics,
    /// log10 K statistics (K in cm/day).
    pub conductivity: crate::fit::joint::SetStatistics,
    /// Joint weighted SSE, s, AICc, n and k.
    pub joint: FitStatistics,
    /// The conductivity readings used, in the order of the residuals.
    pub conductivity_reading_ids: Vec<i64>,
    /// The fit's notes.
    pub notes: Vec<String>,
}

/// One retention reading.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ReadingData {
    /// Reading id (local to the campaign file; the id other commands take).
    pub id: i64,
    /// Stable identifier (UUID).
    pub uid: String,
    /// Matric suction head, cm of water.
    pub suction_cm: f64,
    /// Volumetric water content, m3/m3.
    pub theta_m3_m3: f64,
    /// How it was measured.
    pub method: Option<String>,
    /// Day of the measurement.
    pub measured_on: Option<NaiveDate>,
    /// `drying`, `wetting` or `unknown`.
    pub branch: Branch,
    /// Relative weight in a weighted fit.
    pub weight: Option<f64>,
    /// Free text.
    pub notes: Option<String>,
    /// Where it came from.
    pub provenance: ProvenanceData,
    /// Left out of fits now by a flag (accepted, or manual and not yet reviewed).
    pub excluded: bool,
    /// Used by the sample's current fit.
    pub used_in_fit: bool,
    /// Every flag on it, oldest first (the audit trail: nothing is deleted).
    pub flags: Vec<FlagData>,
}

/// Where a reading came from.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct ProvenanceData {
    /// Import id (see `imports`).
    pub import_id: Option<i64>,
    /// The imported file's name.
    pub file_name: Option<String>,
    /// Physical line in that file (the header is line 1).
    pub line: Option<u64>,
}

/// A flag on a reading.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FlagData {
    /// Flag id.
    pub id: i64,
    /// The check that raised it (`leave-one-out`, `saturation`, `monotonic`, `manual`, ...);
    /// `null` for flags from before schema version 3 of the campaign file.
    pub rule: Option<String>,
    /// Why it was flagged.
    pub reason: String,
    /// How suspicious, on the scale of the check that raised it.
    pub score: Option<f64>,
    /// `auto` or `manual`.
    pub origin: FlagOrigin,
    /// `suggested`, `accepted`, `dismissed` or `cleared`.
    pub status: FlagStatus,
    /// The reviewer's note.
    pub note: Option<String>,
    /// When it was raised (UTC, RFC 3339).
    pub created_at: String,
    /// When its status was last decided (UTC, RFC 3339).
    pub decided_at: Option<String>,
    /// Who made the last decision: `user` or `checks`.
    pub decided_by: Option<String>,
    /// The audit trail: every status the flag took, oldest first.
    pub events: Vec<FlagEventData>,
}

/// One status a flag took.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FlagEventData {
    /// Status before; `null` when the flag was raised.
    pub from: Option<FlagStatus>,
    /// Status after.
    pub to: FlagStatus,
    /// `user` or `checks`.
    pub actor: String,
    /// The note given with the change.
    pub note: Option<String>,
    /// When (UTC, RFC 3339).
    pub at: String,
}

/// A sample's current fit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FitData {
    /// Fit id (local to the campaign file).
    pub id: i64,
    /// Model identifier (`van-genuchten`, ...).
    pub model: String,
    /// What was asked for: a model identifier or `auto`.
    pub requested: Option<String>,
    /// `readings`, or `readings+texture prior` for a fit with the texture prior.
    pub basis: String,
    /// The prior of a fit with one: class, source, noise assumed, each parameter's pull in
    /// prior standard deviations, the readings-only fit beside it.
    pub prior: Option<PriorBasis>,
    /// When the fit was made (UTC, RFC 3339).
    pub fitted_at: String,
    /// Parameters the user fixed, by name.
    pub fixed: BTreeMap<String, f64>,
    /// The solver's notes (parameters on bounds, singular Jacobian).
    pub message: Option<String>,
    /// SHA-256 of the readings used (ids, suctions, water contents, weights).
    pub readings_fingerprint_sha256: String,
    /// Every parameter with its standard error and 95 % interval.
    pub parameters: Vec<ParamEstimate>,
    /// Goodness of fit.
    pub statistics: Option<FitStatistics>,
    /// Covariance s^2 (J'WJ)^-1 over the free parameters off their bounds.
    pub covariance: Option<ParamMatrix>,
    /// Correlations from the covariance.
    pub correlation: Option<ParamMatrix>,
    /// Per reading used: observed, fitted, residual and influence.
    pub residuals: Vec<ResidualData>,
    /// With `auto`: every ranked model (AICc, Akaike weight) and the skipped ones.
    pub ranking: Option<Ranking>,
    /// Derived values under the campaign's field capacity and wilting point.
    pub derived: Option<DerivedData>,
    /// For a fit made with measured conductivity: Ks, L and the joint statistics (schema 4).
    pub joint: Option<JointFitData>,
}

/// Goodness-of-fit statistics of one fit (definitions in the report's methods section).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FitStatistics {
    /// Weighted sum of squared residuals, (m3/m3)^2.
    pub sse: f64,
    /// sqrt(SSE / n), m3/m3.
    pub rmse_m3_m3: f64,
    /// sqrt(SSE / (n - k)), m3/m3.
    pub residual_sd_m3_m3: Option<f64>,
    /// Coefficient of determination.
    pub r2: Option<f64>,
    /// Akaike information criterion.
    pub aic: Option<f64>,
    /// AIC with the small-sample correction.
    pub aicc: Option<f64>,
    /// Bayesian information criterion.
    pub bic: Option<f64>,
    /// Readings used, n.
    pub n_points: usize,
    /// Free parameters, k.
    pub n_free_params: usize,
    /// Parameters counted by AIC, AICc and BIC: K = k + 1, the error variance included.
    pub n_criteria_params: usize,
    /// Passed every check of the fit engine.
    pub converged: bool,
    /// Why the solver stopped.
    pub termination: Termination,
}

/// One reading's residual and influence in a fit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ResidualData {
    /// The reading (`id` in `readings`).
    pub reading_id: Option<i64>,
    /// Suction, cm.
    pub suction_cm: f64,
    /// Observed water content, m3/m3.
    pub observed_m3_m3: f64,
    /// Fitted water content, m3/m3.
    pub fitted_m3_m3: f64,
    /// Observed - fitted, m3/m3.
    pub residual_m3_m3: f64,
    /// Hat-matrix diagonal.
    pub leverage: Option<f64>,
    /// Internally studentized residual.
    pub studentized: Option<f64>,
    /// Externally studentized residual.
    pub studentized_external: Option<f64>,
    /// Cook's distance.
    pub cooks_distance: Option<f64>,
}

/// Values derived from a fit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DerivedData {
    /// Water contents at FC and PWP, available water, air entry, inflection points.
    pub values: DerivedValues,
    /// 95 % intervals of theta at FC and PWP, available water, the air entry, h at Se = 1/2
    /// and K at FC and PWP: `lo95`, `hi95`, `se` in the value's unit, `scale` (`linear`, or
    /// `log` for suctions and conductivities), `method` (`delta-method` or `monte-carlo`) and
    /// `note`; `known_parameters` (fixed or held on a bound, treated as known) and `missing`
    /// (why there are none).
    pub intervals: DerivedIntervals,
    /// Saturated conductivity of the layer, cm/day.
    pub ks_cm_per_day: Option<f64>,
    /// The conductivity model of the K values (`mualem-van-genuchten`, `burdine-brooks-corey`,
    /// ...); `null` for a model without a closed form.
    pub conductivity_model: Option<ConductivityModel>,
    /// K at field capacity, cm/day.
    pub k_field_capacity_cm_per_day: Option<f64>,
    /// K at the wilting point, cm/day.
    pub k_wilting_point_cm_per_day: Option<f64>,
}

fn rfc3339(t: DateTime<Utc>) -> String {
    t.to_rfc3339_opts(SecondsFormat::Secs, true)
}

/// The fingerprint of `data`: SHA-256 of its compact JSON.
pub fn fingerprint(data: &CampaignData) -> String {
    let bytes = serde_json::to_vec(data).unwrap_or_default();
    hex(&Sha256::digest(&bytes))
}

impl CampaignDocument {
    /// The document of a snapshot, stamped with the export time.
    pub fn new(snapshot: &Snapshot, exported_at: DateTime<Utc>) -> Self {
        let data = CampaignData::from(snapshot);
        Self {
            format: FORMAT.to_string(),
            schema_version: SCHEMA_VERSION,
            program: ProgramInfo {
                name: env!("CARGO_PKG_NAME").to_string(),
                version: env!("CARGO_PKG_VERSION").to_string(),
            },
            exported_at: rfc3339(exported_at),
            fingerprint_sha256: fingerprint(&data),
            data,
        }
    }
}

impl CampaignDocument {
    /// The document without its sites, its fingerprint a placeholder of zeros: what
    /// [`JsonStream`] writes around the sites it is given one at a time.
    pub fn head(frame: &Snapshot, exported_at: DateTime<Utc>) -> Self {
        Self {
            format: FORMAT.to_string(),
            schema_version: SCHEMA_VERSION,
            program: ProgramInfo {
                name: env!("CARGO_PKG_NAME").to_string(),
                version: env!("CARGO_PKG_VERSION").to_string(),
            },
            exported_at: rfc3339(exported_at),
            fingerprint_sha256: "0".repeat(64),
            data: CampaignData::head(frame),
        }
    }
}

impl CampaignData {
    /// Everything but the sites (campaign, scope, imports) of a snapshot.
    pub fn head(s: &Snapshot) -> Self {
        Self {
            campaign: CampaignInfo {
                name: s.settings.name.clone(),
                description: s.settings.description.clone(),
                created_at: rfc3339(s.settings.created_at),
                field_capacity_kpa: s.settings.fc_kpa,
                wilting_point_kpa: s.settings.pwp_kpa,
                between_cores: s.between_cores,
            },
            scope: Scope {
                site: s.site_filter.clone(),
                root_zone_cm: s.root_zone_cm,
                conductivity: s.conductivity,
            },
            imports: s
                .imports
                .iter()
                .map(|b| ImportInfo {
                    id: b.id,
                    file_name: b.file_name.clone(),
                    sha256: b.sha256.clone(),
                    kind: b.kind.clone(),
                    rows: b.rows,
                    forced: b.forced,
                    imported_at: rfc3339(b.imported_at),
                })
                .collect(),
            sites: Vec::new(),
        }
    }
}

impl From<&Snapshot> for CampaignData {
    fn from(s: &Snapshot) -> Self {
        Self {
            sites: s.sites.iter().map(|site| site_data(s, site)).collect(),
            ..Self::head(s)
        }
    }
}

/// Feeds what is written to a SHA-256.
struct HashWriter<'a>(&'a mut Sha256);

impl Write for HashWriter<'_> {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        self.0.update(buf);
        Ok(buf.len())
    }

    fn flush(&mut self) -> io::Result<()> {
        Ok(())
    }
}

/// Writes through, indenting every line after the first (pretty JSON at a depth).
struct Indented<'a, W: Write> {
    out: &'a mut W,
    indent: &'a [u8],
}

impl<W: Write> Write for Indented<'_, W> {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        let mut lines = buf.split(|&b| b == b'\n');
        if let Some(first) = lines.next() {
            self.out.write_all(first)?;
        }
        for line in lines {
            self.out.write_all(b"\n")?;
            self.out.write_all(self.indent)?;
            self.out.write_all(line)?;
        }
        Ok(buf.len())
    }

    fn flush(&mut self) -> io::Result<()> {
        self.out.flush()
    }
}

/// Two spaces a level, as `serde_json`'s pretty printer indents.
fn indent(depth: usize) -> Vec<u8> {
    vec![b' '; 2 * depth]
}

/// An open array of the document: what closes it and its element, and how deep its elements
/// sit.
#[derive(Debug)]
struct Level {
    /// The text from the array's `]` to the end of its element, pretty and compact.
    pretty_tail: String,
    compact_tail: String,
    /// Elements written so far.
    count: usize,
    /// Depth of the array's elements.
    depth: usize,
    /// Depth of the element that holds the array.
    outer: usize,
}

/// `campaign.json` written one piece at a time, so memory holds one batch of samples rather
/// than the campaign; the bytes are those of [`to_json`] on the whole [`CampaignDocument`].
///
/// The document is written as its nesting is walked: [`JsonStream::open`] a site (from
/// [`site_head`], its `layers` empty), open a layer (from [`layer_head`]), add its samples
/// with [`JsonStream::item`], [`JsonStream::close`] each. Every piece is written pretty as it
/// is serialised, each line indented to its depth (pretty JSON breaks lines only between
/// tokens, never inside a string), and fed compact to the SHA-256 of `data`; the
/// fingerprint, known at the end, overwrites the placeholder in the head. Without an output
/// it only computes the fingerprint.
#[derive(Debug)]
pub struct JsonStream<W: Write + Seek> {
    out: Option<W>,
    hasher: Sha256,
    placeholder: u64,
    stack: Vec<Level>,
}

/// `text` split at the empty array of member `key`, the last one (an element's array is its
/// last member): up to and including `[`, and from `]`. A `"` inside a string is escaped, so
/// the mark cannot be part of a user's text.
fn split_at_array<'t>(text: &'t str, key: &str, pretty: bool) -> io::Result<(&'t str, &'t str)> {
    let mark = if pretty {
        format!("\"{key}\": []")
    } else {
        format!("\"{key}\":[]")
    };
    let at = text
        .rfind(&mark)
        .ok_or_else(|| io::Error::other(format!("no empty {key} member to fill")))?;
    Ok(text.split_at(at + mark.len() - 1))
}

impl<W: Write + Seek> JsonStream<W> {
    /// Write the head of the document (from [`CampaignDocument::head`]), up to its sites.
    ///
    /// # Errors
    /// Writing fails, or the head does not encode.
    pub fn start(mut out: Option<W>, head: &CampaignDocument) -> io::Result<Self> {
        let pretty = serde_json::to_string_pretty(head)?;
        let (before, pretty_tail) = split_at_array(&pretty, "sites", true)?;
        let key = "\"fingerprint_sha256\": \"";
        let placeholder = before
            .find(key)
            .map(|at| (at + key.len()) as u64)
            .ok_or_else(|| io::Error::other("the document has no fingerprint member"))?;
        if let Some(out) = out.as_mut() {
            out.write_all(before.as_bytes())?;
        }
        let compact = serde_json::to_string(&head.data)?;
        let (compact_before, compact_tail) = split_at_array(&compact, "sites", false)?;
        let mut hasher = Sha256::new();
        hasher.update(compact_before.as_bytes());
        Ok(Self {
            out,
            hasher,
            placeholder,
            // The document, its `data` (depth 1), and `data.sites` whose elements are at 3.
            stack: vec![Level {
                pretty_tail: pretty_tail.to_string(),
                compact_tail: compact_tail.to_string(),
                count: 0,
                depth: 3,
                outer: 0,
            }],
        })
    }

    /// The separator and indentation before the next element of the innermost array.
    fn next_element(&mut self) -> io::Result<usize> {
        let level = self
            .stack
            .last_mut()
            .ok_or_else(|| io::Error::other("the document is closed"))?;
        let first = level.count == 0;
        level.count += 1;
        let depth = level.depth;
        if !first {
            self.hasher.update(b",");
        }
        if let Some(out) = self.out.as_mut() {
            out.write_all(if first { b"\n" } else { b",\n" })?;
            out.write_all(&indent(depth))?;
        }
        Ok(depth)
    }

    /// Write `text` (pretty, indented from its second line) at `depth`.
    fn write_at(&mut self, depth: usize, text: &str) -> io::Result<()> {
        if let Some(out) = self.out.as_mut() {
            Indented {
                out,
                indent: &indent(depth),
            }
            .write_all(text.as_bytes())?;
        }
        Ok(())
    }

    /// Add an element to the innermost array, leaving its last member, the array `key`
    /// (empty in `head`), open for elements of its own.
    ///
    /// # Errors
    /// Writing fails, or `head` has no empty `key` member.
    pub fn open<T: Serialize>(&mut self, head: &T, key: &str) -> io::Result<()> {
        let depth = self.next_element()?;
        let pretty = serde_json::to_string_pretty(head)?;
        let (before, pretty_tail) = split_at_array(&pretty, key, true)?;
        self.write_at(depth, before)?;
        let compact = serde_json::to_string(head)?;
        let (compact_before, compact_tail) = split_at_array(&compact, key, false)?;
        self.hasher.update(compact_before.as_bytes());
        self.stack.push(Level {
            pretty_tail: pretty_tail.to_string(),
            compact_tail: compact_tail.to_string(),
            count: 0,
            depth: depth + 2,
            outer: depth,
        });
        Ok(())
    }

    /// Add a whole element to the innermost array.
    ///
    /// # Errors
    /// Writing fails.
    pub fn item<T: Serialize>(&mut self, value: &T) -> io::Result<()> {
        let depth = self.next_element()?;
        serde_json::to_writer(HashWriter(&mut self.hasher), value)?;
        if let Some(out) = self.out.as_mut() {
            serde_json::to_writer_pretty(
                Indented {
                    out,
                    indent: &indent(depth),
                },
                value,
            )?;
        }
        Ok(())
    }

    /// Close the innermost array and the element that holds it.
    ///
    /// # Errors
    /// Writing fails, or nothing is open.
    pub fn close(&mut self) -> io::Result<()> {
        let level = self
            .stack
            .pop()
            .ok_or_else(|| io::Error::other("nothing to close"))?;
        if let Some(out) = self.out.as_mut()
            && level.count > 0
        {
            out.write_all(b"\n")?;
            out.write_all(&indent(level.depth - 1))?;
        }
        self.write_at(level.outer, &level.pretty_tail)?;
        self.hasher.update(level.compact_tail.as_bytes());
        Ok(())
    }

    /// Close the document, write the fingerprint into the head, and hand back the output
    /// with the fingerprint.
    ///
    /// # Errors
    /// Writing fails, or an element is still open.
    pub fn finish(mut self) -> io::Result<(String, Option<W>)> {
        if self.stack.len() != 1 {
            return Err(io::Error::other("an element of the document is still open"));
        }
        self.close()?;
        let fingerprint = hex(&self.hasher.finalize());
        if let Some(out) = self.out.as_mut() {
            out.write_all(b"\n")?;
            let end = out.stream_position()?;
            out.seek(SeekFrom::Start(self.placeholder))?;
            out.write_all(fingerprint.as_bytes())?;
            out.seek(SeekFrom::Start(end))?;
        }
        Ok((fingerprint, self.out))
    }
}

/// One site of a snapshot as it appears in `data.sites`.
pub fn site_data(s: &Snapshot, part: &SitePart) -> SiteData {
    SiteData {
        layers: part
            .layers
            .iter()
            .map(|l| LayerData {
                samples: l.samples.iter().map(|m| sample_data(s, m)).collect(),
                ..layer_head(part, l)
            })
            .collect(),
        ..site_head(part)
    }
}

/// A site without its layers (`"layers": []`).
pub fn site_head(part: &SitePart) -> SiteData {
    let site = &part.row.stored.site;
    SiteData {
        code: site.code.clone(),
        name: site.name.clone(),
        latitude_deg: site.latitude,
        longitude_deg: site.longitude,
        elevation_m: site.elevation_m,
        notes: site.notes.clone(),
        uid: site.uid.to_string(),
        profile: part.profile.as_ref().map(|p| ProfileData {
            root_zone_cm: p.root_zone_cm,
            total_mm: p.total_mm,
            total_mm_interval: p.total_mm_interval,
            total_note: p.total_note.clone(),
            covered_cm: p.covered_cm,
            uncovered_cm: p.uncovered_cm(),
        }),
        layers: Vec::new(),
    }
}

/// A layer of a site without its samples (`"samples": []`); its water from the site's
/// profile.
pub fn layer_head(part: &SitePart, l: &LayerPart) -> LayerData {
    let layer = &l.row.stored.layer;
    let water: Option<&LayerWater> = part
        .profile
        .as_ref()
        .and_then(|p| p.layers.iter().find(|w| w.layer.same_as(&layer.at)));
    let texture = TextureClass::of_layer(layer.sand_pct, layer.silt_pct, layer.clay_pct);
    LayerData {
        top_cm: layer.at.top_cm,
        bottom_cm: layer.at.bottom_cm,
        horizon: layer.horizon.clone(),
        sand_pct: layer.sand_pct,
        silt_pct: layer.silt_pct,
        clay_pct: layer.clay_pct,
        texture_class: texture.map(|t| t.name().to_string()),
        organic_carbon_pct: layer.organic_carbon_pct,
        bulk_density_g_cm3: layer.bulk_density_g_cm3,
        ks_cm_per_day: layer.ks_cm_per_day,
        uid: layer.uid.to_string(),
        water: water.map(|w| LayerWaterData {
            lab_cores: w.lab_cores,
            fitted_cores: w.fitted_cores,
            stale_cores: w.stale_cores,
            available_water_m3_m3: w.available_water,
            available_water_interval: w.available_water_interval,
            interval_note: w.interval_note.clone(),
            field_available_water_m3_m3: w.field_available_water,
            depth_in_root_zone_cm: w.depth_in_zone_cm,
            water_mm: w.water_mm,
            water_mm_interval: w.water_mm_interval,
        }),
        texture_estimate: texture
            .filter(|_| water.is_none_or(|w| w.fitted_cores == 0))
            .zip(part.profile.as_ref())
            .and_then(|(class, p)| layer_estimate(class, p.fc_kpa, p.pwp_kpa))
            .map(TextureEstimateData::from),
        pedotransfer_estimate: part
            .profile
            .as_ref()
            .filter(|_| water.is_none_or(|w| w.fitted_cores == 0))
            .and_then(|p| {
                pedotransfer_estimate(
                    layer.sand_pct,
                    layer.clay_pct,
                    layer.organic_carbon_pct,
                    p.fc_kpa,
                    p.pwp_kpa,
                )
            }),
        samples: Vec::new(),
    }
}

fn flag_data(f: &ReadingFlag) -> FlagData {
    let flag = &f.stored.flag;
    FlagData {
        id: f.stored.id,
        rule: f.stored.rule.clone(),
        reason: flag.reason.clone(),
        score: flag.score,
        origin: flag.origin,
        status: flag.status,
        note: flag.note.clone(),
        created_at: rfc3339(flag.created_at),
        decided_at: flag.decided_at.map(rfc3339),
        decided_by: f.stored.decided_by.map(|a| a.as_str().to_string()),
        events: f
            .events
            .iter()
            .map(|e| FlagEventData {
                from: e.from,
                to: e.to,
                actor: e.actor.as_str().to_string(),
                note: e.note.clone(),
                at: rfc3339(e.at),
            })
            .collect(),
    }
}

/// One sample of a snapshot as it appears in a layer's `samples`.
pub fn sample_data(s: &Snapshot, part: &SamplePart) -> SampleData {
    let sample = &part.row.stored.sample;
    let fit = part.fit.fit.as_ref();
    let used = |id: i64| fit.is_some_and(|f| f.reading_ids.contains(&id));
    SampleData {
        code: sample.code.clone(),
        kind: sample.kind,
        collected_on: sample.collected_on,
        bulk_density_g_cm3: sample.bulk_density_g_cm3,
        notes: sample.notes.clone(),
        uid: sample.uid.to_string(),
        fit_state: part.fit.state.clone(),
        readings: part
            .readings
            .iter()
            .map(|r| ReadingData {
                id: r.id,
                uid: r.reading.uid.to_string(),
                suction_cm: r.reading.h_cm,
                theta_m3_m3: r.reading.theta,
                method: r.reading.method.as_ref().map(ToString::to_string),
                measured_on: r.reading.measured_on,
                branch: r.reading.branch,
                weight: r.reading.weight,
                notes: r.reading.notes.clone(),
                provenance: ProvenanceData {
                    import_id: r.reading.provenance.batch,
                    file_name: r.source_file.clone(),
                    line: (r.reading.provenance.line > 0).then_some(r.reading.provenance.line),
                },
                excluded: s.is_excluded(r.id),
                used_in_fit: used(r.id),
                flags: s.flags_of(r.id).iter().map(flag_data).collect(),
            })
            .collect(),
        ks_cm_per_day: part.ks.sample,
        conductivity_readings: part
            .conductivity
            .iter()
            .map(|c| ConductivityReadingData {
                id: c.id,
                uid: c.reading.uid.to_string(),
                suction_cm: c.reading.at.h_cm(),
                theta_m3_m3: c.reading.at.theta(),
                k_cm_per_day: c.reading.k_cm_per_day,
                method: c.reading.method.clone(),
                measured_on: c.reading.measured_on,
                notes: c.reading.notes.clone(),
                provenance: ProvenanceData {
                    import_id: c.reading.batch,
                    file_name: c.source_file.clone(),
                    line: (c.reading.line > 0).then_some(c.reading.line),
                },
                used_in_fit: part
                    .joint
                    .as_ref()
                    .is_some_and(|j| j.conductivity_reading_ids.contains(&c.id)),
                excluded: c.excluded,
            })
            .collect(),
        fit: fit.map(|f| fit_data(f, part)),
    }
}

fn joint_data(record: &crate::store::conductivity::JointRecord) -> JointFitData {
    let r = &record.report;
    let nr = r.kind.params().len();
    JointFitData {
        conductivity_model: r.conductivity_model,
        ks_cm_per_day: r.fit.parameters[nr].clone(),
        pore_connectivity: r.fit.parameters[nr + 1].clone(),
        ks_source: record.ks_source.clone(),
        covariance: r.fit.covariance.clone(),
        weighting: r.weighting,
        refits: r.refits,
        weights_consistent: r.weights_consistent,
        retention: r.retention.clone(),
        conductivity: r.conductivity.clone(),
        joint: statistics(&r.fit),
        conductivity_reading_ids: record.conductivity_reading_ids.clone(),
        notes: r.notes.clone(),
    }
}

fn statistics(r: &FitReport) -> FitStatistics {
    FitStatistics {
        sse: r.sse,
        rmse_m3_m3: r.rmse,
        residual_sd_m3_m3: r.residual_sd,
        r2: r.r2,
        aic: r.aic,
        aicc: r.aicc,
        bic: r.bic,
        n_points: r.n_points,
        n_free_params: r.n_free_params,
        n_criteria_params: r.n_criteria_params,
        converged: r.converged,
        termination: r.termination,
    }
}

fn fit_data(f: &StoredFit, part: &SamplePart) -> FitData {
    let report = f.report.as_ref();
    FitData {
        id: f.id,
        model: f.model.clone(),
        requested: f.requested.clone(),
        basis: report.map_or(BASIS_READINGS, basis_of).to_string(),
        prior: report.and_then(|r| r.prior.clone()),
        fitted_at: rfc3339(f.created_at),
        fixed: f.fixed.iter().cloned().collect(),
        message: f.message.clone(),
        readings_fingerprint_sha256: f.fingerprint.clone(),
        parameters: report.map(|r| r.parameters.clone()).unwrap_or_default(),
        statistics: report.map(statistics),
        covariance: report.and_then(|r| r.covariance.clone()),
        correlation: report.and_then(|r| r.correlation.clone()),
        residuals: report
            .map(|r| {
                r.readings
                    .iter()
                    .enumerate()
                    .map(|(i, d)| ResidualData {
                        reading_id: f.reading_ids.get(i).copied(),
                        suction_cm: d.x,
                        observed_m3_m3: d.observed,
                        fitted_m3_m3: d.fitted,
                        residual_m3_m3: d.residual,
                        leverage: d.leverage,
                        studentized: d.studentized,
                        studentized_external: d.studentized_external,
                        cooks_distance: d.cooks_distance,
                    })
                    .collect()
            })
            .unwrap_or_default(),
        ranking: f.ranking.clone(),
        derived: part.fit.derived.as_ref().map(|d| DerivedData {
            values: d.values.clone(),
            intervals: d.intervals.clone(),
            ks_cm_per_day: d.ks_cm_per_day,
            conductivity_model: d.conductivity_model,
            k_field_capacity_cm_per_day: d.k_field_capacity_cm_per_day,
            k_wilting_point_cm_per_day: d.k_wilting_point_cm_per_day,
        }),
        joint: part.joint.as_ref().map(joint_data),
    }
}

/// The document as pretty-printed JSON with a final newline.
///
/// # Errors
/// Only if serialisation fails (it does not for these types).
pub fn to_json(doc: &CampaignDocument) -> serde_json::Result<String> {
    let mut text = serde_json::to_string_pretty(doc)?;
    text.push('\n');
    Ok(text)
}
