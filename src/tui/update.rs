//! The one place the UI state changes: an [`Action`] in, the [`Effect`]s for the runtime out.

use std::fmt::Write as _;

use crate::analysis::{FitRunSummary, ModelChoice};
use crate::model::domain::FlagTarget;
use crate::model::retention::ModelKind;

use super::action::{Action, Effect, Loaded};
use super::app::series::{AROUND_S, SensorPick, panned, zoomed};
use super::app::{
    AppState, Detail, Input, NodeKey, Pane, ReviewEpisode, Screen, SeriesRequest, Suspect, Tone,
    Tree, TreeRow,
};
use super::worker::{FitRequest, FitScope, Submitted};

/// Shallowest and deepest root zone the depth view sums to, cm, and its step.
const ROOT_ZONE_RANGE: (f64, f64) = (10.0, 1000.0);
const ROOT_ZONE_STEP: f64 = 10.0;

mod browse;
mod depth;
mod prompt;
mod review;
mod series;

use browse::on_browse;
use depth::{on_depth, open_in_browser, show_depth};
use prompt::{on_confirm, on_filter_input, on_reason_input};
pub(crate) use review::follow_review;
use review::on_review;
use series::{on_series, request_series, series_columns, series_pick, show_series};

/// Apply one action; returns what the runtime must do next.
pub fn update(state: &mut AppState, action: Action) -> Vec<Effect> {
    match action {
        Action::Loaded(loaded) => on_loaded(state, loaded),
        Action::LoadFailed(message) => {
            if let Detail::Loading(id) = state.detail {
                state.detail = Detail::Failed(id, message.clone());
            }
            state.say(Tone::Error, message);
            Vec::new()
        }
        Action::FitProgress { job, done, total } => {
            state.jobs.progress(job, done, total);
            Vec::new()
        }
        Action::FitFinished { job, result } => on_fit_finished(state, job, result),
        Action::FlagChanged(Ok(message)) | Action::CurrentChanged(Ok(message)) => {
            state.say(Tone::Info, message);
            reload(state)
        }
        Action::FlagChanged(Err(message))
        | Action::CurrentChanged(Err(message))
        | Action::ExportFinished(Err(message)) => {
            state.say(Tone::Warning, message);
            Vec::new()
        }
        Action::ExportFinished(Ok(message)) => {
            state.say(Tone::Info, message);
            Vec::new()
        }
        Action::Tick => {
            state.ticks = state.ticks.wrapping_add(1);
            Vec::new()
        }
        Action::Resize(w, h) => {
            state.size = (w, h);
            if state.screen == Screen::Series {
                request_series(state, false)
            } else {
                Vec::new()
            }
        }
        Action::ForceQuit => {
            state.quit = true;
            vec![Effect::Quit]
        }
        intent => match state.input.clone() {
            Input::Filter(text) => on_filter_input(state, text, &intent),
            Input::Reason { target, flag, text } => {
                on_reason_input(state, target, flag, text, &intent)
            }
            Input::ConfirmQuit => on_confirm(state, &intent),
            Input::None => on_intent(state, &intent),
        },
    }
}

/// Rows a page key moves.
fn page(state: &AppState) -> usize {
    usize::from(state.size.1).saturating_sub(10).max(1)
}

/// A cursor moved by a movement action within `len` rows; `None` for other actions.
fn moved(state: &AppState, cursor: usize, len: usize, action: &Action) -> Option<usize> {
    let last = len.saturating_sub(1);
    Some(match action {
        Action::Up => cursor.saturating_sub(1),
        Action::Down => (cursor + 1).min(last),
        Action::PageUp => cursor.saturating_sub(page(state)),
        Action::PageDown => (cursor + page(state)).min(last),
        Action::Top => 0,
        Action::Bottom => last,
        _ => return None,
    })
}

/// After the tree cursor moved: load the sample under it unless it is already shown.
fn follow_tree(state: &mut AppState) -> Vec<Effect> {
    let Some(id) = state.tree.current_sample().map(|s| s.id) else {
        return Vec::new();
    };
    select_sample(state, id)
}

