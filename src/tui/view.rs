//! Rendering: a pure function of [`AppState`], one module per pane.
//!
//! [`render`] lays the screen out for the terminal's size and draws every pane; nothing here
//! changes the state or touches the terminal beyond the frame it is given.

use ratatui::Frame;
use ratatui::buffer::Buffer;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::Style;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, BorderType, Row, Table, Widget};

use crate::model::number::significant;
use crate::model::units::CM_PER_KPA;

use super::app::{AppState, AxisUnit, Pane, Screen, TreeRow};
use super::keymap::KeyTable;
use super::theme::Theme;

pub mod card;
pub mod chrome;
pub mod conductivity;
pub mod curve;
pub mod depth;
pub mod help;
pub mod plot;
pub mod prior_card;
pub mod prompt;
pub mod readings;
pub mod review;
pub mod series;
pub mod summary;
pub mod texture_fill;
pub mod tree;

/// Where the browse screen's panes go.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct BrowseLayout {
    /// The campaign tree.
    pub tree: Rect,
    /// The curve (or the summary of a site or layer, with the card's place).
    pub curve: Rect,
    /// The fit card beside the curve, on terminals wide enough.
    pub card: Option<Rect>,
    /// Below the curve: the readings, or the card when it has no place of its own and has focus.
    pub lower: Rect,
}

/// Terminals at least this wide show the fit card beside the curve.
pub const WIDE: u16 = 100;

/// Split the body of the browse screen.
pub fn browse_layout(body: Rect) -> BrowseLayout {
    let tree_width = (body.width / 4).clamp(26, 40);
    let [tree, right] =
        Layout::horizontal([Constraint::Length(tree_width), Constraint::Fill(1)]).areas(body);
    let upper_height = (right.height * 11 / 20).max(8);
    let [upper, lower] =
        Layout::vertical([Constraint::Length(upper_height), Constraint::Fill(1)]).areas(right);
    if body.width >= WIDE {
        let card_width = (right.width * 2 / 5).clamp(34, 52);
        let [curve, card] =
            Layout::horizontal([Constraint::Fill(1), Constraint::Length(card_width)]).areas(upper);
        BrowseLayout {
            tree,
            curve,
            card: Some(card),
            lower,
        }
    } else {
        BrowseLayout {
            tree,
            curve: upper,
            card: None,
            lower,
        }
    }
}

/// Header, body, status line and footer.
pub fn frame_layout(area: Rect) -> [Rect; 4] {
    Layout::vertical([
        Constraint::Length(1),
        Constraint::Fill(1),
        Constraint::Length(1),
        Constraint::Length(1),
    ])
    .areas(area)
}

/// Draw the whole UI.
pub fn render(state: &AppState, keys: &KeyTable, frame: &mut Frame<'_>) {
    draw(state, keys, frame.area(), frame.buffer_mut());
}

/// Draw the whole UI into a buffer (the same as [`render`], for tests and benchmarks).
pub fn draw(state: &AppState, keys: &KeyTable, area: Rect, buf: &mut Buffer) {
    let [header, body, status, footer] = frame_layout(area);
    chrome::Header { state }.render(header, buf);
    match state.screen {
        Screen::Browse => draw_browse(state, body, buf),
        Screen::Depth => depth::DepthScreen { state }.render(body, buf),
        Screen::Review => review::ReviewScreen { state }.render(body, buf),
        Screen::Series => series::SeriesScreen { state }.render(body, buf),
        Screen::Help => help::HelpScreen { state, keys }.render(body, buf),
    }
    chrome::StatusLine { state }.render(status, buf);
    chrome::Footer { state, keys }.render(footer, buf);
    prompt::Overlay { state }.render(area, buf);
}

