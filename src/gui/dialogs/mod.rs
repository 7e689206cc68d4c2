//! Dialogs: one file each. A dialog reads the document through [`ViewCtx`] and returns
//! [`Action`]s like every view; it never changes the model itself.

use crate::model::effective::ApplyProblem;

use super::autosave::Recovery;
use super::context::{Action, DialogRequest, ViewCtx};

pub mod build;
pub mod diff;
pub mod export;
pub mod help;
pub mod merge;
pub mod picker;
pub mod rename;
pub mod review;
pub mod session;
pub mod signoff;
pub mod taxonomy_report;

/// What a dialog returns each frame.
#[derive(Debug, Default)]
pub struct DialogOut {
    /// Actions for the shell.
    pub actions: Vec<Action>,
    /// Close the dialog.
    pub close: bool,
}

impl DialogOut {
    fn close() -> Self {
        DialogOut {
            close: true,
            ..Default::default()
        }
    }

    fn act(actions: Vec<Action>) -> Self {
        DialogOut {
            actions,
            close: true,
        }
    }
}

/// The open dialog.
pub enum Dialog {
    /// Rename a node.
    Rename(rename::RenameDialog),
    /// Review decision with comment.
    Review(review::ReviewDialog),
    /// Searchable picker for reparent / merge.
    Picker(picker::PickerDialog),
    /// Build the base tree.
    Build(Box<build::BuildDialog>),
    /// Sign off.
    Signoff(signoff::SignoffDialog),
    /// Compare trees.
    Diff(diff::DiffDialog),
    /// Export.
    Export(export::ExportDialog),
    /// Keyboard shortcuts.
    Shortcuts,
    /// About.
    About,
    /// Unsaved edits when closing.
    ConfirmClose,
    /// Unsaved edits found after a crash.
    Recover(Recovery),
    /// Edits that no longer apply after a new base tree.
    Stale(Vec<String>),
    /// Merge with the override file someone else saved.
    Merge(Box<merge::MergeDialog>),
    /// What matched after File ▸ Import taxonomy….
    TaxonomyReport(Box<taxonomy_report::TaxonomyReportDialog>),
}

/// Make the dialog for a request (`None` when it does not apply, e.g. no tree).
pub fn open(req: DialogRequest, view: &ViewCtx) -> Option<Dialog> {
    let eff = view.eff;
    Some(match req {
        DialogRequest::Rename(p) => Dialog::Rename(rename::RenameDialog::new(view, p)),
        DialogRequest::Review(p, s) => Dialog::Review(review::ReviewDialog::new(view, p, s)),
        DialogRequest::Picker(k, p) => {
            eff?;
            Dialog::Picker(picker::PickerDialog::new(k, p, view.selection))
        }
        DialogRequest::Build => Dialog::Build(Box::new(build::BuildDialog::new(view))),
        DialogRequest::Signoff => {
            eff?;
            Dialog::Signoff(signoff::SignoffDialog::new(view))
        }
        DialogRequest::Diff => {
            eff?;
            Dialog::Diff(diff::DiffDialog::new(view))
        }
        DialogRequest::Export => {
            eff?;
            Dialog::Export(export::ExportDialog::new(view))
        }
        DialogRequest::Shortcuts => Dialog::Shortcuts,
        DialogRequest::About => Dialog::About,
        DialogRequest::SignedDiff => {
            eff?;
            Dialog::Diff(diff::DiffDialog::on_signoff(view))
        }
    })
}

/// The list of edits that do not apply, for the stale-edit dialog.
pub fn stale_list(problems: &[ApplyProblem]) -> Vec<String> {
    problems
        .iter()
        .map(|p| super::badges::plain(&format!("edit #{} ({}): {}", p.index + 1, p.op, p.reason)))
        .collect()
}

impl Dialog {
    /// Whether the dialog runs background work (the window keeps repainting).
    pub fn is_busy(&self) -> bool {
        matches!(self, Dialog::Build(b) if b.is_running())
    }

    /// Draw the dialog.
    pub fn ui(&mut self, ctx: &egui::Context, view: &ViewCtx) -> DialogOut {
        match self {
            Dialog::Rename(d) => d.ui(ctx, view),
            Dialog::Review(d) => d.ui(ctx, view),
            Dialog::Picker(d) => d.ui(ctx, view),
            Dialog::Build(d) => d.ui(ctx, view),
            Dialog::Signoff(d) => d.ui(ctx, view),
            Dialog::Diff(d) => d.ui(ctx, view),
            Dialog::Export(d) => d.ui(ctx, view),
            Dialog::Shortcuts => help::shortcuts(ctx),
            Dialog::About => help::about(ctx),
            Dialog::ConfirmClose => session::confirm_close(ctx, view),
            Dialog::Recover(r) => session::recover(ctx, r),
            Dialog::Stale(list) => session::stale(ctx, list),
            Dialog::Merge(d) => d.ui(ctx, view),
            Dialog::TaxonomyReport(d) => d.ui(ctx),
        }
    }
}

/// A standard pair of buttons; returns (ok, cancel).
fn ok_cancel(ui: &mut egui::Ui, ok_label: &str, ok_enabled: bool) -> (bool, bool) {
    let mut ok = false;
    let mut cancel = false;
    ui.horizontal(|ui| {
        ok = ui
            .add_enabled(ok_enabled, egui::Button::new(ok_label))
            .clicked();
        cancel = ui.button("Cancel").clicked();
    });
    (ok, cancel)
}
