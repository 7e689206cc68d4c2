//! Keyboard shortcuts: one table used both to handle keys and to list them in Help.

use egui::{Key, KeyboardShortcut, Modifiers};

use super::context::{Action, DialogRequest};

/// What a shortcut does.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Command {
    /// Save edits.
    Save,
    /// Undo.
    Undo,
    /// Redo.
    Redo,
    /// Open a project folder.
    Open,
    /// Focus the tree search box.
    Search,
    /// Export the effective tree.
    Export,
    /// Build the base tree.
    Build,
    /// Show the shortcuts.
    Help,
}

/// Every global shortcut: keys, command, description. Tree keys are listed in [`TREE_KEYS`].
pub const GLOBAL: &[(KeyboardShortcut, Command, &str)] = &[
    (
        KeyboardShortcut::new(Modifiers::COMMAND, Key::S),
        Command::Save,
        "Save edits",
    ),
    (
        KeyboardShortcut::new(Modifiers::COMMAND.plus(Modifiers::SHIFT), Key::Z),
        Command::Redo,
        "Redo",
    ),
    (
        KeyboardShortcut::new(Modifiers::COMMAND, Key::Z),
        Command::Undo,
        "Undo",
    ),
    (
        KeyboardShortcut::new(Modifiers::COMMAND, Key::Y),
        Command::Redo,
        "Redo",
    ),
    (
        KeyboardShortcut::new(Modifiers::COMMAND, Key::O),
        Command::Open,
        "Open project…",
    ),
    (
        KeyboardShortcut::new(Modifiers::COMMAND, Key::F),
        Command::Search,
        "Search the tree",
    ),
    (
        KeyboardShortcut::new(Modifiers::COMMAND, Key::E),
        Command::Export,
        "Export…",
    ),
    (
        KeyboardShortcut::new(Modifiers::COMMAND, Key::B),
        Command::Build,
        "Build tree…",
    ),
    (
        KeyboardShortcut::new(Modifiers::NONE, Key::F1),
        Command::Help,
        "Keyboard shortcuts",
    ),
];

/// Keys of the tree panel (when no text field has the focus).
pub const TREE_KEYS: &[(&str, &str)] = &[
    ("Up / Down", "Move the selection"),
    (
        "Left / Right",
        "Collapse / expand (or go to parent / first child)",
    ),
    ("Home / End", "First / last row"),
    ("Ctrl-click / Shift-click", "Add to / extend the selection"),
    ("F2", "Rename the selected node"),
    ("Del", "Exclude the selected node"),
    ("Enter (in search)", "Jump to the next match"),
    (
        "Drag a row onto another",
        "Reparent (refused drops say why)",
    ),
    (
        "Right-click a row",
        "Pin, reparent, merge, rename, exclude, review",
    ),
];

/// Keys of the review queue (they act when no text field has the focus).
pub const QUEUE_KEYS: &[(&str, &str)] = &[
    ("N / P", "Next / previous node still waiting"),
    ("A", "Approve the node"),
    ("F", "Mark it to fix (with a comment)"),
    ("S", "Apply the suggested edit"),
    ("K", "Skip it for now"),
];

/// Keys of the ellipse view.
pub const PLOT_KEYS: &[(&str, &str)] = &[
    ("Scroll / Ctrl+scroll", "Pan / zoom"),
    ("Drag", "Pan"),
    ("Double-click", "Fit view"),
    ("Click a mean", "Select that node"),
];

/// The text of a shortcut for menus ("Ctrl+S").
pub fn text(ctx: &egui::Context, cmd: Command) -> String {
    GLOBAL
        .iter()
        .find(|(_, c, _)| *c == cmd)
        .map(|(k, _, _)| ctx.format_shortcut(k))
        .unwrap_or_default()
}

/// Shortcuts pressed this frame.
#[derive(Debug, Default)]
pub struct Pressed {
    /// Actions to apply.
    pub actions: Vec<Action>,
    /// Move the focus to the search box.
    pub focus_search: bool,
}

/// Consume this frame's shortcut presses.
pub fn poll(ctx: &egui::Context) -> Pressed {
    let mut out = Pressed::default();
    for (k, cmd, _) in GLOBAL {
        if ctx.input_mut(|i| i.consume_shortcut(k)) {
            match cmd {
                Command::Save => out.actions.push(Action::Save),
                Command::Undo => out.actions.push(Action::Undo),
                Command::Redo => out.actions.push(Action::Redo),
                Command::Open => out.actions.push(Action::Browse),
                Command::Search => out.focus_search = true,
                Command::Export => out.actions.push(Action::Dialog(DialogRequest::Export)),
                Command::Build => out.actions.push(Action::Dialog(DialogRequest::Build)),
                Command::Help => out.actions.push(Action::Dialog(DialogRequest::Shortcuts)),
            }
        }
    }
    out
}
