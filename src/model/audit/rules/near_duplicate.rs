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

#[cfg(test)]
mod tests {
    use crate::model::audit::tests::{of_rule, small_1d};
    use crate::model::audit::{AuditConfig, AuditReport, Rule, audit};

    /// Root N(0, 100) with children x N(0, 1) and y N(μ, 1).
    fn run(mu: f64) -> AuditReport {
        let (t, g, eff) = small_1d(
            &[("r", 0.0, 100.0), ("x", 0.0, 1.0), ("y", mu, 1.0)],
            &[("x", "r"), ("y", "r")],
        );
        audit(&g, &t, &eff, &[], &AuditConfig::default())
    }

    // Univariate Bhattacharyya distance (Bhattacharyya 1943): D_B = (μ1 − μ2)² / (4 (s1 + s2))
    // + ½ ln((s1 + s2) / (2 √(s1 s2))) for variances s; the coefficient is exp(−D_B).

    #[test]
    fn fires_on_nearly_coinciding_siblings() {
        // μ = 0.5: D_B = 0.25 / 8 = 0.03125, BC = exp(−0.03125) = 0.969233 ≥ 0.9
        let r = run(0.5);
        let f = of_rule(&r, Rule::NearDuplicate);
        assert_eq!(f.len(), 1);
        // equal subtrees: the later row merges into the earlier
        assert_eq!((f[0].node, f[0].other), (2, Some(1)));
        assert!(
            (f[0].score - (-0.03125f64).exp()).abs() < 1e-6,
            "{}",
            f[0].score
        );
        assert_eq!(f[0].suggestion.as_ref().unwrap().action, "merge");
    }

    #[test]
    fn is_silent_on_distinct_siblings() {
        // μ = 2: D_B = 4 / 8 = 0.5, BC = exp(−0.5) = 0.6065 < 0.9
        assert!(of_rule(&run(2.0), Rule::NearDuplicate).is_empty());
    }
}
