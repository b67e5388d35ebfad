//! The outlier review of a campaign: run the checks of [`crate::fit::outliers`] over every
//! sample, keep their suggestions as flags (so the queue survives a restart), decide them,
//! and refit the samples whose readings changed.
//!
//! The noise is always estimated from the whole campaign; a selection only limits which
//! samples get their suggestions refreshed. The CLI (`porewise review`, `flag`, `unflag`) and
//! the terminal UI both call these functions.

use std::collections::{BTreeMap, HashMap, HashSet};

use super::fitting::{FitRunSummary, ModelChoice, fit_campaign_with};
use crate::fit::FitOptions;
use crate::fit::outliers::{Noise, OutlierOptions, OutlierSample, review};
use crate::model::conductivity::ConductivityForm;
use crate::model::domain::{Branch, FlagOrigin, FlagStatus, FlagTarget};
use crate::model::retention::ModelKind;
use crate::store::fits::{self, Selection};
use crate::store::flags::{self, FlagFilter, FlagRow, Raised, Suggestion};
use crate::store::{Campaign, Filter, Result, StoreError, readings, samples};

/// Rule name of the suggestions of the retention checks (one open suggestion per reading,
/// whichever checks found it).
pub const RULE: &str = "retention-checks";

/// How the review judges readings.
#[derive(Debug, Clone, PartialEq)]
pub struct ReviewOptions {
    /// Thresholds of the checks.
    pub checks: OutlierOptions,
    /// The model to judge with; `None` for each sample's current model (`auto` without one).
    ///
    /// The default is van Genuchten (m = 1 - 1/n): smooth and with four parameters it bends
    /// to the shape of a unimodal curve but not to a wild reading, which a more flexible model
    /// chosen by AICc with the wild reading in may do.
    pub model: Option<ModelKind>,
}

impl Default for ReviewOptions {
    fn default() -> Self {
        Self {
            checks: OutlierOptions::default(),
            model: Some(ModelKind::VanGenuchten),
        }
    }
}

/// What a refresh did.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct RefreshSummary {
    /// The campaign's noise levels.
    pub noise: Noise,
    /// Samples whose suggestions were refreshed.
    pub samples: usize,
    /// New suggestions stored.
    pub raised: usize,
    /// Open suggestions found again (reason and score brought up to date).
    pub refreshed: usize,
    /// Suspect readings the user already decided about, left alone.
    pub declined: usize,
    /// Open suggestions the checks no longer make, withdrawn.
    pub withdrawn: usize,
}

/// The readings of every sample as the checks see them, with their reading ids.
fn campaign_samples(
    conn: &rusqlite::Connection,
    options: &ReviewOptions,
) -> Result<(Vec<fits::FitInput>, Vec<OutlierSample>)> {
    let inputs = fits::inputs(conn, &Selection::all())?;
    let info: HashMap<i64, (Option<String>, Branch, Option<String>)> =
        readings::list(conn, Filter::default())?
            .into_iter()
            .map(|row| {
                let s = row.stored;
                (
                    s.id,
                    (
                        s.reading.method.map(|m| m.0),
                        s.reading.branch,
                        s.source_file,
                    ),
                )
            })
            .collect();
    let density: HashMap<i64, Option<f64>> = samples::list(conn, Filter::default())?
        .into_iter()
        .map(|row| {
            let s = row.stored;
            (
                s.id,
                s.sample.bulk_density_g_cm3.or(s.layer_bulk_density_g_cm3),
            )
        })
        .collect();
    let kept = flags::kept_by_user(conn)?;
    let mut out = Vec::with_capacity(inputs.len());
    for input in &inputs {
        let current = fits::current(conn, input.sample.id)?;
        let mut fit_options = FitOptions::new();
        for (name, value) in current.as_ref().map_or(&[][..], |f| &f.fixed[..]) {
            fit_options = fit_options.with_fixed(name, *value);
        }
        let model = options.model.or_else(|| {
            current
                .as_ref()
                .and_then(|f| f.report.as_ref())
                .and_then(|r| r.model.parse().ok())
        });
        let mut sample = OutlierSample::new(input.h_cm.clone(), input.theta.clone());
        sample.weights.clone_from(&input.weights);
        for (k, id) in input.reading_ids.iter().enumerate() {
            if let Some((method, branch, source)) = info.get(id) {
                sample.method[k] = method
                    .as_deref()
                    .map(str::trim)
                    .filter(|m| !m.is_empty())
                    .unwrap_or("unspecified")
                    .to_lowercase();
                sample.branch[k] = *branch;
                sample.source[k] = source.clone().unwrap_or_default();
            }
            sample.keep[k] = kept.contains(id);
        }
        sample.bulk_density_g_cm3 = density.get(&input.sample.id).copied().flatten();
        sample.model = model;
        sample.options = fit_options;
        out.push(sample);
    }
    Ok((inputs, out))
}

