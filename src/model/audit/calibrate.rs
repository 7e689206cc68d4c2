//! Learning from the reviewer's decisions: logistic calibration of the placement findings'
//! confidence.
//!
//! The override layer records what a reviewer decided about a node: a `reparent` edit of it
//! means a placement finding about it was right (the fix was applied); a `review` edit
//! approving it as is means its placement findings were wrong. With at least
//! [`MIN_DECISIONS`] such decisions, both kinds among them, a logistic model
//! P(right | x) = σ(w · x) is fitted to them (Platt 1999, "Probabilistic outputs for support
//! vector machines and comparisons to regularized likelihood methods", in *Advances in Large
//! Margin Classifiers*, MIT Press, uses the one-feature form; here three features, fitted by
//! Newton's method with a small ridge penalty, common practice), and the confidence of every
//! open placement finding becomes the model's probability of being right; the ranking
//! follows it. The features are read from a finding as it stood *when it was decided*, i.e.
//! from the audit of the tree before the edits (see [`decisions`]):
//! x = (1, ln(1 − log₁₀ p), z₁), p the p-value behind the finding's confidence
//! ([`Finding::evidence`]; the confidence itself saturates at 1 among the top findings a
//! reviewer decides first) and z₁ the robust z-score of ln KL(node ‖ parent) among the
//! tree's nodes (the first of the two misplacement scores, [`confidence`]). The p-value
//! carries the combined test; z₁ beside it lets the fit weigh the two scores differently
//! for this project (on an ICD-10-CM check set, for example, the decisions say that a
//! node's distance from its parent matters more than the margin of the best alternative).
//!
//! **Demotion only.** A reviewer decides the top of the ranking first, so the decisions are
//! a biased sample: nearly all of them are right, and a fit on them says little about how
//! often the findings further down are right (extrapolated, it called most of the tail
//! right). The calibrated probability therefore reorders the findings and may *lower* a
//! finding's severity ([`calibrated_level`]: a probability of being right, warning from
//! 0.5, error from 0.95), never raise it above the level of its false-discovery test.
//!
//! A decision never deletes anything: calibration only changes confidences, severities and
//! the order of findings; every finding stays in the list.

use std::collections::HashMap;

use super::evaluate::is_placement_rule;
use super::{AuditConfig, AuditReport, Finding, Severity, audit, confidence};
use crate::model::edit::{Edit, EditRecord, ReviewStatus};
use crate::model::effective::EffectiveTree;
use crate::model::gaussian::{Gaussians, PhraseId};
use crate::model::phrase::PhraseTable;
use crate::model::tree::Tree;

/// Fewer decisions than this: no calibration.
pub const MIN_DECISIONS: usize = 20;
/// Ridge penalty on the non-intercept weights (keeps the fit finite when the decisions
/// separate perfectly).
const RIDGE: f64 = 1.0;
/// Features per finding.
const K: usize = 3;

/// A fitted calibration.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Calibration {
    /// Decisions it was fitted on.
    pub decisions: usize,
    /// Of them, findings judged right.
    pub right: usize,
    /// Logistic weights (intercept first).
    pub weights: Vec<f64>,
}

/// One decided finding: its features and whether it was judged right.
#[derive(Debug, Clone, PartialEq)]
pub struct Decision {
    /// The node decided on.
    pub node: PhraseId,
    /// Features (see the module documentation).
    pub x: [f64; K],
    /// A fix was applied (true) or the node was accepted as is (false).
    pub right: bool,
}

fn sigmoid(t: f64) -> f64 {
    1.0 / (1.0 + (-t).exp())
}

/// The features of a finding whose node's parent-fit z-score is `z1` (see
/// [`parent_fit_z`]).
pub fn features(f: &Finding, z1: f64) -> [f64; K] {
    [1.0, f.evidence.ln_1p(), z1]
}

