//! The exit status of a command, mapped in one place.

use std::process::ExitCode;

/// How a command that ran to the end finished.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    /// Everything asked for was done (exit 0).
    Success,
    /// The command ran, but some items could not be done; each was listed on stderr (exit 3).
    Partial,
}

/// Exit code for a user error: bad input, a missing file, a refused import (message on stderr).
pub const EXIT_USER_ERROR: u8 = 1;
/// Exit code for a usage error: unknown flag or subcommand (clap's own code).
pub const EXIT_USAGE: u8 = 2;
/// Exit code when some of the work could not be done.
pub const EXIT_PARTIAL: u8 = 3;

impl From<Outcome> for ExitCode {
    fn from(o: Outcome) -> Self {
        match o {
            Outcome::Success => ExitCode::SUCCESS,
            Outcome::Partial => ExitCode::from(EXIT_PARTIAL),
        }
    }
}

/// The message of an error and its causes, each cause said once: `context: cause: cause`.
///
/// Library errors often repeat their source in their own text (`{path}: {source}`, SQLite's
/// `database is locked` then `Error code 5: database is locked`); a cause whose text is
/// already in the message (after SQLite's `Error code N: ` prefix) is left out.
pub fn render(err: &anyhow::Error) -> String {
    let mut out = String::new();
    for cause in err.chain() {
        let text = cause.to_string();
        let core = strip_code(&text);
        if core.is_empty() || out.contains(core) {
            continue;
        }
        if !out.is_empty() {
            out.push_str(": ");
        }
        out.push_str(&text);
    }
    out
}

/// `database is locked` for `Error code 5: database is locked` (SQLite's own cause text).
fn strip_code(text: &str) -> &str {
    text.strip_prefix("Error code ")
        .and_then(|rest| rest.split_once(": "))
        .filter(|(code, _)| !code.is_empty() && code.bytes().all(|b| b.is_ascii_digit()))
        .map_or(text, |(_, rest)| rest)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(Debug, thiserror::Error)]
    #[error("{path}: {source}")]
    struct Io {
        path: String,
        source: std::io::Error,
    }

    #[test]
    fn each_cause_is_said_once() {
        let io = std::io::Error::new(std::io::ErrorKind::NotFound, "No such file");
        let err = anyhow::Error::new(Io {
            path: "a.csv".into(),
            source: io,
        })
        .context("cannot read a.csv");
        assert_eq!(render(&err), "cannot read a.csv: a.csv: No such file");
        let plain = anyhow::anyhow!("x").context("y");
        assert_eq!(render(&plain), "y: x");
        assert_eq!(
            strip_code("Error code 5: database is locked"),
            "database is locked"
        );
        assert_eq!(strip_code("Error code x: y"), "Error code x: y");
    }
}
