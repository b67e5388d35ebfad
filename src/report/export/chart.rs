//! The retention chart of one site as SVG (plotters' SVG backend, no system fonts): every
//! layer's fitted curves and measured points on a log suction axis.
//!
//! Nothing depends on colour alone: each layer has its own marker shape (filled or open
//! circle, triangle, square, diamond), readings left out of the fit carry a black cross, and a
//! curve is solid over the suctions its sample was measured at and dashed where it is
//! extrapolated. Readings at zero suction (saturation) sit on the left edge of the axis.
//! Text from the user (horizon labels) shows control characters escaped ([`layer_label`]);
//! the backend escapes XML's own special characters.

use plotters::coord::types::RangedCoordf64;
use plotters::element::{ComposedElement, DashedPathElement};
use plotters::prelude::*;

use super::snapshot::{SamplePart, SitePart, Snapshot};
use crate::analysis::water::curve_of;
use crate::model::number::significant;
use crate::model::retention::RetentionCurve;
use crate::model::units::CM_PER_KPA;
use crate::store::CampaignSettings;

/// A position in pixels (what legend closures receive).
type BackendCoord = (i32, i32);

/// Width and height of a chart, px.
pub const CHART_SIZE: (u32, u32) = (760, 480);

/// Colours of the layers, top down (Okabe & Ito's colour-blind-safe set, common practice).
const PALETTE: [RGBColor; 7] = [
    RGBColor(0x00, 0x72, 0xB2),
    RGBColor(0xD5, 0x5E, 0x00),
    RGBColor(0x00, 0x9E, 0x73),
    RGBColor(0xCC, 0x79, 0xA7),
    RGBColor(0xE6, 0x9F, 0x00),
    RGBColor(0x56, 0xB4, 0xE9),
    RGBColor(0x44, 0x44, 0x44),
];

/// Points sampled along each curve.
const CURVE_POINTS: usize = 241;

/// A marker shape; layers cycle through [`Marker::ALL`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Marker {
    /// Filled circle.
    Circle,
    /// Filled triangle, apex up.
    Triangle,
    /// Filled square.
    Square,
    /// Filled diamond.
    Diamond,
    /// Open circle.
    OpenCircle,
    /// Open triangle.
    OpenTriangle,
    /// Open square.
    OpenSquare,
    /// Open diamond.
    OpenDiamond,
}

impl Marker {
    /// Every shape, in the order layers take them.
    pub const ALL: [Marker; 8] = [
        Marker::Circle,
        Marker::Triangle,
        Marker::Square,
        Marker::Diamond,
        Marker::OpenCircle,
        Marker::OpenTriangle,
        Marker::OpenSquare,
        Marker::OpenDiamond,
    ];

    /// The shape of the layer at this position (top down).
    pub fn of_layer(index: usize) -> Marker {
        Marker::ALL[index % Marker::ALL.len()]
    }

    /// The word for the legend of the report's tables.
    pub fn describe(self) -> &'static str {
        match self {
            Marker::Circle => "filled circle",
            Marker::Triangle => "filled triangle",
            Marker::Square => "filled square",
            Marker::Diamond => "filled diamond",
            Marker::OpenCircle => "open circle",
            Marker::OpenTriangle => "open triangle",
            Marker::OpenSquare => "open square",
            Marker::OpenDiamond => "open diamond",
        }
    }

    fn is_filled(self) -> bool {
        matches!(
            self,
            Marker::Circle | Marker::Triangle | Marker::Square | Marker::Diamond
        )
    }

    /// The outline of the shape around (0, 0), px (circles excepted).
    fn outline(self) -> Vec<(i32, i32)> {
        match self {
            Marker::Triangle | Marker::OpenTriangle => vec![(0, -6), (5, 4), (-5, 4)],
            Marker::Square | Marker::OpenSquare => vec![(-4, -4), (4, -4), (4, 4), (-4, 4)],
            _ => vec![(0, -6), (5, 0), (0, 6), (-5, 0)],
        }
    }

    /// The outline closed (first point repeated), for open shapes drawn as a path.
    fn closed_outline(self) -> Vec<(i32, i32)> {
        let mut path = self.outline();
        path.push(path[0]);
        path
    }
}

