//! The depth view of one site: every layer's curves overlaid (each layer marked along its
//! curves with its digit, so the legend reads without colour; field pairings dotted), the
//! parameters by depth (field pairings tagged `≈` beside the lab cores), and the profile's
//! available water in mm down to the root-zone depth with its 95 % interval (each layer's and
//! the total's, and the pooled between-core variance they use), with the field pairings'
//! beside it.

use ratatui::buffer::Buffer;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Paragraph, Row, Widget};

use super::super::app::{AppState, DepthData, LayerCurve, model_tag};
use super::plot::{Axes, draw_dotted, draw_polyline, render_canvas};
use super::{
    FIELD_TAG, cursor_row, framed, kind_tag, kpa_text, num, opt_num, render_table, scroll_offset,
    short_code,
};
use crate::model::text::shown;
use crate::model::units::CM_PER_KPA;

/// The depth screen.
pub struct DepthScreen<'a> {
    /// The state.
    pub state: &'a AppState,
}

impl Widget for DepthScreen<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let state = self.state;
        let theme = state.theme;
        let Some(data) = state.depth.data.as_ref() else {
            let inner = framed("Depth view", true, theme, area, buf);
            let text = match &state.depth.site {
                Some(site) => format!("loading site {site}…"),
                None => "No site chosen: go back (Esc) and pick one.".to_string(),
            };
            Paragraph::new(text).render(inner, buf);
            return;
        };
        let top_height = (area.height * 11 / 20).max(9);
        let [top, bottom] =
            Layout::vertical([Constraint::Length(top_height), Constraint::Fill(1)]).areas(area);
        let legend_width = (top.width * 2 / 5).clamp(30, 46);
        let [plot_area, legend_area] =
            Layout::horizontal([Constraint::Fill(1), Constraint::Length(legend_width)]).areas(top);
        self.render_plot(data, plot_area, buf);
        self.render_profile(data, legend_area, buf);
        self.render_table(data, bottom, buf);
    }
}