/// Run the checks over the campaign and store their suggestions for the selected samples, in
/// one transaction: new suspects become suggested flags, open suggestions found again are
/// refreshed, open suggestions no longer found are withdrawn, and readings the user already
/// kept are left alone.
///
/// # Errors
/// An unknown site, layer or sample code in the selection, invalid thresholds
/// ([`StoreError::Refused`]) or an SQLite error; nothing is written then.
pub fn refresh(
    campaign: &mut Campaign,
    selection: &Selection,
    options: &ReviewOptions,
) -> Result<RefreshSummary> {
    options.checks.validate().map_err(StoreError::Refused)?;
    let tx = campaign.transaction()?;
    selection.check(&tx)?;
    let (inputs, samples) = campaign_samples(&tx, options)?;
    let result = review(&samples, &options.checks);
    let selected: HashSet<i64> = fits::samples(&tx, selection)?
        .into_iter()
        .map(|s| s.id)
        .collect();
    let mut summary = RefreshSummary {
        noise: result.noise.clone(),
        ..RefreshSummary::default()
    };
    let mut found: HashSet<i64> = HashSet::new();
    for (input, sample_review) in inputs.iter().zip(&result.samples) {
        if !selected.contains(&input.sample.id) {
            continue;
        }
        summary.samples += 1;
        for finding in &sample_review.findings {
            let Some(&reading) = input.reading_ids.get(finding.index) else {
                continue;
            };
            found.insert(reading);
            let raised = flags::suggest(
                &tx,
                &Suggestion {
                    target: FlagTarget::Reading(reading),
                    rule: RULE,
                    reason: &finding.reason,
                    score: Some(finding.score),
                },
            )?;
            match raised {
                Raised::New(_) => summary.raised += 1,
                Raised::Refreshed(_) => summary.refreshed += 1,
                Raised::Declined(_) => summary.declined += 1,
            }
        }
    }
    let open = flags::list(
        &tx,
        &FlagFilter {
            status: Some(FlagStatus::Suggested),
            origin: Some(FlagOrigin::Auto),
            ..FlagFilter::default()
        },
    )?;
    for row in open {
        let flags::Subject::Reading {
            reading_id,
            sample_id,
            ..
        } = row.subject
        else {
            continue;
        };
        if row.stored.rule.as_deref() == Some(RULE)
            && selected.contains(&sample_id)
            && !found.contains(&reading_id)
        {
            flags::withdraw(
                &tx,
                row.stored.id,
                Some("the checks no longer find this reading suspect"),
            )?;
            summary.withdrawn += 1;
        }
    }
    tx.commit()?;
    Ok(summary)
}

/// The review queue of the selected site or sample (see [`flags::queue`]).
///
/// # Errors
/// An SQLite error.
pub fn queue(campaign: &Campaign, filter: &FlagFilter) -> Result<Vec<FlagRow>> {
    flags::queue(campaign.connection(), filter)
}

/// A reviewer's decision on the open suggestions of a reading.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Decision {
    /// Leave the reading out of fits.
    Accept,
    /// Keep the reading; the checks do not ask again.
    Dismiss,
}

/// What a batch of decisions did.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Decided {
    /// Flags whose status changed.
    pub flags: Vec<i64>,
    /// Readings concerned.
    pub readings: Vec<i64>,
    /// The refit of the samples whose readings changed (empty when no refit was asked for).
    pub refit: FitRunSummary,
}

