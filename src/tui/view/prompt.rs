//! Pop-ups over the screen: the flag reason prompt and the quit question.

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Clear, Paragraph, Widget, Wrap};

use super::super::app::{AppState, Input};
use super::{framed, suction_text, theta_text};
use crate::model::domain::FlagTarget;
use crate::store::conductivity::Where;

/// The overlay, drawn last.
pub struct Overlay<'a> {
    /// The state.
    pub state: &'a AppState,
}

/// A box of `width` x `height` centred in `area`.
fn centred(area: Rect, width: u16, height: u16) -> Rect {
    let width = width.min(area.width);
    let height = height.min(area.height);
    Rect {
        x: area.x + (area.width - width) / 2,
        y: area.y + (area.height - height) / 2,
        width,
        height,
    }
}

impl Widget for Overlay<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let state = self.state;
        let theme = state.theme;
        let (title, lines): (String, Vec<Line<'static>>) = match &state.input {
            Input::Reason { target, flag, text } => {
                let what = flag_subject(state, *target);
                let joint = matches!(target, FlagTarget::ConductivityReading(_));
                let (title, label, hint) = match (*flag, joint) {
                    (true, false) => (
                        format!("Flag {what}"),
                        "reason: ",
                        "It is left out of fits until the flag is cleared. Enter saves, Esc abandons.",
                    ),
                    (true, true) => (
                        format!("Flag {what}"),
                        "reason: ",
                        "It is left out of joint fits until the flag is cleared. Enter saves, Esc abandons.",
                    ),
                    (false, false) => (
                        format!("Clear the flag on {what}"),
                        "note (optional): ",
                        "Fits use it again. Enter clears, Esc abandons.",
                    ),
                    (false, true) => (
                        format!("Clear the flag on {what}"),
                        "note (optional): ",
                        "Joint fits use it again. Enter clears, Esc abandons.",
                    ),
                };
                (
                    title,
                    vec![
                        Line::from(vec![
                            Span::styled(label, theme.key()),
                            Span::raw(text.clone()),
                            Span::raw("█"),
                        ]),
                        Line::from(""),
                        Line::from(Span::styled(hint, theme.dim())),
                    ],
                )
            }
            Input::ConfirmQuit => {
                let job = state
                    .jobs
                    .running
                    .as_ref()
                    .map_or_else(|| "a fit".to_string(), |j| j.request.to_string());
                (
                    "Quit?".to_string(),
                    vec![
                        Line::from(format!("{job} is still running.")),
                        Line::from("Quitting abandons it: nothing of it is written."),
                        Line::from(""),
                        Line::from(vec![
                            Span::styled("y", theme.key()),
                            Span::raw(" quit   "),
                            Span::styled("n", theme.key()),
                            Span::raw(" keep working"),
                        ]),
                    ],
                )
            }
            _ => return,
        };
        let width = area.width.saturating_sub(8).min(72);
        let popup = centred(area, width, lines.len() as u16 + 3);
        Clear.render(popup, buf);
        let inner = framed(title, true, theme, popup, buf);
        Paragraph::new(lines)
            .wrap(Wrap { trim: false })
            .render(inner, buf);
    }
}

/// What a flag prompt is about: the reading with its suction and water content, or the
/// conductivity reading with where it was measured and its K.
fn flag_subject(state: &AppState, target: FlagTarget) -> String {
    let detail = state.detail.ready();
    match target {
        FlagTarget::Reading(id) => detail
            .and_then(|d| d.readings.iter().find(|r| r.id == id))
            .map_or_else(
                || format!("reading {id}"),
                |r| {
                    format!(
                        "reading {} (h {} {}, θ {})",
                        r.id,
                        suction_text(r.h_cm, state.units),
                        state.units.symbol(),
                        theta_text(r.theta)
                    )
                },
            ),
        FlagTarget::ConductivityReading(id) => detail
            .and_then(|d| d.conductivity.as_ref())
            .and_then(|c| c.readings.iter().find(|k| k.id == id))
            .map_or_else(
                || format!("conductivity reading {id}"),
                |k| {
                    let at = match k.at {
                        Where::Suction(h) => {
                            format!(
                                "h {} {}",
                                suction_text(h, state.units),
                                state.units.symbol()
                            )
                        }
                        Where::Water(t) => format!("θ {}", theta_text(t)),
                    };
                    format!(
                        "conductivity reading {id} ({at}, K {} cm/day)",
                        crate::model::number::significant(k.k_cm_per_day, 3).unwrap_or_default()
                    )
                },
            ),
        FlagTarget::LoggerRecord(id) => format!("logger record {id}"),
    }
}
