//! The review queue: suspected outliers across the campaign (lab and field readings, logger
//! records), worst first, with the suspect's sample curve beside it (the reading under review
//! is the `◆`), or for a logger record the series around its time (the record is the `◆`).

use ratatui::buffer::Buffer;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Paragraph, Row, Widget, Wrap};

use crate::model::domain::SensorKind;

use super::super::app::{AppState, Detail, ReviewEpisode, ReviewItem, Suspect};
use super::curve::CurvePlot;
use super::series::{SeriesPlot, date_text, time_text};
use super::{
    cursor_row, framed, num, opt_num, render_table, scroll_offset, suction_text, theta_text,
};
use crate::model::text::shown;

/// The review screen.
pub struct ReviewScreen<'a> {
    /// The state.
    pub state: &'a AppState,
}

impl Widget for ReviewScreen<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let state = self.state;
        let theme = state.theme;
        let list_width = (area.width * 9 / 20).clamp(34, 70);
        let [list_area, right] =
            Layout::horizontal([Constraint::Length(list_width), Constraint::Fill(1)]).areas(area);
        let review = &state.review;
        let suspects: usize = review.episodes.iter().map(ReviewEpisode::len).sum();
        let title = match review.opened_episode() {
            Some(e) => format!("Review · episode of {} · Esc back", e.len()),
            None if suspects > review.items.len() => format!(
                "Review · {} episodes ({suspects} flags)",
                review.items.len()
            ),
            None => format!("Review · {} suspected, worst first", review.items.len()),
        };
        let inner = framed(title, true, theme, list_area, buf);
        if let Some(why) = &review.unavailable {
            Paragraph::new(why.clone())
                .wrap(Wrap { trim: true })
                .render(inner, buf);
        } else if !review.loaded {
            Paragraph::new("loading…").render(inner, buf);
        } else if review.items.is_empty() {
            Paragraph::new("Nothing to review: no open suggestions.")
                .wrap(Wrap { trim: true })
                .render(inner, buf);
        } else if inner.height >= 2 {
            let header = Row::new(vec![
                "score".to_string(),
                "suspect".to_string(),
                format!("h {}", state.units.symbol()),
                "θ".to_string(),
            ])
            .style(theme.heading());
            let height = usize::from(inner.height - 1);
            let offset = scroll_offset(review.cursor, review.items.len(), height);
            let room = usize::from(inner.width).saturating_sub(5 + 6 + 5 + 3);
            let rows = review
                .items
                .iter()
                .enumerate()
                .skip(offset)
                .take(height)
                .map(|(i, item)| {
                    let group = match review.opened {
                        None => review.episodes.get(i).filter(|e| e.len() > 1),
                        Some(_) => None,
                    };
                    let [mut what, h, theta] = columns(item, state, room);
                    if let Some(e) = group {
                        what = episode_text(e, room);
                    }
                    let row = Row::new(vec![opt_num(item.score, 3), what, h, theta]);
                    cursor_row(row, i == review.cursor, true, theme)
                });
            let widths = [
                Constraint::Length(5),
                Constraint::Fill(1),
                Constraint::Length(6),
                Constraint::Length(5),
            ];
            render_table(header, rows, &widths, inner, buf);
        }
        let [curve_area, detail_area] =
            Layout::vertical([Constraint::Fill(1), Constraint::Length(7)]).areas(right);
        match state.review_item().map(|i| &i.suspect) {
            Some(Suspect::Record {
                site,
                depth_cm,
                sensor_id,
                time,
                ..
            }) => {
                let title = format!(
                    "Series · {site} {sensor_id} · {} cm · around {}",
                    num(*depth_cm, 4),
                    date_text(*time)
                );
                let inner = framed(title, false, theme, curve_area, buf);
                let loaded = review
                    .series
                    .as_ref()
                    .filter(|d| Some(&d.request) == review.series_wanted.as_ref());
                match loaded {
                    Some(data) => SeriesPlot { state, data }.render(inner, buf),
                    None => Paragraph::new("loading…").render(inner, buf),
                }
            }
            reading => {
                let title = match (&state.detail, reading) {
                    (Detail::Ready(d), Some(_)) => format!("Curve · {}", shown(&d.code)),
                    _ => "Curve".to_string(),
                };
                let inner = framed(title, false, theme, curve_area, buf);
                if let (Detail::Ready(detail), Some(item)) = (&state.detail, state.review_item()) {
                    let selected = detail
                        .readings
                        .iter()
                        .position(|r| Some(r.id) == item.reading_id());
                    CurvePlot {
                        state,
                        detail,
                        selected,
                    }
                    .render(inner, buf);
                }
            }
        }
        let inner = framed("Suspect", false, theme, detail_area, buf);
        if let Some(e) = review.episode().filter(|e| e.len() > 1) {
            Paragraph::new(episode_lines(e, state))
                .wrap(Wrap { trim: true })
                .render(inner, buf);
        } else if let Some(item) = state.review_item() {
            Paragraph::new(suspect_lines(item, state))
                .wrap(Wrap { trim: true })
                .render(inner, buf);
        }
    }
}

