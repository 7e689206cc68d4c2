//! Sign-off: a canonical serialisation of the effective tree, its SHA-256, and what changed
//! since the latest sign-off.
//!
//! The canonical form covers what is deployed: the root, every node with its parent and
//! effective label, the aliases of every node (id and label) and the excluded phrases, all
//! sorted by phrase id so that the hash does not depend on the row order of the phrase
//! table. Review states and pins are process records, not tree content, and are not part of
//! it (the sign-off records the number of unreviewed nodes separately).

use serde::Serialize;
use sha2::{Digest, Sha256};

use super::edit::{Edit, EditRecord};
use super::effective::EffectiveTree;
use super::gaussian::PhraseId;
use super::overrides::apply;
use super::phrase::PhraseTable;
use super::signed::{SignedTree, SinceSignoff, SnapshotError, since_signoff};
use super::tree::Tree;

#[derive(Serialize)]
struct CanonLabel<'a> {
    id: &'a str,
    label: &'a str,
}

#[derive(Serialize)]
struct CanonNode<'a> {
    id: &'a str,
    label: &'a str,
    parent: Option<&'a str>,
    aliases: Vec<CanonLabel<'a>>,
}

#[derive(Serialize)]
struct Canon<'a> {
    format: &'static str,
    root: &'a str,
    nodes: Vec<CanonNode<'a>>,
    excluded: Vec<CanonLabel<'a>>,
}

/// The canonical serialisation of the effective tree (compact JSON, sorted by id).
pub fn canonical_tree(eff: &EffectiveTree, phrases: &PhraseTable) -> String {
    let n = phrases.len() as PhraseId;
    let mut nodes: Vec<CanonNode> = (0..n)
        .filter(|&p| eff.tree.is_placed(p))
        .map(|p| {
            let mut aliases: Vec<CanonLabel> = eff.aliases[p as usize]
                .iter()
                .map(|&a| CanonLabel {
                    id: phrases.id(a),
                    label: eff.label(a),
                })
                .collect();
            aliases.sort_by(|a, b| a.id.cmp(b.id));
            CanonNode {
                id: phrases.id(p),
                label: eff.label(p),
                parent: eff.tree.parent(p).map(|x| phrases.id(x)),
                aliases,
            }
        })
        .collect();
    nodes.sort_by(|a, b| a.id.cmp(b.id));
    let mut excluded: Vec<CanonLabel> = (0..n)
        .filter(|&p| eff.excluded[p as usize])
        .map(|p| CanonLabel {
            id: phrases.id(p),
            label: eff.label(p),
        })
        .collect();
    excluded.sort_by(|a, b| a.id.cmp(b.id));
    let c = Canon {
        format: "treewright-canonical-tree/1",
        root: phrases.id(eff.tree.root()),
        nodes,
        excluded,
    };
    // plain structs, strings and vectors: serialising to a String cannot fail
    serde_json::to_string(&c).unwrap_or_default()
}

/// SHA-256 (lower-case hex) of the canonical effective tree.
pub fn tree_hash(eff: &EffectiveTree, phrases: &PhraseTable) -> String {
    sha256_hex(canonical_tree(eff, phrases).as_bytes())
}

