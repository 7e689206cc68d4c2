//! `unplaced`: a phrase neither in the tree, merged nor excluded.

use super::{Ctx, Rule};
use crate::model::audit::Finding;
use crate::model::gaussian::PhraseId;

/// Fires on every phrase that is not a node, not merged into another and not excluded;
/// score 1 against threshold 0. Suggests placing it under the best broader node found by
/// the candidate search, else a review.
pub(super) fn check(ctx: &Ctx, p: PhraseId, out: &mut Vec<Finding>) {
    let i = p as usize;
    let eff = ctx.eff;
    if eff.tree.is_placed(p) || eff.alias_of[i].is_some() || eff.excluded[i] {
        return;
    }
    let (sugg, other) = match ctx.placement[i].best {
        Some((b, _)) => (ctx.reparent(p, b), Some(b)),
        None => (ctx.review(), None),
    };
    out.push(Rule::Unplaced.finding(
        ctx,
        p,
        other,
        1.0,
        0.0,
        format!(
            "\"{}\" is not in the tree, not merged and not excluded",
            ctx.label(p)
        ),
        sugg,
        ctx.approved(p),
    ));
}