/// An episode's list text: sensor, time span and number of records, shortened to `room`.
fn episode_text(e: &ReviewEpisode, room: usize) -> String {
    let sensor = match e.worst().map(|i| &i.suspect) {
        Some(Suspect::Record { sensor_id, .. }) => shown(sensor_id).into_owned(),
        _ => String::new(),
    };
    let at = |t: i64, f: &str| {
        chrono::DateTime::from_timestamp(t, 0)
            .map(|t| t.format(f).to_string())
            .unwrap_or_default()
    };
    let n = e.len();
    let Some((from, to)) = e.span() else {
        return format!("{sensor} ×{n}");
    };
    let span = if at(from, "%F") == at(to, "%F") {
        format!("{} {}–{}h", at(from, "%m-%d"), at(from, "%H"), at(to, "%H"))
    } else {
        format!("{}h–{}h", at(from, "%m-%d %H"), at(to, "%d %H"))
    };
    let full = format!("{sensor} {span} ×{n}");
    if full.chars().count() <= room {
        full
    } else {
        format!("{sensor} {} ×{n}", at(from, "%m-%d"))
    }
}

/// The suspect box of an episode: sensor, count, span, worst value and score, the worst
/// record's reason and the keys.
fn episode_lines(e: &ReviewEpisode, state: &AppState) -> Vec<Line<'static>> {
    let theme = state.theme;
    let Some(worst) = e.worst() else {
        return Vec::new();
    };
    let [what, h, theta] = columns(worst, state, usize::MAX);
    let value = if h.is_empty() {
        format!("θ {theta}")
    } else {
        format!("h {h} {}", state.units.symbol())
    };
    let score = worst.score.map_or_else(|| "–".to_string(), |s| num(s, 3));
    let head = what.split(' ').take(2).collect::<Vec<_>>().join(" ");
    let span = e
        .span()
        .map(|(a, b)| format!(" · {} to {}", time_text(a), time_text(b)))
        .unwrap_or_default();
    vec![
        Line::from(vec![
            Span::styled(head, theme.heading()),
            Span::raw(format!(
                " · {} records{span} · worst {value} · score {score}",
                e.len()
            )),
        ]),
        Line::from(shown(&worst.reason).into_owned()),
        Line::from(Span::styled(
            format!(
                "a accepts all {n} · d dismisses all {n} · Enter opens them one by one",
                n = e.len()
            ),
            theme.dim(),
        )),
    ]
}

/// A suspect's list columns: what it is, its suction and its water content.
fn columns(item: &ReviewItem, state: &AppState, room: usize) -> [String; 3] {
    match &item.suspect {
        Suspect::Reading {
            sample,
            h_cm,
            theta,
            ..
        } => [
            shown(sample).into_owned(),
            suction_text(*h_cm, state.units),
            theta_text(*theta),
        ],
        Suspect::Record {
            site,
            kind,
            sensor_id,
            time,
            value,
            ..
        } => {
            let when = chrono::DateTime::from_timestamp(*time, 0)
                .map(|t| t.format("%m-%d %H:%M").to_string())
                .unwrap_or_default();
            let (site, sensor_id) = (shown(site), shown(sensor_id));
            let full = format!("{site} {sensor_id} {when}");
            let what = if full.chars().count() <= room {
                full
            } else {
                format!("{sensor_id} {when}")
            };
            match kind {
                SensorKind::Tensiometer => [what, suction_text(*value, state.units), String::new()],
                SensorKind::WaterContent => [what, String::new(), theta_text(*value)],
            }
        }
    }
}

/// The suspect box: what and where, the value, the reason and the keys.
fn suspect_lines(item: &ReviewItem, state: &AppState) -> Vec<Line<'static>> {
    let theme = state.theme;
    let score = item.score.map_or_else(|| "–".to_string(), |s| num(s, 3));
    let (head, rest, keys) = match &item.suspect {
        Suspect::Reading {
            reading_id,
            sample,
            h_cm,
            theta,
            ..
        } => (
            shown(sample).into_owned(),
            format!(
                " · reading {reading_id} · h {} {} · θ {} · score {score}",
                suction_text(*h_cm, state.units),
                state.units.symbol(),
                theta_text(*theta),
            ),
            "a accepts (left out of fits) · d dismisses (kept) · Enter opens the sample",
        ),
        Suspect::Record {
            site,
            depth_cm,
            kind,
            sensor_id,
            time,
            value,
            ..
        } => {
            let value = match kind {
                SensorKind::Tensiometer => format!(
                    "h {} {}",
                    suction_text(*value, state.units),
                    state.units.symbol()
                ),
                SensorKind::WaterContent => format!("θ {}", theta_text(*value)),
            };
            (
                format!("{} {}", shown(site), shown(sensor_id)),
                format!(
                    " · {} · {} cm · {} · {value} · score {score}",
                    kind.as_str().replace('_', " "),
                    num(*depth_cm, 4),
                    time_text(*time),
                ),
                "a accepts (left out of pairing) · d dismisses · Enter opens the series",
            )
        }
    };
    vec![
        Line::from(vec![Span::styled(head, theme.heading()), Span::raw(rest)]),
        Line::from(shown(&item.reason).into_owned()),
        Line::from(Span::styled(keys, theme.dim())),
    ]
}
