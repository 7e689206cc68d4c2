//! Impact preview: what a candidate edit would do, before it is made.
//!
//! For one edit on the effective tree as it stands, [`preview`] reports
//! - the **findings resolved and created**: open findings (rule, node, partner) of the
//!   audit before and after the edit, the "after" audit being the incremental re-audit
//!   ([`Auditor::update`]) of a copy of the current auditor on the effective tree with the
//!   edit applied;
//! - the **top broader offer that changes** (before → after) for every phrase whose place
//!   changes: the phrases whose parent or membership changes and every phrase in their
//!   subtrees. The top broader offer is the one the bulk check ranks first
//!   ([`suggest::top_broader`], bounded candidate pool); at most [`OFFER_LIMIT`] phrases are
//!   checked (in pre-order), the rest are counted;
//! - whether the **latest sign-off becomes outdated**: it matches the tree now and the
//!   edit changes the tree's hash (a review decision never does).
//!
//! Nothing is recorded or written; the current auditor is left untouched. The cost is one
//! `apply` of the override layer, one copy of the auditor and one incremental re-audit
//! (`cargo bench --bench impact`).

use std::collections::HashMap;

use rayon::prelude::*;
use serde::Serialize;

use super::audit::{AuditReport, Auditor, Severity};
use super::edit::{Edit, EditRecord};
use super::effective::EffectiveTree;
use super::gaussian::{Gaussians, PhraseId};
use super::overrides;
use super::phrase::PhraseTable;
use super::refusal::EditRefusal;
use super::signoff::describe_edit;
use super::suggest::{self, SuggestCtx, SuggestParams};
use super::tree::Tree;
use super::workspace::{SignState, Workspace, WorkspaceError};

/// At most this many moved phrases get their top broader offer compared.
pub const OFFER_LIMIT: usize = 200;

/// A finding the edit resolves or creates.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord, Serialize)]
pub struct FindingChange {
    /// Rule id.
    pub rule: &'static str,
    /// Node id.
    pub node: String,
    /// Node label (after the edit for created findings, before for resolved ones).
    pub label: String,
    /// Partner id (better parent, duplicate), when there is one.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub other: Option<String>,
    /// Its severity.
    pub severity: Severity,
}

/// A phrase whose top broader offer changes.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct OfferChange {
    /// Phrase id.
    pub id: String,
    /// Its label.
    pub label: String,
    /// Top broader offer before (id), if any.
    pub before: Option<String>,
    /// Its label.
    pub before_label: Option<String>,
    /// Top broader offer after (id), if any.
    pub after: Option<String>,
    /// Its label.
    pub after_label: Option<String>,
}

/// What an edit would do.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Impact {
    /// The edit in words.
    pub edit: String,
    /// Open findings that would be gone.
    pub resolved: Vec<FindingChange>,
    /// Open findings that would appear.
    pub created: Vec<FindingChange>,
    /// Phrases whose top broader offer changes.
    pub offers: Vec<OfferChange>,
    /// Phrases whose place changes (their offers were compared up to [`OFFER_LIMIT`]).
    pub moved: usize,
    /// Moved phrases whose offers were not compared (beyond [`OFFER_LIMIT`]).
    pub offers_not_checked: usize,
    /// The latest sign-off matches the tree now and would not afterwards.
    pub signoff_outdated: bool,
    /// Open findings before and after.
    pub open_before: usize,
    /// Open findings after the edit.
    pub open_after: usize,
}

