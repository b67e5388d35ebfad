//! Retention-curve axes: water content up, suction along a log axis whose decade ticks sit at
//! their true places.
//!
//! ratatui's chart spreads axis labels evenly, which is wrong for a log axis, so the axes are
//! drawn here cell by cell from data coordinates, and the curves go into a braille
//! [`Canvas`] with the same bounds. x is always log10(h / cm); switching units only moves the
//! ticks (kPa decades fall 1.0085 decades right of the cm ones) and relabels them.

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::{Color, Style};
use ratatui::symbols::Marker;
use ratatui::widgets::Widget;
use ratatui::widgets::canvas::{Canvas, Context, Line as CanvasLine, Points};

use crate::model::units::CM_PER_KPA;

use super::super::app::AxisUnit;
use super::super::theme::Theme;

/// Columns left of the plot for the water-content labels.
const Y_LABEL_WIDTH: u16 = 5;

/// The data window of a plot.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Axes {
    /// log10(h / cm) at the left and right edges.
    pub x: [f64; 2],
    /// Water content at the bottom and top.
    pub y: [f64; 2],
    /// Unit of the tick labels.
    pub unit: AxisUnit,
}

/// A tick: its x (log10 h / cm) and label.
pub type Tick = (f64, String);

/// Decade ticks inside `[x0, x1]` for a unit: 1, 10, 100 cm; 0.1, 1, 10 kPa; or pF 0, 1, 2.
pub fn x_ticks(unit: AxisUnit, x: [f64; 2]) -> Vec<Tick> {
    let label = |k: i32| match k {
        -3..=-1 => format!("{}", 10f64.powi(k)),
        0..=3 => format!("{}", 10i64.pow(k as u32)),
        _ => format!("1e{k}"),
    };
    let offset = match unit {
        AxisUnit::Cm | AxisUnit::Pf => 0.0,
        AxisUnit::Kpa => CM_PER_KPA.log10(),
    };
    let first = (x[0] - offset - 1e-9).ceil() as i32;
    let last = (x[1] - offset + 1e-9).floor() as i32;
    (first..=last)
        .map(|k| {
            let at = f64::from(k) + offset;
            let text = match unit {
                AxisUnit::Pf => format!("{k}"),
                _ => label(k),
            };
            (at, text)
        })
        .collect()
}

/// Water-content ticks from the bottom to the top, every 0.1 (0.2 when rows are few).
pub fn y_ticks(y: [f64; 2], rows: u16) -> Vec<f64> {
    let span = y[1] - y[0];
    let mut step = 0.1;
    while span / step > f64::from(rows.max(1)) / 1.5 && step < 1.0 {
        step *= 2.0;
    }
    let mut out = Vec::new();
    let mut v = (y[0] / step).ceil() * step;
    while v <= y[1] + 1e-9 {
        out.push(v);
        v += step;
    }
    out
}

/// A plot window in data coordinates over part of the terminal, with room on the left for
/// value labels and below for an axis line and its labels. Any axis can be drawn on it from a
/// list of ticks at their true places.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Grid {
    /// Data x at the left and right edges.
    pub x: [f64; 2],
    /// Data y at the bottom and top.
    pub y: [f64; 2],
    /// Columns left of the plot for the y labels and the axis.
    pub label_width: u16,
    /// Rows below the plot: 0, 1 (axis line) or 2 (axis line and labels).
    pub bottom_rows: u16,
}

impl Grid {
    /// The part of `area` the data go in.
    pub fn plot_area(&self, area: Rect) -> Rect {
        let left = self.label_width.min(area.width);
        Rect {
            x: area.x + left,
            y: area.y,
            width: area.width.saturating_sub(left),
            height: area.height.saturating_sub(self.bottom_rows),
        }
    }

