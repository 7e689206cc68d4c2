//! A node between two parents: its current parent and the one a placement finding
//! suggests, in the projection that separates the two parents best, with the numbers for
//! a caption.
//!
//! The projection is the contrast axis through the two parents' means plus the orthogonal
//! axis that explains most of the remaining spread of the three distributions
//! ([`projection::contrast`]); when the two means coincide it falls back to PCA.

use super::audit::{AuditReport, Finding};
use super::edit::Edit;
use super::gaussian::{Gaussians, PhraseId, Sampled, containment, kl};
use super::phrase::PhraseTable;
use super::projection::{self, Projection};

/// Samples per containment estimate of the caption.
pub const SAMPLES: usize = 4000;
/// Probability level of the containment region.
pub const ALPHA: f64 = 0.95;

/// How well one parent holds the node.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ParentFit {
    /// The parent.
    pub parent: PhraseId,
    /// KL(node ‖ parent), nats.
    pub kl: f64,
    /// Share of the node inside the parent's 95 % region.
    pub containment: Sampled,
}

/// The node, its current parent and the suggested parent.
#[derive(Debug, Clone, PartialEq)]
pub struct TwoParents {
    /// The node.
    pub node: PhraseId,
    /// Its current parent.
    pub current: ParentFit,
    /// The parent the finding suggests.
    pub suggested: ParentFit,
    /// The projection that separates the two parents.
    pub projection: Projection,
}

/// The suggested new parent of a placement finding: the parent of its reparent edit.
pub fn suggested_parent(f: &Finding, phrases: &PhraseTable) -> Option<PhraseId> {
    match f.suggestion.as_ref()?.edit.as_ref()? {
        Edit::Reparent { node, parent } if phrases.find(node) == Some(f.node) => {
            phrases.find(parent)
        }
        _ => None,
    }
}

/// The first open finding about `node` that suggests moving it (its new parent).
pub fn placement_of(
    report: &AuditReport,
    phrases: &PhraseTable,
    node: PhraseId,
) -> Option<(usize, PhraseId)> {
    report
        .findings
        .iter()
        .enumerate()
        .filter(|(_, f)| f.node == node && !f.accepted)
        .find_map(|(i, f)| suggested_parent(f, phrases).map(|p| (i, p)))
}

fn fit(g: &Gaussians, node: PhraseId, parent: PhraseId) -> ParentFit {
    let (a, b) = (g.get(node as usize), g.get(parent as usize));
    ParentFit {
        parent,
        kl: kl(&a, &b),
        containment: containment(&a, &b, ALPHA, SAMPLES, u64::from(node)),
    }
}

/// The two-parent view of `node` (None in one dimension).
pub fn two_parents(
    g: &Gaussians,
    node: PhraseId,
    current: PhraseId,
    suggested: PhraseId,
) -> Option<TwoParents> {
    let views = [
        g.get(node as usize),
        g.get(current as usize),
        g.get(suggested as usize),
    ];
    let projection =
        projection::contrast(&views, &views[1], &views[2]).or_else(|| projection::pca(&views))?;
    Some(TwoParents {
        node,
        current: fit(g, node, current),
        suggested: fit(g, node, suggested),
        projection,
    })
}

impl TwoParents {
    /// "“bird netting” under “cushions and textiles” (now): KL 46.91 nats, 3.1 % inside;
    /// under “animal deterrents” (suggested): KL 1.94 nats, 94.1 % inside".
    pub fn caption(&self, label: &dyn Fn(PhraseId) -> String) -> String {
        let side = |f: &ParentFit, which: &str| {
            format!(
                "under \"{}\" ({which}): KL {:.2} nats, {:.1} % inside (± {:.1})",
                label(f.parent),
                f.kl,
                100.0 * f.containment.value,
                100.0 * f.containment.std_error
            )
        };
        format!(
            "\"{}\" {}; {}",
            label(self.node),
            side(&self.current, "now"),
            side(&self.suggested, "suggested")
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::gaussian::CovarianceKind;

    #[test]
    fn the_first_axis_runs_through_the_two_parents() {
        // 3-d diagonal Gaussians: the parents differ along (1, 1, 0)/√2
        let means = vec![0.0, 0.0, 0.0, 1.0, 1.0, 0.0, 3.0, 3.0, 0.0];
        let vars = vec![0.2, 0.2, 0.2, 2.0, 2.0, 5.0, 2.0, 2.0, 5.0];
        let g = Gaussians::from_diagonal(3, 3, means, vars, 1e-6).unwrap();
        assert_eq!(g.kind(), CovarianceKind::Diagonal);
        let t = two_parents(&g, 0, 1, 2).unwrap();
        let a = &t.projection.axes[0];
        let s = std::f64::consts::FRAC_1_SQRT_2;
        // counted by hand: the unit vector from mean 1 to mean 2
        assert!((a[0] - s).abs() < 1e-9 && (a[1] - s).abs() < 1e-9 && a[2].abs() < 1e-9);
        // the second axis is orthogonal: here the remaining spread is largest along z
        let b = &t.projection.axes[1];
        assert!(b[2].abs() > 0.99, "{b:?}");
        // the caption's numbers are the divergences of the model
        assert_eq!(t.current.kl, kl(&g.get(0), &g.get(1)));
        assert_eq!(t.suggested.kl, kl(&g.get(0), &g.get(2)));
        assert!(t.current.kl < t.suggested.kl);
        let c = t.caption(&|p| format!("p{p}"));
        assert!(c.starts_with("\"p0\" under \"p1\" (now): KL"), "{c}");
        assert!(c.contains("under \"p2\" (suggested)"), "{c}");
    }

    #[test]
    fn coinciding_parent_means_fall_back_to_pca() {
        let means = vec![0.0, 0.0, 1.0, 1.0, 1.0, 1.0];
        let vars = vec![0.2, 0.2, 2.0, 2.0, 3.0, 1.0];
        let g = Gaussians::from_diagonal(3, 2, means, vars, 1e-6).unwrap();
        let t = two_parents(&g, 0, 1, 2).unwrap();
        assert_eq!(t.projection.name, "PCA");
    }
}
