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