    /// The cell of a data point in the plot area, `None` outside the window.
    pub fn cell(&self, plot: Rect, x: f64, y: f64) -> Option<(u16, u16)> {
        if plot.width == 0 || plot.height == 0 || !x.is_finite() || !y.is_finite() {
            return None;
        }
        let fx = (x - self.x[0]) / (self.x[1] - self.x[0]);
        let fy = (self.y[1] - y) / (self.y[1] - self.y[0]);
        if !(-1e-9..=1.0 + 1e-9).contains(&fx) || !(-1e-9..=1.0 + 1e-9).contains(&fy) {
            return None;
        }
        let col = (fx * f64::from(plot.width - 1)).round() as u16;
        let row = (fy * f64::from(plot.height - 1)).round() as u16;
        Some((plot.x + col, plot.y + row))
    }

    /// The y axis left of the plot, each tick's label on its row.
    pub fn render_y_axis(&self, area: Rect, buf: &mut Buffer, theme: Theme, ticks: &[Tick]) {
        let plot = self.plot_area(area);
        if plot.width < 4 || plot.height < 2 || plot.x == 0 {
            return;
        }
        let dim = theme.dim();
        let axis_col = plot.x - 1;
        for row in plot.top()..plot.bottom() {
            buf.set_string(axis_col, row, "│", dim);
        }
        for (v, text) in ticks {
            if let Some((_, row)) = self.cell(plot, self.x[0], *v) {
                let x = axis_col.saturating_sub(text.chars().count() as u16);
                buf.set_string(x.max(area.x), row, text, dim);
                buf.set_string(axis_col, row, "┤", dim);
            }
        }
    }

    /// The x axis below the plot with its ticks, and (when there is a row for them) each
    /// tick's label centred on its true place, skipping labels that would collide.
    pub fn render_x_axis(&self, area: Rect, buf: &mut Buffer, theme: Theme, ticks: &[Tick]) {
        let plot = self.plot_area(area);
        if plot.width < 4 || plot.height < 2 || plot.x == 0 || self.bottom_rows == 0 {
            return;
        }
        let dim = theme.dim();
        let axis_row = plot.bottom();
        let label_row = axis_row + 1;
        if axis_row < area.bottom() {
            buf.set_string(plot.x - 1, axis_row, "└", dim);
            for col in plot.left()..plot.right() {
                buf.set_string(col, axis_row, "─", dim);
            }
        }
        let mut free_from = area.x;
        for (x, text) in ticks {
            let Some((col, _)) = self.cell(plot, *x, self.y[0]) else {
                continue;
            };
            if axis_row < area.bottom() {
                buf.set_string(col, axis_row, "┴", dim);
            }
            if self.bottom_rows < 2 || label_row >= area.bottom() {
                continue;
            }
            let width = text.chars().count() as u16;
            let start = col
                .saturating_sub(width / 2)
                .max(area.x)
                .min(area.right().saturating_sub(width));
            if start >= free_from {
                buf.set_string(start, label_row, text, dim);
                free_from = start + width + 1;
            }
        }
    }

    /// A braille canvas with these bounds (to render into the plot area).
    pub fn canvas<F>(&self, paint: F) -> Canvas<'static, F>
    where
        F: Fn(&mut Context<'_>),
    {
        Canvas::default()
            .marker(Marker::Braille)
            .x_bounds(self.x)
            .y_bounds(self.y)
            .paint(paint)
    }
}

impl Axes {
    /// Axes for water contents up to `theta_max`, from 0.1 cm to 10^`x_max` cm.
    pub fn new(theta_max: f64, x_max: f64, unit: AxisUnit) -> Axes {
        let top = ((theta_max.max(0.05) + 0.02) * 10.0).ceil() / 10.0;
        Axes {
            x: [super::super::app::PLOT_X_MIN, x_max],
            y: [0.0, top.min(1.0)],
            unit,
        }
    }

    /// The grid these axes draw on.
    pub fn grid(&self) -> Grid {
        Grid {
            x: self.x,
            y: self.y,
            label_width: Y_LABEL_WIDTH,
            bottom_rows: 2,
        }
    }

    /// The part of `area` the curves go in (room left for labels on the left and below).
    pub fn plot_area(&self, area: Rect) -> Rect {
        self.grid().plot_area(area)
    }

