//! What a site or layer holds, shown while the tree cursor is on one: built from the tree's
//! own data, so moving over sites reads nothing from the file.

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Paragraph, Widget};

use super::super::app::{AppState, FitTag, SampleNode, TreeRow, model_tag};
use super::super::theme::Theme;
use super::framed;
use crate::model::text::shown;

/// The summary pane.
pub struct SummaryPane<'a> {
    /// The state.
    pub state: &'a AppState,
}

/// `8 samples: ✓ 6 current, ~ 1 stale, ✗ 1 failed, · 0 unfitted; ⚑ 3 flags`.
fn standing<'a>(samples: impl Iterator<Item = &'a SampleNode>, theme: Theme) -> Line<'static> {
    let all: Vec<&SampleNode> = samples.collect();
    let count = |t| all.iter().filter(|s| s.tag == t).count();
    let flags: usize = all.iter().map(|s| s.flags).sum();
    let mut spans = vec![Span::raw(format!("{} samples: ", all.len()))];
    for (i, tag) in [FitTag::Current, FitTag::Stale, FitTag::Failed, FitTag::None]
        .into_iter()
        .enumerate()
    {
        if i > 0 {
            spans.push(Span::raw(", "));
        }
        spans.push(Span::styled(
            format!("{} {} {}", tag.glyph(), count(tag), tag.label()),
            theme.fit_tag(tag),
        ));
    }
    spans.push(Span::raw("; "));
    spans.push(Span::styled(
        format!("⚑ {}", crate::model::number::plural(flags as u64, "flag")),
        theme.flag(),
    ));
    Line::from(spans)
}

impl Widget for SummaryPane<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let state = self.state;
        let theme = state.theme;
        let tree = &state.tree;
        let mut lines: Vec<Line<'static>> = Vec::new();
        let title = match tree.current() {
            Some(TreeRow::Site(s)) => {
                let site = &tree.sites[s];
                lines.push(standing(site.samples(), theme));
                lines.push(Line::from(""));
                lines.push(Line::from(Span::styled(
                    "layer            horizon  samples  models",
                    theme.heading(),
                )));
                for layer in &site.layers {
                    let mut models: Vec<&str> = layer
                        .samples
                        .iter()
                        .filter_map(|s| s.model.as_deref().map(model_tag))
                        .collect();
                    models.dedup();
                    lines.push(Line::from(format!(
                        "{:<16} {:<8} {:>7}  {}",
                        layer.depth_label(),
                        shown(layer.horizon.as_deref().unwrap_or("–")),
                        layer.samples.len(),
                        models.join(" ")
                    )));
                }
                lines.push(Line::from(""));
                lines.push(Line::from(Span::styled(
                    "Enter opens the site · 2 its depth view · 4 its logger series · F refits it",
                    theme.dim(),
                )));
                format!(
                    "Site {}{}",
                    shown(&site.code),
                    site.name
                        .as_ref()
                        .map(|n| format!(" · {}", shown(n)))
                        .unwrap_or_default()
                )
            }
            Some(TreeRow::Layer(s, l)) => {
                let site = &tree.sites[s];
                let layer = &site.layers[l];
                lines.push(standing(layer.samples.iter(), theme));
                lines.push(Line::from(""));
                lines.push(Line::from(Span::styled(
                    "sample            kind           model  fit       flags",
                    theme.heading(),
                )));
                for s in &layer.samples {
                    lines.push(Line::from(vec![
                        Span::raw(format!(
                            "{:<17} {:<14} {:<6} ",
                            shown(&s.code),
                            s.kind.as_str(),
                            s.model.as_deref().map_or("–", model_tag)
                        )),
                        Span::styled(
                            format!("{} {:<7}", s.tag.glyph(), s.tag.label()),
                            theme.fit_tag(s.tag),
                        ),
                        Span::styled(format!(" {}", s.flags), theme.flag()),
                    ]));
                }
                lines.push(Line::from(""));
                lines.push(Line::from(Span::styled(
                    "Enter closes the layer · → goes to its first sample",
                    theme.dim(),
                )));
                format!(
                    "Layer {} {}{}",
                    shown(&site.code),
                    layer.depth_label(),
                    layer
                        .horizon
                        .as_ref()
                        .map(|h| format!(" · {}", shown(h)))
                        .unwrap_or_default()
                )
            }
            _ => {
                lines.push(standing(
                    tree.sites
                        .iter()
                        .flat_map(super::super::app::SiteNode::samples),
                    theme,
                ));
                "Campaign".to_string()
            }
        };
        let inner = framed(title, false, theme, area, buf);
        Paragraph::new(lines).render(inner, buf);
    }
}
