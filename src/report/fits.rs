//! Listings of campaign fits: the current fit per sample, a sample's fit history, and the
//! available-water profiles.

use super::fit_table::parameter_union;
use super::table::{Cell, Column, Listing};
use crate::analysis::{FitDerived, SampleFit, SiteProfile, SumInterval};
use crate::fit::{FitReport, Interval95};
use crate::model::number::significant;
use crate::store::fits::{FitState, StoredFit};

/// `theta_r=0.045±0.0031 theta_s=0.43±0.004 ...`: a report's parameters for a text table.
pub fn parameters_text(report: &FitReport) -> String {
    report
        .parameters
        .iter()
        .map(|p| {
            let value = significant(p.value, 4).unwrap_or_default();
            match (p.fixed, p.se.and_then(|se| significant(se, 2))) {
                (true, _) => format!("{}={value} (fixed)", p.name),
                (false, Some(se)) => format!("{}={value}±{se}", p.name),
                (false, None) => format!("{}={value}", p.name),
            }
        })
        .collect::<Vec<_>>()
        .join(" ")
}

/// A value with its half-width, the half-width to two significant digits and the value to
/// the same decimal place: `0.284±0.012`.
pub fn plus_minus(value: f64, half: f64) -> String {
    if !(half.is_finite() && half > 0.0 && value.is_finite()) {
        return significant(value, 4).unwrap_or_default();
    }
    let decimals = (1 - half.log10().floor() as i32).clamp(0, 10) as usize;
    format!("{value:.decimals$}±{half:.decimals$}")
}

/// A value with its 95 % interval for a text table: `0.284±0.012` where the interval is
/// symmetric (the delta method on the linear scale), else `52.1 (38.5…70.3)`.
pub fn interval_text(value: f64, interval: Option<&Interval95>) -> String {
    match interval {
        Some(i) if i.is_symmetric() => plus_minus(value, i.half_width()),
        Some(i) => {
            let text = |v: f64| significant(v, 3).unwrap_or_default();
            format!("{} ({}…{})", text(value), text(i.lo95), text(i.hi95))
        }
        None => significant(value, 4).unwrap_or_default(),
    }
}

/// A table cell of a value with its interval (the number alone in CSV and JSON).
pub fn estimate_cell(value: Option<f64>, interval: Option<&Interval95>) -> Cell {
    Cell::Estimate(
        value,
        value.map_or_else(String::new, |v| interval_text(v, interval)),
    )
}

/// A table cell of a layer value estimated from texture: the value with its class-spread
/// interval as a range, `0.076 (0.013…0.188)` (it is not symmetric).
pub fn range_cell(value: Option<f64>, interval: Option<SumInterval>) -> Cell {
    let text = |v: f64| significant(v, 3).unwrap_or_default();
    Cell::Estimate(
        value,
        value.map_or_else(String::new, |v| match interval {
            Some(i) => format!("{} ({}…{})", text(v), text(i.lo95), text(i.hi95)),
            None => text(v),
        }),
    )
}

/// A table cell of a layer or profile value with its symmetric interval.
pub fn sum_cell(value: Option<f64>, interval: Option<SumInterval>) -> Cell {
    Cell::Estimate(
        value,
        value.map_or_else(String::new, |v| match interval {
            Some(i) => plus_minus(v, i.half_width()),
            None => significant(v, 4).unwrap_or_default(),
        }),
    )
}

/// The notes on a fit's intervals: Monte Carlo intervals and why, why there are none, and the
/// parameters taken as known; `None` when there is nothing to say.
pub fn interval_notes(d: &FitDerived) -> Option<String> {
    let iv = &d.intervals;
    let mut notes: Vec<String> = Vec::new();
    let named = [
        ("theta_fc", &iv.theta_field_capacity),
        ("theta_pwp", &iv.theta_wilting_point),
        ("available_water", &iv.plant_available_water),
        ("air_entry", &iv.air_entry_cm),
        (
            "suction_at_half_saturation",
            &iv.suction_at_half_saturation_cm,
        ),
        ("k_fc", &iv.k_field_capacity_cm_per_day),
        ("k_pwp", &iv.k_wilting_point_cm_per_day),
    ];
    for (name, interval) in named {
        if let Some(note) = interval.as_ref().and_then(|i| i.note.as_ref()) {
            notes.push(format!("{name}: {note}"));
        }
    }
    notes.extend(iv.missing.clone());
    if !iv.known_parameters.is_empty() {
        notes.push(format!(
            "taken as known (fixed or held on a bound): {}",
            iv.known_parameters.join(", ")
        ));
    }
    (!notes.is_empty()).then(|| notes.join("; "))
}

