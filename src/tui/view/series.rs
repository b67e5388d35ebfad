//! The logger series screen: a site's sensors on the left; on the right the suction (log axis,
//! decade ticks at their true places, in the chosen unit) and the water content of the
//! selected sensor's depth, stacked on one time axis with dates. Each column draws the lowest
//! to highest record in it (the series is thinned when loaded); records with a live flag are
//! `x` and left out of the line; a reviewed record is `◆`.

use chrono::{DateTime, Datelike, NaiveDate};
use ratatui::buffer::Buffer;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::text::{Line, Span};
use ratatui::widgets::canvas::{Context, Line as CanvasLine};
use ratatui::widgets::{Paragraph, Row, Widget, Wrap};

use crate::model::domain::SensorKind;

use super::super::app::{AppState, AxisUnit, SensorSeries, SeriesData, plot_x};
use super::curve::{EXCLUDED, SELECTED};
use super::plot::{Grid, Tick, fine_ticks, render_canvas, x_ticks};
use super::{cursor_row, fit_width, framed, num, render_table, scroll_offset};

/// The series screen.
pub struct SeriesScreen<'a> {
    /// The state.
    pub state: &'a AppState,
}

/// `1 May 2026`, in UTC.
pub fn date_text(time: i64) -> String {
    DateTime::from_timestamp(time, 0)
        .map_or_else(String::new, |t| t.format("%-d %b %Y").to_string())
}

/// `2026-05-24 14:00 UTC`.
pub fn time_text(time: i64) -> String {
    DateTime::from_timestamp(time, 0)
        .map_or_else(String::new, |t| t.format("%Y-%m-%d %H:%M UTC").to_string())
}

/// The window for a title: `1 May – 31 Jul 2026`, or two full dates across a new year.
pub fn window_text(window: (i64, i64)) -> String {
    let (Some(a), Some(b)) = (
        DateTime::from_timestamp(window.0, 0),
        DateTime::from_timestamp(window.1, 0),
    ) else {
        return String::new();
    };
    if a.year() == b.year() {
        format!("{} – {}", a.format("%-d %b"), b.format("%-d %b %Y"))
    } else {
        format!("{} – {}", a.format("%-d %b %Y"), b.format("%-d %b %Y"))
    }
}

/// Spacings of the time ticks, finest first.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Step {
    Hours(i64),
    Days(i64),
    Week,
    Months(u32),
}

const STEPS: [Step; 11] = [
    Step::Hours(1),
    Step::Hours(3),
    Step::Hours(6),
    Step::Hours(12),
    Step::Days(1),
    Step::Days(2),
    Step::Week,
    Step::Months(1),
    Step::Months(2),
    Step::Months(3),
    Step::Months(6),
];

/// First day of the month `months` after January of year 0, as seconds since 1970 UTC.
fn month_start(months: i64) -> Option<i64> {
    let year = i32::try_from(months.div_euclid(12)).ok()?;
    let month = u32::try_from(months.rem_euclid(12)).ok()? + 1;
    NaiveDate::from_ymd_opt(year, month, 1)
        .and_then(|d| d.and_hms_opt(0, 0, 0))
        .map(|t| t.and_utc().timestamp())
}

fn step_times(step: Step, from: i64, to: i64, limit: usize) -> Option<Vec<i64>> {
    let mut out = Vec::new();
    let regular = |every: i64, offset: i64, out: &mut Vec<i64>| {
        let mut t = (from - offset).div_euclid(every) * every + offset;
        if t < from {
            t += every;
        }
        while t <= to && out.len() <= limit {
            out.push(t);
            t += every;
        }
    };
    match step {
        Step::Hours(n) => regular(n * 3600, 0, &mut out),
        Step::Days(n) => regular(n * 86_400, 0, &mut out),
        // 1970-01-05 was a Monday.
        Step::Week => regular(7 * 86_400, 4 * 86_400, &mut out),
        Step::Months(n) => {
            let start = DateTime::from_timestamp(from, 0)?;
            let n = i64::from(n);
            let mut m = i64::from(start.year()) * 12 + i64::from(start.month0());
            m = m.div_euclid(n) * n;
            while out.len() <= limit {
                let t = month_start(m)?;
                if t > to {
                    break;
                }
                if t >= from {
                    out.push(t);
                }
                m += n;
            }
        }
    }
    (out.len() <= limit).then_some(out)
}

