//! What differs between two effective trees (base vs effective, then vs now), and what a
//! re-trained base tree would change for the override layer.

use std::collections::{BTreeMap, BTreeSet};
use std::fmt;

use serde::Serialize;

use super::edit::{Edit, EditRecord};
use super::effective::{ApplyProblem, EffectiveTree};
use super::gaussian::PhraseId;
use super::overrides::apply;
use super::phrase::{PhraseRecord, PhraseTable};
use super::tree::{Tree, TreeFile};

/// One difference for one phrase between an old and a new effective tree. Ids are the
/// stable phrase ids.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum TreeChange {
    /// The node has another parent.
    Moved {
        /// Node id.
        node: String,
        /// Old parent.
        from: String,
        /// New parent.
        to: String,
    },
    /// The phrase became an alias of `into`.
    Merged {
        /// Merged-away phrase.
        node: String,
        /// The node it is now an alias of.
        into: String,
    },
    /// The phrase was left out of the deployed tree.
    Excluded {
        /// Phrase id.
        node: String,
    },
    /// An excluded phrase is back.
    Included {
        /// Phrase id.
        node: String,
    },
    /// A phrase that was not a node (unplaced or an alias) is now a node.
    Placed {
        /// Node id.
        node: String,
        /// Its parent (empty for the root).
        parent: String,
    },
    /// A node is no longer in the tree and is neither merged nor excluded.
    Unplaced {
        /// Phrase id.
        node: String,
    },
    /// The label changed.
    Renamed {
        /// Phrase id.
        node: String,
        /// Old label.
        from: String,
        /// New label.
        to: String,
    },
}

impl fmt::Display for TreeChange {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            TreeChange::Moved { node, from, to } => write!(f, "moved     {node}: {from} → {to}"),
            TreeChange::Merged { node, into } => write!(f, "merged    {node} into {into}"),
            TreeChange::Excluded { node } => write!(f, "excluded  {node}"),
            TreeChange::Included { node } => write!(f, "included  {node}"),
            TreeChange::Placed { node, parent } => write!(f, "placed    {node} under {parent}"),
            TreeChange::Unplaced { node } => write!(f, "unplaced  {node}"),
            TreeChange::Renamed { node, from, to } => {
                write!(f, "renamed   {node}: \"{from}\" → \"{to}\"")
            }
        }
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Place {
    Node(Option<PhraseId>),
    Alias(PhraseId),
    Excluded,
    Unplaced,
}

fn place(eff: &EffectiveTree, p: PhraseId) -> Place {
    let i = p as usize;
    if let Some(t) = eff.alias_of[i] {
        Place::Alias(eff.resolve(t))
    } else if eff.excluded[i] {
        Place::Excluded
    } else if eff.tree.is_placed(p) {
        Place::Node(eff.tree.parent(p))
    } else {
        Place::Unplaced
    }
}

/// Differences from `old` to `new` (both over `phrases`), ordered by phrase id.
pub fn compare(old: &EffectiveTree, new: &EffectiveTree, phrases: &PhraseTable) -> Vec<TreeChange> {
    let id = |p: Option<PhraseId>| p.map(|x| phrases.id(x).to_string()).unwrap_or_default();
    let mut order: Vec<PhraseId> = (0..phrases.len() as PhraseId).collect();
    order.sort_by(|&a, &b| phrases.id(a).cmp(phrases.id(b)));
    let mut out = Vec::new();
    for p in order {
        let node = phrases.id(p).to_string();
        let (a, b) = (place(old, p), place(new, p));
        if a != b {
            match (a, b) {
                (_, Place::Alias(t)) => out.push(TreeChange::Merged {
                    node: node.clone(),
                    into: id(Some(t)),
                }),
                (_, Place::Excluded) => out.push(TreeChange::Excluded { node: node.clone() }),
                (Place::Excluded, _) => out.push(TreeChange::Included { node: node.clone() }),
                (Place::Node(from), Place::Node(to)) => out.push(TreeChange::Moved {
                    node: node.clone(),
                    from: id(from),
                    to: id(to),
                }),
                (_, Place::Node(to)) => out.push(TreeChange::Placed {
                    node: node.clone(),
                    parent: id(to),
                }),
                (_, Place::Unplaced) => out.push(TreeChange::Unplaced { node: node.clone() }),
            }
        }
        let (la, lb) = (old.label(p), new.label(p));
        if la != lb {
            out.push(TreeChange::Renamed {
                node,
                from: la.to_string(),
                to: lb.to_string(),
            });
        }
    }
    out
}

