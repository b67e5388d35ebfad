//! Joint retention and conductivity fits of stored samples (`porewise fit --with-conductivity`).
//!
//! Reads each selected sample's retention readings (flag exclusions applied, as every fit
//! does), its measured conductivity and Ks, fits them together ([`fit_joint`]) without the
//! write lock, and records each fit as a new fit of the sample: its row holds the retention
//! view (so derived values, listings and the card read it as any fit) and the joint record
//! (Ks, L, every covariance, the statistics per set). The new fit becomes current; the
//! retention-only fits stay in the history and `porewise current` makes any of them current
//! again.

use std::sync::atomic::{AtomicUsize, Ordering};

use rayon::prelude::*;

use super::fitting::FitRunSummary;
use crate::fit::joint::{
    JointData, JointOptions, JointReport, KPoint, Weighting, fit_joint, joint_conductivity_model,
};
use crate::model::conductivity::ConductivityForm;
use crate::model::retention::ModelKind;
use crate::store::conductivity::{self as store_k, JointRecord, Where};
use crate::store::fits::{self, FitInput, NewFit, Selection};
use crate::store::{Campaign, StoreError};

/// How the Ks of a joint fit is chosen.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub enum KsChoice {
    /// Estimated with the other parameters.
    #[default]
    Free,
    /// Held at the sample's measured Ks (else its layer's); a sample with neither is not
    /// fitted.
    Measured,
}

/// What a campaign's joint fits are asked for.
#[derive(Debug, Clone, PartialEq)]
pub struct JointRequest {
    /// The retention model.
    pub kind: ModelKind,
    /// Parameters held (retention names, `ks_cm_per_day`, `pore_connectivity`).
    pub fixed: Vec<(String, f64)>,
    /// Ks free or the measured one.
    pub ks: KsChoice,
    /// How the two data sets are weighted.
    pub weighting: Weighting,
}

/// What a joint fit's `requested` text ends with, after its model's id.
pub const REQUESTED_SUFFIX: &str = "+conductivity";

/// The `requested` text of a joint fit row (`van-genuchten+conductivity`).
pub fn requested_text(kind: ModelKind) -> String {
    format!("{}{REQUESTED_SUFFIX}", kind.id())
}

/// One sample's conductivity data, read with its retention input.
struct Input {
    fit: FitInput,
    fingerprint: String,
    ids: Vec<i64>,
    k_at: Vec<KPoint>,
    k: Vec<f64>,
    ks: store_k::SampleKs,
}

/// The result of one sample's joint fit, ready to record.
struct Outcome {
    report: Result<(JointReport, Option<String>), String>,
}