/// The state column: `current`, `stale (readings changed since the fit)`, `failed`, `none`.
pub fn state_text(state: &FitState) -> String {
    match state {
        FitState::Stale(reasons) => format!(
            "stale ({})",
            reasons
                .iter()
                .map(ToString::to_string)
                .collect::<Vec<_>>()
                .join("; ")
        ),
        FitState::Failed(reason) => format!("failed: {reason}"),
        other => other.label().to_string(),
    }
}

/// One row per sample with its current fit: model, parameters with standard errors, RMSE,
/// AICc, derived values with their 95 % intervals and whether it is stale.
///
/// The text table shows the parameters in one column; CSV and JSON carry one column per
/// parameter (and its `_se`), the union over the models present in the order of the model table.
pub fn fits_listing(rows: &[SampleFit]) -> Listing {
    let params = parameter_union(
        rows.iter()
            .filter_map(|r| r.fit.as_ref().map(|f| f.model.as_str())),
        std::iter::empty(),
    );
    let mut columns = vec![
        Column::new("sample"),
        Column::new("site"),
        Column::new("top_cm"),
        Column::new("bottom_cm"),
        Column::new("model"),
        Column::new("basis"),
        Column::new("state"),
        Column::new("parameters"),
    ];
    columns.extend(params.iter().map(|p| Column::export_only(p.clone())));
    columns.extend(
        params
            .iter()
            .map(|p| Column::export_only(format!("{p}_se"))),
    );
    for name in ["rmse_m3_m3", "r2", "aicc", "n_points"] {
        columns.push(Column::new(name));
    }
    for (name, in_table) in DERIVED_COLUMNS {
        columns.push(if in_table {
            Column::new(name)
        } else {
            Column::export_only(name)
        });
        columns.push(Column::export_only(format!("{name}_lo95")));
        columns.push(Column::export_only(format!("{name}_hi95")));
    }
    columns.push(Column::export_only("interval_note"));
    columns.push(Column::new("fitted_at_utc"));
    let mut l = Listing::new(columns);
    for r in rows {
        let report = r.fit.as_ref().and_then(|f| f.report.as_ref());
        let mut row = vec![
            Cell::text(&r.sample.code),
            Cell::text(&r.sample.layer.site),
            r.sample.layer.top_cm.into(),
            r.sample.layer.bottom_cm.into(),
            r.fit.as_ref().map(|f| f.model.clone()).into(),
            report
                .map(|rep| crate::fit::prior::basis_of(rep).to_string())
                .into(),
            Cell::text(state_text(&r.state)),
            report.map(parameters_text).into(),
        ];
        let estimate = |name: &str| report.and_then(|rep| rep.parameter(name));
        row.extend(params.iter().map(|p| estimate(p).map(|e| e.value).into()));
        row.extend(params.iter().map(|p| estimate(p).and_then(|e| e.se).into()));
        row.extend([
            report.map(|rep| rep.rmse).into(),
            report.and_then(|rep| rep.r2).into(),
            report.and_then(|rep| rep.aicc).into(),
            report.map_or(Cell::Text(None), |rep| Cell::Int(rep.n_points as i64)),
        ]);
        for (value, interval) in derived_with_intervals(r.derived.as_ref()) {
            row.push(estimate_cell(value, interval));
            row.push(interval.map(|i| i.lo95).into());
            row.push(interval.map(|i| i.hi95).into());
        }
        row.push(r.derived.as_ref().and_then(interval_notes).into());
        row.push(
            r.fit
                .as_ref()
                .map(|f| f.created_at.format("%Y-%m-%d %H:%M:%S").to_string())
                .into(),
        );
        l.push(row);
    }
    l
}

/// The derived-value columns of `list fits` (each followed by its `_lo95` and `_hi95`) and
/// whether the text table shows them.
pub const DERIVED_COLUMNS: [(&str, bool); 7] = [
    ("theta_fc_m3_m3", true),
    ("theta_pwp_m3_m3", true),
    ("available_water_m3_m3", true),
    ("air_entry_cm", true),
    ("suction_at_half_saturation_cm", false),
    ("k_fc_cm_per_day", false),
    ("k_pwp_cm_per_day", false),
];

