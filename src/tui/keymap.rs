//! Keys as data: one table of bindings per mode, the same table for handling keys, for the
//! footer and for the help screen.
//!
//! [`map`] is pure: a mode, a key event and the table give an [`Action`] or nothing. Text modes
//! (typing a filter or a reason) turn unbound printable keys into [`Action::Char`] and do not
//! see the global keys, so typing `q` never quits.

use std::fmt;

use ratatui::crossterm::event::{KeyCode, KeyEvent, KeyEventKind, KeyModifiers};

use super::action::Action;
use super::app::{AppState, Input, Screen};

/// Which bindings apply.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Mode {
    /// The browse screen.
    Browse,
    /// The depth view.
    Depth,
    /// The review queue.
    Review,
    /// The logger series.
    Series,
    /// The help screen.
    Help,
    /// Typing the tree filter.
    Filter,
    /// Typing a flag reason.
    Reason,
    /// Answering whether to quit.
    Confirm,
}

impl Mode {
    /// Every mode, in the order the help screen lists them.
    pub const ALL: [Mode; 8] = [
        Mode::Browse,
        Mode::Depth,
        Mode::Review,
        Mode::Series,
        Mode::Help,
        Mode::Filter,
        Mode::Reason,
        Mode::Confirm,
    ];

    /// The mode the state is in.
    pub fn of(state: &AppState) -> Mode {
        match state.input {
            Input::Filter(_) => Mode::Filter,
            Input::Reason { .. } => Mode::Reason,
            Input::ConfirmQuit => Mode::Confirm,
            Input::None => match state.screen {
                Screen::Browse => Mode::Browse,
                Screen::Depth => Mode::Depth,
                Screen::Review => Mode::Review,
                Screen::Series => Mode::Series,
                Screen::Help => Mode::Help,
            },
        }
    }

    /// Whether typed characters are text.
    pub fn is_text(self) -> bool {
        matches!(self, Mode::Filter | Mode::Reason)
    }

    /// Whether the global keys apply.
    pub fn has_globals(self) -> bool {
        !matches!(self, Mode::Filter | Mode::Reason | Mode::Confirm)
    }

    /// Heading in the help screen.
    pub fn title(self) -> &'static str {
        match self {
            Mode::Browse => "Browsing (tree, curve, readings, fit card)",
            Mode::Depth => "Depth view",
            Mode::Review => "Review queue",
            Mode::Series => "Logger series",
            Mode::Help => "This help",
            Mode::Filter => "Typing a filter",
            Mode::Reason => "Typing a flag reason",
            Mode::Confirm => "Quit while a fit runs?",
        }
    }
}

/// One key: a code and whether Ctrl or Alt is held (Shift is in the character itself).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct Key {
    /// The key.
    pub code: KeyCode,
    /// Ctrl held.
    pub ctrl: bool,
    /// Alt held.
    pub alt: bool,
}

impl Key {
    /// A key without modifiers.
    pub const fn plain(code: KeyCode) -> Key {
        Key {
            code,
            ctrl: false,
            alt: false,
        }
    }

    /// A character key.
    pub const fn char(c: char) -> Key {
        Key::plain(KeyCode::Char(c))
    }

    /// Ctrl and a character.
    pub const fn ctrl(c: char) -> Key {
        Key {
            code: KeyCode::Char(c),
            ctrl: true,
            alt: false,
        }
    }

    /// The key of a terminal event (Shift folded into the character or into BackTab).
    pub fn of(event: &KeyEvent) -> Key {
        let code = match event.code {
            KeyCode::Char(c) if event.modifiers.contains(KeyModifiers::CONTROL) => {
                KeyCode::Char(c.to_ascii_lowercase())
            }
            KeyCode::Tab if event.modifiers.contains(KeyModifiers::SHIFT) => KeyCode::BackTab,
            other => other,
        };
        Key {
            code,
            ctrl: event.modifiers.contains(KeyModifiers::CONTROL),
            alt: event.modifiers.contains(KeyModifiers::ALT),
        }
    }

