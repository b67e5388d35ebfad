//! The load worker: the queries that can take longer than a frame (a logger series of a
//! million records, the review queue, the sensors, a site's depth view with the campaign's
//! pooled between-core variance) run on a thread with its own connection, so keys are read
//! while they run. One waiting request per kind: a newer request replaces a waiting one (the
//! state asks again for what it still wants when a screen is shown), and the answer comes
//! back as an action; the views say "loading…" until it does.

use std::path::PathBuf;
use std::sync::mpsc::{Receiver, Sender, channel};
use std::sync::{Arc, Condvar, Mutex, PoisonError};
use std::thread::JoinHandle;

use crate::analysis::{BetweenCores, between_cores};
use crate::store::{Campaign, CampaignSettings, StoreError};
use crate::tui::action::{Action, Loaded};
use crate::tui::app::SeriesRequest;

use super::load;

/// A query for the load worker.
#[derive(Debug, Clone, PartialEq)]
pub enum Job {
    /// The review queue in episodes.
    Review,
    /// Every logger sensor.
    Sensors,
    /// One site's depth view.
    Depth {
        /// Site code.
        site: String,
        /// Root-zone depth, cm.
        root_zone_cm: f64,
    },
    /// A window of one depth's series.
    Series(SeriesRequest),
}

/// How many kinds of job there are (one waiting slot each).
const KINDS: usize = 4;

impl Job {
    /// Its slot: jobs of one kind replace each other while waiting.
    fn kind(&self) -> usize {
        match self {
            Job::Review => 0,
            Job::Sensors => 1,
            Job::Depth { .. } => 2,
            Job::Series(_) => 3,
        }
    }
}

/// The waiting jobs and the stop sign, shared with the thread.
#[derive(Debug, Default)]
struct Slots {
    waiting: [Option<Job>; KINDS],
    /// A job taken and not yet answered.
    running: bool,
    stop: bool,
}

/// The load worker thread, its waiting slots and its results.
pub struct Loader {
    shared: Arc<(Mutex<Slots>, Condvar)>,
    /// Answers, as actions for `update`.
    pub results: Receiver<Action>,
    handle: Option<JoinHandle<()>>,
}

impl Loader {
    /// Start the thread; it opens its own connection to `path` on the first job.
    pub fn spawn(path: PathBuf, settings: CampaignSettings) -> Loader {
        let shared = Arc::new((Mutex::new(Slots::default()), Condvar::new()));
        let (tx, results) = channel();
        let theirs = Arc::clone(&shared);
        let handle = std::thread::spawn(move || work(&theirs, &path, &settings, &tx));
        Loader {
            shared,
            results,
            handle: Some(handle),
        }
    }

    /// Ask for a job; it replaces a waiting job of its kind.
    pub fn submit(&self, job: Job) {
        let (lock, ready) = &*self.shared;
        let mut slots = lock.lock().unwrap_or_else(PoisonError::into_inner);
        let kind = job.kind();
        slots.waiting[kind] = Some(job);
        ready.notify_one();
    }

    /// True when no job waits or runs (every answer has been sent).
    pub fn idle(&self) -> bool {
        let (lock, _) = &*self.shared;
        let slots = lock.lock().unwrap_or_else(PoisonError::into_inner);
        !slots.running && slots.waiting.iter().all(Option::is_none)
    }
}

impl Drop for Loader {
    fn drop(&mut self) {
        let (lock, ready) = &*self.shared;
        lock.lock().unwrap_or_else(PoisonError::into_inner).stop = true;
        ready.notify_one();
        // A query that runs finishes with the process; quitting never waits for it.
        drop(self.handle.take());
    }
}