fn draw_browse(state: &AppState, body: Rect, buf: &mut Buffer) {
    let layout = browse_layout(body);
    tree::TreePane {
        state,
        focused: state.focus == Pane::Tree,
    }
    .render(layout.tree, buf);
    let on_sample = matches!(state.tree.current(), Some(TreeRow::Sample(..)) | None)
        && state.detail.sample_id().is_some();
    if !on_sample {
        let area = Rect {
            height: layout.curve.height + layout.lower.height,
            width: layout.lower.width,
            ..layout.curve
        };
        summary::SummaryPane { state }.render(area, buf);
        return;
    }
    curve::CurvePane {
        state,
        focused: state.focus == Pane::Curve,
    }
    .render(layout.curve, buf);
    if let Some(card) = layout.card {
        card::CardPane {
            state,
            focused: state.focus == Pane::Card,
        }
        .render(card, buf);
        readings::ReadingsPane {
            state,
            focused: state.focus == Pane::Readings,
        }
        .render(layout.lower, buf);
    } else if state.focus == Pane::Card {
        card::CardPane {
            state,
            focused: true,
        }
        .render(layout.lower, buf);
    } else {
        readings::ReadingsPane {
            state,
            focused: state.focus == Pane::Readings,
        }
        .render(layout.lower, buf);
    }
}

/// A pane's block: rounded border, title, bold cyan when focused (and a `▶` so focus shows
/// without colour too).
pub fn pane_block<'a>(title: impl Into<Line<'a>>, focused: bool, theme: Theme) -> Block<'a> {
    let title: Line<'a> = title.into();
    let mut spans = vec![Span::raw(if focused { "▶ " } else { " " })];
    spans.extend(title.spans);
    spans.push(Span::raw(" "));
    Block::bordered()
        .border_type(BorderType::Rounded)
        .border_style(if focused {
            theme.focused_border()
        } else {
            theme.border()
        })
        .title(Line::from(spans).style(if focused {
            theme.focused_border()
        } else {
            Style::new()
        }))
}

/// Draw a table with one space between columns.
pub fn render_table<'a>(
    header: Row<'a>,
    rows: impl IntoIterator<Item = Row<'a>>,
    widths: &[Constraint],
    area: Rect,
    buf: &mut Buffer,
) {
    Widget::render(
        Table::new(rows, widths).header(header).column_spacing(1),
        area,
        buf,
    );
}

/// A table row, styled as the cursor when it is the cursor's.
pub fn cursor_row(row: Row<'_>, is_cursor: bool, focused: bool, theme: Theme) -> Row<'_> {
    match (is_cursor, focused) {
        (false, _) => row,
        (true, true) => row.style(theme.cursor()),
        (true, false) => row.style(theme.cursor_unfocused()),
    }
}

/// Draw a pane's block and return the area inside it.
pub fn framed<'a>(
    title: impl Into<Line<'a>>,
    focused: bool,
    theme: Theme,
    area: Rect,
    buf: &mut Buffer,
) -> Rect {
    let block = pane_block(title, focused, theme);
    let inner = block.inner(area);
    block.render(area, buf);
    inner
}

/// First row shown of a list of `len` rows in `height` rows, keeping the cursor in the middle
/// once the list no longer fits.
pub fn scroll_offset(cursor: usize, len: usize, height: usize) -> usize {
    if len <= height || height == 0 {
        0
    } else {
        cursor.saturating_sub(height / 2).min(len - height)
    }
}

/// A number with `digits` significant digits, or an empty string when it is not finite.
pub fn num(value: f64, digits: usize) -> String {
    significant(value, digits).unwrap_or_default()
}

/// An optional number, `–` when absent.
pub fn opt_num(value: Option<f64>, digits: usize) -> String {
    value
        .and_then(|v| significant(v, digits))
        .unwrap_or_else(|| "–".to_string())
}

/// Water content with three decimals.
pub fn theta_text(theta: f64) -> String {
    if theta.is_finite() {
        format!("{theta:.3}")
    } else {
        String::new()
    }
}