    /// A terminal event for this key (for scripted sessions and tests).
    pub fn event(self) -> KeyEvent {
        let mut modifiers = KeyModifiers::NONE;
        if self.ctrl {
            modifiers |= KeyModifiers::CONTROL;
        }
        if self.alt {
            modifiers |= KeyModifiers::ALT;
        }
        if matches!(self.code, KeyCode::Char(c) if c.is_ascii_uppercase())
            || self.code == KeyCode::BackTab
        {
            modifiers |= KeyModifiers::SHIFT;
        }
        KeyEvent::new(self.code, modifiers)
    }
}

impl fmt::Display for Key {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.ctrl {
            f.write_str("ctrl-")?;
        }
        if self.alt {
            f.write_str("alt-")?;
        }
        match self.code {
            KeyCode::Char(' ') => f.write_str("space"),
            KeyCode::Char(c) => write!(f, "{c}"),
            KeyCode::Up => f.write_str("↑"),
            KeyCode::Down => f.write_str("↓"),
            KeyCode::Left => f.write_str("←"),
            KeyCode::Right => f.write_str("→"),
            KeyCode::Enter => f.write_str("Enter"),
            KeyCode::Esc => f.write_str("Esc"),
            KeyCode::Tab => f.write_str("Tab"),
            KeyCode::BackTab => f.write_str("S-Tab"),
            KeyCode::PageUp => f.write_str("PgUp"),
            KeyCode::PageDown => f.write_str("PgDn"),
            KeyCode::Home => f.write_str("Home"),
            KeyCode::End => f.write_str("End"),
            KeyCode::Backspace => f.write_str("Backspace"),
            other => write!(f, "{other:?}"),
        }
    }
}

/// One binding: its keys, what they do, a help line and an optional footer label.
#[derive(Debug, Clone, PartialEq)]
pub struct Binding {
    /// The keys (the first is shown first).
    pub keys: Vec<Key>,
    /// What they do.
    pub action: Action,
    /// The help screen's line.
    pub help: &'static str,
    /// Short label for the footer; `None` to leave it to the help screen.
    pub footer: Option<&'static str>,
}

impl Binding {
    /// The keys as the help and the footer write them (`↑ k`).
    pub fn keys_label(&self) -> String {
        self.keys
            .iter()
            .map(ToString::to_string)
            .collect::<Vec<_>>()
            .join(" ")
    }
}

/// Every binding: those of every mode, the global ones and the ones that always apply.
#[derive(Debug, Clone, PartialEq)]
pub struct KeyTable {
    /// Apply in every mode, text modes too (Ctrl-C).
    pub always: Vec<Binding>,
    /// Apply in the screen modes, after the mode's own.
    pub global: Vec<Binding>,
    /// Each mode's own bindings.
    pub modes: Vec<(Mode, Vec<Binding>)>,
}

fn bind(keys: &[Key], action: Action, help: &'static str, footer: Option<&'static str>) -> Binding {
    Binding {
        keys: keys.to_vec(),
        action,
        help,
        footer,
    }
}

const UP: [Key; 2] = [Key::plain(KeyCode::Up), Key::char('k')];
const DOWN: [Key; 2] = [Key::plain(KeyCode::Down), Key::char('j')];

fn moves() -> Vec<Binding> {
    vec![
        bind(&UP, Action::Up, "move up", None),
        bind(&DOWN, Action::Down, "move down", None),
        bind(
            &[Key::plain(KeyCode::PageUp)],
            Action::PageUp,
            "page up",
            None,
        ),
        bind(
            &[Key::plain(KeyCode::PageDown)],
            Action::PageDown,
            "page down",
            None,
        ),
        bind(
            &[Key::plain(KeyCode::Home), Key::char('g')],
            Action::Top,
            "first row",
            None,
        ),
        bind(
            &[Key::plain(KeyCode::End), Key::char('G')],
            Action::Bottom,
            "last row",
            None,
        ),
    ]
}

fn back_to_browsing() -> Binding {
    bind(
        &[Key::plain(KeyCode::Esc)],
        Action::Back,
        "back to browsing",
        None,
    )
}

