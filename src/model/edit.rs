//! Human edits: the one enum every view emits and the override layer stores.
//!
//! Edits name phrases by their stable string id, never by row, so they survive re-training
//! (a regenerated embedding table may reorder or drop phrases). The file format of the
//! stored edits is `docs/overrides-format.md`.

use serde::{Deserialize, Serialize};

/// Review state of a node.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum ReviewStatus {
    /// Nobody has looked at it yet.
    #[default]
    Unreviewed,
    /// A reviewer accepted it as it is.
    Approved,
    /// A reviewer wants it changed (written `to-fix`; the earlier spelling `needs-work` is
    /// still read).
    #[serde(alias = "needs-work")]
    ToFix,
}

impl ReviewStatus {
    /// The name used in files and on the command line.
    pub fn as_str(self) -> &'static str {
        match self {
            ReviewStatus::Unreviewed => "unreviewed",
            ReviewStatus::Approved => "approved",
            ReviewStatus::ToFix => "to-fix",
        }
    }

    /// Parse `approved`, `to-fix` or `unreviewed` (also the earlier `needs-work`).
    pub fn parse(s: &str) -> Option<Self> {
        match s {
            "unreviewed" => Some(ReviewStatus::Unreviewed),
            "approved" => Some(ReviewStatus::Approved),
            "to-fix" | "to_fix" | "needs-work" | "needs_work" => Some(ReviewStatus::ToFix),
            _ => None,
        }
    }
}

/// One human decision about the tree.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(tag = "op", rename_all = "kebab-case", deny_unknown_fields)]
pub enum Edit {
    /// Move `node` (with its subtree) under `parent`.
    Reparent {
        /// Node id.
        node: String,
        /// New parent id.
        parent: String,
    },
    /// Keep `node` under `parent` (its effective parent when the pin was made) even when a
    /// regenerated base tree places it elsewhere.
    Pin {
        /// Node id.
        node: String,
        /// The parent it is pinned to.
        parent: String,
    },
    /// Release a pin.
    Unpin {
        /// Node id.
        node: String,
    },
    /// The sources become aliases (alternative labels) of `into`; their children move to
    /// `into`.
    Merge {
        /// Merged-away node ids.
        sources: Vec<String>,
        /// Target node id.
        into: String,
    },
    /// Show `node` under a new label.
    Rename {
        /// Node id.
        node: String,
        /// New label.
        label: String,
        /// The language of the new label (a BCP 47 tag); absent: the project's default
        /// language, the label every view shows by default.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        language: Option<String>,
    },
    /// Leave `node` out of the deployed tree; its children move to its parent.
    Exclude {
        /// Node id.
        node: String,
    },
    /// Undo an exclusion.
    Include {
        /// Node id.
        node: String,
    },
    /// Record a review decision.
    Review {
        /// Node id.
        node: String,
        /// The decision.
        status: ReviewStatus,
        /// Reviewer's comment.
        #[serde(default, skip_serializing_if = "String::is_empty")]
        comment: String,
    },
    /// A reviewer signs off the effective tree as it stands.
    Signoff {
        /// Reviewer name.
        reviewer: String,
        /// SHA-256 (hex) of the canonical effective tree at sign-off.
        tree_hash: String,
        /// Open audit findings at sign-off.
        open_findings: usize,
        /// Unreviewed nodes at sign-off.
        unreviewed: usize,
        /// OpenSSH "sshsig" signature (armored, namespace `treewright-signoff`) of the
        /// record's signed form (see [`crate::model::history::signed_message`]); absent on
        /// unsigned sign-offs.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        signature: Option<String>,
    },
    /// Cancel an earlier edit (undo in an append-only history): the edit at index `edit`
    /// stops applying. A revert of a revert brings the reverted edit back (redo).
    Revert {
        /// 0-based index of the cancelled edit in the file.
        edit: usize,
        /// SHA-256 (hex) of the cancelled edit's record (compact JSON, see
        /// [`crate::model::history::record_sha256`]): a revert moved by a merge finds its
        /// edit again by it.
        edit_sha256: String,
        /// Why (required when the cancelled edit is a sign-off).
        #[serde(default, skip_serializing_if = "String::is_empty")]
        reason: String,
    },
}

