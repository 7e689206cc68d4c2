//! The workspace's append-only history and signed sign-offs: undo and redo as appended
//! reverts (the CLI's `undo` and `redo`), signing a sign-off record, and checking the latest
//! sign-off's signature against the project's signer policy.

use ssh_key::PrivateKey;

use super::{Workspace, WorkspaceError};
use crate::model::edit::{Edit, EditRecord};
use crate::model::history;
use crate::model::overrides;
use crate::model::signoff::latest_signoff;
use crate::model::sshsig::{self, SignatureError, SignerPolicy};

/// What an appended revert did: the revert's index and the edit it cancels.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Reverted {
    /// Index of the appended revert.
    pub revert: usize,
    /// Index of the cancelled edit.
    pub target: usize,
}

/// The latest sign-off's signature checked against the project's signer policy.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum SignatureCheck {
    /// The project names no allowed-signers file: signatures are not required.
    NoPolicy,
    /// There is no sign-off in force.
    NoSignoff,
    /// Signed by an allowed key of the named reviewer (its fingerprint).
    Valid {
        /// Index of the sign-off.
        index: usize,
        /// `SHA256:…` of the key.
        key: String,
    },
    /// The check failed.
    Failed(SignatureError),
}

impl SignatureCheck {
    /// Whether the gate passes (no policy, or a valid signature; no sign-off is left to the
    /// tree-hash check).
    pub fn passes(&self) -> bool {
        !matches!(self, SignatureCheck::Failed(_))
    }

    /// One line for `verify` and `export --require-signoff`; `None` without a policy.
    pub fn line(&self) -> Option<String> {
        match self {
            SignatureCheck::NoPolicy | SignatureCheck::NoSignoff => None,
            SignatureCheck::Valid { index, key } => Some(format!(
                "signature: sign-off #{index} signed by {key}, an allowed key of its reviewer"
            )),
            SignatureCheck::Failed(e) => Some(format!("signature: FAILED: {e}")),
        }
    }
}

impl Workspace {
    /// The project's signer policy (manifest section `signoff`), `None` without one.
    pub fn signer_policy(&self) -> Result<Option<SignerPolicy>, WorkspaceError> {
        let Some(r) = &self.project.manifest.signoff else {
            return Ok(None);
        };
        let allowed = self.project.dir.join(&r.allowed_signers);
        let revoked = r.revoked_keys.as_ref().map(|p| self.project.dir.join(p));
        Ok(Some(SignerPolicy::load(&allowed, revoked.as_deref())?))
    }

    /// Check the signature of the sign-off in force against the signer policy.
    pub fn check_signature(&self) -> Result<SignatureCheck, WorkspaceError> {
        let Some(policy) = self.signer_policy()? else {
            return Ok(SignatureCheck::NoPolicy);
        };
        let edits = &self.layer.edits;
        let Some((index, r)) = latest_signoff(edits) else {
            return Ok(SignatureCheck::NoSignoff);
        };
        let Edit::Signoff {
            reviewer,
            signature,
            ..
        } = &r.edit
        else {
            return Ok(SignatureCheck::NoSignoff);
        };
        let message = history::signed_message(edits, index);
        Ok(
            match policy.check(index, reviewer, signature.as_deref(), &message) {
                Ok(key) => SignatureCheck::Valid { index, key },
                Err(e) => SignatureCheck::Failed(e),
            },
        )
    }

    /// Sign the sign-off record `rec`, which is about to be appended to the edits: its
    /// signed form ([`history::signed_message`]) takes the chain up to it. With a signer
    /// policy the new signature is checked at once, so that a key that is not allowed for the
    /// reviewer is refused before anything is written.
    pub fn sign_record(
        &self,
        rec: &mut EditRecord,
        key: &PrivateKey,
    ) -> Result<(), WorkspaceError> {
        let Edit::Signoff { reviewer, .. } = &rec.edit else {
            return Ok(());
        };
        let reviewer = reviewer.clone();
        let mut list = self.layer.edits.clone();
        list.push(rec.clone());
        let index = list.len() - 1;
        let message = history::signed_message(&list, index);
        let text = sshsig::sign(key, &message)?;
        if let Some(policy) = self.signer_policy()? {
            policy.check(index, &reviewer, Some(&text), &message)?;
        }
        if let Edit::Signoff { signature, .. } = &mut rec.edit {
            *signature = Some(text);
        }
        Ok(())
    }

    /// [`Workspace::edit`] for a sign-off signed with `key` (the workbench: the signature is
    /// made for the edit's place at the end of the edits in memory, which the next save
    /// writes unchanged unless the file changed on disk meanwhile).
    pub fn edit_signed(
        &mut self,
        edit: Edit,
        author: &str,
        note: Option<String>,
        key: &PrivateKey,
    ) -> Result<usize, WorkspaceError> {
        let edit = edit.normalized();
        self.check_edit(&edit)?;
        if matches!(edit, Edit::Signoff { .. }) {
            let lock = self.lock()?;
            self.keep_signed_tree(&edit, &lock)?;
        }
        let mut rec = overrides::record(edit, author, note);
        self.sign_record(&mut rec, key)?;
        self.layer.push(rec);
        self.refresh();
        Ok(self.layer.edits.len() - 1)
    }

    /// Append a revert and save, under the project lock; `pick` chooses the edit to cancel.
    /// Refused when the file changed on disk since it was loaded.
    fn append_revert(
        &mut self,
        author: &str,
        reason: &str,
        pick: impl Fn(&[EditRecord]) -> Option<usize>,
        none: impl Fn(String) -> WorkspaceError,
    ) -> Result<Reverted, WorkspaceError> {
        let path = self.overrides_path();
        let file = path.display().to_string();
        let lock = self.lock()?;
        // the latest edit might then be someone else's: refuse, as before the history was
        // append-only (nothing is written)
        if self.layer.changed_on_disk(&path)? {
            return Err(crate::model::overrides::OverrideError::ChangedOnDisk { file }.into());
        }
        let target = pick(&self.layer.edits).ok_or_else(|| none(file.clone()))?;
        if let Edit::Signoff { reviewer, .. } = &self.layer.edits[target].edit
            && reason.trim().is_empty()
        {
            return Err(WorkspaceError::ReasonNeeded {
                file,
                index: target,
                reviewer: reviewer.clone(),
            });
        }
        let edit = history::revert_of(&self.layer.edits, target, reason);
        let note = None;
        self.layer.push(overrides::record(edit, author, note));
        self.layer.save_locked(&path, &lock)?;
        drop(lock);
        self.refresh();
        Ok(Reverted {
            revert: self.layer.edits.len() - 1,
            target,
        })
    }

    /// Undo on the command line: append a revert of the latest edit in force (a sign-off
    /// only with a `reason`) and save.
    pub fn undo_append(&mut self, author: &str, reason: &str) -> Result<Reverted, WorkspaceError> {
        self.append_revert(author, reason, history::undo_target, |file| {
            WorkspaceError::NothingToUndo { file }
        })
    }

    /// Redo on the command line: append a revert of the latest undo at the end of the
    /// history and save.
    pub fn redo_append(&mut self, author: &str, reason: &str) -> Result<Reverted, WorkspaceError> {
        self.append_revert(author, reason, history::redo_target, |file| {
            WorkspaceError::NothingToRedo { file }
        })
    }
}
