//! `unplaced`: a phrase neither in the tree, merged nor excluded.

use super::{Ctx, Rule};
use crate::model::audit::Finding;
use crate::model::gaussian::PhraseId;

/// Fires on every phrase that is not a node, not merged into another and not excluded;
/// score 1 against threshold 0. Suggests placing it under the best broader node found by
/// the candidate search, else a review.
pub(super) fn check(ctx: &Ctx, p: PhraseId, out: &mut Vec<Finding>) {
    let i = p as usize;
    let eff = ctx.eff;
    if eff.tree.is_placed(p) || eff.alias_of[i].is_some() || eff.excluded[i] {
        return;
    }
    let (sugg, other) = match ctx.placement[i].best {
        Some((b, _)) => (ctx.reparent(p, b), Some(b)),
        None => (ctx.review(), None),
    };
    out.push(Rule::Unplaced.finding(
        ctx,
        p,
        other,
        1.0,
        0.0,
        format!(
            "\"{}\" is not in the tree, not merged and not excluded",
            ctx.label(p)
        ),
        sugg,
        ctx.approved(p),
    ));
}

#[cfg(test)]
mod tests {
    use crate::model::audit::tests::{of_rule, small_1d};
    use crate::model::audit::{AuditConfig, Rule, audit};

    /// Root N(0, 100), a N(−3, 1) in the tree, `loose` N(−3, 0.5) not.
    fn project() -> (
        crate::model::PhraseTable,
        crate::model::Gaussians,
        crate::model::effective::EffectiveTree,
    ) {
        small_1d(
            &[("r", 0.0, 100.0), ("a", -3.0, 1.0), ("loose", -3.0, 0.5)],
            &[("a", "r")],
        )
    }

    #[test]
    fn fires_on_a_phrase_outside_the_tree() {
        let (t, g, eff) = project();
        let r = audit(&g, &t, &eff, &[], &AuditConfig::default());
        let f = of_rule(&r, Rule::Unplaced);
        assert_eq!(f.len(), 1);
        assert_eq!(f[0].node, 2);
        // broader by more than 1.5 nats of ln det: r (ln 100 − ln 0.5 = 5.3), not a
        // (ln 2 = 0.69), so the root is the suggested place
        assert_eq!(
            f[0].suggestion.as_ref().unwrap().target.as_deref(),
            Some("r")
        );
    }

    #[test]
    fn is_silent_on_excluded_and_merged_phrases() {
        let (t, g, mut eff) = project();
        eff.excluded[2] = true;
        let r = audit(&g, &t, &eff, &[], &AuditConfig::default());
        assert!(of_rule(&r, Rule::Unplaced).is_empty());
        let (t, g, mut eff) = project();
        eff.alias_of[2] = Some(1);
        let r = audit(&g, &t, &eff, &[], &AuditConfig::default());
        assert!(of_rule(&r, Rule::Unplaced).is_empty());
    }
}
