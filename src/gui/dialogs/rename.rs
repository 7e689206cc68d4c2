//! Rename a node (F2).

use egui::{Id, Modal};

use crate::model::PhraseId;
use crate::model::edit::Edit;

use super::super::context::{Action, ViewCtx};
use super::{DialogOut, ok_cancel};

/// State of the rename dialog.
pub struct RenameDialog {
    node: PhraseId,
    label: String,
    /// Language of the new label (`None`: the project's default).
    language: Option<String>,
    focused: bool,
}

impl RenameDialog {
    /// Start with the node's current label.
    pub fn new(view: &ViewCtx, node: PhraseId) -> Self {
        let label = view.label(node).to_string();
        // the label shown is the one renamed: a display language the node has a label in
        let language = view.settings.display_language.clone().filter(|l| {
            view.eff.and_then(|e| e.label_in_opt(node, l)).is_some()
                && view.eff.is_some_and(|e| *l != e.languages.default)
        });
        RenameDialog {
            node,
            label,
            language,
            focused: false,
        }
    }

    /// Draw it.
    pub fn ui(&mut self, ctx: &egui::Context, view: &ViewCtx) -> DialogOut {
        let id = view.project.phrases.id(self.node).to_string();
        let mut out = DialogOut::default();
        let resp = Modal::new(Id::unique("rename-dialog")).show(ctx, |ui| {
            ui.heading("Rename a node");
            ui.label(format!(
                "Phrase id: {id} (ids never change; only the label does)"
            ));
            let r = ui.add(
                egui::TextEdit::singleline(&mut self.label)
                    .desired_width(320.0)
                    .hint_text("new label"),
            );
            if !self.focused {
                r.request_focus();
                self.focused = true;
            }
            if let Some(e) = view.eff {
                let langs = e.languages.languages();
                if langs.len() > 1 {
                    let shown = self
                        .language
                        .clone()
                        .unwrap_or_else(|| e.languages.default.clone());
                    egui::ComboBox::from_label("Language of the label")
                        .selected_text(shown.as_str())
                        .show_ui(ui, |ui| {
                            for l in &langs {
                                let pick = (*l != e.languages.default).then(|| l.clone());
                                if ui.selectable_label(shown == *l, l.as_str()).clicked() {
                                    self.label = e.label_in(self.node, l).to_string();
                                    self.language = pick;
                                }
                            }
                        });
                }
            }
            let edit = Edit::Rename {
                node: id.clone(),
                label: self.label.trim().to_string(),
                language: self.language.clone(),
            };
            let check = if self.label.trim().is_empty() {
                Err("the label is empty".to_string())
            } else {
                view.check(&edit)
            };
            if let Err(why) = &check {
                ui.label(super::super::badges::plain(&format!(
                    "Cannot rename: {why}"
                )));
            }
            let enter = r.lost_focus() && ui.input(|i| i.key_pressed(egui::Key::Enter));
            let (ok, cancel) = ok_cancel(ui, "Rename", check.is_ok());
            if (ok || enter) && check.is_ok() {
                out = DialogOut::act(vec![Action::Edit(edit)]);
            } else if cancel {
                out = DialogOut::close();
            }
        });
        if resp.should_close() {
            out.close = true;
        }
        out
    }
}
