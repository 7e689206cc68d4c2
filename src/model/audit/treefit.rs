//! Tree-level fit: does the tree *as a whole* agree with the embeddings?
//!
//! The audit's rules judge one node at a time. When the tree and the embeddings disagree
//! everywhere (a tree made for other embeddings, shuffled rows, random means), every rule
//! fires on a large share of the nodes and the report drowns the one useful message. So
//! the audit first measures two tree-wide figures and compares them with what a *random
//! parent* gives (`docs/maths.md`, section 15, "Tree-level fit"):
//!
//! - the share of the nodes (not the root) whose containment in their parent is at least
//!   `containment_min`, against the same share for random parents;
//! - the median of KL(node ‖ parent), against the median of KL(node ‖ r) for a random
//!   parent r ≠ node.
//!
//! The random pairs are [`BASELINE_PAIRS`] nodes spread evenly over the rows, each with the
//! parent of another node drawn at random (a generator seeded from the audit's seed, so the
//! figures are reproducible): random parents with the generality of real ones. The tree *does not fit* when the median KL to the parent is at
//! least [`KL_RATIO_MAX`] times the random median **and** fewer than [`CONTAINED_MIN`] of
//! the nodes are contained in their parent; trees with fewer than [`MIN_NODES`] measured
//! nodes are too small to judge and always fit. A fitting tree's reports are unchanged; a
//! misfit is said at the top of every report and in the workbench, and the per-rule
//! listings are capped at [`LISTED_PER_RULE`] (counts stay exact).

use rand::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;
use serde::Serialize;

use crate::model::effective::EffectiveTree;
use crate::model::gaussian::{Gaussians, PhraseId, kl};
use crate::model::stats::{Stats, StatsEngine};

/// Random (node, parent) pairs of the baseline.
pub const BASELINE_PAIRS: usize = 1000;
/// The tree does not fit when median KL(node ‖ parent) ≥ this × the random median …
pub const KL_RATIO_MAX: f64 = 0.5;
/// … and fewer than this share of the nodes are contained in their parent.
pub const CONTAINED_MIN: f64 = 0.5;
/// Fewer measured nodes than this: too small to judge (always fits).
pub const MIN_NODES: usize = 20;
/// Findings listed per rule in the reports of a tree that does not fit (unless
/// `--all-findings`).
pub const LISTED_PER_RULE: usize = 50;

/// The tree-level fit of an audit (see the module documentation).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TreeFit {
    /// Nodes measured: placed nodes with a parent.
    pub nodes: usize,
    /// Share of them whose containment in the parent is ≥ `containment_min`.
    pub contained_share: f64,
    /// Median KL(node ‖ parent) in nats.
    pub median_kl: f64,
    /// Random (node, parent of a random other node) pairs of the baseline.
    pub baseline_pairs: usize,
    /// Share of the random pairs with containment ≥ `containment_min`.
    pub baseline_contained_share: f64,
    /// Median KL(node ‖ random parent) in nats.
    pub baseline_median_kl: f64,
    /// The tree as a whole agrees with the embeddings (see the module documentation).
    pub fits: bool,
}

impl Default for TreeFit {
    /// An empty tree: nothing measured, fits.
    fn default() -> Self {
        TreeFit {
            nodes: 0,
            contained_share: 0.0,
            median_kl: 0.0,
            baseline_pairs: 0,
            baseline_contained_share: 0.0,
            baseline_median_kl: 0.0,
            fits: true,
        }
    }
}

impl TreeFit {
    /// median KL to the parent / median KL to a random parent (∞ when the random median is
    /// 0 and the tree's is not, 0 when both are).
    pub fn kl_ratio(&self) -> f64 {
        if self.baseline_median_kl > 0.0 {
            self.median_kl / self.baseline_median_kl
        } else if self.median_kl > 0.0 {
            f64::INFINITY
        } else {
            0.0
        }
    }

    /// One line for a person, for the top of a report of a tree that does not fit.
    pub fn headline(&self) -> String {
        format!(
            "THE TREE AS A WHOLE DOES NOT FIT THE EMBEDDINGS: median KL to the parent {:.2} nats vs {:.2} for a random parent (ratio {:.2}); {:.1} % of {} nodes contained in their parent vs {:.1} % for random parents. Per-node findings are mostly consequences of this; fix the tree or the embeddings first.",
            self.median_kl,
            self.baseline_median_kl,
            self.kl_ratio(),
            100.0 * self.contained_share,
            self.nodes,
            100.0 * self.baseline_contained_share
        )
    }
}

