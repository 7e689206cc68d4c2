//! Record a review decision (approved / to fix) with a comment.

use egui::{Id, Modal};

use crate::model::PhraseId;
use crate::model::edit::{Edit, ReviewStatus};

use super::super::context::{Action, ViewCtx};
use super::{DialogOut, ok_cancel};

/// State of the review dialog.
pub struct ReviewDialog {
    node: PhraseId,
    status: ReviewStatus,
    comment: String,
    focused: bool,
}

impl ReviewDialog {
    /// Start with the requested status and the node's previous comment.
    pub fn new(view: &ViewCtx, node: PhraseId, status: ReviewStatus) -> Self {
        let comment = view
            .eff
            .map(|e| e.review_comment[node as usize].clone())
            .unwrap_or_default();
        ReviewDialog {
            node,
            status,
            comment,
            focused: false,
        }
    }

    /// Draw it.
    pub fn ui(&mut self, ctx: &egui::Context, view: &ViewCtx) -> DialogOut {
        let id = view.project.phrases.id(self.node).to_string();
        let label = view
            .eff
            .map_or_else(
                || view.project.phrases.label(self.node),
                |e| e.label(self.node),
            )
            .to_string();
        let mut out = DialogOut::default();
        let resp = Modal::new(Id::unique("review-dialog")).show(ctx, |ui| {
            ui.heading(format!("Review \"{label}\""));
            ui.horizontal(|ui| {
                ui.radio_value(&mut self.status, ReviewStatus::Approved, "Approved");
                ui.radio_value(&mut self.status, ReviewStatus::ToFix, "To fix");
                ui.radio_value(&mut self.status, ReviewStatus::Unreviewed, "Unreviewed");
            });
            ui.label("Comment:");
            let r = ui.add(
                egui::TextEdit::multiline(&mut self.comment)
                    .desired_rows(3)
                    .desired_width(360.0)
                    .hint_text("why (optional for approved)"),
            );
            if !self.focused {
                r.request_focus();
                self.focused = true;
            }
            let needs_comment =
                self.status == ReviewStatus::ToFix && self.comment.trim().is_empty();
            if needs_comment {
                ui.label("Say what is to fix so the curator knows what to change.");
            }
            let (ok, cancel) = ok_cancel(ui, "Record review", !needs_comment);
            if ok {
                out = DialogOut::act(vec![Action::Edit(Edit::Review {
                    node: id.clone(),
                    status: self.status,
                    comment: self.comment.trim().to_string(),
                })]);
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
