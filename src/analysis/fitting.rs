//! Fitting samples: one model or `auto` for one set of readings, and whole campaigns.
//!
//! [`fit_choice`] is the one place that turns "fit this model (or auto) to these readings"
//! into an attempt with a report or a reason; the stateless `fit --input`, the campaign's
//! `fit DB`, the review's refits and the terminal UI's worker all go through it.

use std::fmt;
use std::str::FromStr;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::time::{Duration, Instant};

use rayon::prelude::*;

use crate::fit::{AutoFit, FitOptions, FitReport, Readings, fit_auto, fit_model};
use crate::model::conductivity::ConductivityForm;
use crate::model::retention::ModelKind;
use crate::store::fits::{self, EncodedFit, FitInput, NewFit, Ranking, Selection};
use crate::store::{Campaign, StoreError};

/// What to fit: one model, or every model the readings allow ranked by AICc.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum ModelChoice {
    /// One model.
    One(ModelKind),
    /// Every model the point count allows, the AICc-best kept.
    #[default]
    Auto,
}

impl FromStr for ModelChoice {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        if s.trim().eq_ignore_ascii_case("auto") {
            Ok(ModelChoice::Auto)
        } else {
            ModelKind::from_str(s)
                .map(ModelChoice::One)
                .map_err(|e| e.to_string())
        }
    }
}

impl fmt::Display for ModelChoice {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ModelChoice::One(kind) => f.write_str(kind.id()),
            ModelChoice::Auto => f.write_str("auto"),
        }
    }
}

/// The outcome of fitting one set of readings.
#[derive(Debug, Clone, PartialEq)]
pub struct FitAttempt {
    /// Model of the result (the best for `auto`), or the model tried.
    pub model: String,
    /// The report, when the solver produced one.
    pub report: Option<FitReport>,
    /// Why no usable fit came out (an input error, or every `auto` model skipped).
    pub message: Option<String>,
    /// The full `auto` result, when `auto` was asked for.
    pub auto: Option<AutoFit>,
}

impl FitAttempt {
    /// True when the attempt gave a converged fit.
    pub fn is_fitted(&self) -> bool {
        self.report.as_ref().is_some_and(|r| r.converged)
    }

    /// Why the attempt is not a usable fit, when it is not.
    pub fn failure(&self) -> Option<String> {
        if self.is_fitted() {
            return None;
        }
        Some(
            self.message
                .clone()
                .or_else(|| self.report.as_ref().and_then(|r| r.message.clone()))
                .unwrap_or_else(|| "the fit did not converge".to_string()),
        )
    }
}

/// Fit one model, or `auto`, to readings.
pub fn fit_choice(
    choice: ModelChoice,
    readings: &Readings<'_>,
    options: &FitOptions,
) -> FitAttempt {
    match choice {
        ModelChoice::One(kind) => match fit_model(kind, readings, options) {
            Ok(report) => FitAttempt {
                model: kind.id().to_string(),
                report: Some(report),
                message: None,
                auto: None,
            },
            Err(e) => FitAttempt {
                model: kind.id().to_string(),
                report: None,
                message: Some(e.to_string()),
                auto: None,
            },
        },
        ModelChoice::Auto => {
            let auto = fit_auto(&ModelKind::ALL, readings, options);
            let (model, report, message) = match (auto.best(), &auto.fallback) {
                (Some(best), _) => (best.model.clone(), Some(best.clone()), None),
                (None, Some(f)) => (f.model.clone(), Some(f.clone()), None),
                (None, None) => (
                    "auto".to_string(),
                    None,
                    Some(
                        auto.skipped
                            .iter()
                            .map(|s| format!("{}: {}", s.model, s.reason))
                            .collect::<Vec<_>>()
                            .join("; "),
                    ),
                ),
            };
            FitAttempt {
                model,
                report,
                message,
                auto: Some(auto),
            }
        }
    }
}

