//! The review screen's episode keys, kept beside `update` (which calls [`on_review`] first):
//! `a` / `d` on a grouped row decide every flag of the episode in one transaction, Enter opens
//! it to decide record by record, Esc goes back to the grouped list.

use super::action::{Action, Effect};
use super::app::AppState;
use super::update::follow_review;

/// Handle an episode key on the review screen; `None` when the key is not about an episode
/// (a single suspect, or a record of an opened episode), so the plain review keys apply.
pub(super) fn on_review(state: &mut AppState, action: &Action) -> Option<Vec<Effect>> {
    match action {
        Action::Accept | Action::Dismiss => {
            let episode = state.review.episode().filter(|e| e.len() > 1)?;
            Some(vec![Effect::DecideFlags {
                flag_ids: episode.flag_ids(),
                accept: *action == Action::Accept,
            }])
        }
        Action::Open => state.review.open_episode().then(|| follow_review(state)),
        Action::Back => state.review.close_episode().then(|| follow_review(state)),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::domain::SensorKind;
    use crate::tui::action::Loaded;
    use crate::tui::app::{ReviewEpisode, ReviewItem, Screen, Suspect};
    use crate::tui::update::update;

    fn record(flag_id: i64, hour: i64) -> ReviewItem {
        ReviewItem {
            flag_id,
            suspect: Suspect::Record {
                record_id: flag_id,
                site: "S".into(),
                depth_cm: 30.0,
                kind: SensorKind::Tensiometer,
                sensor_id: "T".into(),
                time: 1_780_000_000 + hour * 3600,
                value: 900.0,
            },
            reason: "tensiometer beyond working range".into(),
            score: Some(1.0 + hour as f64 / 10.0),
        }
    }

    #[test]
    fn one_key_decides_an_episode_and_enter_opens_it() {
        let mut state = AppState {
            size: (100, 30),
            ..AppState::default()
        };
        update(
            &mut state,
            Action::Loaded(Loaded::Tree(crate::tui::app::fixtures::tree())),
        );
        update(&mut state, Action::ShowReview);
        assert_eq!(state.screen, Screen::Review);
        let spell = ReviewEpisode {
            items: (0..4).map(|h| record(10 + h, h)).collect(),
        };
        update(
            &mut state,
            Action::Loaded(Loaded::Episodes(Ok(vec![spell]))),
        );
        assert_eq!(state.review.items.len(), 1);
        assert_eq!(state.review.items[0].flag_id, 13, "the worst stands for it");
        assert_eq!(
            update(&mut state, Action::Dismiss),
            vec![Effect::DecideFlags {
                flag_ids: vec![10, 11, 12, 13],
                accept: false
            }]
        );
        let effects = update(&mut state, Action::Open);
        assert!(matches!(effects.as_slice(), [Effect::LoadSeries(_)]));
        assert_eq!(state.review.items.len(), 4);
        // Inside, a key decides the record under the cursor only.
        match update(&mut state, Action::Accept).as_slice() {
            [
                Effect::DecideFlag {
                    flag_id: 10,
                    accept: true,
                    ..
                },
            ] => {}
            other => panic!("{other:?}"),
        }
        update(&mut state, Action::Back);
        assert_eq!(state.review.items.len(), 1);
        assert_eq!(state.screen, Screen::Review);
    }
}
