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
