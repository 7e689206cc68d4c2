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

#[cfg(test)]
mod tests {
    use crate::model::audit::tests::{cfg_samples, of_rule, small_1d};
    use crate::model::audit::{Rule, audit};

    // Parent N(0, 1): its 95 % region is |x| ≤ 1.96. Standard normal CDF values from the
    // NIST/SEMATECH e-Handbook of Statistical Methods, table 1.3.6.7.1.

    #[test]
    fn fires_when_the_child_lies_mostly_outside() {
        // child N(3, 1): P(|X| ≤ 1.96) = Φ(−1.04) − Φ(−4.96) = 1 − 0.8508 − 0.0000 = 0.1492
        let (t, g, eff) = small_1d(&[("p", 0.0, 1.0), ("c", 3.0, 1.0)], &[("c", "p")]);
        let r = audit(&g, &t, &eff, &[], &cfg_samples(4096));
        let f = of_rule(&r, Rule::WeakInclusion);
        assert_eq!(f.len(), 1);
        assert_eq!((f[0].node, f[0].other), (1, Some(0)));
        let se = r.stats.nodes[1].containment.unwrap().std_error;
        assert!((f[0].score - 0.1492).abs() <= 3.0 * se, "{}", f[0].score);
    }

    #[test]
    fn is_silent_when_the_child_lies_inside() {
        // child N(0.5, 0.5²): P(|X| ≤ 1.96) = Φ(2.92) − Φ(−4.92) = 0.9982 ≥ 0.3
        let (t, g, eff) = small_1d(&[("p", 0.0, 1.0), ("c", 0.5, 0.25)], &[("c", "p")]);
        let r = audit(&g, &t, &eff, &[], &cfg_samples(4096));
        assert!(of_rule(&r, Rule::WeakInclusion).is_empty());
        let c = r.stats.nodes[1].containment.unwrap();
        assert!(
            (c.value - 0.9982).abs() <= 3.0 * c.std_error.max(1e-3),
            "{c:?}"
        );
    }
}
