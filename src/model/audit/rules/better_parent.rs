//! `better-parent`: another node contains the child clearly better than its parent.

use super::{Ctx, Rule};
use crate::model::audit::{Finding, Suggestion};
use crate::model::gaussian::PhraseId;

/// Fires when the candidate search's best broader node b (placed, not a descendant, not
/// the parent, broader by more than `better_parent_broader`) has KL(child ‖ b) lower than
/// KL(child ‖ parent) by more than max(`better_parent_margin`, `better_parent_ratio` ·
/// KL(child ‖ parent)), and contains the child at least as well as the parent up to
/// `better_parent_containment_slack`. Score is the KL gain in nats.
pub(super) fn check(ctx: &Ctx, p: PhraseId, out: &mut Vec<Finding>) {
    let tree = &ctx.eff.tree;
    if !tree.is_placed(p) {
        return;
    }
    let Some(par) = tree.parent(p) else {
        return;
    };
    let cfg = ctx.cfg;
    let s = &ctx.stats.nodes[p as usize];
    let pl = &ctx.placement[p as usize];
    let (Some((b, kb)), Some(kp)) = (pl.best, s.kl_to_parent) else {
        return;
    };
    let need = cfg.better_parent_margin.max(cfg.better_parent_ratio * kp);
    let gain = kp - kb;
    let cont_par = s.containment.map_or(0.0, |c| c.value);
    let cont_best = pl.best_containment;
    let contains =
        cont_best.is_some_and(|c| c.value >= cont_par - cfg.better_parent_containment_slack);
    if gain > need && contains {
        let pinned = ctx.pinned(p);
        out.push(Rule::BetterParent.finding(
            ctx,
            p,
            Some(b),
            gain,
            need,
            format!(
                "\"{}\" fits \"{}\" better than its parent \"{}\": KL {:.2} vs {:.2} nats, containment {:.1} % vs {:.1} %",
                ctx.label(p),
                ctx.label(b),
                ctx.label(par),
                kb,
                kp,
                100.0 * cont_best.map_or(0.0, |c| c.value),
                100.0 * cont_par
            ),
            if pinned {
                Suggestion {
                    action: "keep (pinned)".into(),
                    target: Some(ctx.id(b)),
                    edit: None,
                }
            } else {
                ctx.reparent(p, b)
            },
            ctx.approved(p) || pinned,
        ));
    }
}
