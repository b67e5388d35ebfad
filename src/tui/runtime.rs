//! The only code that touches the terminal, the campaign file and threads.
//!
//! A [`Session`] holds the open campaign, the state, the key table and the fit worker. It turns
//! key events into actions (through the key table), actions into effects (through `update`)
//! and effects into loads, writes and jobs, whose results come back as actions. [`run`] puts a
//! session on the terminal: init with a panic hook that restores it, a loop over input,
//! worker results and a tick, and restore on quit or Ctrl-C.

use std::collections::VecDeque;
use std::path::{Path, PathBuf};

use crate::report::export::{ExportOptions, export_campaign};
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{Receiver, Sender, channel};
use std::thread::JoinHandle;
use std::time::Duration;

use anyhow::Context;
use ratatui::backend::Backend;
use ratatui::crossterm::event::{self, Event, KeyEvent};
use ratatui::{DefaultTerminal, Terminal};

use crate::analysis::advise::PoolCache;
use crate::analysis::texture::fit_campaign_by_default;
use crate::analysis::{BetweenCores, FitRunSummary, between_cores};
use crate::fit::FitOptions;
use crate::model::domain::FlagTarget;
use crate::store::{Campaign, CampaignSettings, StoreError, flags};

use super::action::{Action, Effect, Loaded};
use super::app::AppState;
use super::keymap::{self, KeyTable, Mode};
use super::theme::Theme;
use super::update::update;
use super::view;
use super::worker::{FitRequest, JobId};

mod load;
mod loader;

/// The state of the campaign file a cached value was read at: SQLite's data version and this
/// connection's total change count.
type PoolKey = (i64, u64);

/// How a session runs its fits.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Jobs {
    /// On a worker thread with its own connection; results arrive through a channel.
    Background,
    /// At once, on the session's connection (scripted sessions and tests: deterministic).
    Inline,
}

/// How to open a session.
#[derive(Debug, Clone, Copy)]
pub struct SessionOptions {
    /// Styles (with or without colour).
    pub theme: Theme,
    /// Terminal size (columns, rows) until the terminal says otherwise.
    pub size: (u16, u16),
    /// Where fits run.
    pub jobs: Jobs,
}

impl SessionOptions {
    /// Background fits, colour unless `NO_COLOR` says otherwise.
    pub fn interactive() -> Self {
        Self {
            theme: Theme::from_no_color(std::env::var_os("NO_COLOR").as_deref()),
            size: (80, 24),
            jobs: Jobs::Background,
        }
    }

    /// Inline fits, monochrome, a fixed size: for tests and benchmarks.
    pub fn scripted(width: u16, height: u16) -> Self {
        Self {
            theme: Theme::monochrome(),
            size: (width, height),
            jobs: Jobs::Inline,
        }
    }
}

/// The fit worker thread and its channels.
struct Worker {
    jobs: Sender<(JobId, FitRequest)>,
    results: Receiver<Action>,
    stop: Arc<AtomicBool>,
    handle: Option<JoinHandle<()>>,
}

impl Worker {
    /// Start the thread; it opens its own connection to `path` on the first job.
    fn spawn(path: PathBuf) -> Worker {
        let (jobs, job_rx) = channel::<(JobId, FitRequest)>();
        let (result_tx, results) = channel::<Action>();
        let stop = Arc::new(AtomicBool::new(false));
        let stop_flag = Arc::clone(&stop);
        let handle = std::thread::spawn(move || {
            let mut campaign: Option<Campaign> = None;
            for (job, request) in job_rx {
                if stop_flag.load(Ordering::Relaxed) {
                    break;
                }
                let result = (|| -> Result<_, StoreError> {
                    if campaign.is_none() {
                        campaign = Some(Campaign::open(&path)?);
                    }
                    let Some(c) = campaign.as_mut() else {
                        return Err(StoreError::NotFound(path.clone()));
                    };
                    let progress = |done: usize, total: usize| {
                        let _ = result_tx.send(Action::FitProgress { job, done, total });
                    };
                    run_fit(c, &request, &progress)
                })()
                .map_err(|e| e.to_string());
                if result_tx.send(Action::FitFinished { job, result }).is_err() {
                    break;
                }
            }
        });
        Worker {
            jobs,
            results,
            stop,
            handle: Some(handle),
        }
    }
}

