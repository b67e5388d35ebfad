//! The conductivity chart of a site in the HTML report: measured K against suction on log
//! axes, each joint fit's K(h) curve, and each core's measured Ks at the left edge.
//!
//! Gathered a batch of samples at a time like the retention chart ([`KChartData::add`]).

use plotters::prelude::*;

use super::chart::{CHART_SIZE, decade_label, draw_err, draw_legend, layer_colour, layer_label};
use super::snapshot::{SamplePart, SitePart, Snapshot};
use crate::fit::joint::JointReport;
use crate::store::conductivity::Where;

/// Points of each fitted K(h) curve.
const CURVE_POINTS: usize = 121;

/// One layer's part of the chart.
#[derive(Debug, Clone)]
struct KLayer {
    id: i64,
    label: String,
    /// Measured (h cm, K cm/day).
    points: Vec<(f64, f64)>,
    /// Joint fits.
    curves: Vec<JointReport>,
    /// Measured Ks, cm/day.
    ks: Vec<f64>,
}

/// What the conductivity chart of a site draws.
#[derive(Debug, Clone)]
pub struct KChartData {
    layers: Vec<KLayer>,
}

impl KChartData {
    /// An empty chart with the legend of a site's layers.
    pub fn new(site: &SitePart) -> Self {
        Self {
            layers: site
                .layers
                .iter()
                .map(|l| KLayer {
                    id: l.row.stored.id,
                    label: layer_label(l),
                    points: Vec::new(),
                    curves: Vec::new(),
                    ks: Vec::new(),
                })
                .collect(),
        }
    }

    /// Add the samples of a snapshot (of this site).
    pub fn add(&mut self, snapshot: &Snapshot) {
        for (_, layer, m) in snapshot.samples() {
            if let Some(index) = self.layers.iter().position(|l| l.id == layer.row.stored.id) {
                self.add_sample(index, m);
            }
        }
    }

    fn add_sample(&mut self, index: usize, m: &SamplePart) {
        let layer = &mut self.layers[index];
        let joint = m.joint.as_ref().map(|j| &j.report);
        for c in &m.conductivity {
            // K(theta) is drawn at the suction where the joint fit's curve holds that theta.
            let h = match c.reading.at {
                Where::Suction(h) => Some(h),
                Where::Water(theta) => {
                    joint.and_then(|r| r.kind.retention().suction_at(theta, &r.retention_values()))
                }
            };
            if let Some(h) = h.filter(|h| *h > 0.0) {
                layer.points.push((h, c.reading.k_cm_per_day));
            }
        }
        if let Some(ks) = m.ks.sample {
            layer.ks.push(ks);
        }
        if let Some(r) = joint {
            layer.curves.push(r.clone());
        }
    }

    fn is_empty(&self) -> bool {
        self.layers
            .iter()
            .all(|l| l.points.is_empty() && l.curves.is_empty())
    }
}

/// The conductivity chart of one site from a whole snapshot; `None` without conductivity.
///
/// # Errors
/// A drawing error from the backend (text of the error).
pub fn site_k_chart(site: &SitePart) -> Result<Option<String>, String> {
    let mut data = KChartData::new(site);
    for (index, layer) in site.layers.iter().enumerate() {
        for m in &layer.samples {
            data.add_sample(index, m);
        }
    }
    k_chart_svg(&data)
}