/// The colour of the layer at this position.
pub fn layer_colour(index: usize) -> RGBColor {
    PALETTE[index % PALETTE.len()]
}

/// The colour as `#rrggbb`, for the report's tables.
pub fn colour_hex(c: RGBColor) -> String {
    format!("#{:02x}{:02x}{:02x}", c.0, c.1, c.2)
}

fn marker_style(shape: Marker, colour: RGBColor) -> ShapeStyle {
    ShapeStyle {
        color: colour.to_rgba(),
        filled: shape.is_filled(),
        stroke_width: 2,
    }
}

fn cross_style() -> ShapeStyle {
    ShapeStyle {
        color: BLACK.to_rgba(),
        filled: false,
        stroke_width: 2,
    }
}

/// Draws a layer's readings as markers of its shape, labelled in the legend with a short
/// line in its colour and the marker on it.
///
/// Every arm builds concrete element types: plotters boxes legend and series elements as
/// `'static`, which a backend borrowing the output string cannot be.
macro_rules! marker_series {
    ($chart:expr, $points:expr, $shape:expr, $colour:expr, $label:expr) => {{
        let style = marker_style($shape, $colour);
        let line = $colour.stroke_width(2);
        let legend_line =
            move |(x, y): (i32, i32)| PathElement::new(vec![(x - 10, y), (x + 10, y)], line);
        match $shape {
            Marker::Circle | Marker::OpenCircle => $chart
                .draw_series($points.map(|p| EmptyElement::at(p) + Circle::new((0, 0), 4, style)))
                .map(|anno| {
                    anno.label($label).legend(move |at| {
                        EmptyElement::at(at) + legend_line((0, 0)) + Circle::new((0, 0), 4, style)
                    });
                }),
            shape if shape.is_filled() => $chart
                .draw_series(
                    $points.map(|p| EmptyElement::at(p) + Polygon::new(shape.outline(), style)),
                )
                .map(|anno| {
                    anno.label($label).legend(move |at| {
                        EmptyElement::at(at)
                            + legend_line((0, 0))
                            + Polygon::new(shape.outline(), style)
                    });
                }),
            shape => {
                $chart
                    .draw_series($points.map(|p| {
                        EmptyElement::at(p) + PathElement::new(shape.closed_outline(), style)
                    }))
                    .map(|anno| {
                        anno.label($label).legend(move |at| {
                            EmptyElement::at(at)
                                + legend_line((0, 0))
                                + PathElement::new(shape.closed_outline(), style)
                        });
                    })
            }
        }
    }};
}

/// The cross marking a reading left out of the fit, around a point of any coordinates.
fn cross<C, DB: DrawingBackend>(
    at: C,
) -> ComposedElement<C, DB, PathElement<BackendCoord>, PathElement<BackendCoord>> {
    EmptyElement::at(at)
        + PathElement::new(vec![(-7, -7), (7, 7)], cross_style())
        + PathElement::new(vec![(-7, 7), (7, -7)], cross_style())
}

/// The suction axis in decades, (lowest, highest) exponent of 10, for readings whose lowest
/// positive suction is `lo` and highest `hi` (cm; `lo` infinite without any).
fn decades(settings: &CampaignSettings, lo: f64, hi: f64) -> (i32, i32) {
    let pwp_cm = settings.pwp_kpa * CM_PER_KPA;
    let lo_exp = if lo.is_finite() {
        (lo.log10().floor() as i32 - 1).min(-1)
    } else {
        -1
    };
    let hi_exp = (hi.max(pwp_cm).log10().ceil() as i32).clamp(5, 8);
    (lo_exp.max(-4), hi_exp)
}

/// `1`, `10`, `100`, `1000`, then `10⁴`, `10⁵` ... and `0.1`, `0.01` below 1.
pub fn decade_label(exp: i32) -> String {
    const SUPERSCRIPT: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    if (-3..=3).contains(&exp) {
        return significant(10f64.powi(exp), 3).unwrap_or_default();
    }
    let digits: String = exp
        .unsigned_abs()
        .to_string()
        .chars()
        .filter_map(|d| d.to_digit(10).map(|d| SUPERSCRIPT[d as usize]))
        .collect();
    format!("10{}{digits}", if exp < 0 { "⁻" } else { "" })
}