impl Drop for Worker {
    fn drop(&mut self) {
        // Waiting jobs are not started; a running one is abandoned with the process (nothing
        // is written while it fits; samples it had already recorded keep their new fits), so
        // quitting never waits for a long fit.
        self.stop.store(true, Ordering::Relaxed);
        drop(self.handle.take());
    }
}

/// An open campaign with its UI state.
pub struct Session {
    campaign: Campaign,
    settings: CampaignSettings,
    worker: Option<Worker>,
    /// The load worker (background sessions): series, review, sensors and depth queries.
    loader: Option<loader::Loader>,
    /// The campaign's pooled between-core variance, with the file state it was read at.
    pooled: Option<(PoolKey, Option<BetweenCores>)>,
    /// The UI state.
    pub state: AppState,
    /// The key table.
    pub keys: KeyTable,
    /// The pooled noise the fit card's advice may need, kept until a fit is recorded.
    pool: PoolCache,
}

impl std::fmt::Debug for Session {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Session")
            .field("state", &self.state)
            .finish_non_exhaustive()
    }
}

impl Session {
    /// Open a campaign file and load the tree (nothing else: samples load when selected).
    ///
    /// # Errors
    /// The file cannot be opened as a campaign, or the tree cannot be read.
    pub fn open(path: &Path, options: SessionOptions) -> anyhow::Result<Session> {
        let campaign =
            Campaign::open(path).with_context(|| format!("cannot open {}", path.display()))?;
        let settings = campaign.settings()?;
        let state = AppState {
            campaign: settings.name.clone(),
            file: path.file_name().map_or_else(
                || path.display().to_string(),
                |n| n.to_string_lossy().into(),
            ),
            fc_kpa: settings.fc_kpa,
            pwp_kpa: settings.pwp_kpa,
            theme: options.theme,
            size: options.size,
            ..AppState::default()
        };
        let (worker, loader) = match options.jobs {
            Jobs::Background => (
                Some(Worker::spawn(path.to_path_buf())),
                Some(loader::Loader::spawn(path.to_path_buf(), settings.clone())),
            ),
            Jobs::Inline => (None, None),
        };
        let mut session = Session {
            campaign,
            settings,
            worker,
            loader,
            pooled: None,
            state,
            keys: KeyTable::default(),
            pool: PoolCache::default(),
        };
        session.dispatch(Action::Loaded(Loaded::Tree(
            load::tree(session.campaign.connection()).context("cannot read the campaign tree")?,
        )));
        Ok(session)
    }

    /// Apply an action and every effect it leads to (loads and writes run here, in order).
    pub fn dispatch(&mut self, action: Action) {
        let mut queue = VecDeque::from([action]);
        while let Some(action) = queue.pop_front() {
            for effect in update(&mut self.state, action) {
                if let Some(result) = self.execute(effect) {
                    queue.push_back(result);
                }
            }
        }
    }

    /// Handle a key event through the key table.
    pub fn press(&mut self, key: &KeyEvent) {
        if let Some(action) = keymap::map(Mode::of(&self.state), key, &self.keys) {
            self.dispatch(action);
        }
    }

    /// Take every result the worker has sent; true when there was one.
    pub fn poll_worker(&mut self) -> bool {
        let mut got = Vec::new();
        if let Some(worker) = &self.worker {
            while let Ok(action) = worker.results.try_recv() {
                got.push(action);
            }
        }
        if let Some(loader) = &self.loader {
            while let Ok(action) = loader.results.try_recv() {
                got.push(action);
            }
        }
        let any = !got.is_empty();
        for action in got {
            self.dispatch(action);
        }
        any
    }

