//! `stale-edit`: an override edit that no longer applies.

use super::{Ctx, Rule};
use crate::model::audit::Finding;

/// One finding on the root per apply problem (score 1 against threshold 0), never
/// accepted; suggests reviewing the override layer.
pub(super) fn check(ctx: &Ctx, out: &mut Vec<Finding>) {
    let root = ctx.eff.tree.root();
    for pr in ctx.problems {
        out.push(Rule::StaleEdit.finding(
            ctx,
            root,
            None,
            1.0,
            0.0,
            format!(
                "override edit #{} ({}) no longer applies: {}",
                pr.index, pr.op, pr.reason
            ),
            ctx.review(),
            false,
        ));
    }
}

#[cfg(test)]
mod tests {
    use crate::model::audit::tests::{of_rule, small_1d};
    use crate::model::audit::{AuditConfig, Rule, audit};
    use crate::model::effective::ApplyProblem;

    #[test]
    fn fires_once_per_problem_and_not_without() {
        let (t, g, eff) = small_1d(&[("r", 0.0, 4.0), ("a", 0.0, 1.0)], &[("a", "r")]);
        let problems: Vec<ApplyProblem> = [(1, "pin"), (4, "merge")]
            .into_iter()
            .map(|(index, op)| ApplyProblem {
                index,
                op: op.into(),
                reason: "unknown phrase \"fern\"".into(),
            })
            .collect();
        let r = audit(&g, &t, &eff, &problems, &AuditConfig::default());
        let f = of_rule(&r, Rule::StaleEdit);
        assert_eq!(f.len(), 2);
        assert!(f.iter().all(|f| f.node == 0 && !f.accepted));
        assert!(f.iter().any(|f| f.explanation.contains("#4 (merge)")));
        let r = audit(&g, &t, &eff, &[], &AuditConfig::default());
        assert!(of_rule(&r, Rule::StaleEdit).is_empty());
    }
}
