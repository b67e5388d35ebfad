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

/// Flow legend items (a styled glyph and its text) into lines of at most `width` characters,
/// two spaces between items; an item wider than a line is wrapped at spaces, indented.
fn legend(items: Vec<(Option<Span<'static>>, &str)>, width: usize) -> Vec<Line<'static>> {
    let mut out = Vec::new();
    let mut line: Vec<Span<'static>> = Vec::new();
    let mut used = 0;
    for (glyph, text) in items {
        let glyph_width = glyph.as_ref().map_or(0, |g| g.content.chars().count());
        let item_width = glyph_width + text.chars().count();
        let gap = if used == 0 { 0 } else { 2 };
        if used > 0 && used + gap + item_width > width {
            out.push(Line::from(std::mem::take(&mut line)));
            used = 0;
        }
        if used > 0 {
            line.push(Span::raw("  "));
            used += 2;
        }
        if item_width <= width.saturating_sub(used) {
            line.extend(glyph);
            line.push(Span::raw(text.to_string()));
            used += item_width;
            continue;
        }
        // Too wide for a line of its own: wrap its text, the glyph first, the rest indented.
        let pieces = wrap(
            text.trim_start(),
            width.saturating_sub(glyph_width + 1).max(8),
        );
        for (i, piece) in pieces.into_iter().enumerate() {
            if i == 0 {
                line.extend(glyph.clone());
                line.push(Span::raw(format!(" {piece}")));
            } else {
                out.push(Line::from(std::mem::take(&mut line)));
                line.push(Span::raw(format!("{:glyph_width$} {piece}", "")));
            }
            used = line.iter().map(|s| s.content.chars().count()).sum();
        }
    }
    if !line.is_empty() {
        out.push(Line::from(line));
    }
    out
}

impl HelpScreen<'_> {
    /// Every help line for columns `width` wide.
    pub fn lines(&self, width: usize) -> Vec<Line<'static>> {
        let theme = self.state.theme;
        let text_width = width.saturating_sub(KEY_WIDTH + 1).max(10);
        let glyph = |g: &str, style| Some(Span::styled(g.to_string(), style));
        let plain = |g: &str| Some(Span::raw(g.to_string()));
        let groups: Vec<Vec<(Option<Span<'static>>, &str)>> = vec![
            vec![
                (
                    glyph(FitTag::Current.glyph(), theme.fit_tag(FitTag::Current)),
                    " current fit",
                ),
                (
                    glyph(FitTag::Stale.glyph(), theme.fit_tag(FitTag::Stale)),
                    " stale",
                ),
                (
                    glyph(FitTag::Failed.glyph(), theme.fit_tag(FitTag::Failed)),
                    " failed",
                ),
                (plain(FitTag::None.glyph()), " not fitted"),
            ],
            vec![
                (glyph("⚑", theme.flag()), " flagged readings"),
                (None, "┆ FC, PWP"),
                (None, "⠁⠂ 95 % band"),
            ],
            vec![
                (None, "o used"),
                (None, "▼ drying"),
                (None, "▲ wetting"),
                (None, "x excluded"),
                (None, "◆ selected reading"),
            ],
            vec![
                (
                    glyph(super::FIELD_TAG, theme.field_tag()),
                    " field pairing (in place; dotted in the depth view)",
                ),
                (None, "⡇ logger series"),
            ],
        ];
        let mut lines = vec![Line::from(Span::styled("Signs", theme.heading()))];
        for group in groups {
            lines.extend(legend(group, width));
        }
        lines.push(Line::from(""));
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
    fn the_legend_flows_within_the_width() {
        let items = || {
            vec![
                (
                    Some(Span::raw("≈")),
                    " field pairing (in place; dotted in the depth view)",
                ),
                (None, "⡇ logger series"),
                (None, "o used"),
            ]
        };
        let text = |lines: Vec<Line<'static>>| -> Vec<String> {
            lines.iter().map(ToString::to_string).collect()
        };
        assert_eq!(
            text(legend(items(), 80)),
            vec!["≈ field pairing (in place; dotted in the depth view)  ⡇ logger series  o used"]
        );
        let narrow = text(legend(items(), 30));
        assert_eq!(
            narrow,
            vec![
                "≈ field pairing (in place;",
                "  dotted in the depth view)",
                "⡇ logger series  o used",
            ]
        );
        assert!(narrow.iter().all(|l| l.chars().count() <= 30));
    }

    #[test]
    fn help_wraps_at_spaces() {
        assert_eq!(wrap("a bb ccc dddd", 6), vec!["a bb", "ccc", "dddd"]);
        assert!(wrap("", 5).is_empty());
    }
}
