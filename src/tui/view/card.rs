//! The fit card: model, every parameter with its ± and unit (and the 95 % interval of a
//! suction or inverse suction, on the log scale; ≈ and a note where a breakpoint sits on a
//! reading, its error being one-sided), statistics with the parameter count of AICc and BIC,
//! derived values with their 95 % intervals (FC, PWP, available water, air entry with its
//! construction, h at Se = 1/2, K where Ks is known), staleness, and the auto ranking.

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Paragraph, Widget, Wrap};

use crate::analysis::FitDerived;
use crate::fit::{Interval95, IntervalMethod, IntervalScale};
use crate::model::retention::ModelKind;
use crate::model::units::CM_PER_KPA;
use crate::report::fits::state_text;

use super::super::app::conductivity::KCurveSource;
use super::super::app::{AppState, AxisUnit, Detail, FitTag, NextStep, SampleDetail, model_tag};
use super::super::theme::Theme;
use super::{framed, kpa_text, num, opt_num, suction_text, theta_text};

/// The fit card pane.
pub struct CardPane<'a> {
    /// The state.
    pub state: &'a AppState,
    /// Whether it has focus.
    pub focused: bool,
}

/// A value and its standard error, the error to two significant digits and the value to the
/// same decimal place (common practice for reporting estimates).
pub fn estimate_text(value: f64, se: f64) -> (String, String) {
    if !(se.is_finite() && se > 0.0 && value.is_finite()) {
        return (num(value, 4), num(se, 2));
    }
    let decimals = (1 - se.log10().floor() as i32).clamp(0, 10) as usize;
    (format!("{value:.decimals$}"), format!("{se:.decimals$}"))
}

/// `  95 % lo…hi UNIT, log scale` (or `, Monte Carlo`) for an interval that `±` does not state;
/// `text` writes a number in the unit `unit` (`pF` goes before the numbers).
fn range_line(
    i: &Interval95,
    text: impl Fn(f64) -> String,
    unit: &str,
    theme: Theme,
) -> Line<'static> {
    let how = match (i.method, i.scale) {
        (IntervalMethod::MonteCarlo, _) => "Monte Carlo",
        (_, IntervalScale::Log) => "log scale",
        (_, IntervalScale::Linear) => "linear scale",
    };
    let range = format!("{}…{}", text(i.lo95), text(i.hi95));
    let range = if unit == "pF" {
        format!("pF {range}")
    } else {
        format!("{range} {unit}")
    };
    Line::from(Span::styled(format!("  95 % {range}, {how}"), theme.dim()))
}

/// A water content with its 95 % interval: `0.284 ± 0.012 m3/m3`, or the value and a range
/// line where the interval is not symmetric.
fn theta_with_interval(
    value: Option<f64>,
    i: Option<&Interval95>,
) -> (String, Option<&Interval95>) {
    match (value, i) {
        (None, _) => ("–".to_string(), None),
        (Some(v), Some(i)) if i.is_symmetric() => (
            format!("{} ± {} m3/m3", theta_text(v), theta_text(i.half_width())),
            None,
        ),
        (Some(v), i) => (format!("{} m3/m3", theta_text(v)), i),
    }
}

