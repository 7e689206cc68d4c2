//! `unreviewed`: nodes not reviewed yet.

use super::{Ctx, Rule};
use crate::model::audit::Finding;

/// One finding on the root when any node of the tree is unreviewed; score is their share
/// of the tree's nodes (threshold 0), never accepted.
pub(super) fn check(ctx: &Ctx, out: &mut Vec<Finding>) {
    if ctx.unreviewed == 0 {
        return;
    }
    let placed = ctx.stats.placed;
    out.push(Rule::Unreviewed.finding(
        ctx,
        ctx.eff.tree.root(),
        None,
        ctx.unreviewed as f64 / placed.max(1) as f64,
        0.0,
        format!(
            "{} of {} nodes are not reviewed yet",
            ctx.unreviewed, placed
        ),
        ctx.review(),
        false,
    ));
}

#[cfg(test)]
mod tests {
    use crate::model::audit::tests::{of_rule, small_1d};
    use crate::model::audit::{AuditConfig, Rule, audit};
    use crate::model::edit::ReviewStatus;

    #[test]
    fn fires_with_the_unreviewed_share_and_not_when_all_are_reviewed() {
        let (t, g, mut eff) = small_1d(
            &[
                ("r", 0.0, 9.0),
                ("a", -1.0, 1.0),
                ("b", 1.0, 1.0),
                ("c", 1.0, 0.25),
            ],
            &[("a", "r"), ("b", "r"), ("c", "b")],
        );
        eff.review[1] = ReviewStatus::Approved;
        let r = audit(&g, &t, &eff, &[], &AuditConfig::default());
        let f = of_rule(&r, Rule::Unreviewed);
        // 3 of 4 nodes unreviewed (counted by hand)
        assert_eq!(f.len(), 1);
        assert_eq!((f[0].node, f[0].score), (0, 0.75));
        assert_eq!(r.unreviewed, 3);
        for i in 0..4 {
            eff.review[i] = ReviewStatus::Approved;
        }
        let r = audit(&g, &t, &eff, &[], &AuditConfig::default());
        assert!(of_rule(&r, Rule::Unreviewed).is_empty());
        assert_eq!(r.unreviewed, 0);
    }
}
