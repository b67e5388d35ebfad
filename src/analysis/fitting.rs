//! Fitting samples: one model or `auto` for one set of readings, and whole campaigns.
//!
//! [`fit_choice`] is the one place that turns "fit this model (or auto) to these readings"
//! into an attempt with a report or a reason; the stateless `fit --input`, the campaign's
//! `fit DB`, the review's refits and the terminal UI's worker all go through it.

use std::fmt;
use std::str::FromStr;
use std::sync::atomic::{AtomicUsize, Ordering};

use rayon::prelude::*;

use crate::fit::{AutoFit, FitOptions, FitReport, Readings, fit_auto, fit_model};
use crate::model::conductivity::ConductivityForm;
use crate::model::retention::ModelKind;
use crate::store::fits::{self, FitInput, NewFit, Ranking, Selection};
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
}

/// Fit the selected samples of a campaign in parallel and record every attempt, all in one
/// transaction.
///
/// `progress(done, total)` is called from worker threads as samples finish.
///
/// # Errors
/// An unknown site, layer or sample code, or an SQLite error; nothing is written then.
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
    let tx = campaign.transaction()?;
    selection.check(&tx)?;
    let inputs = fits::inputs(&tx, selection)?;
    let total = inputs.len();
    let done = AtomicUsize::new(0);
    let attempts: Vec<FitAttempt> = inputs
        .par_iter()
        .map(|input| {
            let attempt = fit_input(input, choice, options);
            progress(done.fetch_add(1, Ordering::Relaxed) + 1, total);
            attempt
        })
        .collect();
    let requested = choice.to_string();
    let fixed = options.fixed();
    let mut summary = FitRunSummary::default();
    for (input, attempt) in inputs.iter().zip(&attempts) {
        let ranking = attempt.auto.as_ref().map(Ranking::from);
        let failure = attempt.failure();
        fits::record(
            &tx,
            &NewFit {
                input,
                requested: &requested,
                model: &attempt.model,
                fixed,
                report: attempt.report.as_ref(),
                ranking: ranking.as_ref(),
                failure: failure.as_deref(),
                conductivity,
            },
        )?;
        match failure {
            None => summary
                .fitted
                .push((input.sample.code.clone(), attempt.model.clone())),
            Some(reason) => summary.failed.push((input.sample.code.clone(), reason)),
        }
    }
    tx.commit()?;
    Ok(summary)
}
