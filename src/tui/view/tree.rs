//! The campaign tree: sites, their layers (depth range and horizon) and samples (code without
//! the site's prefix, `≈` before a field pairing) with model, fit standing (glyph and colour)
//! and flag count. Only the visible rows are drawn; codes, names and horizons show control
//! and bidirectional formatting characters escaped, so no name can move the pane's border.

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::Style;
use ratatui::text::{Line, Span};
use ratatui::widgets::Widget;

use super::super::app::{AppState, FitTag, Input, TreeRow, model_tag};
use super::{fit_width, kind_tag, pane_block, scroll_offset, short_code};
use crate::model::text::shown;

/// The tree pane.
pub struct TreePane<'a> {
    /// The state.
    pub state: &'a AppState,
    /// Whether it has focus.
    pub focused: bool,
}

/// Right-hand badges of a row: sample count, stale and failed counts, flags.
fn badges(
    samples: usize,
    stale: usize,
    failed: usize,
    flags: usize,
    theme: super::super::theme::Theme,
) -> Vec<Span<'static>> {
    let mut out = vec![Span::styled(format!("{samples}"), theme.dim())];
    if stale > 0 {
        out.push(Span::styled(
            format!(" {}{stale}", FitTag::Stale.glyph()),
            theme.fit_tag(FitTag::Stale),
        ));
    }
    if failed > 0 {
        out.push(Span::styled(
            format!(" {}{failed}", FitTag::Failed.glyph()),
            theme.fit_tag(FitTag::Failed),
        ));
    }
    if flags > 0 {
        out.push(Span::styled(format!(" ⚑{flags}"), theme.flag()));
    }
    out
}

fn width_of(spans: &[Span<'_>]) -> usize {
    spans.iter().map(|s| s.content.chars().count()).sum()
}

impl TreePane<'_> {
    fn row_line(&self, row: TreeRow, width: usize) -> Line<'static> {
        let tree = &self.state.tree;
        let theme = self.state.theme;
        let open = |r| if tree.is_open(r) { "▾ " } else { "▸ " };
        let (left, right): (Vec<Span<'static>>, Vec<Span<'static>>) = match row {
            TreeRow::Site(s) => {
                let site = &tree.sites[s];
                let count = |t| site.samples().filter(|x| x.tag == t).count();
                let flags = site.samples().map(|x| x.flags).sum();
                (
                    vec![
                        Span::raw(open(row)),
                        Span::styled(shown(&site.code).into_owned(), theme.heading()),
                        Span::styled(
                            site.name
                                .as_ref()
                                .map(|n| format!(" {}", shown(n)))
                                .unwrap_or_default(),
                            theme.dim(),
                        ),
                    ],
                    badges(
                        site.samples().count(),
                        count(FitTag::Stale),
                        count(FitTag::Failed),
                        flags,
                        theme,
                    ),
                )
            }
            TreeRow::Layer(s, l) => {
                let layer = &tree.sites[s].layers[l];
                let count = |t| layer.samples.iter().filter(|x| x.tag == t).count();
                let flags = layer.samples.iter().map(|x| x.flags).sum();
                (
                    vec![
                        Span::raw(format!("  {}", open(row))),
                        Span::raw(layer.depth_label()),
                        Span::styled(
                            layer
                                .horizon
                                .as_ref()
                                .map(|h| format!(" {}", shown(h)))
                                .unwrap_or_default(),
                            theme.dim(),
                        ),
                        Span::styled(
                            layer
                                .texture
                                .map(|t| format!(" {}", t.code()))
                                .unwrap_or_default(),
                            theme.dim(),
                        ),
                    ],
                    badges(
                        layer.samples.len(),
                        count(FitTag::Stale),
                        count(FitTag::Failed),
                        flags,
                        theme,
                    ),
                )
            }
            TreeRow::Sample(s, l, i) => {
                let sample = &tree.sites[s].layers[l].samples[i];
                let mut right = vec![
                    Span::styled(
                        format!("{:<3}", sample.model.as_deref().map_or("", model_tag)),
                        theme.dim(),
                    ),
                    Span::styled(
                        format!(" {}", sample.tag.glyph()),
                        theme.fit_tag(sample.tag),
                    ),
                ];
                right.push(if sample.flags > 0 {
                    Span::styled(format!(" ⚑{}", sample.flags), theme.flag())
                } else {
                    Span::raw("   ")
                });
                let site = &tree.sites[s].code;
                (
                    vec![
                        Span::raw("   "),
                        Span::styled(kind_tag(sample.kind), theme.field_tag()),
                        Span::raw(" "),
                        Span::raw(shown(short_code(site, &sample.code)).into_owned()),
                    ],
                    right,
                )
            }
        };
        let right_width = width_of(&right);
        let room = width.saturating_sub(right_width + 1);
        let mut spans = Vec::new();
        let mut used = 0;
        for span in left {
            let w = span.content.chars().count();
            if used + w <= room {
                used += w;
                spans.push(span);
            } else {
                let text = fit_width(&span.content, room.saturating_sub(used));
                used += text.chars().count();
                spans.push(Span::styled(text, span.style));
                break;
            }
        }
        spans.push(Span::raw(
            " ".repeat(width.saturating_sub(used + right_width)),
        ));
        spans.extend(right);
        Line::from(spans)
    }
}

impl Widget for TreePane<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let state = self.state;
        let theme = state.theme;
        let tree = &state.tree;
        let title = if tree.filter.is_empty() {
            "Campaign".to_string()
        } else {
            format!("Campaign · /{}", tree.filter)
        };
        let block = pane_block(title, self.focused, theme);
        let mut inner = block.inner(area);
        block.render(area, buf);
        if let Input::Filter(text) = &state.input {
            if inner.height == 0 {
                return;
            }
            let prompt_row = inner.bottom() - 1;
            Line::from(vec![
                Span::styled("filter /", theme.key()),
                Span::raw(text.clone()),
                Span::styled("█", theme.text()),
            ])
            .render(Rect::new(inner.x, prompt_row, inner.width, 1), buf);
            inner.height -= 1;
        }
        if tree.rows.is_empty() {
            let text = if tree.filter.is_empty() {
                "No sites yet: import sites, layers and lab readings first."
            } else {
                "Nothing matches the filter (Esc clears it)."
            };
            ratatui::widgets::Paragraph::new(text)
                .wrap(ratatui::widgets::Wrap { trim: true })
                .render(inner, buf);
            return;
        }
        let height = usize::from(inner.height);
        let offset = scroll_offset(tree.cursor, tree.rows.len(), height);
        let width = usize::from(inner.width);
        for (n, (i, row)) in tree
            .rows
            .iter()
            .enumerate()
            .skip(offset)
            .take(height)
            .enumerate()
        {
            let y = inner.y + n as u16;
            let line = self.row_line(*row, width);
            let row_area = Rect::new(inner.x, y, inner.width, 1);
            line.render(row_area, buf);
            if i == tree.cursor {
                let style = if self.focused {
                    theme.cursor()
                } else {
                    theme.cursor_unfocused()
                };
                buf.set_style(row_area, style);
            }
        }
        if tree.rows.len() > height {
            let marker = format!(" {}/{} ", tree.cursor + 1, tree.rows.len());
            let x = area.right().saturating_sub(marker.len() as u16 + 1);
            buf.set_string(x, area.bottom() - 1, marker, Style::new());
        }
    }
}
