//! Listings of campaign fits: the current fit per sample, a sample's fit history, and the
//! available-water profiles.

use super::fit_table::parameter_union;
use super::table::{Cell, Column, Listing};
use crate::analysis::{SampleFit, SiteProfile};
use crate::fit::FitReport;
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
/// AICc, derived values and whether it is stale.
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
        Column::new("state"),
        Column::new("parameters"),
    ];
    columns.extend(params.iter().map(|p| Column::export_only(p.clone())));
    columns.extend(
        params
            .iter()
            .map(|p| Column::export_only(format!("{p}_se"))),
    );
    for name in [
        "rmse_m3_m3",
        "r2",
        "aicc",
        "n_points",
        "theta_fc_m3_m3",
        "theta_pwp_m3_m3",
        "available_water_m3_m3",
        "air_entry_cm",
        "fitted_at_utc",
    ] {
        columns.push(Column::new(name));
    }
    let mut l = Listing::new(columns);
    for r in rows {
        let report = r.fit.as_ref().and_then(|f| f.report.as_ref());
        let values = r.derived.as_ref().map(|d| &d.values);
        let mut row = vec![
            Cell::text(&r.sample.code),
            Cell::text(&r.sample.layer.site),
            r.sample.layer.top_cm.into(),
            r.sample.layer.bottom_cm.into(),
            r.fit.as_ref().map(|f| f.model.clone()).into(),
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
            values.and_then(|v| v.theta_field_capacity).into(),
            values.and_then(|v| v.theta_wilting_point).into(),
            values.and_then(|v| v.plant_available_water).into(),
            values
                .and_then(|v| v.air_entry.as_ref())
                .map(|a| a.suction_cm)
                .into(),
            r.fit
                .as_ref()
                .map(|f| f.created_at.format("%Y-%m-%d %H:%M:%S").to_string())
                .into(),
        ]);
        l.push(row);
    }
    l
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

/// Per site and layer: available water (m3/m3), the part of the layer in the root zone and
/// its water in mm; then a `total` row per site with the profile sum.
pub fn profiles_listing(profiles: &[SiteProfile]) -> Listing {
    let mut l = Listing::new(
        [
            "site",
            "layer",
            "horizon",
            "lab_cores",
            "fitted_cores",
            "stale_cores",
            "available_water_m3_m3",
            "field_available_water_m3_m3",
            "depth_in_root_zone_cm",
            "water_mm",
        ]
        .into_iter()
        .map(Column::new)
        .collect(),
    );
    for p in profiles {
        for w in &p.layers {
            l.push(vec![
                Cell::text(&p.site),
                Cell::text(format!(
                    "{}-{}",
                    significant(w.layer.top_cm, 6).unwrap_or_default(),
                    significant(w.layer.bottom_cm, 6).unwrap_or_default()
                )),
                w.horizon.clone().into(),
                Cell::Int(w.lab_cores as i64),
                Cell::Int(w.fitted_cores as i64),
                Cell::Int(w.stale_cores as i64),
                w.available_water.into(),
                w.field_available_water.into(),
                w.depth_in_zone_cm.into(),
                w.water_mm.into(),
            ]);
        }
        let uncovered = p.uncovered_cm();
        l.push(vec![
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
            Cell::Text(None),
            Cell::Text(None),
            Cell::Real(None),
            Cell::Real(None),
            p.covered_cm.into(),
            p.total_mm.into(),
        ]);
    }
    l
}
