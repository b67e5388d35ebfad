//! Updates of the depth view: a site's layers and samples, the root-zone depth, opening a
//! sample in the browser.

#[allow(clippy::wildcard_imports)]
// the parent's imports and helpers, as one module split by screen
use super::*;

pub(super) fn show_depth(state: &mut AppState, site: String) -> Vec<Effect> {
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

pub(super) fn on_depth(state: &mut AppState, action: &Action) -> Vec<Effect> {
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

pub(super) fn open_in_browser(state: &mut AppState, sample_id: i64) -> Vec<Effect> {
    state.screen = Screen::Browse;
    state.focus = Pane::Tree;
    if !state.tree.filter.is_empty() && state.tree.sample(sample_id).is_some() {
        state.tree.filter.clear();
    }
    state.tree.reveal(sample_id);
    select_sample(state, sample_id)
}