/// The upper end of the water-content axis: above every reading and theta_s (`top`), in
/// 0.05 steps.
fn theta_top(top: f64) -> f64 {
    (((top + 0.02) / 0.05).ceil() * 0.05).min(1.0)
}

/// The legend label of a layer: `Ap 0-20 cm` (control and bidirectional formatting characters
/// of the horizon shown escaped: XML has no place for most of them).
pub fn layer_label(part: &super::snapshot::LayerPart) -> String {
    let layer = &part.row.stored.layer;
    let depth = format!(
        "{}-{} cm",
        significant(layer.at.top_cm, 6).unwrap_or_default(),
        significant(layer.at.bottom_cm, 6).unwrap_or_default()
    );
    match &layer.horizon {
        Some(h) => format!("{} {depth}", crate::model::text::shown(h)),
        None => depth,
    }
}

type Chart<'a, 'b> = ChartContext<
    'a,
    SVGBackend<'b>,
    Cartesian2d<plotters::coord::combinators::LogCoord<f64>, RangedCoordf64>,
>;

pub(super) fn draw_err<E: std::fmt::Debug>(e: E) -> String {
    format!("cannot draw the chart: {e:?}")
}

/// The series legend of every report chart: upper right, on a white box with a grey border.
///
/// # Errors
/// The backend's drawing error, as text.
pub(super) fn draw_legend<'a, DB, CT>(chart: &mut ChartContext<'a, DB, CT>) -> Result<(), String>
where
    DB: DrawingBackend + 'a,
    CT: CoordTranslate,
{
    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::UpperRight)
        .background_style(WHITE.mix(0.9))
        .border_style(RGBColor(0x99, 0x99, 0x99))
        .label_font(("sans-serif", 14))
        .draw()
        .map_err(draw_err)
}

/// Vertical dashed lines at field capacity and the wilting point, labelled.
fn draw_reference_lines(
    chart: &mut Chart<'_, '_>,
    settings: &CampaignSettings,
    y_top: f64,
) -> Result<(), String> {
    let grey = RGBColor(0x77, 0x77, 0x77);
    for (label, kpa) in [("FC", settings.fc_kpa), ("PWP", settings.pwp_kpa)] {
        let h = kpa * CM_PER_KPA;
        chart
            .draw_series(DashedLineSeries::new(
                vec![(h, 0.0), (h, y_top)],
                3,
                4,
                grey.stroke_width(1),
            ))
            .map_err(draw_err)?;
        chart
            .draw_series(std::iter::once(Text::new(
                label.to_string(),
                (h * 1.1, y_top * 0.04),
                ("sans-serif", 13).into_font().color(&grey),
            )))
            .map_err(draw_err)?;
    }
    Ok(())
}

/// Points of a line in data coordinates.
type Line = Vec<(f64, f64)>;

/// A curve over `grid`, solid between the smallest and largest suction measured (`used`)
/// and in dashed pieces beyond (all dashed when nothing was measured).
fn split_curve(grid: &[f64], used: &[f64], theta: impl Fn(f64) -> f64) -> (Line, Vec<Line>) {
    let point = |h: f64| Some((h, theta(h))).filter(|(_, t)| t.is_finite());
    let lo = used.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = used.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    if !lo.is_finite() {
        return (
            Vec::new(),
            vec![grid.iter().copied().filter_map(point).collect()],
        );
    }
    let solid: Vec<(f64, f64)> = std::iter::once(lo)
        .chain(grid.iter().copied().filter(|h| *h > lo && *h < hi))
        .chain((hi > lo).then_some(hi))
        .filter_map(point)
        .collect();
    let wet: Vec<(f64, f64)> = grid
        .iter()
        .copied()
        .filter(|h| *h < lo)
        .chain(std::iter::once(lo))
        .filter_map(point)
        .collect();
    let dry: Vec<(f64, f64)> = std::iter::once(hi)
        .chain(grid.iter().copied().filter(|h| *h > hi))
        .filter_map(point)
        .collect();
    let pieces = [wet, dry].into_iter().filter(|p| p.len() > 1).collect();
    (solid, pieces)
}