impl DepthScreen<'_> {
    fn render_plot(&self, data: &DepthData, area: Rect, buf: &mut Buffer) {
        let state = self.state;
        let theme = state.theme;
        let title = format!(
            "Depth · {}{} · θ vs suction ({}) · ←→ site",
            shown(&data.site),
            data.name
                .as_ref()
                .map(|n| format!(" {}", shown(n)))
                .unwrap_or_default(),
            state.units.symbol()
        );
        let inner = framed(title, true, theme, area, buf);
        let theta_max = data
            .layers
            .iter()
            .flat_map(|l| l.curves.iter().flat_map(|c| &c.points))
            .map(|p| p.1)
            .fold(0.0_f64, f64::max);
        let axes = Axes::new(theta_max, super::super::app::PLOT_X_MAX, state.units);
        axes.render_axes(inner, buf, theme);
        let plot = axes.plot_area(inner);
        let marker_style = ratatui::style::Style::new().fg(theme.marker_line());
        axes.render_marker(
            plot,
            buf,
            (data.fc_kpa * CM_PER_KPA).log10(),
            "FC",
            marker_style,
        );
        axes.render_marker(
            plot,
            buf,
            (data.pwp_kpa * CM_PER_KPA).log10(),
            "PWP",
            marker_style,
        );
        let canvas = axes.canvas(|ctx| {
            for (i, layer) in data.layers.iter().enumerate() {
                for curve in &layer.curves {
                    if curve.field {
                        draw_dotted(ctx, &curve.points, theme.layer(i));
                    } else {
                        draw_polyline(ctx, &curve.points, theme.layer(i));
                    }
                }
            }
        });
        render_canvas(&canvas, plot, buf);
        // Each layer's digit along its curves, staggered so marks of neighbours do not collide.
        let selected = data.rows.get(state.depth.cursor);
        let n = data.layers.len().max(1);
        for (li, layer) in data.layers.iter().enumerate() {
            let style = ratatui::style::Style::new()
                .fg(theme.layer(li))
                .add_modifier(ratatui::style::Modifier::BOLD);
            for LayerCurve {
                sample_id,
                points: curve,
                ..
            } in &layer.curves
            {
                let is_selected = selected.is_some_and(|r| r.sample_id == *sample_id);
                for k in 0..3 {
                    let frac = (f64::from(k) + (li as f64 + 0.5) / n as f64) / 3.0;
                    let idx = ((curve.len() - 1) as f64 * frac).round() as usize;
                    let Some(&(x, y)) = curve.get(idx) else {
                        continue;
                    };
                    if let Some((cx, cy)) = axes.cell(plot, x, y) {
                        let mark = layer.mark.to_string();
                        let style = if is_selected { theme.cursor() } else { style };
                        buf.set_string(cx, cy, mark, style);
                    }
                }
            }
        }
    }

    fn render_profile(&self, data: &DepthData, area: Rect, buf: &mut Buffer) {
        let state = self.state;
        let theme = state.theme;
        let inner = framed(
            format!("Profile water to {} cm · +/-", data.root_zone_cm),
            false,
            theme,
            area,
            buf,
        );
        let mut lines = vec![Line::from(Span::styled(
            "  layer cm        AW  mm ±95 %",
            theme.heading(),
        ))];
        for (i, l) in data.layers.iter().enumerate() {
            let stale = if l.stale_cores > 0 {
                format!(" ~{}", l.stale_cores)
            } else {
                String::new()
            };
            let mm = match (l.water_mm, l.water_mm_interval) {
                (Some(v), Some(i)) => format!("{v:.1}±{:.1}", i.half_width()),
                (Some(v), None) => format!("{v:.1}"),
                (None, _) => "–".to_string(),
            };
            lines.push(Line::from(vec![
                Span::styled(
                    format!("{} ", l.mark),
                    ratatui::style::Style::new()
                        .fg(theme.layer(i))
                        .add_modifier(ratatui::style::Modifier::BOLD),
                ),
                Span::raw(format!(
                    "{:<12}{:>6} {mm:>9}{stale}",
                    format!(
                        "{}-{} {}",
                        l.top_cm,
                        l.bottom_cm,
                        shown(l.horizon.as_deref().unwrap_or(""))
                    ),
                    l.available_water
                        .map_or_else(|| "–".to_string(), |v| format!("{v:.3}")),
                )),
            ]));
            if let Some(field) = l.field_available_water {
                lines.push(Line::from(vec![
                    Span::styled(format!("  {FIELD_TAG} "), theme.field_tag()),
                    Span::raw(format!("{:<10}{field:>6.3}", "field")),
                ]));
            }
        }
        if let Some(line) = super::texture_fill::class_line(data) {
            lines.push(Line::from(Span::styled(line, theme.dim())));
        }
        let fill = data
            .texture_fill
            .as_ref()
            .filter(|_| state.depth.fill_texture);
        if let Some(fill) = fill {
            super::texture_fill::estimate_lines(&mut lines, fill, theme);
        }
        let (total_mm, interval, uncovered) = match fill {
            Some(f) => (f.total_mm, f.total_mm_interval, f.uncovered_cm),
            None => (data.total_mm, data.total_mm_interval, data.uncovered_cm),
        };
        let total = match interval {
            Some(i) => format!("{total_mm:.1} ± {:.1}", i.half_width()),
            None => format!("{total_mm:.1}"),
        };
        let with = if fill.is_some() { "◌" } else { "" };
        lines.push(Line::from(Span::styled(
            format!("{with}total {total} mm to {} cm", data.root_zone_cm),
            theme.heading(),
        )));
        if fill.is_none() && data.texture_fill.is_some() {
            lines.push(Line::from(Span::styled(
                "e fills layers without a core from texture",
                theme.dim(),
            )));
        }
        if uncovered > 0.0 {
            lines.push(Line::from(Span::styled(
                format!(
                    "{} cm of it without a fitted layer: the total is a lower bound",
                    num(uncovered, 3)
                ),
                theme.tone(super::super::app::Tone::Warning),
            )));
        }
        if let Some(note) = &data.total_note {
            lines.push(Line::from(Span::styled(note.clone(), theme.dim())));
        }
        let pooled = data.between_cores.map_or_else(
            || "no between-core variance (no layer with two fitted cores)".to_string(),
            |b| format!("between cores {}", b.describe()),
        );
        lines.push(Line::from(Span::styled(
            format!(
                "AW = θ(FC) − θ(PWP), m3/m3, lab-core random-effects mean ({FIELD_TAG} field, not \
                 summed); FC {}, PWP {}; ± 95 %, layers independent; {pooled}",
                kpa_text(data.fc_kpa, state.units),
                kpa_text(data.pwp_kpa, state.units)
            ),
            theme.dim(),
        )));
        Paragraph::new(lines)
            .wrap(ratatui::widgets::Wrap { trim: false })
            .render(inner, buf);
    }

    fn render_table(&self, data: &DepthData, area: Rect, buf: &mut Buffer) {
        let state = self.state;
        let theme = state.theme;
        let inner = framed("Parameters by depth · Enter opens", false, theme, area, buf);
        if inner.height < 2 {
            return;
        }
        let header = Row::new(vec![
            " ".to_string(),
            "depth".to_string(),
            "sample".to_string(),
            "fit".to_string(),
            "θr".to_string(),
            "θs".to_string(),
            "AW ±95 %".to_string(),
            format!("h_ae {}", state.units.symbol()),
            "RMSE".to_string(),
            "shape".to_string(),
        ])
        .style(theme.heading());
        let height = usize::from(inner.height - 1);
        let offset = scroll_offset(state.depth.cursor, data.rows.len(), height);
        let rows =
            data.rows
                .iter()
                .enumerate()
                .skip(offset)
                .take(height)
                .map(|(i, r)| {
                    let layer = &data.layers[r.layer];
                    let shape = r
                        .shape
                        .iter()
                        .map(|(n, v)| format!("{n}={}", num(*v, 3)))
                        .collect::<Vec<_>>()
                        .join(" ");
                    let row = Row::new(vec![
                        Line::from(Span::styled(
                            layer.mark.to_string(),
                            ratatui::style::Style::new().fg(theme.layer(r.layer)),
                        )),
                        Line::from(format!("{}-{}", layer.top_cm, layer.bottom_cm)),
                        Line::from(vec![
                            Span::styled(kind_tag(r.kind), theme.field_tag()),
                            Span::raw(format!(" {}", shown(short_code(&data.site, &r.sample)))),
                        ]),
                        Line::from(Span::styled(
                            format!(
                                "{} {}",
                                r.tag.glyph(),
                                r.model.as_deref().map_or("", model_tag)
                            ),
                            theme.fit_tag(r.tag),
                        )),
                        Line::from(opt_num(r.theta_r, 3)),
                        Line::from(opt_num(r.theta_s, 3)),
                        Line::from(aw_text(r.available_water, r.available_water_pm)),
                        Line::from(r.air_entry_cm.map_or_else(
                            || "–".to_string(),
                            |h| super::suction_text(h, state.units),
                        )),
                        Line::from(opt_num(r.rmse, 2)),
                        Line::from(shape),
                    ]);
                    cursor_row(row, i == state.depth.cursor, true, theme)
                });
        let widths = [
            Constraint::Length(1),
            Constraint::Length(7),
            Constraint::Length(12),
            Constraint::Length(5),
            Constraint::Length(5),
            Constraint::Length(5),
            Constraint::Length(12),
            Constraint::Length(7),
            Constraint::Length(6),
            Constraint::Fill(1),
        ];
        render_table(header, rows, &widths, inner, buf);
    }
}

/// A sample's available water with the half-width of its 95 % interval (`*` after a Monte
/// Carlo one's), e.g. `0.142±0.011`.
fn aw_text(value: Option<f64>, pm: Option<(f64, bool)>) -> String {
    match (value, pm) {
        (None, _) => "–".into(),
        (Some(v), None) => format!("{v:.3}"),
        (Some(v), Some((half, monte_carlo))) => {
            let mark = if monte_carlo { "*" } else { "" };
            format!("{v:.3}±{half:.3}{mark}")
        }
    }
}