/// Date ticks across a window for a plot `columns` wide: midnights, Mondays or month starts,
/// the finest spacing that leaves room for each label (`14 May`, `06:00`, `Jun`).
pub fn time_ticks(window: (i64, i64), columns: u16) -> Vec<Tick> {
    let limit = usize::from(columns / 9).max(1);
    for step in STEPS {
        let Some(times) = step_times(step, window.0, window.1, limit) else {
            continue;
        };
        return times
            .into_iter()
            .filter_map(|t| {
                let at = DateTime::from_timestamp(t, 0)?;
                let label = match step {
                    Step::Hours(_) if t % 86_400 != 0 => at.format("%H:%M").to_string(),
                    Step::Months(_) if at.month() == 1 => at.format("%b %Y").to_string(),
                    Step::Months(_) => at.format("%b").to_string(),
                    _ => at.format("%-d %b").to_string(),
                };
                Some((t as f64, label))
            })
            .collect();
    }
    Vec::new()
}

/// The y window and ticks of a sensor's plot: log10 of the suction (decades, at least one)
/// or the water content (to the next 0.01 past the records).
fn y_window(series: &SensorSeries, unit: AxisUnit, rows: u16) -> ([f64; 2], Vec<Tick>) {
    let (lo, hi) = series.range().unwrap_or((0.0, 1.0));
    match series.kind {
        SensorKind::Tensiometer => {
            let mut y = [plot_x(lo).floor(), plot_x(hi).ceil()];
            if y[1] - y[0] < 1.0 {
                y[1] = y[0] + 1.0;
            }
            let ticks = x_ticks(unit, y);
            (y, ticks)
        }
        SensorKind::WaterContent => {
            let mut y = [
                ((lo - 0.01) * 100.0).floor() / 100.0,
                ((hi + 0.01) * 100.0).ceil() / 100.0,
            ];
            y = [y[0].max(0.0), y[1].min(1.0)];
            if y[1] - y[0] < 0.02 {
                y[1] = (y[0] + 0.02).min(1.0);
            }
            (y, fine_ticks(y, rows))
        }
    }
}

/// A sensor's value on its plot's y axis.
fn plotted(kind: SensorKind, value: f64) -> f64 {
    match kind {
        SensorKind::Tensiometer => plot_x(value),
        SensorKind::WaterContent => value,
    }
}

/// Draw the thinned series on a canvas: each column's span, joined to the next column.
fn draw_series(
    ctx: &mut Context<'_>,
    data: &SeriesData,
    series: &SensorSeries,
    color: ratatui::style::Color,
) {
    let y = |v: f64| plotted(series.kind, v);
    let mut previous: Option<(usize, f64, f64)> = None;
    for b in &series.buckets {
        let Some(e) = b.values else {
            continue;
        };
        let x = data.bucket_time(b.index);
        ctx.draw(&CanvasLine {
            x1: x,
            y1: y(e.min),
            x2: x,
            y2: y(e.max),
            color,
        });
        if let Some((index, px, last)) = previous
            && index + 1 == b.index
        {
            ctx.draw(&CanvasLine {
                x1: px,
                y1: y(last),
                x2: x,
                y2: y(e.first),
                color,
            });
        }
        previous = Some((b.index, x, e.last));
    }
}

/// The heading above a sensor's plot.
fn heading(series: &SensorSeries, unit: AxisUnit) -> String {
    let what = match series.kind {
        SensorKind::Tensiometer => format!(
            "suction · {} · {}{}",
            series.sensor_id,
            unit.symbol(),
            if unit == AxisUnit::Pf { "" } else { " (log)" }
        ),
        SensorKind::WaterContent => format!("water content · {} · m3/m3", series.sensor_id),
    };
    format!(
        "{what} · {} records{}",
        series.records,
        if series.flagged > 0 {
            format!(", {} flagged", series.flagged)
        } else {
            String::new()
        }
    )
}

/// Both series of a depth, stacked on one time axis, drawn inside `area` (no border).
pub struct SeriesPlot<'a> {
    /// The state (units, theme).
    pub state: &'a AppState,
    /// The series.
    pub data: &'a SeriesData,
}