    /// Wait up to `timeout` for worker results (tests and benchmarks of background fits).
    pub fn wait_for_jobs(&mut self, timeout: Duration) -> bool {
        let deadline = std::time::Instant::now() + timeout;
        while self.state.jobs.is_busy() {
            if std::time::Instant::now() > deadline {
                return false;
            }
            if !self.poll_worker() {
                std::thread::sleep(Duration::from_millis(5));
            }
        }
        true
    }

    /// Wait up to `timeout` until the load worker has answered every request (tests and
    /// benchmarks); true when it has.
    pub fn wait_for_loads(&mut self, timeout: Duration) -> bool {
        let deadline = std::time::Instant::now() + timeout;
        loop {
            // Idle first, then take what it sent: an answer sent before it went idle is in.
            let idle = self.loader.as_ref().is_none_or(loader::Loader::idle);
            let got = self.poll_worker();
            // Answers may ask for more loads; idle counts only when nothing came.
            if idle && !got && self.loader.as_ref().is_none_or(loader::Loader::idle) {
                return true;
            }
            if std::time::Instant::now() > deadline {
                return false;
            }
            if !got {
                std::thread::sleep(Duration::from_millis(5));
            }
        }
    }

    /// Draw the UI on any backend.
    ///
    /// # Errors
    /// The backend's error.
    pub fn draw<B: Backend>(&self, terminal: &mut Terminal<B>) -> Result<(), B::Error> {
        terminal.draw(|frame| view::render(&self.state, &self.keys, frame))?;
        Ok(())
    }

