//! The conductivity view of the curve pane (key `c`): measured K (`●`), the K(h) curve of a
//! fit made with them or the retention fit's prediction from the layer's Ks, and Ks marked
//! at the left edge (`Ks` fitted or predicted, `■` measured), K and h on log axes.

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::Style;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Paragraph, Widget};

use super::super::app::conductivity::{ConductivityPanel, KCurveSource};
use super::super::app::{AppState, PLOT_X_MIN, SampleDetail};
use super::curve::{EXCLUDED, SELECTED};
use super::plot::{Grid, Tick, draw_polyline, render_canvas, x_ticks};
use crate::model::number::significant;

/// The glyph of a measured K.
pub const MEASURED: &str = "●";
/// The glyph of a measured Ks at the left edge.
pub const MEASURED_KS: &str = "■";

/// Columns left of the plot for the K labels (`1e-12`).
const LABEL_WIDTH: u16 = 6;

/// A value with its standard error, short (`29.7±8.4`).
fn with_se(value: f64, se: Option<f64>) -> String {
    let v = significant(value, 3).unwrap_or_default();
    match se {
        Some(se) => format!("{v}±{}", significant(se, 2).unwrap_or_default()),
        None => v,
    }
}

/// The conductivity plot of a sample, inside `area` (no border).
pub struct ConductivityPlot<'a> {
    /// The state (units, theme).
    pub state: &'a AppState,
    /// The sample.
    pub detail: &'a SampleDetail,
}

impl Widget for ConductivityPlot<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let state = self.state;
        let theme = state.theme;
        let Some(panel) = &self.detail.conductivity else {
            Paragraph::new(
                "No conductivity for this sample: no measured K, no Ks (porewise import \
                 conductivity; layers' ks_cm_per_day). c shows θ(h) again.",
            )
            .wrap(ratatui::widgets::Wrap { trim: true })
            .render(area, buf);
            return;
        };
        if area.height < 5 || area.width < 16 {
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
        let grid = Grid {
            x: [PLOT_X_MIN, self.detail.x_max],
            y: panel.y_range(),
            label_width: LABEL_WIDTH,
            bottom_rows: 2,
        };
        let plot = grid.plot_area(plot_box);
        let y_ticks: Vec<Tick> = {
            let [lo, hi] = grid.y;
            let step = if hi - lo > f64::from(plot.height.max(1)) {
                2
            } else {
                1
            };
            (lo.ceil() as i32..=hi.floor() as i32)
                .step_by(step)
                .map(|k| (f64::from(k), format!("1e{k}")))
                .collect()
        };
        grid.render_y_axis(plot_box, buf, theme, &y_ticks);
        grid.render_x_axis(plot_box, buf, theme, &x_ticks(state.units, grid.x));
        let canvas = grid.canvas(|ctx| draw_polyline(ctx, &panel.curve, theme.curve()));
        render_canvas(&canvas, plot, buf);
        let at_left = |value: f64| grid.cell(plot, grid.x[0], value.log10());
        // The fitted or predicted Ks is labelled one column in, so a measured Ks on the same
        // row (at the edge) leaves it readable.
        let label_at = |value: f64| at_left(value).map(|(x, y)| (x + 1, y));
        let curve_style = Style::new().fg(theme.curve());
        match &panel.source {
            KCurveSource::Fitted { ks, .. } => {
                if let Some((x, y)) = label_at(ks.value) {
                    buf.set_string(x, y, "Ks", curve_style);
                }
            }
            KCurveSource::Predicted { ks } => {
                if let Some((x, y)) = label_at(*ks) {
                    buf.set_string(x, y, "Ks", curve_style);
                }
            }
            KCurveSource::None => {}
        }
        if let Some((x, y)) = panel.measured_ks.sample.and_then(at_left) {
            buf.set_string(x, y, MEASURED_KS, theme.point());
        }
        for &(lx, lk) in &panel.excluded {
            if let Some((x, y)) = grid.cell(plot, lx, lk) {
                buf.set_string(x, y, EXCLUDED, theme.excluded_point());
            }
        }
        for &(lx, lk) in &panel.points {
            if let Some((x, y)) = grid.cell(plot, lx, lk) {
                buf.set_string(x, y, MEASURED, theme.point());
            }
        }
        // The measured K under the readings cursor, as the θ(h) view marks its reading.
        if let Some((x, y)) = state
            .selected_k_reading()
            .and_then(|k| k.point)
            .and_then(|(lx, lk)| grid.cell(plot, lx, lk))
        {
            buf.set_string(x, y, SELECTED, theme.selected_point());
        }
        Line::from(legend(panel, theme)).render(legend_row, buf);
    }
}

/// The legend line: glyphs, the curve's source, Ks and L.
fn legend(panel: &ConductivityPanel, theme: super::super::theme::Theme) -> Vec<Span<'static>> {
    let mut out = vec![
        Span::styled(MEASURED, theme.point()),
        Span::raw(format!(" K ({}) ", panel.points.len())),
    ];
    if !panel.excluded.is_empty() {
        out.push(Span::styled(EXCLUDED, theme.excluded_point()));
        out.push(Span::raw(format!(" flagged ({}) ", panel.excluded.len())));
    }
    if panel.measured_ks.sample.is_some() {
        out.push(Span::styled(MEASURED_KS, theme.point()));
        out.push(Span::raw(" Ks lab "));
    }
    out.push(Span::raw(match &panel.source {
        KCurveSource::Fitted { ks, l } => format!(
            "─ fit Ks {} L {}",
            with_se(ks.value, ks.se),
            with_se(l.value, l.se)
        ),
        KCurveSource::Predicted { ks } => format!(
            "─ predicted: layer Ks {}, L 0.5",
            significant(*ks, 3).unwrap_or_default()
        ),
        KCurveSource::None => "no K curve (no fit with K, no layer Ks)".to_string(),
    }));
    if panel.unplaced > 0 {
        out.push(Span::raw(format!(" · {} K(θ) not placed", panel.unplaced)));
    }
    out
}