/// The median of `v` (the upper middle value for an even count; 0 when empty). Reorders `v`.
fn median(v: &mut [f64]) -> f64 {
    if v.is_empty() {
        return 0.0;
    }
    let mid = v.len() / 2;
    *v.select_nth_unstable_by(mid, f64::total_cmp).1
}

/// The random (node, parent) pairs of the last [`measure_cached`], by draw, with their KL
/// and containment (each a function of the pair alone): after an edit only the pairs whose
/// drawn parent moved are measured again.
#[derive(Debug, Clone, Default)]
pub(super) struct BaselineCache {
    pairs: Vec<Option<(PhraseId, PhraseId, f64, f64)>>,
}

/// Measure the tree-level fit from the per-node statistics and a random-parent baseline
/// (the tests' entry; the auditor keeps a cache, [`measure_cached`]).
#[cfg(test)]
pub(super) fn measure(
    g: &Gaussians,
    eff: &EffectiveTree,
    engine: &StatsEngine,
    stats: &Stats,
    containment_min: f64,
    seed: u64,
) -> TreeFit {
    let mut cache = BaselineCache::default();
    measure_cached(g, eff, engine, stats, containment_min, seed, &mut cache)
}

/// [`measure`], reusing the figures of the pairs drawn the same as last time in `cache`
/// (and leaving this measure's pairs there).
pub(super) fn measure_cached(
    g: &Gaussians,
    eff: &EffectiveTree,
    engine: &StatsEngine,
    stats: &Stats,
    containment_min: f64,
    seed: u64,
    cache: &mut BaselineCache,
) -> TreeFit {
    let n = eff.tree.table_len();
    let children: Vec<PhraseId> = (0..n as PhraseId)
        .filter(|&p| eff.tree.is_placed(p) && eff.tree.parent(p).is_some())
        .collect();
    let mut kls: Vec<f64> = Vec::with_capacity(children.len());
    let mut contained = 0usize;
    for &p in &children {
        let s = &stats.nodes[p as usize];
        if let Some(k) = s.kl_to_parent {
            kls.push(k);
        }
        contained += usize::from(s.containment.is_some_and(|c| c.value >= containment_min));
    }
    let mut fit = TreeFit {
        nodes: children.len(),
        contained_share: contained as f64 / children.len().max(1) as f64,
        median_kl: median(&mut kls),
        ..TreeFit::default()
    };
    if children.is_empty() {
        return fit;
    }
    let m = BASELINE_PAIRS.min(children.len());
    cache.pairs.resize(m, None);
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed ^ 0x6669_745f_7261_6e64);
    let mut base_kl = Vec::with_capacity(m);
    let mut base_in = 0usize;
    for j in 0..m {
        let c = children[j * children.len() / m];
        // the parent of a random other node: random parents with the generality
        // distribution of real ones (a leaf as "parent" would flatter the tree)
        let mut r = None;
        for _ in 0..64 {
            let other = children[rng.gen_range(0..children.len())];
            let x = eff.tree.parent(other).unwrap_or(other);
            if x != c {
                r = Some(x);
                break;
            }
        }
        let Some(r) = r else {
            cache.pairs[j] = None;
            continue;
        };
        let (k, inside) = match cache.pairs[j] {
            Some((c0, r0, k, inside)) if (c0, r0) == (c, r) => (k, inside),
            _ => {
                let k = kl(&g.get(c as usize), &g.get(r as usize));
                let inside = engine.containment(g, c, r).value;
                cache.pairs[j] = Some((c, r, k, inside));
                (k, inside)
            }
        };
        base_kl.push(k);
        base_in += usize::from(inside >= containment_min);
    }
    fit.baseline_pairs = base_kl.len();
    fit.baseline_contained_share = base_in as f64 / base_kl.len().max(1) as f64;
    fit.baseline_median_kl = median(&mut base_kl);
    fit.fits = fit.nodes < MIN_NODES
        || fit.kl_ratio() < KL_RATIO_MAX
        || fit.contained_share >= CONTAINED_MIN;
    fit
}

#[cfg(test)]
pub(super) mod tests {
    use super::*;
    use crate::model::phrase::{PhraseRecord, PhraseTable};
    use crate::model::tree::Tree;

