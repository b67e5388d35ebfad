//! The fit card's side-by-side of a fit with the texture prior: each parameter with the prior
//! and from the readings alone, how far the prior pulled it (in the prior's standard
//! deviations), and the readings' SSE both ways.

use ratatui::text::{Line, Span};

use super::super::app::FitView;
use super::super::theme::Theme;
use crate::fit::prior::PriorBasis;
use crate::model::number::significant;

fn num(v: f64, digits: usize) -> String {
    significant(v, digits).unwrap_or_else(|| "–".to_string())
}

/// Lines of the side-by-side, added to the card after the parameters.
pub fn prior_lines(
    lines: &mut Vec<Line<'static>>,
    fit: &FitView,
    prior: &PriorBasis,
    theme: Theme,
) {
    lines.push(Line::from(Span::styled(
        format!("with the texture prior: {}", prior.label),
        theme.heading(),
    )));
    lines.push(Line::from(Span::styled(
        format!(
            "  noise sd {} m3/m3 assumed; not ranked by AICc",
            num(prior.noise_sd, 2)
        ),
        theme.dim(),
    )));
    lines.push(Line::from(Span::styled(
        "param   prior  reads  pull, sd",
        theme.dim(),
    )));
    for (j, p) in fit.parameters.iter().enumerate().take(4) {
        let plain = prior
            .readings_only
            .map_or_else(|| "–".to_string(), |r| num(r[j], 3));
        let pull = prior.pull_sd.get(j).copied().unwrap_or(f64::NAN);
        let short = match p.name.as_str() {
            "alpha_per_cm" => "alpha",
            other => other,
        };
        lines.push(Line::from(format!(
            "{short:<7} {:<6} {plain:<6} {}{}",
            num(p.value, 3),
            if pull >= 0.0 { "+" } else { "" },
            num(pull, 2)
        )));
    }
    let plain_sse = prior
        .readings_only_sse
        .map_or_else(|| "–".to_string(), |s| num(s, 2));
    let sse = fit.rmse * fit.rmse * fit.n_points as f64;
    lines.push(Line::from(format!(
        "SSE     {:<6} {plain_sse}",
        num(sse, 2)
    )));
    if prior.readings_only.is_none() {
        lines.push(Line::from(Span::styled(
            format!(
                "  readings only: none ({} readings, 4 parameters)",
                fit.n_points
            ),
            theme.dim(),
        )));
    } else {
        lines.push(Line::from(Span::styled(
            "  fit --prior none: readings-only current",
            theme.dim(),
        )));
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::prior::{Prior, PriorOptions, fit_with_prior};
    use crate::fit::{FitOptions, Readings, fit_model};
    use crate::model::retention::ModelKind;
    use crate::model::texture::TextureClass;

    fn view(h: &[f64], y: &[f64]) -> FitView {
        let plain = fit_model(
            ModelKind::VanGenuchten,
            &Readings::new(h, y),
            &FitOptions::new(),
        )
        .ok();
        let prior = Prior {
            label: "loam, Carsel & Parrish 1988".into(),
            source: "test".into(),
            q: TextureClass::Loam.carsel_parrish().transformed(),
        };
        let r = fit_with_prior(
            &Readings::new(h, y),
            &prior,
            &PriorOptions {
                readings_only: plain,
                ..PriorOptions::default()
            },
        )
        .expect("fits");
        FitView {
            id: 1,
            model: r.model.clone(),
            requested: Some("van-genuchten+texture-prior".into()),
            parameters: r.parameters.clone(),
            n_points: r.n_points,
            rmse: r.rmse,
            r2: r.r2,
            aicc: r.aicc,
            bic: r.bic,
            message: None,
            derived: None,
            ranking: None,
            next: None,
            prior: r.prior,
        }
    }

    fn text(fit: &FitView) -> Vec<String> {
        let mut lines = Vec::new();
        let prior = fit.prior.clone().expect("prior");
        prior_lines(&mut lines, fit, &prior, Theme::default());
        lines
            .iter()
            .map(|l| l.spans.iter().map(|s| s.content.as_ref()).collect())
            .collect()
    }

    #[test]
    fn four_readings_say_there_is_no_readings_only_fit() {
        let h = [0.0, 61.0, 336.5, 15296.0];
        let y = [0.40, 0.29, 0.19, 0.10];
        let t = text(&view(&h, &y));
        assert!(t[0].contains("loam"), "{t:?}");
        assert!(t.iter().any(|l| l.contains("none (4 readings")), "{t:?}");
        assert!(t.iter().any(|l| l.starts_with("alpha ")), "{t:?}");
        assert!(t.iter().any(|l| l.contains("pull, sd")), "{t:?}");
    }

    #[test]
    fn more_readings_show_both_fits_and_how_to_choose() {
        let h = [0.0, 10.0, 30.0, 61.0, 100.0, 336.5, 1000.0, 15296.0];
        let y = [0.41, 0.40, 0.36, 0.31, 0.28, 0.20, 0.15, 0.10];
        let fit = view(&h, &y);
        let t = text(&fit);
        let plain = fit
            .prior
            .as_ref()
            .and_then(|p| p.readings_only)
            .expect("plain");
        let theta_s = t.iter().find(|l| l.starts_with("theta_s")).expect("row");
        assert!(theta_s.contains(&num(plain[1], 3)), "{theta_s}");
        assert!(t.iter().any(|l| l.contains("--prior none")), "{t:?}");
    }
}
