//! Per-node statistics of an effective tree: generality, inclusion in the parent, coverage of
//! a node by its children, sibling overlap, and tree-wide histograms for the GUI.
//!
//! Containment and coverage are Monte-Carlo estimates (`docs/maths.md`, "containment of p in
//! q at level α"). Every node uses the same fixed bank of standard-normal draws z₁ … z_N (common
//! random numbers, drawn once from the configured seed): a node's points are μ + L zₛ. Each
//! estimate is still a binomial share of N independent points, so its standard error is
//! √(c (1 − c) / N); sharing the bank makes the result reproducible byte for byte and lets the
//! inner loop run over the samples of one dimension at a time, which the compiler
//! vectorises. For diagonal covariance that loop runs in `f32` (the stored precision of the
//! embeddings); the χ² comparison it feeds is insensitive to the rounding.

use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};
use rand_xoshiro::Xoshiro256PlusPlus;
use rayon::prelude::*;
use serde::Serialize;

use super::effective::EffectiveTree;
use super::gaussian::{
    CovView, CovarianceKind, GaussianView, Gaussians, PhraseId, Sampled, bhattacharyya_coefficient,
    chi2_quantile, kl, mahalanobis2,
};
use super::kernels;

/// Statistics of one phrase. Phrases that are not nodes of the effective tree (unplaced,
/// merged away, excluded) have `depth == u32::MAX`, zero fan-out and subtree, and no
/// parent or child figures.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NodeStats {
    /// ln det Σ (generality).
    pub log_det: f64,
    /// Differential entropy in nats.
    pub entropy: f64,
    /// Depth (root 0); `u32::MAX` when not in the tree.
    pub depth: u32,
    /// Number of children.
    pub fanout: usize,
    /// Nodes in the subtree, the node included.
    pub subtree: u32,
    /// KL(node ‖ parent) in nats.
    pub kl_to_parent: Option<f64>,
    /// KL(parent ‖ node) in nats.
    pub kl_from_parent: Option<f64>,
    /// Bhattacharyya coefficient between node and parent.
    pub bc_parent: Option<f64>,
    /// Share of the node's mass inside the parent's α-region (sampled).
    pub containment: Option<Sampled>,
    /// Share of the node's mass inside at least one child's α-region (sampled); None for
    /// leaves.
    pub coverage: Option<Sampled>,
}

/// Equal-width histogram.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Histogram {
    /// Lower edge of the first bin.
    pub min: f64,
    /// Upper edge of the last bin.
    pub max: f64,
    /// Count per bin.
    pub counts: Vec<u32>,
}

impl Histogram {
    /// Histogram of `values` over `[min, max]` (the range of the values when None) with
    /// `bins` bins; values outside the range go to the end bins.
    pub fn of(values: &[f64], bins: usize, range: Option<(f64, f64)>) -> Self {
        let bins = bins.max(1);
        let (min, max) = range.unwrap_or_else(|| {
            let lo = values.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            if lo.is_finite() { (lo, hi) } else { (0.0, 1.0) }
        });
        let width = if max > min { max - min } else { 1.0 };
        let mut counts = vec![0u32; bins];
        for &v in values {
            let b = (((v - min) / width) * bins as f64).floor();
            let b = if b.is_nan() {
                0
            } else {
                (b.max(0.0) as usize).min(bins - 1)
            };
            counts[b] += 1;
        }
        Histogram { min, max, counts }
    }

    /// Width of one bin.
    pub fn bin_width(&self) -> f64 {
        (self.max - self.min) / self.counts.len() as f64
    }
}

/// Statistics of every phrase plus tree-wide summaries.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Stats {
    /// One entry per phrase, indexed by `PhraseId`.
    pub nodes: Vec<NodeStats>,
    /// Histogram of ln det Σ over the tree's nodes.
    pub generality: Histogram,
    /// Histogram of containment in the parent over non-root nodes, on [0, 1].
    pub containment: Histogram,
    /// Number of nodes in the tree.
    pub placed: usize,
    /// Probability level α of the regions.
    pub alpha: f64,
    /// Points per sampled estimate.
    pub samples: usize,
}

/// Sampling settings of the statistics: the region level and the shared sample bank. The
/// audit's configuration converts to it (`AuditConfig::stats`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StatsConfig {
    /// Probability level α of a Gaussian's region (default 0.95).
    pub alpha: f64,
    /// Sampled points per containment / coverage estimate (default 256).
    pub samples: usize,
    /// Seed of the sample bank.
    pub seed: u64,
}

impl Default for StatsConfig {
    fn default() -> Self {
        StatsConfig {
            alpha: 0.95,
            samples: 256,
            seed: 0x7472_6565_7772_6974,
        }
    }
}