    fn execute(&mut self, effect: Effect) -> Option<Action> {
        if let Some(loader) = &self.loader {
            let job = match &effect {
                Effect::LoadReview => Some(loader::Job::Review),
                Effect::LoadSensors => Some(loader::Job::Sensors),
                Effect::LoadSeries(request) => Some(loader::Job::Series(request.clone())),
                Effect::LoadDepth { site, root_zone_cm } => Some(loader::Job::Depth {
                    site: site.clone(),
                    root_zone_cm: *root_zone_cm,
                }),
                _ => None,
            };
            if let Some(job) = job {
                loader.submit(job);
                return None;
            }
        }
        let conn = self.campaign.connection();
        let loaded = |r: crate::store::Result<Loaded>| {
            Some(r.map_or_else(|e| Action::LoadFailed(e.to_string()), Action::Loaded))
        };
        match effect {
            Effect::LoadTree => loaded(load::tree(conn).map(Loaded::Tree)),
            Effect::LoadSample(id) => loaded(
                load::sample(conn, &self.settings, id, &mut self.pool)
                    .map(|d| Loaded::Sample(Box::new(d))),
            ),
            Effect::LoadDepth { site, root_zone_cm } => loaded(self.pooled().and_then(|pooled| {
                load::depth(
                    self.campaign.connection(),
                    &self.settings,
                    &site,
                    root_zone_cm,
                    pooled,
                )
                .map(|d| Loaded::Depth(Box::new(d)))
            })),
            Effect::LoadReview => Some(Action::Loaded(Loaded::Episodes(
                load::review_episodes(conn).map_err(|e| e.to_string()),
            ))),
            Effect::LoadSensors => Some(Action::Loaded(Loaded::Sensors(
                load::sensors(conn).map_err(|e| e.to_string()),
            ))),
            Effect::LoadSeries(request) => {
                loaded(load::series(conn, &request).map(|d| Loaded::Series(Box::new(d))))
            }
            Effect::StartFit { job, request } => self.start_fit(job, request),
            Effect::SetFlag { target, reason } => Some(Action::FlagChanged(
                self.write(|tx| flags::flag_manual(tx, target, &reason, None))
                    .map(|id| match target {
                        FlagTarget::ConductivityReading(k) => format!(
                            "conductivity reading {k} flagged (flag {id}); it is left out of \
                             joint fits: C refits"
                        ),
                        _ => format!(
                            "{} flagged (flag {id}); it is left out of fits: f refits",
                            flags::describe(target)
                        ),
                    }),
            )),
            Effect::ClearFlag { target, note } => Some(Action::FlagChanged(
                self.write(|tx| {
                    let note = (!note.is_empty()).then_some(note.as_str());
                    flags::clear_target(tx, target, note)
                })
                .map(|_| match target {
                    FlagTarget::ConductivityReading(k) => format!(
                        "flag on conductivity reading {k} cleared; joint fits use it again: C \
                         refits"
                    ),
                    _ => format!(
                        "flag on {} cleared; fits use it again: f refits",
                        flags::describe(target)
                    ),
                }),
            )),
            Effect::DecideFlags { flag_ids, accept } => Some(Action::FlagChanged(
                self.write(|tx| {
                    for &id in &flag_ids {
                        if accept {
                            flags::accept(tx, id, None)?;
                        } else {
                            flags::dismiss(tx, id, None)?;
                        }
                    }
                    Ok(())
                })
                .map(|()| {
                    let n = crate::model::number::plural(flag_ids.len() as u64, "flag");
                    if accept {
                        format!("{n} accepted: left out of fits and pairing")
                    } else {
                        format!("{n} dismissed: kept")
                    }
                }),
            )),
            Effect::DecideFlag {
                flag_id,
                target,
                accept,
            } => Some(Action::FlagChanged(
                self.write(|tx| {
                    if accept {
                        flags::accept(tx, flag_id, None)
                    } else {
                        flags::dismiss(tx, flag_id, None)
                    }
                })
                .map(|()| match (accept, target) {
                    (true, FlagTarget::Reading(_)) => {
                        format!("flag {flag_id} accepted: the reading is left out of fits")
                    }
                    (false, FlagTarget::Reading(_)) => {
                        format!("flag {flag_id} dismissed: the reading stays in")
                    }
                    (true, FlagTarget::LoggerRecord(_)) => format!(
                        "flag {flag_id} accepted: the record is left out of the next pairing \
                         (porewise pair)"
                    ),
                    (false, FlagTarget::LoggerRecord(_)) => {
                        format!("flag {flag_id} dismissed: the record is used by the next pairing")
                    }
                    (true, FlagTarget::ConductivityReading(_)) => format!(
                        "flag {flag_id} accepted: the conductivity reading is left out of joint fits"
                    ),
                    (false, FlagTarget::ConductivityReading(_)) => format!(
                        "flag {flag_id} dismissed: the conductivity reading stays in joint fits"
                    ),
                }),
            )),
            Effect::NextCurrentFit { sample_id, code } => Some(Action::CurrentChanged(
                self.write(|tx| {
                    let Some((next, kind)) =
                        crate::store::conductivity::next_current(tx, sample_id)?
                    else {
                        return Ok(None);
                    };
                    let (_, before) = crate::store::conductivity::make_current(tx, next)?;
                    Ok(Some((next, before, kind)))
                })
                .map(|changed| {
                    let code = crate::model::text::shown(&code);
                    match changed {
                        None => format!(
                            "{code} has one kind of fit: C fits it with its measured \
                             conductivity, f with the model of m"
                        ),
                        Some((fit, Some(before), kind)) => {
                            format!("fit {fit} ({kind}) is now current for {code} (was fit {before})")
                        }
                        Some((fit, None, kind)) => {
                            format!("fit {fit} ({kind}) is now current for {code}")
                        }
                    }
                }),
            )),
            Effect::Export => Some(Action::ExportFinished(self.export())),
            Effect::Quit => None,
        }
    }

    /// The campaign's between-core variance (every lab core's fit is read for it), kept until
    /// the file changes: SQLite's data version moves when another connection (the fit worker,
    /// another command) commits, and this connection's change count when it writes itself.
    fn pooled(&mut self) -> crate::store::Result<Option<BetweenCores>> {
        let conn = self.campaign.connection();
        let version: i64 = conn.query_row("PRAGMA data_version", [], |r| r.get(0))?;
        let key = (version, conn.total_changes());
        if let Some((at, pooled)) = &self.pooled
            && *at == key
        {
            return Ok(*pooled);
        }
        let pooled = between_cores(conn, &self.settings)?;
        self.pooled = Some((key, pooled));
        Ok(pooled)
    }

