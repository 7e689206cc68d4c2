//! The audit: ranked findings with numbers and suggested fixes, over the effective tree.
//!
//! # Layout
//! - `mod.rs`: the report types and the assembler, a loop over [`Rule::ALL`];
//! - `config.rs`: [`AuditConfig`] (converts to the statistics' own
//!   [`StatsConfig`](crate::model::stats::StatsConfig));
//! - `rules/mod.rs`: the [`Rule`] enum (id, default severity, scope, node-locality, config
//!   keys) and the context rules read; `rules/<rule>.rs`: one function per rule, with its tests;
//! - `confidence.rs`: the confidence of the placement findings (robust outlier tests over
//!   the project's own scores, Benjamini–Hochberg) and the severity that follows it;
//! - `evaluate.rs`: the audit measured against a known-errors file (`--known-errors`);
//! - `calibrate.rs`: logistic calibration of the confidence from the reviewer's decisions;
//! - `search.rs`: the candidate search; `auditor.rs`: [`Auditor`] and the incremental
//!   re-audit; `tests.rs`: tests across rules (acceptance figures, incremental = full).
//!
//! # Rules (defaults in [`AuditConfig`])
//! | rule | severity | fires when | suggestion |
//! |---|---|---|---|
//! | `inverted-generality` | by confidence | ln det Σ(child) − ln det Σ(parent) > `inversion_margin` | reparent to the best broader node |
//! | `weak-inclusion` | by confidence | containment in the parent < `containment_min` | reparent to the best broader node, else review |
//! | `better-parent` | by confidence | a node broader than the child by more than `better_parent_broader` nats, not its descendant, has KL(child ‖ it) lower than KL(child ‖ parent) by more than max(`better_parent_margin`, `better_parent_ratio` · KL(child ‖ parent)) and contains the child at least as well as the parent, up to `better_parent_containment_slack` | reparent to it |
//! | `near-duplicate` | warning | BC ≥ `duplicate_bc_min` and abs(Δ ln det Σ) ≤ `duplicate_generality_margin` | merge the smaller subtree into the larger |
//! | `coverage-gap` | warning | a node with ≥ 2 children whose children cover less than t = min(`coverage_min`, `coverage_relative` × the median coverage of such nodes) of it, by more than two standard errors at t (√(t (1 − t) / N)) | review |
//! | `single-child-chain` | info | a chain of ≥ `single_child_chain_min` nodes with exactly one child (reported at its top) | review |
//! | `wide-fanout` | info | more than `max_fanout` children | review |
//! | `unplaced` | warning | a phrase neither in the tree, merged nor excluded | reparent (place) under the best broader node |
//! | `stale-edit` | warning | an override edit that could not be applied (reported on the root) | review the override layer |
//! | `unreviewed` | info | nodes not yet reviewed (one finding on the root, score = their share) | review |
//!
//! The severity of the three placement rules follows the finding's confidence
//! ([`confidence`]): `error` when the false-discovery rate q ≤ 0.01, `warning` when q ≤ 0.05,
//! else `info` ("consider"); on projects too small to test, their defaults (error, warning,
//! error). Severities can be changed per rule (`severity` in the config; a configured
//! severity is used as is). A finding whose node is
//! reviewed as approved stays in the list marked `accepted`; so do the placement findings
//! (`inverted-generality`, `weak-inclusion`, `better-parent`) of a pinned node, which get no
//! reparent edit. Merged-away and excluded phrases are not nodes and are not audited.
//!
//! # Ranking
//! Open findings first, then by severity (error first), then by confidence (highest first),
//! then by the p-value behind it (lowest first), then by how far past the threshold the
//! score is, relative to the threshold: |score − threshold| / max(|threshold|, 0.05);
//! ties by rule, node row and partner row, so the order is deterministic.
//!
//! # Candidate pruning (`better-parent`, `near-duplicate`, `unplaced`)
//! Scoring every node against every other is O(n²). Above `exhaustive_limit` nodes the search
//! uses a *candidate index*: the navigation hierarchy (children lists) of the tree the
//! [`Auditor`] was created on, kept unchanged across later edits, plus a list of the phrases
//! that were not in it (scanned exhaustively). For a node c the search descends that
//! hierarchy from the root as a beam of width `search_beam`: at each level it looks at the
//! children of the beam, scores the ones broader than c by KL(c ‖ x) exactly and keeps the
//! `search_beam` lowest; narrower nodes are not descended into (their subtrees are narrower
//! still). Every node looked at with a generality within `duplicate_generality_margin` of c
//! is a duplicate candidate: first the cheap lower bound D_B ≥ ⅛ Σₖ Δₖ² / σ̄ₖ² (the
//! covariance term of D_B is ≥ 0), then the exact coefficient. The best-parent answer is the
//! scored broader node with the lowest KL that is placed, not c's descendant and not its
//! current parent. For full covariance the beam is steered by the KL of the diagonal parts
//! of Σ (O(d) instead of O(d³)) and the 8 lowest candidates are rescored exactly. Two
//! additions look further where a finding depends on it: the children of c's current parent
//! (c's siblings, in the index) are always looked at, beam or not (a copy sits beside its
//! original; a node one level too high has its true parent among its siblings); and a node
//! whose best candidate clears the `better-parent` gain is searched again with a beam
//! `SUSPECT_BEAM_FACTOR` (4) times wider, keeping the lower answer, because the finding
//! names that candidate as the new parent. A test
//! checks on a mid-size tree that this finds the same top suggestion
//! as the exhaustive search for ≥ 99 % of the nodes where either search makes one.
//!
//! # Incremental re-audit
//! [`Auditor::update`] compares the new effective tree with the one it saw last and
//! recomputes the parent figures of the nodes whose parent or membership changed, the child
//! figures (coverage) of their old and new parents, and the candidate search of the changed
//! nodes, their old and new ancestors (whose set of descendants changed) and of every node
//! whose cached answer is no longer valid (its best candidate left the tree, became its
//! parent or its descendant). A phrase that joins the tree (an include, a placed phrase) is
//! offered to the searches of its new siblings; other nodes see it at the next full audit.
//! Depth, subtree sizes, histograms and the finding list are rebuilt in O(n): the findings
//! of [`Rule::node_local`] rules are rerun only for the nodes whose figures, search, review,
//! pin or labels (or their partner's label) changed and kept for the others; so are the
//! findings of the placement rules ([`Rule::node_local_but_confidence`]), whose confidence,
//! severity and evidence are stamped again on every update from the incremental confidence
//! (`confidence_inc.rs`: sorted scores updated by the changed nodes only, p- and q-values only
//! for the nodes with placement findings, identical to a full computation); every other
//! rule is rerun in full. A different phrase table triggers a full audit.

