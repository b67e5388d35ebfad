//! Updates of the browse screen: the campaign tree and the panes of the selected sample.

#[allow(clippy::wildcard_imports)]
// the parent's imports and helpers, as one module split by screen
use super::*;

pub(super) fn toggle_node(tree: &mut Tree, row: TreeRow, open: Option<bool>) {
    match row {
        TreeRow::Site(s) => {
            let key = NodeKey::Site(s);
            let now = tree.expanded.contains(&key);
            if open.unwrap_or(!now) {
                tree.expanded.insert(key);
            } else {
                tree.expanded.remove(&key);
            }
        }
        TreeRow::Layer(s, l) => {
            let key = NodeKey::Layer(s, l);
            let now = !tree.collapsed_layers.contains(&key);
            if open.unwrap_or(!now) {
                tree.collapsed_layers.remove(&key);
            } else {
                tree.collapsed_layers.insert(key);
            }
        }
        TreeRow::Sample(..) => return,
    }
    tree.rebuild();
}

pub(super) fn on_tree(state: &mut AppState, action: &Action) -> Vec<Effect> {
    let len = state.tree.rows.len();
    if let Some(cursor) = moved(state, state.tree.cursor, len, action) {
        state.tree.cursor = cursor;
        return follow_tree(state);
    }
    let Some(row) = state.tree.current() else {
        if *action == Action::Back && !state.tree.filter.is_empty() {
            state.tree.filter.clear();
            state.tree.rebuild();
        }
        return Vec::new();
    };
    let filtering = !state.tree.filter.is_empty();
    match action {
        Action::Left => {
            let parent = match row {
                TreeRow::Site(_) => None,
                TreeRow::Layer(s, _) => Some(TreeRow::Site(s)),
                TreeRow::Sample(s, l, _) => Some(TreeRow::Layer(s, l)),
            };
            if !filtering && !matches!(row, TreeRow::Sample(..)) && state.tree.is_open(row) {
                toggle_node(&mut state.tree, row, Some(false));
            } else if let Some(pos) =
                parent.and_then(|p| state.tree.rows.iter().position(|r| *r == p))
            {
                state.tree.cursor = pos;
            }
            Vec::new()
        }
        Action::Right => match row {
            TreeRow::Sample(..) => {
                state.focus = Pane::Readings;
                Vec::new()
            }
            _ if state.tree.is_open(row) => {
                if state.tree.cursor + 1 < state.tree.rows.len() {
                    state.tree.cursor += 1;
                }
                follow_tree(state)
            }
            _ => {
                toggle_node(&mut state.tree, row, Some(true));
                Vec::new()
            }
        },
        Action::Open => match row {
            TreeRow::Sample(..) => {
                state.focus = Pane::Readings;
                Vec::new()
            }
            _ if filtering => Vec::new(),
            _ => {
                toggle_node(&mut state.tree, row, None);
                Vec::new()
            }
        },
        Action::Back => {
            if filtering {
                clear_filter(state);
                state.say(Tone::Info, "filter cleared");
            }
            follow_tree(state)
        }
        _ => Vec::new(),
    }
}

pub(super) fn on_browse(state: &mut AppState, action: &Action) -> Vec<Effect> {
    match action {
        Action::NextPane => {
            state.focus = state.focus.cycle(1);
            return Vec::new();
        }
        Action::PrevPane => {
            state.focus = state.focus.cycle(-1);
            return Vec::new();
        }
        Action::StartFilter => {
            // A new filter each time; Esc in the tree clears a kept one.
            state.focus = Pane::Tree;
            state.tree.filter.clear();
            state.tree.rebuild();
            state.input = Input::Filter(String::new());
            return Vec::new();
        }
        Action::ToggleFlag => {
            start_flag(state);
            return Vec::new();
        }
        _ => {}
    }
    match state.focus {
        Pane::Tree => on_tree(state, action),
        Pane::Curve | Pane::Readings => {
            let len = state.reading_rows();
            let step = match action {
                Action::Left if state.focus == Pane::Curve => Some(&Action::Up),
                Action::Right if state.focus == Pane::Curve => Some(&Action::Down),
                other => Some(other),
            };
            if let Some(cursor) = step.and_then(|a| moved(state, state.reading, len, a)) {
                state.reading = cursor;
            } else if matches!(action, Action::Back | Action::Left) {
                state.focus = Pane::Tree;
            }
            Vec::new()
        }
        Pane::Card => {
            match action {
                Action::Up => state.card_scroll = state.card_scroll.saturating_sub(1),
                Action::Down => state.card_scroll = state.card_scroll.saturating_add(1),
                Action::Top => state.card_scroll = 0,
                Action::Back | Action::Left => state.focus = Pane::Tree,
                _ => {}
            }
            Vec::new()
        }
    }
}
