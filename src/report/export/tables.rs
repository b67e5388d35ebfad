//! `parameters.csv` (one row per sample) and `profiles.csv` (one row per layer and a total
//! per site).
//!
//! Numbers are written with [`format_number`]: the shortest text that reads back to the very
//! f64 stored, so a parameter in the file equals the stored fit exactly. A value that does not
//! apply is an empty cell, never NaN. Column units follow the design notes: a unit is in the
//! column name (`_cm`, `_kpa`, `_m3_m3`, `_mm`); parameter columns carry the parameter
//! identifiers unchanged (the names `--set` and `--fix` take), whose unit is in the name
//! (`alpha_per_cm`, `h_b_cm`), `theta_*` in m3/m3, and the rest (`n`, `m`, `lambda`, `sigma`,
//! `w1`, `b`) dimensionless; each `<parameter>_se` is in the unit of its parameter.

use super::snapshot::Snapshot;
use crate::analysis::SumInterval;
use crate::fit::prior::{BASIS_READINGS, basis_of};
use crate::model::domain::Layer;
use crate::model::texture::TextureClass;
use crate::report::fit_table::parameter_union;
use crate::report::fits::{derived_with_intervals, interval_notes};
use crate::report::{csv_safe, format_number};

/// A layer's texture class name, or empty.
fn layer_texture(layer: &Layer) -> String {
    TextureClass::of_layer(layer.sand_pct, layer.silt_pct, layer.clay_pct)
        .map(|t| t.name().to_string())
        .unwrap_or_default()
}

/// The fixed columns of `parameters.csv` before the parameter columns.
pub const PARAMETER_LEAD_COLUMNS: [&str; 12] = [
    "site",
    "layer",
    "horizon",
    "texture",
    "top_cm",
    "bottom_cm",
    "sample",
    "kind",
    "model",
    "basis",
    "state",
    "stale",
];

/// The fixed columns of `parameters.csv` after the parameter and standard-error columns:
/// statistics, the suctions used, each derived value followed by its 95 % interval
/// (`_lo95`, `_hi95`; see [`crate::analysis::water`]), the notes on those intervals, and the
/// fit's identity and standing.
pub const PARAMETER_TAIL_COLUMNS: [&str; 37] = [
    "sse",
    "rmse_m3_m3",
    "r2",
    "aicc",
    "bic",
    "n_readings",
    "n_points",
    "n_flagged",
    "n_excluded",
    "fc_kpa",
    "pwp_kpa",
    "theta_fc_m3_m3",
    "theta_fc_m3_m3_lo95",
    "theta_fc_m3_m3_hi95",
    "theta_pwp_m3_m3",
    "theta_pwp_m3_m3_lo95",
    "theta_pwp_m3_m3_hi95",
    "available_water_m3_m3",
    "available_water_m3_m3_lo95",
    "available_water_m3_m3_hi95",
    "air_entry_cm",
    "air_entry_cm_lo95",
    "air_entry_cm_hi95",
    "suction_at_half_saturation_cm",
    "suction_at_half_saturation_cm_lo95",
    "suction_at_half_saturation_cm_hi95",
    "conductivity_model",
    "k_fc_cm_per_day",
    "k_fc_cm_per_day_lo95",
    "k_fc_cm_per_day_hi95",
    "k_pwp_cm_per_day",
    "k_pwp_cm_per_day_lo95",
    "k_pwp_cm_per_day_hi95",
    "interval_note",
    "fit_id",
    "fitted_at_utc",
    "state_detail",
];

/// The columns of `parameters.csv` after the tail, for a fit made with measured
/// conductivity (empty otherwise): its fitted Ks and L with their standard errors, the
/// conductivity readings used, the log10 K sum of squares and RMSE, and the weighting.
pub const PARAMETER_JOINT_COLUMNS: [&str; 9] = [
    "fitted_with_conductivity",
    "ks_fitted_cm_per_day",
    "ks_fitted_cm_per_day_se",
    "pore_connectivity",
    "pore_connectivity_se",
    "n_conductivity",
    "sse_log10_k",
    "rmse_log10_k",
    "conductivity_weighting",
];

/// The columns of `profiles.csv`: each available water and mm value followed by its 95 %
/// interval, and on every row the campaign's pooled between-core variance (tau^2, (m3/m3)^2)
/// with the number of layers it came from.
pub const PROFILE_COLUMNS: [&str; 24] = [
    "site",
    "row",
    "layer",
    "horizon",
    "texture",
    "basis",
    "top_cm",
    "bottom_cm",
    "lab_cores",
    "fitted_cores",
    "stale_cores",
    "available_water_m3_m3",
    "available_water_m3_m3_lo95",
    "available_water_m3_m3_hi95",
    "field_available_water_m3_m3",
    "depth_in_root_zone_cm",
    "water_mm",
    "water_mm_lo95",
    "water_mm_hi95",
    "root_zone_cm",
    "uncovered_cm",
    "between_core_tau2_m3_m3_squared",
    "between_core_layers",
    "interval_note",
];