/// SHA-256 of `bytes` as 64 lower-case hex digits.
pub fn sha256_hex(bytes: &[u8]) -> String {
    Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

/// The latest sign-off edit that is in force (not cancelled by a revert) and its index.
pub fn latest_signoff(edits: &[EditRecord]) -> Option<(usize, &EditRecord)> {
    let reverted = super::history::reverted_by(edits);
    edits
        .iter()
        .enumerate()
        .rev()
        .find(|(i, r)| matches!(r.edit, Edit::Signoff { .. }) && reverted[*i].is_none())
}

/// Build the sign-off edit for the effective tree as it stands.
pub fn signoff_edit(
    eff: &EffectiveTree,
    phrases: &PhraseTable,
    reviewer: &str,
    open_findings: usize,
) -> Edit {
    Edit::Signoff {
        reviewer: reviewer.to_string(),
        tree_hash: tree_hash(eff, phrases),
        open_findings,
        unreviewed: super::overrides::unreviewed_count(eff),
        signature: None,
    }
}

/// The outcome of checking the latest sign-off against the current effective tree.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
#[serde(tag = "state", rename_all = "kebab-case")]
pub enum Verification {
    /// No sign-off in the override layer.
    NoSignoff,
    /// The latest sign-off's hash equals the current tree's hash.
    Valid {
        /// Index of the sign-off edit.
        index: usize,
        /// Who signed off, and when (RFC 3339).
        by: String,
        /// The hash.
        hash: String,
    },
    /// The tree changed since the latest sign-off.
    Changed {
        /// Who signed off, and when (RFC 3339).
        by: String,
        /// Hash recorded by the sign-off.
        signed: String,
        /// Hash of the current effective tree.
        current: String,
        /// `index: op` of each edit made after the sign-off.
        edits_since: Vec<String>,
        /// The signed tree against the current one: every change with its causes (see
        /// [`SinceSignoff`]; its `index` is the sign-off's).
        #[serde(flatten)]
        since: SinceSignoff,
    },
}

impl Verification {
    /// True only for [`Verification::Valid`].
    pub fn is_valid(&self) -> bool {
        matches!(self, Verification::Valid { .. })
    }
}

/// Check the latest sign-off of `edits` against the current effective tree, without a
/// stored snapshot (the signed tree is rebuilt from the edits when they give its hash).
pub fn verify(base: &Tree, phrases: &PhraseTable, edits: &[EditRecord]) -> Verification {
    let note = "the base tree or the phrase table changed since the sign-off";
    verify_with(base, phrases, edits, |_| Ok(None), note).unwrap_or(Verification::NoSignoff)
}

/// Check the latest sign-off of `edits` against the current effective tree. `snapshot`
/// finds the stored signed tree by hash (`Ok(None)` when there is none; a tampered one is an
/// error); `base_note` says what happened to the base tree, the cause given to changes the
/// edits since the sign-off do not explain.
pub fn verify_with(
    base: &Tree,
    phrases: &PhraseTable,
    edits: &[EditRecord],
    snapshot: impl Fn(&str) -> Result<Option<SignedTree>, SnapshotError>,
    base_note: &str,
) -> Result<Verification, SnapshotError> {
    let Some((index, r)) = latest_signoff(edits) else {
        return Ok(Verification::NoSignoff);
    };
    let (signed, by) = match &r.edit {
        Edit::Signoff {
            tree_hash,
            reviewer,
            ..
        } => (tree_hash.clone(), format!("{reviewer} at {}", r.time)),
        _ => (String::new(), String::new()),
    };
    let (now, _) = apply(base, phrases, edits);
    let current = tree_hash(&now, phrases);
    if current == signed {
        return Ok(Verification::Valid {
            index,
            by,
            hash: current,
        });
    }
    let stored = snapshot(&signed)?;
    let since = since_signoff(base, phrases, edits, index, stored, base_note)?;
    let edits_since = edits[index + 1..]
        .iter()
        .enumerate()
        .map(|(k, e)| format!("{}: {}", index + 1 + k, describe_edit(&e.edit)))
        .collect();
    Ok(Verification::Changed {
        by,
        signed,
        current,
        edits_since,
        since,
    })
}

/// A one-line human description of an edit.
pub fn describe_edit(e: &Edit) -> String {
    match e {
        Edit::Reparent { node, parent } => format!("reparent {node} under {parent}"),
        Edit::Pin { node, parent } => format!("pin {node} under {parent}"),
        Edit::Unpin { node } => format!("unpin {node}"),
        Edit::Merge { sources, into } => format!("merge {} into {into}", sources.join(", ")),
        Edit::Rename {
            node,
            label,
            language: None,
        } => format!("rename {node} to \"{label}\""),
        Edit::Rename {
            node,
            label,
            language: Some(t),
        } => format!("rename {node} to \"{label}\"@{t}"),
        Edit::Exclude { node } => format!("exclude {node}"),
        Edit::Include { node } => format!("include {node}"),
        Edit::Review { node, status, .. } => format!("review {node}: {}", status.as_str()),
        Edit::Signoff { reviewer, .. } => format!("signoff by {reviewer}"),
        Edit::Revert { edit, .. } => format!("revert #{edit}"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::edit::ReviewStatus;

    fn table(ids: &[&str]) -> PhraseTable {
        PhraseTable::from_ids(ids).unwrap()
    }

    fn rec(e: Edit) -> EditRecord {
        EditRecord {
            edit: e,
            author: "ines".into(),
            time: "2026-12-02T10:00:00Z".into(),
            note: None,
        }
    }

    #[test]
    fn sha256_matches_fips_example() {
        // FIPS 180-2, Appendix B.1: SHA-256("abc")
        assert_eq!(
            sha256_hex(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }

    #[test]
    fn hash_ignores_row_order_and_reviews_but_not_content() {
        let pairs = [("fern", "plants"), ("moss", "plants")];
        let mk = |ids: &[&str]| {
            let t = table(ids);
            let m = pairs
                .iter()
                .map(|(a, b)| (a.to_string(), b.to_string()))
                .collect();
            let tr = Tree::from_id_map(&t, "plants", &m).unwrap();
            (t, tr)
        };
        let (t1, b1) = mk(&["plants", "fern", "moss"]);
        let (t2, b2) = mk(&["moss", "fern", "plants"]);
        let h1 = tree_hash(&apply(&b1, &t1, &[]).0, &t1);
        assert_eq!(h1, tree_hash(&apply(&b2, &t2, &[]).0, &t2));
        assert_eq!(h1.len(), 64);
        let review = [rec(Edit::Review {
            node: "fern".into(),
            status: ReviewStatus::Approved,
            comment: String::new(),
        })];
        assert_eq!(h1, tree_hash(&apply(&b1, &t1, &review).0, &t1));
        for e in [
            Edit::Rename {
                node: "fern".into(),
                label: "ferns".into(),
                language: None,
            },
            Edit::Exclude {
                node: "fern".into(),
            },
            Edit::Merge {
                sources: vec!["fern".into()],
                into: "moss".into(),
            },
            Edit::Reparent {
                node: "fern".into(),
                parent: "moss".into(),
            },
        ] {
            let (eff, p) = apply(&b1, &t1, &[rec(e.clone())]);
            assert!(p.is_empty());
            assert_ne!(h1, tree_hash(&eff, &t1), "{e:?}");
        }
    }

    #[test]
    fn verify_reports_changes_since_signoff() {
        let t = table(&["plants", "fern", "moss"]);
        let m = [("fern", "plants"), ("moss", "plants")]
            .iter()
            .map(|(a, b)| (a.to_string(), b.to_string()))
            .collect();
        let base = Tree::from_id_map(&t, "plants", &m).unwrap();
        let mut edits = vec![rec(Edit::Reparent {
            node: "moss".into(),
            parent: "fern".into(),
        })];
        assert_eq!(verify(&base, &t, &edits), Verification::NoSignoff);
        let (eff, _) = apply(&base, &t, &edits);
        edits.push(rec(signoff_edit(&eff, &t, "rowan", 0)));
        assert!(verify(&base, &t, &edits).is_valid());
        assert_eq!(latest_signoff(&edits).map(|(i, _)| i), Some(1));
        edits.push(rec(Edit::Exclude {
            node: "fern".into(),
        }));
        match verify(&base, &t, &edits) {
            Verification::Changed {
                edits_since, since, ..
            } => {
                assert_eq!(since.index, 1);
                assert_eq!(edits_since, vec!["2: exclude fern"]);
                // fern excluded; moss, its child, moves up to the root
                assert_eq!(since.changes.len(), 2, "{:?}", since.changes);
                assert!(since.complete);
                assert!(
                    since
                        .changes
                        .iter()
                        .all(|c| c.causes == ["edit #2 (exclude fern)"])
                );
            }
            v => panic!("{v:?}"),
        }
    }
}
