//! `coverage-gap`: children that cover too little of their parent.

use super::{Ctx, Rule};
use crate::model::audit::Finding;
use crate::model::gaussian::PhraseId;

/// Fires on a node with ≥ 2 children whose sampled coverage c is below the threshold t in
/// force ([`Ctx::coverage_threshold`]) by more than two standard errors at t:
/// c < t − 2 √(t (1 − t) / N). Score is the coverage. Not node-local: t depends on the
/// whole tree.
pub(super) fn check(ctx: &Ctx, p: PhraseId, out: &mut Vec<Finding>) {
    let tree = &ctx.eff.tree;
    if !tree.is_placed(p) {
        return;
    }
    let fan = tree.children(p).len();
    let t = ctx.coverage_threshold;
    if fan >= 2
        && let Some(c) = ctx.stats.nodes[p as usize].coverage
        && c.value < t - 2.0 * (t * (1.0 - t) / c.samples.max(1) as f64).sqrt()
    {
        out.push(Rule::CoverageGap.finding(
            ctx,
            p,
            None,
            c.value,
            t,
            format!(
                "the {} children of \"{}\" cover only {:.1} % (± {:.1}) of it",
                fan,
                ctx.label(p),
                100.0 * c.value,
                100.0 * c.std_error
            ),
            ctx.review(),
            ctx.approved(p),
        ));
    }
}
