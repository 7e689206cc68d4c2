//! The override layer's append-only side (issue 23): undo and redo of saved edits append
//! reverts ([`super::history`]), and the save of a merge result, whose edits after the common
//! part are re-chained.

use std::path::Path;

use super::{OverrideError, OverrideLayer, Redo, history, record};
use crate::model::edit::{Edit, EditRecord};
use crate::model::lock::ProjectLock;

impl OverrideLayer {
    /// Who reverts and redoes in this session (the author of the revert edits undo and
    /// redo append).
    pub fn set_author(&mut self, author: &str) {
        self.author = author.to_string();
    }

    /// Undo the latest edit that still applies ([`history::undo_target`]): an unsaved last
    /// edit is dropped (nothing was recorded yet); a saved one is cancelled by appending a
    /// revert (the history is append-only) and the revert is returned. A saved sign-off is
    /// not reverted here (that needs a reason: `treewright undo --reason`), and when the last
    /// step is a merge with the file on disk nothing happens: [`OverrideLayer::undo_step`]
    /// undoes that. Both return `None`.
    pub fn undo(&mut self) -> Option<EditRecord> {
        if self.merge_on_top() {
            return None;
        }
        let t = history::undo_target(&self.edits)?;
        if t + 1 == self.edits.len() && t >= self.saved.len() {
            let r = self.edits.pop()?;
            self.redo.push(Redo::Edit(r.clone()));
            return Some(r);
        }
        if t < self.saved.len() && matches!(self.edits[t].edit, Edit::Signoff { .. }) {
            return None;
        }
        let r = record(history::revert_of(&self.edits, t, ""), &self.author, None);
        self.edits.push(r.clone());
        self.redo.push(Redo::Revert);
        Some(r)
    }

    /// Redo an undo that appended a revert: drop the revert while it is unsaved, else
    /// append a revert of it.
    pub(super) fn redo_revert(&mut self) -> Option<EditRecord> {
        let t = history::redo_target(&self.edits)?;
        if t + 1 == self.edits.len() && t >= self.saved.len() {
            return self.edits.pop();
        }
        let r = record(history::revert_of(&self.edits, t, ""), &self.author, None);
        self.edits.push(r.clone());
        Some(r)
    }

    /// [`OverrideLayer::save_locked`] for the result of a merge with the file on disk
    /// ([`OverrideLayer::take_disk`] then the merged edits): the edits after the common part
    /// may be in a new order, so only the changed-on-disk check applies; the chain is
    /// computed afresh for the written order.
    pub fn save_merged_locked(
        &mut self,
        path: &Path,
        _lock: &ProjectLock,
    ) -> Result<(), OverrideError> {
        let file = path.display().to_string();
        if self.changed_on_disk(path)? {
            return Err(OverrideError::ChangedOnDisk { file });
        }
        self.write_unchecked(path)
    }
}
