//! `inverted-generality`: a child broader than its parent.

use super::{Ctx, Rule};
use crate::model::audit::Finding;
use crate::model::gaussian::PhraseId;

/// Fires when ln det Σ(child) − ln det Σ(parent) > `inversion_margin`; score is that
/// excess in nats. Suggests the best broader node (kept, not moved, when pinned).
pub(super) fn check(ctx: &Ctx, p: PhraseId, out: &mut Vec<Finding>) {
    let tree = &ctx.eff.tree;
    if !tree.is_placed(p) {
        return;
    }
    let Some(par) = tree.parent(p) else {
        return;
    };
    let s = &ctx.stats.nodes[p as usize];
    let par_ld = ctx.stats.nodes[par as usize].log_det;
    let excess_ld = s.log_det - par_ld;
    if excess_ld > ctx.cfg.inversion_margin {
        out.push(Rule::InvertedGenerality.finding(
            ctx,
            p,
            Some(par),
            excess_ld,
            ctx.cfg.inversion_margin,
            format!(
                "\"{}\" is broader than its parent \"{}\": ln det Σ {:.2} vs {:.2}",
                ctx.label(p),
                ctx.label(par),
                s.log_det,
                par_ld
            ),
            ctx.placement_fix(p, true),
            ctx.approved(p) || ctx.pinned(p),
        ));
    }
}
