//! `coverage-gap`: children that cover too little of their parent.

use super::{Ctx, Rule};
use crate::model::audit::Finding;
use crate::model::gaussian::PhraseId;

/// Fires on a node with ≥ 2 children whose sampled coverage c is below the threshold t in
/// force ([`Ctx::coverage_threshold_of`]) by more than two standard errors at t:
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

#[cfg(test)]
mod tests {
    use crate::model::audit::tests::{cfg_samples, of_rule, small_1d};
    use crate::model::audit::{AuditReport, Rule, audit};

    /// R N(0, 1) with children A and B, A with children a1 and a2, all copies of N(0, 1);
    /// B with children b1 N(m, v) and b2 N(−m, v).
    fn run(m: f64, v: f64) -> AuditReport {
        let (t, g, eff) = small_1d(
            &[
                ("R", 0.0, 1.0),
                ("A", 0.0, 1.0),
                ("B", 0.0, 1.0),
                ("a1", 0.0, 1.0),
                ("a2", 0.0, 1.0),
                ("b1", m, v),
                ("b2", -m, v),
            ],
            &[
                ("A", "R"),
                ("B", "R"),
                ("a1", "A"),
                ("a2", "A"),
                ("b1", "B"),
                ("b2", "B"),
            ],
        );
        audit(&g, &t, &eff, &[], &cfg_samples(1024))
    }

    #[test]
    fn fires_on_children_far_from_their_parent() {
        // A copy's 95 % region is its parent's, so R and A are covered α = 0.95 (definition
        // of the χ² quantile, docs/maths.md); B by N(±5, 0.01): P(|X ∓ 5| ≤ 0.196) ≈ 2 ·
        // (Φ(5.196) − Φ(4.804)) < 10⁻⁶ (NIST/SEMATECH e-Handbook, normal table). Median of
        // (0, 0.95, 0.95) is 0.95, so t = min(0.6, 0.7 · 0.95) = 0.6 and only B fires.
        let r = run(5.0, 0.01);
        assert_eq!(r.coverage_threshold, 0.6);
        let f = of_rule(&r, Rule::CoverageGap);
        assert_eq!(f.len(), 1);
        assert_eq!(f[0].node, 2);
        assert!(f[0].score < 0.01, "{}", f[0].score);
    }

    #[test]
    fn is_silent_when_every_node_is_covered() {
        // all copies: every coverage is about 0.95 > 0.6
        let r = run(0.0, 1.0);
        assert!(of_rule(&r, Rule::CoverageGap).is_empty());
    }
}
