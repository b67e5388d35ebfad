//! Updates of the series screen: a logger series window asked for, panned and zoomed, and
//! the sensor it shows.

#[allow(clippy::wildcard_imports)]
// the parent's imports and helpers, as one module split by screen
use super::*;

/// Buckets across a series window: two per terminal column (braille has two dots a cell).
pub(super) fn series_columns(state: &AppState) -> usize {
    usize::from(state.size.0).max(20) * 2
}

/// Ask for the series of the sensor under the cursor (and its partner at the same depth),
/// unless it is the one already wanted (`force` asks again, after a change in the file).
pub(super) fn request_series(state: &mut AppState, force: bool) -> Vec<Effect> {
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
pub(super) fn show_series(
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
pub(super) fn series_window(state: &AppState) -> Option<(i64, i64)> {
    state
        .series
        .window
        .or_else(|| state.series.data.as_ref().map(|d| d.window))
        .or_else(|| state.series.depth_span())
}

pub(super) fn on_series(state: &mut AppState, action: &Action) -> Vec<Effect> {
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

/// Where the series screen lands: the depth of the layer (or the sample's layer) under the
/// tree cursor, or of the sample shown.
pub(super) fn series_pick(state: &AppState) -> Option<SensorPick> {
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
