//! `wide-fanout`: too many children.

use super::{Ctx, Rule};
use crate::model::audit::Finding;
use crate::model::gaussian::PhraseId;

/// Fires on a node with more than `max_fanout` children; score is the number of children.
pub(super) fn check(ctx: &Ctx, p: PhraseId, out: &mut Vec<Finding>) {
    let tree = &ctx.eff.tree;
    if !tree.is_placed(p) {
        return;
    }
    let fan = tree.children(p).len();
    if fan > ctx.cfg.max_fanout {
        out.push(Rule::WideFanout.finding(
            ctx,
            p,
            None,
            fan as f64,
            ctx.cfg.max_fanout as f64,
            format!("\"{}\" has {} children", ctx.label(p), fan),
            ctx.review(),
            ctx.approved(p),
        ));
    }
}

#[cfg(test)]
mod tests {
    use crate::model::audit::tests::{of_rule, small_1d};
    use crate::model::audit::{AuditConfig, AuditReport, Rule, audit};

    /// A root with `k` leaves.
    fn run(k: usize) -> AuditReport {
        let ids: Vec<String> = (0..k).map(|i| format!("l{i}")).collect();
        let mut rows = vec![("root", 0.0, 100.0)];
        rows.extend(ids.iter().map(|i| (i.as_str(), 0.0, 1.0)));
        let edges: Vec<(&str, &str)> = ids.iter().map(|i| (i.as_str(), "root")).collect();
        let (t, g, eff) = small_1d(&rows, &edges);
        audit(&g, &t, &eff, &[], &AuditConfig::default())
    }

    #[test]
    fn fires_above_the_limit() {
        // 16 children > max_fanout 15 (counted by hand)
        let r = run(16);
        let f = of_rule(&r, Rule::WideFanout);
        assert_eq!(f.len(), 1);
        assert_eq!((f[0].node, f[0].score, f[0].threshold), (0, 16.0, 15.0));
    }

    #[test]
    fn is_silent_at_the_limit() {
        assert!(of_rule(&run(15), Rule::WideFanout).is_empty());
    }
}
