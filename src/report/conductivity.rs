//! The measured-conductivity listing (`porewise list DB conductivity`).

use std::collections::HashMap;

use super::table::{Cell, Column, Listing};
use crate::model::units::{ConductivityUnit, SuctionUnit};
use crate::store::conductivity::{SampleKs, StoredConductivity};

/// One row per measured K: id, sample and layer, where it was measured (suction in `unit` or
/// water content), K in `k_unit`, the sample's measured Ks and its layer's, method, day,
/// notes and the `FILE:LINE` it came from. A K(h) listing's CSV imports as a conductivity
/// file.
pub fn conductivity_listing<S: std::hash::BuildHasher>(
    rows: &[StoredConductivity],
    unit: SuctionUnit,
    k_unit: ConductivityUnit,
    ks: &HashMap<i64, SampleKs, S>,
) -> Listing {
    let k_name = k_unit.column_name("conductivity");
    let ks_name = k_unit.column_name("ks");
    let layer_ks_name = k_unit.column_name("layer_ks");
    let names = [
        "reading",
        "sample",
        "site",
        "top_cm",
        "bottom_cm",
        unit.column_name(),
        "theta",
        k_name.as_str(),
        ks_name.as_str(),
        layer_ks_name.as_str(),
        "flag",
        "method",
        "measured_on",
        "notes",
        "source",
        "uid",
    ];
    let columns = names
        .iter()
        .map(|n| {
            if *n == "uid" {
                Column::export_only(*n)
            } else {
                Column::new(*n)
            }
        })
        .collect();
    let mut l = Listing::new(columns);
    let in_unit = |v: Option<f64>| v.map(|v| k_unit.from_cm_per_day(v));
    for r in rows {
        let x = &r.reading;
        let sample_ks = ks.get(&r.sample_id).copied().unwrap_or_default();
        let suction = match x.at.h_cm() {
            Some(h) => Cell::Decimal(unit.cm_to_decimal(h), unit.from_cm(h)),
            None => Cell::Real(None),
        };
        l.push(vec![
            r.id.into(),
            Cell::text(&x.sample),
            Cell::text(&r.layer.site),
            Cell::exact(Some(r.layer.top_cm)),
            Cell::exact(Some(r.layer.bottom_cm)),
            suction,
            Cell::exact(x.at.theta()),
            Cell::exact(in_unit(Some(x.k_cm_per_day))),
            Cell::exact(in_unit(sample_ks.sample)),
            Cell::exact(in_unit(sample_ks.layer)),
            r.excluded
                .then(|| crate::store::flags::Mark::Excluded.label().to_string())
                .into(),
            x.method.clone().into(),
            x.measured_on.map(|d| d.to_string()).into(),
            x.notes.clone().into(),
            r.source_file
                .as_ref()
                .map(|f| format!("{f}:{}", x.line))
                .into(),
            Cell::text(x.uid.as_str()),
        ]);
    }
    l
}

/// One row per fit made with measured conductivity (current or in the history): whether the
/// sample's conductivity readings are still those it used (`k_readings`), the model
/// and conductivity model, Ks and L with their standard errors, each set's n, SSE, RMSE and
/// R2 (water content in m3/m3, conductivity in log10 of cm/day), the joint s and AICc, the
/// weighting and its noise estimates, and the fit's notes.
pub fn joint_fits_listing(rows: &[crate::store::conductivity::JointRow]) -> Listing {
    let names = [
        "fit",
        "sample",
        "site",
        "current",
        "k_readings",
        "model",
        "conductivity_model",
        "ks_cm_per_day",
        "ks_cm_per_day_se",
        "pore_connectivity",
        "pore_connectivity_se",
        "n_theta",
        "sse_theta",
        "rmse_theta_m3_m3",
        "r2_theta",
        "n_k",
        "sse_log10_k",
        "rmse_log10_k",
        "r2_log10_k",
        "joint_s",
        "joint_aicc",
        "weighting",
        "sigma_theta_m3_m3",
        "sigma_log10_k",
        "notes",
    ];
    let mut l = Listing::new(names.iter().map(|n| Column::new(*n)).collect());
    for row in rows {
        let r = &row.record.report;
        let nr = r.kind.params().len();
        let ks = &r.fit.parameters[nr];
        let lp = &r.fit.parameters[nr + 1];
        let weighting = match r.weighting {
            crate::fit::joint::Weighting::Estimated => "estimated".to_string(),
            crate::fit::joint::Weighting::User { weight } => format!("user {weight}"),
        };
        l.push(vec![
            row.fit_id.into(),
            Cell::text(&row.sample),
            Cell::text(&row.site),
            Cell::text(if row.current { "yes" } else { "" }),
            Cell::text(match row.conductivity_unchanged {
                Some(true) => "as fitted",
                Some(false) => "changed since the fit",
                None => "",
            }),
            Cell::text(r.kind.id()),
            Cell::text(r.conductivity_model.id()),
            Cell::exact(Some(ks.value)),
            Cell::exact(ks.se),
            Cell::exact(Some(lp.value)),
            Cell::exact(lp.se),
            (r.retention.n as u64).into(),
            Cell::exact(Some(r.retention.sse)),
            Cell::exact(Some(r.retention.rmse)),
            Cell::exact(r.retention.r2),
            (r.conductivity.n as u64).into(),
            Cell::exact(Some(r.conductivity.sse)),
            Cell::exact(Some(r.conductivity.rmse)),
            Cell::exact(r.conductivity.r2),
            Cell::exact(r.fit.residual_sd),
            Cell::exact(r.fit.aicc),
            Cell::text(weighting),
            Cell::exact(r.retention.sigma),
            Cell::exact(r.conductivity.sigma),
            Cell::text(r.notes.join("; ")),
        ]);
    }
    l
}