/// What the override layer changed: the base tree against the effective tree.
pub fn base_vs_effective(
    base: &Tree,
    phrases: &PhraseTable,
    eff: &EffectiveTree,
) -> Vec<TreeChange> {
    compare(&EffectiveTree::from_base(base, phrases), eff, phrases)
}

/// A pin that keeps a node under its pinned parent although the other tree puts it
/// elsewhere.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct PinHold {
    /// The pinned node.
    pub node: String,
    /// Where the pin keeps it.
    pub pinned_under: String,
    /// Where the other tree puts it (empty when the other tree leaves it out).
    pub tree_parent: String,
}

/// What a re-trained tree changes for the current project.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct RetrainDiff {
    /// Nodes of the other tree that are not nodes of the current base tree.
    pub new_phrases: Vec<String>,
    /// Nodes of the current base tree that the other tree no longer has.
    pub vanished_phrases: Vec<String>,
    /// Pins now holding a node against the other tree.
    pub pins_holding: Vec<PinHold>,
    /// Edits that name a phrase the other tree no longer has.
    pub stale_edits: Vec<ApplyProblem>,
    /// Other edits the other tree makes inapplicable (cycle, excluded target, ...).
    pub other_problems: Vec<ApplyProblem>,
}

/// Why the other tree cannot be compared.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum DiffError {
    /// The other tree file is not a valid tree.
    #[error("{file}: tree: {message}")]
    BadTree {
        /// The file.
        file: String,
        /// What is wrong.
        message: String,
    },
}

/// The phrase table of a re-trained tree: every id the tree names, labels taken from the
/// current table where known (the id otherwise), current rows first.
pub fn table_for_tree(current: &PhraseTable, other: &TreeFile) -> PhraseTable {
    let mut ids: BTreeSet<&str> = other.parent.keys().map(String::as_str).collect();
    ids.extend(other.parent.values().map(String::as_str));
    ids.insert(other.root.as_str());
    let mut recs: Vec<PhraseRecord> = current
        .records()
        .into_iter()
        .filter(|r| r.id.as_deref().is_some_and(|i| ids.contains(i)))
        .collect();
    for &i in &ids {
        if current.get(i).is_none() {
            recs.push(PhraseRecord {
                id: Some(i.to_string()),
                label: i.to_string(),
            });
        }
    }
    // ids are unique and non-empty keys of a map, so building cannot fail; an empty id
    // would be refused by the tree loader below
    PhraseTable::from_records(&recs).unwrap_or_default()
}

