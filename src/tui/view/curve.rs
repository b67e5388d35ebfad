//! The curve pane: measured points (`o` used, `▼` drying and `▲` wetting where the branch is
//! known, `x` excluded, `◆` the selected reading), the fitted curve, the 95 % band on request
//! (dotted), field capacity and wilting point marked.

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Paragraph, Widget};

use crate::model::domain::Branch;

use super::super::app::{AppState, Detail, ReadingView, SampleDetail, plot_x};
use super::plot::{Axes, draw_dotted, draw_polyline, render_canvas};
use super::{framed, theta_text};

/// The glyph of a reading used by the fit.
pub const USED: &str = "o";
/// The glyph of a reading left out of fits.
pub const EXCLUDED: &str = "x";
/// The glyph of the selected reading.
pub const SELECTED: &str = "◆";
/// The glyph of a used reading on the drying branch (suction rising).
pub const DRYING: &str = "▼";
/// The glyph of a used reading on the wetting branch (suction falling).
pub const WETTING: &str = "▲";

/// A reading's glyph: excluded, or its branch (`o` when not recorded).
pub fn point_glyph(r: &ReadingView) -> &'static str {
    if r.excluded {
        return EXCLUDED;
    }
    match r.branch {
        Branch::Drying => DRYING,
        Branch::Wetting => WETTING,
        Branch::Unknown => USED,
    }
}

/// The legend's point entries: one per glyph the sample's used readings show, then excluded.
fn point_legend(readings: &[ReadingView]) -> Vec<(&'static str, &'static str)> {
    let has = |b: Branch| readings.iter().any(|r| !r.excluded && r.branch == b);
    let branches = has(Branch::Drying) || has(Branch::Wetting);
    let mut out = Vec::new();
    if has(Branch::Drying) {
        out.push((DRYING, "drying"));
    }
    if has(Branch::Wetting) {
        out.push((WETTING, "wetting"));
    }
    if has(Branch::Unknown) || !branches {
        out.push((USED, if branches { "other" } else { "used" }));
    }
    out.push((EXCLUDED, "excluded"));
    out
}

/// The curve pane of the browse screen.
pub struct CurvePane<'a> {
    /// The state.
    pub state: &'a AppState,
    /// Whether it has focus.
    pub focused: bool,
}

impl Widget for CurvePane<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let state = self.state;
        let theme = state.theme;
        let title = match &state.detail {
            Detail::Ready(d) if state.show_conductivity => format!(
                "K(h) · {} · cm/day vs {}{}",
                crate::model::text::shown(&d.code),
                state.units.symbol(),
                if state.units == super::super::app::AxisUnit::Pf {
                    ""
                } else {
                    " (log)"
                }
            ),
            Detail::Ready(d) => format!(
                "Curve · {} · θ vs {}{}",
                crate::model::text::shown(&d.code),
                state.units.symbol(),
                if state.units == super::super::app::AxisUnit::Pf {
                    ""
                } else {
                    " (log)"
                }
            ),
            _ => "Curve".to_string(),
        };
        let inner = framed(title, self.focused, theme, area, buf);
        match &state.detail {
            Detail::Ready(detail) if state.show_conductivity => {
                super::conductivity::ConductivityPlot { state, detail }.render(inner, buf);
            }
            Detail::Ready(detail) => CurvePlot {
                state,
                detail,
                selected: Some(state.reading),
            }
            .render(inner, buf),
            Detail::Loading(_) => Paragraph::new("loading…").render(inner, buf),
            Detail::Failed(_, why) => {
                Paragraph::new(format!("cannot show: {why}")).render(inner, buf);
            }
            Detail::Empty => Paragraph::new("Select a sample in the tree.").render(inner, buf),
        }
    }
}

/// A sample's curve with its readings, drawn inside `area` (no border).
pub struct CurvePlot<'a> {
    /// The state (units, band, theme).
    pub state: &'a AppState,
    /// The sample.
    pub detail: &'a SampleDetail,
    /// Index of the highlighted reading.
    pub selected: Option<usize>,
}

