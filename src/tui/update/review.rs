//! Updates of the review queue: the selected suspect or episode, accepting and dismissing.

#[allow(clippy::wildcard_imports)]
// the parent's imports and helpers, as one module split by screen
use super::*;

/// After the review cursor moved: show the item's sample with its reading highlighted, or the
/// series around a suspect record.
pub(crate) fn follow_review(state: &mut AppState) -> Vec<Effect> {
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

pub(super) fn on_review(state: &mut AppState, action: &Action) -> Vec<Effect> {
    let len = state.review.items.len();
    if let Some(cursor) = moved(state, state.review.cursor, len, action) {
        state.review.cursor = cursor;
        return follow_review(state);
    }
    if let Some(effects) = crate::tui::episodes::on_review(state, action) {
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
