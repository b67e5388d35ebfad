//! The signs the terminal UI shows beside values: a fit's standing and a status message's
//! tone. A leaf module, so the state (`app`) and the styles (`theme`) both use it without
//! depending on each other.

use crate::store::fits::FitState;

/// Fit standing as the tree shows it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum FitTag {
    /// Never fitted.
    #[default]
    None,
    /// Up to date.
    Current,
    /// Readings or flags changed since, or a later refit failed.
    Stale,
    /// Every attempt failed.
    Failed,
}

impl FitTag {
    /// From the store's standing.
    pub fn of(state: &FitState) -> FitTag {
        match state {
            FitState::None => FitTag::None,
            FitState::Current => FitTag::Current,
            FitState::Stale(_) => FitTag::Stale,
            FitState::Failed(_) => FitTag::Failed,
        }
    }

    /// One-word label.
    pub fn label(self) -> &'static str {
        match self {
            FitTag::None => "none",
            FitTag::Current => "current",
            FitTag::Stale => "stale",
            FitTag::Failed => "failed",
        }
    }

    /// The glyph beside a sample, so colour is not the only sign.
    pub fn glyph(self) -> &'static str {
        match self {
            FitTag::None => "·",
            FitTag::Current => "✓",
            FitTag::Stale => "~",
            FitTag::Failed => "✗",
        }
    }
}

/// How a status message reads.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Tone {
    /// Plain information.
    #[default]
    Info,
    /// Something did not happen.
    Warning,
    /// Something failed.
    Error,
}