/// The values of [`DERIVED_COLUMNS`] with their intervals, in that order.
pub fn derived_with_intervals(d: Option<&FitDerived>) -> [(Option<f64>, Option<&Interval95>); 7] {
    let v = d.map(|d| &d.values);
    let iv = d.map(|d| &d.intervals);
    [
        (
            v.and_then(|v| v.theta_field_capacity),
            iv.and_then(|i| i.theta_field_capacity.as_ref()),
        ),
        (
            v.and_then(|v| v.theta_wilting_point),
            iv.and_then(|i| i.theta_wilting_point.as_ref()),
        ),
        (
            v.and_then(|v| v.plant_available_water),
            iv.and_then(|i| i.plant_available_water.as_ref()),
        ),
        (
            v.and_then(|v| v.air_entry.map(|a| a.suction_cm)),
            iv.and_then(|i| i.air_entry_cm.as_ref()),
        ),
        (
            v.and_then(|v| v.suction_at_half_saturation_cm),
            iv.and_then(|i| i.suction_at_half_saturation_cm.as_ref()),
        ),
        (
            d.and_then(|d| d.k_field_capacity_cm_per_day),
            iv.and_then(|i| i.k_field_capacity_cm_per_day.as_ref()),
        ),
        (
            d.and_then(|d| d.k_wilting_point_cm_per_day),
            iv.and_then(|i| i.k_wilting_point_cm_per_day.as_ref()),
        ),
    ]
}

/// Every fit attempt of one sample, oldest first, the current one marked.
pub fn history_listing(sample: &str, fits: &[StoredFit]) -> Listing {
    let mut l = Listing::new(
        [
            "fit",
            "sample",
            "model",
            "requested",
            "status",
            "current",
            "parameters",
            "rmse_m3_m3",
            "aicc",
            "n_points",
            "fitted_at_utc",
            "message",
        ]
        .into_iter()
        .map(Column::new)
        .collect(),
    );
    for f in fits {
        let report = f.report.as_ref();
        l.push(vec![
            Cell::Int(f.id),
            Cell::text(sample),
            Cell::text(&f.model),
            f.requested.clone().into(),
            Cell::text(match f.status {
                crate::store::fits::FitStatus::Ok => "ok",
                crate::store::fits::FitStatus::Failed => "failed",
            }),
            Cell::text(if f.is_current { "yes" } else { "" }),
            report.map(parameters_text).into(),
            report.map(|r| r.rmse).into(),
            report.and_then(|r| r.aicc).into(),
            Cell::Int(f.n_points as i64),
            Cell::text(f.created_at.format("%Y-%m-%d %H:%M:%S").to_string()),
            f.message.clone().into(),
        ]);
    }
    l
}

