//! Updates while a prompt has the keyboard: the tree filter, a flag's reason, a yes/no
//! question.

#[allow(clippy::wildcard_imports)]
// the parent's imports and helpers, as one module split by screen
use super::*;

pub(super) fn on_filter_input(
    state: &mut AppState,
    mut text: String,
    action: &Action,
) -> Vec<Effect> {
    match action {
        Action::Char(c) => text.push(*c),
        Action::Backspace => {
            text.pop();
        }
        Action::Submit => {
            state.input = Input::None;
            let n = state
                .tree
                .rows
                .iter()
                .filter(|r| matches!(r, TreeRow::Sample(..)))
                .count();
            if !state.tree.filter.is_empty() {
                // Land on the first match, so Enter opens it.
                let on_sample = matches!(
                    state.tree.rows.get(state.tree.cursor),
                    Some(TreeRow::Sample(..))
                );
                if !on_sample
                    && let Some(i) = state
                        .tree
                        .rows
                        .iter()
                        .position(|r| matches!(r, TreeRow::Sample(..)))
                {
                    state.tree.cursor = i;
                }
                state.say(
                    Tone::Info,
                    format!(
                        "{n} sample{} match {:?} · Esc clears",
                        if n == 1 { "" } else { "s" },
                        state.tree.filter
                    ),
                );
            }
            return follow_tree(state);
        }
        Action::Cancel => {
            state.input = Input::None;
            clear_filter(state);
            return follow_tree(state);
        }
        _ => return Vec::new(),
    }
    state.tree.filter.clone_from(&text);
    state.input = Input::Filter(text);
    state.tree.rebuild();
    Vec::new()
}

pub(super) fn on_reason_input(
    state: &mut AppState,
    target: FlagTarget,
    flag: bool,
    mut text: String,
    action: &Action,
) -> Vec<Effect> {
    match action {
        Action::Char(c) => text.push(*c),
        Action::Backspace => {
            text.pop();
        }
        Action::Cancel => {
            state.input = Input::None;
            state.say(Tone::Info, "flag left as it was");
            return Vec::new();
        }
        Action::Submit => {
            let reason = text.trim().to_string();
            if flag && reason.is_empty() {
                state.say(
                    Tone::Warning,
                    "type a reason first (Esc leaves the flag as it was)",
                );
                return Vec::new();
            }
            state.input = Input::None;
            return vec![if flag {
                Effect::SetFlag { target, reason }
            } else {
                Effect::ClearFlag {
                    target,
                    note: reason,
                }
            }];
        }
        _ => return Vec::new(),
    }
    state.input = Input::Reason { target, flag, text };
    Vec::new()
}

pub(super) fn on_confirm(state: &mut AppState, action: &Action) -> Vec<Effect> {
    match action {
        Action::Submit => {
            state.quit = true;
            vec![Effect::Quit]
        }
        Action::Cancel => {
            state.input = Input::None;
            state.say(Tone::Info, "still here; the fit goes on");
            Vec::new()
        }
        _ => Vec::new(),
    }
}