use serde::{Deserialize, Serialize};

use super::edit::Edit;
use super::effective::{ApplyProblem, EffectiveTree};
use super::gaussian::{Gaussians, PhraseId};
use super::phrase::PhraseTable;
use super::stats::Stats;

mod auditor;
pub mod calibrate;
pub mod confidence;
mod confidence_inc;
mod config;
pub mod evaluate;
mod navindex;
mod rules;
mod search;
pub mod treefit;

pub use auditor::Auditor;
pub use config::{AuditConfig, AuditConfigError};
use rules::Ctx;
pub use rules::{Rule, Scope};
use search::Placement;

/// How serious a finding is. Ordered: `Info < Warning < Error`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Severity {
    /// Worth knowing.
    Info,
    /// Should be looked at before a release.
    Warning,
    /// Wrong as it stands.
    Error,
}

impl Severity {
    /// `info`, `warning` or `error`.
    pub fn as_str(self) -> &'static str {
        match self {
            Severity::Info => "info",
            Severity::Warning => "warning",
            Severity::Error => "error",
        }
    }

    /// Parse `info`, `warning` or `error`.
    pub fn parse(s: &str) -> Option<Self> {
        match s {
            "info" => Some(Severity::Info),
            "warning" => Some(Severity::Warning),
            "error" => Some(Severity::Error),
            _ => None,
        }
    }
}

/// Rule id: child broader than its parent.
pub const INVERTED_GENERALITY: &str = Rule::InvertedGenerality.id();
/// Rule id: child mostly outside its parent's region.
pub const WEAK_INCLUSION: &str = Rule::WeakInclusion.id();
/// Rule id: another node contains the child clearly better.
pub const BETTER_PARENT: &str = Rule::BetterParent.id();
/// Rule id: two nodes that are nearly the same.
pub const NEAR_DUPLICATE: &str = Rule::NearDuplicate.id();
/// Rule id: children cover too little of their parent.
pub const COVERAGE_GAP: &str = Rule::CoverageGap.id();
/// Rule id: chain of single children.
pub const SINGLE_CHILD_CHAIN: &str = Rule::SingleChildChain.id();
/// Rule id: too many children.
pub const WIDE_FANOUT: &str = Rule::WideFanout.id();
/// Rule id: phrase not in the tree.
pub const UNPLACED: &str = Rule::Unplaced.id();
/// Rule id: override edit that no longer applies.
pub const STALE_EDIT: &str = Rule::StaleEdit.id();
/// Rule id: nodes not reviewed.
pub const UNREVIEWED: &str = Rule::Unreviewed.id();

