//! Background fits, as bookkeeping: which job runs, which one waits, which results count.
//!
//! The runtime owns the thread; this module only decides. Each request gets a [`JobId`]. One
//! job runs at a time and at most one waits: a newer request replaces the waiting one (its
//! requester is told). A result counts only when it comes from the running job and no newer
//! request for an overlapping set of samples arrived meanwhile; any other result is stale and
//! dropped, so the screen never shows an outdated summary.

use std::fmt;

use crate::analysis::ModelChoice;
use crate::store::fits::Selection;

/// Identifies one fit request for its whole life.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Default)]
pub struct JobId(pub u64);

impl fmt::Display for JobId {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "#{}", self.0)
    }
}

/// Which samples a refit covers.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum FitScope {
    /// One sample (database id and code).
    Sample {
        /// Database id.
        id: i64,
        /// Code.
        code: String,
        /// Its site's code (for overlap).
        site: String,
    },
    /// Every sample of a site (code).
    Site(String),
    /// The whole campaign.
    All,
}

impl FitScope {
    /// Whether two scopes share a sample.
    pub fn overlaps(&self, other: &FitScope) -> bool {
        match (self, other) {
            (FitScope::All, _) | (_, FitScope::All) => true,
            (FitScope::Site(a), FitScope::Site(b)) => a == b,
            (FitScope::Site(a), FitScope::Sample { site, .. })
            | (FitScope::Sample { site, .. }, FitScope::Site(a)) => a == site,
            (FitScope::Sample { id: a, .. }, FitScope::Sample { id: b, .. }) => a == b,
        }
    }

    /// The store selection for [`crate::analysis::fit_campaign`].
    pub fn selection(&self) -> Selection {
        match self {
            FitScope::Sample { code, .. } => Selection {
                samples: vec![code.clone()],
                ..Selection::default()
            },
            FitScope::Site(site) => Selection {
                site: Some(site.clone()),
                ..Selection::default()
            },
            FitScope::All => Selection::all(),
        }
    }
}

impl fmt::Display for FitScope {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            FitScope::Sample { code, .. } => write!(f, "sample {code}"),
            FitScope::Site(site) => write!(f, "site {site}"),
            FitScope::All => f.write_str("every sample"),
        }
    }
}

/// A refit to run: which samples, which model.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FitRequest {
    /// The samples.
    pub scope: FitScope,
    /// One model or `auto`.
    pub choice: ModelChoice,
    /// Fit the retention readings and the measured conductivity together (one model; `auto`
    /// stands for van Genuchten here).
    pub with_conductivity: bool,
}

impl fmt::Display for FitRequest {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.with_conductivity {
            write!(
                f,
                "{} ({} with conductivity)",
                self.scope,
                self.joint_kind().id()
            )
        } else {
            write!(f, "{} ({})", self.scope, self.choice)
        }
    }
}

impl FitRequest {
    /// The model of a fit with conductivity: the one chosen, van Genuchten for `auto`.
    pub fn joint_kind(&self) -> crate::model::retention::ModelKind {
        match self.choice {
            ModelChoice::One(kind) => kind,
            ModelChoice::Auto => crate::model::retention::ModelKind::VanGenuchten,
        }
    }
}

/// The job on the worker thread.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RunningJob {
    /// Its id.
    pub id: JobId,
    /// What it fits.
    pub request: FitRequest,
    /// Samples done so far.
    pub done: usize,
    /// Samples in the job (0 until the worker says).
    pub total: usize,
    /// A newer request covers some of the same samples: this result will be dropped.
    pub superseded: bool,
}

/// What [`JobBoard::submit`] did with a request.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Submitted {
    /// Nothing was running: start this job now.
    Start(JobId),
    /// A job is running: this one waits (and replaced the one that waited, if any).
    Queued {
        /// The new job's id.
        id: JobId,
        /// The waiting request it replaced.
        replaced: Option<FitRequest>,
    },
}

/// What to do with a finished job's result.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Finished {
    /// The result is the current one: show it and reload.
    pub current: bool,
    /// The waiting job to start now.
    pub next: Option<(JobId, FitRequest)>,
}

/// The worker's schedule: one running job, at most one waiting.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct JobBoard {
    last: u64,
    /// The job on the worker thread.
    pub running: Option<RunningJob>,
    /// The job that starts when the running one ends.
    pub pending: Option<(JobId, FitRequest)>,
}

impl JobBoard {
    /// Whether a job is running or waiting.
    pub fn is_busy(&self) -> bool {
        self.running.is_some() || self.pending.is_some()
    }