/// The derived values with their 95 % intervals (FC, PWP, available water, air entry, h at
/// Se = 1/2, K where Ks is known), what the intervals treat as known, and their notes.
fn derived_lines(lines: &mut Vec<Line<'static>>, d: &FitDerived, units: AxisUnit, theme: Theme) {
    let (v, iv) = (&d.values, &d.intervals);
    lines.push(Line::from(Span::styled(
        "Derived (± 95 %)",
        theme.heading(),
    )));
    let theta_range = |i: &Interval95| range_line(i, theta_text, "m3/m3", theme);
    let suction = |cm: f64| kpa_text(cm / CM_PER_KPA, units);
    let suction_range =
        |i: &Interval95| range_line(i, |cm| suction_text(cm, units), units.symbol(), theme);
    let rows = [
        (
            format!("FC  ({}) θ", kpa_text(v.field_capacity_kpa, units)),
            v.theta_field_capacity,
            iv.theta_field_capacity.as_ref(),
        ),
        (
            format!("PWP ({}) θ", kpa_text(v.wilting_point_kpa, units)),
            v.theta_wilting_point,
            iv.theta_wilting_point.as_ref(),
        ),
        (
            "available water".to_string(),
            v.plant_available_water,
            iv.plant_available_water.as_ref(),
        ),
    ];
    for (label, value, interval) in rows {
        let (text, range) = theta_with_interval(value, interval);
        lines.push(Line::from(format!("{label} {text}")));
        lines.extend(range.map(theta_range));
    }
    match v.air_entry {
        Some(a) => {
            lines.push(Line::from(format!("air entry {}", suction(a.suction_cm))));
            lines.extend(iv.air_entry_cm.as_ref().map(suction_range));
            lines.push(Line::from(Span::styled(
                format!("  by {}", a.construction.describe()),
                theme.dim(),
            )));
        }
        None => lines.push(Line::from("air entry –")),
    }
    if let Some(h) = v.suction_at_half_saturation_cm {
        lines.push(Line::from(format!("h at Se ½ {}", suction(h))));
        lines.extend(iv.suction_at_half_saturation_cm.as_ref().map(suction_range));
    }
    let per_day = |k: f64| num(k, 3);
    for (label, value, interval) in [
        (
            "K at FC",
            d.k_field_capacity_cm_per_day,
            &iv.k_field_capacity_cm_per_day,
        ),
        (
            "K at PWP",
            d.k_wilting_point_cm_per_day,
            &iv.k_wilting_point_cm_per_day,
        ),
    ] {
        if let Some(k) = value {
            lines.push(Line::from(format!("{label} {} cm/day", per_day(k))));
            lines.extend(
                interval
                    .as_ref()
                    .map(|i| range_line(i, per_day, "cm/day", theme)),
            );
        }
    }
    let notes = [
        &iv.theta_field_capacity,
        &iv.theta_wilting_point,
        &iv.plant_available_water,
        &iv.air_entry_cm,
        &iv.suction_at_half_saturation_cm,
        &iv.k_field_capacity_cm_per_day,
        &iv.k_wilting_point_cm_per_day,
    ]
    .into_iter()
    .filter_map(|i| i.as_ref().and_then(|i| i.note.clone()));
    let mut seen: Vec<String> = Vec::new();
    for note in notes.chain(iv.missing.clone()) {
        if !seen.contains(&note) {
            lines.push(Line::from(Span::styled(format!("  {note}"), theme.dim())));
            seen.push(note);
        }
    }
    if !iv.known_parameters.is_empty() {
        lines.push(Line::from(Span::styled(
            format!(
                "  taken as known (fixed or on a bound): {}",
                iv.known_parameters.join(", ")
            ),
            theme.dim(),
        )));
    }
}