impl Widget for SeriesPlot<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let state = self.state;
        let theme = state.theme;
        let data = self.data;
        let plots: Vec<&SensorSeries> = [data.suction.as_ref(), data.water.as_ref()]
            .into_iter()
            .flatten()
            .collect();
        if plots.is_empty() {
            Paragraph::new("No records at this depth.").render(area, buf);
            return;
        }
        let n = plots.len() as u16;
        // Per plot: a heading and its rows; the last plot's axis labels and the legend.
        let overhead = n * 2 + 2;
        if area.height < overhead + 2 * n || area.width < 20 {
            Paragraph::new("Too small for the series: enlarge the terminal.")
                .wrap(Wrap { trim: true })
                .render(area, buf);
            return;
        }
        let rows = (area.height - overhead) / n;
        let windows: Vec<([f64; 2], Vec<Tick>)> = plots
            .iter()
            .map(|s| y_window(s, state.units, rows))
            .collect();
        let label_width = windows
            .iter()
            .flat_map(|(_, ticks)| ticks.iter().map(|t| t.1.chars().count()))
            .max()
            .unwrap_or(3)
            .max(3) as u16
            + 1;
        let x = [data.window.0 as f64, data.window.1 as f64];
        let mut y_at = area.y;
        let mut time_axis = Vec::new();
        for (i, (series, (y, ticks))) in plots.iter().zip(&windows).enumerate() {
            let last = i + 1 == plots.len();
            let heading_row = Rect::new(area.x, y_at, area.width, 1);
            Line::from(Span::styled(
                fit_width(&heading(series, state.units), usize::from(area.width)),
                theme.heading(),
            ))
            .render(heading_row, buf);
            let grid = Grid {
                x,
                y: *y,
                label_width,
                bottom_rows: if last { 2 } else { 1 },
            };
            let box_area = Rect::new(area.x, y_at + 1, area.width, rows + grid.bottom_rows);
            let plot = grid.plot_area(box_area);
            if time_axis.is_empty() {
                time_axis = time_ticks(data.window, plot.width);
            }
            grid.render_y_axis(box_area, buf, theme, ticks);
            grid.render_x_axis(box_area, buf, theme, &time_axis);
            let canvas = grid.canvas(|ctx| draw_series(ctx, data, series, theme.series()));
            render_canvas(&canvas, plot, buf);
            for b in &series.buckets {
                let Some(f) = b.flagged else { continue };
                let t = data.bucket_time(b.index);
                for v in [f.min, f.max] {
                    if let Some((cx, cy)) = grid.cell(plot, t, plotted(series.kind, v)) {
                        buf.set_string(cx, cy, EXCLUDED, theme.excluded_point());
                    }
                }
            }
            if let Some((t, v)) = series.mark
                && let Some((cx, cy)) = grid.cell(plot, t as f64, plotted(series.kind, v))
            {
                buf.set_string(cx, cy, SELECTED, theme.selected_point());
            }
            y_at = box_area.bottom();
        }
        let mut legend = vec![
            Span::raw("⡇ low–high per column  "),
            Span::styled(EXCLUDED, theme.excluded_point()),
            Span::raw(" flagged (not paired)"),
        ];
        if plots.iter().any(|s| s.mark.is_some()) {
            legend.push(Span::raw("  "));
            legend.push(Span::styled(SELECTED, theme.selected_point()));
            legend.push(Span::raw(" the record"));
        }
        legend.push(Span::raw("  (UTC)"));
        Line::from(legend).render(Rect::new(area.x, y_at, area.width, 1), buf);
    }
}