impl Impact {
    /// A few plain lines for a tooltip or the terminal.
    pub fn lines(&self) -> Vec<String> {
        let mut out = vec![format!("Preview: {}", self.edit)];
        out.push(format!(
            "findings: {} resolved, {} created (open {} -> {})",
            self.resolved.len(),
            self.created.len(),
            self.open_before,
            self.open_after
        ));
        for (sign, list) in [("-", &self.resolved), ("+", &self.created)] {
            for f in list {
                out.push(format!(
                    "  {sign} {} on \"{}\" ({})",
                    f.rule, f.label, f.node
                ));
            }
        }
        let none = || "nothing".to_string();
        if self.moved > 0 {
            out.push(format!(
                "top broader offer changes for {} of {} moved phrase{}{}",
                self.offers.len(),
                self.moved,
                if self.moved == 1 { "" } else { "s" },
                if self.offers_not_checked > 0 {
                    format!(" ({} not checked)", self.offers_not_checked)
                } else {
                    String::new()
                }
            ));
        }
        for o in &self.offers {
            out.push(format!(
                "  \"{}\": \"{}\" -> \"{}\"",
                o.label,
                o.before_label.clone().unwrap_or_else(none),
                o.after_label.clone().unwrap_or_else(none)
            ));
        }
        out.push(if self.signoff_outdated {
            "the latest sign-off would become outdated".into()
        } else {
            "no sign-off becomes outdated".into()
        });
        out
    }
}

/// Everything a preview reads.
pub struct PreviewInput<'a> {
    /// Gaussians.
    pub g: &'a Gaussians,
    /// Phrase table.
    pub phrases: &'a PhraseTable,
    /// Base tree.
    pub base: &'a Tree,
    /// The override layer's edits.
    pub edits: &'a [EditRecord],
    /// The effective tree of `base` + `edits`.
    pub eff: &'a EffectiveTree,
    /// An auditor up to date with `eff`.
    pub auditor: &'a Auditor,
    /// Hash of the latest sign-off when it matches `eff`.
    pub signed_hash: Option<&'a str>,
    /// Suggestion parameters (the top broader offer).
    pub params: &'a SuggestParams,
}