/// Log-spaced suctions from 10^lo to 10^hi.
fn suction_grid(lo_exp: i32, hi_exp: i32) -> Vec<f64> {
    let (a, b) = (f64::from(lo_exp), f64::from(hi_exp));
    (0..CURVE_POINTS)
        .map(|i| 10f64.powf(a + (b - a) * i as f64 / (CURVE_POINTS - 1) as f64))
        .collect()
}

/// One layer of a site's chart: its legend label, each fitted sample's curve with the
/// suctions of its used readings, and every reading (suction, water content, left out).
#[derive(Debug, Clone)]
struct ChartLayer {
    id: i64,
    label: String,
    curves: Vec<(RetentionCurve, Vec<f64>)>,
    points: Vec<(f64, f64, bool)>,
}

/// What the chart of a site draws, gathered one batch of samples at a time (a few hundred
/// bytes a sample rather than the samples themselves), so an export holds no more of a
/// large site than this.
#[derive(Debug, Clone)]
pub struct ChartData {
    layers: Vec<ChartLayer>,
    has_data: bool,
    any_excluded: bool,
    lo_cm: f64,
    hi_cm: f64,
    top: f64,
}

impl ChartData {
    /// An empty chart with the legend of a site's layers (samples are added with
    /// [`ChartData::add`]).
    pub fn new(site: &SitePart) -> Self {
        Self {
            layers: site
                .layers
                .iter()
                .map(|l| ChartLayer {
                    id: l.row.stored.id,
                    label: layer_label(l),
                    curves: Vec::new(),
                    points: Vec::new(),
                })
                .collect(),
            has_data: false,
            any_excluded: false,
            lo_cm: f64::INFINITY,
            hi_cm: 0.0,
            top: 0.1,
        }
    }

    /// Add the samples of a snapshot (of this site), in order.
    pub fn add(&mut self, snapshot: &Snapshot) {
        for (_, layer, m) in snapshot.samples() {
            let Some(index) = self.layers.iter().position(|l| l.id == layer.row.stored.id) else {
                continue;
            };
            self.add_sample(index, m, &|id| snapshot.is_excluded(id));
        }
    }

    fn add_sample(&mut self, index: usize, m: &SamplePart, excluded: &dyn Fn(i64) -> bool) {
        self.has_data |= !m.readings.is_empty() || m.fit.fit.is_some();
        let curve = m
            .fit
            .fit
            .as_ref()
            .and_then(|f| f.report.as_ref())
            .and_then(curve_of);
        for r in &m.readings {
            let h = r.reading.h_cm;
            if h > 0.0 {
                self.lo_cm = self.lo_cm.min(h);
            }
            self.hi_cm = self.hi_cm.max(h);
            self.top = self.top.max(r.reading.theta);
        }
        let layer = &mut self.layers[index];
        if let Some(curve) = curve {
            self.top = self.top.max(curve.theta_range().1);
            let used = m
                .readings
                .iter()
                .filter(|r| !excluded(r.id))
                .map(|r| r.reading.h_cm)
                .collect();
            layer.curves.push((curve, used));
        }
        for r in &m.readings {
            let out = excluded(r.id);
            self.any_excluded |= out;
            layer.points.push((r.reading.h_cm, r.reading.theta, out));
        }
    }
}

/// The SVG chart of one site; `None` when the site has no readings and no fits.
///
/// # Errors
/// A drawing error from the backend (text of the error).
pub fn site_chart(snapshot: &Snapshot, site: &SitePart) -> Result<Option<String>, String> {
    let mut data = ChartData::new(site);
    for (index, layer) in site.layers.iter().enumerate() {
        for m in &layer.samples {
            data.add_sample(index, m, &|id| snapshot.is_excluded(id));
        }
    }
    chart_svg(&snapshot.settings, &data)
}