    /// Export the campaign summary into `<file stem>-export/` beside the campaign file, with
    /// the depth view's root zone.
    fn export(&self) -> Result<String, String> {
        let path = self
            .campaign
            .path()
            .ok_or("an in-memory campaign has no folder to export into")?;
        let stem = path
            .file_stem()
            .map_or_else(|| "campaign".into(), |s| s.to_string_lossy().into_owned());
        let dir = path.with_file_name(format!("{stem}-export"));
        let options = ExportOptions::new(&dir).with_root_zone_cm(self.state.depth.root_zone_cm);
        let summary = export_campaign(self.campaign.connection(), &options, &|_, _| {})
            .map_err(|e| format!("export failed: {e}"))?;
        Ok(format!(
            "exported {} samples: {}",
            summary.samples,
            dir.join("report.html").display()
        ))
    }

    /// Run `f` in one write transaction; committed when it succeeds.
    fn write<T>(
        &mut self,
        f: impl FnOnce(&rusqlite::Transaction<'_>) -> crate::store::Result<T>,
    ) -> Result<T, String> {
        let tx = self.campaign.transaction().map_err(|e| e.to_string())?;
        let value = f(&tx).map_err(|e| e.to_string())?;
        tx.commit().map_err(|e| e.to_string())?;
        Ok(value)
    }

    fn start_fit(&mut self, job: JobId, request: FitRequest) -> Option<Action> {
        if let Some(worker) = &self.worker {
            if worker.jobs.send((job, request)).is_err() {
                return Some(Action::FitFinished {
                    job,
                    result: Err("the fit worker has stopped".to_string()),
                });
            }
            None
        } else {
            let result =
                run_fit(&mut self.campaign, &request, &|_, _| {}).map_err(|e| e.to_string());
            Some(Action::FitFinished { job, result })
        }
    }
}

/// One refit the user asked for: jointly with measured conductivity, or as `porewise fit`
/// would (the campaign's texture-prior default included).
fn run_fit(
    campaign: &mut Campaign,
    request: &FitRequest,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<FitRunSummary, StoreError> {
    if request.with_conductivity {
        return crate::analysis::joint::refit_joint(
            campaign,
            &request.scope.selection(),
            request.joint_kind(),
            progress,
        );
    }
    fit_campaign_by_default(
        campaign,
        &request.scope.selection(),
        request.choice,
        &FitOptions::new(),
        progress,
    )
}

/// How often the loop wakes without input (spinner, worker results), ms.
const TICK_MS: u64 = 120;

fn event_loop(session: &mut Session, terminal: &mut DefaultTerminal) -> anyhow::Result<()> {
    let size = terminal.size()?;
    session.dispatch(Action::Resize(size.width, size.height));
    loop {
        session.draw(terminal)?;
        if session.state.quit {
            return Ok(());
        }
        if event::poll(Duration::from_millis(TICK_MS))? {
            match event::read()? {
                Event::Key(key) => session.press(&key),
                Event::Resize(w, h) => session.dispatch(Action::Resize(w, h)),
                _ => {}
            }
        } else if session.state.jobs.is_busy() {
            session.dispatch(Action::Tick);
        }
        session.poll_worker();
    }
}

/// Open `path` in the terminal UI until the user quits.
///
/// The campaign is opened before the terminal is taken over, so a bad file is an ordinary
/// error message. `ratatui::init` installs a panic hook that restores the terminal; it is
/// restored on quit and on Ctrl-C (a key in raw mode) as well.
///
/// # Errors
/// The file cannot be opened, or the terminal fails.
pub fn run(path: &Path) -> anyhow::Result<()> {
    let mut session = Session::open(path, SessionOptions::interactive())?;
    let mut terminal = ratatui::try_init().context(
        "cannot take over the terminal (is this a terminal?); `porewise list` and \
         `porewise demo --no-ui` work without one",
    )?;
    let result = event_loop(&mut session, &mut terminal);
    ratatui::restore();
    result
}
