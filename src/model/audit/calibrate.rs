//! Learning from the reviewer's decisions: logistic calibration of the placement findings'
//! confidence.
//!
//! The override layer records what a reviewer decided about a node: a `reparent` edit of it
//! means a placement finding about it was right (the fix was applied); a `review` edit
//! approving it as is means its placement findings were wrong. With at least
//! [`MIN_DECISIONS`] such decisions, both kinds among them, a logistic model
//! P(right | x) = σ(w · x) is fitted to them (Platt 1999, "Probabilistic outputs for support
//! vector machines and comparisons to regularized likelihood methods", in *Advances in Large
//! Margin Classifiers*, MIT Press, uses the one-feature form; here a few features, fitted by
//! Newton's method with a small ridge penalty, common practice), and the confidence of every
//! open placement finding becomes the model's probability of being right; the ranking
//! follows it and the severity is set by [`calibrated_level`] (a probability of being
//! right, not a false-discovery rate: warning from 0.5, error from 0.95). The features are read from a finding as it stood *when it was decided*, i.e.
//! from the audit of the tree before the edits (see [`decisions`]):
//! x = (1, ln(1 − log₁₀ p), ln(1 + excess), [rule = better-parent], [rule = inverted-generality]),
//! p the p-value behind the finding's confidence ([`Finding::evidence`]; the confidence
//! itself saturates at 1 among the top findings a reviewer decides first).
//!
//! A decision never deletes anything: calibration only changes confidences, severities and
//! the order of findings; every finding stays in the list.

use std::collections::HashMap;

use super::evaluate::is_placement_rule;
use super::{AuditReport, BETTER_PARENT, Finding, INVERTED_GENERALITY, Severity, confidence};
use crate::model::edit::{Edit, EditRecord, ReviewStatus};
use crate::model::gaussian::PhraseId;
use crate::model::phrase::PhraseTable;

/// Fewer decisions than this: no calibration.
pub const MIN_DECISIONS: usize = 20;
/// Ridge penalty on the non-intercept weights (keeps the fit finite when the decisions
/// separate perfectly).
const RIDGE: f64 = 1.0;
/// Features per finding.
const K: usize = 5;

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

/// The features of a finding.
pub fn features(f: &Finding) -> [f64; K] {
    [
        1.0,
        f.evidence.ln_1p(),
        f.excess().ln_1p(),
        f64::from(u8::from(f.rule == BETTER_PARENT)),
        f64::from(u8::from(f.rule == INVERTED_GENERALITY)),
    ]
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
    let mut seen = std::collections::HashSet::new();
    let mut out = Vec::new();
    for f in &before.findings {
        if f.accepted || !is_placement_rule(f.rule) || !seen.insert(f.node) {
            continue;
        }
        if let Some(&right) = judged.get(&f.node) {
            out.push(Decision {
                node: f.node,
                x: features(f),
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

    /// Recalibrate the open placement findings of `report` (confidence, then severity
    /// unless `fixed_severity` says the rule's severity is configured), re-rank, and record
    /// the calibration. Nothing is removed.
    pub fn apply(&self, report: &mut AuditReport, fixed_severity: impl Fn(&str) -> bool) {
        for f in report.findings.iter_mut() {
            if !is_placement_rule(f.rule) {
                continue;
            }
            f.confidence = self.probability(&features(f));
            if !fixed_severity(f.rule) {
                f.severity = calibrated_level(f.confidence);
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
        let x = solve(a, [1.0, 2.0, 3.0, 4.0, 5.0]).unwrap();
        assert!(x.iter().all(|v| (v - 1.0).abs() < 1e-12), "{x:?}");
    }

    #[test]
    fn fit_needs_twenty_decisions_of_both_kinds_and_orders_them() {
        let d = |c: f64, right: bool| Decision {
            node: 0,
            x: [1.0, c, 0.0, 0.0, 0.0],
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
        let lo = c.probability(&[1.0, -4.0, 0.0, 0.0, 0.0]);
        let hi = c.probability(&[1.0, 4.0, 0.0, 0.0, 0.0]);
        assert!(hi > 0.5 && lo < 0.5 && hi > lo, "{lo} {hi}");
        assert!(c.describe().starts_with("calibrated on 50 decisions"));
    }
}