/// Fit the selected samples' retention and conductivity data together and record the fits.
/// Samples without conductivity readings are left alone and listed in the summary's
/// `changed`-like `skipped` (returned beside it).
///
/// # Errors
/// A selection naming what is not there, or an SQLite error.
pub fn fit_campaign_joint(
    campaign: &mut Campaign,
    selection: &Selection,
    request: &JointRequest,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<(FitRunSummary, Vec<String>), StoreError> {
    let inputs: Vec<Input> = {
        let tx = campaign.read_transaction()?;
        selection.check(&tx)?;
        let mut out = Vec::new();
        for fit in fits::inputs(&tx, selection)? {
            let all = store_k::of_sample(&tx, fit.sample.id)?;
            let ks = store_k::ks_of_sample(&tx, fit.sample.id)?;
            // The fingerprint covers the flagged readings too (flagging one makes the joint
            // fit stale); the fit uses the others.
            let fingerprint = store_k::fingerprint(&all);
            let rows: Vec<_> = all.into_iter().filter(|r| !r.excluded).collect();
            out.push(Input {
                fingerprint,
                ids: rows.iter().map(|r| r.id).collect(),
                k_at: rows
                    .iter()
                    .map(|r| match r.reading.at {
                        Where::Suction(h) => KPoint::Suction(h),
                        Where::Water(t) => KPoint::Water(t),
                    })
                    .collect(),
                k: rows.iter().map(|r| r.reading.k_cm_per_day).collect(),
                ks,
                fit,
            });
        }
        out
    };
    let (with_k, without): (Vec<Input>, Vec<Input>) =
        inputs.into_iter().partition(|i| !i.k.is_empty());
    let skipped: Vec<String> = without.into_iter().map(|i| i.fit.sample.code).collect();
    let total = with_k.len();
    progress(0, total);
    let done = AtomicUsize::new(0);
    let outcomes: Vec<Outcome> = with_k
        .par_iter()
        .map(|input| {
            let outcome = fit_one(input, request);
            progress(done.fetch_add(1, Ordering::Relaxed) + 1, total);
            outcome
        })
        .collect();
    let requested = requested_text(request.kind);
    let mut summary = FitRunSummary::default();
    let tx = campaign.transaction_waiting(super::fitting::COMMIT_WAIT)?;
    for (input, outcome) in with_k.iter().zip(outcomes) {
        let code = &input.fit.sample.code;
        if !fits::unchanged(&tx, &input.fit)? {
            summary.changed.push(code.clone());
            continue;
        }
        let mut fixed = request.fixed.clone();
        match outcome.report {
            Ok((report, ks_source)) => {
                let view = report.retention_view(&input.fit.h_cm);
                if let Some(ks) = report
                    .fit
                    .parameters
                    .iter()
                    .find(|p| p.name == "ks_cm_per_day" && p.fixed)
                {
                    fixed.retain(|(n, _)| n != "ks_cm_per_day");
                    fixed.push(("ks_cm_per_day".to_string(), ks.value));
                }
                let failure = (!report.fit.converged).then(|| {
                    report
                        .fit
                        .message
                        .clone()
                        .unwrap_or_else(|| "the joint fit did not converge".to_string())
                });
                let id = fits::record(
                    &tx,
                    &NewFit {
                        input: &input.fit,
                        requested: &requested,
                        model: request.kind.id(),
                        fixed: &fixed,
                        report: Some(&view),
                        ranking: None,
                        failure: failure.as_deref(),
                        conductivity: Some(ConductivityForm::Mualem),
                    },
                )?;
                store_k::set_joint(
                    &tx,
                    id,
                    &JointRecord {
                        report,
                        conductivity_reading_ids: input.ids.clone(),
                        ks_source,
                        conductivity_fingerprint: Some(input.fingerprint.clone()),
                    },
                )?;
                match failure {
                    Some(reason) => summary.failed.push((code.clone(), reason)),
                    None => summary.fitted.push((code.clone(), requested.clone())),
                }
            }
            Err(reason) => {
                fits::record(
                    &tx,
                    &NewFit {
                        input: &input.fit,
                        requested: &requested,
                        model: request.kind.id(),
                        fixed: &fixed,
                        report: None,
                        ranking: None,
                        failure: Some(&reason),
                        conductivity: Some(ConductivityForm::Mualem),
                    },
                )?;
                summary.failed.push((code.clone(), reason));
            }
        }
    }
    tx.commit().map_err(StoreError::from)?;
    Ok((summary, skipped))
}

/// Fit one sample; the error is the reason it could not be fitted.
fn fit_one(input: &Input, request: &JointRequest) -> Outcome {
    let mut options = JointOptions::new(request.kind);
    let mut ks_source = None;
    for (name, v) in &request.fixed {
        match name.as_str() {
            "ks_cm_per_day" => options.ks_cm_per_day = Some(*v),
            "pore_connectivity" => options.pore_connectivity = Some(*v),
            _ => options.fixed.push((name.clone(), *v)),
        }
    }
    if request.ks == KsChoice::Measured {
        let (value, source) = match (input.ks.sample, input.ks.layer) {
            (Some(v), _) => (v, "sample"),
            (None, Some(v)) => (v, "layer"),
            (None, None) => {
                return Outcome {
                    report: Err(
                        "no measured Ks for the sample or its layer (--ks measured)".to_string()
                    ),
                };
            }
        };
        options.ks_cm_per_day = Some(value);
        ks_source = Some(source.to_string());
    }
    options.weighting = request.weighting;
    if joint_conductivity_model(request.kind).is_none() {
        return Outcome {
            report: Err(format!(
                "{} has no Mualem conductivity form",
                request.kind.display_name()
            )),
        };
    }
    let data = JointData {
        h_cm: &input.fit.h_cm,
        theta: &input.fit.theta,
        theta_weights: input.fit.weights.as_deref(),
        k_at: &input.k_at,
        k_cm_per_day: &input.k,
    };
    Outcome {
        report: fit_joint(&data, &options)
            .map(|r| (r, ks_source))
            .map_err(|e| e.to_string()),
    }
}

/// A joint fit's derived conductivity: K at field capacity and wilting point from the fitted
/// Ks and L (not the layer's Ks and L = 0.5 that a retention-only fit's K uses), each with
/// its interval over every parameter of the joint fit.
pub fn adjust_derived(
    derived: &mut crate::analysis::water::FitDerived,
    record: &JointRecord,
    settings: &crate::store::campaign::CampaignSettings,
) {
    use crate::model::units::CM_PER_KPA;
    let r = &record.report;
    derived.ks_cm_per_day = Some(r.ks());
    derived.conductivity_model = Some(r.conductivity_model);
    let at = |kpa: f64| r.conductivity_interval(kpa * CM_PER_KPA);
    let (fc, pwp) = (at(settings.fc_kpa), at(settings.pwp_kpa));
    derived.k_field_capacity_cm_per_day = fc.as_ref().map(|v| v.0);
    derived.k_wilting_point_cm_per_day = pwp.as_ref().map(|v| v.0);
    derived.intervals.k_field_capacity_cm_per_day = fc.and_then(|v| v.1);
    derived.intervals.k_wilting_point_cm_per_day = pwp.and_then(|v| v.1);
}

/// A current fit's derived values, its conductivity taken from the joint fit when it is one
/// (see [`adjust_derived`]); unchanged for a retention-only fit.
///
/// # Errors
/// A stored joint record that does not decode, or an SQLite error.
pub fn with_joint(
    conn: &rusqlite::Connection,
    fit: Option<&crate::store::fits::StoredFit>,
    derived: Option<crate::analysis::water::FitDerived>,
    settings: &crate::store::campaign::CampaignSettings,
) -> Result<Option<crate::analysis::water::FitDerived>, StoreError> {
    let (Some(fit), Some(mut derived)) = (fit, derived) else {
        return Ok(None);
    };
    if let Some(record) = store_k::joint_of(conn, fit.id)? {
        adjust_derived(&mut derived, &record, settings);
    }
    Ok(Some(derived))
}

/// A joint refit asked for from the terminal UI: the selected samples fitted with `kind`,
/// estimated weights, Ks and L free; samples without conductivity readings are reported as
/// not fitted (nothing is recorded for them).
///
/// # Errors
/// [`StoreError::Refused`] for a model without a Mualem form; as [`fit_campaign_joint`].
pub fn refit_joint(
    campaign: &mut Campaign,
    selection: &Selection,
    kind: ModelKind,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<FitRunSummary, StoreError> {
    if joint_conductivity_model(kind).is_none() {
        return Err(StoreError::Refused(format!(
            "{} has no Mualem conductivity form: choose van Genuchten, free m, Brooks-Corey, \
             Kosugi or Durner with m",
            kind.display_name()
        )));
    }
    let request = JointRequest {
        kind,
        fixed: Vec::new(),
        ks: KsChoice::Free,
        weighting: Weighting::Estimated,
    };
    let (mut summary, skipped) = fit_campaign_joint(campaign, selection, &request, progress)?;
    for code in skipped {
        summary.failed.push((
            code,
            "no conductivity readings (porewise import conductivity)".to_string(),
        ));
    }
    Ok(summary)
}
