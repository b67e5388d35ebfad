//! The readings table: the point's glyph (branch or excluded, as on the curve), suction,
//! water content, method, residual, studentized residual, flag and reason; the row under the
//! cursor is the `◆` on the curve.

use ratatui::buffer::Buffer;
use ratatui::layout::{Constraint, Rect};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Paragraph, Row, Widget};

use super::super::app::conductivity::KReadingView;
use super::super::app::{AppState, Detail, ReadingView};
use super::conductivity::MEASURED;
use super::curve::EXCLUDED;
use super::curve::point_glyph;
use super::{cursor_row, framed, render_table, scroll_offset, suction_text, theta_text};
use crate::model::text::shown;
use crate::store::conductivity::Where;

/// The readings pane.
pub struct ReadingsPane<'a> {
    /// The state.
    pub state: &'a AppState,
    /// Whether it has focus.
    pub focused: bool,
}

/// `+0.012`, or empty.
fn signed(v: Option<f64>, decimals: usize) -> String {
    v.filter(|v| v.is_finite())
        .map(|v| format!("{v:+.decimals$}"))
        .unwrap_or_default()
}

/// The flag column: status, origin and reason.
pub fn flag_text(r: &ReadingView) -> String {
    match &r.flag {
        None => String::new(),
        Some(f) => format!("{} {}: {}", f.status, f.origin, shown(&f.reason)),
    }
}

impl Widget for ReadingsPane<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let state = self.state;
        let theme = state.theme;
        let Detail::Ready(d) = &state.detail else {
            let inner = framed("Readings", self.focused, theme, area, buf);
            Paragraph::new("No sample open.").render(inner, buf);
            return;
        };
        if let Some(k) = state.k_readings() {
            render_k(self.state, self.focused, &d.code, k, area, buf);
            return;
        }
        let excluded = d.readings.iter().filter(|r| r.excluded).count();
        let title = format!(
            "Readings · {} · {} used, {} excluded{}",
            shown(&d.code),
            d.readings.len() - excluded,
            excluded,
            if state.focus == super::super::app::Pane::Readings {
                " · t flags"
            } else {
                ""
            }
        );
        let inner = framed(title, self.focused, theme, area, buf);
        if inner.height < 2 {
            return;
        }
        let header = Row::new(vec![
            " ".to_string(),
            format!("h {}", state.units.symbol()),
            "θ".to_string(),
            "method".to_string(),
            "resid".to_string(),
            "stud".to_string(),
            "flag".to_string(),
        ])
        .style(theme.heading());
        let height = usize::from(inner.height - 1);
        let offset = scroll_offset(state.reading, d.readings.len(), height);
        let rows = d
            .readings
            .iter()
            .enumerate()
            .skip(offset)
            .take(height)
            .map(|(i, r)| {
                let glyph = point_glyph(r);
                let row = Row::new(vec![
                    Line::from(Span::styled(
                        glyph,
                        if r.excluded {
                            theme.excluded_point()
                        } else {
                            theme.text()
                        },
                    )),
                    Line::from(suction_text(r.h_cm, state.units)),
                    Line::from(theta_text(r.theta)),
                    Line::from(shown(r.method.as_deref().unwrap_or_default()).into_owned()),
                    Line::from(signed(r.residual, 3)),
                    Line::from(signed(r.studentized, 2)),
                    Line::from(Span::styled(flag_text(r), theme.flag())),
                ]);
                cursor_row(row, i == state.reading, self.focused, theme)
            });
        let widths = [
            Constraint::Length(1),
            Constraint::Length(7),
            Constraint::Length(5),
            Constraint::Length(if inner.width >= 70 { 14 } else { 9 }),
            Constraint::Length(6),
            Constraint::Length(5),
            Constraint::Fill(1),
        ];
        render_table(header, rows, &widths, inner, buf);
    }
}

/// The readings pane in the K view: each measured K (suction or water content, K in cm/day,
/// method, flag); `t` flags the one under the cursor out of joint fits.
fn render_k(
    state: &AppState,
    focused: bool,
    code: &str,
    k: &[KReadingView],
    area: Rect,
    buf: &mut Buffer,
) {
    let theme = state.theme;
    let excluded = k.iter().filter(|r| r.excluded).count();
    let title = format!(
        "Measured K · {} · {} used, {} flagged{}",
        shown(code),
        k.len() - excluded,
        excluded,
        if state.focus == super::super::app::Pane::Readings {
            " · t flags"
        } else {
            ""
        }
    );
    let inner = framed(title, focused, theme, area, buf);
    if inner.height < 2 {
        return;
    }
    if k.is_empty() {
        Paragraph::new("No measured conductivity (porewise import conductivity).")
            .render(inner, buf);
        return;
    }
    let header = Row::new(vec![
        " ".to_string(),
        format!("h {}", state.units.symbol()),
        "θ".to_string(),
        "K cm/day".to_string(),
        "method".to_string(),
        "flag".to_string(),
    ])
    .style(theme.heading());
    let height = usize::from(inner.height - 1);
    let offset = scroll_offset(state.reading, k.len(), height);
    let rows = k
        .iter()
        .enumerate()
        .skip(offset)
        .take(height)
        .map(|(i, r)| {
            let (h, theta) = match r.at {
                Where::Suction(h) => (suction_text(h, state.units), String::new()),
                Where::Water(t) => (String::new(), theta_text(t)),
            };
            let row = Row::new(vec![
                Line::from(if r.excluded {
                    Span::styled(EXCLUDED, theme.excluded_point())
                } else {
                    Span::styled(MEASURED, theme.point())
                }),
                Line::from(h),
                Line::from(theta),
                Line::from(
                    crate::model::number::significant(r.k_cm_per_day, 3).unwrap_or_default(),
                ),
                Line::from(shown(r.method.as_deref().unwrap_or_default()).into_owned()),
                Line::from(Span::styled(
                    if r.excluded {
                        "excluded from joint fits"
                    } else {
                        ""
                    },
                    theme.flag(),
                )),
            ]);
            cursor_row(row, i == state.reading, focused, theme)
        });
    let widths = [
        Constraint::Length(1),
        Constraint::Length(7),
        Constraint::Length(5),
        Constraint::Length(9),
        Constraint::Length(if inner.width >= 70 { 14 } else { 9 }),
        Constraint::Fill(1),
    ];
    render_table(header, rows, &widths, inner, buf);
}
