//! User text (codes, names, horizons, notes) made safe to show on a terminal or in a file.
//!
//! A lab sheet from outside is untrusted input: a name holding ESC sequences can clear a
//! terminal or retitle its window, and a bidirectional override can reorder what follows it.
//! [`shown`] is the one function every place that prints user text goes through (command-line
//! tables and messages, the TUI, chart labels): such characters come out as visible escapes
//! (`\u{1b}`), everything else unchanged.

use std::borrow::Cow;
use std::fmt::Write as _;

/// The bidirectional formatting characters: marks, embeddings, overrides and isolates
/// (Unicode Standard Annex #9, table 4; the Arabic letter mark U+061C included).
fn is_bidi_control(c: char) -> bool {
    matches!(
        c,
        '\u{061c}' | '\u{200e}' | '\u{200f}' | '\u{202a}'..='\u{202e}' | '\u{2066}'..='\u{2069}'
    )
}

/// True for a character that must not reach a terminal as it is: a control character (C0,
/// DEL, C1; tab and line ends included) or a bidirectional formatting character.
pub fn is_hidden_control(c: char) -> bool {
    c.is_control() || is_bidi_control(c)
}

/// `text` with every [`is_hidden_control`] character written as a visible escape
/// (`\u{1b}`, `\u{202e}`); borrowed unchanged when there is none (nearly always).
pub fn shown(text: &str) -> Cow<'_, str> {
    if !text.chars().any(is_hidden_control) {
        return Cow::Borrowed(text);
    }
    let mut out = String::with_capacity(text.len() + 8);
    for c in text.chars() {
        if is_hidden_control(c) {
            push_escaped(&mut out, c);
        } else {
            out.push(c);
        }
    }
    Cow::Owned(out)
}

/// Append `c` as its visible escape, `\u{1b}`: the form [`shown`] gives hidden characters.
pub fn push_escaped(out: &mut String, c: char) {
    let _ = write!(out, "\\u{{{:x}}}", u32::from(c));
}

/// The first [`is_hidden_control`] character of `text`, for messages refusing it.
pub fn first_hidden_control(text: &str) -> Option<char> {
    text.chars().find(|&c| is_hidden_control(c))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn plain_text_is_borrowed_and_controls_are_escaped() {
        assert!(matches!(shown("LEV1-Ap-a é ≈"), Cow::Borrowed(_)));
        assert_eq!(shown("a\u{1b}[2Jb"), "a\\u{1b}[2Jb");
        assert_eq!(
            shown("\0x\t\r\n\u{7f}\u{85}"),
            "\\u{0}x\\u{9}\\u{d}\\u{a}\\u{7f}\\u{85}"
        );
        assert_eq!(
            shown("A\u{202e}B\u{2066}C\u{200f}\u{61c}"),
            "A\\u{202e}B\\u{2066}C\\u{200f}\\u{61c}"
        );
        // The escape text itself has nothing left to escape.
        assert!(!shown("\u{1b}\u{202e}").chars().any(is_hidden_control));
    }

    #[test]
    fn finds_the_first_hidden_control() {
        assert_eq!(first_hidden_control("ok"), None);
        assert_eq!(first_hidden_control("a\u{202e}\0"), Some('\u{202e}'));
    }
}