/// Fit the readings of one stored sample.
pub fn fit_input(input: &FitInput, choice: ModelChoice, options: &FitOptions) -> FitAttempt {
    let readings = Readings::new(&input.h_cm, &input.theta);
    let readings = match &input.weights {
        Some(w) => readings.with_weights(w),
        None => readings,
    };
    fit_choice(choice, &readings, options)
}

/// What a campaign fit did.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct FitRunSummary {
    /// Samples that got a new current fit, with its model.
    pub fitted: Vec<(String, String)>,
    /// Samples whose attempt failed, with the reason (their previous fit, if any, is now stale).
    pub failed: Vec<(String, String)>,
    /// Samples whose readings changed (another command wrote to them) while they were being
    /// fitted: nothing was recorded for them, and they need fitting again.
    pub changed: Vec<String>,
}

impl FitRunSummary {
    /// True when every selected sample got a new current fit.
    pub fn is_complete(&self) -> bool {
        self.failed.is_empty() && self.changed.is_empty()
    }

    /// Add another run's results.
    pub fn extend(&mut self, other: FitRunSummary) {
        self.fitted.extend(other.fitted);
        self.failed.extend(other.failed);
        self.changed.extend(other.changed);
    }
}

/// How long a write of a campaign fit waits for another writer: its fits are already
/// computed, so it is more patient than the busy timeout of an ordinary write.
pub const COMMIT_WAIT: Duration = Duration::from_secs(60);

/// How long one write transaction of a campaign fit may hold the write lock before it commits
/// and lets other writers in (it commits after the sample that crosses this).
pub const CHUNK_BUDGET: Duration = Duration::from_millis(500);

/// The pause between two write transactions of a campaign fit: longer than the 100 ms a
/// waiting SQLite connection sleeps between tries, so a waiting writer gets its turn.
pub const CHUNK_PAUSE: Duration = Duration::from_millis(120);

/// One sample's fitted attempt, ready to record: its model, its failure, its encoded row.
pub(crate) struct Outcome {
    pub(crate) model: String,
    pub(crate) failure: Option<String>,
    pub(crate) row: Result<EncodedFit, StoreError>,
}

