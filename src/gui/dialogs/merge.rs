//! "Merge with the file on disk": offered when a save finds the override file changed by
//! someone else. Lists what the other side added and every conflict with both choices side
//! by side; the curator picks per conflict and the shell merges and saves atomically.

use std::collections::BTreeMap;

use egui::{Id, Modal};

use crate::model::merge::{MergeOutcome, Side};
use crate::model::signoff::describe_edit;

use super::super::context::{Action, ViewCtx};
use super::{DialogOut, ok_cancel};

/// State of the merge dialog.
pub struct MergeDialog {
    outcome: MergeOutcome,
    choices: BTreeMap<String, Side>,
}

impl MergeDialog {
    /// A dialog for a computed merge; every conflict starts on "keep mine".
    pub fn new(outcome: MergeOutcome) -> Self {
        let choices = outcome
            .conflicts
            .iter()
            .map(|c| (c.id.clone(), Side::Ours))
            .collect();
        MergeDialog { outcome, choices }
    }

    /// Draw it.
    pub fn ui(&mut self, ctx: &egui::Context, _view: &ViewCtx) -> DialogOut {
        let mut out = DialogOut::default();
        let resp = Modal::new(Id::unique("merge-dialog")).show(ctx, |ui| {
            ui.set_width(640.0);
            ui.heading("Merge with the file on disk");
            ui.label(format!(
                "Someone else saved the override file. They added {} edit(s); you have {} \
                 unsaved edit(s).",
                self.outcome.added_theirs.len(),
                self.outcome.added_ours.len()
            ));
            egui::ScrollArea::vertical()
                .max_height(420.0)
                .show(ui, |ui| {
                    ui.strong("Added on disk");
                    for r in &self.outcome.added_theirs {
                        ui.label(format!(
                            "{} (by {}, {})",
                            describe_edit(&r.edit),
                            r.author,
                            r.time
                        ));
                    }
                    if self.outcome.conflicts.is_empty() {
                        ui.label("No conflicts: both sets of edits are kept.");
                    }
                    for c in &self.outcome.conflicts {
                        ui.separator();
                        ui.strong(format!(
                            "Conflict {} ({}) on {}",
                            c.id,
                            c.kinds.join(", "),
                            c.nodes.join(", ")
                        ));
                        let choice = self.choices.entry(c.id.clone()).or_insert(Side::Ours);
                        ui.columns(2, |cols| {
                            for (col, side, edits, result, title) in [
                                (0, Side::Ours, &c.ours, &c.if_ours, "Keep mine"),
                                (1, Side::Theirs, &c.theirs, &c.if_theirs, "Keep theirs"),
                            ] {
                                let ui = &mut cols[col];
                                ui.radio_value(choice, side, title);
                                for r in edits {
                                    ui.label(format!(
                                        "{} (by {}, {})",
                                        describe_edit(&r.edit),
                                        r.author,
                                        r.time
                                    ));
                                }
                                for line in result {
                                    ui.weak(line);
                                }
                            }
                        });
                    }
                });
            let (ok, cancel) = ok_cancel(ui, "Merge and save", true);
            if ok {
                out = DialogOut::act(vec![Action::FinishMerge(
                    Box::new(self.outcome.clone()),
                    self.choices.clone(),
                )]);
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
