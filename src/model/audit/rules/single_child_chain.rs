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
