//! `near-duplicate`: two nodes that nearly coincide.

use std::fmt::Write as _;

use super::{Ctx, Rule};
use crate::model::audit::{Finding, Suggestion};
use crate::model::edit::Edit;
use crate::model::gaussian::PhraseId;

/// Fires for every placed partner x of the candidate search (Bhattacharyya coefficient ≥
/// `duplicate_bc_min`, abs(Δ ln det Σ) ≤ `duplicate_generality_margin`); score is the
/// coefficient. A pair found from both sides is reported once, from its lower row. Suggests
/// merging the smaller subtree into the larger (ties: the later row into the earlier). Not
/// node-local: a pair belongs to two nodes.
pub(super) fn check(ctx: &Ctx, p: PhraseId, out: &mut Vec<Finding>) {
    let tree = &ctx.eff.tree;
    if !tree.is_placed(p) {
        return;
    }
    let i = p as usize;
    let nodes = &ctx.stats.nodes;
    for &(x, bc) in &ctx.placement[i].dups {
        if !tree.is_placed(x) {
            continue;
        }
        // a pair found from both sides is reported once, from its lower row
        if x < p && ctx.placement[x as usize].dups.iter().any(|&(y, _)| y == p) {
            continue;
        }
        let (sz_p, sz_x) = (nodes[i].subtree, nodes[x as usize].subtree);
        // merge the smaller subtree into the larger; ties: the later row into the earlier
        let (src, into) = if sz_p < sz_x || (sz_p == sz_x && p > x) {
            (p, x)
        } else {
            (x, p)
        };
        let mut expl = String::new();
        let _ = write!(
            expl,
            "\"{}\" and \"{}\" nearly coincide: Bhattacharyya coefficient {:.3}, ln det Σ {:.2} vs {:.2}",
            ctx.label(src),
            ctx.label(into),
            bc,
            nodes[src as usize].log_det,
            nodes[into as usize].log_det
        );
        out.push(Rule::NearDuplicate.finding(
            ctx,
            src,
            Some(into),
            bc,
            ctx.cfg.duplicate_bc_min,
            expl,
            Suggestion {
                action: "merge".into(),
                target: Some(ctx.id(into)),
                edit: Some(Edit::Merge {
                    sources: vec![ctx.id(src)],
                    into: ctx.id(into),
                }),
            },
            ctx.approved(src) || ctx.approved(into),
        ));
    }
}