/// Show sample `id` in the panes (loading it unless it is shown already).
fn select_sample(state: &mut AppState, id: i64) -> Vec<Effect> {
    if state.detail.sample_id() == Some(id) && !matches!(state.detail, Detail::Failed(..)) {
        return Vec::new();
    }
    state.detail = Detail::Loading(id);
    state.reading = 0;
    state.card_scroll = 0;
    vec![Effect::LoadSample(id)]
}

/// Clear the tree filter, keeping the cursor on the sample it was on (its site and layer open).
fn clear_filter(state: &mut AppState) {
    let keep = state.tree.current_sample().map(|s| s.id);
    state.tree.filter.clear();
    state.tree.rebuild();
    if let Some(id) = keep {
        state.tree.reveal(id);
    }
}

/// Everything on screen that the campaign file may have changed under.
fn reload(state: &AppState) -> Vec<Effect> {
    let mut out = vec![Effect::LoadTree];
    if let Some(id) = state.detail.sample_id() {
        out.push(Effect::LoadSample(id));
    }
    if let (Screen::Depth, Some(site)) = (state.screen, &state.depth.site) {
        out.push(Effect::LoadDepth {
            site: site.clone(),
            root_zone_cm: state.depth.root_zone_cm,
        });
    }
    if state.review.loaded {
        out.push(Effect::LoadReview);
    }
    if state.screen == Screen::Series {
        // The sensors' flag counts, then the series itself (its flagged records).
        out.push(Effect::LoadSensors);
    }
    out
}

/// Where the cursor was in a tree, by identity (indices change when the outline does).
enum RowKey {
    Site(String),
    Layer(i64),
    Sample(i64),
}

fn row_key(tree: &Tree) -> Option<RowKey> {
    Some(match tree.current()? {
        TreeRow::Site(s) => RowKey::Site(tree.sites[s].code.clone()),
        TreeRow::Layer(s, l) => RowKey::Layer(tree.sites[s].layers[l].id),
        TreeRow::Sample(s, l, i) => RowKey::Sample(tree.sites[s].layers[l].samples[i].id),
    })
}

fn find_key(tree: &Tree, key: &RowKey) -> Option<usize> {
    tree.rows.iter().position(|row| match (row, key) {
        (TreeRow::Site(s), RowKey::Site(code)) => tree.sites[*s].code == *code,
        (TreeRow::Layer(s, l), RowKey::Layer(id)) => tree.sites[*s].layers[*l].id == *id,
        (TreeRow::Sample(s, l, i), RowKey::Sample(id)) => {
            tree.sites[*s].layers[*l].samples[*i].id == *id
        }
        _ => false,
    })
}

