//! The menu bar: File, Edit, Tree, Review, View, Help.

use egui::Button;

use super::context::{Action, Area, DialogRequest, Panel, PanelKind, ViewCtx};
use super::shortcuts::{self, Command};

fn item(ui: &mut egui::Ui, label: &str, cmd: Option<Command>, enabled: bool) -> bool {
    let mut b = Button::new(label);
    if let Some(c) = cmd {
        b = b.shortcut_text(shortcuts::text(ui.ctx(), c));
    }
    let clicked = ui.add_enabled(enabled, b).clicked();
    if clicked {
        ui.close();
    }
    clicked
}

/// The menu bar (no state of its own).
#[derive(Debug, Default)]
pub struct MenuBar;

impl Panel for MenuBar {
    fn kind(&self) -> PanelKind {
        PanelKind::MenuBar
    }

    /// Draw the menu bar.
    fn ui(&mut self, ui: &mut egui::Ui, view: &ViewCtx) -> Vec<Action> {
        menu(ui, view)
    }
}

fn menu(ui: &mut egui::Ui, view: &ViewCtx) -> Vec<Action> {
    let (settings, dirty) = (view.settings, view.dirty);
    let mut actions = Vec::new();
    let has_tree = view.eff.is_some();
    egui::MenuBar::new().ui(ui, |ui| {
        ui.menu_button("File", |ui| {
            if item(ui, "Open project…", Some(Command::Open), true) {
                actions.push(Action::Browse);
            }
            if item(ui, "Open demo project", None, true) {
                actions.push(Action::OpenDemo);
            }
            ui.menu_button("Recent projects", |ui| {
                if settings.recent.is_empty() {
                    ui.label("(none yet)");
                }
                for p in &settings.recent {
                    if item(ui, &p.display().to_string(), None, true) {
                        actions.push(Action::Open(p.clone()));
                    }
                }
            });
            ui.separator();
            if item(ui, "Save edits", Some(Command::Save), dirty) {
                actions.push(Action::Save);
            }
            if item(ui, "Export…", Some(Command::Export), has_tree) {
                actions.push(Action::Dialog(DialogRequest::Export));
            }
            if item(ui, "Import taxonomy…", None, true) {
                actions.push(Action::BrowseTaxonomy);
            }
            ui.separator();
            if item(ui, "Quit", None, true) {
                actions.push(Action::Quit);
            }
        });
        ui.menu_button("Edit", |ui| {
            if item(ui, "Undo", Some(Command::Undo), view.can_undo) {
                actions.push(Action::Undo);
            }
            if item(ui, "Redo", Some(Command::Redo), view.can_redo) {
                actions.push(Action::Redo);
            }
            ui.separator();
            let one = view.selection.len() == 1 && has_tree;
            if item(ui, "Rename selected…", None, one)
                && let Some(&p) = view.selection.first()
            {
                actions.push(Action::Dialog(DialogRequest::Rename(p)));
            }
            if item(ui, "Find in tree", Some(Command::Search), has_tree) {
                actions.push(Action::FocusSearch);
            }
        });
        ui.menu_button("Tree", |ui| {
            if item(ui, "Build tree…", Some(Command::Build), true) {
                actions.push(Action::Dialog(DialogRequest::Build));
            }
            if item(ui, "Compare trees…", None, has_tree) {
                actions.push(Action::Dialog(DialogRequest::Diff));
            }
            ui.separator();
            if item(ui, "Expand all", None, has_tree) {
                actions.push(Action::ExpandAll);
            }
            if item(ui, "Collapse all", None, has_tree) {
                actions.push(Action::CollapseAll);
            }
        });
        ui.menu_button("Review", |ui| {
            if item(ui, "Sign off…", None, has_tree) {
                actions.push(Action::Dialog(DialogRequest::Signoff));
            }
        });
        ui.menu_button("View", |ui| {
            let mut t = settings.show_tree;
            if ui.checkbox(&mut t, "Tree panel").clicked() {
                actions.push(Action::ToggleArea(Area::Tree));
            }
            let mut e = settings.show_ellipses;
            if ui.checkbox(&mut e, "Ellipse projection").clicked() {
                actions.push(Action::ToggleArea(Area::Ellipses));
            }
            let mut i = settings.show_inspector;
            if ui.checkbox(&mut i, "Statistics and findings").clicked() {
                actions.push(Action::ToggleArea(Area::Inspector));
            }
            ui.separator();
            if item(ui, "Light theme", None, settings.dark) {
                actions.push(Action::SetDark(false));
            }
            if item(ui, "Dark theme", None, !settings.dark) {
                actions.push(Action::SetDark(true));
            }
            // the language labels are shown in (only when the project has more than one)
            if let Some(eff) = view.eff {
                let langs = eff.languages.languages();
                if langs.len() > 1 {
                    ui.separator();
                    ui.label("Label language");
                    let current = settings
                        .display_language
                        .clone()
                        .unwrap_or_else(|| eff.languages.default.clone());
                    for l in langs {
                        let text = if l == eff.languages.default {
                            format!("{l} (default)")
                        } else {
                            l.clone()
                        };
                        if ui.radio(current == l, text).clicked() {
                            let pick = (l != eff.languages.default).then_some(l);
                            actions.push(Action::SetDisplayLanguage(pick));
                        }
                    }
                }
            }
        });
        ui.menu_button("Help", |ui| {
            if item(ui, "Keyboard shortcuts", Some(Command::Help), true) {
                actions.push(Action::Dialog(DialogRequest::Shortcuts));
            }
            if item(ui, "About treewright", None, true) {
                actions.push(Action::Dialog(DialogRequest::About));
            }
        });
    });
    actions
}