/// Every rule id with its default severity, in report order (from [`Rule::ALL`]).
pub const RULES: [(&str, Severity); 10] = {
    let mut out = [("", Severity::Info); 10];
    let mut i = 0;
    while i < Rule::ALL.len() {
        out[i] = (Rule::ALL[i].id(), Rule::ALL[i].default_severity());
        i += 1;
    }
    out
};

/// A suggested fix.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Suggestion {
    /// `reparent`, `merge` or `review`.
    pub action: String,
    /// The id the action points at (new parent, merge target), when there is one.
    pub target: Option<String>,
    /// The edit that carries the fix out, ready for the override layer.
    pub edit: Option<Edit>,
}

/// One finding.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Finding {
    /// Rule id.
    pub rule: &'static str,
    /// Severity.
    pub severity: Severity,
    /// The node it is about.
    pub node: PhraseId,
    /// A second node (duplicate partner, better parent, current parent).
    pub other: Option<PhraseId>,
    /// The measured value.
    pub score: f64,
    /// The threshold it was compared with.
    pub threshold: f64,
    /// How sure the finding is, in [0, 1]: for the placement rules 1 − the
    /// false-discovery rate of the node's outlier test ([`confidence`]), for the other rules
    /// (and projects too small to test) 1.
    pub confidence: f64,
    /// −log₁₀ of the p-value behind the confidence (0 for rules without a test); the
    /// calibration's main feature. Not written to the reports.
    #[serde(skip)]
    pub evidence: f64,
    /// One line for a person.
    pub explanation: String,
    /// Suggested fix.
    pub suggestion: Option<Suggestion>,
    /// The node was reviewed as approved (or is pinned, for placement findings).
    pub accepted: bool,
}

impl Finding {
    /// How far past the threshold, relative to it (the ranking key within a severity).
    pub fn excess(&self) -> f64 {
        (self.score - self.threshold).abs() / self.threshold.abs().max(0.05)
    }
}

/// The ranked findings and the statistics they were computed from.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AuditReport {
    /// Findings, ranked (see the module documentation).
    pub findings: Vec<Finding>,
    /// Per-node statistics.
    pub stats: Stats,
    /// The coverage threshold in force (after the relative rule).
    pub coverage_threshold: f64,
    /// Nodes of the tree not yet reviewed.
    pub unreviewed: usize,
    /// The calibration from the reviewer's decisions in force, if any
    /// ([`calibrate`]).
    pub calibration: Option<calibrate::Calibration>,
    /// Whether the tree as a whole agrees with the embeddings ([`treefit`]). Not written
    /// by the report's `Serialize`.
    #[serde(skip)]
    pub fit: treefit::TreeFit,
}

impl AuditReport {
    /// Findings of at least `min` severity that are not accepted.
    pub fn open_count(&self, min: Severity) -> usize {
        self.findings
            .iter()
            .filter(|f| !f.accepted && f.severity >= min)
            .count()
    }

    /// Findings per rule id (every rule listed, in [`RULES`] order): (rule, open, accepted).
    pub fn counts_per_rule(&self) -> Vec<(&'static str, usize, usize)> {
        RULES
            .iter()
            .map(|(r, _)| {
                let open = self
                    .findings
                    .iter()
                    .filter(|f| f.rule == *r && !f.accepted)
                    .count();
                let acc = self
                    .findings
                    .iter()
                    .filter(|f| f.rule == *r && f.accepted)
                    .count();
                (*r, open, acc)
            })
            .collect()
    }
}

/// Audit the effective tree from scratch.
pub fn audit(
    g: &Gaussians,
    phrases: &PhraseTable,
    eff: &EffectiveTree,
    problems: &[ApplyProblem],
    cfg: &AuditConfig,
) -> AuditReport {
    Auditor::new(g, phrases, eff, problems, cfg.clone()).report
}

