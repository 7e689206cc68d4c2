//! The effective tree: the base (machine-built) tree with the override layer applied.
//!
//! Everything downstream of applying the override layer (GUI, audit, exports, suggestions)
//! reads only this type, so respecting human decisions holds by construction.

use serde::Serialize;

use super::edit::ReviewStatus;
use super::gaussian::PhraseId;
use super::lang::PhraseLanguages;
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
    /// The default language (that of [`EffectiveTree::labels`]) and the effective labels in
    /// the other languages (renames in a language applied).
    pub languages: PhraseLanguages,
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
            languages: languages_of(phrases),
        }
    }

    /// Effective label of a phrase in `language`, falling back to the default language's
    /// label when the phrase has none in it.
    pub fn label_in(&self, p: PhraseId, language: &str) -> &str {
        self.label_in_opt(p, language)
            .unwrap_or_else(|| self.label(p))
    }

    /// Effective label of a phrase in `language`, `None` when it has none in that language.
    pub fn label_in_opt(&self, p: PhraseId, language: &str) -> Option<&str> {
        if language == self.languages.default {
            return Some(self.label(p));
        }
        self.languages
            .other
            .get(&p)?
            .get(language)
            .map(String::as_str)
    }

    /// Every effective label of a phrase with its language: the default language first,
    /// then the others by tag.
    pub fn labels_of(&self, p: PhraseId) -> Vec<(&str, &str)> {
        let mut out = vec![(self.languages.default.as_str(), self.label(p))];
        if let Some(m) = self.languages.other.get(&p) {
            out.extend(
                m.iter()
                    .filter(|(l, _)| **l != self.languages.default)
                    .map(|(l, s)| (l.as_str(), s.as_str())),
            );
        }
        out
    }

    /// Whether any effective label of `p`, in any language, contains `needle_folded` (a
    /// query already passed through [`crate::model::lang::fold`]).
    pub fn any_label_contains(&self, p: PhraseId, needle_folded: &str) -> bool {
        self.labels_of(p)
            .iter()
            .any(|(_, l)| crate::model::lang::fold(l, None).contains(needle_folded))
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

/// The languages of a phrase table as the effective tree starts them: the project's, or the
/// fallback language with no other labels.
pub fn languages_of(phrases: &PhraseTable) -> PhraseLanguages {
    match phrases.languages() {
        Some(l) => l.clone(),
        None => PhraseLanguages {
            default: phrases.default_language().to_string(),
            other: Default::default(),
        },
    }
}
