//! Append-only history of the override layer: the hash chain that links every edit to the
//! one before it, reverts (the append-only form of undo and redo), and the signed form of a
//! sign-off.
//!
//! **Chain.** In a version-2 override file every edit record carries `prev`: the SHA-256
//! (hex) of the previous record's canonical form, and for the first record of the file's
//! header. The canonical form of a record is its compact JSON as stored, `prev` included
//! (field order: the operation's fields, `author`, `time`, `note`, `prev`), so each link
//! covers the whole history before it. The header's canonical form is
//! `{"format":"treewright-overrides","version":2}`. Loading checks every link; the first
//! one that does not hold is reported as `edit #N does not follow #N-1: history was changed`.
//! The chain is always computed from the edits in memory when a file is written: a loaded
//! file was checked, so its links are written back unchanged, and appended edits are chained
//! on; a merge re-chains the edits after the common part (see [`super::merge`]).
//!
//! **Reverts.** Undo appends `{"op": "revert", "edit": N, "edit_sha256": …}`: edit `N`
//! stops applying ([`reverted_by`]). Redo appends a revert of that revert. `edit_sha256` is
//! [`record_sha256`] of the cancelled record, so a revert whose index was moved by a merge
//! finds its edit again ([`fix_revert_indices`]). Reverting a sign-off needs a reason.
//!
//! **Signed form.** A signed sign-off signs [`signed_message`]: its record's canonical form
//! with `prev` and without the signature, so the signature covers the sign-off and, through
//! `prev`, every edit before it.

use serde::{Deserialize, Serialize};

use super::edit::{Edit, EditRecord};
use super::signoff::{describe_edit, sha256_hex};

/// The override file version that has the chain and reverts.
pub const CHAINED_VERSION: u64 = 2;

/// An edit record as stored in a version-2 file: the record and its link to the one before.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct StoredRecord {
    /// The record.
    #[serde(flatten)]
    pub record: EditRecord,
    /// SHA-256 of the previous record's canonical form (of the header for the first).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub prev: Option<String>,
}

fn compact<T: Serialize>(v: &T) -> String {
    // records are plain strings, numbers and vectors: serialising cannot fail
    serde_json::to_string(v).unwrap_or_default()
}

/// SHA-256 of the version-2 header's canonical form, the first record's `prev`.
pub fn header_sha256() -> String {
    sha256_hex(
        format!(
            "{{\"format\":\"{}\",\"version\":{CHAINED_VERSION}}}",
            super::overrides::OVERRIDES_FORMAT
        )
        .as_bytes(),
    )
}

/// The identity of a record that reverts name: SHA-256 of its compact JSON without `prev`
/// (a revert's own `edit` index is left out, so that fixing it after a merge keeps the
/// identity a redo names).
pub fn record_sha256(r: &EditRecord) -> String {
    match &r.edit {
        Edit::Revert { .. } => {
            let mut r = r.clone();
            if let Edit::Revert { edit, .. } = &mut r.edit {
                *edit = 0;
            }
            sha256_hex(compact(&r).as_bytes())
        }
        _ => sha256_hex(compact(r).as_bytes()),
    }
}

fn link(r: &EditRecord, prev: &str) -> String {
    let s = StoredRecord {
        record: r.clone(),
        prev: Some(prev.to_string()),
    };
    sha256_hex(compact(&s).as_bytes())
}

/// The `prev` of every edit: element `i` is the link edit `i` must carry.
pub fn chain(edits: &[EditRecord]) -> Vec<String> {
    let mut out = Vec::with_capacity(edits.len());
    let mut prev = header_sha256();
    for r in edits {
        let next = link(r, &prev);
        out.push(std::mem::replace(&mut prev, next));
    }
    out
}

/// The head of the chain: the link a next edit would carry.
pub fn head(edits: &[EditRecord]) -> String {
    match edits.last() {
        Some(r) => link(r, &chain(edits)[edits.len() - 1]),
        None => header_sha256(),
    }
}