    /// Rows `n{i}` with the given means and variances (row-major, d per row) and parents.
    pub(crate) fn small_tree(
        d: usize,
        means: &[f64],
        vars: &[f64],
        parent: &[Option<usize>],
    ) -> (Gaussians, EffectiveTree) {
        let n = parent.len();
        let recs: Vec<PhraseRecord> = (0..n)
            .map(|i| PhraseRecord {
                id: Some(format!("n{i}")),
                label: format!("node {i}"),
            })
            .collect();
        let t = PhraseTable::from_records(&recs).unwrap();
        let g = Gaussians::from_diagonal(n, d, means.to_vec(), vars.to_vec(), 0.0).unwrap();
        let edges: Vec<(PhraseId, PhraseId)> = parent
            .iter()
            .enumerate()
            .filter_map(|(c, p)| p.map(|p| (c as PhraseId, p as PhraseId)))
            .collect();
        let root = (0..n).find(|&i| parent[i].is_none()).unwrap_or(0) as PhraseId;
        let tree = Tree::from_edges(&t, root, &edges).unwrap();
        (g, EffectiveTree::from_base(&tree, &t))
    }

    /// A tree of `n` nodes (node i's parent is (i − 1) / 8, an 8-ary heap), unit variances.
    /// With `nested`, a child's mean is its parent's plus N(0, 0.1²) per coordinate and its
    /// variances shrink with depth; otherwise every mean is an independent N(0, τ² I) draw.
    fn heap(n: usize, d: usize, tau: f64, nested: bool) -> TreeFit {
        use rand_distr::{Distribution, StandardNormal};
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(5);
        let mut means = vec![0.0f64; n * d];
        let mut vars = vec![1.0f64; n * d];
        let mut depth = vec![0i32; n];
        for i in 0..n {
            let par = if i == 0 { None } else { Some((i - 1) / 8) };
            if let Some(p) = par {
                depth[i] = depth[p] + 1;
            }
            for k in 0..d {
                let z: f64 = StandardNormal.sample(&mut rng);
                means[i * d + k] = match (nested, par) {
                    (true, Some(p)) => means[p * d + k] + 0.1 * z,
                    _ => tau * z,
                };
                if nested {
                    vars[i * d + k] = 0.25f64.powi(depth[i]);
                }
            }
        }
        let parents: Vec<Option<usize>> = (0..n)
            .map(|i| if i == 0 { None } else { Some((i - 1) / 8) })
            .collect();
        let (g, eff) = small_tree(d, &means, &vars, &parents);
        let cfg = crate::model::audit::AuditConfig::default();
        let engine = StatsEngine::new(&g, &cfg.stats());
        let stats = engine.compute(&g, &eff);
        measure(&g, &eff, &engine, &stats, cfg.containment_min, cfg.seed)
    }

    #[test]
    fn random_means_give_the_chi_square_median_and_do_not_fit() {
        // Means iid N(0, τ² I), all Σ = I: KL(c ‖ x) = ½ ‖μc − μx‖² and μc − μx ~ N(0, 2τ² I),
        // so KL = τ² χ²_d for the parent and for a random node alike. Independent value:
        // median of χ²₁₆ = 15.338499 (scipy.stats.chi2.median(16), SciPy 1.17.1).
        let tau = 1.0;
        let fit = heap(4000, 16, tau, false);
        let want = tau * tau * 15.338_498_885;
        assert!(
            (fit.median_kl / want - 1.0).abs() < 0.03,
            "{} vs {want}",
            fit.median_kl
        );
        assert!(
            (fit.baseline_median_kl / want - 1.0).abs() < 0.06,
            "{} vs {want}",
            fit.baseline_median_kl
        );
        assert_eq!(fit.nodes, 3999);
        assert_eq!(fit.baseline_pairs, 1000);
        assert!(!fit.fits, "{fit:?}");
        assert!(fit.headline().contains("DOES NOT FIT"));
    }

    #[test]
    fn a_nested_tree_fits() {
        let fit = heap(2000, 16, 1.0, true);
        assert!(fit.fits, "{fit:?}");
        assert!(fit.kl_ratio() < KL_RATIO_MAX, "{fit:?}");
    }

    #[test]
    fn small_trees_always_fit_and_medians_are_upper_middle() {
        let fit = heap(10, 4, 1.0, false);
        assert!(fit.fits && fit.nodes == 9, "{fit:?}");
        assert_eq!(median(&mut [3.0, 1.0, 2.0, 4.0]), 3.0);
        assert_eq!(median(&mut []), 0.0);
    }
}