/// Accept or dismiss the open suggestions on each reading, all in one transaction, then
/// (when `refit`) refit the samples whose set of readings changed.
///
/// # Errors
/// A reading that does not exist or has no open suggestion (nothing is changed then), or an
/// SQLite error.
pub fn decide(
    campaign: &mut Campaign,
    readings: &[i64],
    decision: Decision,
    note: Option<&str>,
    refit: bool,
) -> Result<Decided> {
    let tx = campaign.transaction()?;
    let mut out = Decided::default();
    let mut samples = Vec::new();
    for &reading in readings {
        let target = FlagTarget::Reading(reading);
        let ids = match decision {
            Decision::Accept => flags::accept_target(&tx, target, note)?,
            Decision::Dismiss => flags::dismiss_target(&tx, target, note)?,
        };
        out.flags.extend(ids);
        out.readings.push(reading);
        samples.push(sample_of(&tx, reading)?);
    }
    tx.commit()?;
    if refit && decision == Decision::Accept {
        out.refit = refit_samples(campaign, &samples)?;
    }
    Ok(out)
}

/// Accept every open suggestion of the queue (narrowed by `filter`'s site and sample) in one
/// transaction, then (when `refit`) refit the affected samples.
///
/// # Errors
/// An SQLite error; nothing is accepted then.
pub fn accept_all(
    campaign: &mut Campaign,
    filter: &FlagFilter,
    note: Option<&str>,
    refit: bool,
) -> Result<Decided> {
    let tx = campaign.transaction()?;
    let mut out = Decided::default();
    let mut samples = Vec::new();
    for row in flags::queue(&tx, filter)? {
        flags::accept(&tx, row.stored.id, note)?;
        out.flags.push(row.stored.id);
        if let flags::Subject::Reading {
            reading_id,
            sample_id,
            ..
        } = row.subject
        {
            out.readings.push(reading_id);
            samples.push(sample_id);
        }
    }
    tx.commit()?;
    if refit {
        out.refit = refit_samples(campaign, &samples)?;
    }
    Ok(out)
}

fn sample_of(conn: &rusqlite::Connection, reading: i64) -> Result<i64> {
    Ok(conn
        .prepare_cached("SELECT sample_id FROM reading WHERE id = ?1")?
        .query_row([reading], |r| r.get(0))?)
}

/// Refit samples (database ids) through [`fit_campaign_with`], each with what its current fit
/// asked for (a model or `auto`, its fixed parameters and conductivity form), `auto` when it
/// has none.
///
/// # Errors
/// An SQLite error.
pub fn refit_samples(campaign: &mut Campaign, sample_ids: &[i64]) -> Result<FitRunSummary> {
    type Group = (
        ModelChoice,
        FitOptions,
        Option<ConductivityForm>,
        Vec<String>,
    );
    let wanted: HashSet<i64> = sample_ids.iter().copied().collect();
    if wanted.is_empty() {
        return Ok(FitRunSummary::default());
    }
    // Group the samples by (requested model, fixed values, conductivity) so each group is one run.
    let mut groups: BTreeMap<(String, String, Option<ConductivityForm>), Group> = BTreeMap::new();
    let mut joint: Vec<(crate::model::retention::ModelKind, Vec<String>)> = Vec::new();
    for sample in fits::samples(campaign.connection(), &Selection::all())? {
        if !wanted.contains(&sample.id) {
            continue;
        }
        let current = fits::current(campaign.connection(), sample.id)?;
        let requested = current.as_ref().and_then(|f| f.requested.as_deref());
        // A joint fit with measured conductivity is refitted jointly (estimated weights, Ks
        // and L free, as the terminal UI's joint refit).
        if let Some(kind) = requested
            .and_then(|r| r.strip_suffix(super::joint::REQUESTED_SUFFIX))
            .and_then(|k| k.parse::<crate::model::retention::ModelKind>().ok())
        {
            match joint.iter_mut().find(|(k, _)| *k == kind) {
                Some((_, codes)) => codes.push(sample.code),
                None => joint.push((kind, vec![sample.code])),
            }
            continue;
        }
        // A fit with the texture prior is refitted with it (see `texture`).
        let with_prior = requested == Some(super::texture::REQUESTED_WITH_PRIOR);
        let choice = if with_prior {
            ModelChoice::One(crate::model::retention::ModelKind::VanGenuchten)
        } else {
            requested
                .and_then(|r| r.parse::<ModelChoice>().ok())
                .unwrap_or_default()
        };
        let conductivity = current.as_ref().and_then(|f| f.conductivity);
        let fixed = current.map(|f| f.fixed).unwrap_or_default();
        let key = (
            if with_prior {
                super::texture::REQUESTED_WITH_PRIOR.to_string()
            } else {
                choice.to_string()
            },
            fixed
                .iter()
                .map(|(n, v)| format!("{n}={v}"))
                .collect::<Vec<_>>()
                .join(","),
            conductivity,
        );
        let entry = groups.entry(key).or_insert_with(|| {
            let options = fixed
                .iter()
                .fold(FitOptions::new(), |o, (n, v)| o.with_fixed(n, *v));
            (choice, options, conductivity, Vec::new())
        });
        entry.3.push(sample.code);
    }
    let mut summary = FitRunSummary::default();
    for (kind, codes) in joint {
        let selection = Selection {
            samples: codes,
            ..Selection::default()
        };
        summary.extend(super::joint::refit_joint(
            campaign,
            &selection,
            kind,
            &|_, _| {},
        )?);
    }
    for ((requested, _, _), (choice, options, conductivity, codes)) in groups {
        let selection = Selection {
            samples: codes,
            ..Selection::default()
        };
        if requested == super::texture::REQUESTED_WITH_PRIOR {
            let run = super::texture::fit_campaign_with_prior(
                campaign,
                &selection,
                choice,
                &options,
                super::texture::PriorRule::Always,
                conductivity,
                &|_, _| {},
            )?;
            summary.extend(run.run);
            continue;
        }
        let run = fit_campaign_with(
            campaign,
            &selection,
            choice,
            &options,
            conductivity,
            &|_, _| {},
        )?;
        summary.extend(run);
    }
    Ok(summary)
}

