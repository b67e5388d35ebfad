//! Styles of the terminal UI, with and without colour.
//!
//! Colour only ever repeats what a glyph, a label or a modifier already says (a failed fit is
//! `✗ failed`, an excluded point is `x`, the selection is reversed), so a monochrome terminal,
//! `NO_COLOR=1` (<https://no-color.org>) or a colour-blind reader loses nothing.

use ratatui::style::{Color, Modifier, Style};

use super::signs::{FitTag, Tone};

/// The palette in use.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Theme {
    /// Whether colours are used at all.
    pub color: bool,
}

impl Default for Theme {
    fn default() -> Self {
        Self { color: true }
    }
}

impl Theme {
    /// Colours unless the `NO_COLOR` value (as read from the environment) is set and not empty.
    pub fn from_no_color(no_color: Option<&std::ffi::OsStr>) -> Theme {
        Theme {
            color: no_color.is_none_or(std::ffi::OsStr::is_empty),
        }
    }

    /// A theme without colour.
    pub fn monochrome() -> Theme {
        Theme { color: false }
    }

    fn fg(self, color: Color) -> Style {
        if self.color {
            Style::new().fg(color)
        } else {
            Style::new()
        }
    }

    /// Plain text.
    pub fn text(self) -> Style {
        Style::new()
    }

    /// Secondary text (units, hints).
    pub fn dim(self) -> Style {
        Style::new().add_modifier(Modifier::DIM)
    }

    /// The row under the cursor of the focused pane.
    pub fn cursor(self) -> Style {
        Style::new().add_modifier(Modifier::REVERSED | Modifier::BOLD)
    }

    /// The row under the cursor of a pane without focus.
    pub fn cursor_unfocused(self) -> Style {
        Style::new().add_modifier(Modifier::UNDERLINED)
    }

    /// Border and title of the focused pane.
    pub fn focused_border(self) -> Style {
        self.fg(Color::Cyan).add_modifier(Modifier::BOLD)
    }

    /// Border of other panes.
    pub fn border(self) -> Style {
        self.fg(Color::DarkGray)
    }

    /// Headings inside panes.
    pub fn heading(self) -> Style {
        Style::new().add_modifier(Modifier::BOLD)
    }

    /// A fit standing (the glyph beside it carries the same meaning).
    pub fn fit_tag(self, tag: FitTag) -> Style {
        match tag {
            FitTag::None => self.dim(),
            FitTag::Current => self.fg(Color::Green),
            FitTag::Stale => self.fg(Color::Yellow).add_modifier(Modifier::BOLD),
            FitTag::Failed => self.fg(Color::Red).add_modifier(Modifier::BOLD),
        }
    }

    /// The tag of a field-pairing sample (`≈`).
    pub fn field_tag(self) -> Style {
        self.fg(Color::Green).add_modifier(Modifier::BOLD)
    }

    /// A logger series line.
    pub fn series(self) -> Color {
        if self.color {
            Color::Cyan
        } else {
            Color::Reset
        }
    }

    /// Flag marks and counts.
    pub fn flag(self) -> Style {
        self.fg(Color::Magenta).add_modifier(Modifier::BOLD)
    }

    /// A measured point used by the fit (`o`).
    pub fn point(self) -> Style {
        self.fg(Color::White).add_modifier(Modifier::BOLD)
    }

    /// A point left out of fits (`x`).
    pub fn excluded_point(self) -> Style {
        self.fg(Color::Red).add_modifier(Modifier::BOLD)
    }

    /// The highlighted reading on the curve (`◆`).
    pub fn selected_point(self) -> Style {
        self.fg(Color::Yellow)
            .add_modifier(Modifier::BOLD | Modifier::REVERSED)
    }

    /// The fitted curve.
    pub fn curve(self) -> Color {
        if self.color {
            Color::Cyan
        } else {
            Color::Reset
        }
    }

    /// The 95 % band (drawn dotted).
    pub fn band(self) -> Color {
        if self.color {
            Color::Blue
        } else {
            Color::Reset
        }
    }

    /// Field capacity and wilting point markers (drawn dashed, labelled).
    pub fn marker_line(self) -> Color {
        if self.color {
            Color::Yellow
        } else {
            Color::Reset
        }
    }

    /// Colour of a layer's curves in the depth view (the layer's digit is the real key).
    pub fn layer(self, index: usize) -> Color {
        const CYCLE: [Color; 6] = [
            Color::Cyan,
            Color::Yellow,
            Color::Green,
            Color::Magenta,
            Color::LightBlue,
            Color::LightRed,
        ];
        if self.color {
            CYCLE[index % CYCLE.len()]
        } else {
            Color::Reset
        }
    }

    /// A status message.
    pub fn tone(self, tone: Tone) -> Style {
        match tone {
            Tone::Info => Style::new(),
            Tone::Warning => self.fg(Color::Yellow).add_modifier(Modifier::BOLD),
            Tone::Error => self.fg(Color::Red).add_modifier(Modifier::BOLD),
        }
    }

    /// Keys in the footer and help.
    pub fn key(self) -> Style {
        self.fg(Color::Cyan).add_modifier(Modifier::BOLD)
    }

    /// The active tab of the header.
    pub fn active_tab(self) -> Style {
        Style::new().add_modifier(Modifier::REVERSED | Modifier::BOLD)
    }
}

#[cfg(test)]
mod tests {
    use std::ffi::OsStr;

    use super::*;

    #[test]
    fn no_color_set_and_not_empty_turns_colour_off() {
        assert!(Theme::from_no_color(None).color);
        assert!(Theme::from_no_color(Some(OsStr::new(""))).color);
        assert!(!Theme::from_no_color(Some(OsStr::new("1"))).color);
    }

    #[test]
    fn monochrome_styles_keep_their_modifiers_and_lose_colour() {
        let t = Theme::monochrome();
        for style in [
            t.fit_tag(FitTag::Failed),
            t.fit_tag(FitTag::Stale),
            t.excluded_point(),
            t.selected_point(),
            t.flag(),
            t.tone(Tone::Error),
            t.focused_border(),
        ] {
            assert_eq!(style.fg, None, "{style:?}");
            assert!(!style.add_modifier.is_empty(), "{style:?} carries nothing");
        }
        assert_eq!(t.curve(), Color::Reset);
        assert!(t.cursor().add_modifier.contains(Modifier::REVERSED));
        let c = Theme::default();
        assert_eq!(c.fit_tag(FitTag::Failed).fg, Some(Color::Red));
        assert_eq!(c.excluded_point().fg, Some(Color::Red));
    }
}