/// The robust z-score of ln KL(node ‖ parent) of every row of `report` (0 for rows without
/// a parent, and for all when the tree is too small or has no spread): the first score of
/// the misplacement test ([`confidence`]).
pub fn parent_fit_z(report: &AuditReport) -> Vec<f64> {
    let nodes = &report.stats.nodes;
    let rows: Vec<usize> = (0..nodes.len())
        .filter(|&i| nodes[i].kl_to_parent.is_some())
        .collect();
    let scores: Vec<f64> = rows
        .iter()
        .map(|&i| nodes[i].kl_to_parent.unwrap_or(0.0).max(1e-12).ln())
        .collect();
    let mut z = vec![0.0; nodes.len()];
    if let Some(zs) = confidence::robust_z(&scores, None) {
        for (&i, v) in rows.iter().zip(zs) {
            z[i] = v;
        }
    }
    z
}

/// The nodes judged in `edits`: true for a node with a `reparent` edit (a fix applied),
/// false for one approved by a `review` edit and not reparented.
pub(super) fn judged(phrases: &PhraseTable, edits: &[EditRecord]) -> HashMap<PhraseId, bool> {
    let mut judged: HashMap<PhraseId, bool> = HashMap::new();
    for r in edits {
        match &r.edit {
            Edit::Reparent { node, .. } => {
                if let Some(p) = phrases.get(node) {
                    judged.insert(p, true);
                }
            }
            Edit::Review { node, status, .. } if *status == ReviewStatus::Approved => {
                if let Some(p) = phrases.get(node) {
                    judged.entry(p).or_insert(false);
                }
            }
            _ => {}
        }
    }
    judged
}

/// Whether the decisions `judged` can support a fit at all: [`MIN_DECISIONS`] decided nodes
/// with both kinds among them. [`decisions`] keeps a subset of these nodes, so when this
/// is false [`Calibration::fit`] returns None whatever the audit of the base tree says, and
/// that audit (a whole second audit) is not run.
pub(super) fn can_fit(judged: &HashMap<PhraseId, bool>) -> bool {
    judged.len() >= MIN_DECISIONS
        && judged.values().any(|&right| right)
        && judged.values().any(|&right| !right)
}

/// The calibration that the decisions of the override layer `edits` support, or None
/// (fewer than [`MIN_DECISIONS`] decided nodes, or one kind only). The features come from
/// an audit of the `base` tree (the findings as they stood before the edits), run only
/// when there are enough decisions of both kinds ([`can_fit`]).
pub fn from_layer(
    g: &Gaussians,
    phrases: &PhraseTable,
    base: &Tree,
    edits: &[EditRecord],
    cfg: &AuditConfig,
) -> Option<Calibration> {
    if !can_fit(&judged(phrases, edits)) {
        return None;
    }
    let eff = EffectiveTree::from_base(base, phrases);
    let before = audit(g, phrases, &eff, &[], cfg);
    Calibration::fit(&decisions(&before, phrases, edits))
}

/// The decisions recorded in `edits`, with the features of each decided node's first open
/// placement finding in `before` (the audit of the tree before the edits). A node with a
/// `reparent` edit counts as right, one approved by a `review` edit (and not reparented) as
/// wrong; nodes without a placement finding in `before` are skipped.
pub fn decisions(
    before: &AuditReport,
    phrases: &PhraseTable,
    edits: &[EditRecord],
) -> Vec<Decision> {
    let judged = judged(phrases, edits);
    let z1 = parent_fit_z(before);
    let mut seen = std::collections::HashSet::new();
    let mut out = Vec::new();
    for f in &before.findings {
        if f.accepted || !is_placement_rule(f.rule) || !seen.insert(f.node) {
            continue;
        }
        if let Some(&right) = judged.get(&f.node) {
            out.push(Decision {
                node: f.node,
                x: features(f, z1[f.node as usize]),
                right,
            });
        }
    }
    out
}

