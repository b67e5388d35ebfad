//! The header (campaign, screens), the status line (job progress, messages, settings) and the
//! footer (key hints generated from the key table).

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::text::{Line, Span};
use ratatui::widgets::Widget;

use crate::analysis::ModelChoice;

use super::super::app::{AppState, Screen};
use super::super::keymap::{KeyTable, Mode};
use super::fit_width;
use crate::model::text::shown;

/// The header line.
pub struct Header<'a> {
    /// The state.
    pub state: &'a AppState,
}

impl Widget for Header<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let state = self.state;
        let theme = state.theme;
        let tabs = [
            (Screen::Browse, "1 Browse"),
            (Screen::Depth, "2 Depth"),
            (Screen::Review, "3 Review"),
            (Screen::Series, "4 Series"),
            (Screen::Help, "? Help"),
        ];
        let mut right: Vec<Span<'static>> = Vec::new();
        for (screen, label) in tabs {
            if screen == state.screen {
                right.push(Span::styled(format!("[{label}]"), theme.active_tab()));
            } else {
                right.push(Span::raw(format!(" {label} ")));
            }
        }
        let right_width: usize = right.iter().map(|s| s.content.chars().count()).sum();
        let left = fit_width(
            &format!(
                " porewise · {} · {}",
                shown(&state.campaign),
                shown(&state.file)
            ),
            usize::from(area.width).saturating_sub(right_width + 1),
        );
        let pad = usize::from(area.width).saturating_sub(left.chars().count() + right_width);
        let mut spans = vec![
            Span::styled(left, theme.heading()),
            Span::raw(" ".repeat(pad)),
        ];
        spans.extend(right);
        Line::from(spans).render(area, buf);
    }
}

/// The status line.
pub struct StatusLine<'a> {
    /// The state.
    pub state: &'a AppState,
}

const SPINNER: [&str; 4] = ["◐", "◓", "◑", "◒"];

impl Widget for StatusLine<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let state = self.state;
        let theme = state.theme;
        let model = match state.choice {
            ModelChoice::Auto => "auto".to_string(),
            ModelChoice::One(kind) => kind.id().to_string(),
        };
        let settings = format!(
            " {} · refit {} · band {} ",
            state.units.symbol(),
            model,
            if state.band { "on" } else { "off" }
        );
        let mut spans: Vec<Span<'static>> = Vec::new();
        if let Some(job) = &state.jobs.running {
            let spin = SPINNER[(state.ticks % SPINNER.len() as u64) as usize];
            let progress = if job.total > 0 {
                format!(" {}/{}", job.done, job.total)
            } else {
                String::new()
            };
            let waiting = if state.jobs.pending.is_some() {
                " (+1 queued)"
            } else {
                ""
            };
            spans.push(Span::styled(
                format!(" {spin} fitting {}{progress}{waiting} │", job.request),
                theme.key(),
            ));
        }
        let used: usize = spans.iter().map(|s| s.content.chars().count()).sum();
        let room = usize::from(area.width).saturating_sub(used + settings.chars().count() + 1);
        let text = fit_width(&format!(" {}", state.status.text), room);
        let pad = room.saturating_sub(text.chars().count());
        spans.push(Span::styled(text, theme.tone(state.status.tone)));
        spans.push(Span::raw(" ".repeat(pad + 1)));
        spans.push(Span::styled(settings, theme.dim()));
        Line::from(spans).render(area, buf);
    }
}

/// The footer of key hints for the current mode.
pub struct Footer<'a> {
    /// The state.
    pub state: &'a AppState,
    /// The key table (the same one that handles the keys).
    pub keys: &'a KeyTable,
}

impl Widget for Footer<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let theme = self.state.theme;
        let mut spans = vec![Span::raw(" ")];
        let mut used = 1;
        for (key, label) in self.keys.footer(Mode::of(self.state)) {
            let width = key.chars().count() + label.chars().count() + 3;
            if used + width > usize::from(area.width) {
                break;
            }
            used += width;
            spans.push(Span::styled(key, theme.key()));
            spans.push(Span::raw(format!(" {label}  ")));
        }
        Line::from(spans).render(area, buf);
    }
}
