//! `weak-inclusion`: a child mostly outside its parent's region.

use super::{Ctx, Rule};
use crate::model::audit::Finding;
use crate::model::gaussian::PhraseId;

/// Fires when the sampled containment of the child in its parent's α-region is below
/// `containment_min`; score is the containment. Suggests the best broader node when it
/// fits better than the parent, else a review.
pub(super) fn check(ctx: &Ctx, p: PhraseId, out: &mut Vec<Finding>) {
    let tree = &ctx.eff.tree;
    if !tree.is_placed(p) {
        return;
    }
    let Some(par) = tree.parent(p) else {
        return;
    };
    let cfg = ctx.cfg;
    if let Some(c) = ctx.stats.nodes[p as usize].containment
        && c.value < cfg.containment_min
    {
        out.push(Rule::WeakInclusion.finding(
            ctx,
            p,
            Some(par),
            c.value,
            cfg.containment_min,
            format!(
                "only {:.1} % (± {:.1}) of \"{}\" lies inside the {:.0} % region of its parent \"{}\"",
                100.0 * c.value,
                100.0 * c.std_error,
                ctx.label(p),
                100.0 * cfg.alpha,
                ctx.label(par)
            ),
            ctx.placement_fix(p, false),
            ctx.approved(p) || ctx.pinned(p),
        ));
    }
}
