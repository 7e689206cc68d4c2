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

#[cfg(test)]
mod tests {
    use crate::model::audit::tests::{of_rule, small_1d};
    use crate::model::audit::{AuditConfig, AuditReport, Rule, audit};

    /// Root N(0, 100), a N(−10, 1), b N(10, 1) under it, c N(10, 0.1) under `parent_of_c`.
    fn run(parent_of_c: &str) -> AuditReport {
        let (t, g, eff) = small_1d(
            &[
                ("r", 0.0, 100.0),
                ("a", -10.0, 1.0),
                ("b", 10.0, 1.0),
                ("c", 10.0, 0.1),
            ],
            &[("a", "r"), ("b", "r"), ("c", parent_of_c)],
        );
        audit(&g, &t, &eff, &[], &AuditConfig::default())
    }

    #[test]
    fn fires_when_another_node_fits_clearly_better() {
        // univariate KL(N(μ0, s0) ‖ N(μ1, s1)) = ½ ln(s1 / s0) + (s0 + (μ0 − μ1)²) / (2 s1) − ½
        // (variances s; Kullback & Leibler 1951, closed form derived in docs/maths.md):
        // KL(c ‖ a) = ½ ln 10 + 400.1 / 2 − ½ = 200.701293, KL(c ‖ b) = ½ ln 10 + 0.05 − ½,
        // so the gain is exactly 200 and the threshold max(1.5, 0.1 · 200.701293).
        let r = run("a");
        let f = of_rule(&r, Rule::BetterParent);
        assert_eq!(f.len(), 1, "{f:#?}");
        assert_eq!((f[0].node, f[0].other), (3, Some(2)));
        assert!((f[0].score - 200.0).abs() < 1e-3, "{}", f[0].score);
        assert!(
            (f[0].threshold - 20.0701293).abs() < 1e-4,
            "{}",
            f[0].threshold
        );
        assert_eq!(
            f[0].suggestion.as_ref().unwrap().target.as_deref(),
            Some("b")
        );
    }

    #[test]
    fn is_silent_when_the_parent_is_the_best_fit() {
        // under b: the best other candidate is the root, KL(c ‖ r) = ½ ln 1000 + 100.1 / 200
        // − ½ = 3.4544 > KL(c ‖ b) = 0.7013, so there is no gain
        assert!(of_rule(&run("b"), Rule::BetterParent).is_empty());
    }
}
