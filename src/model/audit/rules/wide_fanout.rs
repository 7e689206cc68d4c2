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