/// A number cell: exact text, or empty for a missing or non-finite value.
fn num(v: Option<f64>) -> String {
    v.filter(|v| v.is_finite())
        .map(format_number)
        .unwrap_or_default()
}

/// A text cell: neutralised against spreadsheet formulas, empty when missing.
fn text(v: Option<&str>) -> String {
    v.map(csv_safe::text).unwrap_or_default()
}

/// `SITE:TOP-BOTTOM` with exact depths, as a text cell.
fn layer_ref(site: &str, top: f64, bottom: f64) -> String {
    csv_safe::text(&format!(
        "{site}:{}-{}",
        format_number(top),
        format_number(bottom)
    ))
}

fn write_csv(header: &[String], rows: &[Vec<String>]) -> Result<String, csv::Error> {
    let mut w = csv_safe::writer();
    w.write_record(header)?;
    for row in rows {
        w.write_record(row)?;
    }
    csv_safe::finish(w)
}

/// The parameter columns of an export: the union over the models of its current fits, in
/// the order of the model table.
pub fn parameter_columns(snapshot: &Snapshot) -> Vec<String> {
    parameter_union(
        snapshot
            .samples()
            .filter_map(|(_, _, m)| m.fit.fit.as_ref().map(|f| f.model.as_str())),
        std::iter::empty(),
    )
}

/// The header of `parameters.csv` for these parameter columns.
pub fn parameters_header(params: &[String]) -> Vec<String> {
    PARAMETER_LEAD_COLUMNS
        .iter()
        .map(ToString::to_string)
        .chain(params.iter().cloned())
        .chain(params.iter().map(|p| format!("{p}_se")))
        .chain(PARAMETER_TAIL_COLUMNS.iter().map(ToString::to_string))
        .chain(PARAMETER_JOINT_COLUMNS.iter().map(ToString::to_string))
        .collect()
}

/// `parameters.csv`: one row per sample with its current fit (empty cells without one).
///
/// # Errors
/// Only if the CSV writer fails on memory.
pub fn parameters_csv(snapshot: &Snapshot) -> Result<String, csv::Error> {
    let params = parameter_columns(snapshot);
    write_csv(
        &parameters_header(&params),
        &parameter_rows(snapshot, &params),
    )
}

/// The rows of `parameters.csv` for a snapshot's samples, with these parameter columns.
pub fn parameter_rows(snapshot: &Snapshot, params: &[String]) -> Vec<Vec<String>> {
    let mut rows = Vec::new();
    for (_, layer, part) in snapshot.samples() {
        let at = &layer.row.stored.layer.at;
        let fit = part.fit.fit.as_ref();
        let report = fit.and_then(|f| f.report.as_ref());
        let derived = part.fit.derived.as_ref();
        let estimate = |name: &str| report.and_then(|r| r.parameter(name));
        let mut row = vec![
            text(Some(&at.site)),
            layer_ref(&at.site, at.top_cm, at.bottom_cm),
            text(layer.row.stored.layer.horizon.as_deref()),
            layer_texture(&layer.row.stored.layer),
            format_number(at.top_cm),
            format_number(at.bottom_cm),
            text(Some(&part.row.stored.sample.code)),
            part.row.stored.sample.kind.to_string(),
            text(fit.map(|f| f.model.as_str())),
            report.map(|r| basis_of(r).to_string()).unwrap_or_default(),
            part.fit.state.label().to_string(),
            part.fit.state.is_stale().to_string(),
        ];
        row.extend(params.iter().map(|p| num(estimate(p).map(|e| e.value))));
        row.extend(params.iter().map(|p| num(estimate(p).and_then(|e| e.se))));
        row.extend([
            num(report.map(|r| r.sse)),
            num(report.map(|r| r.rmse)),
            num(report.and_then(|r| r.r2)),
            num(report.and_then(|r| r.aicc)),
            num(report.and_then(|r| r.bic)),
            part.readings.len().to_string(),
            fit.map(|f| f.n_points.to_string()).unwrap_or_default(),
            snapshot.flagged_count(part).to_string(),
            snapshot.excluded_count(part).to_string(),
            format_number(snapshot.settings.fc_kpa),
            format_number(snapshot.settings.pwp_kpa),
        ]);
        for (k, (value, interval)) in derived_with_intervals(derived).into_iter().enumerate() {
            if k == 5 {
                row.push(
                    derived
                        .and_then(|d| d.conductivity_model)
                        .map(|m| m.id().to_string())
                        .unwrap_or_default(),
                );
            }
            row.push(num(value));
            row.push(num(interval.map(|i| i.lo95)));
            row.push(num(interval.map(|i| i.hi95)));
        }
        row.extend([
            text(derived.and_then(interval_notes).as_deref()),
            fit.map(|f| f.id.to_string()).unwrap_or_default(),
            fit.map(|f| f.created_at.format("%Y-%m-%dT%H:%M:%SZ").to_string())
                .unwrap_or_default(),
            text(Some(&state_detail(&part.fit.state))),
        ]);
        row.extend(joint_cells(part.joint.as_ref()));
        rows.push(row);
    }
    rows
}