/// Records with their computed links, as a version-2 file stores them.
pub fn chained(edits: &[EditRecord]) -> Vec<StoredRecord> {
    edits
        .iter()
        .zip(chain(edits))
        .map(|(r, prev)| StoredRecord {
            record: r.clone(),
            prev: Some(prev),
        })
        .collect()
}

/// Check the stored links; `Err` names the first edit that does not follow.
pub fn check_chain(stored: &[StoredRecord]) -> Result<(), String> {
    let mut expect = header_sha256();
    for (i, s) in stored.iter().enumerate() {
        if s.prev.as_deref() != Some(expect.as_str()) {
            return Err(if i == 0 {
                "edit #0 does not follow the file header: history was changed".to_string()
            } else {
                format!("edit #{i} does not follow #{}: history was changed", i - 1)
            });
        }
        expect = link(&s.record, &expect);
    }
    Ok(())
}

/// The bytes a signed sign-off at `index` signs: its record's canonical form with `prev`
/// (the chain up to it) and without the signature.
pub fn signed_message(edits: &[EditRecord], index: usize) -> Vec<u8> {
    let mut r = edits[index].clone();
    if let Edit::Signoff { signature, .. } = &mut r.edit {
        *signature = None;
    }
    let prev = chain(&edits[..=index]).swap_remove(index);
    compact(&StoredRecord {
        record: r,
        prev: Some(prev),
    })
    .into_bytes()
}

/// The edit the revert at `i` cancels: `edit` when that record has the named
/// `edit_sha256`, else the latest earlier record that has it (a merge may have moved the
/// edits; [`fix_revert_indices`] writes the index back). `None` for other edits and for a
/// revert whose edit is not before it.
pub fn revert_target(edits: &[EditRecord], i: usize) -> Option<usize> {
    let Edit::Revert {
        edit, edit_sha256, ..
    } = &edits[i].edit
    else {
        return None;
    };
    if *edit < i && record_sha256(&edits[*edit]) == *edit_sha256 {
        return Some(*edit);
    }
    (0..i)
        .rev()
        .find(|&k| record_sha256(&edits[k]) == *edit_sha256)
}

/// Why the revert at `i` does not apply, if it does not.
pub fn revert_problem(edits: &[EditRecord], i: usize) -> Option<String> {
    let Edit::Revert { edit, reason, .. } = &edits[i].edit else {
        return None;
    };
    let Some(t) = revert_target(edits, i) else {
        return Some(format!(
            "edit #{edit} is not an earlier edit with the edit_sha256 this revert names"
        ));
    };
    if matches!(edits[t].edit, Edit::Signoff { .. }) && reason.trim().is_empty() {
        return Some(format!("reverting the sign-off #{t} needs a reason"));
    }
    None
}

/// For every edit, the revert that cancels it (`None` when it applies). A revert that is
/// itself cancelled cancels nothing; an invalid revert ([`revert_problem`]) cancels nothing.
pub fn reverted_by(edits: &[EditRecord]) -> Vec<Option<usize>> {
    let mut by = vec![None; edits.len()];
    for i in (0..edits.len()).rev() {
        if by[i].is_none()
            && revert_problem(edits, i).is_none()
            && let Some(t) = revert_target(edits, i)
            && by[t].is_none()
        {
            by[t] = Some(i);
        }
    }
    by
}

/// The edit an undo cancels: the latest edit that is not a revert and still applies.
pub fn undo_target(edits: &[EditRecord]) -> Option<usize> {
    let by = reverted_by(edits);
    (0..edits.len())
        .rev()
        .find(|&i| !matches!(edits[i].edit, Edit::Revert { .. }) && by[i].is_none())
}

