//! The review queue's episodes on screen: consecutive suspect records of one sensor with the
//! same kind of reason, grouped by `analysis::episodes` when the queue loads. The list shows
//! one row per episode (its worst record); Enter opens an episode to decide record by record.

use super::{ReviewItem, ReviewState, Suspect};

/// One row of the grouped queue: its flags (a logger episode's in time order).
#[derive(Debug, Clone, PartialEq)]
pub struct ReviewEpisode {
    /// The suspects, at least one.
    pub items: Vec<ReviewItem>,
}

impl ReviewEpisode {
    /// An episode of one suspect.
    pub fn single(item: ReviewItem) -> Self {
        Self { items: vec![item] }
    }

    /// The worst suspect (highest score; the first on a tie).
    pub fn worst(&self) -> Option<&ReviewItem> {
        self.items.iter().reduce(|best, i| {
            if i.score.unwrap_or(f64::NEG_INFINITY) > best.score.unwrap_or(f64::NEG_INFINITY) {
                i
            } else {
                best
            }
        })
    }

    /// How many suspects it holds.
    pub fn len(&self) -> usize {
        self.items.len()
    }

    /// True for an episode without suspects (never built).
    pub fn is_empty(&self) -> bool {
        self.items.is_empty()
    }

    /// Every flag id.
    pub fn flag_ids(&self) -> Vec<i64> {
        self.items.iter().map(|i| i.flag_id).collect()
    }

    /// First and last record time (seconds since 1970 UTC) of a logger episode.
    pub fn span(&self) -> Option<(i64, i64)> {
        let time = |i: &ReviewItem| match i.suspect {
            Suspect::Record { time, .. } => Some(time),
            Suspect::Reading { .. } => None,
        };
        Some((time(self.items.first()?)?, time(self.items.last()?)?))
    }
}

impl ReviewState {
    /// Take a freshly loaded queue. An opened episode stays open when it is still there (found
    /// by any of its flags), with the cursor on the same flag where it can be.
    pub fn set_episodes(&mut self, episodes: Vec<ReviewEpisode>) {
        let opened_flags = self
            .opened
            .and_then(|i| self.episodes.get(i))
            .map(ReviewEpisode::flag_ids);
        let at_flag = self.items.get(self.cursor).map(|i| i.flag_id);
        self.episodes = episodes;
        self.opened = opened_flags.and_then(|flags| {
            self.episodes
                .iter()
                .position(|e| e.items.iter().any(|i| flags.contains(&i.flag_id)))
        });
        self.items = match self.opened {
            Some(i) => self.episodes[i].items.clone(),
            None => self
                .episodes
                .iter()
                .filter_map(|e| e.worst().cloned())
                .collect(),
        };
        self.cursor = at_flag
            .and_then(|f| self.items.iter().position(|i| i.flag_id == f))
            .unwrap_or(self.cursor)
            .min(self.items.len().saturating_sub(1));
    }

    /// The episode under the cursor of the grouped list (`None` while one is open).
    pub fn episode(&self) -> Option<&ReviewEpisode> {
        match self.opened {
            Some(_) => None,
            None => self.episodes.get(self.cursor),
        }
    }

    /// The episode opened for deciding record by record.
    pub fn opened_episode(&self) -> Option<&ReviewEpisode> {
        self.episodes.get(self.opened?)
    }

    /// Open the episode under the cursor (list its records); false when it holds one only.
    pub fn open_episode(&mut self) -> bool {
        let Some(e) = self.episode().filter(|e| e.len() > 1) else {
            return false;
        };
        self.items = e.items.clone();
        self.opened = Some(self.cursor);
        self.cursor = 0;
        true
    }

    /// Back to the grouped list, the cursor on the episode that was open; false when none was.
    pub fn close_episode(&mut self) -> bool {
        let Some(at) = self.opened.take() else {
            return false;
        };
        self.items = self
            .episodes
            .iter()
            .filter_map(|e| e.worst().cloned())
            .collect();
        self.cursor = at.min(self.items.len().saturating_sub(1));
        true
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::domain::SensorKind;

    fn record(flag_id: i64, time: i64, score: f64) -> ReviewItem {
        ReviewItem {
            flag_id,
            suspect: Suspect::Record {
                record_id: flag_id + 100,
                site: "S".into(),
                depth_cm: 30.0,
                kind: SensorKind::Tensiometer,
                sensor_id: "T".into(),
                time,
                value: 900.0,
            },
            reason: "tensiometer beyond working range".into(),
            score: Some(score),
        }
    }

    #[test]
    fn episodes_open_close_and_survive_a_reload() {
        let spell = ReviewEpisode {
            items: vec![
                record(1, 0, 1.1),
                record(2, 3600, 1.5),
                record(3, 7200, 1.2),
            ],
        };
        let lone = ReviewEpisode::single(record(9, 99_000, 2.0));
        let mut r = ReviewState::default();
        r.set_episodes(vec![lone.clone(), spell.clone()]);
        assert_eq!(
            r.items.iter().map(|i| i.flag_id).collect::<Vec<_>>(),
            vec![9, 2]
        );
        assert_eq!(spell.span(), Some((0, 7200)));
        assert!(!r.open_episode(), "a single suspect is not opened");
        r.cursor = 1;
        assert_eq!(r.episode().map(ReviewEpisode::len), Some(3));
        assert!(r.open_episode());
        assert_eq!(r.items.len(), 3);
        assert_eq!(r.cursor, 0);
        assert!(r.episode().is_none());
        // A reload after record 1 was decided keeps the episode open, the cursor on its flag.
        r.cursor = 1;
        let rest = ReviewEpisode {
            items: vec![record(2, 3600, 1.5), record(3, 7200, 1.2)],
        };
        r.set_episodes(vec![lone, rest]);
        assert_eq!(r.opened, Some(1));
        assert_eq!(r.items[r.cursor].flag_id, 2);
        assert!(r.close_episode());
        assert_eq!(r.cursor, 1);
        assert!(!r.close_episode());
    }
}