/// Bins of the tree-wide histograms.
pub const HISTOGRAM_BINS: usize = 20;

/// Bhattacharyya-coefficient matrix of `node`'s children (row/column order = children order
/// in the effective tree). Empty for a leaf.
pub fn sibling_overlap(g: &Gaussians, eff: &EffectiveTree, node: PhraseId) -> Vec<Vec<f64>> {
    let ch = eff.tree.children(node);
    let mut m = vec![vec![1.0; ch.len()]; ch.len()];
    for i in 0..ch.len() {
        for j in (i + 1)..ch.len() {
            let bc = bhattacharyya_coefficient(&g.get(ch[i] as usize), &g.get(ch[j] as usize));
            m[i][j] = bc;
            m[j][i] = bc;
        }
    }
    m
}

/// Compute every statistic of the effective tree (parallel over nodes; deterministic).
pub fn compute_stats(g: &Gaussians, eff: &EffectiveTree, cfg: &StatsConfig) -> Stats {
    let engine = StatsEngine::new(g, cfg);
    engine.compute(g, eff)
}

/// The fixed standard-normal draws shared by every sampled estimate: `dim` rows of
/// `samples` values (row k holds dimension k of every draw).
#[derive(Debug, Clone)]
pub(crate) struct SampleBank {
    samples: usize,
    z: Vec<f32>,
}

impl SampleBank {
    fn new(dim: usize, samples: usize, seed: u64) -> Self {
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
        let mut z = vec![0.0f32; dim * samples];
        // draw point by point so the first N points do not depend on the dimension order
        for s in 0..samples {
            for k in 0..dim {
                let v: f64 = StandardNormal.sample(&mut rng);
                z[k * samples + s] = v as f32;
            }
        }
        SampleBank { samples, z }
    }

    fn point(&self, s: usize, dim: usize) -> Vec<f64> {
        (0..dim)
            .map(|k| self.z[k * self.samples + s] as f64)
            .collect()
    }
}

/// Everything the statistics need besides the tree: the sample bank, the χ² radius and the
/// log determinants of the diagonal parts. Built once per Gaussian table and configuration.
/// It keeps no n × d table: the kernels read the stored variances directly, and standard
/// deviations are taken per call, once per sampled node.
#[derive(Debug, Clone)]
pub(crate) struct StatsEngine {
    alpha: f64,
    r2: f64,
    dim: usize,
    bank: SampleBank,
    /// Whether the covariances are diagonal.
    pub(crate) diagonal: bool,
    /// Σₖ ln σ²ₖ of the diagonal parts (equals ln det Σ when `diagonal`).
    pub(crate) diag_log_det: Vec<f64>,
}

impl StatsEngine {
    pub(crate) fn new(g: &Gaussians, cfg: &StatsConfig) -> Self {
        let d = g.dim().max(1);
        let diagonal = g.kind() == CovarianceKind::Diagonal;
        let diag_log_det = if diagonal && g.dim() > 0 {
            // the table's own ln det Σ: the same sum of the same logarithms in the same
            // order (`Gaussians::from_diagonal*`), so no second n × d pass of `ln`
            g.log_dets().to_vec()
        } else {
            (0..g.len())
                .map(|i| g.variances(i).iter().map(|&v| (v as f64).ln()).sum())
                .collect()
        };
        StatsEngine {
            alpha: cfg.alpha,
            r2: chi2_quantile(d, cfg.alpha),
            dim: g.dim(),
            bank: SampleBank::new(g.dim(), cfg.samples, cfg.seed),
            diagonal,
            diag_log_det,
        }
    }

    /// Share of `p`'s sampled points inside the α-region of at least one of `qs`.
    fn share_inside(&self, g: &Gaussians, p: PhraseId, qs: &[PhraseId]) -> Sampled {
        let n = self.bank.samples;
        let d = self.dim;
        let mut inside = vec![false; n];
        if self.diagonal {
            let r2 = self.r2 as f32;
            let mp = g.mean(p as usize);
            let sp: Vec<f32> = g.variances(p as usize).iter().map(|v| v.sqrt()).collect();
            let mut acc = vec![0.0f32; n];
            for &q in qs {
                let mq = g.mean(q as usize);
                let vq = g.variances(q as usize);
                kernels::mahalanobis_rows(&mut acc, &self.bank.z, mp, &sp, mq, vq);
                for (hit, &m) in inside.iter_mut().zip(&acc) {
                    *hit |= m <= r2;
                }
            }
        } else {
            let gp = g.get(p as usize);
            let views: Vec<GaussianView> = qs.iter().map(|&q| g.get(q as usize)).collect();
            let mut y = vec![0.0f64; d];
            for (s, hit) in inside.iter_mut().enumerate() {
                let x = point_of(&gp, &self.bank.point(s, d));
                *hit = views.iter().any(|q| maha2_into(&x, q, &mut y) <= self.r2);
            }
        }
        let hits = inside.iter().filter(|&&b| b).count();
        let c = hits as f64 / n.max(1) as f64;
        Sampled {
            value: c,
            std_error: (c * (1.0 - c) / n.max(1) as f64).sqrt(),
            samples: n,
        }
    }