/// The revert a redo cancels: among the reverts at the end of the history, the latest one
/// that is in force and cancels an ordinary edit (an undo, not a redo).
pub fn redo_target(edits: &[EditRecord]) -> Option<usize> {
    let by = reverted_by(edits);
    for i in (0..edits.len()).rev() {
        if !matches!(edits[i].edit, Edit::Revert { .. }) {
            return None;
        }
        if by[i].is_none()
            && revert_problem(edits, i).is_none()
            && revert_target(edits, i)
                .is_some_and(|t| !matches!(edits[t].edit, Edit::Revert { .. }))
        {
            return Some(i);
        }
    }
    None
}

/// The revert edit that cancels `edits[target]`.
pub fn revert_of(edits: &[EditRecord], target: usize, reason: &str) -> Edit {
    Edit::Revert {
        edit: target,
        edit_sha256: record_sha256(&edits[target]),
        reason: reason.trim().to_string(),
    }
}

/// After a merge moved edits: point every revert whose index no longer names its edit at
/// the latest earlier edit with the named `edit_sha256` (left as it is when there is none;
/// it is then reported as not applying).
pub fn fix_revert_indices(edits: &mut [EditRecord]) {
    for i in 0..edits.len() {
        if let Some(t) = revert_target(edits, i)
            && let Edit::Revert { edit, .. } = &mut edits[i].edit
        {
            *edit = t;
        }
    }
}

/// One line of `treewright history`.
#[derive(Debug, Clone, Serialize)]
pub struct HistoryEntry {
    /// 0-based index.
    pub index: usize,
    /// The operation.
    pub op: String,
    /// One-line description.
    pub what: String,
    /// Author.
    pub author: String,
    /// Time (RFC 3339).
    pub time: String,
    /// Note, if any.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
    /// The link this edit carries (SHA-256 of the previous record, or of the header).
    pub prev: String,
    /// The revert that cancels this edit, if any.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub reverted_by: Option<usize>,
    /// For a sign-off: whether it carries a signature.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub signed: Option<bool>,
}

/// The history with links and reverts, oldest first.
pub fn entries(edits: &[EditRecord]) -> Vec<HistoryEntry> {
    let by = reverted_by(edits);
    edits
        .iter()
        .zip(chain(edits))
        .enumerate()
        .map(|(i, (r, prev))| HistoryEntry {
            index: i,
            op: r.edit.op().to_string(),
            what: describe(edits, i),
            author: r.author.clone(),
            time: r.time.clone(),
            note: r.note.clone(),
            prev,
            reverted_by: by[i],
            signed: match &r.edit {
                Edit::Signoff { signature, .. } => Some(signature.is_some()),
                _ => None,
            },
        })
        .collect()
}

/// A one-line description of edit `i`, a revert naming what it cancels.
pub fn describe(edits: &[EditRecord], i: usize) -> String {
    match &edits[i].edit {
        Edit::Revert { edit, reason, .. } => {
            let what = revert_target(edits, i)
                .map(|t| match &edits[t].edit {
                    Edit::Revert { edit: e, .. } => format!("the revert of #{e}"),
                    e => describe_edit(e),
                })
                .unwrap_or_else(|| "?".into());
            let why = if reason.is_empty() {
                String::new()
            } else {
                format!(": {reason}")
            };
            format!("revert #{edit} ({what}){why}")
        }
        e => describe_edit(e),
    }
}

/// Sign-offs cancelled by a revert: (sign-off index, revert index) for each.
pub fn reverted_signoffs(edits: &[EditRecord]) -> Vec<(usize, usize)> {
    reverted_by(edits)
        .into_iter()
        .enumerate()
        .filter_map(|(i, by)| {
            by.filter(|_| matches!(edits[i].edit, Edit::Signoff { .. }))
                .map(|j| (i, j))
        })
        .collect()
}