/// Fit the selected samples of a campaign in parallel and record every attempt.
///
/// The readings are read in one read transaction and fitted without holding the campaign's
/// write lock, so other commands (an import, `set`, a flag) can write meanwhile. The attempts
/// are then recorded in short write transactions ([`CHUNK_BUDGET`] each, with a
/// [`CHUNK_PAUSE`] between them for waiting writers); a fit whose results take less than
/// that to write (a few thousand samples) is one transaction. Inside each, every sample's
/// readings are checked against what was fitted (revision, then fingerprint): a sample
/// whose readings changed in between is left out and listed in [`FitRunSummary::changed`]
/// rather than given a fit of readings it no longer has.
///
/// Each sample's attempt is recorded whole or not at all. When a later transaction fails
/// (or the process is killed), the samples of the earlier ones keep their new fits and the
/// others their old ones; the error says how many were recorded
/// ([`StoreError::PartlyRecorded`]), and the same fit run again completes the rest.
///
/// `progress(done, total)` is called once with `done = 0` when the readings have been read,
/// then from worker threads as samples finish.
///
/// # Errors
/// An unknown site, layer or sample code, an SQLite error, or [`StoreError::Busy`] when
/// another writer holds the campaign for longer than [`COMMIT_WAIT`]; nothing is written
/// then, or, after a first transaction, [`StoreError::PartlyRecorded`].
pub fn fit_campaign(
    campaign: &mut Campaign,
    selection: &Selection,
    choice: ModelChoice,
    options: &FitOptions,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<FitRunSummary, StoreError> {
    fit_campaign_with(campaign, selection, choice, options, None, progress)
}

/// As [`fit_campaign`], recording with every fit the conductivity form asked for (`None`:
/// the model's usual pairing), which its derived conductivity then uses where the model has
/// that form.
///
/// # Errors
/// As [`fit_campaign`].
pub fn fit_campaign_with(
    campaign: &mut Campaign,
    selection: &Selection,
    choice: ModelChoice,
    options: &FitOptions,
    conductivity: Option<ConductivityForm>,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<FitRunSummary, StoreError> {
    let inputs = {
        let tx = campaign.read_transaction()?;
        selection.check(&tx)?;
        fits::inputs(&tx, selection)?
    };
    let total = inputs.len();
    progress(0, total);
    let done = AtomicUsize::new(0);
    let requested = choice.to_string();
    let fixed = options.fixed();
    let outcomes: Vec<Outcome> = inputs
        .par_iter()
        .map(|input| {
            let attempt = fit_input(input, choice, options);
            let ranking = attempt.auto.as_ref().map(Ranking::from);
            let failure = attempt.failure();
            // Encoded here, outside the write lock; the report itself is dropped.
            let row = fits::encode(&NewFit {
                input,
                requested: &requested,
                model: &attempt.model,
                fixed,
                report: attempt.report.as_ref(),
                ranking: ranking.as_ref(),
                failure: failure.as_deref(),
                conductivity,
            });
            progress(done.fetch_add(1, Ordering::Relaxed) + 1, total);
            Outcome {
                model: attempt.model,
                failure,
                row,
            }
        })
        .collect();
    record_in_chunks(
        campaign,
        inputs.iter().zip(outcomes.into_iter().map(|o| (o, ()))),
        total,
        |_, ()| {},
    )
}

/// Record encoded attempts, in order, in short write transactions ([`CHUNK_BUDGET`] each,
/// [`CHUNK_PAUSE`] between them), each sample's readings checked (`fits::unchanged`) before
/// its attempt is recorded; `on_fitted(code, extra)` is called for each successful fit
/// recorded. Shared by every campaign fit that fits outside the write lock.
///
/// # Errors
/// [`StoreError::Busy`] or an SQLite error; after a first transaction,
/// [`StoreError::PartlyRecorded`].
pub(crate) fn record_in_chunks<'a, T>(
    campaign: &mut Campaign,
    attempts: impl Iterator<Item = (&'a FitInput, (Outcome, T))>,
    total: usize,
    mut on_fitted: impl FnMut(&str, T),
) -> Result<FitRunSummary, StoreError> {
    let mut summary = FitRunSummary::default();
    let mut pending = attempts.peekable();
    let mut recorded = 0;
    let partly = |e: StoreError, recorded: usize| {
        if recorded == 0 {
            e
        } else {
            StoreError::PartlyRecorded {
                recorded,
                total,
                source: Box::new(e),
            }
        }
    };
    while pending.peek().is_some() {
        let tx = campaign
            .transaction_waiting(COMMIT_WAIT)
            .map_err(|e| partly(e, recorded))?;
        let started = Instant::now();
        let mut chunk = FitRunSummary::default();
        let mut fitted_extras = Vec::new();
        for (input, (outcome, extra)) in pending.by_ref() {
            let code = &input.sample.code;
            let recorded_row = fits::unchanged(&tx, input).and_then(|same| {
                if same {
                    fits::insert(&tx, &outcome.row?).map(|_| true)
                } else {
                    Ok(false)
                }
            });
            if !recorded_row.map_err(|e| partly(e, recorded))? {
                chunk.changed.push(code.clone());
            } else if let Some(reason) = outcome.failure {
                chunk.failed.push((code.clone(), reason));
            } else {
                fitted_extras.push((code.clone(), extra));
                chunk.fitted.push((code.clone(), outcome.model));
            }
            if started.elapsed() >= CHUNK_BUDGET {
                break;
            }
        }
        tx.commit()
            .map_err(|e| partly(StoreError::from(e), recorded))?;
        recorded += chunk.fitted.len() + chunk.failed.len();
        summary.extend(chunk);
        for (code, extra) in fitted_extras {
            on_fitted(&code, extra);
        }
        if pending.peek().is_some() {
            std::thread::sleep(CHUNK_PAUSE);
        }
    }
    Ok(summary)
}