impl Default for KeyTable {
    fn default() -> Self {
        let always = vec![bind(
            &[Key::ctrl('c')],
            Action::ForceQuit,
            "quit at once (a running fit is abandoned; nothing of it is written)",
            None,
        )];
        let global = vec![
            bind(
                &[Key::char('q')],
                Action::Quit,
                "quit (asks first while a fit runs)",
                Some("quit"),
            ),
            bind(
                &[Key::char('?')],
                Action::ToggleHelp,
                "show or hide this help",
                Some("help"),
            ),
            bind(
                &[Key::char('1')],
                Action::ShowBrowse,
                "browse: tree, curve, readings, fit card",
                None,
            ),
            bind(
                &[Key::char('2')],
                Action::ShowDepth,
                "depth view of the selected site",
                Some("depth"),
            ),
            bind(
                &[Key::char('3')],
                Action::ShowReview,
                "review queue of suspected outliers",
                Some("review"),
            ),
            bind(
                &[Key::char('4')],
                Action::ShowSeries,
                "logger series of the selected site (the layer's depth first)",
                Some("series"),
            ),
            bind(
                &[Key::char('f')],
                Action::RefitSample,
                "refit the selected sample (in the background)",
                Some("fit"),
            ),
            bind(
                &[Key::char('F')],
                Action::RefitSite,
                "refit every sample of the selected site",
                None,
            ),
            bind(
                &[Key::char('C')],
                Action::RefitSampleWithConductivity,
                "refit the selected sample with its measured conductivity (the model of m; van Genuchten for auto)",
                None,
            ),
            bind(
                &[Key::char('o')],
                Action::NextCurrentFit,
                "make the sample's other fit current: retention-only, with conductivity, with the texture prior (newest of each, in turn)",
                None,
            ),
            bind(
                &[Key::ctrl('f')],
                Action::RefitAll,
                "refit every sample of the campaign",
                None,
            ),
            bind(
                &[Key::char('m')],
                Action::CycleModel,
                "model for refits: each model in turn, then auto",
                Some("model"),
            ),
            bind(
                &[Key::char('u')],
                Action::CycleUnits,
                "suction unit: cm, kPa, pF",
                Some("units"),
            ),
            bind(
                &[Key::char('b')],
                Action::ToggleBand,
                "show or hide the 95 % band of the fitted curve",
                Some("band"),
            ),
            bind(
                &[Key::char('c')],
                Action::ToggleConductivity,
                "curve pane: θ(h) or K(h) (measured K, the fitted or predicted K curve, Ks)",
                Some("K(h)"),
            ),
            bind(
                &[Key::char('x')],
                Action::Export,
                "export the campaign report",
                None,
            ),
        ];
        let mut browse = moves();
        browse.extend([
            bind(
                &[Key::plain(KeyCode::Left), Key::char('h')],
                Action::Left,
                "collapse, or go to the parent",
                None,
            ),
            bind(
                &[Key::plain(KeyCode::Right), Key::char('l')],
                Action::Right,
                "expand, or go to the first child",
                None,
            ),
            bind(
                &[Key::plain(KeyCode::Enter), Key::char(' ')],
                Action::Open,
                "open or close a site or layer; on a sample, go to its readings",
                Some("open"),
            ),
            bind(
                &[Key::plain(KeyCode::Esc)],
                Action::Back,
                "back to the tree; in the tree, clear the filter",
                None,
            ),
            bind(
                &[Key::plain(KeyCode::Tab)],
                Action::NextPane,
                "next pane",
                Some("pane"),
            ),
            bind(
                &[Key::plain(KeyCode::BackTab)],
                Action::PrevPane,
                "previous pane",
                None,
            ),
            bind(
                &[Key::char('/')],
                Action::StartFilter,
                "filter the tree by code, horizon, site or model",
                Some("filter"),
            ),
            bind(
                &[Key::char('t')],
                Action::ToggleFlag,
                "flag the selected reading, or clear its flag (asks why)",
                Some("flag"),
            ),
        ]);
        let mut depth = moves();
        depth.extend([
            bind(
                &[Key::plain(KeyCode::Left), Key::char('h'), Key::char('[')],
                Action::Left,
                "previous site",
                Some("site"),
            ),
            bind(
                &[Key::plain(KeyCode::Right), Key::char('l'), Key::char(']')],
                Action::Right,
                "next site",
                None,
            ),
            bind(
                &[Key::char('+'), Key::char('=')],
                Action::DeeperRootZone,
                "sum available water 10 cm deeper",
                Some("deeper"),
            ),
            bind(
                &[Key::char('-')],
                Action::ShallowerRootZone,
                "sum available water 10 cm shallower",
                Some("shallower"),
            ),
            bind(
                &[Key::char('e')],
                Action::ToggleTextureFill,
                "fill layers without a fitted core with their texture estimate (◌), or not",
                None,
            ),
            bind(
                &[Key::plain(KeyCode::Enter)],
                Action::Open,
                "open the sample under the cursor",
                Some("open"),
            ),
            back_to_browsing(),
        ]);
        let mut review = moves();
        review.extend([
            bind(
                &[Key::char('a')],
                Action::Accept,
                "accept: leave the reading out and refit (a record out of pairing); on an \
                 episode, all of its records",
                Some("accept"),
            ),
            bind(
                &[Key::char('d')],
                Action::Dismiss,
                "dismiss: keep the reading (or record); on an episode, all of its records",
                Some("dismiss"),
            ),
            bind(
                &[Key::plain(KeyCode::Enter)],
                Action::Open,
                "show the sample in the browser (a record: its series); open an episode to \
                 decide record by record (Esc back to the list)",
                Some("open"),
            ),
            back_to_browsing(),
        ]);
        let mut series = moves();
        series.extend([
            bind(
                &[Key::plain(KeyCode::Left), Key::char('h')],
                Action::Left,
                "earlier: move the window back by half its width",
                Some("time"),
            ),
            bind(
                &[Key::plain(KeyCode::Right), Key::char('l')],
                Action::Right,
                "later: move the window on by half its width",
                None,
            ),
            bind(
                &[Key::char('+'), Key::char('=')],
                Action::ZoomIn,
                "zoom in: half the time window",
                Some("zoom"),
            ),
            bind(
                &[Key::char('-')],
                Action::ZoomOut,
                "zoom out: twice the time window",
                None,
            ),
            bind(
                &[Key::char('w')],
                Action::WholeSpan,
                "the whole series",
                Some("whole"),
            ),
            bind(
                &[Key::char('[')],
                Action::PrevSite,
                "previous site with loggers",
                Some("site"),
            ),
            bind(
                &[Key::char(']')],
                Action::NextSite,
                "next site with loggers",
                None,
            ),
            bind(
                &[Key::plain(KeyCode::Enter)],
                Action::Open,
                "open the field pairing of this depth in the browser",
                Some("open"),
            ),
            back_to_browsing(),
        ]);
        let mut help: Vec<Binding> = moves().into_iter().take(4).collect();
        help.extend([bind(
            &[Key::plain(KeyCode::Esc), Key::plain(KeyCode::Enter)],
            Action::Back,
            "close the help",
            Some("close"),
        )]);
        let typing = |submit: &'static str, cancel: &'static str| {
            vec![
                bind(
                    &[Key::plain(KeyCode::Enter)],
                    Action::Submit,
                    submit,
                    Some(submit),
                ),
                bind(
                    &[Key::plain(KeyCode::Esc)],
                    Action::Cancel,
                    cancel,
                    Some(cancel),
                ),
                bind(
                    &[Key::plain(KeyCode::Backspace)],
                    Action::Backspace,
                    "delete the last character",
                    None,
                ),
            ]
        };
        let confirm = vec![
            bind(
                &[Key::char('y'), Key::plain(KeyCode::Enter)],
                Action::Submit,
                "quit now: the running fit is abandoned and nothing of it is written",
                Some("quit"),
            ),
            bind(
                &[Key::char('n'), Key::plain(KeyCode::Esc)],
                Action::Cancel,
                "keep working",
                Some("stay"),
            ),
        ];
        KeyTable {
            always,
            global,
            modes: vec![
                (Mode::Browse, browse),
                (Mode::Depth, depth),
                (Mode::Review, review),
                (Mode::Series, series),
                (Mode::Help, help),
                (Mode::Filter, typing("keep filter", "clear filter")),
                (Mode::Reason, typing("save", "abandon")),
                (Mode::Confirm, confirm),
            ],
        }
    }
}