/// Lines saying which sign-offs were reverted, by whom and why (empty when none): what
/// `verify`, the audit report and the workbench show.
pub fn reverted_signoff_lines(edits: &[EditRecord]) -> Vec<String> {
    reverted_signoffs(edits)
        .into_iter()
        .map(|(i, j)| {
            let reviewer = match &edits[i].edit {
                Edit::Signoff { reviewer, .. } => reviewer.as_str(),
                _ => "",
            };
            let reason = match &edits[j].edit {
                Edit::Revert { reason, .. } => reason.as_str(),
                _ => "",
            };
            format!(
                "sign-off by {reviewer} (edit #{i}, {}) was reverted by {} at {} (edit #{j}): {reason}",
                edits[i].time, edits[j].author, edits[j].time
            )
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rec(e: Edit, t: &str) -> EditRecord {
        EditRecord {
            edit: e,
            author: "ines".into(),
            time: format!("2026-12-04T10:00:{t}Z"),
            note: None,
        }
    }

    fn ex(n: &str, t: &str) -> EditRecord {
        rec(Edit::Exclude { node: n.into() }, t)
    }

    #[test]
    fn chain_links_each_record_to_the_one_before() {
        let edits = vec![ex("a", "01"), ex("b", "02"), ex("c", "03")];
        let c = chain(&edits);
        assert_eq!(c[0], header_sha256());
        assert!(check_chain(&chained(&edits)).is_ok());
        // reorder, delete, change: each is named
        let mut s = chained(&edits);
        s.swap(1, 2);
        assert_eq!(
            check_chain(&s).unwrap_err(),
            "edit #1 does not follow #0: history was changed"
        );
        let mut s = chained(&edits);
        s.remove(0);
        assert_eq!(
            check_chain(&s).unwrap_err(),
            "edit #0 does not follow the file header: history was changed"
        );
        let mut s = chained(&edits);
        s[1].record.author = "mallory".into();
        assert_eq!(
            check_chain(&s).unwrap_err(),
            "edit #2 does not follow #1: history was changed"
        );
        assert_eq!(
            head(&edits),
            chain(&[edits.clone(), vec![ex("d", "04")]].concat())[3]
        );
    }

    #[test]
    fn undo_and_redo_are_reverts() {
        let mut edits = vec![ex("a", "01"), ex("b", "02")];
        let t = undo_target(&edits).unwrap();
        assert_eq!(t, 1);
        edits.push(rec(revert_of(&edits, t, ""), "03"));
        assert_eq!(reverted_by(&edits), vec![None, Some(2), None]);
        assert_eq!(undo_target(&edits), Some(0));
        let r = redo_target(&edits).unwrap();
        assert_eq!(r, 2);
        edits.push(rec(revert_of(&edits, r, ""), "04"));
        assert_eq!(reverted_by(&edits), vec![None, None, Some(3), None]);
        assert_eq!(redo_target(&edits), None);
        assert_eq!(undo_target(&edits), Some(1));
        // a sign-off is reverted only with a reason
        let mut s = vec![rec(
            Edit::Signoff {
                reviewer: "rowan".into(),
                tree_hash: "h".into(),
                open_findings: 0,
                unreviewed: 0,
                signature: None,
            },
            "05",
        )];
        s.push(rec(revert_of(&s, 0, " "), "06"));
        assert!(revert_problem(&s, 1).unwrap().contains("needs a reason"));
        assert_eq!(reverted_by(&s), vec![None, None]);
        s[1].edit = revert_of(&s, 0, "signed the wrong tree");
        assert_eq!(reverted_by(&s), vec![Some(1), None]);
    }

    #[test]
    fn moved_reverts_find_their_edit_again() {
        let mut edits = vec![ex("a", "01"), ex("b", "02")];
        edits.push(rec(revert_of(&edits, 1, ""), "03"));
        edits.insert(0, ex("z", "00"));
        assert_eq!(revert_target(&edits, 3), Some(2));
        fix_revert_indices(&mut edits);
        assert!(matches!(edits[3].edit, Edit::Revert { edit: 2, .. }));
        assert!(revert_problem(&edits, 3).is_none());
        assert_eq!(reverted_by(&edits)[2], Some(3));
    }
}