fn on_loaded(state: &mut AppState, loaded: Loaded) -> Vec<Effect> {
    match loaded {
        Loaded::Tree(mut tree) => {
            let first = state.tree.sites.is_empty();
            let key = row_key(&state.tree);
            if tree.sites.len() == state.tree.sites.len() {
                tree.expanded = std::mem::take(&mut state.tree.expanded);
                tree.collapsed_layers = std::mem::take(&mut state.tree.collapsed_layers);
            }
            tree.filter = std::mem::take(&mut state.tree.filter);
            tree.cursor = state.tree.cursor;
            tree.rows.clear();
            tree.rebuild();
            if let Some(pos) = key.and_then(|k| find_key(&tree, &k)) {
                tree.cursor = pos;
            }
            state.tree = tree;
            if first {
                let sites = state.tree.sites.len();
                let samples = state.tree.sample_count();
                state.say(
                    Tone::Info,
                    format!(
                        "{sites} sites, {samples} samples · Enter opens a site · ? shows every key"
                    ),
                );
            }
            if let Some(id) = state.detail.sample_id()
                && state.tree.sample(id).is_none()
            {
                state.detail = Detail::Empty;
            }
            if state.screen == Screen::Browse {
                follow_tree(state)
            } else {
                Vec::new()
            }
        }
        Loaded::Sample(detail) => {
            if state.detail.sample_id() == Some(detail.id) {
                if state.screen == Screen::Review
                    && let Some(item) = state.review_item()
                    && let Some(pos) = detail
                        .readings
                        .iter()
                        .position(|r| Some(r.id) == item.reading_id())
                {
                    state.reading = pos;
                }
                state.detail = Detail::Ready(detail);
                state.reading = state.reading.min(state.reading_rows().saturating_sub(1));
            }
            Vec::new()
        }
        Loaded::Depth(data) => {
            if state.depth.site.as_deref() == Some(data.site.as_str())
                && (state.depth.root_zone_cm - data.root_zone_cm).abs() < 1e-9
            {
                state.depth.cursor = state.depth.cursor.min(data.rows.len().saturating_sub(1));
                state.depth.data = Some(*data);
            }
            Vec::new()
        }
        Loaded::Review(Ok(items)) => {
            let episodes = items.into_iter().map(ReviewEpisode::single).collect();
            update(state, Action::Loaded(Loaded::Episodes(Ok(episodes))))
        }
        Loaded::Review(Err(why)) | Loaded::Episodes(Err(why)) => {
            state.review.items.clear();
            state.review.episodes.clear();
            state.review.opened = None;
            state.review.loaded = true;
            state.review.unavailable = Some(why);
            Vec::new()
        }
        Loaded::Episodes(Ok(episodes)) => {
            state.review.set_episodes(episodes);
            state.review.loaded = true;
            state.review.unavailable = None;
            if state.screen == Screen::Review {
                follow_review(state)
            } else {
                Vec::new()
            }
        }
        Loaded::Sensors(Ok(sensors)) => {
            let series = &mut state.series;
            series.sensors = sensors;
            series.loaded = true;
            series.unavailable = None;
            if series.site.is_none() {
                series.site = series.sites().first().map(|s| (*s).to_string());
            }
            if let Some(pick) = series.pick.take() {
                series.apply(&pick);
            }
            series.cursor = series
                .cursor
                .min(series.site_sensors().len().saturating_sub(1));
            if state.screen == Screen::Series {
                request_series(state, true)
            } else {
                Vec::new()
            }
        }
        Loaded::Sensors(Err(why)) => {
            state.series.sensors.clear();
            state.series.loaded = true;
            state.series.unavailable = Some(why);
            Vec::new()
        }
        Loaded::Series(data) => {
            if state.review.series_wanted.as_ref() == Some(&data.request) {
                state.review.series = Some((*data).clone());
            }
            if state.series.wanted.as_ref() == Some(&data.request) {
                state.series.data = Some(*data);
            }
            Vec::new()
        }
    }
}

fn on_fit_finished(
    state: &mut AppState,
    job: super::worker::JobId,
    result: Result<FitRunSummary, String>,
) -> Vec<Effect> {
    let finished = state.jobs.finish(job);
    let mut effects = Vec::new();
    if finished.current {
        match result {
            Ok(summary) => {
                let mut text = format!(
                    "fitted {} sample{}",
                    summary.fitted.len(),
                    if summary.fitted.len() == 1 { "" } else { "s" }
                );
                if let Some((code, why)) = summary.failed.first() {
                    let _ = write!(
                        text,
                        "; {} could not be fitted ({code}: {why})",
                        summary.failed.len()
                    );
                }
                if let Some(code) = summary.changed.first() {
                    let _ = write!(
                        text,
                        "; {} not recorded, readings changed meanwhile ({code}): refit",
                        summary.changed.len()
                    );
                }
                let tone = if summary.is_complete() {
                    Tone::Info
                } else {
                    Tone::Warning
                };
                state.say(tone, text);
            }
            Err(e) => state.say(Tone::Error, format!("the fit could not run: {e}")),
        }
        effects.extend(reload(state));
    }
    if let Some((id, request)) = finished.next {
        effects.push(Effect::StartFit { job: id, request });
    }
    effects
}

/// The next model for refits: the models in turn, then auto.
pub fn next_choice(choice: ModelChoice) -> ModelChoice {
    match choice {
        ModelChoice::Auto => ModelChoice::One(ModelKind::ALL[0]),
        ModelChoice::One(kind) => {
            let i = ModelKind::ALL.iter().position(|k| *k == kind).unwrap_or(0);
            ModelKind::ALL
                .get(i + 1)
                .map_or(ModelChoice::Auto, |k| ModelChoice::One(*k))
        }
    }
}