impl Calibration {
    /// Fit on `decisions`; None with fewer than [`MIN_DECISIONS`] or only one kind.
    pub fn fit(decisions: &[Decision]) -> Option<Self> {
        let right = decisions.iter().filter(|d| d.right).count();
        if decisions.len() < MIN_DECISIONS || right == 0 || right == decisions.len() {
            return None;
        }
        let mut w = [0.0f64; K];
        // Newton–Raphson on the penalised log-likelihood (intercept not penalised)
        for _ in 0..50 {
            let mut grad = [0.0; K];
            let mut hess = [[0.0; K]; K];
            for d in decisions {
                let p = sigmoid(dot(&w, &d.x));
                let y = f64::from(u8::from(d.right));
                for (i, row) in hess.iter_mut().enumerate() {
                    grad[i] += (y - p) * d.x[i];
                    for (h, xj) in row.iter_mut().zip(&d.x) {
                        *h += p * (1.0 - p) * d.x[i] * xj;
                    }
                }
            }
            for i in 1..K {
                grad[i] -= RIDGE * w[i];
                hess[i][i] += RIDGE;
            }
            let step = solve(hess, grad)?;
            let mut big = 0.0f64;
            for i in 0..K {
                w[i] += step[i];
                big = big.max(step[i].abs());
            }
            if big < 1e-9 {
                break;
            }
        }
        w.iter().all(|v| v.is_finite()).then(|| Calibration {
            decisions: decisions.len(),
            right,
            weights: w.to_vec(),
        })
    }

    /// The calibrated probability that a finding with these features is right.
    pub fn probability(&self, x: &[f64; K]) -> f64 {
        sigmoid(self.weights.iter().zip(x).map(|(a, b)| a * b).sum())
    }

    /// Recalibrate the placement findings of `report` (confidence, then severity unless
    /// `fixed_severity` says the rule's severity is configured: lowered to
    /// [`calibrated_level`] when that is lower, never raised), re-rank, and record the
    /// calibration. Nothing is removed.
    pub fn apply(&self, report: &mut AuditReport, fixed_severity: impl Fn(&str) -> bool) {
        let z1 = parent_fit_z(report);
        for f in report.findings.iter_mut() {
            if !is_placement_rule(f.rule) {
                continue;
            }
            f.confidence = self.probability(&features(f, z1[f.node as usize]));
            if !fixed_severity(f.rule) {
                f.severity = f.severity.min(calibrated_level(f.confidence));
            }
        }
        report.findings.sort_by(|a, b| {
            a.accepted
                .cmp(&b.accepted)
                .then(b.severity.cmp(&a.severity))
                .then(b.confidence.total_cmp(&a.confidence))
                .then(b.excess().total_cmp(&a.excess()))
                .then(a.node.cmp(&b.node))
                .then(a.other.cmp(&b.other))
        });
        report.calibration = Some(self.clone());
    }

    /// "calibrated on N decisions".
    pub fn describe(&self) -> String {
        format!(
            "calibrated on {} decisions ({} fixes applied, {} accepted as is)",
            self.decisions,
            self.right,
            self.decisions - self.right
        )
    }
}

/// The severity of a calibrated finding: a probability of being right, so `warning` when
/// it is more likely right than wrong (P ≥ 0.5, equal costs of the two mistakes) and
/// `error` when P ≥ 1 − [`confidence::Q_WARNING`] (0.95), else `info`.
pub fn calibrated_level(p: f64) -> Severity {
    if p >= 1.0 - confidence::Q_WARNING {
        Severity::Error
    } else if p >= 0.5 {
        Severity::Warning
    } else {
        Severity::Info
    }
}

