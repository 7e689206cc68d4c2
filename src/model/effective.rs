//! The effective tree: the base (machine-built) tree with the override layer applied.
//!
//! Everything downstream of applying the override layer (GUI, audit, exports, suggestions)
//! reads only this type, so respecting human decisions holds by construction.

use serde::Serialize;

use super::edit::ReviewStatus;
use super::gaussian::PhraseId;
use super::phrase::PhraseTable;
use super::tree::Tree;

/// The base tree with every applicable edit applied.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct EffectiveTree {
    /// The deployed tree. Excluded phrases and merged-away aliases are not placed in it.
    pub tree: Tree,
    /// Effective label of every phrase (renames applied).
    pub labels: Vec<String>,
    /// For a merged-away phrase, the node it is an alias of.
    pub alias_of: Vec<Option<PhraseId>>,
    /// For a node, the phrases merged into it (sorted by row).
    pub aliases: Vec<Vec<PhraseId>>,
    /// Phrases left out of the deployed tree by an `exclude` edit.
    pub excluded: Vec<bool>,
    /// Nodes pinned to their parent.
    pub pinned: Vec<bool>,
    /// Review state of every phrase.
    pub review: Vec<ReviewStatus>,
    /// Latest review comment of every phrase (empty when none).
    pub review_comment: Vec<String>,
}

/// Reason prefix of a problem caused by a phrase that is no longer in the phrase table
/// (the edit went stale after re-training).
pub const STALE_PREFIX: &str = "stale:";

/// An edit that could not be applied: reported, never dropped from the file.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct ApplyProblem {
    /// 0-based index of the edit in the override file.
    pub index: usize,
    /// The edit's operation name.
    pub op: String,
    /// Why it was skipped.
    pub reason: String,
}

impl ApplyProblem {
    /// Whether the edit went stale: it names a phrase the phrase table no longer has.
    pub fn is_stale(&self) -> bool {
        self.reason.starts_with(STALE_PREFIX)
    }
}

impl EffectiveTree {
    /// The effective tree of a base tree with no edits.
    pub fn from_base(base: &Tree, phrases: &PhraseTable) -> Self {
        let n = phrases.len();
        EffectiveTree {
            tree: base.clone(),
            labels: phrases.labels().to_vec(),
            alias_of: vec![None; n],
            aliases: vec![Vec::new(); n],
            excluded: vec![false; n],
            pinned: vec![false; n],
            review: vec![ReviewStatus::Unreviewed; n],
            review_comment: vec![String::new(); n],
        }
    }

    /// Effective label of a phrase.
    pub fn label(&self, p: PhraseId) -> &str {
        &self.labels[p as usize]
    }

    /// Follow an alias to the node that represents the phrase (itself when not merged).
    pub fn resolve(&self, p: PhraseId) -> PhraseId {
        let mut cur = p;
        while let Some(t) = self.alias_of[cur as usize] {
            cur = t;
        }
        cur
    }

    /// Phrases neither in the tree, nor merged, nor excluded.
    pub fn unplaced(&self) -> Vec<PhraseId> {
        (0..self.labels.len() as PhraseId)
            .filter(|&p| {
                let i = p as usize;
                !self.tree.is_placed(p) && self.alias_of[i].is_none() && !self.excluded[i]
            })
            .collect()
    }
}
