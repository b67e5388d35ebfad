//! The fit card: model, every parameter with its ± and unit (and the 95 % interval of a
//! suction or inverse suction, on the log scale; ≈ and a note where a breakpoint sits on a
//! reading, its error being one-sided), statistics with the parameter count of AICc and BIC,
//! derived values (FC, PWP, available water, air entry with its construction), staleness, and
//! the auto ranking.

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Paragraph, Widget, Wrap};

use crate::fit::IntervalScale;
use crate::model::retention::ModelKind;
use crate::report::fits::state_text;

use super::super::app::{AppState, Detail, FitTag, NextStep, SampleDetail, model_tag};
use super::super::theme::Theme;
use super::{framed, kpa_text, num, opt_num, theta_text};

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
    let name_width = fit
        .parameters
        .iter()
        .map(|p| p.name.len())
        .max()
        .unwrap_or(0);
    for p in &fit.parameters {
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
    if let Some(v) = &fit.derived {
        lines.push(Line::from(Span::styled("Derived", theme.heading())));
        let theta = |t: Option<f64>| t.map_or_else(|| "–".to_string(), theta_text);
        lines.push(Line::from(format!(
            "FC  ({}) θ {}",
            kpa_text(v.field_capacity_kpa, state.units),
            theta(v.theta_field_capacity)
        )));
        lines.push(Line::from(format!(
            "PWP ({}) θ {}",
            kpa_text(v.wilting_point_kpa, state.units),
            theta(v.theta_wilting_point)
        )));
        lines.push(Line::from(format!(
            "available water {} m3/m3",
            theta(v.plant_available_water)
        )));
        match v.air_entry {
            Some(a) => {
                lines.push(Line::from(format!(
                    "air entry {}",
                    kpa_text(a.suction_cm / crate::model::units::CM_PER_KPA, state.units)
                )));
                lines.push(Line::from(Span::styled(
                    format!("  by {}", a.construction.describe()),
                    theme.dim(),
                )));
            }
            None => lines.push(Line::from("air entry –")),
        }
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