/// Per site and layer: available water (m3/m3) with its 95 % interval, the part of the layer
/// in the root zone and its water in mm with its interval; then a `total` row per site with
/// the profile sum and its interval. Every row states the campaign's pooled between-core
/// variance and the number of layers it came from (CSV and JSON; [`pooled_note`] for tables).
pub fn profiles_listing(profiles: &[SiteProfile]) -> Listing {
    let mut l = Listing::new(vec![
        Column::new("site"),
        Column::new("layer"),
        Column::new("horizon"),
        Column::new("texture"),
        Column::new("basis"),
        Column::new("lab_cores"),
        Column::new("fitted_cores"),
        Column::new("stale_cores"),
        Column::new("available_water_m3_m3"),
        Column::export_only("available_water_m3_m3_lo95"),
        Column::export_only("available_water_m3_m3_hi95"),
        Column::new("field_available_water_m3_m3"),
        Column::new("depth_in_root_zone_cm"),
        Column::new("water_mm"),
        Column::export_only("water_mm_lo95"),
        Column::export_only("water_mm_hi95"),
        Column::export_only("between_core_tau2_m3_m3_squared"),
        Column::export_only("between_core_layers"),
        Column::export_only("interval_note"),
    ]);
    let pooled = |p: &SiteProfile| -> [Cell; 2] {
        match p.between_cores {
            Some(b) => [b.tau2.into(), Cell::Int(b.layers as i64)],
            None => [Cell::Real(None), Cell::Int(0)],
        }
    };
    for p in profiles {
        for w in &p.layers {
            let aw = w.available_water_interval;
            let mm = w.water_mm_interval;
            let mut row = vec![
                Cell::text(&p.site),
                Cell::text(format!(
                    "{}-{}",
                    significant(w.layer.top_cm, 6).unwrap_or_default(),
                    significant(w.layer.bottom_cm, 6).unwrap_or_default()
                )),
                w.horizon.clone().into(),
                w.texture.map(|t| t.name().to_string()).into(),
                layer_basis(w).into(),
                Cell::Int(w.lab_cores as i64),
                Cell::Int(w.fitted_cores as i64),
                Cell::Int(w.stale_cores as i64),
                if w.estimate.is_some() {
                    range_cell(w.available_water, aw)
                } else {
                    sum_cell(w.available_water, aw)
                },
                aw.map(|i| i.lo95).into(),
                aw.map(|i| i.hi95).into(),
                w.field_available_water.into(),
                w.depth_in_zone_cm.into(),
                if w.estimate.is_some() {
                    range_cell(w.water_mm, mm)
                } else {
                    sum_cell(w.water_mm, mm)
                },
                mm.map(|i| i.lo95).into(),
                mm.map(|i| i.hi95).into(),
            ];
            row.extend(pooled(p));
            row.push(w.interval_note.clone().into());
            l.push(row);
        }
        let uncovered = p.uncovered_cm();
        let total = p.total_mm_interval;
        let mut row = vec![
            Cell::text(&p.site),
            Cell::text(format!(
                "total 0-{}",
                significant(p.root_zone_cm, 6).unwrap_or_default()
            )),
            if uncovered > 0.0 {
                Cell::text(format!(
                    "{} cm without data",
                    significant(uncovered, 4).unwrap_or_default()
                ))
            } else {
                Cell::Text(None)
            },
            Cell::Text(None),
            p.layers
                .iter()
                .any(|l| l.estimate.is_some() && l.depth_in_zone_cm > 0.0)
                .then(|| format!("{ESTIMATE_GLYPH} includes texture estimates"))
                .into(),
            Cell::Text(None),
            Cell::Text(None),
            Cell::Text(None),
            Cell::Real(None),
            Cell::Real(None),
            Cell::Real(None),
            Cell::Real(None),
            p.covered_cm.into(),
            sum_cell(Some(p.total_mm), total),
            total.map(|i| i.lo95).into(),
            total.map(|i| i.hi95).into(),
        ];
        row.extend(pooled(p));
        row.push(
            p.total_note
                .clone()
                .or_else(|| total.map(|_| "layers taken as independent".to_string()))
                .into(),
        );
        l.push(row);
    }
    l
}

/// The mark of a value estimated from texture rather than measured.
pub const ESTIMATE_GLYPH: char = '◌';

/// A profile layer's basis: `readings` with a fitted core, `◌ texture only` for a texture
/// estimate, none otherwise.
fn layer_basis(w: &crate::analysis::LayerWater) -> Option<String> {
    if let Some(e) = &w.estimate {
        Some(format!("{ESTIMATE_GLYPH} {}", e.basis))
    } else {
        (w.fitted_cores > 0).then(|| crate::fit::prior::BASIS_READINGS.to_string())
    }
}

/// The line under a profiles table: the intervals' convention and the pooled between-core
/// variance with the layers it came from.
pub fn pooled_note(profiles: &[SiteProfile]) -> String {
    let pooled = profiles.iter().find_map(|p| p.between_cores).map_or_else(
        || {
            "no between-core variance: no layer of the campaign has two fitted lab cores, so \
             layers have no interval"
                .to_string()
        },
        |b| format!("between-core variance {}", b.describe()),
    );
    let estimates = if profiles
        .iter()
        .any(|p| p.layers.iter().any(|l| l.estimate.is_some()))
    {
        format!(
            "{ESTIMATE_GLYPH} texture only: not measured; the layer's texture-class mean \
             (Carsel & Parrish 1988), its interval the class spread\n"
        )
    } else {
        String::new()
    };
    format!(
        "± is the 95 % interval: a layer's random-effects mean over its lab cores (DerSimonian & \
         Laird 1986), the total with the layers taken as independent; {pooled}\n{estimates}"
    )
}