/// Flag a reading or a conductivity reading by hand (it is left out of fits at once);
/// returns the flag id.
///
/// # Errors
/// As [`flags::flag_manual`].
pub fn flag_reading(
    campaign: &mut Campaign,
    target: FlagTarget,
    reason: &str,
    note: Option<&str>,
) -> Result<i64> {
    let tx = campaign.transaction()?;
    let id = flags::flag_manual(&tx, target, reason, note)?;
    tx.commit()?;
    Ok(id)
}

/// Clear every flag that leaves a reading (or conductivity reading) out of fits; returns the
/// flag ids.
///
/// # Errors
/// As [`flags::clear_target`].
pub fn unflag_reading(
    campaign: &mut Campaign,
    target: FlagTarget,
    note: Option<&str>,
) -> Result<Vec<i64>> {
    let tx = campaign.transaction()?;
    let ids = flags::clear_target(&tx, target, note)?;
    tx.commit()?;
    Ok(ids)
}

/// The sample of a reading or conductivity reading and where its fit stands now (after a
/// flag change, say).
///
/// # Errors
/// [`StoreError::Unknown`] for a reading that does not exist (or a logger record, which has
/// no sample), or an SQLite error.
pub fn fit_state_of_reading(
    conn: &rusqlite::Connection,
    target: FlagTarget,
) -> Result<(String, fits::FitState)> {
    use rusqlite::OptionalExtension as _;
    let (sql, id, what) = match target {
        FlagTarget::Reading(id) => (
            "SELECT m.code FROM reading r JOIN sample m ON m.id = r.sample_id WHERE r.id = ?1",
            id,
            "reading",
        ),
        FlagTarget::ConductivityReading(id) => (
            "SELECT m.code FROM conductivity_reading c JOIN sample m ON m.id = c.sample_id
             WHERE c.id = ?1",
            id,
            "conductivity reading",
        ),
        FlagTarget::LoggerRecord(id) => {
            return Err(StoreError::Unknown {
                what: "sample of logger record",
                code: id.to_string(),
            });
        }
    };
    let code: Option<String> = conn
        .prepare_cached(sql)?
        .query_row([id], |r| r.get(0))
        .optional()?;
    let code = code.ok_or_else(|| StoreError::Unknown {
        what,
        code: id.to_string(),
    })?;
    let samples = fits::samples(
        conn,
        &Selection {
            samples: vec![code.clone()],
            ..Selection::default()
        },
    )?;
    let state = fits::summaries(conn, &samples)?
        .into_values()
        .next()
        .map_or(fits::FitState::None, |s| s.state);
    Ok((code, state))
}
