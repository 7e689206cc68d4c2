//! The audit rules: one [`Rule`] variant and one function per rule (one file each).
//!
//! A rule is either *per node* (its function looks at one phrase and may push findings about
//! it) or *tree-wide* (its function runs once). The findings of a [`Rule::node_local`] rule
//! belong to one node, so the incremental re-audit reruns it only for the nodes an edit
//! touched (changed figures, search, review, pin or label; the children of changed or
//! renamed nodes; old and new ancestors of moved ones) and keeps its other findings; every
//! other rule is rerun in full on each update. A new rule that reads more of the tree than
//! that must not be node-local.
//!
//! Adding a rule: a variant here (id, default severity, scope, node-locality, config keys),
//! a file with its function, a line in `Rule::check_node` or `Rule::check_tree`, and a
//! test in its file where it must fire and one where it must not.

use super::{AuditConfig, Finding, Severity, Suggestion};
use crate::model::edit::{Edit, ReviewStatus};
use crate::model::effective::{ApplyProblem, EffectiveTree};
use crate::model::gaussian::PhraseId;
use crate::model::phrase::PhraseTable;
use crate::model::stats::Stats;

use super::search::Placement;

mod better_parent;
mod coverage_gap;
mod inverted_generality;
mod near_duplicate;
mod single_child_chain;
mod stale_edit;
mod unplaced;
mod unreviewed;
mod weak_inclusion;
mod wide_fanout;

/// Every audit rule. The declaration order is the report order (ties in the ranking, the
/// per-rule counts, the rule list of the CLI).
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Rule {
    /// `inverted-generality`: a child broader than its parent.
    InvertedGenerality,
    /// `better-parent`: another node contains the child clearly better.
    BetterParent,
    /// `weak-inclusion`: a child mostly outside its parent's region.
    WeakInclusion,
    /// `near-duplicate`: two nodes that nearly coincide.
    NearDuplicate,
    /// `coverage-gap`: children that cover too little of their parent.
    CoverageGap,
    /// `unplaced`: a phrase neither in the tree, merged nor excluded.
    Unplaced,
    /// `stale-edit`: an override edit that no longer applies.
    StaleEdit,
    /// `single-child-chain`: a chain of nodes with one child each.
    SingleChildChain,
    /// `wide-fanout`: too many children.
    WideFanout,
    /// `unreviewed`: nodes not reviewed yet.
    Unreviewed,
}

/// Where a rule looks.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Scope {
    /// Called once per phrase of the table.
    Node,
    /// Called once per audit.
    Tree,
}

impl Rule {
    /// Every rule, in report order.
    pub const ALL: [Rule; 10] = [
        Rule::InvertedGenerality,
        Rule::BetterParent,
        Rule::WeakInclusion,
        Rule::NearDuplicate,
        Rule::CoverageGap,
        Rule::Unplaced,
        Rule::StaleEdit,
        Rule::SingleChildChain,
        Rule::WideFanout,
        Rule::Unreviewed,
    ];

