//! `report.html`: one self-contained page (inline CSS and SVG, no script, no network) with a
//! chart and tables per site, the flagged readings, how every number was computed and the
//! cautions.
//!
//! The page is XHTML-compatible HTML5 (every element closed, attributes quoted, no named
//! entities beyond the five of XML), so it parses as XML as well as in any browser. Every text
//! that comes from the user (names, codes, horizons, notes, flag reasons) goes through
//! [`escape`]. The export time is on one line of its own (`<p class="exported">`); nothing
//! else in the page changes between two exports of the same campaign.

use crate::analysis::texture::{layer_estimate, pedotransfer_estimate};
use crate::model::texture::TextureClass;
use std::fmt::Write as _;

use super::chart::{Marker, colour_hex, layer_colour, layer_label};
use super::snapshot::{ReadingFlag, SitePart, SiteTally, Snapshot, models_in};
use super::tables::state_detail;
use crate::analysis::{FitDerived, SumInterval};
use crate::fit::{FitReport, Interval95, IntervalMethod, IntervalScale};
use crate::model::domain::SampleKind;
use crate::model::number::significant;
use crate::model::retention::ModelKind;
use crate::model::retention::fredlund_xing::H_DRY_CM;
use crate::model::text::{is_hidden_control, push_escaped};
use crate::model::units::CM_PER_KPA;
use crate::report::fits::plus_minus;
use crate::store::fits::FitState;

/// Significant digits of values in the page's tables.
const DIGITS: usize = 4;
/// Significant digits of standard errors.
const SE_DIGITS: usize = 2;
/// Columns of the parameter table.
const PARAMETER_COLUMNS: usize = 13;
/// What an empty (not applicable) cell shows.
const NONE: &str = "–";

/// Escape text for HTML and XML content and attribute values.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            // Control characters other than tab and newlines are not allowed in XML, and
            // bidirectional overrides would reorder the page: both shown escaped (`\u{1b}`).
            c if is_hidden_control(c) && !matches!(c, '\t' | '\n' | '\r') => {
                push_escaped(&mut out, c);
            }
            c => out.push(c),
        }
    }
    out
}

fn num(v: Option<f64>, digits: usize) -> String {
    v.and_then(|v| significant(v, digits))
        .unwrap_or_else(|| NONE.to_string())
}

/// A derived value with its 95 % interval: `0.284 ± 0.012` (delta method, linear scale), or
/// the value over `95 % 38.5…70.3, log scale` (or `, Monte Carlo`).
fn with_interval(value: Option<f64>, interval: Option<&Interval95>) -> String {
    let Some(v) = value else {
        return NONE.to_string();
    };
    match interval {
        None => num(Some(v), DIGITS),
        Some(i) if i.is_symmetric() => escape(&plus_minus(v, i.half_width())).replace('±', " ± "),
        Some(i) => format!(
            "{}<br/><span class=\"muted\">{}</span>",
            num(Some(v), DIGITS),
            interval_ends(i)
        ),
    }
}

/// `95 % 38.5…70.3, log scale` (or `, Monte Carlo`): an interval given by its ends.
fn interval_ends(i: &Interval95) -> String {
    format!(
        "95&#160;% {}…{}, {}",
        num(Some(i.lo95), 3),
        num(Some(i.hi95), 3),
        if i.method == IntervalMethod::MonteCarlo {
            "Monte Carlo"
        } else {
            "log scale"
        }
    )
}

/// The air entry, the suction at Se = 1/2 and (with Ks) K at FC and PWP, one per line, each
/// with its 95 % interval (log scale, so given as its ends).
fn more_derived_cell(d: &FitDerived) -> String {
    let (v, i) = (&d.values, &d.intervals);
    let lines = [
        (
            "air entry",
            v.air_entry.as_ref().map(|a| a.suction_cm),
            i.air_entry_cm.as_ref(),
            "cm",
        ),
        (
            "h at S<sub>e</sub> = ½",
            v.suction_at_half_saturation_cm,
            i.suction_at_half_saturation_cm.as_ref(),
            "cm",
        ),
        (
            "K at FC",
            d.k_field_capacity_cm_per_day,
            i.k_field_capacity_cm_per_day.as_ref(),
            "cm/day",
        ),
        (
            "K at PWP",
            d.k_wilting_point_cm_per_day,
            i.k_wilting_point_cm_per_day.as_ref(),
            "cm/day",
        ),
    ];
    let shown: Vec<String> = lines
        .into_iter()
        .filter(|(_, value, _, _)| value.is_some())
        .map(|(name, value, interval, unit)| {
            let range = interval.map_or_else(String::new, |i| {
                format!(" <span class=\"muted\">({})</span>", interval_ends(i))
            });
            format!("{name} {} {unit}{range}", num(value, DIGITS))
        })
        .collect();
    if shown.is_empty() {
        NONE.to_string()
    } else {
        shown.join("<br/>")
    }
}

/// A layer or profile value with its 95 % interval: `24.6 ± 2.0`.
fn with_sum_interval(value: Option<f64>, interval: Option<SumInterval>) -> String {
    match (value, interval) {
        (None, _) => NONE.to_string(),
        (Some(v), Some(i)) => escape(&plus_minus(v, i.half_width())).replace('±', " ± "),
        (Some(v), None) => num(Some(v), DIGITS),
    }
}

fn opt_text(v: Option<&str>) -> String {
    v.map_or_else(|| NONE.to_string(), escape)
}

/// What the page needs besides the snapshot.
#[derive(Debug, Clone, Copy)]
pub struct PageMeta<'a> {
    /// Export time, RFC 3339.
    pub exported_at: &'a str,
    /// Fingerprint of the exported content.
    pub fingerprint: &'a str,
}