    /// Sampled containment of `child` in `parent`.
    pub(crate) fn containment(&self, g: &Gaussians, child: PhraseId, parent: PhraseId) -> Sampled {
        self.share_inside(g, child, &[parent])
    }

    /// Sampled coverage of `node` by `children`.
    pub(crate) fn coverage(&self, g: &Gaussians, node: PhraseId, children: &[PhraseId]) -> Sampled {
        self.share_inside(g, node, children)
    }

    /// Parent and child figures of one phrase (the tree-shape fields are filled by the
    /// caller).
    pub(crate) fn node_figures(
        &self,
        g: &Gaussians,
        eff: &EffectiveTree,
        p: PhraseId,
    ) -> NodeStats {
        let gp = g.get(p as usize);
        let mut s = NodeStats {
            log_det: gp.log_det,
            entropy: gp.entropy(),
            depth: u32::MAX,
            fanout: 0,
            subtree: 0,
            kl_to_parent: None,
            kl_from_parent: None,
            bc_parent: None,
            containment: None,
            coverage: None,
        };
        if !eff.tree.is_placed(p) {
            return s;
        }
        if let Some(par) = eff.tree.parent(p) {
            let gq = g.get(par as usize);
            s.kl_to_parent = Some(kl(&gp, &gq));
            s.kl_from_parent = Some(kl(&gq, &gp));
            s.bc_parent = Some(bhattacharyya_coefficient(&gp, &gq));
            s.containment = Some(self.containment(g, p, par));
        }
        let ch = eff.tree.children(p);
        if !ch.is_empty() {
            s.coverage = Some(self.coverage(g, p, ch));
        }
        s
    }

    /// All statistics, from scratch.
    pub(crate) fn compute(&self, g: &Gaussians, eff: &EffectiveTree) -> Stats {
        let n = eff.tree.table_len();
        let nodes: Vec<NodeStats> = (0..n as PhraseId)
            .into_par_iter()
            .map(|p| self.node_figures(g, eff, p))
            .collect();
        let mut stats = Stats {
            nodes,
            generality: Histogram::of(&[], 1, None),
            containment: Histogram::of(&[], 1, None),
            placed: 0,
            alpha: self.alpha,
            samples: self.bank.samples,
        };
        refresh_shape(&mut stats, eff, &Shape::of(eff));
        stats
    }

    /// Recompute the parent figures of `relation` and the child figures of `coverage`, then
    /// the tree-shape fields and histograms of every node.
    pub(crate) fn refresh(
        &self,
        stats: &mut Stats,
        g: &Gaussians,
        eff: &EffectiveTree,
        nodes: &[PhraseId],
        shape: &Shape,
    ) {
        let fresh: Vec<(PhraseId, NodeStats)> = nodes
            .par_iter()
            .map(|&p| (p, self.node_figures(g, eff, p)))
            .collect();
        for (p, s) in fresh {
            stats.nodes[p as usize] = s;
        }
        refresh_shape(stats, eff, shape);
    }
}

/// Mahalanobis² of `x` under `q` without allocating: forward substitution on the stored
/// Cholesky factor (`y` is scratch of length d).
pub(crate) fn maha2_into(x: &[f64], q: &GaussianView, y: &mut [f64]) -> f64 {
    match q.cov {
        CovView::Diag(_) => mahalanobis2(x, q),
        CovView::Full(l) => {
            let d = x.len();
            let mut m = 0.0;
            for i in 0..d {
                let row = &l[i * d..i * d + i];
                let mut r = x[i] - q.mean[i] as f64;
                for (lij, yj) in row.iter().zip(&y[..i]) {
                    r -= lij * yj;
                }
                y[i] = r / l[i * d + i];
                m += y[i] * y[i];
            }
            m
        }
    }
}

/// ΔᵀΣΔ = ‖LᵀΔ‖² for a full-covariance view (diagonal: Σ Δₖ² σ²ₖ).
pub(crate) fn quad_form(q: &GaussianView, delta: &[f64]) -> f64 {
    let d = delta.len();
    match q.cov {
        CovView::Diag(v) => delta.iter().zip(v).map(|(a, &s)| a * a * s as f64).sum(),
        CovView::Full(l) => (0..d)
            .map(|j| {
                let t: f64 = (j..d).map(|i| l[i * d + j] * delta[i]).sum();
                t * t
            })
            .sum(),
    }
}