impl KeyTable {
    /// A mode's own bindings.
    pub fn mode(&self, mode: Mode) -> &[Binding] {
        self.modes
            .iter()
            .find(|(m, _)| *m == mode)
            .map_or(&[], |(_, b)| b.as_slice())
    }

    /// Every binding that applies in a mode, in lookup order: always, the mode's, global.
    pub fn active(&self, mode: Mode) -> impl Iterator<Item = &Binding> {
        let globals: &[Binding] = if mode.has_globals() {
            &self.global
        } else {
            &[]
        };
        self.always
            .iter()
            .chain(self.mode(mode).iter())
            .chain(globals.iter())
    }

    /// The binding of a key in a mode.
    pub fn lookup(&self, mode: Mode, key: Key) -> Option<&Binding> {
        self.active(mode).find(|b| b.keys.contains(&key))
    }

    /// The footer's key hints for a mode: the mode's own first, then the global ones.
    pub fn footer(&self, mode: Mode) -> Vec<(String, &'static str)> {
        self.active(mode)
            .filter_map(|b| {
                b.footer.map(|label| {
                    (
                        b.keys.first().map(ToString::to_string).unwrap_or_default(),
                        label,
                    )
                })
            })
            .collect()
    }

    /// The help screen's sections: the keys that work everywhere, then each mode's.
    pub fn help_sections(&self) -> Vec<(&'static str, Vec<(String, &'static str)>)> {
        let lines = |bindings: &[Binding]| {
            bindings
                .iter()
                .map(|b| (b.keys_label(), b.help))
                .collect::<Vec<_>>()
        };
        let mut everywhere = lines(&self.global);
        everywhere.extend(lines(&self.always));
        let mut out = vec![("Everywhere but while typing", everywhere)];
        for mode in Mode::ALL {
            out.push((mode.title(), lines(self.mode(mode))));
        }
        out
    }
}