/// The card's lines for a sample.
pub fn card_lines(state: &AppState, d: &SampleDetail, theme: Theme) -> Vec<Line<'static>> {
    let tag = FitTag::of(&d.state);
    let mut lines = vec![Line::from(vec![Span::styled(
        format!("{} {}", tag.glyph(), state_text(&d.state)),
        theme.fit_tag(tag),
    )])];
    let Some(fit) = &d.fit else {
        lines.push(Line::from("No current fit. f fits this sample."));
        return lines;
    };
    let name = fit
        .model
        .parse::<ModelKind>()
        .map_or(fit.model.clone(), |k| k.display_name().to_string());
    lines.push(Line::from(Span::styled(name, theme.heading())));
    lines.push(Line::from(Span::styled(
        format!(
            "{} · fit #{} · n={}",
            fit.requested.as_deref().unwrap_or("?"),
            fit.id,
            fit.n_points
        ),
        theme.dim(),
    )));
    // A fit made with measured conductivity: Ks and L with their errors below the retention
    // parameters.
    let joint: Vec<&crate::fit::ParamEstimate> = match d.conductivity.as_ref().map(|c| &c.source) {
        Some(KCurveSource::Fitted { ks, l }) => vec![ks.as_ref(), l.as_ref()],
        _ => Vec::new(),
    };
    let name_width = fit
        .parameters
        .iter()
        .chain(joint.iter().copied())
        .map(|p| p.name.len())
        .max()
        .unwrap_or(0);
    for p in fit.parameters.iter().chain(joint.iter().copied()) {
        // At a kink the standard error is one-sided: shown as approximate.
        let approx = if p.kink_cm.is_some() { "≈" } else { "" };
        let (value, se) = match (p.fixed, p.se) {
            (true, _) => (num(p.value, 4), " fixed".to_string()),
            (false, Some(se)) => {
                let (v, e) = estimate_text(p.value, se);
                (v, format!("±{approx}{e}"))
            }
            (false, None) if p.at_bound.is_some() => (num(p.value, 4), " on bound".to_string()),
            (false, None) => (num(p.value, 4), "±–".to_string()),
        };
        lines.push(Line::from(vec![
            Span::raw(format!("{:<name_width$} ", p.name)),
            Span::styled(value, theme.heading()),
            Span::raw(se),
            Span::styled(format!(" {}", p.unit), theme.dim()),
        ]));
        if let (Some([lo, hi]), Some(IntervalScale::Log)) = (p.ci95, p.ci95_scale) {
            lines.push(Line::from(Span::styled(
                format!("  95 % {}…{}, log scale", num(lo, 3), num(hi, 3)),
                theme.dim(),
            )));
        }
        if let Some(h) = p.kink_cm {
            lines.push(Line::from(Span::styled(
                format!("  ≈ one-sided: on the reading at {} cm", num(h, 4)),
                theme.dim(),
            )));
        }
    }
    if let Some(prior) = &fit.prior {
        super::prior_card::prior_lines(&mut lines, fit, prior, theme);
    }
    lines.push(Line::from(format!(
        "RMSE {} m3/m3  R² {}",
        num(fit.rmse, 2),
        opt_num(fit.r2, 4)
    )));
    lines.push(Line::from(format!(
        "AICc {}  BIC {}",
        opt_num(fit.aicc, 4),
        opt_num(fit.bic, 4)
    )));
    let free = fit.parameters.iter().filter(|p| !p.fixed).count();
    lines.push(Line::from(Span::styled(
        format!(
            "  K = {free} free + σ² = {}",
            crate::fit::criteria_parameters(free)
        ),
        theme.dim(),
    )));
    if let Some(message) = &fit.message {
        lines.push(Line::from(Span::styled(message.clone(), theme.dim())));
    }
    if let Some(d) = &fit.derived {
        derived_lines(&mut lines, d, state.units, theme);
    }
    match &fit.next {
        Some(Ok(next)) => lines.push(next_line(next, state)),
        Some(Err(why)) => lines.push(Line::from(Span::styled(
            format!("next: no advice ({why})"),
            theme.dim(),
        ))),
        None => {}
    }
    if let Some(ranking) = &fit.ranking {
        lines.push(Line::from(Span::styled(
            "auto ranking (AICc, Akaike weight)",
            theme.heading(),
        )));
        for (i, r) in ranking.ranked.iter().enumerate() {
            let chosen = if r.model == fit.model { "◀" } else { "" };
            lines.push(Line::from(format!(
                "{:>2} {:<3} Δ{:<6} w {:<5}{chosen}",
                i + 1,
                model_tag(&r.model),
                num(r.delta_aicc, 3),
                num(r.akaike_weight, 2),
            )));
        }
        if !ranking.skipped.is_empty() {
            let skipped: Vec<&str> = ranking
                .skipped
                .iter()
                .map(|s| model_tag(&s.model))
                .collect();
            lines.push(Line::from(Span::styled(
                format!("   not ranked: {}", skipped.join(" ")),
                theme.dim(),
            )));
        }
    }
    lines
}

