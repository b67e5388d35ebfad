//! The one place the UI state changes: an [`Action`] in, the [`Effect`]s for the runtime out.

use std::fmt::Write as _;

use crate::analysis::{FitRunSummary, ModelChoice};
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
        Action::FlagChanged(Ok(message)) => {
            state.say(Tone::Info, message);
            reload(state)
        }
        Action::FlagChanged(Err(message)) | Action::ExportFinished(Err(message)) => {
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
            Input::Reason {
                reading_id,
                flag,
                text,
            } => on_reason_input(state, reading_id, flag, text, &intent),
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
                let len = detail.readings.len();
                if state.screen == Screen::Review
                    && let Some(item) = state.review_item()
                    && let Some(pos) = detail
                        .readings
                        .iter()
                        .position(|r| Some(r.id) == item.reading_id())
                {
                    state.reading = pos;
                }
                state.reading = state.reading.min(len.saturating_sub(1));
                state.detail = Detail::Ready(detail);
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

/// Buckets across a series window: two per terminal column (braille has two dots a cell).
fn series_columns(state: &AppState) -> usize {
    usize::from(state.size.0).max(20) * 2
}

/// Ask for the series of the sensor under the cursor (and its partner at the same depth),
/// unless it is the one already wanted (`force` asks again, after a change in the file).
fn request_series(state: &mut AppState, force: bool) -> Vec<Effect> {
    let columns = series_columns(state);
    let series = &mut state.series;
    let Some(current) = series.current() else {
        series.wanted = None;
        series.data = None;
        return Vec::new();
    };
    let request = SeriesRequest {
        site: current.site.clone(),
        depth_cm: current.depth_cm,
        sensor_id: current.sensor_id.clone(),
        window: series.window,
        columns,
        mark: series.mark.clone(),
    };
    if !force && series.wanted.as_ref() == Some(&request) {
        return Vec::new();
    }
    series.wanted = Some(request.clone());
    vec![Effect::LoadSeries(request)]
}

/// Show the series screen for `site` (the sensors are reloaded: their flag counts may have
/// changed), landing where `pick` says, in `window`, with a record marked.
fn show_series(
    state: &mut AppState,
    site: String,
    pick: Option<SensorPick>,
    window: Option<(i64, i64)>,
    mark: Option<(String, i64)>,
) -> Vec<Effect> {
    let series = &mut state.series;
    if series.site.as_deref() != Some(site.as_str()) {
        series.cursor = 0;
        series.data = None;
        series.wanted = None;
    }
    series.site = Some(site);
    series.pick = pick;
    series.window = window;
    series.mark = mark;
    state.screen = Screen::Series;
    vec![Effect::LoadSensors]
}

/// The window the series screen shows now (asked for, or loaded, or the depth's whole span).
fn series_window(state: &AppState) -> Option<(i64, i64)> {
    state
        .series
        .window
        .or_else(|| state.series.data.as_ref().map(|d| d.window))
        .or_else(|| state.series.depth_span())
}

fn on_series(state: &mut AppState, action: &Action) -> Vec<Effect> {
    let len = state.series.site_sensors().len();
    if let Some(cursor) = moved(state, state.series.cursor, len, action) {
        state.series.cursor = cursor;
        return request_series(state, false);
    }
    match action {
        Action::Left | Action::Right | Action::ZoomIn | Action::ZoomOut => {
            let (Some(window), Some(span)) = (series_window(state), state.series.depth_span())
            else {
                return Vec::new();
            };
            state.series.window = match action {
                Action::Left => Some(panned(window, span, -1)),
                Action::Right => Some(panned(window, span, 1)),
                Action::ZoomIn => zoomed(window, span, 0.5),
                _ => zoomed(window, span, 2.0),
            };
            request_series(state, false)
        }
        Action::WholeSpan => {
            state.series.window = None;
            request_series(state, false)
        }
        Action::PrevSite | Action::NextSite => {
            let sites: Vec<String> = state
                .series
                .sites()
                .iter()
                .map(|s| (*s).to_string())
                .collect();
            if sites.is_empty() {
                state.say(Tone::Info, "no logger series in this campaign");
                return Vec::new();
            }
            let at = state
                .series
                .site
                .as_ref()
                .and_then(|c| sites.iter().position(|s| s == c));
            let next = match (at, *action == Action::NextSite) {
                (Some(i), true) => (i + 1) % sites.len(),
                (Some(i), false) => (i + sites.len() - 1) % sites.len(),
                (None, true) => 0,
                (None, false) => sites.len() - 1,
            };
            let series = &mut state.series;
            series.site = Some(sites[next].clone());
            series.cursor = 0;
            series.window = None;
            series.mark = None;
            series.data = None;
            request_series(state, false)
        }
        Action::Open => {
            let Some(sensor) = state.series.current().cloned() else {
                return Vec::new();
            };
            let found = state
                .tree
                .sites
                .iter()
                .filter(|s| s.code == sensor.site)
                .flat_map(|s| &s.layers)
                .filter(|l| sensor.depth_cm >= l.top_cm && sensor.depth_cm < l.bottom_cm)
                .flat_map(|l| &l.samples)
                .find(|s| s.kind == crate::model::domain::SampleKind::FieldPairing)
                .map(|s| s.id);
            if let Some(id) = found {
                open_in_browser(state, id)
            } else {
                state.say(
                    Tone::Info,
                    format!(
                        "no field pairing at {} {} cm yet: `porewise pair` makes one",
                        sensor.site, sensor.depth_cm
                    ),
                );
                Vec::new()
            }
        }
        Action::Back => {
            state.screen = Screen::Browse;
            follow_tree(state)
        }
        _ => Vec::new(),
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

fn on_filter_input(state: &mut AppState, mut text: String, action: &Action) -> Vec<Effect> {
    match action {
        Action::Char(c) => text.push(*c),
        Action::Backspace => {
            text.pop();
        }
        Action::Submit => {
            state.input = Input::None;
            let n = state
                .tree
                .rows
                .iter()
                .filter(|r| matches!(r, TreeRow::Sample(..)))
                .count();
            if !state.tree.filter.is_empty() {
                // Land on the first match, so Enter opens it.
                let on_sample = matches!(
                    state.tree.rows.get(state.tree.cursor),
                    Some(TreeRow::Sample(..))
                );
                if !on_sample
                    && let Some(i) = state
                        .tree
                        .rows
                        .iter()
                        .position(|r| matches!(r, TreeRow::Sample(..)))
                {
                    state.tree.cursor = i;
                }
                state.say(
                    Tone::Info,
                    format!(
                        "{n} sample{} match {:?} · Esc clears",
                        if n == 1 { "" } else { "s" },
                        state.tree.filter
                    ),
                );
            }
            return follow_tree(state);
        }
        Action::Cancel => {
            state.input = Input::None;
            clear_filter(state);
            return follow_tree(state);
        }
        _ => return Vec::new(),
    }
    state.tree.filter.clone_from(&text);
    state.input = Input::Filter(text);
    state.tree.rebuild();
    Vec::new()
}

fn on_reason_input(
    state: &mut AppState,
    reading_id: i64,
    flag: bool,
    mut text: String,
    action: &Action,
) -> Vec<Effect> {
    match action {
        Action::Char(c) => text.push(*c),
        Action::Backspace => {
            text.pop();
        }
        Action::Cancel => {
            state.input = Input::None;
            state.say(Tone::Info, "flag left as it was");
            return Vec::new();
        }
        Action::Submit => {
            let reason = text.trim().to_string();
            if flag && reason.is_empty() {
                state.say(
                    Tone::Warning,
                    "type a reason first (Esc leaves the flag as it was)",
                );
                return Vec::new();
            }
            state.input = Input::None;
            return vec![if flag {
                Effect::SetFlag { reading_id, reason }
            } else {
                Effect::ClearFlag {
                    reading_id,
                    note: reason,
                }
            }];
        }
        _ => return Vec::new(),
    }
    state.input = Input::Reason {
        reading_id,
        flag,
        text,
    };
    Vec::new()
}

fn on_confirm(state: &mut AppState, action: &Action) -> Vec<Effect> {
    match action {
        Action::Submit => {
            state.quit = true;
            vec![Effect::Quit]
        }
        Action::Cancel => {
            state.input = Input::None;
            state.say(Tone::Info, "still here; the fit goes on");
            Vec::new()
        }
        _ => Vec::new(),
    }
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

/// Where the series screen lands: the depth of the layer (or the sample's layer) under the
/// tree cursor, or of the sample shown.
fn series_pick(state: &AppState) -> Option<SensorPick> {
    let layer = |s: usize, l: usize| {
        let layer = &state.tree.sites[s].layers[l];
        SensorPick::Depth(layer.top_cm, layer.bottom_cm)
    };
    match (state.screen, state.tree.current()) {
        (Screen::Browse, Some(TreeRow::Layer(s, l) | TreeRow::Sample(s, l, _))) => {
            Some(layer(s, l))
        }
        (Screen::Browse, Some(TreeRow::Site(_))) | (Screen::Series, _) => None,
        (Screen::Depth, _) => {
            let data = state.depth.data.as_ref()?;
            let row = data.rows.get(state.depth.cursor)?;
            let l = data.layers.get(row.layer)?;
            Some(SensorPick::Depth(l.top_cm, l.bottom_cm))
        }
        _ => state
            .detail
            .ready()
            .map(|d| SensorPick::Depth(d.top_cm, d.bottom_cm)),
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

fn show_depth(state: &mut AppState, site: String) -> Vec<Effect> {
    if state.depth.site.as_deref() != Some(site.as_str()) {
        state.depth.cursor = 0;
        state.depth.data = None;
    }
    state.depth.site = Some(site.clone());
    state.screen = Screen::Depth;
    vec![Effect::LoadDepth {
        site,
        root_zone_cm: state.depth.root_zone_cm,
    }]
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

fn toggle_node(tree: &mut Tree, row: TreeRow, open: Option<bool>) {
    match row {
        TreeRow::Site(s) => {
            let key = NodeKey::Site(s);
            let now = tree.expanded.contains(&key);
            if open.unwrap_or(!now) {
                tree.expanded.insert(key);
            } else {
                tree.expanded.remove(&key);
            }
        }
        TreeRow::Layer(s, l) => {
            let key = NodeKey::Layer(s, l);
            let now = !tree.collapsed_layers.contains(&key);
            if open.unwrap_or(!now) {
                tree.collapsed_layers.remove(&key);
            } else {
                tree.collapsed_layers.insert(key);
            }
        }
        TreeRow::Sample(..) => return,
    }
    tree.rebuild();
}

fn on_tree(state: &mut AppState, action: &Action) -> Vec<Effect> {
    let len = state.tree.rows.len();
    if let Some(cursor) = moved(state, state.tree.cursor, len, action) {
        state.tree.cursor = cursor;
        return follow_tree(state);
    }
    let Some(row) = state.tree.current() else {
        if *action == Action::Back && !state.tree.filter.is_empty() {
            state.tree.filter.clear();
            state.tree.rebuild();
        }
        return Vec::new();
    };
    let filtering = !state.tree.filter.is_empty();
    match action {
        Action::Left => {
            let parent = match row {
                TreeRow::Site(_) => None,
                TreeRow::Layer(s, _) => Some(TreeRow::Site(s)),
                TreeRow::Sample(s, l, _) => Some(TreeRow::Layer(s, l)),
            };
            if !filtering && !matches!(row, TreeRow::Sample(..)) && state.tree.is_open(row) {
                toggle_node(&mut state.tree, row, Some(false));
            } else if let Some(pos) =
                parent.and_then(|p| state.tree.rows.iter().position(|r| *r == p))
            {
                state.tree.cursor = pos;
            }
            Vec::new()
        }
        Action::Right => match row {
            TreeRow::Sample(..) => {
                state.focus = Pane::Readings;
                Vec::new()
            }
            _ if state.tree.is_open(row) => {
                if state.tree.cursor + 1 < state.tree.rows.len() {
                    state.tree.cursor += 1;
                }
                follow_tree(state)
            }
            _ => {
                toggle_node(&mut state.tree, row, Some(true));
                Vec::new()
            }
        },
        Action::Open => match row {
            TreeRow::Sample(..) => {
                state.focus = Pane::Readings;
                Vec::new()
            }
            _ if filtering => Vec::new(),
            _ => {
                toggle_node(&mut state.tree, row, None);
                Vec::new()
            }
        },
        Action::Back => {
            if filtering {
                clear_filter(state);
                state.say(Tone::Info, "filter cleared");
            }
            follow_tree(state)
        }
        _ => Vec::new(),
    }
}

fn on_browse(state: &mut AppState, action: &Action) -> Vec<Effect> {
    match action {
        Action::NextPane => {
            state.focus = state.focus.cycle(1);
            return Vec::new();
        }
        Action::PrevPane => {
            state.focus = state.focus.cycle(-1);
            return Vec::new();
        }
        Action::StartFilter => {
            // A new filter each time; Esc in the tree clears a kept one.
            state.focus = Pane::Tree;
            state.tree.filter.clear();
            state.tree.rebuild();
            state.input = Input::Filter(String::new());
            return Vec::new();
        }
        Action::ToggleFlag => {
            start_flag(state);
            return Vec::new();
        }
        _ => {}
    }
    match state.focus {
        Pane::Tree => on_tree(state, action),
        Pane::Curve | Pane::Readings => {
            let len = state.detail.ready().map_or(0, |d| d.readings.len());
            let step = match action {
                Action::Left if state.focus == Pane::Curve => Some(&Action::Up),
                Action::Right if state.focus == Pane::Curve => Some(&Action::Down),
                other => Some(other),
            };
            if let Some(cursor) = step.and_then(|a| moved(state, state.reading, len, a)) {
                state.reading = cursor;
            } else if matches!(action, Action::Back | Action::Left) {
                state.focus = Pane::Tree;
            }
            Vec::new()
        }
        Pane::Card => {
            match action {
                Action::Up => state.card_scroll = state.card_scroll.saturating_sub(1),
                Action::Down => state.card_scroll = state.card_scroll.saturating_add(1),
                Action::Top => state.card_scroll = 0,
                Action::Back | Action::Left => state.focus = Pane::Tree,
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
    let Some(reading) = state.selected_reading() else {
        state.say(Tone::Warning, "open a sample and pick a reading first");
        return;
    };
    let flag = !reading.excluded;
    let reading_id = reading.id;
    state.input = Input::Reason {
        reading_id,
        flag,
        text: String::new(),
    };
}

fn on_depth(state: &mut AppState, action: &Action) -> Vec<Effect> {
    let len = state.depth.data.as_ref().map_or(0, |d| d.rows.len());
    if let Some(cursor) = moved(state, state.depth.cursor, len, action) {
        state.depth.cursor = cursor;
        return Vec::new();
    }
    match action {
        Action::Left | Action::Right => {
            let sites = &state.tree.sites;
            if sites.is_empty() {
                return Vec::new();
            }
            let at = state
                .depth
                .site
                .as_ref()
                .and_then(|c| sites.iter().position(|s| s.code == *c))
                .unwrap_or(0);
            let step: isize = if *action == Action::Left { -1 } else { 1 };
            let next = (at as isize + step).rem_euclid(sites.len() as isize) as usize;
            let code = sites[next].code.clone();
            show_depth(state, code)
        }
        Action::DeeperRootZone | Action::ShallowerRootZone => {
            let delta = if *action == Action::DeeperRootZone {
                ROOT_ZONE_STEP
            } else {
                -ROOT_ZONE_STEP
            };
            state.depth.root_zone_cm =
                (state.depth.root_zone_cm + delta).clamp(ROOT_ZONE_RANGE.0, ROOT_ZONE_RANGE.1);
            state.say(
                Tone::Info,
                format!("available water summed to {} cm", state.depth.root_zone_cm),
            );
            match state.depth.site.clone() {
                Some(site) => show_depth(state, site),
                None => Vec::new(),
            }
        }
        Action::Open => {
            let Some(id) = state
                .depth
                .data
                .as_ref()
                .and_then(|d| d.rows.get(state.depth.cursor))
                .map(|r| r.sample_id)
            else {
                return Vec::new();
            };
            open_in_browser(state, id)
        }
        Action::Back => {
            state.screen = Screen::Browse;
            follow_tree(state)
        }
        _ => Vec::new(),
    }
}

fn open_in_browser(state: &mut AppState, sample_id: i64) -> Vec<Effect> {
    state.screen = Screen::Browse;
    state.focus = Pane::Tree;
    if !state.tree.filter.is_empty() && state.tree.sample(sample_id).is_some() {
        state.tree.filter.clear();
    }
    state.tree.reveal(sample_id);
    select_sample(state, sample_id)
}

/// After the review cursor moved: show the item's sample with its reading highlighted, or the
/// series around a suspect record.
pub(super) fn follow_review(state: &mut AppState) -> Vec<Effect> {
    let Some(item) = state.review_item().cloned() else {
        return Vec::new();
    };
    match item.suspect {
        Suspect::Reading {
            reading_id,
            sample_id,
            ..
        } => {
            let effects = select_sample(state, sample_id);
            if let Some(pos) = state
                .detail
                .ready()
                .and_then(|d| d.readings.iter().position(|r| r.id == reading_id))
            {
                state.reading = pos;
            }
            effects
        }
        Suspect::Record {
            site,
            depth_cm,
            sensor_id,
            time,
            ..
        } => {
            let request = SeriesRequest {
                site,
                depth_cm,
                sensor_id: sensor_id.clone(),
                window: Some((time - AROUND_S, time + AROUND_S)),
                columns: series_columns(state),
                mark: Some((sensor_id, time)),
            };
            state.review.series_wanted = Some(request.clone());
            vec![Effect::LoadSeries(request)]
        }
    }
}

fn on_review(state: &mut AppState, action: &Action) -> Vec<Effect> {
    let len = state.review.items.len();
    if let Some(cursor) = moved(state, state.review.cursor, len, action) {
        state.review.cursor = cursor;
        return follow_review(state);
    }
    if let Some(effects) = super::episodes::on_review(state, action) {
        return effects;
    }
    match action {
        Action::Accept | Action::Dismiss if refuse_while_fitting(state) => Vec::new(),
        Action::Accept | Action::Dismiss => {
            if let Some(item) = state.review_item().cloned() {
                let accept = *action == Action::Accept;
                let mut effects = vec![Effect::DecideFlag {
                    flag_id: item.flag_id,
                    target: item.target(),
                    accept,
                }];
                // An accepted reading leaves the fit stale: refit its sample at once, after the
                // decision is written (effects run in order).
                if let (
                    true,
                    Suspect::Reading {
                        sample_id, sample, ..
                    },
                ) = (accept, &item.suspect)
                    && let Some(site) = site_of_sample(state, *sample_id)
                {
                    effects.extend(submit_fit(
                        state,
                        FitScope::Sample {
                            id: *sample_id,
                            code: sample.clone(),
                            site,
                        },
                    ));
                }
                effects
            } else {
                state.say(Tone::Info, "nothing to review");
                Vec::new()
            }
        }
        Action::Open => match state.review_item().map(|i| i.suspect.clone()) {
            Some(Suspect::Reading { sample_id, .. }) => {
                let effects = open_in_browser(state, sample_id);
                state.focus = Pane::Readings;
                effects
            }
            Some(Suspect::Record {
                site,
                sensor_id,
                time,
                ..
            }) => show_series(
                state,
                site,
                Some(SensorPick::Sensor(sensor_id.clone())),
                Some((time - AROUND_S, time + AROUND_S)),
                Some((sensor_id, time)),
            ),
            None => Vec::new(),
        },
        Action::Back => {
            state.screen = Screen::Browse;
            follow_tree(state)
        }
        _ => Vec::new(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::domain::{FlagTarget, SensorKind};
    use crate::tui::app::fixtures::{detail, tree};
    use crate::tui::app::series::{MIN_WINDOW_S, SensorSeries};
    use crate::tui::app::{DepthData, ReviewItem, SensorInfo, SeriesData};
    use crate::tui::worker::JobId;

    /// A state with the fixture tree loaded.
    fn loaded() -> AppState {
        let mut state = AppState {
            size: (100, 30),
            ..AppState::default()
        };
        let effects = update(&mut state, Action::Loaded(Loaded::Tree(tree())));
        assert!(
            effects.is_empty(),
            "the cursor starts on a site: {effects:?}"
        );
        state
    }

    /// Open the first site and walk to its first sample (id 1), loaded.
    fn on_first_sample() -> AppState {
        let mut state = loaded();
        update(&mut state, Action::Open);
        update(&mut state, Action::Down);
        let effects = update(&mut state, Action::Down);
        assert_eq!(effects, vec![Effect::LoadSample(1)]);
        update(
            &mut state,
            Action::Loaded(Loaded::Sample(Box::new(detail(1, "AA-0-a")))),
        );
        state
    }

    #[test]
    fn the_first_screen_lists_the_sites_and_selecting_a_sample_loads_it() {
        let state = loaded();
        assert_eq!(state.tree.rows, vec![TreeRow::Site(0), TreeRow::Site(1)]);
        assert!(state.status.text.contains("2 sites, 8 samples"));
        let mut state = on_first_sample();
        assert_eq!(state.detail.ready().map(|d| d.id), Some(1));
        // A sample that arrives after the cursor moved on is dropped.
        let effects = update(&mut state, Action::Down);
        assert_eq!(effects, vec![Effect::LoadSample(2)]);
        update(
            &mut state,
            Action::Loaded(Loaded::Sample(Box::new(detail(1, "AA-0-a")))),
        );
        assert_eq!(state.detail, Detail::Loading(2));
        // Moving back to the site row keeps the sample; Left from a sample goes to its layer.
        update(&mut state, Action::Left);
        assert_eq!(state.tree.current(), Some(TreeRow::Layer(0, 0)));
        update(&mut state, Action::Left);
        assert_eq!(state.tree.rows.len(), 2 + 2 + 2, "layer closed");
        update(&mut state, Action::Left);
        assert_eq!(state.tree.current(), Some(TreeRow::Site(0)));
        update(&mut state, Action::Left);
        assert_eq!(state.tree.rows.len(), 2, "site closed");
    }

    #[test]
    fn refits_run_one_at_a_time_and_a_newer_request_replaces_the_waiting_one() {
        let mut state = on_first_sample();
        let effects = update(&mut state, Action::RefitSample);
        let Some(Effect::StartFit { job, request }) = effects.first().cloned() else {
            panic!("{effects:?}");
        };
        assert_eq!(job, JobId(1));
        assert_eq!(request.choice, ModelChoice::Auto);
        assert!(matches!(request.scope, FitScope::Sample { id: 1, .. }));
        update(&mut state, Action::CycleModel);
        assert!(update(&mut state, Action::RefitSite).is_empty(), "queued");
        assert!(update(&mut state, Action::RefitAll).is_empty(), "queued");
        assert!(state.status.text.contains("replaces the queued site AA"));
        update(
            &mut state,
            Action::FitProgress {
                job,
                done: 1,
                total: 1,
            },
        );
        assert_eq!(state.jobs.running.as_ref().map(|r| r.done), Some(1));
        let effects = update(
            &mut state,
            Action::FitFinished {
                job,
                result: Ok(FitRunSummary {
                    fitted: vec![("AA-0-a".into(), "kosugi".into())],
                    failed: Vec::new(),
                    changed: Vec::new(),
                }),
            },
        );
        // The first job was overtaken by "every sample": its summary is dropped, no reload.
        assert_eq!(
            effects,
            vec![Effect::StartFit {
                job: JobId(3),
                request: FitRequest {
                    scope: FitScope::All,
                    choice: ModelChoice::One(ModelKind::VanGenuchten),
                    with_conductivity: false,
                },
            }]
        );
        let effects = update(
            &mut state,
            Action::FitFinished {
                job: JobId(3),
                result: Ok(FitRunSummary {
                    fitted: vec![("AA-0-a".into(), "van-genuchten".into())],
                    failed: vec![("AA-0-b".into(), "too few readings".into())],
                    changed: vec!["AA-0-c".into()],
                }),
            },
        );
        assert_eq!(effects, vec![Effect::LoadTree, Effect::LoadSample(1)]);
        assert_eq!(state.status.tone, Tone::Warning);
        assert!(
            state
                .status
                .text
                .contains("1 could not be fitted (AA-0-b: too few readings)")
        );
        assert!(
            state
                .status
                .text
                .contains("1 not recorded, readings changed meanwhile (AA-0-c)"),
            "{}",
            state.status.text
        );
        // A result nobody waits for changes nothing.
        let effects = update(
            &mut state,
            Action::FitFinished {
                job: JobId(9),
                result: Err("late".into()),
            },
        );
        assert!(effects.is_empty() && !state.status.text.contains("late"));
    }

    #[test]
    fn quitting_asks_first_while_a_fit_runs() {
        let mut state = on_first_sample();
        assert_eq!(update(&mut state, Action::Quit), vec![Effect::Quit]);
        let mut state = on_first_sample();
        update(&mut state, Action::RefitSample);
        assert!(update(&mut state, Action::Quit).is_empty());
        assert_eq!(state.input, Input::ConfirmQuit);
        update(&mut state, Action::Cancel);
        assert_eq!(state.input, Input::None);
        assert!(!state.quit);
        update(&mut state, Action::Quit);
        assert_eq!(update(&mut state, Action::Submit), vec![Effect::Quit]);
        assert!(state.quit);
        let mut state = loaded();
        assert_eq!(update(&mut state, Action::ForceQuit), vec![Effect::Quit]);
    }

    #[test]
    fn flagging_asks_for_a_reason_and_clearing_for_a_note() {
        let mut state = on_first_sample();
        update(&mut state, Action::ToggleFlag);
        assert_eq!(
            state.input,
            Input::Reason {
                reading_id: 10,
                flag: true,
                text: String::new()
            }
        );
        assert!(
            update(&mut state, Action::Submit).is_empty(),
            "no reason yet"
        );
        assert_eq!(state.status.tone, Tone::Warning);
        for c in "plate  leak".chars() {
            update(&mut state, Action::Char(c));
        }
        update(&mut state, Action::Backspace);
        update(&mut state, Action::Char('k'));
        assert_eq!(
            update(&mut state, Action::Submit),
            vec![Effect::SetFlag {
                reading_id: 10,
                reason: "plate  leak".into()
            }]
        );
        // The excluded reading (the third) is cleared instead, the note optional.
        state.reading = 2;
        update(&mut state, Action::ToggleFlag);
        assert_eq!(
            update(&mut state, Action::Submit),
            vec![Effect::ClearFlag {
                reading_id: 12,
                note: String::new()
            }]
        );
        // A saved flag reloads what shows it.
        let effects = update(&mut state, Action::FlagChanged(Ok("flagged".into())));
        assert_eq!(effects, vec![Effect::LoadTree, Effect::LoadSample(1)]);
        // Typing q in the prompt is text, Esc abandons.
        update(&mut state, Action::ToggleFlag);
        update(&mut state, Action::Quit);
        assert!(!state.quit);
        update(&mut state, Action::Cancel);
        assert_eq!(state.input, Input::None);
        // No flag changes while a fit runs.
        update(&mut state, Action::RefitSample);
        update(&mut state, Action::ToggleFlag);
        assert_eq!(state.input, Input::None);
    }

    #[test]
    fn the_filter_narrows_the_tree_as_it_is_typed() {
        let mut state = loaded();
        update(&mut state, Action::StartFilter);
        for c in "bb-1".chars() {
            update(&mut state, Action::Char(c));
        }
        assert_eq!(state.tree.rows.len(), 1 + 1 + 2);
        assert_eq!(state.input, Input::Filter("bb-1".into()));
        update(&mut state, Action::Submit);
        assert_eq!(state.input, Input::None);
        assert_eq!(state.tree.filter, "bb-1");
        assert!(
            matches!(
                state.tree.rows.get(state.tree.cursor),
                Some(TreeRow::Sample(..))
            ),
            "the cursor lands on the first match"
        );
        let effects = update(&mut state, Action::Bottom);
        assert_eq!(effects, vec![Effect::LoadSample(8)]);
        update(&mut state, Action::Back);
        assert!(state.tree.filter.is_empty());
        assert_eq!(
            state.tree.current_sample().map(|s| s.id),
            Some(8),
            "cursor stays"
        );
        update(&mut state, Action::StartFilter);
        update(&mut state, Action::Char('z'));
        update(&mut state, Action::Cancel);
        assert!(state.tree.filter.is_empty());
    }

    #[test]
    fn models_cycle_then_auto_and_units_and_band_toggle() {
        let mut choice = ModelChoice::Auto;
        let mut seen = Vec::new();
        for _ in 0..ModelKind::ALL.len() {
            choice = next_choice(choice);
            seen.push(choice);
        }
        assert_eq!(seen[0], ModelChoice::One(ModelKind::VanGenuchten));
        assert_eq!(seen[6], ModelChoice::One(ModelKind::Campbell));
        assert_eq!(next_choice(choice), ModelChoice::Auto);
        let mut state = loaded();
        update(&mut state, Action::CycleUnits);
        update(&mut state, Action::CycleUnits);
        assert_eq!(state.units, crate::tui::app::AxisUnit::Pf);
        update(&mut state, Action::ToggleBand);
        assert!(state.band);
        update(&mut state, Action::ToggleConductivity);
        assert!(state.show_conductivity);
        assert!(state.status.text.contains("conductivity K"));
        update(&mut state, Action::ToggleConductivity);
        assert!(!state.show_conductivity);
    }

    #[test]
    fn a_refit_with_conductivity_asks_the_worker_for_a_joint_fit() {
        let mut state = on_first_sample();
        let effects = update(&mut state, Action::RefitSampleWithConductivity);
        let Some(Effect::StartFit { request, .. }) = effects.first().cloned() else {
            panic!("{effects:?}");
        };
        assert!(request.with_conductivity);
        assert!(matches!(request.scope, FitScope::Sample { id: 1, .. }));
        assert_eq!(request.joint_kind(), ModelKind::VanGenuchten);
        assert!(
            request
                .to_string()
                .ends_with("(van-genuchten with conductivity)")
        );
    }

    #[test]
    fn the_depth_view_loads_its_site_and_follows_the_root_zone() {
        let mut state = loaded();
        update(&mut state, Action::Down);
        let effects = update(&mut state, Action::ShowDepth);
        assert_eq!(
            effects,
            vec![Effect::LoadDepth {
                site: "BB".into(),
                root_zone_cm: 100.0
            }]
        );
        assert_eq!(state.screen, Screen::Depth);
        let effects = update(&mut state, Action::DeeperRootZone);
        assert_eq!(
            effects,
            vec![Effect::LoadDepth {
                site: "BB".into(),
                root_zone_cm: 110.0
            }]
        );
        let data = |root_zone_cm| DepthData::from_parts("BB", None, &[], None, root_zone_cm);
        update(
            &mut state,
            Action::Loaded(Loaded::Depth(Box::new(data(100.0)))),
        );
        assert!(
            state.depth.data.is_none(),
            "an answer for the old depth is dropped"
        );
        update(
            &mut state,
            Action::Loaded(Loaded::Depth(Box::new(data(110.0)))),
        );
        assert!(state.depth.data.is_some());
        let effects = update(&mut state, Action::Right);
        assert_eq!(
            effects,
            vec![Effect::LoadDepth {
                site: "AA".into(),
                root_zone_cm: 110.0
            }]
        );
        update(&mut state, Action::Back);
        assert_eq!(state.screen, Screen::Browse);
    }

    #[test]
    fn the_review_queue_shows_the_suspect_and_decides_with_one_key() {
        let mut state = loaded();
        assert_eq!(
            update(&mut state, Action::ShowReview),
            vec![Effect::LoadReview]
        );
        let item = |flag_id, sample_id, reading_id| ReviewItem {
            flag_id,
            suspect: Suspect::Reading {
                reading_id,
                sample_id,
                sample: format!("S{sample_id}"),
                h_cm: 100.0,
                theta: 0.3,
            },
            reason: "off".into(),
            score: Some(3.0),
        };
        let effects = update(
            &mut state,
            Action::Loaded(Loaded::Review(Ok(vec![item(7, 1, 11), item(8, 5, 40)]))),
        );
        assert_eq!(effects, vec![Effect::LoadSample(1)]);
        update(
            &mut state,
            Action::Loaded(Loaded::Sample(Box::new(detail(1, "AA-0-a")))),
        );
        assert_eq!(state.reading, 1, "the suspect reading is the selected one");
        // Accepting writes the decision, then refits the suspect's sample.
        let effects = update(&mut state, Action::Accept);
        assert_eq!(
            effects.first(),
            Some(&Effect::DecideFlag {
                flag_id: 7,
                target: FlagTarget::Reading(11),
                accept: true
            })
        );
        let Some(Effect::StartFit { job, request }) = effects.get(1) else {
            panic!("an accepted reading refits its sample: {effects:?}");
        };
        assert_eq!(
            request.scope,
            FitScope::Sample {
                id: 1,
                code: "S1".into(),
                site: state.tree.sites[0].code.clone(),
            }
        );
        assert_eq!(effects.len(), 2);
        // The refit ends before the next decision (decisions wait for a running fit).
        let job = *job;
        update(
            &mut state,
            Action::FitFinished {
                job,
                result: Err("test".into()),
            },
        );
        assert_eq!(
            update(&mut state, Action::Down),
            vec![Effect::LoadSample(5)]
        );
        assert_eq!(
            update(&mut state, Action::Dismiss),
            vec![Effect::DecideFlag {
                flag_id: 8,
                target: FlagTarget::Reading(40),
                accept: false
            }]
        );
        let effects = update(&mut state, Action::FlagChanged(Ok("dismissed".into())));
        assert!(effects.contains(&Effect::LoadReview) && effects.contains(&Effect::LoadTree));
        let effects = update(&mut state, Action::Open);
        assert_eq!(state.screen, Screen::Browse);
        assert_eq!(state.tree.current_sample().map(|s| s.id), Some(5));
        assert!(effects.is_empty(), "sample 5 is already loading");
    }

    /// Sensors of site AA: a tensiometer and a water-content probe at 10 and at 30 cm, logging
    /// for 100 days from t = 0; and one of site BB.
    fn sensors() -> Vec<SensorInfo> {
        let s = |site: &str, id: &str, kind, depth| SensorInfo {
            site: site.into(),
            sensor_id: id.into(),
            kind,
            depth_cm: depth,
            first: 0,
            last: 100 * 86_400,
            flagged: 0,
        };
        vec![
            s("AA", "T10", SensorKind::Tensiometer, 10.0),
            s("AA", "W10", SensorKind::WaterContent, 10.0),
            s("AA", "T30", SensorKind::Tensiometer, 30.0),
            s("AA", "W30", SensorKind::WaterContent, 30.0),
            s("BB", "T5", SensorKind::Tensiometer, 5.0),
        ]
    }

    fn series_of(effects: &[Effect]) -> SeriesRequest {
        match effects {
            [Effect::LoadSeries(r)] => r.clone(),
            other => panic!("expected one series load: {other:?}"),
        }
    }

    fn answer(request: &SeriesRequest) -> SeriesData {
        SeriesData {
            request: request.clone(),
            window: request.window.unwrap_or((0, 100 * 86_400)),
            columns: request.columns,
            suction: Some(SensorSeries {
                sensor_id: request.sensor_id.clone(),
                kind: SensorKind::Tensiometer,
                records: 0,
                flagged: 0,
                buckets: Vec::new(),
                mark: None,
            }),
            water: None,
        }
    }

    #[test]
    fn the_series_screen_opens_at_the_layer_depth_and_moves_through_time() {
        let mut state = loaded();
        update(&mut state, Action::Open);
        update(&mut state, Action::Down);
        update(&mut state, Action::Down);
        update(&mut state, Action::Down);
        update(&mut state, Action::Down);
        assert_eq!(state.tree.current(), Some(TreeRow::Layer(0, 1)), "AA 20-50");
        assert_eq!(
            update(&mut state, Action::ShowSeries),
            vec![Effect::LoadSensors]
        );
        assert_eq!(state.screen, Screen::Series);
        let effects = update(&mut state, Action::Loaded(Loaded::Sensors(Ok(sensors()))));
        let first = series_of(&effects);
        assert_eq!(
            (
                first.site.as_str(),
                first.sensor_id.as_str(),
                first.depth_cm
            ),
            ("AA", "T30", 30.0),
            "the tensiometer inside the layer"
        );
        assert_eq!((first.window, first.columns), (None, 200));
        // An answer for another request is dropped; the wanted one is kept.
        let mut other = first.clone();
        other.sensor_id = "W10".into();
        update(
            &mut state,
            Action::Loaded(Loaded::Series(Box::new(answer(&other)))),
        );
        assert!(state.series.data.is_none());
        update(
            &mut state,
            Action::Loaded(Loaded::Series(Box::new(answer(&first)))),
        );
        assert!(state.series.data.is_some());
        // Zoom in about the middle, pan, zoom out to everything, the whole span again.
        let zoomed = series_of(&update(&mut state, Action::ZoomIn));
        assert_eq!(zoomed.window, Some((25 * 86_400, 75 * 86_400)));
        let later = series_of(&update(&mut state, Action::Right));
        assert_eq!(later.window, Some((50 * 86_400, 100 * 86_400)));
        assert!(
            update(&mut state, Action::Right).is_empty(),
            "already at the end: the same window"
        );
        for _ in 0..20 {
            update(&mut state, Action::ZoomIn);
        }
        let window = state.series.window.expect("a window");
        assert_eq!(window.1 - window.0, MIN_WINDOW_S);
        assert_eq!(
            series_of(&update(&mut state, Action::WholeSpan)).window,
            None
        );
        // The next sensor keeps the window; a resize asks for as many columns as it has.
        let next = series_of(&update(&mut state, Action::Down));
        assert_eq!(next.sensor_id, "W30");
        let resized = series_of(&update(&mut state, Action::Resize(80, 24)));
        assert_eq!(resized.columns, 160);
        // Sites with loggers in turn; BB has one sensor.
        let bb = series_of(&update(&mut state, Action::NextSite));
        assert_eq!((bb.site.as_str(), bb.sensor_id.as_str()), ("BB", "T5"));
        assert_eq!(series_of(&update(&mut state, Action::NextSite)).site, "AA");
        update(&mut state, Action::Back);
        assert_eq!(state.screen, Screen::Browse);
    }

    #[test]
    fn a_suspect_record_shows_its_series_and_opens_the_series_screen_there() {
        let mut state = loaded();
        update(&mut state, Action::ShowReview);
        let record = ReviewItem {
            flag_id: 9,
            suspect: Suspect::Record {
                record_id: 77,
                site: "AA".into(),
                depth_cm: 10.0,
                kind: SensorKind::WaterContent,
                sensor_id: "W10".into(),
                time: 40 * 86_400,
                value: 0.31,
            },
            reason: "stuck sensor".into(),
            score: Some(2.0),
        };
        let effects = update(&mut state, Action::Loaded(Loaded::Review(Ok(vec![record]))));
        let around = series_of(&effects);
        assert_eq!(around.window, Some((37 * 86_400, 43 * 86_400)));
        assert_eq!(around.mark, Some(("W10".to_string(), 40 * 86_400)));
        assert_eq!(
            state.detail,
            Detail::Empty,
            "no sample to load for a record"
        );
        update(
            &mut state,
            Action::Loaded(Loaded::Series(Box::new(answer(&around)))),
        );
        assert!(state.review.series.is_some());
        assert_eq!(
            update(&mut state, Action::Dismiss),
            vec![Effect::DecideFlag {
                flag_id: 9,
                target: FlagTarget::LoggerRecord(77),
                accept: false
            }]
        );
        // 4 on a suspect record opens its series as Enter does (Enter: tests/tui.rs).
        assert_eq!(
            update(&mut state, Action::ShowSeries),
            vec![Effect::LoadSensors]
        );
        assert_eq!(state.screen, Screen::Series);
        let there = series_of(&update(
            &mut state,
            Action::Loaded(Loaded::Sensors(Ok(sensors()))),
        ));
        assert_eq!(there.sensor_id, "W10");
        assert_eq!(there.window, around.window);
        assert_eq!(there.mark, around.mark);
        // A flag decided on this screen reloads the sensors (and then the series).
        let effects = update(&mut state, Action::FlagChanged(Ok("accepted".into())));
        assert!(effects.contains(&Effect::LoadSensors), "{effects:?}");
    }

    #[test]
    fn help_opens_over_any_screen_and_closes_back_to_it() {
        let mut state = loaded();
        update(&mut state, Action::ShowReview);
        update(&mut state, Action::ToggleHelp);
        assert_eq!(state.screen, Screen::Help);
        update(&mut state, Action::Down);
        assert_eq!(state.help_scroll, 1);
        update(&mut state, Action::Back);
        assert_eq!(state.screen, Screen::Review);
    }
}