/// The sample a refit or flag acts on, as (id, code, site).
fn target_sample(state: &AppState) -> Option<(i64, String, String)> {
    match state.screen {
        Screen::Depth => {
            let data = state.depth.data.as_ref()?;
            let row = data.rows.get(state.depth.cursor)?;
            Some((row.sample_id, row.sample.clone(), data.site.clone()))
        }
        Screen::Browse if state.focus == Pane::Tree => {
            let site = state.tree.current_site()?.code.clone();
            state
                .tree
                .current_sample()
                .map(|s| (s.id, s.code.clone(), site))
        }
        _ => state
            .detail
            .ready()
            .map(|d| (d.id, d.code.clone(), d.site.clone())),
    }
}

/// The code of the site holding a sample (by database id), from the tree.
fn site_of_sample(state: &AppState, sample_id: i64) -> Option<String> {
    state
        .tree
        .sites
        .iter()
        .find(|site| site.samples().any(|s| s.id == sample_id))
        .map(|site| site.code.clone())
}

/// The site a site refit or the depth view acts on.
fn target_site(state: &AppState) -> Option<String> {
    match state.screen {
        Screen::Depth => state.depth.site.clone(),
        Screen::Series if state.series.site.is_some() => state.series.site.clone(),
        Screen::Browse if state.focus == Pane::Tree => {
            state.tree.current_site().map(|s| s.code.clone())
        }
        _ => state
            .detail
            .ready()
            .map(|d| d.site.clone())
            .or_else(|| state.tree.current_site().map(|s| s.code.clone())),
    }
}

fn submit_fit(state: &mut AppState, scope: FitScope) -> Vec<Effect> {
    submit_fit_with(state, scope, false)
}

/// [`submit_fit`], retention only or with the measured conductivity.
fn submit_fit_with(state: &mut AppState, scope: FitScope, with_conductivity: bool) -> Vec<Effect> {
    let request = FitRequest {
        scope,
        choice: state.choice,
        with_conductivity,
    };
    match state.jobs.submit(request.clone()) {
        Submitted::Start(job) => {
            // The status line shows the running job itself.
            state.say(Tone::Info, "");
            vec![Effect::StartFit { job, request }]
        }
        Submitted::Queued { replaced, .. } => {
            let mut text = format!("queued {request} after the running fit");
            if let Some(old) = replaced {
                let _ = write!(text, " (replaces the queued {old})");
            }
            state.say(Tone::Info, text);
            Vec::new()
        }
    }
}

