//! The review queue: suspected outliers across the campaign, worst first, with the suspect's
//! sample curve beside it (the reading under review is the `◆`).

use ratatui::buffer::Buffer;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Paragraph, Row, Widget, Wrap};

use super::super::app::{AppState, Detail};
use super::curve::CurvePlot;
use super::{
    cursor_row, framed, num, opt_num, render_table, scroll_offset, suction_text, theta_text,
};

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
        let inner = framed(
            format!("Review · {} suspected, worst first", review.items.len()),
            true,
            theme,
            list_area,
            buf,
        );
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
                "sample".to_string(),
                format!("h {}", state.units.symbol()),
                "θ".to_string(),
            ])
            .style(theme.heading());
            let height = usize::from(inner.height - 1);
            let offset = scroll_offset(review.cursor, review.items.len(), height);
            let rows = review
                .items
                .iter()
                .enumerate()
                .skip(offset)
                .take(height)
                .map(|(i, item)| {
                    let row = Row::new(vec![
                        opt_num(item.score, 3),
                        item.sample.clone(),
                        suction_text(item.h_cm, state.units),
                        theta_text(item.theta),
                    ]);
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
        let title = match (&state.detail, state.review_item()) {
            (Detail::Ready(d), Some(_)) => format!("Curve · {}", d.code),
            _ => "Curve".to_string(),
        };
        let inner = framed(title, false, theme, curve_area, buf);
        if let (Detail::Ready(detail), Some(item)) = (&state.detail, state.review_item()) {
            let selected = detail.readings.iter().position(|r| r.id == item.reading_id);
            CurvePlot {
                state,
                detail,
                selected,
            }
            .render(inner, buf);
        }
        let inner = framed("Suspect", false, theme, detail_area, buf);
        if let Some(item) = state.review_item() {
            let lines = vec![
                Line::from(vec![
                    Span::styled(item.sample.clone(), theme.heading()),
                    Span::raw(format!(
                        " · reading {} · h {} {} · θ {} · score {}",
                        item.reading_id,
                        suction_text(item.h_cm, state.units),
                        state.units.symbol(),
                        theta_text(item.theta),
                        item.score.map_or_else(|| "–".to_string(), |s| num(s, 3))
                    )),
                ]),
                Line::from(item.reason.clone()),
                Line::from(Span::styled(
                    "a accepts (left out of fits) · d dismisses (kept) · Enter opens the sample",
                    theme.dim(),
                )),
            ];
            Paragraph::new(lines)
                .wrap(Wrap { trim: true })
                .render(inner, buf);
        }
    }
}
