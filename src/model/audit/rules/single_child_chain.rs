//! `single-child-chain`: a chain of nodes with exactly one child each.

use super::{Ctx, Rule};
use crate::model::audit::Finding;
use crate::model::gaussian::PhraseId;

/// Fires at the top of a chain (a node with one child whose parent has not exactly one)
/// when the chain holds at least `single_child_chain_min` (at least 1) single-child nodes;
/// score is their number, `other` the top's child.
pub(super) fn check(ctx: &Ctx, p: PhraseId, out: &mut Vec<Finding>) {
    let tree = &ctx.eff.tree;
    if !tree.is_placed(p) {
        return;
    }
    let chain_top =
        tree.children(p).len() == 1 && tree.parent(p).is_none_or(|q| tree.children(q).len() != 1);
    if !chain_top {
        return;
    }
    let mut len = 0usize;
    let mut cur = p;
    while tree.children(cur).len() == 1 {
        len += 1;
        cur = tree.children(cur)[0];
    }
    if len >= ctx.cfg.single_child_chain_min.max(1) {
        out.push(Rule::SingleChildChain.finding(
            ctx,
            p,
            Some(tree.children(p)[0]),
            len as f64,
            ctx.cfg.single_child_chain_min as f64,
            format!(
                "\"{}\" starts a chain of {} node(s) with a single child",
                ctx.label(p),
                len
            ),
            ctx.review(),
            ctx.approved(p),
        ));
    }
}

#[cfg(test)]
mod tests {
    use crate::model::audit::tests::{of_rule, small_1d};
    use crate::model::audit::{AuditConfig, AuditReport, Rule, audit};

    /// r with children a and x; `edges` adds the rest.
    fn run(extra: &[(&str, &str)], cfg: &AuditConfig) -> AuditReport {
        let rows = [
            ("r", 0.0, 100.0),
            ("a", -3.0, 4.0),
            ("x", 3.0, 4.0),
            ("b", -3.0, 1.0),
            ("c", -3.0, 0.25),
            ("d", -4.0, 0.25),
        ];
        let mut edges = vec![("a", "r"), ("x", "r")];
        edges.extend_from_slice(extra);
        let (t, g, eff) = small_1d(&rows, &edges);
        audit(&g, &t, &eff, &[], cfg)
    }

    #[test]
    fn fires_at_the_top_of_a_chain() {
        // a → b → c: a and b have one child each, a's parent has two: one chain of 2 at a
        // (counted by hand)
        let r = run(
            &[("b", "a"), ("c", "b"), ("d", "x")],
            &AuditConfig::default(),
        );
        let f = of_rule(&r, Rule::SingleChildChain);
        // x → d is a second chain of 1
        assert_eq!(f.len(), 2, "{f:#?}");
        let top = f.iter().find(|f| f.node == 1).unwrap();
        assert_eq!((top.other, top.score), (Some(3), 2.0));
        let short = f.iter().find(|f| f.node == 2).unwrap();
        assert_eq!((short.other, short.score), (Some(5), 1.0));
    }

    #[test]
    fn is_silent_on_short_chains_and_branching_trees() {
        let cfg = AuditConfig {
            single_child_chain_min: 3,
            ..AuditConfig::default()
        };
        let r = run(&[("b", "a"), ("c", "b"), ("d", "x")], &cfg);
        assert!(of_rule(&r, Rule::SingleChildChain).is_empty());
        // every inner node has two children
        let r = run(
            &[("b", "a"), ("c", "a"), ("d", "x")],
            &AuditConfig::default(),
        );
        let f = of_rule(&r, Rule::SingleChildChain);
        assert_eq!(f.len(), 1);
        assert_eq!(f[0].node, 2);
        let r = run(
            &[("b", "a"), ("c", "a"), ("d", "r")],
            &AuditConfig::default(),
        );
        assert!(of_rule(&r, Rule::SingleChildChain).is_empty());
    }
}