/// The thread: take the next waiting job, run it, send its answer; until stopped.
fn work(
    shared: &(Mutex<Slots>, Condvar),
    path: &std::path::Path,
    settings: &CampaignSettings,
    tx: &Sender<Action>,
) {
    let mut campaign: Option<Campaign> = None;
    let mut pooled: Option<((i64, u64), Option<BetweenCores>)> = None;
    loop {
        let job = {
            let (lock, ready) = shared;
            let mut slots = lock.lock().unwrap_or_else(PoisonError::into_inner);
            loop {
                if slots.stop {
                    return;
                }
                if let Some(job) = slots.waiting.iter_mut().find_map(Option::take) {
                    slots.running = true;
                    break job;
                }
                slots = ready.wait(slots).unwrap_or_else(PoisonError::into_inner);
            }
        };
        if campaign.is_none() {
            match Campaign::open(path) {
                Ok(c) => campaign = Some(c),
                Err(e) => {
                    let sent = tx.send(Action::LoadFailed(e.to_string()));
                    finished(shared);
                    if sent.is_err() {
                        return;
                    }
                    continue;
                }
            }
        }
        let sent = match campaign.as_ref() {
            Some(c) => tx.send(run(c, settings, &mut pooled, job)),
            None => Ok(()),
        };
        finished(shared);
        if sent.is_err() {
            return;
        }
    }
}

/// Mark the running job answered.
fn finished(shared: &(Mutex<Slots>, Condvar)) {
    shared
        .0
        .lock()
        .unwrap_or_else(PoisonError::into_inner)
        .running = false;
}

/// Run one job on the worker's connection.
fn run(
    campaign: &Campaign,
    settings: &CampaignSettings,
    pooled: &mut Option<((i64, u64), Option<BetweenCores>)>,
    job: Job,
) -> Action {
    let conn = campaign.connection();
    let loaded = |r: crate::store::Result<Loaded>| {
        r.map_or_else(|e| Action::LoadFailed(e.to_string()), Action::Loaded)
    };
    match job {
        Job::Review => Action::Loaded(Loaded::Episodes(
            load::review_episodes(conn).map_err(|e| e.to_string()),
        )),
        Job::Sensors => Action::Loaded(Loaded::Sensors(
            load::sensors(conn).map_err(|e| e.to_string()),
        )),
        Job::Series(request) => {
            loaded(load::series(conn, &request).map(|d| Loaded::Series(Box::new(d))))
        }
        Job::Depth { site, root_zone_cm } => {
            // The pooled variance reads every lab core's fit: kept until the file changes
            // (another connection's commit moves the data version).
            let pool = (|| -> Result<Option<BetweenCores>, StoreError> {
                let version: i64 = conn.query_row("PRAGMA data_version", [], |r| r.get(0))?;
                let key = (version, conn.total_changes());
                if let Some((at, value)) = pooled
                    && *at == key
                {
                    return Ok(*value);
                }
                let value = between_cores(conn, settings)?;
                *pooled = Some((key, value));
                Ok(value)
            })();
            loaded(pool.and_then(|p| {
                load::depth(conn, settings, &site, root_zone_cm, p)
                    .map(|d| Loaded::Depth(Box::new(d)))
            }))
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_newer_job_replaces_a_waiting_one_of_its_kind() {
        // A loader without its thread: the jobs stay waiting.
        let (_tx, results) = channel();
        let loader = Loader {
            shared: Arc::new((Mutex::new(Slots::default()), Condvar::new())),
            results,
            handle: None,
        };
        assert!(loader.idle());
        let request = |site: &str| SeriesRequest {
            site: site.into(),
            depth_cm: 30.0,
            sensor_id: "T".into(),
            window: None,
            columns: 80,
            mark: None,
        };
        loader.submit(Job::Series(request("A")));
        loader.submit(Job::Review);
        loader.submit(Job::Series(request("B")));
        assert!(!loader.idle());
        let mut slots = loader.shared.0.lock().expect("lock");
        let taken: Vec<Job> = slots.waiting.iter_mut().filter_map(Option::take).collect();
        assert_eq!(taken, vec![Job::Review, Job::Series(request("B"))]);
    }
}