    /// The rule id used in reports, configuration and the CLI.
    pub const fn id(self) -> &'static str {
        match self {
            Rule::InvertedGenerality => "inverted-generality",
            Rule::BetterParent => "better-parent",
            Rule::WeakInclusion => "weak-inclusion",
            Rule::NearDuplicate => "near-duplicate",
            Rule::CoverageGap => "coverage-gap",
            Rule::Unplaced => "unplaced",
            Rule::StaleEdit => "stale-edit",
            Rule::SingleChildChain => "single-child-chain",
            Rule::WideFanout => "wide-fanout",
            Rule::Unreviewed => "unreviewed",
        }
    }

    /// Severity unless the configuration's `severity` map says otherwise.
    pub const fn default_severity(self) -> Severity {
        match self {
            Rule::InvertedGenerality | Rule::BetterParent => Severity::Error,
            Rule::WeakInclusion
            | Rule::NearDuplicate
            | Rule::CoverageGap
            | Rule::Unplaced
            | Rule::StaleEdit => Severity::Warning,
            Rule::SingleChildChain | Rule::WideFanout | Rule::Unreviewed => Severity::Info,
        }
    }

    /// Per node or once per audit.
    pub const fn scope(self) -> Scope {
        match self {
            Rule::StaleEdit | Rule::Unreviewed => Scope::Tree,
            _ => Scope::Node,
        }
    }

    /// Whether the findings of a node depend only on that node's own figures (parent and
    /// child statistics, candidate search, review, pin, labels of it and its partner), so
    /// the incremental re-audit may keep them for nodes an edit did not touch. Pairs
    /// (`near-duplicate`), tree-relative thresholds (`coverage-gap`), the placement rules
    /// (their confidence is relative to the whole tree's scores) and tree-wide rules are
    /// not node-local.
    pub const fn node_local(self) -> bool {
        // the placement rules are not: their confidence (and so severity) depends on the
        // distribution of every node's scores
        matches!(
            self,
            Rule::Unplaced | Rule::WideFanout | Rule::SingleChildChain
        )
    }

    /// Whether the findings of a node depend only on that node's own figures apart from
    /// their severity, confidence and evidence: the placement rules, whose confidence is
    /// relative to the whole tree. The incremental re-audit keeps them, like those of
    /// [`Rule::node_local`] rules, for nodes an edit did not touch, and stamps the
    /// confidence of every one again (`confidence_inc::stamp`).
    pub const fn node_local_but_confidence(self) -> bool {
        matches!(
            self,
            Rule::InvertedGenerality | Rule::BetterParent | Rule::WeakInclusion
        )
    }

    /// The keys of the `audit` configuration this rule reads (besides its `severity`).
    pub const fn config_keys(self) -> &'static [&'static str] {
        match self {
            Rule::InvertedGenerality => &["inversion_margin"],
            Rule::BetterParent => &[
                "better_parent_margin",
                "better_parent_ratio",
                "better_parent_containment_slack",
                "better_parent_broader",
            ],
            Rule::WeakInclusion => &["containment_min"],
            Rule::NearDuplicate => &["duplicate_bc_min", "duplicate_generality_margin"],
            Rule::CoverageGap => &["coverage_min", "coverage_relative"],
            Rule::SingleChildChain => &["single_child_chain_min"],
            Rule::WideFanout => &["max_fanout"],
            Rule::Unplaced | Rule::StaleEdit | Rule::Unreviewed => &[],
        }
    }

    /// The rule with this id.
    pub fn from_id(id: &str) -> Option<Rule> {
        Rule::ALL.into_iter().find(|r| r.id() == id)
    }

    /// Position in report order.
    pub const fn position(self) -> usize {
        self as usize
    }

    /// Run a [`Scope::Node`] rule on phrase `p`; a no-op for tree-wide rules.
    pub(super) fn check_node(self, ctx: &Ctx, p: PhraseId, out: &mut Vec<Finding>) {
        match self {
            Rule::InvertedGenerality => inverted_generality::check(ctx, p, out),
            Rule::BetterParent => better_parent::check(ctx, p, out),
            Rule::WeakInclusion => weak_inclusion::check(ctx, p, out),
            Rule::NearDuplicate => near_duplicate::check(ctx, p, out),
            Rule::CoverageGap => coverage_gap::check(ctx, p, out),
            Rule::Unplaced => unplaced::check(ctx, p, out),
            Rule::SingleChildChain => single_child_chain::check(ctx, p, out),
            Rule::WideFanout => wide_fanout::check(ctx, p, out),
            Rule::StaleEdit | Rule::Unreviewed => {}
        }
    }

    /// Run a [`Scope::Tree`] rule; a no-op for per-node rules.
    pub(super) fn check_tree(self, ctx: &Ctx, out: &mut Vec<Finding>) {
        match self {
            Rule::StaleEdit => stale_edit::check(ctx, out),
            Rule::Unreviewed => unreviewed::check(ctx, out),
            _ => {}
        }
    }

    /// A finding of this rule with its configured severity.
    #[allow(clippy::too_many_arguments)]
    fn finding(
        self,
        ctx: &Ctx,
        node: PhraseId,
        other: Option<PhraseId>,
        score: f64,
        threshold: f64,
        explanation: String,
        suggestion: Suggestion,
        accepted: bool,
    ) -> Finding {
        // the placement rules' severity, confidence and evidence follow the node's
        // confidence, stamped on after every rule ran (`confidence_inc::stamp`); the values
        // here are those of a rule without a test (evidence −log₁₀ 1)
        Finding {
            rule: self.id(),
            severity: ctx.cfg.severity_of(self.id()),
            confidence: 1.0,
            evidence: -0.0,
            node,
            other,
            score,
            threshold,
            explanation,
            suggestion: Some(suggestion),
            accepted,
        }
    }
}

/// Everything a rule reads: the tree, its statistics and candidate searches, and the
/// tree-wide figures computed once per audit.
pub(super) struct Ctx<'a> {
    /// The phrase table (ids for suggested edits).
    pub phrases: &'a PhraseTable,
    /// The effective tree.
    pub eff: &'a EffectiveTree,
    /// Override edits that could not be applied.
    pub problems: &'a [ApplyProblem],
    /// Thresholds and severities.
    pub cfg: &'a AuditConfig,
    /// Per-node statistics.
    pub stats: &'a Stats,
    /// Candidate search per phrase.
    pub placement: &'a [Placement],
    /// The `coverage-gap` threshold in force (absolute ceiling and relative rule).
    pub coverage_threshold: f64,
    /// Nodes of the tree whose review status is unreviewed.
    pub unreviewed: usize,
}