/// The SVG chart of gathered chart data; `None` when the site has no readings and no fits.
///
/// # Errors
/// A drawing error from the backend (text of the error).
pub fn chart_svg(settings: &CampaignSettings, data: &ChartData) -> Result<Option<String>, String> {
    if !data.has_data {
        return Ok(None);
    }
    let (lo_exp, hi_exp) = decades(settings, data.lo_cm, data.hi_cm);
    let (x_lo, x_hi) = (10f64.powi(lo_exp), 10f64.powi(hi_exp));
    let y_top = theta_top(data.top);
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, CHART_SIZE).into_drawing_area();
        root.fill(&WHITE).map_err(draw_err)?;
        let mut chart = ChartBuilder::on(&root)
            .margin_top(8)
            .margin_left(8)
            .margin_right(28)
            .margin_bottom(4)
            .x_label_area_size(44)
            .y_label_area_size(58)
            .top_x_label_area_size(46)
            // A hair wider than the decades, so both end decades get their label.
            .build_cartesian_2d((x_lo * 0.9999..x_hi * 1.0001).log_scale(), 0.0..y_top)
            .map_err(draw_err)?
            .set_secondary_coord(f64::from(lo_exp)..f64::from(hi_exp), 0.0..y_top);
        let decade_count = (hi_exp - lo_exp) as usize;
        chart
            .configure_mesh()
            .x_labels(decade_count + 1)
            .y_labels(((y_top / 0.05).round() as usize + 1).min(21))
            .x_label_formatter(&|v| decade_label(v.log10().round() as i32))
            .y_label_formatter(&|v| significant(*v, 3).unwrap_or_default())
            .x_desc("suction h, cm of water (log scale)")
            .y_desc("water content θ, m³/m³")
            .label_style(("sans-serif", 14))
            .axis_desc_style(("sans-serif", 15))
            .light_line_style(TRANSPARENT)
            .bold_line_style(RGBColor(0xdd, 0xdd, 0xdd))
            .draw()
            .map_err(draw_err)?;
        chart
            .configure_secondary_axes()
            .x_labels(decade_count + 1)
            .x_label_formatter(&|v| format!("pF {}", v.round()))
            .x_desc("pF = log10(h / cm)")
            .label_style(("sans-serif", 13))
            .axis_desc_style(("sans-serif", 13))
            .draw()
            .map_err(draw_err)?;
        draw_reference_lines(&mut chart, settings, y_top)?;
        let grid = suction_grid(lo_exp, hi_exp);
        for (index, layer) in data.layers.iter().enumerate() {
            let colour = layer_colour(index);
            for (curve, used) in &layer.curves {
                let used: Vec<f64> = used.iter().map(|h| h.max(x_lo)).collect();
                let (solid, extrapolated) = split_curve(&grid, &used, |h| curve.theta(h));
                chart
                    .draw_series(LineSeries::new(solid, colour.stroke_width(2)))
                    .map_err(draw_err)?;
                for part in extrapolated {
                    chart
                        .draw_series(DashedLineSeries::new(part, 6, 5, colour.stroke_width(1)))
                        .map_err(draw_err)?;
                }
            }
        }
        for (index, layer) in data.layers.iter().enumerate() {
            let colour = layer_colour(index);
            let shape = Marker::of_layer(index);
            let points: Vec<(f64, f64, bool)> = layer
                .points
                .iter()
                .map(|&(h, t, out)| (h.max(x_lo), t, out))
                .collect();
            marker_series!(
                chart,
                points.iter().map(|&(h, t, _)| (h, t)),
                shape,
                colour,
                layer.label.clone()
            )
            .map_err(draw_err)?;
            chart
                .draw_series(
                    points
                        .iter()
                        .filter(|p| p.2)
                        .map(|&(h, t, _)| cross((h, t))),
                )
                .map_err(draw_err)?;
        }
        let any_excluded = data.any_excluded;
        if any_excluded {
            chart
                .draw_series(std::iter::empty::<Circle<(f64, f64), i32>>())
                .map_err(draw_err)?
                .label("left out of the fit")
                .legend(cross);
        }
        chart
            .draw_series(std::iter::empty::<Circle<(f64, f64), i32>>())
            .map_err(draw_err)?
            .label("curve beyond the measured range")
            .legend(|(x, y)| {
                DashedPathElement::new(vec![(x - 10, y), (x + 10, y)], 6, 5, BLACK.stroke_width(1))
            });
        draw_legend(&mut chart)?;
        root.present().map_err(draw_err)?;
    }
    Ok(Some(svg))
}