/// Keys that mean the same on every screen.
fn on_global(state: &mut AppState, action: &Action) -> Option<Vec<Effect>> {
    Some(match action {
        Action::Quit => {
            if state.jobs.is_busy() {
                state.input = Input::ConfirmQuit;
                Vec::new()
            } else {
                state.quit = true;
                vec![Effect::Quit]
            }
        }
        Action::ToggleHelp => {
            if state.screen == Screen::Help {
                state.screen = state.back_to;
            } else {
                state.back_to = state.screen;
                state.screen = Screen::Help;
                state.help_scroll = 0;
            }
            Vec::new()
        }
        Action::ShowBrowse => {
            state.screen = Screen::Browse;
            follow_tree(state)
        }
        Action::ShowDepth => {
            if let Some(site) = target_site(state) {
                show_depth(state, site)
            } else {
                state.say(Tone::Warning, "no site to show: the campaign has none");
                Vec::new()
            }
        }
        Action::ShowSeries => {
            if state.screen == Screen::Review
                && let Some(Suspect::Record { .. }) = state.review_item().map(|i| &i.suspect)
            {
                // The suspect record's own series, as Enter opens it.
                on_review(state, &Action::Open)
            } else if let Some(site) = target_site(state) {
                let pick = series_pick(state);
                let window = state
                    .series
                    .window
                    .filter(|_| state.series.site.as_deref() == Some(site.as_str()));
                show_series(state, site, pick, window, None)
            } else {
                state.say(Tone::Warning, "no site to show: the campaign has none");
                Vec::new()
            }
        }
        Action::ShowReview => {
            state.screen = Screen::Review;
            let mut effects = vec![Effect::LoadReview];
            effects.extend(follow_review(state));
            effects
        }
        Action::RefitSample => {
            if let Some((id, code, site)) = target_sample(state) {
                submit_fit(state, FitScope::Sample { id, code, site })
            } else {
                state.say(Tone::Warning, "select a sample first (F refits a site)");
                Vec::new()
            }
        }
        Action::RefitSampleWithConductivity => {
            if let Some((id, code, site)) = target_sample(state) {
                submit_fit_with(state, FitScope::Sample { id, code, site }, true)
            } else {
                state.say(Tone::Warning, "select a sample first");
                Vec::new()
            }
        }
        Action::NextCurrentFit => {
            if let Some((sample_id, code, _)) = target_sample(state) {
                vec![Effect::NextCurrentFit { sample_id, code }]
            } else {
                state.say(Tone::Warning, "select a sample first");
                Vec::new()
            }
        }
        Action::RefitSite => {
            if let Some(site) = target_site(state) {
                submit_fit(state, FitScope::Site(site))
            } else {
                state.say(Tone::Warning, "select a site first");
                Vec::new()
            }
        }
        Action::RefitAll => submit_fit(state, FitScope::All),
        Action::CycleModel => {
            state.choice = next_choice(state.choice);
            let name = match state.choice {
                ModelChoice::Auto => "auto (every model, best AICc kept)",
                ModelChoice::One(kind) => kind.display_name(),
            };
            state.say(Tone::Info, format!("refits will use {name}"));
            Vec::new()
        }
        Action::CycleUnits => {
            state.units = state.units.next();
            state.say(Tone::Info, format!("suction in {}", state.units.symbol()));
            Vec::new()
        }
        Action::ToggleBand => {
            state.band = !state.band;
            state.say(
                Tone::Info,
                if state.band {
                    "95 % band of the fitted curve shown"
                } else {
                    "95 % band hidden"
                },
            );
            Vec::new()
        }
        Action::ToggleConductivity => {
            state.show_conductivity = !state.show_conductivity;
            // The readings pane lists the measured K in the K view: its cursor starts over.
            state.reading = 0;
            state.say(
                Tone::Info,
                if state.show_conductivity {
                    "curve pane: conductivity K against suction"
                } else {
                    "curve pane: water content against suction"
                },
            );
            Vec::new()
        }
        Action::Export => {
            state.say(Tone::Info, "exporting…");
            vec![Effect::Export]
        }
        Action::ToggleTextureFill => {
            state.depth.fill_texture = !state.depth.fill_texture;
            state.say(
                Tone::Info,
                super::app::texture_fill::toggled(state.depth.fill_texture),
            );
            Vec::new()
        }
        _ => return None,
    })
}

fn on_intent(state: &mut AppState, action: &Action) -> Vec<Effect> {
    if let Some(effects) = on_global(state, action) {
        return effects;
    }
    match state.screen {
        Screen::Browse => on_browse(state, action),
        Screen::Depth => on_depth(state, action),
        Screen::Review => on_review(state, action),
        Screen::Series => on_series(state, action),
        Screen::Help => {
            match action {
                Action::Back => state.screen = state.back_to,
                Action::Up => state.help_scroll = state.help_scroll.saturating_sub(1),
                Action::Down => state.help_scroll = state.help_scroll.saturating_add(1),
                Action::PageUp => {
                    state.help_scroll = state.help_scroll.saturating_sub(page(state) as u16);
                }
                Action::PageDown => {
                    state.help_scroll = state.help_scroll.saturating_add(page(state) as u16);
                }
                _ => {}
            }
            Vec::new()
        }
    }
}

/// Flags change what a running fit reads, so they wait until it ends; true when refused.
fn refuse_while_fitting(state: &mut AppState) -> bool {
    if state.jobs.is_busy() {
        state.say(
            Tone::Warning,
            "a fit is running: change flags when it ends (they change what it fits)",
        );
        true
    } else {
        false
    }
}

fn start_flag(state: &mut AppState) {
    if refuse_while_fitting(state) {
        return;
    }
    let picked = if state.k_readings().is_some() {
        state
            .selected_k_reading()
            .map(|k| (FlagTarget::ConductivityReading(k.id), k.excluded))
    } else {
        state
            .selected_reading()
            .map(|r| (FlagTarget::Reading(r.id), r.excluded))
    };
    let Some((target, excluded)) = picked else {
        state.say(Tone::Warning, "open a sample and pick a reading first");
        return;
    };
    state.input = Input::Reason {
        target,
        flag: !excluded,
        text: String::new(),
    };
}

#[cfg(test)]
mod tests;