/// A suction in the chosen unit (`sat` for h = 0 in pF, where it has no value).
pub fn suction_text(h_cm: f64, unit: AxisUnit) -> String {
    match unit {
        AxisUnit::Cm => num(h_cm, 4),
        AxisUnit::Kpa => num(h_cm / CM_PER_KPA, 3),
        AxisUnit::Pf => {
            if h_cm > 0.0 {
                format!("{:.2}", h_cm.log10())
            } else {
                "sat".to_string()
            }
        }
    }
}

/// A suction given in kPa, written in the chosen unit with its symbol.
pub fn kpa_text(kpa: f64, unit: AxisUnit) -> String {
    let h = kpa * CM_PER_KPA;
    match unit {
        AxisUnit::Pf => format!("pF {}", suction_text(h, unit)),
        _ => format!("{} {}", suction_text(h, unit), unit.symbol()),
    }
}

/// The tag of a field-pairing sample beside its code (a lab core has none): in-situ sensors,
/// not a core on a plate.
pub const FIELD_TAG: &str = "≈";

/// The kind tag of a sample: [`FIELD_TAG`] for a field pairing, a space for a lab core.
pub fn kind_tag(kind: crate::model::domain::SampleKind) -> &'static str {
    match kind {
        crate::model::domain::SampleKind::FieldPairing => FIELD_TAG,
        crate::model::domain::SampleKind::LabCore => " ",
    }
}

/// A sample code without its site's prefix (`TER1-field-15cm` under `TER1` is `field-15cm`),
/// where the site is shown already (the tree under its site row, the depth view of a site).
pub fn short_code<'a>(site: &str, code: &'a str) -> &'a str {
    code.strip_prefix(site)
        .and_then(|rest| rest.strip_prefix('-'))
        .filter(|rest| !rest.is_empty())
        .unwrap_or(code)
}

/// Cut text to `width` characters, ending with `…` when cut.
pub fn fit_width(text: &str, width: usize) -> String {
    let count = text.chars().count();
    if count <= width {
        text.to_string()
    } else if width == 0 {
        String::new()
    } else {
        let mut out: String = text.chars().take(width - 1).collect();
        out.push('…');
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn layouts_fit_the_two_reference_sizes() {
        let narrow = browse_layout(Rect::new(0, 1, 80, 22));
        assert!(narrow.card.is_none());
        assert_eq!(narrow.tree.width, 26);
        assert!(narrow.curve.height >= 8 && narrow.lower.height >= 8);
        let wide = browse_layout(Rect::new(0, 1, 100, 28));
        let card = wide.card.expect("card beside the curve");
        assert!(card.width >= 34 && wide.curve.width >= 40);
        let big = browse_layout(Rect::new(0, 1, 200, 60));
        assert!(big.tree.width > 40 - 1 && big.curve.width > wide.curve.width);
    }

    #[test]
    fn numbers_never_print_nan() {
        assert_eq!(num(f64::NAN, 3), "");
        assert_eq!(opt_num(None, 3), "–");
        assert_eq!(theta_text(f64::INFINITY), "");
        assert_eq!(suction_text(0.0, AxisUnit::Pf), "sat");
        assert_eq!(suction_text(1000.0, AxisUnit::Pf), "3.00");
        assert_eq!(suction_text(33.0 * CM_PER_KPA, AxisUnit::Kpa), "33");
        assert_eq!(kpa_text(1500.0, AxisUnit::Kpa), "1500 kPa");
        assert_eq!(fit_width("abcdef", 4), "abc…");
        assert_eq!(short_code("TER1", "TER1-field-15cm"), "field-15cm");
        assert_eq!(short_code("TER1", "TER10-A-a"), "TER10-A-a");
        assert_eq!(short_code("TER1", "TER1-"), "TER1-");
        assert_eq!(scroll_offset(50, 100, 10), 45);
        assert_eq!(scroll_offset(99, 100, 10), 90);
        assert_eq!(scroll_offset(3, 5, 10), 0);
    }
}
