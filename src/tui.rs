//! The terminal UI: browse a campaign, read curves, flag readings, refit, compare depths.
//!
//! Built the way The Elm Architecture lays an app out:
//!
//! - [`app`]: [`app::AppState`], plain data (what is loaded, what is selected, what runs);
//! - [`action`]: [`action::Action`] (everything that can happen) and [`action::Effect`]
//!   (everything the state asks the runtime to do);
//! - [`keymap`]: keys as data, one table per mode; the footer and help come from it too;
//! - [`update`]: the only place the state changes;
//! - [`view`]: rendering, a pure function of the state, one module per pane;
//! - [`worker`]: the bookkeeping of background fits (job ids, one waiting, stale results);
//! - [`theme`]: styles, with `NO_COLOR` honoured and colour never the only sign;
//! - [`runtime`]: the only code touching the terminal, the campaign file and threads.
//!
//! Nothing outside this module uses it but the `open` and `demo` commands, through [`run`].

pub mod action;
pub mod app;
mod episodes;
pub mod keymap;
pub mod runtime;
pub mod signs;
pub mod theme;
pub mod update;
pub mod view;
pub mod worker;

/// Open a campaign file in the terminal UI until the user quits.
///
/// # Errors
/// The file is not a campaign, or the terminal fails.
pub fn run(path: &std::path::Path) -> anyhow::Result<()> {
    runtime::run(path)
}