    fn next_id(&mut self) -> JobId {
        self.last += 1;
        JobId(self.last)
    }

    fn start(&mut self, id: JobId, request: FitRequest) {
        self.running = Some(RunningJob {
            id,
            request,
            done: 0,
            total: 0,
            superseded: false,
        });
    }

    /// Take a new request.
    pub fn submit(&mut self, request: FitRequest) -> Submitted {
        let id = self.next_id();
        match &mut self.running {
            None => {
                self.start(id, request);
                Submitted::Start(id)
            }
            Some(running) => {
                if running.request.scope.overlaps(&request.scope) {
                    running.superseded = true;
                }
                let replaced = self.pending.replace((id, request)).map(|(_, r)| r);
                Submitted::Queued { id, replaced }
            }
        }
    }

    /// Record progress of `job`; false (ignored) when it is not the running job.
    pub fn progress(&mut self, job: JobId, done: usize, total: usize) -> bool {
        match &mut self.running {
            Some(r) if r.id == job => {
                r.done = done;
                r.total = total;
                true
            }
            _ => false,
        }
    }

    /// `job` ended. A result from any job but the running one is stale (and changes nothing).
    pub fn finish(&mut self, job: JobId) -> Finished {
        let is_running = self.running.as_ref().is_some_and(|r| r.id == job);
        if !is_running {
            return Finished {
                current: false,
                next: None,
            };
        }
        let superseded = self.running.take().is_some_and(|r| r.superseded);
        let next = self.pending.take();
        if let Some((id, request)) = &next {
            self.start(*id, request.clone());
        }
        Finished {
            current: !superseded,
            next,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::retention::ModelKind;

    fn sample(id: i64, site: &str) -> FitRequest {
        FitRequest {
            scope: FitScope::Sample {
                id,
                code: format!("S{id}"),
                site: site.into(),
            },
            choice: ModelChoice::Auto,
            with_conductivity: false,
        }
    }

    #[test]
    fn one_runs_one_waits_and_newer_replaces_the_waiting() {
        let mut board = JobBoard::default();
        assert!(!board.is_busy());
        assert_eq!(board.submit(sample(1, "A")), Submitted::Start(JobId(1)));
        let second = sample(2, "B");
        assert_eq!(
            board.submit(second.clone()),
            Submitted::Queued {
                id: JobId(2),
                replaced: None
            }
        );
        let third = FitRequest {
            choice: ModelChoice::One(ModelKind::Campbell),
            ..sample(3, "B")
        };
        assert_eq!(
            board.submit(third.clone()),
            Submitted::Queued {
                id: JobId(3),
                replaced: Some(second)
            }
        );
        // The first one's result counts (no overlap with the waiting one) and starts job 3.
        assert!(board.progress(JobId(1), 1, 1));
        assert!(!board.progress(JobId(2), 1, 1), "job 2 never ran");
        let done = board.finish(JobId(1));
        assert!(done.current);
        assert_eq!(done.next, Some((JobId(3), third)));
        assert_eq!(board.running.as_ref().map(|r| r.id), Some(JobId(3)));
        let done = board.finish(JobId(3));
        assert!(done.current && done.next.is_none());
        assert!(!board.is_busy());
    }

    #[test]
    fn a_result_overtaken_by_a_newer_overlapping_request_is_stale() {
        let mut board = JobBoard::default();
        board.submit(FitRequest {
            scope: FitScope::Site("A".into()),
            choice: ModelChoice::Auto,
            with_conductivity: false,
        });
        board.submit(sample(7, "A"));
        let done = board.finish(JobId(1));
        assert!(
            !done.current,
            "superseded by the request for a sample of site A"
        );
        assert_eq!(done.next.map(|(id, _)| id), Some(JobId(2)));
        // A result for a job that is not running (already finished) is stale too.
        let again = board.finish(JobId(1));
        assert!(!again.current && again.next.is_none());
        assert!(board.finish(JobId(2)).current);
    }

    #[test]
    fn scopes_overlap_as_their_samples_do() {
        let all = FitScope::All;
        let site_a = FitScope::Site("A".into());
        let site_b = FitScope::Site("B".into());
        let s = sample(1, "A").scope;
        assert!(all.overlaps(&site_b) && site_a.overlaps(&s) && s.overlaps(&site_a));
        assert!(!site_b.overlaps(&s) && !site_a.overlaps(&site_b));
        assert!(!s.overlaps(&sample(2, "A").scope));
        assert_eq!(s.selection().samples, vec!["S1".to_string()]);
        assert_eq!(site_a.selection().site.as_deref(), Some("A"));
        assert_eq!(all.selection(), Selection::all());
    }
}