/// The [`PARAMETER_JOINT_COLUMNS`] of a sample's current fit.
fn joint_cells(joint: Option<&crate::store::conductivity::JointRecord>) -> Vec<String> {
    let Some(record) = joint else {
        return vec![String::new(); PARAMETER_JOINT_COLUMNS.len()];
    };
    let r = &record.report;
    let nr = r.kind.params().len();
    let (ks, l) = (&r.fit.parameters[nr], &r.fit.parameters[nr + 1]);
    let weighting = match r.weighting {
        crate::fit::joint::Weighting::Estimated => "estimated".to_string(),
        crate::fit::joint::Weighting::User { weight } => format!("user {}", format_number(weight)),
    };
    vec![
        "yes".to_string(),
        num(Some(ks.value)),
        num(ks.se),
        num(Some(l.value)),
        num(l.se),
        r.conductivity.n.to_string(),
        num(Some(r.conductivity.sse)),
        num(Some(r.conductivity.rmse)),
        weighting,
    ]
}

/// The reasons of a stale fit or the message of a failed one; empty otherwise.
pub fn state_detail(state: &crate::store::fits::FitState) -> String {
    use crate::store::fits::FitState;
    match state {
        FitState::Stale(reasons) => reasons
            .iter()
            .map(ToString::to_string)
            .collect::<Vec<_>>()
            .join("; "),
        FitState::Failed(message) => message.clone(),
        FitState::None | FitState::Current => String::new(),
    }
}

/// `profiles.csv`: per site one `layer` row per layer, top down, then one `total` row with
/// the profile sum (`water_mm`) and its interval, the depth covered (`depth_in_root_zone_cm`)
/// and the depth without data (`uncovered_cm`).
///
/// # Errors
/// Only if the CSV writer fails on memory.
pub fn profiles_csv(snapshot: &Snapshot) -> Result<String, csv::Error> {
    let header: Vec<String> = PROFILE_COLUMNS.iter().map(ToString::to_string).collect();
    write_csv(&header, &profile_rows(snapshot))
}

/// The rows of `profiles.csv` for a snapshot's sites.
pub fn profile_rows(snapshot: &Snapshot) -> Vec<Vec<String>> {
    let mut rows = Vec::new();
    let (tau2, pooled_layers) = match snapshot.between_cores {
        Some(b) => (format_number(b.tau2), b.layers.to_string()),
        None => (String::new(), "0".to_string()),
    };
    let lo = |i: Option<SumInterval>| num(i.map(|i| i.lo95));
    let hi = |i: Option<SumInterval>| num(i.map(|i| i.hi95));
    for profile in snapshot.sites.iter().filter_map(|s| s.profile.as_ref()) {
        let zone = format_number(profile.root_zone_cm);
        for w in &profile.layers {
            rows.push(vec![
                text(Some(&profile.site)),
                "layer".to_string(),
                layer_ref(&profile.site, w.layer.top_cm, w.layer.bottom_cm),
                text(w.horizon.as_deref()),
                w.texture.map(|t| t.name().to_string()).unwrap_or_default(),
                match (&w.estimate, w.fitted_cores) {
                    (Some(e), _) => e.basis.to_string(),
                    (None, 0) => String::new(),
                    (None, _) => BASIS_READINGS.to_string(),
                },
                format_number(w.layer.top_cm),
                format_number(w.layer.bottom_cm),
                w.lab_cores.to_string(),
                w.fitted_cores.to_string(),
                w.stale_cores.to_string(),
                num(w.available_water),
                lo(w.available_water_interval),
                hi(w.available_water_interval),
                num(w.field_available_water),
                format_number(w.depth_in_zone_cm),
                num(w.water_mm),
                lo(w.water_mm_interval),
                hi(w.water_mm_interval),
                zone.clone(),
                String::new(),
                tau2.clone(),
                pooled_layers.clone(),
                text(w.interval_note.as_deref()),
            ]);
        }
        let total = profile.total_mm_interval;
        rows.push(vec![
            text(Some(&profile.site)),
            "total".to_string(),
            layer_ref(&profile.site, 0.0, profile.root_zone_cm),
            String::new(),
            String::new(),
            String::new(),
            "0".to_string(),
            zone.clone(),
            String::new(),
            String::new(),
            String::new(),
            String::new(),
            String::new(),
            String::new(),
            String::new(),
            format_number(profile.covered_cm),
            format_number(profile.total_mm),
            lo(total),
            hi(total),
            zone,
            format_number(profile.uncovered_cm()),
            tau2.clone(),
            pooled_layers.clone(),
            text(
                profile
                    .total_note
                    .as_deref()
                    .or(total.map(|_| "layers taken as independent")),
            ),
        ]);
    }
    rows
}