impl SeriesScreen<'_> {
    fn render_list(&self, area: Rect, buf: &mut Buffer) {
        let state = self.state;
        let theme = state.theme;
        let series = &state.series;
        let title = match &series.site {
            Some(site) => format!("Loggers · {site}"),
            None => "Loggers".to_string(),
        };
        let inner = framed(title, true, theme, area, buf);
        let sensors = series.site_sensors();
        if inner.height < 2 || sensors.is_empty() {
            return;
        }
        let plotted: Vec<&str> = series
            .data
            .iter()
            .flat_map(|d| d.suction.iter().chain(d.water.iter()))
            .map(|s| s.sensor_id.as_str())
            .collect();
        let header = Row::new(vec![" ", "id", "kind", "depth", "⚑"]).style(theme.heading());
        let height = usize::from(inner.height - 1);
        let offset = scroll_offset(series.cursor, sensors.len(), height);
        let rows = sensors
            .iter()
            .enumerate()
            .skip(offset)
            .take(height)
            .map(|(i, s)| {
                let row = Row::new(vec![
                    Line::from(if plotted.contains(&s.sensor_id.as_str()) {
                        "•"
                    } else {
                        " "
                    }),
                    Line::from(s.sensor_id.clone()),
                    Line::from(match s.kind {
                        SensorKind::Tensiometer => "tens.",
                        SensorKind::WaterContent => "water",
                    }),
                    Line::from(format!("{}cm", num(s.depth_cm, 4))),
                    Line::from(Span::styled(
                        if s.flagged > 0 {
                            format!("⚑{}", s.flagged)
                        } else {
                            String::new()
                        },
                        theme.flag(),
                    )),
                ]);
                cursor_row(row, i == series.cursor, true, theme)
            });
        let widths = [
            Constraint::Length(1),
            Constraint::Fill(1),
            Constraint::Length(5),
            Constraint::Length(5),
            Constraint::Length(4),
        ];
        render_table(header, rows, &widths, inner, buf);
    }

    /// Why nothing is plotted, when nothing is.
    fn empty_text(&self) -> Option<String> {
        let series = &self.state.series;
        if let Some(why) = &series.unavailable {
            return Some(format!("The logger series cannot be read: {why}"));
        }
        if !series.loaded {
            return Some("loading…".to_string());
        }
        let sites = series.sites();
        if sites.is_empty() {
            return Some(
                "No logger records in this campaign yet: `porewise import logger DB FILE...` \
                 imports tensiometer and water-content series."
                    .to_string(),
            );
        }
        if series.site_sensors().is_empty() {
            return Some(format!(
                "No logger series at {}. Sites with loggers: {} (] goes there).",
                series.site.as_deref().unwrap_or("this site"),
                sites.join(", ")
            ));
        }
        None
    }
}

impl Widget for SeriesScreen<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let state = self.state;
        let theme = state.theme;
        let list_width = (area.width / 4).clamp(26, 40);
        let [list, right] =
            Layout::horizontal([Constraint::Length(list_width), Constraint::Fill(1)]).areas(area);
        self.render_list(list, buf);
        let series = &state.series;
        let title = match (&series.data, series.current()) {
            (Some(d), Some(s)) => format!(
                "Series · {} · {} cm · {} · {}",
                s.site,
                num(s.depth_cm, 4),
                window_text(d.window),
                // A newer window is on its way: say so over the one still shown.
                if series.wanted.as_ref() == Some(&d.request) {
                    "←→ +- w"
                } else {
                    "loading…"
                }
            ),
            _ => "Series".to_string(),
        };
        let inner = framed(title, false, theme, right, buf);
        if let Some(text) = self.empty_text() {
            Paragraph::new(text)
                .wrap(Wrap { trim: true })
                .render(inner, buf);
            return;
        }
        match &series.data {
            Some(data) => SeriesPlot { state, data }.render(inner, buf),
            None => Paragraph::new("loading…").render(inner, buf),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn time_ticks_sit_on_midnights_mondays_or_month_starts() {
        let may1 = 1_777_593_600; // 2026-05-01T00:00:00Z, a Friday
        let season = (may1, may1 + 92 * 86_400 - 3600);
        let labels: Vec<String> = time_ticks(season, 70).into_iter().map(|t| t.1).collect();
        assert_eq!(labels, ["May", "Jun", "Jul"]);
        let weeks = time_ticks(season, 200);
        assert_eq!(weeks[0].1, "4 May", "the first Monday");
        assert!(
            weeks
                .windows(2)
                .all(|w| (w[1].0 - w[0].0 - 7.0 * 86_400.0).abs() < 1e-6)
        );
        let day = time_ticks((may1 + 3600, may1 + 86_400 + 3600), 60);
        let labels: Vec<&str> = day.iter().map(|t| t.1.as_str()).collect();
        assert_eq!(labels, ["06:00", "12:00", "18:00", "2 May"]);
        assert!(time_ticks((may1, may1 + 365 * 86_400), 20).len() <= 2);
        assert_eq!(window_text(season), "1 May – 31 Jul 2026");
        assert_eq!(time_text(may1 + 14 * 3600), "2026-05-01 14:00 UTC");
    }
}
