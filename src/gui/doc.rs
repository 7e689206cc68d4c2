//! The open document: a thin wrapper over [`crate::model::workspace::Workspace`].
//!
//! The workspace owns the pipeline (project, override layer, effective tree, problems,
//! audit); `Doc` dereferences to it, so panels read `doc.project`, `doc.eff`, `doc.layer`,
//! `doc.problems`, ... as before. What `Doc` adds is the workbench's side: errors as text for
//! the status bar, export by the dialog's format, a sign-off recorded with the workspace's
//! counts, and a refused save that keeps the edits in the recovery file. This is the only
//! place the GUI changes model state, and it does so only through the override layer.

use std::ops::{Deref, DerefMut};
use std::path::{Path, PathBuf};

use crate::model::builder::BuildReport;
use crate::model::edit::{Edit, EditRecord};
use crate::model::export::Format;
use crate::model::overrides::{OverrideError, OverrideLayer, Step};
use crate::model::tree::TreeFile;
use crate::model::{AuditMode, Project, Workspace, WorkspaceError};

pub use crate::model::workspace::{BACKGROUND_AUDIT_FROM, SignState, severity_index};

/// The open project with its edits applied (see the module documentation).
pub struct Doc {
    ws: Workspace,
}

impl Deref for Doc {
    type Target = Workspace;

    fn deref(&self) -> &Workspace {
        &self.ws
    }
}

impl DerefMut for Doc {
    fn deref_mut(&mut self) -> &mut Workspace {
        &mut self.ws
    }
}

impl Doc {
    /// Load a project folder with its override file and audit it (in the background from
    /// [`BACKGROUND_AUDIT_FROM`] phrases on).
    pub fn open(path: &Path) -> Result<Self, String> {
        let project = Project::load(path).map_err(|e| e.to_string())?;
        let layer = OverrideLayer::load(&project.overrides_path()).map_err(|e| e.to_string())?;
        Self::from_parts(project, layer)
    }

    /// Wrap a loaded project and layer.
    pub fn from_parts(project: Project, layer: OverrideLayer) -> Result<Self, String> {
        let mode = AuditMode::for_size(project.phrases.len());
        Ok(Doc {
            ws: Workspace::from_project(project, layer, mode)?,
        })
    }

    /// The workspace underneath.
    pub fn workspace(&self) -> &Workspace {
        &self.ws
    }

    /// Would `edit` apply to the current effective tree? `Err` says why not.
    pub fn check(&self, edit: &Edit) -> Result<(), String> {
        self.ws.check_edit(edit).map_err(|e| e.to_string())
    }

    /// Check, record and apply one edit. A sign-off is recorded with the workspace's own
    /// hash and counts ([`Workspace::signoff_edit`]: open findings are warnings and errors),
    /// whatever numbers the caller put in it, so that the workbench and the CLI agree.
    pub fn edit(&mut self, edit: Edit, author: &str, note: Option<String>) -> Result<(), String> {
        let edit = match edit {
            Edit::Signoff { reviewer, .. } => self.ws.signoff_edit(&reviewer)?,
            e => e,
        };
        self.ws.edit(edit, author, note)?;
        Ok(())
    }

    /// [`Doc::edit`] for a sign-off signed with `key` at its place in the history.
    pub fn edit_signed(
        &mut self,
        edit: Edit,
        author: &str,
        note: Option<String>,
        key: &ssh_key::PrivateKey,
    ) -> Result<(), String> {
        let edit = match edit {
            Edit::Signoff { reviewer, .. } => self.ws.signoff_edit(&reviewer)?,
            e => e,
        };
        self.ws.edit_signed(edit, author, note, key)?;
        Ok(())
    }

    /// Why there is nothing to undo: a saved sign-off is reverted only with a reason, on the
    /// command line.
    pub fn why_no_undo(&self) -> String {
        let edits = &self.ws.layer.edits;
        match crate::model::history::undo_target(edits).map(|i| (i, &edits[i].edit)) {
            Some((i, Edit::Signoff { reviewer, .. })) => format!(
                "Not undone: edit #{i} is a saved sign-off by {reviewer}; reverting it needs a \
                 reason: treewright undo PROJECT --reason TEXT"
            ),
            _ => "Nothing to undo".to_string(),
        }
    }