impl Widget for CurvePlot<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let state = self.state;
        let theme = state.theme;
        let d = self.detail;
        if area.height < 4 || area.width < 12 {
            return;
        }
        let legend_row = Rect {
            height: 1,
            y: area.bottom() - 1,
            ..area
        };
        let plot_box = Rect {
            height: area.height - 1,
            ..area
        };
        let theta_max = d
            .readings
            .iter()
            .map(|r| r.theta)
            .chain(d.curve.iter().map(|p| p.1))
            .fold(0.0_f64, f64::max);
        let axes = Axes::new(theta_max, d.x_max, state.units);
        axes.render_axes(plot_box, buf, theme);
        let plot = axes.plot_area(plot_box);
        let (fc_x, pwp_x) = d.fc_pwp_x();
        let marker_style = ratatui::style::Style::new().fg(theme.marker_line());
        axes.render_marker(plot, buf, fc_x, "FC", marker_style);
        axes.render_marker(plot, buf, pwp_x, "PWP", marker_style);
        let upper: Vec<(f64, f64)> = d.band.iter().map(|b| (b.0, b.2)).collect();
        let lower: Vec<(f64, f64)> = d.band.iter().map(|b| (b.0, b.1)).collect();
        let show_band = state.band && !d.band.is_empty();
        let canvas = axes.canvas(|ctx| {
            if show_band {
                draw_dotted(ctx, &upper, theme.band());
                draw_dotted(ctx, &lower, theme.band());
                ctx.layer();
            }
            draw_polyline(ctx, &d.curve, theme.curve());
        });
        render_canvas(&canvas, plot, buf);
        // Measured points last, so no curve hides them: used, then excluded, then the selected.
        for excluded in [false, true] {
            for r in d.readings.iter().filter(|r| r.excluded == excluded) {
                if let Some((x, y)) = axes.cell(plot, plot_x(r.h_cm), r.theta) {
                    let style = if excluded {
                        theme.excluded_point()
                    } else {
                        theme.point()
                    };
                    buf.set_string(x, y, point_glyph(r), style);
                }
            }
        }
        if let Some(r) = self.selected.and_then(|i| d.readings.get(i))
            && let Some((x, y)) = axes.cell(plot, plot_x(r.h_cm), r.theta)
        {
            buf.set_string(x, y, SELECTED, theme.selected_point());
        }
        let mut legend = Vec::new();
        for (glyph, label) in point_legend(&d.readings) {
            let style = if glyph == EXCLUDED {
                theme.excluded_point()
            } else {
                theme.point()
            };
            legend.push(Span::styled(glyph, style));
            legend.push(Span::raw(format!(" {label} ")));
        }
        legend.extend([Span::raw(if d.curve.is_empty() {
            "no fit"
        } else {
            "─ fit"
        })]);
        if show_band {
            legend.push(Span::raw(" ⠁⠂ 95 % band"));
        } else if state.band {
            legend.push(Span::raw(" (no band)"));
        }
        let width = |spans: &[Span<'_>]| spans.iter().map(|s| s.content.chars().count()).sum();
        if let Some(r) = self.selected.and_then(|i| d.readings.get(i)) {
            let at = vec![
                Span::styled(SELECTED, theme.selected_point()),
                Span::raw(format!(
                    " {} {} θ {}",
                    super::suction_text(r.h_cm, state.units),
                    state.units.symbol(),
                    theta_text(r.theta)
                )),
            ];
            let room = usize::from(legend_row.width);
            let (left, right): (usize, usize) = (width(&legend), width(&at));
            if left + 1 + right <= room {
                legend.push(Span::raw(" ".repeat(room - left - right)));
                legend.extend(at);
            }
        }
        Line::from(legend).render(legend_row, buf);
    }
}