    /// The cell of a data point in the plot area, `None` outside the window.
    pub fn cell(&self, plot: Rect, x: f64, y: f64) -> Option<(u16, u16)> {
        self.grid().cell(plot, x, y)
    }

    /// Draw the axes, ticks and labels around the plot area of `area`.
    pub fn render_axes(&self, area: Rect, buf: &mut Buffer, theme: Theme) {
        let grid = self.grid();
        let rows = grid.plot_area(area).height;
        let y: Vec<Tick> = y_ticks(self.y, rows)
            .into_iter()
            .map(|v| (v, format!("{v:.1}")))
            .collect();
        grid.render_y_axis(area, buf, theme, &y);
        grid.render_x_axis(area, buf, theme, &x_ticks(self.unit, self.x));
    }

    /// A braille canvas over the plot area with these bounds.
    pub fn canvas<F>(&self, paint: F) -> Canvas<'static, F>
    where
        F: Fn(&mut Context<'_>),
    {
        self.grid().canvas(paint)
    }

    /// A vertical dashed marker line at `x` with a label at the top (FC, PWP).
    pub fn render_marker(&self, plot: Rect, buf: &mut Buffer, x: f64, label: &str, style: Style) {
        let Some((col, _)) = self.cell(plot, x, self.y[1]) else {
            return;
        };
        for row in (plot.top()..plot.bottom()).step_by(2) {
            let cell = &mut buf[(col, row)];
            if cell.symbol() == " " {
                cell.set_symbol("┆").set_style(style);
            }
        }
        let width = label.chars().count() as u16;
        let start = if col + 1 + width <= plot.right() {
            col + 1
        } else {
            col.saturating_sub(width)
        };
        buf.set_string(start, plot.top(), label, style);
    }
}

/// Ticks every `step` (the smallest of 0.01, 0.02, 0.05, 0.1, 0.2, 0.5 and 1 that leaves a
/// row and a half per tick) from the bottom to the top, labelled with as many decimals as the
/// step needs.
pub fn fine_ticks(y: [f64; 2], rows: u16) -> Vec<Tick> {
    let span = y[1] - y[0];
    let room = f64::from(rows.max(1)) / 1.5;
    let (step, decimals) = [
        (0.01, 2),
        (0.02, 2),
        (0.05, 2),
        (0.1, 1),
        (0.2, 1),
        (0.5, 1),
        (1.0, 0),
    ]
    .into_iter()
    .find(|(step, _)| span / step <= room)
    .unwrap_or((1.0, 0));
    let mut out = Vec::new();
    let mut k = (y[0] / step - 1e-9).ceil();
    while k * step <= y[1] + 1e-9 {
        let v = k * step;
        out.push((v, format!("{v:.decimals$}")));
        k += 1.0;
    }
    out
}

/// Draw a polyline of (x, theta) points on a canvas context.
pub fn draw_polyline(ctx: &mut Context<'_>, points: &[(f64, f64)], color: Color) {
    for pair in points.windows(2) {
        ctx.draw(&CanvasLine {
            x1: pair[0].0,
            y1: pair[0].1,
            x2: pair[1].0,
            y2: pair[1].1,
            color,
        });
    }
}

/// Draw every other point of a line, so it reads as dotted beside a solid curve.
pub fn draw_dotted(ctx: &mut Context<'_>, points: &[(f64, f64)], color: Color) {
    let coords: Vec<(f64, f64)> = points.iter().step_by(2).copied().collect();
    ctx.draw(&Points {
        coords: &coords,
        color,
    });
}

/// Render a canvas into the plot area.
pub fn render_canvas<F>(canvas: &Canvas<'_, F>, plot: Rect, buf: &mut Buffer)
where
    F: Fn(&mut Context<'_>),
{
    canvas.render(plot, buf);
}

#[cfg(test)]
mod tests {
    #![allow(clippy::float_cmp)]

    use super::*;

    #[test]
    fn decade_ticks_sit_at_their_true_places() {
        let cm = x_ticks(AxisUnit::Cm, [-1.0, 5.0]);
        let labels: Vec<&str> = cm.iter().map(|(_, l)| l.as_str()).collect();
        assert_eq!(labels, ["0.1", "1", "10", "100", "1000", "1e4", "1e5"]);
        assert!(
            cm.iter()
                .zip(-1..)
                .all(|((x, _), k)| (*x - f64::from(k)).abs() < 1e-12)
        );
        // 1 kPa = 10.197 cm: the kPa decades are log10(10.197) = 1.0085 right of the cm ones
        // (DESIGN: standard gravity).
        let kpa = x_ticks(AxisUnit::Kpa, [-1.0, 5.0]);
        let one = kpa.iter().find(|(_, l)| l == "1").expect("1 kPa");
        assert!((one.0 - CM_PER_KPA.log10()).abs() < 1e-12);
        assert_eq!(kpa.first().map(|t| t.1.as_str()), Some("0.01"));
        assert_eq!(kpa.last().map(|t| t.1.as_str()), Some("1000"));
        let pf = x_ticks(AxisUnit::Pf, [-1.0, 5.0]);
        assert_eq!(pf.len(), 7);
        assert_eq!(pf[1], (0.0, "0".to_string()));
    }

    #[test]
    fn cells_map_the_corners_and_the_ticks_exactly() {
        let axes = Axes::new(0.45, 5.0, AxisUnit::Cm);
        assert_eq!(axes.y, [0.0, 0.5]);
        let area = Rect::new(0, 0, 65, 12);
        let plot = axes.plot_area(area);
        assert_eq!((plot.x, plot.width, plot.height), (5, 60, 10));
        assert_eq!(axes.cell(plot, -1.0, 0.5), Some((5, 0)));
        assert_eq!(axes.cell(plot, 5.0, 0.0), Some((64, 9)));
        // 100 cm is x = 2: half way along six decades -> column 5 + 29.5 rounded.
        assert_eq!(axes.cell(plot, 2.0, 0.25).map(|c| c.0), Some(35));
        assert_eq!(axes.cell(plot, 5.5, 0.2), None);
        let mut buf = Buffer::empty(area);
        axes.render_axes(area, &mut buf, Theme::monochrome());
        // Each decade label is centred on its tick: "100" on columns 34..=36.
        let labels: String = (0..65).map(|x| buf[(x, 11)].symbol().to_string()).collect();
        assert_eq!(labels.find("100"), Some(34), "{labels:?}");
        assert_eq!(buf[(35, 10)].symbol(), "┴");
    }

    #[test]
    fn y_ticks_thin_out_on_short_plots() {
        assert_eq!(y_ticks([0.0, 0.5], 20).len(), 6);
        assert_eq!(y_ticks([0.0, 0.5], 4), vec![0.0, 0.2, 0.4]);
        let fine = fine_ticks([0.12, 0.33], 10);
        let labels: Vec<&str> = fine.iter().map(|t| t.1.as_str()).collect();
        assert_eq!(labels, ["0.15", "0.20", "0.25", "0.30"]);
        assert_eq!(fine_ticks([0.0, 0.5], 4).len(), 3);
    }

    #[test]
    fn a_grid_without_label_rows_draws_no_x_labels() {
        let grid = Grid {
            x: [0.0, 10.0],
            y: [0.0, 1.0],
            label_width: 5,
            bottom_rows: 1,
        };
        let area = Rect::new(0, 0, 30, 6);
        assert_eq!(grid.plot_area(area), Rect::new(5, 0, 25, 5));
        let mut buf = Buffer::empty(area);
        grid.render_x_axis(area, &mut buf, Theme::monochrome(), &[(5.0, "mid".into())]);
        assert_eq!(buf[(17, 5)].symbol(), "┴");
        let text: String = (0..30).map(|x| buf[(x, 5)].symbol().to_string()).collect();
        assert!(!text.contains("mid"), "{text}");
    }
}