fn dot(a: &[f64; K], b: &[f64; K]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// Solve a K×K system by Gaussian elimination with partial pivoting.
fn solve(mut a: [[f64; K]; K], mut b: [f64; K]) -> Option<[f64; K]> {
    for col in 0..K {
        let piv = (col..K).max_by(|&i, &j| a[i][col].abs().total_cmp(&a[j][col].abs()))?;
        if a[piv][col].abs() < 1e-12 {
            return None;
        }
        a.swap(col, piv);
        b.swap(col, piv);
        let pivot_row = a[col];
        for r in col + 1..K {
            let m = a[r][col] / pivot_row[col];
            for (x, p) in a[r][col..].iter_mut().zip(&pivot_row[col..]) {
                *x -= m * p;
            }
            b[r] -= m * b[col];
        }
    }
    let mut x = [0.0; K];
    for r in (0..K).rev() {
        let s: f64 = (r + 1..K).map(|c| a[r][c] * x[c]).sum();
        x[r] = (b[r] - s) / a[r][r];
    }
    Some(x)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn solve_by_hand() {
        // diagonal system: x = b / diag (counted by hand)
        let mut a = [[0.0; K]; K];
        for (i, row) in a.iter_mut().enumerate() {
            row[i] = (i + 1) as f64;
        }
        let x = solve(a, [1.0, 2.0, 3.0]).unwrap();
        assert!(x.iter().all(|v| (v - 1.0).abs() < 1e-12), "{x:?}");
    }

    #[test]
    fn the_base_audit_is_skipped_only_when_no_fit_can_follow() {
        // `can_fit` false must imply `fit` None on the decisions of any subset of the nodes
        // (`decisions` keeps those with a placement finding): one kind only, or too few
        let of = |kinds: &[bool]| -> HashMap<PhraseId, bool> {
            kinds
                .iter()
                .enumerate()
                .map(|(i, &r)| (i as PhraseId, r))
                .collect()
        };
        let as_decisions = |j: &HashMap<PhraseId, bool>| -> Vec<Decision> {
            let mut v: Vec<Decision> = j
                .iter()
                .map(|(&node, &right)| Decision {
                    node,
                    x: [1.0, node as f64 / 10.0, 0.0],
                    right,
                })
                .collect();
            v.sort_by_key(|d| d.node);
            v
        };
        let reparents_only = of(&[true; 201]);
        let approvals_only = of(&[false; 40]);
        let too_few = of(&(0..19).map(|i| i % 2 == 0).collect::<Vec<_>>());
        for j in [&reparents_only, &approvals_only, &too_few] {
            assert!(!can_fit(j));
            assert!(Calibration::fit(&as_decisions(j)).is_none());
        }
        // twenty of both kinds: the audit of the base tree is needed (and a fit follows here)
        let mixed = of(&(0..20).map(|i| i % 3 != 0).collect::<Vec<_>>());
        assert!(can_fit(&mixed));
        assert!(Calibration::fit(&as_decisions(&mixed)).is_some());
    }

    #[test]
    fn fit_needs_twenty_decisions_of_both_kinds_and_orders_them() {
        let d = |c: f64, right: bool| Decision {
            node: 0,
            x: [1.0, c, 0.0],
            right,
        };
        let few: Vec<Decision> = (0..19).map(|i| d(i as f64, i % 2 == 0)).collect();
        assert!(Calibration::fit(&few).is_none());
        let one_kind: Vec<Decision> = (0..30).map(|i| d(i as f64, true)).collect();
        assert!(Calibration::fit(&one_kind).is_none());
        // right when the logit is high: the fitted probability rises with it
        let mixed: Vec<Decision> = (0..30)
            .map(|i| d(i as f64 / 3.0 - 5.0, (i * 7) % 30 >= 12))
            .chain((0..10).map(|i| d(4.0 + i as f64 * 0.1, true)))
            .chain((0..10).map(|i| d(-4.0 - i as f64 * 0.1, false)))
            .collect();
        let c = Calibration::fit(&mixed).unwrap();
        assert_eq!(c.decisions, 50);
        let lo = c.probability(&[1.0, -4.0, 0.0]);
        let hi = c.probability(&[1.0, 4.0, 0.0]);
        assert!(hi > 0.5 && lo < 0.5 && hi > lo, "{lo} {hi}");
        assert!(c.describe().starts_with("calibrated on 50 decisions"));
    }
}
