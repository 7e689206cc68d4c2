//! Session dialogs: unsaved edits on close, crash recovery, and stale edits after a build.

use egui::{Id, Modal};

use super::super::autosave::Recovery;
use super::super::context::{Action, ViewCtx};
use super::DialogOut;

/// "You have unsaved edits" when closing the window.
pub fn confirm_close(ctx: &egui::Context, view: &ViewCtx) -> DialogOut {
    let mut out = DialogOut::default();
    let resp = Modal::new(Id::unique("close-dialog")).show(ctx, |ui| {
        ui.heading("Unsaved edits");
        ui.label(format!(
            "The override file {} does not have your latest edits.",
            view.project.overrides_path().display()
        ));
        ui.horizontal(|ui| {
            if ui.button("Save and close").clicked() {
                out = DialogOut::act(vec![Action::SaveAndQuit]);
            }
            if ui.button("Close without saving").clicked() {
                out = DialogOut::act(vec![Action::DiscardAndQuit]);
            }
            if ui.button("Cancel").clicked() {
                out = DialogOut::close();
            }
        });
    });
    if resp.should_close() {
        out.close = true;
    }
    out
}

/// Offer the edits of a recovery file.
pub fn recover(ctx: &egui::Context, r: &Recovery) -> DialogOut {
    let mut out = DialogOut::default();
    let resp = Modal::new(Id::unique("recover-dialog")).show(ctx, |ui| {
        ui.heading("Recover unsaved edits?");
        if let Some(e) = &r.error {
            ui.label(format!("A recovery file exists but cannot be read: {e}"));
            if ui.button("Close").clicked() {
                out = DialogOut::close();
            }
            return;
        }
        ui.label(format!(
            "The last session ended without saving {} edit(s) (recovery file {}).",
            r.extra.len(),
            r.path.display()
        ));
        egui::ScrollArea::vertical()
            .max_height(200.0)
            .show(ui, |ui| {
                for rec in &r.extra {
                    ui.label(format!(
                        "{} by {} at {}",
                        rec.edit.op(),
                        rec.author,
                        rec.time
                    ));
                }
            });
        if !r.replayable {
            ui.label(
                "The override file changed since; the recovery file is kept so you can \
                 compare it by hand.",
            );
            if ui.button("Close").clicked() {
                out = DialogOut::close();
            }
            return;
        }
        ui.horizontal(|ui| {
            if ui.button("Restore edits").clicked() {
                out = DialogOut::act(vec![Action::Restore(r.extra.clone())]);
            }
            if ui.button("Discard them").clicked() {
                out = DialogOut::act(vec![Action::DiscardRecovery]);
            }
        });
    });
    if resp.should_close() {
        out.close = true;
    }
    out
}

/// Edits that no longer apply to the new base tree.
pub fn stale(ctx: &egui::Context, list: &[String]) -> DialogOut {
    let mut out = DialogOut::default();
    let resp = Modal::new(Id::unique("stale-dialog")).show(ctx, |ui| {
        ui.heading("Edits that no longer apply");
        ui.label(
            "The new base tree is in use. These edits stay in the override file but are \
             skipped until you fix or undo them:",
        );
        egui::ScrollArea::vertical()
            .max_height(300.0)
            .show(ui, |ui| {
                for s in list {
                    ui.label(s);
                }
            });
        if ui.button("Close").clicked() {
            out.close = true;
        }
    });
    if resp.should_close() {
        out.close = true;
    }
    out
}
