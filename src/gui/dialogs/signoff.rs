//! Sign off the effective tree: reviewer, note, and what is still open before confirming.

use egui::{Id, Modal};

use crate::model::audit::Severity;
use crate::model::edit::Edit;

use super::super::context::{Action, SigningKey, ViewCtx};
use super::{DialogOut, ok_cancel};

/// State of the sign-off dialog.
pub struct SignoffDialog {
    reviewer: String,
    note: String,
    /// Private key file to sign with (empty: an unsigned sign-off).
    key_file: String,
    /// Passphrase of an encrypted key; cleared when the dialog closes, never stored.
    passphrase: String,
    /// Why the key could not be used.
    key_error: Option<String>,
}

impl SignoffDialog {
    /// Start with the remembered author as reviewer.
    pub fn new(view: &ViewCtx) -> Self {
        SignoffDialog {
            reviewer: view.settings.author.clone(),
            note: String::new(),
            key_file: String::new(),
            passphrase: String::new(),
            key_error: None,
        }
    }

    /// Draw it.
    pub fn ui(&mut self, ctx: &egui::Context, view: &ViewCtx) -> DialogOut {
        let mut out = DialogOut::default();
        let Some(hash) = view.tree_hash.map(str::to_string) else {
            return DialogOut::close();
        };
        let errors = view.open_findings(Severity::Error);
        let warnings = view.open_findings(Severity::Warning) - errors;
        // recorded with the sign-off: warnings and errors, as `treewright signoff` counts them
        let counted = errors + warnings;
        let infos = view.open_findings(Severity::Info) - counted;
        let unreviewed = view.unreviewed;
        let resp = Modal::new(Id::unique("signoff-dialog")).show(ctx, |ui| {
            ui.set_width(440.0);
            ui.heading("Sign off the tree");
            ui.label("Signing records that you reviewed the effective tree as it stands now.");
            egui::Grid::new("signoff-grid").num_columns(2).show(ui, |ui| {
                ui.label("Open findings:");
                ui.label(format!(
                    "{counted} ({errors} error, {warnings} warning; {infos} info not counted)"
                ));
                ui.end_row();
                ui.label("Unreviewed nodes:");
                ui.label(unreviewed.to_string());
                ui.end_row();
                ui.label("Unsaved edits:");
                ui.label(if view.dirty { "yes" } else { "no" });
                ui.end_row();
                ui.label("Tree hash:");
                ui.monospace(&hash[..hash.len().min(16)])
                    .on_hover_text(hash.as_str());
                ui.end_row();
                ui.label("Reviewer:");
                ui.add(egui::TextEdit::singleline(&mut self.reviewer).hint_text("reviewer name"));
                ui.end_row();
                ui.label("Note:");
                ui.add(
                    egui::TextEdit::multiline(&mut self.note)
                        .desired_rows(2)
                        .hint_text("note for the record (optional)"),
                );
                ui.end_row();
                let label = ui.label("Key file:");
                ui.add(
                    egui::TextEdit::singleline(&mut self.key_file)
                        .hint_text("~/.ssh/id_ed25519 (optional: signs the sign-off)"),
                )
                .labelled_by(label.id);
                ui.end_row();
                let path = expand_home(self.key_file.trim());
                if path
                    .as_deref()
                    .is_some_and(crate::model::sshsig::key_is_encrypted)
                {
                    let label = ui.label("Passphrase:");
                    ui.add(
                        egui::TextEdit::singleline(&mut self.passphrase)
                            .password(true)
                            .hint_text("the key's passphrase (not stored)"),
                    )
                    .labelled_by(label.id);
                    ui.end_row();
                }
            });
            if let Some(e) = &self.key_error {
                ui.label(super::super::badges::plain(&format!("Key: {e}")));
            }
            if errors > 0 {
                ui.label(format!(
                    "Warning: {errors} error finding(s) are still open. You may still sign, and the \
                     count is stored with the sign-off."
                ));
            }
            let reviewer = self.reviewer.trim().to_string();
            let edit = Edit::Signoff {
                reviewer: reviewer.clone(),
                tree_hash: hash.clone(),
                open_findings: counted,
                unreviewed,
                signature: None,
            };
            let check = if reviewer.is_empty() {
                Err("enter the reviewer's name".to_string())
            } else {
                view.check(&edit)
            };
            if let Err(why) = &check {
                ui.label(super::super::badges::plain(&format!("Cannot sign: {why}")));
            }
            let (ok, cancel) = ok_cancel(ui, "Sign off", check.is_ok());
            if ok {
                let note = self.note.trim().to_string();
                let key = match expand_home(self.key_file.trim()) {
                    None => Ok(None),
                    Some(path) => {
                        let pass = std::mem::take(&mut self.passphrase);
                        crate::model::sshsig::read_private_key(&path, || {
                            (!pass.is_empty()).then_some(pass)
                        })
                        .map(|k| Some(SigningKey(Box::new(k))))
                        .map_err(|e| e.to_string())
                    }
                };
                match key {
                    Err(e) => self.key_error = Some(e),
                    Ok(key) => {
                        let action = match key {
                            Some(k) => {
                                Action::SignedEdit(edit, (!note.is_empty()).then_some(note), k)
                            }
                            None if note.is_empty() => Action::Edit(edit),
                            None => Action::EditWithNote(edit, note),
                        };
                        // the reviewer becomes the author before the sign-off edit is recorded
                        out = DialogOut::act(vec![
                            Action::SetAuthor(reviewer),
                            action,
                            Action::Save,
                        ]);
                    }
                }
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

/// The key file's path with a leading `~/` expanded; `None` when the field is empty.
fn expand_home(s: &str) -> Option<std::path::PathBuf> {
    if s.is_empty() {
        return None;
    }
    match (s.strip_prefix("~/"), std::env::var_os("HOME")) {
        (Some(rest), Some(home)) => Some(std::path::Path::new(&home).join(rest)),
        _ => Some(std::path::PathBuf::from(s)),
    }
}