const STYLE: &str = "
body { font-family: system-ui, -apple-system, 'Segoe UI', Roboto, 'Helvetica Neue', Arial, sans-serif;
       color: #1a1a1a; margin: 0 auto; max-width: 1400px; padding: 1rem 1.5rem 3rem; line-height: 1.45; }
h1 { font-size: 1.7rem; margin-bottom: 0.2rem; }
h2 { font-size: 1.35rem; border-bottom: 2px solid #ccc; padding-bottom: 0.2rem; margin-top: 2.4rem; }
h3 { font-size: 1.1rem; margin-top: 1.4rem; }
table { border-collapse: collapse; font-size: 0.86rem; margin: 0.5rem 0 1rem; }
th, td { border: 1px solid #ccc; padding: 0.2rem 0.45rem; vertical-align: top; }
th { background: #f0f0f0; text-align: left; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
tr.total td { font-weight: bold; background: #fafafa; }
table.meta td, table.meta th { border: none; padding: 0.05rem 1rem 0.05rem 0; background: none; }
table.meta { font-size: 0.92rem; color: #333; }
td.params, td.code, td.model, td.layer { white-space: nowrap; }
.wide { overflow-x: auto; }
.wide table { font-size: 0.82rem; }
tr.note td { font-size: 0.8rem; color: #5a3500; background: #fffaf3; border-top: none; }
.caution { border-left: 5px solid #b35900; background: #fff6ec; padding: 0.5rem 1rem; }
figure { margin: 0.5rem 0 1rem; }
figure svg { max-width: 100%; height: auto; border: 1px solid #ddd; }
figcaption { font-size: 0.85rem; color: #444; max-width: 760px; }
.swatch { display: inline-block; width: 0.9rem; height: 0.9rem; vertical-align: middle; margin-right: 0.3rem; }
.eq { font-family: 'Cambria Math', 'STIX Two Math', 'Times New Roman', serif; font-size: 1.05rem; }
.stale { color: #8a4b00; font-weight: bold; }
.muted { color: #666; }
code { font-size: 0.9em; }
@media print { h2 { page-break-before: always; } figure svg { border: none; } .wide { overflow: visible; } }
";

/// What the page header counts: the whole export, summed over its sites.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Totals {
    /// Sites.
    pub sites: usize,
    /// Samples.
    pub samples: usize,
    /// Readings.
    pub readings: usize,
}

impl Totals {
    /// Add a snapshot's sites, samples and readings.
    pub fn add(&mut self, s: &Snapshot) {
        self.sites += s.sites.len();
        self.samples += s.sample_count();
        self.readings += s.samples().map(|(_, _, m)| m.readings.len()).sum::<usize>();
    }

    /// Add one site with these counts.
    pub fn add_site(&mut self, tally: &SiteTally) {
        self.sites += 1;
        self.samples += tally.samples;
        self.readings += tally.readings;
    }
}

/// The page of a snapshot with its charts (one per site, `None` for a site without data).
///
/// An export writes the same page in parts, one site at a time: [`page_start`] (with the
/// [`contents_row`]s), each [`site_section`], the flagged readings ([`flagged_start`],
/// [`flagged_rows`], [`flagged_end`]) and [`page_end`].
pub fn report_html(snapshot: &Snapshot, meta: PageMeta<'_>, charts: &[Option<String>]) -> String {
    let mut totals = Totals::default();
    totals.add(snapshot);
    let mut contents = String::new();
    let mut sections = String::new();
    for (index, site) in snapshot.sites.iter().enumerate() {
        let mut tally = SiteTally::default();
        tally.add(&Snapshot {
            sites: vec![site.clone()],
            ..snapshot.clone()
        });
        contents_row(&mut contents, index, site, &tally);
        site_section(
            &mut sections,
            snapshot,
            index,
            site,
            charts.get(index).and_then(Option::as_deref),
        );
    }
    let mut flagged = String::new();
    let count = flagged_rows(&mut flagged, snapshot);
    let mut out = page_start(snapshot, meta, totals, &contents);
    out.push_str(&sections);
    out.push_str(&flagged_start(count));
    out.push_str(&flagged);
    out.push_str(&flagged_end(count));
    let models = models_in(snapshot.samples().map(|(_, _, m)| m));
    out.push_str(&page_end(snapshot, meta, &models));
    out
}

/// The page up to the first site section: head, header (with the export's totals),
/// cautions, and the table of sites made of `contents` ([`contents_row`]s).
pub fn page_start(frame: &Snapshot, meta: PageMeta<'_>, totals: Totals, contents: &str) -> String {
    let mut out = String::new();
    let name = escape(&frame.settings.name);
    let _ = write!(
        out,
        "<!DOCTYPE html>\n<html xmlns=\"http://www.w3.org/1999/xhtml\" lang=\"en\">\n<head>\n\
         <meta charset=\"utf-8\"/>\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"/>\n\
         <meta name=\"generator\" content=\"porewise {version}\"/>\n\
         <title>{name}: retention campaign summary</title>\n<style>{STYLE}</style>\n</head>\n<body>\n",
        version = env!("CARGO_PKG_VERSION"),
    );
    header(&mut out, frame, meta, totals);
    cautions(&mut out);
    contents_start(&mut out);
    out.push_str(contents);
    contents_end(&mut out);
    out
}

/// The page after the flagged readings: how the numbers were computed (for these models)
/// and the footer.
pub fn page_end(frame: &Snapshot, meta: PageMeta<'_>, models: &[ModelKind]) -> String {
    let mut out = String::new();
    methods(&mut out, frame, models);
    let _ = write!(
        out,
        "<hr/>\n<p class=\"muted\">Written by porewise {} from the campaign file; content \
         fingerprint <code>{}</code>.</p>\n</body>\n</html>\n",
        env!("CARGO_PKG_VERSION"),
        escape(meta.fingerprint)
    );
    out
}

fn header(out: &mut String, s: &Snapshot, meta: PageMeta<'_>, totals: Totals) {
    let settings = &s.settings;
    let _ = writeln!(
        out,
        "<h1>{}</h1>\n<p>Soil-water retention campaign summary.</p>",
        escape(&settings.name)
    );
    if let Some(d) = &settings.description {
        let _ = writeln!(out, "<p>{}</p>", escape(d));
    }
    let Totals {
        sites,
        samples,
        readings,
    } = totals;
    let fc_cm = settings.fc_kpa * CM_PER_KPA;
    let pwp_cm = settings.pwp_kpa * CM_PER_KPA;
    let _ = writeln!(out, "<table class=\"meta\">\n<tbody>");
    let item = |out: &mut String, term: &str, value: String| {
        let _ = writeln!(out, "<tr><th>{term}</th><td>{value}</td></tr>");
    };
    item(
        out,
        "Scope",
        match &s.site_filter {
            Some(code) => format!("site {} only", escape(code)),
            None => "the whole campaign".to_string(),
        },
    );
    item(
        out,
        "Contents",
        format!("{sites} sites, {samples} samples, {readings} readings"),
    );
    item(
        out,
        "Field capacity (FC)",
        format!(
            "{} kPa = {} cm (pF {})",
            num(Some(settings.fc_kpa), 6),
            num(Some(fc_cm), 5),
            num(Some(fc_cm.log10()), 3)
        ),
    );
    item(
        out,
        "Permanent wilting point (PWP)",
        format!(
            "{} kPa = {} cm (pF {})",
            num(Some(settings.pwp_kpa), 6),
            num(Some(pwp_cm), 5),
            num(Some(pwp_cm.log10()), 3)
        ),
    );
    item(
        out,
        "Root zone for profile sums",
        format!("0–{} cm", num(Some(s.root_zone_cm), 6)),
    );
    item(
        out,
        "Campaign file created",
        settings
            .created_at
            .format("%Y-%m-%d %H:%M:%S UTC")
            .to_string(),
    );
    item(
        out,
        "Program",
        format!("porewise {}", env!("CARGO_PKG_VERSION")),
    );
    item(
        out,
        "Content fingerprint",
        format!("<code>{}</code> (SHA-256)", escape(meta.fingerprint)),
    );
    let _ = writeln!(out, "</tbody>\n</table>");
    let _ = writeln!(
        out,
        "<p class=\"exported\">Exported at {}.</p>",
        escape(meta.exported_at)
    );
}

fn cautions(out: &mut String) {
    out.push_str(
        "<div class=\"caution\" id=\"cautions\">\n<h2 style=\"border: none; margin-top: 0.6rem\">Cautions</h2>\n<ul>\n\
         <li>Fitted parameters are <strong>estimates</strong> from a handful of readings per \
         sample; their standard errors and 95&#160;% intervals state only the fit's own \
         uncertainty, not that of sampling or measurement.</li>\n\
         <li>A curve <strong>extrapolated</strong> beyond the suctions measured on its sample \
         (dashed in the charts) is uncertain, and so is everything derived from it: water \
         content at field capacity or wilting point, available water, conductivity.</li>\n\
         <li>Layer and profile available water are means over few cores; stale fits (readings \
         changed since the fit) are included and marked. Their 95&#160;% intervals combine each \
         core's fit uncertainty with the variation between cores estimated over the campaign; \
         they do not cover the choice of model, errors shared by a lab's measurements, or a \
         layer's cores missing its true variability.</li>\n\
         <li>Design uses such as irrigation design, slope stability, landfill or mine-waste \
         covers and contaminant transport <strong>defer to local codes and licensed \
         professional practice</strong>; this summary does not replace either.</li>\n\
         </ul>\n</div>\n",
    );
}

fn contents_start(out: &mut String) {
    let _ = writeln!(
        out,
        "<h2 id=\"sites\">Sites</h2>\n<table>\n<thead><tr><th>site</th><th>name</th>\
         <th>latitude, °</th><th>longitude, °</th><th>elevation, m</th><th>layers</th>\
         <th>samples</th><th>readings</th><th>flagged</th><th>profile available water, mm</th>\
         </tr></thead>\n<tbody>"
    );
}

/// The row of one site in the table of sites (`index` counts the export's sites from 0),
/// with the counts of its samples.
pub fn contents_row(out: &mut String, index: usize, part: &SitePart, tally: &SiteTally) {
    let site = &part.row.stored.site;
    let _ = writeln!(
        out,
        "<tr><td><a href=\"#site-{n}\">{code}</a></td><td>{name}</td><td class=\"num\">{lat}</td>\
         <td class=\"num\">{lon}</td><td class=\"num\">{elev}</td><td class=\"num\">{layers}</td>\
         <td class=\"num\">{samples}</td><td class=\"num\">{readings}</td>\
         <td class=\"num\">{flagged}</td><td class=\"num\">{water}</td></tr>",
        n = index + 1,
        code = escape(&site.code),
        name = opt_text(site.name.as_deref()),
        lat = num(site.latitude, 8),
        lon = num(site.longitude, 8),
        elev = num(site.elevation_m, 5),
        layers = part.layers.len(),
        samples = tally.samples,
        readings = tally.readings,
        flagged = tally.flagged,
        water = profile_total(part),
    );
}

fn contents_end(out: &mut String) {
    let _ = writeln!(
        out,
        "</tbody>\n</table>\n<p><a href=\"#flagged\">Flagged readings</a> · \
         <a href=\"#methods\">How the numbers were computed</a> · \
         <a href=\"#cautions\">Cautions</a></p>"
    );
}

/// `123.4 ± 8.1` or `≥ 98.7 ± 6.1` when part of the root zone has no data.
fn profile_total(part: &SitePart) -> String {
    part.profile.as_ref().map_or_else(
        || NONE.to_string(),
        |p| {
            let total = with_sum_interval(Some(p.total_mm), p.total_mm_interval);
            if p.uncovered_cm() > 0.0 {
                format!("≥ {total}")
            } else {
                total
            }
        },
    )
}

/// `theta_r = 0.0451 ± 0.0032 m3/m3`, one per line.
fn parameters_cell(report: &FitReport) -> String {
    report
        .parameters
        .iter()
        .map(|p| {
            let unit = if p.unit == "-" || p.unit.is_empty() {
                String::new()
            } else {
                format!(" {}", escape(&p.unit))
            };
            let value = num(Some(p.value), DIGITS);
            let detail = if p.fixed {
                " (fixed)".to_string()
            } else if p.at_bound.is_some() {
                " (on a bound)".to_string()
            } else {
                // One-sided at a kink: approximate, and said so.
                let approx = if p.kink_cm.is_some() { "≈" } else { "" };
                p.se.and_then(|se| significant(se, SE_DIGITS))
                    .map(|se| format!(" ± {approx}{se}"))
                    .unwrap_or_default()
            };
            let interval = match (p.ci95, p.ci95_scale) {
                (Some([lo, hi]), Some(IntervalScale::Log)) => format!(
                    " (95&#160;%: {}–{}, log scale)",
                    num(Some(lo), SE_DIGITS),
                    num(Some(hi), SE_DIGITS)
                ),
                _ => String::new(),
            };
            let kink = p
                .kink_cm
                .map(|h| {
                    format!(
                        " (on the reading at {} cm, a kink: one-sided derivative)",
                        num(Some(h), DIGITS)
                    )
                })
                .unwrap_or_default();
            format!(
                "<code>{}</code> = {value}{detail}{unit}{interval}{kink}",
                escape(&p.name)
            )
        })
        .collect::<Vec<_>>()
        .join("<br/>")
}

/// The state column: one word (stale and failed in the warning style); their reasons go in
/// a row of their own under the sample (see [`state_note`]).
fn state_cell(state: &FitState) -> &'static str {
    match state {
        FitState::Current => "current",
        FitState::None => "not fitted",
        FitState::Stale(_) => "<span class=\"stale\">stale</span>",
        FitState::Failed(_) => "<span class=\"stale\">failed</span>",
    }
}

/// Why a fit is stale or failed, as a full-width row under its sample; empty otherwise.
fn state_note(code: &str, state: &FitState, columns: usize) -> String {
    let why = match state {
        FitState::Stale(_) => "the fit is stale",
        FitState::Failed(_) => "no fit could be made",
        FitState::None | FitState::Current => return String::new(),
    };
    format!(
        "<tr class=\"note\"><td colspan=\"{columns}\">{}: {why}. {}</td></tr>\n",
        escape(code),
        escape(&state_detail(state))
    )
}

/// The section of one site (`index` counts the export's sites from 0), with its chart.
pub fn site_section(
    out: &mut String,
    s: &Snapshot,
    index: usize,
    part: &SitePart,
    chart: Option<&str>,
) {
    let counts: Vec<usize> = part.layers.iter().map(|l| l.samples.len()).collect();
    match super::chart_k::site_k_chart(part) {
        Ok(k_chart) => section_start(out, index, part, chart, k_chart.as_deref(), &counts),
        Err(e) => {
            section_start(out, index, part, chart, None, &counts);
            let _ = writeln!(out, "<p class=\"muted\">{}</p>", escape(&e));
        }
    }
    parameter_rows(out, s, part);
    section_end(out, part);
}

/// The conductivity chart of a site, with its caption.
fn conductivity_figure(out: &mut String, code: &str, svg: &str) {
    let label = format!("Measured and fitted hydraulic conductivity of site {code}");
    let svg = svg.replacen(
        "<svg ",
        &format!("<svg role=\"img\" aria-label=\"{}\" ", escape(&label)),
        1,
    );
    let _ = writeln!(
        out,
        "<figure>\n{svg}<figcaption>Hydraulic conductivity K against suction, both on log axes. \
         Dots: measured K (K(θ) readings at the suction where the sample's fitted curve holds \
         that θ); lines: the K(h) of fits made with measured conductivity (Mualem's form with \
         the fitted Ks and L); bars at the left edge: each core's measured Ks. One colour per \
         layer. Beyond the measured suctions the curves are extrapolations.</figcaption>\n\
         </figure>"
    );
}

/// A site's section up to its parameter table's rows: heading, location, chart, the layer
/// table (with each layer's number of samples, `counts`) and the parameter table's head.
pub fn section_start(
    out: &mut String,
    index: usize,
    part: &SitePart,
    chart: Option<&str>,
    k_chart: Option<&str>,
    counts: &[usize],
) {
    let site = &part.row.stored.site;
    let title = match &site.name {
        Some(name) => format!("{} — {}", escape(&site.code), escape(name)),
        None => escape(&site.code),
    };
    let _ = writeln!(
        out,
        "<section>\n<h2 id=\"site-{}\">Site {title}</h2>",
        index + 1
    );
    let location = match (site.latitude, site.longitude) {
        (Some(lat), Some(lon)) => format!(
            "Latitude {}°, longitude {}° (WGS 84)",
            num(Some(lat), 8),
            num(Some(lon), 8)
        ),
        _ => "No coordinates".to_string(),
    };
    let _ = write!(out, "<p>{location}");
    if let Some(e) = site.elevation_m {
        let _ = write!(out, "; elevation {} m", num(Some(e), 5));
    }
    let _ = writeln!(out, ".</p>");
    if let Some(notes) = &site.notes {
        let _ = writeln!(out, "<p class=\"muted\">{}</p>", escape(notes));
    }
    match chart {
        Some(svg) => {
            let label = format!(
                "Retention curves and readings of site {}",
                site.code.as_str()
            );
            let svg = svg.replacen(
                "<svg ",
                &format!("<svg role=\"img\" aria-label=\"{}\" ", escape(&label)),
                1,
            );
            let _ = writeln!(
                out,
                "<figure>\n{svg}<figcaption>Water content against suction on a log axis (top: pF). \
                 One marker shape per layer (see the layer table); × marks a reading left out of the \
                 fit by a flag. Each sample's fitted curve is solid over the suctions it was measured \
                 at and dashed where extrapolated. Readings at 0 cm (saturation) sit on the left edge. \
                 Grey dashed lines: field capacity (FC) and wilting point (PWP).</figcaption>\n</figure>"
            );
        }
        None => {
            let _ = writeln!(
                out,
                "<p class=\"muted\">No readings and no fits to draw.</p>"
            );
        }
    }
    if let Some(svg) = k_chart {
        conductivity_figure(out, &site.code, svg);
    }
    layer_table(out, part, counts);
    let _ = writeln!(
        out,
        "<h3>Fitted parameters</h3>\n<div class=\"wide\">\n<table>\n<thead><tr><th>sample</th><th>layer</th><th>model</th>\
         <th>parameters ± standard error</th><th>RMSE, m³/m³</th><th>R²</th><th>AICc</th>\
         <th>readings used / flagged / left out</th><th>θ at FC ± 95&#160;%, m³/m³</th>\
         <th>θ at PWP ± 95&#160;%, m³/m³</th><th>available water ± 95&#160;%, m³/m³</th>\
         <th>air entry, h at S<sub>e</sub> = ½, K at FC and PWP, 95&#160;%</th><th>state</th></tr></thead>\n<tbody>"
    );
}

/// A site's section after its parameter table's rows: the table's end, the profile table.
pub fn section_end(out: &mut String, part: &SitePart) {
    let _ = writeln!(out, "</tbody>\n</table>\n</div>");
    profile_table(out, part);
    let _ = writeln!(out, "</section>");
}

fn layer_table(out: &mut String, part: &SitePart, counts: &[usize]) {
    let _ = writeln!(
        out,
        "<h3>Layers</h3>\n<table>\n<thead><tr><th>marker</th><th>layer</th><th>sand / silt / clay, %</th>\
         <th>texture class (USDA)</th><th>organic C, %</th><th>bulk density, g/cm³</th><th>Ks, cm/day</th><th>samples</th></tr></thead>\n<tbody>"
    );
    for (index, layer) in part.layers.iter().enumerate() {
        let l = &layer.row.stored.layer;
        let texture = match (l.sand_pct, l.silt_pct, l.clay_pct) {
            (None, None, None) => NONE.to_string(),
            (a, b, c) => format!("{} / {} / {}", num(a, 3), num(b, 3), num(c, 3)),
        };
        let _ = writeln!(
            out,
            "<tr><td><span class=\"swatch\" style=\"background: {colour}\"></span>{shape}</td>\
             <td>{label}</td><td class=\"num\">{texture}</td><td>{class}</td><td class=\"num\">{oc}</td>\
             <td class=\"num\">{bd}</td><td class=\"num\">{ks}</td><td class=\"num\">{n}</td></tr>",
            colour = colour_hex(layer_colour(index)),
            shape = Marker::of_layer(index).describe(),
            label = escape(&layer_label(layer)),
            class = TextureClass::of_layer(l.sand_pct, l.silt_pct, l.clay_pct)
                .map_or(NONE, TextureClass::name),
            oc = num(l.organic_carbon_pct, 3),
            bd = num(l.bulk_density_g_cm3, 3),
            ks = num(l.ks_cm_per_day, DIGITS),
            n = counts.get(index).copied().unwrap_or_default(),
        );
    }
    let _ = writeln!(out, "</tbody>\n</table>");
    texture_estimates(out, part);
}

/// Layers with a texture class and no fitted lab core: their estimate from the class, with
/// its source, listed apart from the measured values (the profile sum leaves them out).
fn texture_estimates(out: &mut String, part: &SitePart) {
    let Some(profile) = part.profile.as_ref() else {
        return;
    };
    let mut rows = String::new();
    for layer in &part.layers {
        let l = &layer.row.stored.layer;
        let fitted = profile
            .layers
            .iter()
            .find(|w| w.layer.same_as(&l.at))
            .is_some_and(|w| w.fitted_cores > 0);
        let Some(class) = TextureClass::of_layer(l.sand_pct, l.silt_pct, l.clay_pct) else {
            continue;
        };
        if fitted {
            continue;
        }
        let Some(e) = layer_estimate(class, profile.fc_kpa, profile.pwp_kpa) else {
            continue;
        };
        let aw = crate::report::fits::interval_text(e.available_water, e.interval.as_ref());
        let [tr, ts, a, n] = e.parameters;
        let ptf = pedotransfer_estimate(
            l.sand_pct,
            l.clay_pct,
            l.organic_carbon_pct,
            profile.fc_kpa,
            profile.pwp_kpa,
        )
        .map_or_else(
            || "— (needs sand, clay and organic carbon)".to_string(),
            |p| {
                format!(
                    "{} (FC {}, PWP {})",
                    significant(p.available_water_m3_m3, 3).unwrap_or_default(),
                    significant(p.theta_fc_m3_m3, 3).unwrap_or_default(),
                    significant(p.theta_pwp_m3_m3, 3).unwrap_or_default()
                )
            },
        );
        let _ = writeln!(
            rows,
            "<tr><td>◌ {label}</td><td>{class}</td><td class=\"num\">{aw}</td>\
             <td class=\"num\">θr {tr}, θs {ts}, α {a} 1/cm, n {n}</td>\
             <td class=\"num\">{ptf}</td><td>{source}</td></tr>",
            label = escape(&layer_label(layer)),
            source = escape(&e.source),
        );
    }
    if rows.is_empty() {
        return;
    }
    let _ = writeln!(
        out,
        "<h3>Estimates from texture (not measured)</h3>\n<p class=\"muted\">Layers with a texture \
         class and no fitted lab core: the class-mean van Genuchten curve, its interval the class \
         spread; beside it, for a layer with sand, clay and organic carbon, the Saxton &amp; Rawls (2006) \
         pedotransfer equations (organic matter 1.724 × organic carbon; no adjustments). They are not in the profile sum; <code>porewise list DB profiles \
         --fill-from-texture</code> adds them to it, marked ◌.</p>\n<table>\n<thead><tr><th>layer</th>\
         <th>texture class</th><th>available water ± 95&#160;%, m³/m³</th><th>class-mean parameters</th>\
         <th>pedotransfer available water, m³/m³</th><th>source</th></tr></thead>\n<tbody>\n{rows}</tbody>\n</table>"
    );
}

/// The parameter table's rows of the samples of `part` (a site of `s`, whole or a batch of
/// its samples).
pub fn parameter_rows(out: &mut String, s: &Snapshot, part: &SitePart) {
    let samples = part
        .layers
        .iter()
        .flat_map(|layer| layer.samples.iter().map(move |m| (layer, m)));
    for (layer, m) in samples {
        let fit = m.fit.fit.as_ref();
        let report = fit.and_then(|f| f.report.as_ref());
        let values = m.fit.derived.as_ref().map(|d| &d.values);
        let intervals = m.fit.derived.as_ref().map(|d| &d.intervals);
        let kind = match m.row.stored.sample.kind {
            SampleKind::LabCore => "",
            SampleKind::FieldPairing => " <span class=\"muted\">(field pairing)</span>",
        };
        let model = fit.map_or_else(
            || NONE.to_string(),
            |f| {
                let name = f
                    .model
                    .parse::<ModelKind>()
                    .map_or_else(|_| escape(&f.model), |k| k.display_name().to_string());
                match f.requested.as_deref() {
                    Some("auto") => {
                        format!("{name}<br/><span class=\"muted\">auto: lowest AICc</span>")
                    }
                    _ => match f.report.as_ref().and_then(|r| r.prior.as_ref()) {
                        Some(p) => format!(
                            "{name}<br/><span class=\"muted\">with the texture prior: {}</span>",
                            escape(&p.label)
                        ),
                        None => name,
                    },
                }
            },
        );
        let _ = writeln!(
            out,
            "<tr><td class=\"code\">{code}{kind}</td><td class=\"layer\">{layer}</td><td class=\"model\">{model}</td><td class=\"params\">{params}</td>\
             <td class=\"num\">{rmse}</td><td class=\"num\">{r2}</td><td class=\"num\">{aicc}</td>\
             <td class=\"num\">{used} / {flagged} / {excluded}</td><td class=\"num\">{fc}</td>\
             <td class=\"num\">{pwp}</td><td class=\"num\">{aw}</td><td class=\"num\">{more}</td>\
             <td>{state}</td></tr>",
            code = escape(&m.row.stored.sample.code),
            layer = escape(&layer_label(layer)),
            params = report.map_or_else(|| NONE.to_string(), parameters_cell),
            rmse = num(report.map(|r| r.rmse), 3),
            r2 = num(report.and_then(|r| r.r2), DIGITS),
            aicc = num(report.and_then(|r| r.aicc), DIGITS),
            used = fit.map_or_else(|| NONE.to_string(), |f| f.n_points.to_string()),
            flagged = s.flagged_count(m),
            excluded = s.excluded_count(m),
            fc = with_interval(
                values.and_then(|v| v.theta_field_capacity),
                intervals.and_then(|i| i.theta_field_capacity.as_ref())
            ),
            pwp = with_interval(
                values.and_then(|v| v.theta_wilting_point),
                intervals.and_then(|i| i.theta_wilting_point.as_ref())
            ),
            aw = with_interval(
                values.and_then(|v| v.plant_available_water),
                intervals.and_then(|i| i.plant_available_water.as_ref())
            ),
            more = m
                .fit
                .derived
                .as_ref()
                .map_or_else(|| NONE.to_string(), more_derived_cell),
            state = state_cell(&m.fit.state),
        );
        out.push_str(&state_note(
            &m.row.stored.sample.code,
            &m.fit.state,
            PARAMETER_COLUMNS,
        ));
    }
}

fn profile_table(out: &mut String, part: &SitePart) {
    let Some(p) = &part.profile else {
        return;
    };
    let _ = writeln!(
        out,
        "<h3>Available water of the profile, 0–{} cm</h3>\n<table>\n<thead><tr><th>layer</th>\
         <th>lab cores (fitted / stale)</th><th>available water ± 95&#160;%, m³/m³</th>\
         <th>field pairings, m³/m³</th><th>depth in root zone, cm</th><th>water ± 95&#160;%, mm</th>\
         </tr></thead>\n<tbody>",
        num(Some(p.root_zone_cm), 6)
    );
    for (w, layer) in p.layers.iter().zip(&part.layers) {
        let _ = writeln!(
            out,
            "<tr><td>{label}</td><td class=\"num\">{cores} ({fitted} / {stale})</td>\
             <td class=\"num\">{aw}</td><td class=\"num\">{field}</td><td class=\"num\">{depth}</td>\
             <td class=\"num\">{mm}</td></tr>",
            label = escape(&layer_label(layer)),
            cores = w.lab_cores,
            fitted = w.fitted_cores,
            stale = w.stale_cores,
            aw = with_sum_interval(w.available_water, w.available_water_interval),
            field = num(w.field_available_water, DIGITS),
            depth = num(Some(w.depth_in_zone_cm), 6),
            mm = with_sum_interval(w.water_mm, w.water_mm_interval),
        );
    }
    let uncovered = p.uncovered_cm();
    let note = if uncovered > 0.0 {
        format!(
            " <span class=\"stale\">({} cm without data: a lower bound)</span>",
            num(Some(uncovered), 4)
        )
    } else {
        String::new()
    };
    let _ = writeln!(
        out,
        "<tr class=\"total\"><td>profile total{note}</td><td></td><td></td><td></td>\
         <td class=\"num\">{}</td><td class=\"num\">{}</td></tr>\n</tbody>\n</table>",
        num(Some(p.covered_cm), 6),
        with_sum_interval(Some(p.total_mm), p.total_mm_interval)
    );
    let pooled = p.between_cores.map_or_else(
        || {
            "No layer of the campaign has two fitted lab cores, so the between-core variance \
             cannot be estimated and layers have no interval."
                .to_string()
        },
        |b| {
            format!(
                "Between-core variance {}: the campaign's layers with two or more fitted lab \
                 cores.",
                b.describe()
            )
        },
    );
    let notes: Vec<String> = p
        .layers
        .iter()
        .zip(&part.layers)
        .filter_map(|(w, layer)| {
            w.interval_note
                .as_ref()
                .map(|n| format!("{}: {n}.", layer_label(layer)))
        })
        .chain(p.total_note.iter().map(|n| format!("Total: {n}.")))
        .collect();
    let _ = writeln!(
        out,
        "<p class=\"muted\">± is the 95&#160;% interval: a layer's random-effects mean over its \
         lab cores, the total with the layers taken as independent. {}{}</p>",
        escape(&pooled),
        if notes.is_empty() {
            String::new()
        } else {
            format!(" {}", escape(&notes.join(" ")))
        }
    );
}

/// The heading of the flagged readings, and the table's head when `count` readings carry a
/// flag (a line saying none does otherwise).
pub fn flagged_start(count: usize) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "<h2 id=\"flagged\">Flagged readings</h2>");
    if count == 0 {
        let _ = writeln!(out, "<p>No reading carries a flag.</p>");
        return out;
    }
    let _ = writeln!(
        out,
        "<p>Every flag ever raised on a reading, with its audit trail (flags are never \
         deleted). A reading is left out of fits while a flag on it is accepted, or is a manual \
         flag not yet reviewed; an automatic suggestion alone leaves it in until reviewed.</p>\n<table>\n\
         <thead><tr><th>site</th><th>sample</th><th>reading</th><th>suction, cm</th>\
         <th>θ, m³/m³</th><th>left out of fits</th><th>flag</th><th>check</th><th>reason</th>\
         <th>score</th><th>status</th><th>trail (UTC)</th></tr></thead>\n<tbody>"
    );
    out
}

/// The end of the flagged readings' table (nothing when no reading carries a flag).
pub fn flagged_end(count: usize) -> String {
    if count == 0 {
        String::new()
    } else {
        "</tbody>\n</table>\n".to_string()
    }
}

/// The rows of a snapshot's flagged readings, one per flag; returns how many readings carry
/// a flag.
pub fn flagged_rows(out: &mut String, s: &Snapshot) -> usize {
    let rows: Vec<_> = s
        .samples()
        .flat_map(|(site, _, m)| m.readings.iter().map(move |r| (site, m, r)))
        .filter(|(_, _, r)| !s.flags_of(r.id).is_empty())
        .collect();
    for (site, m, r) in &rows {
        for f in s.flags_of(r.id) {
            let flag = &f.stored.flag;
            let _ = writeln!(
                out,
                "<tr><td>{site}</td><td class=\"code\">{sample}</td><td class=\"num\">{id}</td>\
                 <td class=\"num\">{h}</td><td class=\"num\">{theta}</td><td>{excluded}</td>\
                 <td class=\"num\">{flag_id}</td><td>{rule}</td><td>{reason}</td>\
                 <td class=\"num\">{score}</td><td>{status} ({origin})</td><td>{trail}</td></tr>",
                site = escape(&site.row.stored.site.code),
                sample = escape(&m.row.stored.sample.code),
                id = r.id,
                h = num(Some(r.reading.h_cm), 6),
                theta = num(Some(r.reading.theta), DIGITS),
                excluded = if s.is_excluded(r.id) { "yes" } else { "no" },
                flag_id = f.stored.id,
                rule = opt_text(f.stored.rule.as_deref()),
                reason = escape(&flag.reason),
                score = num(flag.score, 3),
                status = flag.status,
                origin = flag.origin,
                trail = trail_cell(f),
            );
        }
    }
    rows.len()
}

/// `suggested by checks 2026-12-02 10:00; accepted by user 2026-12-03 09:12: "note"`.
fn trail_cell(f: &ReadingFlag) -> String {
    if f.events.is_empty() {
        return format!(
            "raised {}",
            f.stored.flag.created_at.format("%Y-%m-%d %H:%M")
        );
    }
    f.events
        .iter()
        .map(|e| {
            let note = e
                .note
                .as_deref()
                .map(|n| format!(": “{}”", escape(n)))
                .unwrap_or_default();
            format!(
                "{} by {} {}{note}",
                e.to,
                e.actor,
                e.at.format("%Y-%m-%d %H:%M")
            )
        })
        .collect::<Vec<_>>()
        .join("<br/>")
}

/// The equation of a model as HTML.
fn equation(kind: ModelKind) -> String {
    let vg = "θ(h) = θ<sub>r</sub> + (θ<sub>s</sub> − θ<sub>r</sub>) [1 + (α h)<sup>n</sup>]<sup>−m</sup>";
    match kind {
        ModelKind::VanGenuchten => format!("{vg}, with m = 1 − 1/n"),
        ModelKind::VanGenuchtenFreeM => format!("{vg}, with m free"),
        ModelKind::BrooksCorey => "θ(h) = θ<sub>r</sub> + (θ<sub>s</sub> − θ<sub>r</sub>) (h<sub>b</sub>/h)<sup>λ</sup> \
             for h &gt; h<sub>b</sub>; θ(h) = θ<sub>s</sub> for h ≤ h<sub>b</sub>"
            .to_string(),
        ModelKind::Kosugi => "θ(h) = θ<sub>r</sub> + (θ<sub>s</sub> − θ<sub>r</sub>) Q(ln(h/h<sub>m</sub>) / σ), \
             Q the complementary standard normal distribution function"
            .to_string(),
        ModelKind::FredlundXing => format!(
            "θ(h) = C(h) θ<sub>s</sub> / [ln(e + (h/a)<sup>n</sup>)]<sup>m</sup>, \
             C(h) = 1 − ln(1 + h/h<sub>r</sub>) / ln(1 + h<sub>dry</sub>/h<sub>r</sub>), \
             h<sub>dry</sub> = 10<sup>6</sup> kPa = {} cm",
            num(Some(H_DRY_CM), 10)
        ),
        ModelKind::Durner => "θ(h) = θ<sub>r</sub> + (θ<sub>s</sub> − θ<sub>r</sub>) \
             {w<sub>1</sub> [1 + (α<sub>1</sub> h)<sup>n<sub>1</sub></sup>]<sup>−m<sub>1</sub></sup> \
             + (1 − w<sub>1</sub>) [1 + (α<sub>2</sub> h)<sup>n<sub>2</sub></sup>]<sup>−m<sub>2</sub></sup>}, \
             m<sub>i</sub> = 1 − 1/n<sub>i</sub>"
            .to_string(),
        ModelKind::Campbell => "θ(h) = θ<sub>s</sub> (h/h<sub>e</sub>)<sup>−1/b</sup> for h &gt; h<sub>e</sub>; \
             θ(h) = θ<sub>s</sub> for h ≤ h<sub>e</sub>"
            .to_string(),
    }
}

/// The published source of a model, for the methods section.
fn citation(kind: ModelKind) -> &'static str {
    match kind {
        ModelKind::VanGenuchten | ModelKind::VanGenuchtenFreeM => "van Genuchten (1980)",
        ModelKind::BrooksCorey => "Brooks &amp; Corey (1964)",
        ModelKind::Kosugi => "Kosugi (1996)",
        ModelKind::FredlundXing => "Fredlund &amp; Xing (1994)",
        ModelKind::Durner => "Durner (1994)",
        ModelKind::Campbell => "Campbell (1974)",
    }
}

fn methods(out: &mut String, s: &Snapshot, models: &[ModelKind]) {
    let settings = &s.settings;
    let _ = writeln!(
        out,
        "<h2 id=\"methods\">How the numbers were computed</h2>\n\
         <h3>Units</h3>\n<p>Suction head h in cm of water, positive when drier \
         (1 kPa = 1000/98.0665 cm = 10.19716213 cm; pF = log<sub>10</sub>(h / cm)); volumetric \
         water content θ in m³/m³; depths in cm below the surface; times in UTC.</p>\n\
         <h3>Retention models used</h3>"
    );
    if models.is_empty() {
        let _ = writeln!(out, "<p>No sample has a fit.</p>");
    } else {
        let _ = writeln!(out, "<ul>");
        for &kind in models {
            let params = kind
                .params()
                .iter()
                .map(|p| {
                    if p.unit == "-" {
                        format!("<code>{}</code>", p.name)
                    } else {
                        format!("<code>{}</code> ({})", p.name, escape(p.unit))
                    }
                })
                .collect::<Vec<_>>()
                .join(", ");
            let _ = writeln!(
                out,
                "<li><strong>{}</strong>, {} (<code>{}</code>):<br/><span class=\"eq\">{}</span><br/>\
                 Parameters: {params}.</li>",
                kind.display_name(),
                citation(kind),
                kind.id(),
                equation(kind)
            );
        }
        let _ = writeln!(out, "</ul>");
    }
    let fc_cm = settings.fc_kpa * CM_PER_KPA;
    let pwp_cm = settings.pwp_kpa * CM_PER_KPA;
    let _ = writeln!(
        out,
        "<h3>Fitting</h3>\n<p>Each sample's readings that no flag leaves out are fitted by \
         bounded Levenberg-Marquardt least squares (several starts, the best kept; parameters \
         held within physical bounds). With <code>auto</code>, every model the number of \
         readings allows is fitted and the lowest AICc kept. Standard errors are the square \
         roots of the diagonal of the covariance s² (JᵀWJ)<sup>−1</sup>, J the Jacobian at the \
         optimum in the original parameters; 95&#160;% intervals are value ± t<sub>0.975, n−k</sub> \
         × SE, and for suctions and inverse suctions (α, h<sub>b</sub>, h<sub>e</sub>, \
         h<sub>m</sub>, a, h<sub>r</sub>), which are positive, the same Wald interval on the log \
         scale: exp(ln p ± t<sub>0.975, n−k</sub> × SE / p) (delta method), which never \
         includes impossible values. Where a Brooks-Corey h<sub>b</sub> or a Campbell \
         h<sub>e</sub> sits exactly on a measured suction (within a relative 10<sup>−9</sup>), \
         the curve has a kink there and the Jacobian holds a one-sided derivative: that standard \
         error and interval are approximate (marked ≈). A parameter fixed by the user or ending \
         on a bound has no standard error.</p>\n\
         <p>With n readings, k free parameters and weights w<sub>i</sub> (1 without weights): \
         SSE = Σ w<sub>i</sub> (θ<sub>i</sub> − θ̂<sub>i</sub>)²; RMSE = √(SSE / n); \
         R² = 1 − SSE / SST, SST = Σ w<sub>i</sub> (θ<sub>i</sub> − θ̄)²; \
         AIC = n ln(SSE / n) + 2K; AICc = AIC + 2K(K + 1) / (n − K − 1); \
         BIC = n ln(SSE / n) + K ln n, where K = k + 1 counts the error variance as a \
         parameter (Burnham &amp; Anderson 2002, for least squares); AICc needs n &gt; k + 2.</p>\n\
         <p>A fit is <span class=\"stale\">stale</span> when the sample's readings (or the \
         flags on them) changed after it was made, or a later refit failed; it is still shown \
         and used, and marked.</p>\n\
         <h3>Field capacity, wilting point and available water</h3>\n\
         <p>θ at field capacity is the fitted curve's water content at {fc} kPa = {fc_cm} cm \
         (pF {fc_pf}); θ at the permanent wilting point is its water content at {pwp} kPa = \
         {pwp_cm} cm (pF {pwp_pf}). These suctions are campaign settings. The plant-available \
         water of a fit is θ(FC) − θ(PWP), in m³/m³.</p>\n\
         <p>A layer's available water is the random-effects mean over its lab cores with a \
         current (or stale) fit (below); field pairings are shown beside it and not used in the \
         sum. The profile's \
         available water, in mm, is Σ AW<sub>layer</sub> × d<sub>layer</sub> × 10 mm/cm, where \
         d<sub>layer</sub> is the thickness in cm of the layer's part between the surface and \
         {zone} cm. Where part of that depth has no layer with available water, the total is a \
         lower bound and the table says how many cm are missing.</p>",
        fc = num(Some(settings.fc_kpa), 6),
        fc_cm = num(Some(fc_cm), 5),
        fc_pf = num(Some(fc_cm.log10()), 3),
        pwp = num(Some(settings.pwp_kpa), 6),
        pwp_cm = num(Some(pwp_cm), 5),
        pwp_pf = num(Some(pwp_cm.log10()), 3),
        zone = num(Some(s.root_zone_cm), 6),
    );
    let _ = writeln!(
        out,
        "<h3>95&#160;% intervals of the derived values</h3>\n\
         <p>Each fit's θ at FC and PWP, available water, air entry, suction at S<sub>e</sub> = ½ \
         and (with Ks) K at FC and PWP carry a 95&#160;% interval by the delta method: \
         Var(f) ≈ gᵀ Cov g, g the analytic gradient of the value with respect to the parameters \
         and Cov the fit's covariance, and the interval f ± t<sub>0.975, n−k</sub> × SE (for \
         suctions and conductivities on the log scale, as for the suction parameters). The curve's \
         95&#160;% band is the same computation for θ(h), so at FC and PWP it is the interval of θ \
         there. Parameters fixed or held on a bound have no covariance and are treated as known; \
         Ks is treated as known. Where a fit gives reason to doubt the delta method (a parameter \
         whose interval reaches past a bound, a breakpoint on a reading, n − k ≤ 2), the value is \
         also taken over {draws} parameter sets drawn from the fitted distribution; when that \
         interval differs from the delta method's by more than 10&#160;% of its width, it is the \
         one shown, marked Monte Carlo.</p>\n\
         <p>A layer's available water is the random-effects mean of its lab cores \
         (DerSimonian &amp; Laird 1986): each core weighted by 1 / (SE<sub>i</sub>² + τ²), with \
         SE<sub>i</sub> the standard error of its available water and τ² the between-core \
         variance estimated by the method of moments and pooled over the campaign's layers with \
         two or more fitted lab cores (a layer of two cores cannot estimate it alone); its \
         interval is the mean ± 1.96 / √(Σ weights). The profile's interval adds the layers' \
         variances, the layers taken as independent.</p>",
        draws = crate::fit::delta::MC_DRAWS,
    );
    let _ = writeln!(
        out,
        "<h3>Numbers in this page</h3>\n<p>Values are rounded to {DIGITS} significant digits \
         and standard errors to {SE_DIGITS}; {NONE} means not applicable. The full-precision \
         values are in <code>parameters.csv</code> and <code>campaign.json</code> beside this \
         file.</p>"
    );
}
