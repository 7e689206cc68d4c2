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

#[cfg(test)]
mod tests {
    use crate::model::audit::tests::{of_rule, small_1d};
    use crate::model::audit::{AuditConfig, Rule, audit};

    /// Parent N(0, 1), child N(0, v): the excess is ln v (ln det of a diagonal Σ is the sum
    /// of the log variances, closed form derived in docs/maths.md).
    fn run(v: f64) -> crate::model::audit::AuditReport {
        let (t, g, eff) = small_1d(&[("p", 0.0, 1.0), ("c", 0.0, v)], &[("c", "p")]);
        audit(&g, &t, &eff, &[], &AuditConfig::default())
    }

    #[test]
    fn fires_when_the_child_is_broader_than_the_margin() {
        let r = run(4.0);
        let f = of_rule(&r, Rule::InvertedGenerality);
        assert_eq!(f.len(), 1);
        assert_eq!((f[0].node, f[0].other), (1, Some(0)));
        assert!((f[0].score - 4f64.ln()).abs() < 1e-6, "{}", f[0].score);
        assert_eq!(f[0].threshold, 0.5);
    }

    #[test]
    fn is_silent_within_the_margin() {
        // ln 1.6 = 0.47 < 0.5
        assert!(of_rule(&run(1.6), Rule::InvertedGenerality).is_empty());
    }
}