/// μ + L z for one bank point.
fn point_of(p: &GaussianView, z: &[f64]) -> Vec<f64> {
    let d = p.dim();
    match p.cov {
        CovView::Diag(v) => (0..d)
            .map(|k| p.mean[k] as f64 + (v[k] as f64).sqrt() * z[k])
            .collect(),
        CovView::Full(l) => (0..d)
            .map(|i| p.mean[i] as f64 + (0..=i).map(|j| l[i * d + j] * z[j]).sum::<f64>())
            .collect(),
    }
}

/// Depth, subtree size and pre-order position of every phrase, from one traversal.
#[derive(Debug, Clone)]
pub(crate) struct Shape {
    depth: Vec<u32>,
    size: Vec<u32>,
    tin: Vec<u32>,
}

impl Shape {
    /// One pre-order walk of the tree (unplaced phrases: depth and position `u32::MAX`).
    pub(crate) fn of(eff: &EffectiveTree) -> Self {
        let n = eff.tree.table_len();
        let order = eff.tree.preorder();
        let mut depth = vec![u32::MAX; n];
        let mut size = vec![0u32; n];
        let mut tin = vec![u32::MAX; n];
        for (i, &p) in order.iter().enumerate() {
            tin[p as usize] = i as u32;
            depth[p as usize] = eff.tree.parent(p).map_or(0, |q| depth[q as usize] + 1);
        }
        for &p in order.iter().rev() {
            size[p as usize] += 1;
            if let Some(q) = eff.tree.parent(p) {
                size[q as usize] += size[p as usize];
            }
        }
        Shape { depth, size, tin }
    }

    /// True when `x` is in the subtree of `c` (c itself included).
    pub(crate) fn in_subtree(&self, c: PhraseId, x: PhraseId) -> bool {
        let (tc, tx) = (self.tin[c as usize], self.tin[x as usize]);
        tc != u32::MAX && tx != u32::MAX && tx >= tc && tx < tc + self.size[c as usize]
    }
}

/// Depth, fan-out, subtree size and the histograms, from the tree (O(n)).
fn refresh_shape(stats: &mut Stats, eff: &EffectiveTree, shape: &Shape) {
    let depths = &shape.depth;
    let sizes = &shape.size;
    let mut gen_values = Vec::with_capacity(stats.nodes.len());
    let mut cont_values = Vec::with_capacity(stats.nodes.len());
    for (i, s) in stats.nodes.iter_mut().enumerate() {
        let p = i as PhraseId;
        if eff.tree.is_placed(p) {
            s.depth = depths[i];
            s.fanout = eff.tree.children(p).len();
            s.subtree = sizes[i];
            gen_values.push(s.log_det);
            if let Some(c) = s.containment {
                cont_values.push(c.value);
            }
        } else {
            s.depth = u32::MAX;
            s.fanout = 0;
            s.subtree = 0;
        }
    }
    stats.placed = gen_values.len();
    stats.generality = Histogram::of(&gen_values, HISTOGRAM_BINS, None);
    stats.containment = Histogram::of(&cont_values, HISTOGRAM_BINS, Some((0.0, 1.0)));
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn diagonal_engines_reuse_the_tables_log_det_bit_for_bit() {
        // the engine used to sum ln σ²ₖ itself; the stored ln det Σ must be that very sum
        // (common practice, no source: the same additions in the same order)
        let (n, d) = (50, 13);
        let means: Vec<f32> = (0..n * d).map(|i| (i as f32 * 0.37).sin()).collect();
        let vars: Vec<f32> = (0..n * d)
            .map(|i| 1e-7 + ((i as f32 * 0.11).cos() + 1.1).powi(3))
            .collect();
        let f64s = |v: &[f32]| v.iter().map(|&x| x as f64).collect::<Vec<_>>();
        for g in [
            Gaussians::from_diagonal_f32(n, d, means.clone(), vars.clone(), 1e-6).unwrap(),
            Gaussians::from_diagonal(n, d, f64s(&means), f64s(&vars), 1e-6).unwrap(),
        ] {
            let e = StatsEngine::new(&g, &StatsConfig::default());
            for i in 0..n {
                let own: f64 = g.variances(i).iter().map(|&v| (v as f64).ln()).sum();
                assert_eq!(e.diag_log_det[i].to_bits(), own.to_bits(), "row {i}");
            }
        }
    }
}