/// The SVG of gathered conductivity data; `None` when the site has no measured K and no joint
/// fit.
///
/// # Errors
/// A drawing error from the backend (text of the error).
pub fn k_chart_svg(data: &KChartData) -> Result<Option<String>, String> {
    if data.is_empty() {
        return Ok(None);
    }
    let hs = data
        .layers
        .iter()
        .flat_map(|l| l.points.iter().map(|p| p.0));
    let (h_lo, h_hi) = hs.fold((f64::INFINITY, 0.0_f64), |(a, b), h| (a.min(h), b.max(h)));
    let (h_lo, h_hi) = if h_lo.is_finite() {
        (h_lo, h_hi)
    } else {
        (1.0, 1e3)
    };
    let lo_exp = (h_lo.log10().floor() as i32 - 1).min(0);
    let hi_exp = (h_hi.log10().ceil() as i32).max(lo_exp + 2);
    let (x_lo, x_hi) = (10f64.powi(lo_exp), 10f64.powi(hi_exp));
    let grid: Vec<f64> = (0..CURVE_POINTS)
        .map(|i| {
            10f64.powf(
                f64::from(lo_exp)
                    + f64::from(hi_exp - lo_exp) * i as f64 / (CURVE_POINTS - 1) as f64,
            )
        })
        .collect();
    let curves: Vec<Vec<Vec<(f64, f64)>>> = data
        .layers
        .iter()
        .map(|l| {
            l.curves
                .iter()
                .map(|r| {
                    grid.iter()
                        .filter_map(|&h| r.conductivity_at(h).map(|k| (h, k)))
                        .filter(|(_, k)| *k > 0.0 && k.is_finite())
                        .collect()
                })
                .collect()
        })
        .collect();
    let ks_all = data.layers.iter().flat_map(|l| l.ks.iter().copied());
    let ks_fit = data
        .layers
        .iter()
        .flat_map(|l| l.curves.iter().map(JointReport::ks));
    let measured = data
        .layers
        .iter()
        .flat_map(|l| l.points.iter().map(|p| p.1));
    let (k_lo, k_hi) = measured
        .chain(ks_all)
        .chain(ks_fit)
        .fold((f64::INFINITY, 0.0_f64), |(a, b), k| (a.min(k), b.max(k)));
    // From a decade under the lowest value to a decade over the highest, at most twelve
    // decades (curves fall far below the measured K at the dry end and are clipped).
    let y_lo_exp = (k_lo.log10().floor() as i32 - 1).max(k_hi.log10().ceil() as i32 - 12);
    let y_hi_exp = (k_hi.log10().ceil() as i32).max(y_lo_exp + 1);
    let (y_lo, y_hi) = (10f64.powi(y_lo_exp), 10f64.powi(y_hi_exp));
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, CHART_SIZE).into_drawing_area();
        root.fill(&WHITE).map_err(draw_err)?;
        let mut chart = ChartBuilder::on(&root)
            .margin(8)
            .margin_right(28)
            .x_label_area_size(44)
            .y_label_area_size(70)
            .build_cartesian_2d(
                (x_lo * 0.9999..x_hi * 1.0001).log_scale(),
                (y_lo * 0.9999..y_hi * 1.0001).log_scale(),
            )
            .map_err(draw_err)?;
        chart
            .configure_mesh()
            .x_labels((hi_exp - lo_exp) as usize + 1)
            .y_labels((y_hi_exp - y_lo_exp) as usize + 1)
            .x_label_formatter(&|v| decade_label(v.log10().round() as i32))
            .y_label_formatter(&|v| decade_label(v.log10().round() as i32))
            .x_desc("suction h, cm of water (log scale)")
            .y_desc("conductivity K, cm/day (log scale)")
            .label_style(("sans-serif", 14))
            .axis_desc_style(("sans-serif", 15))
            .light_line_style(TRANSPARENT)
            .bold_line_style(RGBColor(0xdd, 0xdd, 0xdd))
            .draw()
            .map_err(draw_err)?;
        let clip = |k: f64| k.clamp(y_lo, y_hi);
        for (index, layer) in data.layers.iter().enumerate() {
            let colour = layer_colour(index);
            for curve in &curves[index] {
                let inside: Vec<(f64, f64)> =
                    curve.iter().filter(|(_, k)| *k >= y_lo).copied().collect();
                chart
                    .draw_series(LineSeries::new(inside, colour.stroke_width(2)))
                    .map_err(draw_err)?;
            }
            let mut points = layer.points.clone();
            points.retain(|(h, _)| *h >= x_lo && *h <= x_hi);
            chart
                .draw_series(
                    points
                        .iter()
                        .map(|&(h, k)| Circle::new((h, clip(k)), 4, colour.filled())),
                )
                .map_err(draw_err)?
                .label(layer.label.clone())
                .legend(move |(x, y)| Circle::new((x, y), 4, colour.filled()));
            // A core's measured Ks: a bar at the left edge.
            chart
                .draw_series(layer.ks.iter().map(|&ks| {
                    PathElement::new(
                        vec![(x_lo, clip(ks)), (x_lo * 2.0, clip(ks))],
                        colour.stroke_width(4),
                    )
                }))
                .map_err(draw_err)?;
        }
        chart
            .draw_series(std::iter::empty::<Circle<(f64, f64), i32>>())
            .map_err(draw_err)?
            .label("measured Ks (bar at the left edge)")
            .legend(|(x, y)| {
                PathElement::new(vec![(x - 10, y), (x + 10, y)], BLACK.stroke_width(4))
            });
        draw_legend(&mut chart)?;
        root.present().map_err(draw_err)?;
    }
    Ok(Some(svg))
}