/// Compare the current base tree with `other` (a re-trained tree file named `file`) and
/// apply the override layer to it.
pub fn diff_retrained(
    base: &Tree,
    phrases: &PhraseTable,
    edits: &[EditRecord],
    other: &TreeFile,
    file: &str,
) -> Result<RetrainDiff, DiffError> {
    let bad = |message: String| DiffError::BadTree {
        file: file.to_string(),
        message,
    };
    if other.root.is_empty()
        || other
            .parent
            .iter()
            .any(|(c, p)| c.is_empty() || p.is_empty())
    {
        return Err(bad("an id is empty".into()));
    }
    let table = table_for_tree(phrases, other);
    let new_tree =
        Tree::from_id_map(&table, &other.root, &other.parent).map_err(|e| bad(e.to_string()))?;
    let old_nodes: BTreeSet<&str> = (0..phrases.len() as PhraseId)
        .filter(|&p| base.is_placed(p))
        .map(|p| phrases.id(p))
        .collect();
    let new_nodes: BTreeSet<&str> = (0..table.len() as PhraseId)
        .filter(|&p| new_tree.is_placed(p))
        .map(|p| table.id(p))
        .collect();
    let (eff, problems) = apply(&new_tree, &table, edits);
    let mut pins_holding = Vec::new();
    let mut pinned_ids: BTreeMap<&str, PhraseId> = BTreeMap::new();
    for r in edits {
        if let Edit::Pin { node, .. } = &r.edit
            && let Some(p) = table.get(node)
        {
            pinned_ids.insert(node, p);
        }
    }
    for (&node, &p) in &pinned_ids {
        let i = p as usize;
        if eff.pinned[i] && eff.tree.parent(p) != new_tree.parent(p) {
            pins_holding.push(PinHold {
                node: node.to_string(),
                pinned_under: eff
                    .tree
                    .parent(p)
                    .map(|x| table.id(x).to_string())
                    .unwrap_or_default(),
                tree_parent: new_tree
                    .parent(p)
                    .map(|x| table.id(x).to_string())
                    .unwrap_or_default(),
            });
        }
    }
    let (stale_edits, other_problems) = problems.into_iter().partition(ApplyProblem::is_stale);
    Ok(RetrainDiff {
        new_phrases: new_nodes
            .difference(&old_nodes)
            .map(|s| s.to_string())
            .collect(),
        vanished_phrases: old_nodes
            .difference(&new_nodes)
            .map(|s| s.to_string())
            .collect(),
        pins_holding,
        stale_edits,
        other_problems,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::edit::ReviewStatus;

    fn table(ids: &[&str]) -> PhraseTable {
        PhraseTable::from_ids(ids).unwrap()
    }

    fn tf(root: &str, pairs: &[(&str, &str)]) -> TreeFile {
        TreeFile {
            root: root.into(),
            parent: pairs
                .iter()
                .map(|(a, b)| (a.to_string(), b.to_string()))
                .collect(),
        }
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
    fn base_vs_effective_lists_each_kind() {
        let t = table(&["plants", "succulent", "cactus", "fern", "hosta", "moss"]);
        let f = tf(
            "plants",
            &[
                ("succulent", "plants"),
                ("cactus", "succulent"),
                ("fern", "plants"),
                ("hosta", "fern"),
            ],
        );
        let base = Tree::from_id_map(&t, &f.root, &f.parent).unwrap();
        let edits = [
            rec(Edit::Reparent {
                node: "hosta".into(),
                parent: "plants".into(),
            }),
            rec(Edit::Merge {
                sources: vec!["cactus".into()],
                into: "succulent".into(),
            }),
            rec(Edit::Rename {
                node: "fern".into(),
                label: "ferns".into(),
                language: None,
            }),
            rec(Edit::Exclude {
                node: "fern".into(),
            }),
            rec(Edit::Reparent {
                node: "moss".into(),
                parent: "plants".into(),
            }),
            rec(Edit::Review {
                node: "moss".into(),
                status: ReviewStatus::Approved,
                comment: String::new(),
            }),
        ];
        let (eff, probs) = apply(&base, &t, &edits);
        assert!(probs.is_empty(), "{probs:?}");
        let text: Vec<String> = base_vs_effective(&base, &t, &eff)
            .iter()
            .map(|c| c.to_string())
            .collect();
        assert_eq!(
            text,
            vec![
                "merged    cactus into succulent",
                "excluded  fern",
                "renamed   fern: \"fern\" → \"ferns\"",
                "moved     hosta: fern → plants",
                "placed    moss under plants",
            ]
        );
    }

    #[test]
    fn retrained_tree_pins_hold_and_stale_edits_are_reported() {
        let t = table(&["plants", "succulent", "cactus", "fern", "hosta"]);
        let f = tf(
            "plants",
            &[
                ("succulent", "plants"),
                ("cactus", "succulent"),
                ("fern", "plants"),
                ("hosta", "fern"),
            ],
        );
        let base = Tree::from_id_map(&t, &f.root, &f.parent).unwrap();
        let edits = [
            rec(Edit::Pin {
                node: "hosta".into(),
                parent: "fern".into(),
            }),
            rec(Edit::Rename {
                node: "cactus".into(),
                label: "cacti".into(),
                language: None,
            }),
        ];
        // re-trained: cactus vanished, hosta now under succulent, a new phrase "aloe"
        let other = tf(
            "plants",
            &[
                ("succulent", "plants"),
                ("aloe", "succulent"),
                ("fern", "plants"),
                ("hosta", "succulent"),
            ],
        );
        let d = diff_retrained(&base, &t, &edits, &other, "new-tree.json").unwrap();
        assert_eq!(d.new_phrases, vec!["aloe"]);
        assert_eq!(d.vanished_phrases, vec!["cactus"]);
        assert_eq!(
            d.pins_holding,
            vec![PinHold {
                node: "hosta".into(),
                pinned_under: "fern".into(),
                tree_parent: "succulent".into()
            }]
        );
        assert_eq!(d.stale_edits.len(), 1);
        assert_eq!(d.stale_edits[0].index, 1);
        assert!(d.other_problems.is_empty());
        let cyc = tf("plants", &[("fern", "hosta"), ("hosta", "fern")]);
        assert!(diff_retrained(&base, &t, &edits, &cyc, "c.json").is_err());
    }
}