/// "next: 5000 cm would take AW ±0.021 to ±0.012": the suction in the card's unit, the
/// half-widths to two significant digits (m3/m3).
fn next_line(next: &NextStep, state: &AppState) -> Line<'static> {
    let pooled = if next.pooled { " (pooled noise)" } else { "" };
    Line::from(format!(
        "next: {} would take AW ±{} to ±{}{pooled}",
        kpa_text(next.h_cm / crate::model::units::CM_PER_KPA, state.units),
        num(next.now, 2),
        num(next.after, 2),
    ))
}

impl Widget for CardPane<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let state = self.state;
        let theme = state.theme;
        let inner = framed("Fit", self.focused, theme, area, buf);
        let lines = match &state.detail {
            Detail::Ready(d) => card_lines(state, d, theme),
            Detail::Loading(_) => vec![Line::from("loading…")],
            Detail::Failed(_, why) => vec![Line::from(format!("cannot show: {why}"))],
            Detail::Empty => vec![Line::from("No sample open.")],
        };
        Paragraph::new(lines)
            .wrap(Wrap { trim: false })
            .scroll((state.card_scroll, 0))
            .render(inner, buf);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn estimate(name: &str, unit: &str, value: f64, se: f64) -> crate::fit::ParamEstimate {
        crate::fit::ParamEstimate {
            name: name.into(),
            unit: unit.into(),
            value,
            se: Some(se),
            ci95: Some([value - 2.0 * se, value + 2.0 * se]),
            ci95_scale: Some(IntervalScale::Linear),
            kink_cm: None,
            fixed: false,
            at_bound: None,
        }
    }

    #[test]
    fn the_card_states_log_scale_intervals_kinks_and_the_criteria_convention() {
        let state = AppState::default();
        let mut d = crate::tui::app::fixtures::detail(1, "AA-0-a");
        let mut h_b = estimate("h_b_cm", "cm", 50.0, 2.6);
        h_b.ci95 = Some([44.12, 56.75]);
        h_b.ci95_scale = Some(IntervalScale::Log);
        h_b.kink_cm = Some(50.0);
        d.fit = Some(crate::tui::app::FitView {
            id: 3,
            model: "brooks-corey".into(),
            requested: Some("brooks-corey".into()),
            parameters: vec![
                estimate("theta_r", "m3/m3", 0.05, 0.007),
                estimate("theta_s", "m3/m3", 0.42, 0.0016),
                h_b,
                estimate("lambda", "-", 0.46, 0.03),
            ],
            n_points: 10,
            rmse: 0.002,
            r2: Some(0.999),
            aicc: Some(-100.0),
            bic: Some(-110.0),
            message: None,
            derived: None,
            ranking: None,
            next: Some(Ok(NextStep {
                h_cm: 5000.0,
                now: 0.021_4,
                after: 0.011_8,
                pooled: false,
            })),
            prior: None,
        });
        let text: Vec<String> = card_lines(&state, &d, Theme::default())
            .iter()
            .map(|l| l.spans.iter().map(|s| s.content.as_ref()).collect())
            .collect();
        let at = |needle: &str| {
            text.iter()
                .position(|l| l.contains(needle))
                .unwrap_or_else(|| panic!("no {needle:?} in {text:#?}"))
        };
        let h_b_line = at("h_b_cm");
        assert!(text[h_b_line].contains("±≈2.6"), "{}", text[h_b_line]);
        assert_eq!(text[h_b_line + 1], "  95 % 44.1…56.8, log scale");
        assert_eq!(text[h_b_line + 2], "  ≈ one-sided: on the reading at 50 cm");
        // theta_r keeps its plain ± and no interval line (symmetric, linear scale).
        let theta_r = at("theta_r");
        assert!(!text[theta_r].contains('≈') && text[theta_r + 1].starts_with("theta_s"));
        assert_eq!(text[at("AICc") + 1], "  K = 4 free + σ² = 5");
        assert_eq!(
            text[at("next:")],
            "next: 5000 cm would take AW ±0.021 to ±0.012"
        );
    }

    #[test]
    fn derived_values_carry_their_95_percent_intervals_with_units() {
        use crate::fit::{FitOptions, Readings, fit_model};
        let h = [0.0, 10.0, 30.0, 60.0, 100.0, 330.0, 1000.0, 3000.0, 15000.0];
        let y = [0.412, 0.405, 0.372, 0.33, 0.297, 0.224, 0.171, 0.131, 0.1];
        let report = fit_model(
            ModelKind::VanGenuchten,
            &Readings::new(&h, &y),
            &FitOptions::new(),
        )
        .expect("fits");
        let settings = crate::store::CampaignSettings {
            name: "card".into(),
            description: None,
            fc_kpa: 33.0,
            pwp_kpa: 1500.0,
            created_at: chrono::DateTime::UNIX_EPOCH,
        };
        let mut d =
            crate::analysis::derive_fit(&report, &settings, Some(20.0), None).expect("derived");
        let text = |d: &FitDerived| -> Vec<String> {
            let mut lines = Vec::new();
            derived_lines(&mut lines, d, AxisUnit::Cm, Theme::default());
            lines
                .iter()
                .map(|l| l.spans.iter().map(|s| s.content.as_ref()).collect())
                .collect()
        };
        let lines = text(&d);
        let fc = d
            .intervals
            .theta_field_capacity
            .clone()
            .expect("FC interval");
        let theta = d.values.theta_field_capacity.expect("FC");
        assert_eq!(
            lines[1],
            format!(
                "FC  (336.5 cm) θ {} ± {} m3/m3",
                theta_text(theta),
                theta_text(fc.half_width())
            )
        );
        let at = |needle: &str| {
            lines
                .iter()
                .position(|l| l.starts_with(needle))
                .unwrap_or_else(|| panic!("no {needle:?} in {lines:#?}"))
        };
        // Suctions and conductivities: the range on the log scale on the next line.
        for (label, unit) in [
            ("air entry", "cm"),
            ("h at Se ½", "cm"),
            ("K at FC", "cm/day"),
        ] {
            let next = &lines[at(label) + 1];
            assert!(
                next.starts_with("  95 % ") && next.ends_with(&format!(" {unit}, log scale")),
                "{label}: {next}"
            );
        }
        assert!(lines[at("K at PWP")].ends_with(" cm/day"));
        // A Monte Carlo interval is given as a range with its note; known parameters named.
        let aw = d.intervals.plant_available_water.as_mut().expect("AW");
        aw.method = IntervalMethod::MonteCarlo;
        aw.note = Some("Monte Carlo (test note)".into());
        d.intervals.known_parameters = vec!["theta_r".into()];
        let lines = text(&d);
        let aw_line = at("available water");
        let lines_again = text(&d);
        assert!(
            !lines_again[aw_line].contains('±'),
            "{}",
            lines_again[aw_line]
        );
        assert!(lines_again[aw_line + 1].ends_with("m3/m3, Monte Carlo"));
        assert!(lines.iter().any(|l| l == "  Monte Carlo (test note)"));
        assert!(
            lines
                .iter()
                .any(|l| l == "  taken as known (fixed or on a bound): theta_r")
        );
    }

    #[test]
    fn estimates_are_written_to_the_precision_of_their_error() {
        assert_eq!(
            estimate_text(0.062_71, 0.012),
            ("0.063".into(), "0.012".into())
        );
        assert_eq!(
            estimate_text(0.3925, 0.0017),
            ("0.3925".into(), "0.0017".into())
        );
        assert_eq!(
            estimate_text(1.2771, 0.023),
            ("1.277".into(), "0.023".into())
        );
        assert_eq!(estimate_text(123.4, 12.3), ("123".into(), "12".into()));
        assert_eq!(estimate_text(0.5, f64::NAN).1, "");
    }
}