    /// Undo the last step; returns what it was: an edit's operation name (a revert appended
    /// for a saved edit: "op (revert appended)"), or the merge with the file on disk taken
    /// back as a whole.
    pub fn undo(&mut self) -> Option<String> {
        self.ws.undo_step().map(|s| match s {
            Step::Edit(r) => match &r.edit {
                Edit::Revert { edit, .. } => format!(
                    "edit #{edit} (saved, so a revert was appended; the history only grows)"
                ),
                e => e.op().to_string(),
            },
            Step::Merge { from, to } => format!(
                "the merge with the file on disk ({from} edits back to {to}; saving offers the \
                 merge again)"
            ),
        })
    }

    /// Redo the last undone step; returns what it was (see [`Doc::undo`]).
    pub fn redo(&mut self) -> Option<String> {
        self.ws.redo_step().map(|s| match s {
            Step::Edit(r) => r.edit.op().to_string(),
            Step::Merge { from, to } => {
                format!("the merge with the file on disk ({from} edits to {to})")
            }
        })
    }

    /// Write the override file under the project lock. When someone else changed it since
    /// it was loaded (or the lock could not be taken), nothing is overwritten: the edits are
    /// written to the recovery file instead and the message says so.
    pub fn save(&mut self) -> Result<PathBuf, String> {
        match self.ws.save() {
            Ok(p) => Ok(p),
            Err(
                e @ (WorkspaceError::Overrides(
                    OverrideError::ChangedOnDisk { .. } | OverrideError::Lock(_),
                )
                | WorkspaceError::Lock(_)),
            ) => {
                let n = self.ws.layer.edits.len();
                match super::autosave::write(self) {
                    Ok(()) => Err(format!(
                        "{e}. Your {n} edit(s) are kept in {} and are offered again when the \
                         project is opened",
                        super::autosave::path(self).display()
                    )),
                    Err(w) => Err(format!(
                        "{e}. Keeping the edits in the recovery file failed too: {w}"
                    )),
                }
            }
            Err(e) => Err(e.to_string()),
        }
    }

    /// Whether the override file changed on disk since it was loaded or saved.
    pub fn changed_on_disk(&self) -> bool {
        self.ws
            .layer
            .changed_on_disk(&self.ws.overrides_path())
            .unwrap_or(false)
    }

    /// Merge the unsaved edits with the file on disk; see [`Workspace::merge_with_disk`].
    pub fn merge_with_disk(&self) -> Result<crate::model::merge::MergeOutcome, String> {
        Ok(self.ws.merge_with_disk()?)
    }

    /// Finish a merge and save; see [`Workspace::finish_merge`].
    pub fn finish_merge(
        &mut self,
        outcome: &crate::model::merge::MergeOutcome,
        choices: &std::collections::BTreeMap<String, crate::model::merge::Side>,
    ) -> Result<PathBuf, String> {
        Ok(self.ws.finish_merge(outcome, choices)?)
    }

    /// Replace the base tree (after a build); see [`Workspace::set_base`].
    pub fn set_base(
        &mut self,
        file: &TreeFile,
        report: Option<&BuildReport>,
    ) -> Result<(), String> {
        Ok(self.ws.set_base(file, report)?)
    }

    /// Write an export of the effective tree to `path` (folders are created).
    pub fn export(
        &self,
        format: Format,
        path: &Path,
        base_iri: &str,
        scheme_label: &str,
    ) -> Result<(), String> {
        Ok(self.ws.export_to(format, path, base_iri, scheme_label)?)
    }

    /// Push recovered edit records as they are (author and time kept) and re-apply.
    pub fn restore(&mut self, records: Vec<EditRecord>) {
        self.ws.restore(records);
    }
}
