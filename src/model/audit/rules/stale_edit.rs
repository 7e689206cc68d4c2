//! `stale-edit`: an override edit that no longer applies.

use super::{Ctx, Rule};
use crate::model::audit::Finding;

/// One finding on the root per apply problem (score 1 against threshold 0), never
/// accepted; suggests reviewing the override layer.
pub(super) fn check(ctx: &Ctx, out: &mut Vec<Finding>) {
    let root = ctx.eff.tree.root();
    for pr in ctx.problems {
        out.push(Rule::StaleEdit.finding(
            ctx,
            root,
            None,
            1.0,
            0.0,
            format!(
                "override edit #{} ({}) no longer applies: {}",
                pr.index, pr.op, pr.reason
            ),
            ctx.review(),
            false,
        ));
    }
}
