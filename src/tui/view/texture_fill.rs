//! The depth view's lines for layers estimated from their texture class (key `e`), marked ◌.

use ratatui::text::{Line, Span};

use super::super::app::DepthData;
use super::super::app::texture_fill::TextureFill;
use super::super::theme::Theme;
use crate::model::text::shown;

/// One line per estimated layer, after the measured layers.
pub fn estimate_lines(lines: &mut Vec<Line<'static>>, fill: &TextureFill, theme: Theme) {
    for l in &fill.layers {
        let mm = match (l.water_mm, l.water_mm_interval) {
            (Some(v), Some(i)) => format!("{v:.1} {:.0}…{:.0}", i.lo95, i.hi95),
            (Some(v), None) => format!("{v:.1}"),
            (None, _) => "–".to_string(),
        };
        lines.push(Line::from(vec![
            Span::styled("◌ ", theme.dim()),
            Span::raw(format!(
                "{:<12}{:>6} {mm:>9}",
                format!(
                    "{}-{} {}",
                    l.top_cm,
                    l.bottom_cm,
                    shown(l.horizon.as_deref().unwrap_or(""))
                ),
                l.available_water
                    .map_or_else(|| "–".to_string(), |v| format!("{v:.3}")),
            )),
        ]));
        lines.push(Line::from(Span::styled(
            format!("  {} class mean, not measured", l.class.code()),
            theme.dim(),
        )));
    }
}

/// The USDA class of each layer by its mark (`texture 1CL 2C 3C`), when any is known.
pub fn class_line(data: &DepthData) -> Option<String> {
    let parts: Vec<String> = data
        .layers
        .iter()
        .filter_map(|l| l.texture.map(|t| format!("{}{}", l.mark, t.code())))
        .collect();
    (!parts.is_empty()).then(|| format!("texture {}", parts.join(" ")))
}