/// The action of a key event in a mode, or `None` when the key means nothing there.
pub fn map(mode: Mode, event: &KeyEvent, table: &KeyTable) -> Option<Action> {
    if event.kind != KeyEventKind::Press {
        return None;
    }
    let key = Key::of(event);
    if let Some(binding) = table.lookup(mode, key) {
        return Some(binding.action.clone());
    }
    match key.code {
        KeyCode::Char(c) if mode.is_text() && !key.ctrl && !key.alt && !c.is_control() => {
            Some(Action::Char(c))
        }
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use std::collections::HashMap;

    use super::*;

    #[test]
    fn no_key_means_two_things_in_any_mode() {
        let table = KeyTable::default();
        for mode in Mode::ALL {
            let mut seen: HashMap<Key, &str> = HashMap::new();
            for b in table.active(mode) {
                for key in &b.keys {
                    if let Some(other) = seen.insert(*key, b.help) {
                        panic!("{mode:?}: {key} is bound to {other:?} and {:?}", b.help);
                    }
                }
            }
        }
    }

    #[test]
    fn every_user_intent_has_a_key() {
        let table = KeyTable::default();
        let bound: Vec<&Action> = table
            .always
            .iter()
            .chain(&table.global)
            .chain(table.modes.iter().flat_map(|(_, b)| b))
            .map(|b| &b.action)
            .collect();
        for action in [
            Action::Up,
            Action::Down,
            Action::PageUp,
            Action::PageDown,
            Action::Top,
            Action::Bottom,
            Action::Left,
            Action::Right,
            Action::NextPane,
            Action::PrevPane,
            Action::Open,
            Action::Back,
            Action::ShowBrowse,
            Action::ShowDepth,
            Action::ShowReview,
            Action::ShowSeries,
            Action::PrevSite,
            Action::NextSite,
            Action::ZoomIn,
            Action::ZoomOut,
            Action::WholeSpan,
            Action::ToggleHelp,
            Action::StartFilter,
            Action::RefitSample,
            Action::RefitSampleWithConductivity,
            Action::NextCurrentFit,
            Action::RefitSite,
            Action::RefitAll,
            Action::CycleModel,
            Action::CycleUnits,
            Action::ToggleBand,
            Action::ToggleConductivity,
            Action::DeeperRootZone,
            Action::ShallowerRootZone,
            Action::ToggleTextureFill,
            Action::ToggleFlag,
            Action::Accept,
            Action::Dismiss,
            Action::Export,
            Action::Backspace,
            Action::Submit,
            Action::Cancel,
            Action::Quit,
            Action::ForceQuit,
        ] {
            assert!(bound.contains(&&action), "{action:?} has no key");
        }
    }

    fn press(c: char) -> KeyEvent {
        Key::char(c).event()
    }

    #[test]
    fn keys_map_per_mode_and_text_modes_take_characters() {
        let t = KeyTable::default();
        assert_eq!(map(Mode::Browse, &press('j'), &t), Some(Action::Down));
        assert_eq!(
            map(Mode::Browse, &Key::plain(KeyCode::Down).event(), &t),
            Some(Action::Down)
        );
        assert_eq!(map(Mode::Browse, &press('q'), &t), Some(Action::Quit));
        assert_eq!(map(Mode::Review, &press('a'), &t), Some(Action::Accept));
        assert_eq!(map(Mode::Browse, &press('a'), &t), None);
        assert_eq!(map(Mode::Browse, &press('4'), &t), Some(Action::ShowSeries));
        assert_eq!(map(Mode::Series, &press('+'), &t), Some(Action::ZoomIn));
        assert_eq!(map(Mode::Series, &press('h'), &t), Some(Action::Left));
        assert_eq!(map(Mode::Series, &press(']'), &t), Some(Action::NextSite));
        assert_eq!(map(Mode::Depth, &press('w'), &t), None);
        assert_eq!(map(Mode::Filter, &press('q'), &t), Some(Action::Char('q')));
        assert_eq!(map(Mode::Reason, &press('F'), &t), Some(Action::Char('F')));
        assert_eq!(
            map(Mode::Filter, &Key::ctrl('c').event(), &t),
            Some(Action::ForceQuit)
        );
        assert_eq!(map(Mode::Confirm, &press('y'), &t), Some(Action::Submit));
        assert_eq!(map(Mode::Confirm, &press('q'), &t), None);
        assert_eq!(map(Mode::Browse, &press('F'), &t), Some(Action::RefitSite));
        assert_eq!(
            map(Mode::Browse, &Key::ctrl('f').event(), &t),
            Some(Action::RefitAll)
        );
        // Shift+Tab arrives as BackTab (or Tab with Shift on some terminals).
        let shift_tab = KeyEvent::new(KeyCode::Tab, KeyModifiers::SHIFT);
        assert_eq!(map(Mode::Browse, &shift_tab, &t), Some(Action::PrevPane));
        let mut release = press('j');
        release.kind = KeyEventKind::Release;
        assert_eq!(map(Mode::Browse, &release, &t), None);
    }

    #[test]
    fn footer_and_help_come_from_the_table() {
        let t = KeyTable::default();
        let footer = t.footer(Mode::Review);
        assert_eq!(footer[0], ("a".to_string(), "accept"));
        assert!(footer.iter().any(|(k, l)| k == "q" && *l == "quit"));
        let help = t.help_sections();
        let total: usize = help.iter().map(|(_, lines)| lines.len()).sum();
        let bindings =
            t.always.len() + t.global.len() + t.modes.iter().map(|(_, b)| b.len()).sum::<usize>();
        assert_eq!(total, bindings, "every binding has a help line");
        assert!(
            help.iter()
                .flat_map(|(_, l)| l)
                .any(|(k, h)| k == "↑ k" && *h == "move up")
        );
    }
}