impl Edit {
    /// The edit as it should be stored: a rename's label passed through the label rule
    /// ([`crate::model::label::clean`]: trimmed, NFC). A label the rule refuses is left as
    /// given, for the edit check to refuse with its reason.
    pub fn normalized(self) -> Edit {
        match self {
            Edit::Rename {
                node,
                label,
                language,
            } => {
                let cleaned = match crate::model::label::clean(&label) {
                    Ok(l) if l != label.as_str() => Some(l.into_owned()),
                    _ => None,
                };
                // a well-formed tag is stored in its canonical case; a bad one is left for
                // the edit check to refuse
                let language = language.map(|t| crate::model::lang::normalize_tag(&t).unwrap_or(t));
                Edit::Rename {
                    node,
                    label: cleaned.unwrap_or(label),
                    language,
                }
            }
            e => e,
        }
    }

    /// The operation name as stored in the file (`reparent`, `merge`, ...).
    pub fn op(&self) -> &'static str {
        match self {
            Edit::Reparent { .. } => "reparent",
            Edit::Pin { .. } => "pin",
            Edit::Unpin { .. } => "unpin",
            Edit::Merge { .. } => "merge",
            Edit::Rename { .. } => "rename",
            Edit::Exclude { .. } => "exclude",
            Edit::Include { .. } => "include",
            Edit::Review { .. } => "review",
            Edit::Signoff { .. } => "signoff",
            Edit::Revert { .. } => "revert",
        }
    }

    /// The phrase ids this edit refers to.
    pub fn phrases(&self) -> Vec<&str> {
        match self {
            Edit::Reparent { node, parent } | Edit::Pin { node, parent } => vec![node, parent],
            Edit::Unpin { node }
            | Edit::Rename { node, .. }
            | Edit::Exclude { node }
            | Edit::Include { node }
            | Edit::Review { node, .. } => vec![node],
            Edit::Merge { sources, into } => {
                let mut v: Vec<&str> = sources.iter().map(String::as_str).collect();
                v.push(into);
                v
            }
            Edit::Signoff { .. } | Edit::Revert { .. } => Vec::new(),
        }
    }
}

/// An edit with who made it, when, and why.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct EditRecord {
    /// The edit.
    #[serde(flatten)]
    pub edit: Edit,
    /// Who made it.
    pub author: String,
    /// When, RFC 3339 (UTC).
    pub time: String,
    /// Optional free-text note.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn edits_round_trip_as_tagged_json() {
        let r = EditRecord {
            edit: Edit::Merge {
                sources: vec!["a".into(), "b".into()],
                into: "c".into(),
            },
            author: "ana".into(),
            time: "2026-12-02T10:00:00Z".into(),
            note: None,
        };
        let s = serde_json::to_string(&r).unwrap();
        assert_eq!(
            s,
            r#"{"op":"merge","sources":["a","b"],"into":"c","author":"ana","time":"2026-12-02T10:00:00Z"}"#
        );
        assert_eq!(serde_json::from_str::<EditRecord>(&s).unwrap(), r);
        assert_eq!(ReviewStatus::parse("to-fix"), Some(ReviewStatus::ToFix));
        assert_eq!(ReviewStatus::parse("needs-work"), Some(ReviewStatus::ToFix));
        // files written before the rename still load; new files use the new spelling
        let old = r#"{"op":"review","node":"a","status":"needs-work","author":"ana","time":"2026-12-02T10:00:00Z"}"#;
        let rec: EditRecord = serde_json::from_str(old).unwrap();
        assert!(
            serde_json::to_string(&rec)
                .unwrap()
                .contains(r#""status":"to-fix""#)
        );
    }
}