type Key = (&'static str, PhraseId, Option<PhraseId>);

fn open_keys(r: &AuditReport) -> HashMap<Key, Severity> {
    let mut m = HashMap::with_capacity(r.findings.len());
    for f in r.findings.iter().filter(|f| !f.accepted) {
        m.insert((f.rule, f.node, f.other), f.severity);
    }
    m
}

fn changes(
    from: &HashMap<Key, Severity>,
    to: &HashMap<Key, Severity>,
    phrases: &PhraseTable,
    eff: &EffectiveTree,
) -> Vec<FindingChange> {
    from.iter()
        .filter(|(k, _)| !to.contains_key(*k))
        .map(|(&(rule, node, other), &severity)| FindingChange {
            rule,
            node: phrases.id(node).to_string(),
            label: eff.label(node).to_string(),
            other: other.map(|o| phrases.id(o).to_string()),
            severity,
        })
        .collect()
}

/// The phrases whose place changes, in pre-order of the tree after (then the ones that left).
fn moved(before: &EffectiveTree, after: &EffectiveTree) -> Vec<PhraseId> {
    let n = after.labels.len();
    let (tb, ta) = (&before.tree, &after.tree);
    let changed = |p: PhraseId| tb.is_placed(p) != ta.is_placed(p) || tb.parent(p) != ta.parent(p);
    let mut out = Vec::new();
    let mut inside = vec![false; n];
    for p in ta.preorder() {
        let i = p as usize;
        inside[i] = changed(p) || ta.parent(p).is_some_and(|q| inside[q as usize]);
        if inside[i] {
            out.push(p);
        }
    }
    out.extend((0..n as PhraseId).filter(|&p| !ta.is_placed(p) && tb.is_placed(p)));
    out
}

/// Whether two effective trees of one phrase table have the same canonical form
/// ([`crate::model::signoff::canonical_tree`]: root; per node its label, parent and aliases
/// with their labels; the excluded phrases with their labels), so the same sign-off hash.
pub fn same_canonical(a: &EffectiveTree, b: &EffectiveTree) -> bool {
    let n = a.labels.len();
    if b.labels.len() != n || a.tree.root() != b.tree.root() {
        return false;
    }
    (0..n).all(|i| {
        let p = i as PhraseId;
        let placed = a.tree.is_placed(p);
        if placed != b.tree.is_placed(p) || a.excluded[i] != b.excluded[i] {
            return false;
        }
        if placed {
            a.tree.parent(p) == b.tree.parent(p)
                && a.labels[i] == b.labels[i]
                && a.aliases[i] == b.aliases[i]
                && a.aliases[i]
                    .iter()
                    .all(|&x| a.labels[x as usize] == b.labels[x as usize])
        } else {
            !a.excluded[i] || a.labels[i] == b.labels[i]
        }
    })
}

/// Preview `edit` (see the module documentation). A refused edit is `Err` with its reason.
/// Also returns the auditor after the edit (its report is the audit of the edited tree).
pub fn preview(input: &PreviewInput, edit: &Edit) -> Result<(Impact, Auditor), EditRefusal> {
    let edit = edit.clone().normalized();
    overrides::check_edit(input.eff, input.phrases, &edit)?;
    let mut records = input.edits.to_vec();
    records.push(overrides::record(edit.clone(), "preview", None));
    let (after, problems) = overrides::apply(input.base, input.phrases, &records);
    let mut auditor = input.auditor.clone();
    let report = auditor.update(input.g, input.phrases, &after, &problems);
    let (kb, ka) = (open_keys(input.auditor.report()), open_keys(report));
    let mut resolved = changes(&kb, &ka, input.phrases, input.eff);
    let mut created = changes(&ka, &kb, input.phrases, &after);
    resolved.sort();
    created.sort();
    let moved = moved(input.eff, &after);
    let checked = &moved[..moved.len().min(OFFER_LIMIT)];
    let (cb, ca) = (
        SuggestCtx::new(input.g, input.phrases, input.eff, input.params),
        SuggestCtx::new(input.g, input.phrases, &after, input.params),
    );
    let offers: Vec<OfferChange> = checked
        .par_iter()
        .filter_map(|&p| {
            let top = |ctx: &SuggestCtx, placed: bool| {
                if placed && !ctx.eff.excluded[p as usize] {
                    suggest::top_broader(ctx, p).map(|c| (c.id, c.label))
                } else {
                    None
                }
            };
            let b = top(&cb, input.eff.tree.is_placed(p));
            let a = top(&ca, after.tree.is_placed(p));
            (b.as_ref().map(|x| &x.0) != a.as_ref().map(|x| &x.0)).then(|| {
                let (before, before_label) = b.unzip();
                let (after_id, after_label) = a.unzip();
                OfferChange {
                    id: input.phrases.id(p).to_string(),
                    label: after.label(p).to_string(),
                    before,
                    before_label,
                    after: after_id,
                    after_label,
                }
            })
        })
        .collect();
    // the hash changes exactly when the canonical content does (compared in O(n) instead
    // of serialising and hashing the whole tree)
    let signoff_outdated = input.signed_hash.is_some() && !same_canonical(input.eff, &after);
    let impact = Impact {
        edit: describe_edit(&edit),
        open_before: kb.len(),
        open_after: ka.len(),
        resolved,
        created,
        offers,
        moved: moved.len(),
        offers_not_checked: moved.len() - checked.len(),
        signoff_outdated,
    };
    Ok((impact, auditor))
}

impl Workspace {
    /// Preview `edit` on the effective tree as it stands (see [`crate::model::impact`]).
    /// Uses the workspace's auditor when it has one, else audits first. Writes nothing.
    pub fn preview(&self, edit: &Edit) -> Result<Impact, WorkspaceError> {
        let eff = self.effective()?;
        let fresh;
        let auditor = match self.auditor() {
            Some(a) => a,
            None => {
                let p = &self.project;
                fresh = Auditor::new(
                    &p.gaussians,
                    &p.phrases,
                    eff,
                    &self.problems,
                    self.audit_config()?,
                );
                &fresh
            }
        };
        let signed_hash = match self.sign_state() {
            SignState::Signed { .. } => self.tree_hash.as_deref(),
            _ => None,
        };
        let params = SuggestParams::default();
        let input = PreviewInput {
            g: &self.project.gaussians,
            phrases: &self.project.phrases,
            base: self.base()?,
            edits: &self.layer.edits,
            eff,
            auditor,
            signed_hash,
            params: &params,
        };
        Ok(preview(&input, edit)?.0)
    }
}

#[cfg(test)]
mod tests;