/// Build the ranked finding list and measure the tree-level fit (a full audit's report
/// from given statistics and searches; the tests' reference).
#[cfg(test)]
fn assemble(
    g: &Gaussians,
    phrases: &PhraseTable,
    eff: &EffectiveTree,
    problems: &[ApplyProblem],
    cfg: &AuditConfig,
    stats: Stats,
    placement: &[Placement],
) -> AuditReport {
    // the tree-level fit as the auditor measures it (same engine: same sample bank)
    let engine = super::stats::StatsEngine::new(g, &cfg.stats());
    let fit = treefit::measure(g, eff, &engine, &stats, cfg.containment_min, cfg.seed);
    let mut report = assemble_with(g, phrases, eff, problems, cfg, stats, placement, None, None);
    report.fit = fit;
    report
}

/// [`assemble`], or with `Some((dirty, kept))` only the node-local findings (and those
/// node-local but for their confidence) of the dirty nodes are rebuilt and `kept` (the
/// others') is reused. The confidences come from `inc` when given (the auditor's
/// incremental state, in step with `stats` and `placement`), else from a full
/// [`Confidences::of`](confidence::Confidences::of).
#[allow(clippy::too_many_arguments)]
fn assemble_with(
    g: &Gaussians,
    phrases: &PhraseTable,
    eff: &EffectiveTree,
    problems: &[ApplyProblem],
    cfg: &AuditConfig,
    stats: Stats,
    placement: &[Placement],
    incremental: Option<(&[bool], Vec<Finding>)>,
    inc: Option<&mut confidence_inc::IncConfidence>,
) -> AuditReport {
    let n = g.len();
    let (dirty, mut out) = match incremental {
        Some((d, k)) => (Some(d), k),
        None => (None, Vec::with_capacity(1024)),
    };
    let ctx = Ctx::new(phrases, eff, problems, cfg, &stats, placement);
    // per-node rules phrase by phrase; node-local ones only where something changed
    for p in 0..n as PhraseId {
        let dirty_p = dirty.is_none_or(|d| d[p as usize]);
        for rule in Rule::ALL {
            let kept = rule.node_local() || rule.node_local_but_confidence();
            if rule.scope() == Scope::Node && (dirty_p || !kept) {
                rule.check_node(&ctx, p, &mut out);
            }
        }
    }
    for rule in Rule::ALL {
        if rule.scope() == Scope::Tree {
            rule.check_tree(&ctx, &mut out);
        }
    }
    let (cov_thr, unreviewed) = (ctx.coverage_threshold, ctx.unreviewed);
    let full;
    let conf = match inc {
        Some(inc) => inc.fill(eff, &stats, placement, &out),
        None => {
            full = confidence::Confidences::of(eff, &stats, placement);
            &full
        }
    };
    confidence_inc::stamp(&mut out, conf, cfg);
    let p_of = |f: &Finding| conf.p_value_of(f.rule, f.node);
    let rule_pos = |r: &str| Rule::from_id(r).map_or(RULES.len(), Rule::position);
    // the keys end in (node, other) and, for findings that share those (several stale
    // edits on the root), the explanation, so the order is total and an in-place unstable
    // sort (no n/2 scratch buffer) is deterministic; the p-value, excess and rule position
    // are looked up once per finding, not per comparison
    let mut keyed: Vec<(f64, f64, usize, Finding)> = out
        .into_iter()
        .map(|f| (p_of(&f), f.excess(), rule_pos(f.rule), f))
        .collect();
    keyed.sort_unstable_by(|(pa, ea, ra, a), (pb, eb, rb, b)| {
        a.accepted
            .cmp(&b.accepted)
            .then(b.severity.cmp(&a.severity))
            .then(b.confidence.total_cmp(&a.confidence))
            .then_with(|| pa.total_cmp(pb))
            .then(eb.total_cmp(ea))
            .then(ra.cmp(rb))
            .then(a.node.cmp(&b.node))
            .then(a.other.cmp(&b.other))
            .then_with(|| a.explanation.cmp(&b.explanation))
    });
    let out: Vec<Finding> = keyed.into_iter().map(|k| k.3).collect();
    AuditReport {
        findings: out,
        stats,
        coverage_threshold: cov_thr,
        unreviewed,
        calibration: None,
        fit: treefit::TreeFit::default(),
    }
}

#[cfg(test)]
mod tests;
#[cfg(test)]
mod tests_conf;
#[cfg(test)]
mod tests_update;