impl<'a> Ctx<'a> {
    /// The context of one audit; computes the tree-wide figures.
    pub fn new(
        phrases: &'a PhraseTable,
        eff: &'a EffectiveTree,
        problems: &'a [ApplyProblem],
        cfg: &'a AuditConfig,
        stats: &'a Stats,
        placement: &'a [Placement],
    ) -> Self {
        let n = eff.tree.table_len();
        let unreviewed = (0..n as PhraseId)
            .filter(|&p| {
                eff.tree.is_placed(p) && eff.review[p as usize] == ReviewStatus::Unreviewed
            })
            .count();
        Ctx {
            phrases,
            eff,
            problems,
            cfg,
            stats,
            placement,
            coverage_threshold: Ctx::coverage_threshold_of(eff, cfg, stats),
            unreviewed,
        }
    }

    /// `coverage-gap` threshold: min(`coverage_min`, `coverage_relative` × the median
    /// coverage of the nodes with ≥ 2 children); the median of an even count is the upper
    /// middle value, of none 0.
    fn coverage_threshold_of(eff: &EffectiveTree, cfg: &AuditConfig, stats: &Stats) -> f64 {
        let tree = &eff.tree;
        let mut covs: Vec<f64> = (0..tree.table_len() as PhraseId)
            .filter(|&p| tree.is_placed(p) && tree.children(p).len() >= 2)
            .filter_map(|p| stats.nodes[p as usize].coverage.map(|c| c.value))
            .collect();
        covs.sort_by(f64::total_cmp);
        let median = if covs.is_empty() {
            0.0
        } else {
            covs[covs.len() / 2]
        };
        cfg.coverage_min.min(cfg.coverage_relative * median)
    }

    /// The id of a phrase.
    fn id(&self, p: PhraseId) -> String {
        self.phrases.id(p).to_string()
    }

    /// The effective label of a phrase.
    fn label(&self, p: PhraseId) -> &str {
        self.eff.label(p)
    }

    /// Reviewed as approved.
    fn approved(&self, p: PhraseId) -> bool {
        self.eff.review[p as usize] == ReviewStatus::Approved
    }

    /// Pinned to its place.
    fn pinned(&self, p: PhraseId) -> bool {
        self.eff.pinned[p as usize]
    }

    /// Suggest moving `node` under `to`.
    fn reparent(&self, node: PhraseId, to: PhraseId) -> Suggestion {
        Suggestion {
            action: "reparent".into(),
            target: Some(self.id(to)),
            edit: Some(Edit::Reparent {
                node: self.id(node),
                parent: self.id(to),
            }),
        }
    }

    /// Suggest a look by a person.
    fn review(&self) -> Suggestion {
        Suggestion {
            action: "review".into(),
            target: None,
            edit: None,
        }
    }

    /// The fix of a placement finding: keep a pinned node; else reparent to the best
    /// broader node when there is one (and, unless `require_broader_than_parent`, when it
    /// fits better than the parent); else review.
    fn placement_fix(&self, node: PhraseId, require_broader_than_parent: bool) -> Suggestion {
        let pl = &self.placement[node as usize];
        let par_kl = self.stats.nodes[node as usize]
            .kl_to_parent
            .unwrap_or(f64::INFINITY);
        match pl.best {
            _ if self.pinned(node) => Suggestion {
                action: "keep (pinned)".into(),
                target: None,
                edit: None,
            },
            Some((b, k)) if require_broader_than_parent || k < par_kl => self.reparent(node, b),
            _ => self.review(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_config_key_belongs_to_a_rule_or_is_global() {
        // the keys of the serialised default configuration, each claimed exactly once
        let v = serde_json::to_value(AuditConfig::default()).unwrap();
        let keys: Vec<&String> = v.as_object().unwrap().keys().collect();
        for k in &keys {
            let owners = Rule::ALL
                .iter()
                .filter(|r| r.config_keys().contains(&k.as_str()))
                .count()
                + usize::from(AuditConfig::GLOBAL_KEYS.contains(&k.as_str()));
            assert_eq!(owners, 1, "key {k}");
        }
        let claimed = Rule::ALL
            .iter()
            .map(|r| r.config_keys().len())
            .sum::<usize>()
            + AuditConfig::GLOBAL_KEYS.len();
        assert_eq!(claimed, keys.len());
    }

    #[test]
    fn ids_round_trip_and_positions_follow_the_report_order() {
        for (i, r) in Rule::ALL.into_iter().enumerate() {
            assert_eq!(Rule::from_id(r.id()), Some(r));
            assert_eq!(r.position(), i);
            assert_eq!(
                crate::model::audit::RULES[i],
                (r.id(), r.default_severity())
            );
        }
        assert_eq!(Rule::from_id("nope"), None);
    }
}
