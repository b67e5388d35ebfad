//! The help screen: every key of the key table (the one the key handling uses), section by
//! section, and what the glyphs mean. Flows into two columns on wide terminals.

use ratatui::buffer::Buffer;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Paragraph, Widget};

use super::super::app::{AppState, FitTag};
use super::super::keymap::KeyTable;
use super::framed;

/// The help screen.
pub struct HelpScreen<'a> {
    /// The state.
    pub state: &'a AppState,
    /// The key table.
    pub keys: &'a KeyTable,
}

/// Width of the key column.
const KEY_WIDTH: usize = 14;

/// Break `text` into pieces of at most `width` characters at spaces.
fn wrap(text: &str, width: usize) -> Vec<String> {
    let mut out = Vec::new();
    let mut line = String::new();
    for word in text.split(' ') {
        if !line.is_empty() && line.chars().count() + 1 + word.chars().count() > width {
            out.push(std::mem::take(&mut line));
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(word);
    }
    if !line.is_empty() {
        out.push(line);
    }
    out
}

impl HelpScreen<'_> {
    /// Every help line for columns `width` wide.
    pub fn lines(&self, width: usize) -> Vec<Line<'static>> {
        let theme = self.state.theme;
        let text_width = width.saturating_sub(KEY_WIDTH + 1).max(10);
        let mut lines = vec![
            Line::from(Span::styled("Signs", theme.heading())),
            Line::from(vec![
                Span::styled(FitTag::Current.glyph(), theme.fit_tag(FitTag::Current)),
                Span::raw(" current fit  "),
                Span::styled(FitTag::Stale.glyph(), theme.fit_tag(FitTag::Stale)),
                Span::raw(" stale  "),
                Span::styled(FitTag::Failed.glyph(), theme.fit_tag(FitTag::Failed)),
                Span::raw(" failed  "),
                Span::raw(FitTag::None.glyph()),
                Span::raw(" not fitted"),
            ]),
            Line::from(vec![
                Span::styled("⚑", theme.flag()),
                Span::raw(" flagged readings  ┆ FC, PWP  ⠁⠂ 95 % band"),
            ]),
            Line::from("o used  ▼ drying  ▲ wetting  x excluded  ◆ selected reading"),
            Line::from(vec![
                Span::styled(super::FIELD_TAG, theme.field_tag()),
                Span::raw(" field pairing (in place; dotted in the depth view)  ⡇ logger series"),
            ]),
            Line::from(""),
        ];
        for (title, entries) in self.keys.help_sections() {
            lines.push(Line::from(Span::styled(title, theme.heading())));
            for (keys, help) in entries {
                for (i, piece) in wrap(help, text_width).into_iter().enumerate() {
                    let key = if i == 0 { keys.clone() } else { String::new() };
                    lines.push(Line::from(vec![
                        Span::styled(format!("{key:<KEY_WIDTH$} "), theme.key()),
                        Span::raw(piece),
                    ]));
                }
            }
            lines.push(Line::from(""));
        }
        lines
    }
}

impl Widget for HelpScreen<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let theme = self.state.theme;
        let inner = framed("Keys · Esc or ? closes", true, theme, area, buf);
        let columns: u16 = if inner.width >= 96 { 2 } else { 1 };
        let areas = Layout::horizontal(vec![Constraint::Fill(1); usize::from(columns)])
            .spacing(2)
            .split(inner);
        let width = usize::from(areas[0].width);
        let lines = self.lines(width);
        let height = usize::from(inner.height);
        let capacity = height * usize::from(columns);
        let max_scroll = lines.len().saturating_sub(capacity);
        let scroll = usize::from(self.state.help_scroll).min(max_scroll);
        let mut rest = lines.into_iter().skip(scroll);
        for (i, col) in areas.iter().enumerate() {
            let mut chunk: Vec<Line<'static>> = rest.by_ref().take(height).collect();
            let last = i + 1 == areas.len();
            if last && scroll < max_scroll {
                chunk.truncate(height.saturating_sub(1));
                chunk.push(Line::from(Span::styled("↓ more: j or PgDn", theme.dim())));
            }
            Paragraph::new(chunk).render(*col, buf);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn help_wraps_at_spaces() {
        assert_eq!(wrap("a bb ccc dddd", 6), vec!["a bb", "ccc", "dddd"]);
        assert!(wrap("", 5).is_empty());
    }
}
