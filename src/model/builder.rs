//! The tree builder: divisive hierarchical clustering of phrase Gaussians.
//!
//! For a cluster of phrases (at first: all of them):
//! 1. the **representative** is the phrase whose summed similarity to the other members is
//!    highest (log expected-likelihood kernel, Bhattacharyya coefficient or negative
//!    symmetric KL); it becomes the node, the others are split below it. Up to
//!    [`BuildParams::exact_limit`] members the sum is exact (O(m²·d)); above it every member
//!    is screened against a fixed random sample of [`BuildParams::sample_size`] members and
//!    the [`BuildParams::refine`] best of the screening are rescored exactly (O(m·(s + r)·d));
//! 2. the number of sub-clusters k is chosen by the **elbow** of the k-means inertia curve
//!    for k = 2..k_max (k-means fits) with kneedle (Satopaa et al. 2011, sensitivity S).
//!    k never exceeds half the cluster (sub-clusters of two members on average) nor its
//!    number of distinct feature vectors. Without a knee, the smallest k whose inertia drop from k = 1 (the total sum of
//!    squares, also in the report) reaches [`BuildParams::fallback_share`] of the drop from
//!    k = 1 to k_max is taken. For clusters larger than [`BuildParams::elbow_sample`] the curve is computed on a
//!    fixed random subsample of that size; the partition itself always uses every member;
//!    (The curve's fits use [`BuildParams::elbow_n_init`] runs each, 1 by default.)
//! 3. the members are partitioned by k-means (k-means++ init, `n_init` runs, fixed seed) on
//!    the feature vector: the mean, followed by `with_variance · ln σ²` when that weight is
//!    positive, so that breadth takes part;
//! 4. each sub-cluster is built the same way (in parallel) and its representative becomes a
//!    child of this node, until the maximum depth, a cluster smaller than `min_cluster` (its
//!    members become children of the representative), or a single phrase.
//!
//! Every random choice draws from a generator seeded from [`BuildParams::seed`] and the
//! node's position in the tree, and every parallel result is combined in a fixed order, so
//! the same input, parameters and seed give byte-identical output.

use std::collections::BTreeMap;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};

use ndarray::Array2;
use rand::SeedableRng;
use rand::seq::index::sample as sample_indices;
use rand_xoshiro::Xoshiro256Plus;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use super::gaussian::{CovarianceKind, Gaussians, LN_2PI, PhraseId, Similarity};
use super::kmeans::{self, KMeansConfig, KMeansError};
use super::kneedle::{self, Curve, KneedleError};
use super::phrase::PhraseTable;
use super::tree::TreeFile;

/// Format name written into every build report.
pub const REPORT_FORMAT: &str = "treewright-build-report";
/// Build report version.
pub const REPORT_VERSION: u32 = 1;

/// Largest accepted [`BuildParams::max_depth`] (keeps the recursion shallow).
pub const MAX_DEPTH_LIMIT: usize = 64;

/// Everything that steers a build. Written into the build report.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BuildParams {
    /// Seed of every random choice (k-means++, samples).
    pub seed: u64,
    /// Maximum depth of the tree (root = 0); nodes at this depth are leaves. 1 ..= 64.
    pub max_depth: usize,
    /// Largest k tried by the elbow method. ≥ 2.
    pub k_max: usize,
    /// A cluster whose non-representative members are fewer than this is not split: they
    /// all become children of the representative. ≥ 2.
    pub min_cluster: usize,
    /// Similarity used to pick representatives.
    pub similarity: Similarity,
    /// Weight of ln σ² in the k-means feature vector (0 = means only). ≥ 0.
    pub with_variance: f64,
    /// k-means++ runs per fit; the lowest inertia wins. ≥ 1.
    pub n_init: usize,
    /// k-means++ runs per fit of the elbow curve (the partition uses `n_init`). ≥ 1.
    pub elbow_n_init: usize,
    /// Kneedle sensitivity S. ≥ 0.
    pub sensitivity: f64,
    /// Without a knee: the smallest k reaching this share of the inertia drop. In (0, 1].
    pub fallback_share: f64,
    /// Clusters up to this size get the exact representative. ≥ 1.
    pub exact_limit: usize,
    /// Above `exact_limit`, candidates are screened against a random sample of this size. ≥ 1.
    pub sample_size: usize,
    /// Above `exact_limit`, this many best-screened candidates are rescored exactly. ≥ 1.
    pub refine: usize,
    /// The elbow curve of a larger cluster is computed on a random subsample of this size. ≥ 3.
    pub elbow_sample: usize,
    /// k-means iteration cap per run. ≥ 1.
    pub max_iter: usize,
    /// k-means convergence tolerance on the centroid shift. > 0.
    pub tolerance: f64,
}

impl Default for BuildParams {
    fn default() -> Self {
        BuildParams {
            seed: 0,
            max_depth: 6,
            k_max: 8,
            min_cluster: 4,
            similarity: Similarity::Elk,
            with_variance: 0.0,
            n_init: 3,
            elbow_n_init: 1,
            sensitivity: 1.0,
            fallback_share: 0.9,
            exact_limit: 160,
            sample_size: 128,
            refine: 32,
            elbow_sample: 1024,
            max_iter: 100,
            tolerance: 1e-4,
        }
    }
}

impl BuildParams {
    /// Check every range rule; the error names the parameter.
    pub fn validate(&self) -> Result<(), BuildError> {
        fn rule(
            ok: bool,
            field: &'static str,
            value: String,
            rule: &'static str,
        ) -> Result<(), BuildError> {
            if ok {
                Ok(())
            } else {
                Err(BuildError::BadParam { field, value, rule })
            }
        }
        rule(
            (1..=MAX_DEPTH_LIMIT).contains(&self.max_depth),
            "max_depth",
            self.max_depth.to_string(),
            "must be between 1 and 64",
        )?;
        rule(
            self.k_max >= 2,
            "k_max",
            self.k_max.to_string(),
            "must be ≥ 2",
        )?;
        rule(
            self.min_cluster >= 2,
            "min_cluster",
            self.min_cluster.to_string(),
            "must be ≥ 2",
        )?;
        rule(
            self.with_variance.is_finite() && self.with_variance >= 0.0,
            "with_variance",
            self.with_variance.to_string(),
            "must be a finite number ≥ 0",
        )?;
        rule(
            self.n_init >= 1,
            "n_init",
            self.n_init.to_string(),
            "must be ≥ 1",
        )?;
        rule(
            self.sensitivity.is_finite() && self.sensitivity >= 0.0,
            "sensitivity",
            self.sensitivity.to_string(),
            "must be a finite number ≥ 0",
        )?;
        rule(
            self.fallback_share > 0.0 && self.fallback_share <= 1.0,
            "fallback_share",
            self.fallback_share.to_string(),
            "must be in (0, 1]",
        )?;
        rule(
            self.exact_limit >= 1,
            "exact_limit",
            self.exact_limit.to_string(),
            "must be ≥ 1",
        )?;
        rule(
            self.sample_size >= 1,
            "sample_size",
            self.sample_size.to_string(),
            "must be ≥ 1",
        )?;
        rule(
            self.refine >= 1,
            "refine",
            self.refine.to_string(),
            "must be ≥ 1",
        )?;
        rule(
            self.elbow_sample >= 3,
            "elbow_sample",
            self.elbow_sample.to_string(),
            "must be ≥ 3",
        )?;
        rule(
            self.max_iter >= 1,
            "max_iter",
            self.max_iter.to_string(),
            "must be ≥ 1",
        )?;
        rule(
            self.tolerance.is_finite() && self.tolerance > 0.0,
            "tolerance",
            self.tolerance.to_string(),
            "must be a finite number > 0",
        )
    }
}

/// Progress of a running build.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct BuildProgress {
    /// Phrases placed in the tree so far.
    pub placed: usize,
    /// Phrases to place.
    pub total: usize,
    /// Depth of the node just placed.
    pub depth: usize,
}

/// Why a build did not produce a tree.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum BuildError {
    /// The cancel flag was set.
    #[error("build cancelled")]
    Cancelled,
    /// There is no phrase to build from.
    #[error("nothing to build: no phrase given")]
    Empty,
    /// The phrase table and the embeddings disagree.
    #[error("the phrase table has {phrases} phrases but the embeddings have {gaussians} rows")]
    Mismatch {
        /// Phrases in the table.
        phrases: usize,
        /// Rows of the embeddings.
        gaussians: usize,
    },
    /// A row given to the builder is not a phrase.
    #[error("row {row} is not a phrase (the table has {len})")]
    UnknownRow {
        /// The row.
        row: PhraseId,
        /// Table length.
        len: usize,
    },
    /// A phrase is given twice.
    #[error("phrase \"{0}\" is given twice")]
    DuplicateRow(String),
    /// A parameter is out of range.
    #[error("parameter {field} is {value}: it {rule}")]
    BadParam {
        /// The parameter.
        field: &'static str,
        /// Its value.
        value: String,
        /// The rule.
        rule: &'static str,
    },
    /// k-means failed.
    #[error(transparent)]
    KMeans(#[from] KMeansError),
    /// The knee search failed.
    #[error(transparent)]
    Kneedle(#[from] KneedleError),
}

/// What the builder did at one internal node (a node with children).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NodeReport {
    /// The node (the cluster's representative), stable id.
    pub node: String,
    /// Depth of the node (root = 0).
    pub depth: usize,
    /// Members of the cluster, the representative included.
    pub size: usize,
    /// Mean similarity of the representative to the other members (always exact).
    pub representative_score: f64,
    /// 0 when every member was scored exactly; otherwise the size of the sample the members
    /// were screened against before the best `refine` were rescored exactly.
    pub score_sample: usize,
    /// The k values of the elbow curve (1 = the total sum of squares); empty when not split.
    pub k_tried: Vec<usize>,
    /// Inertia (sum of squared feature distances to the centroids) for each of `k_tried`.
    pub inertia: Vec<f64>,
    /// Rows the elbow curve was computed on (the whole cluster or a subsample).
    pub elbow_rows: usize,
    /// Number of sub-clusters (0 when the others became children directly).
    pub chosen_k: usize,
    /// Why this k (or why no split): "knee", "fallback", "only k = 2", "max depth", ...
    pub reason: String,
    /// Size of each sub-cluster (or 1 per direct child), in child order.
    pub cluster_sizes: Vec<usize>,
}

/// `build-report.json`: the parameters and one [`NodeReport`] per internal node.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BuildReport {
    /// Always [`REPORT_FORMAT`].
    pub format: String,
    /// [`REPORT_VERSION`].
    pub version: u32,
    /// The parameters of the build (the seed included).
    pub params: BuildParams,
    /// Phrases placed.
    pub phrases: usize,
    /// Dimension of the embeddings.
    pub dim: usize,
    /// Root id.
    pub root: String,
    /// Depth of the deepest node.
    pub depth: usize,
    /// Internal nodes in pre-order (sub-clusters in child order).
    pub nodes: Vec<NodeReport>,
}

impl BuildReport {
    /// The report of an internal node by id (None for leaves and unknown ids).
    pub fn node(&self, id: &str) -> Option<&NodeReport> {
        self.nodes.iter().find(|n| n.node == id)
    }
}

/// A finished build: the tree file and its report.
#[derive(Debug, Clone, PartialEq)]
pub struct BuiltTree {
    /// The tree (`tree.json`), covering every given phrase exactly once.
    pub tree_file: TreeFile,
    /// The report (`build-report.json`).
    pub report: BuildReport,
}

/// The representative of a set of phrases.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Representative {
    /// Its row.
    pub row: PhraseId,
    /// Its exact mean similarity to the other members.
    pub score: f64,
    /// 0 when every member was scored exactly; otherwise the screening sample size.
    pub sample: usize,
}

/// Natural logarithm of a positive, finite, normal f64 without a library call, so that the
/// similarity loops vectorise: x = 2ᵉ·m with m ∈ [√½, √2), ln m = 2 atanh((m − 1)/(m + 1))
/// by its odd series up to the 17th power. The truncation error is below 2·10⁻¹⁶ relative
/// to ln 2 for every such x (|f| ≤ 0.1716, f¹⁹/19 · 2 < 10⁻¹⁵·f); variances are floored
/// well above the subnormal range, so the normal-range precondition holds.
#[inline(always)]
fn fast_ln(x: f64) -> f64 {
    const SQRT_HALF_BITS: u64 = 0x3FE6_A09E_667F_3BCD; // √½
    let bits = x.to_bits();
    // shift the exponent so that the mantissa lands in [√½, √2)
    let adj = bits.wrapping_sub(SQRT_HALF_BITS);
    let e = (adj as i64 >> 52) as f64;
    let m = f64::from_bits(bits.wrapping_sub(adj & 0xFFF0_0000_0000_0000));
    let f = (m - 1.0) / (m + 1.0);
    let s = f * f;
    let poly = 1.0
        + s * (1.0 / 3.0
            + s * (1.0 / 5.0
                + s * (1.0 / 7.0
                    + s * (1.0 / 9.0
                        + s * (1.0 / 11.0
                            + s * (1.0 / 13.0 + s * (1.0 / 15.0 + s * (1.0 / 17.0))))))));
    e * std::f64::consts::LN_2 + 2.0 * f * poly
}

/// Σₖ term(k) over the per-dimension slices `[s…]` of length ≥ d, with `lanes`
/// interleaved accumulators (dimension k goes to accumulator k mod lanes) that are added
/// up in f64 in a fixed order: independent chains let the compiler vectorise, and the
/// result is the same for every call with the same operands (swapping i and j gives the
/// same bits, as every term is symmetric).
macro_rules! lane_sum {
    ($t:ty, $lanes:expr, $d:expr, [$($s:ident),+], |$k:ident| $term:expr) => {
        lane_sum!($t, from $t, $lanes, $d, [$($s),+], |$k| $term)
    };
    // accumulate in `$t` over slices of `$e` (the term widens them)
    ($t:ty, from $e:ty, $lanes:expr, $d:expr, [$($s:ident),+], |$k:ident| $term:expr) => {{
        let d: usize = $d;
        let mut acc = [0.0 as $t; $lanes];
        let full = d / $lanes * $lanes;
        let mut base = 0;
        while base < full {
            // fixed-size chunks: no bounds checks, straight-line lanes the compiler vectorises
            $(
                let $s: &[$e; $lanes] = match $s[base..].first_chunk() {
                    Some(c) => c,
                    None => break,
                };
            )+
            for $k in 0..$lanes {
                acc[$k] += $term;
            }
            base += $lanes;
        }
        for (lane, $k) in (full..d).enumerate() {
            acc[lane] += $term;
        }
        acc.iter().fold(0.0f64, |t, &a| t + a as f64)
    }};
}

// The exact kernels read the stored f32 values and widen each one to f64 (exactly) before
// any arithmetic, so they give the bits a widened f64 copy would give without holding one:
// at the root of a 100 000 × 64 build that copy was 102 MB.

/// Σₖ ln(σ²ᵢₖ + σ²ⱼₖ) + Δₖ² / (σ²ᵢₖ + σ²ⱼₖ) (the ELK sum), in f64.
fn elk_sum(mi: &[f32], mj: &[f32], vi: &[f32], vj: &[f32]) -> f64 {
    let d = mi.len();
    let (mj, vi, vj) = (&mj[..d], &vi[..d], &vj[..d]);
    lane_sum!(f64, from f32, 4, d, [mi, mj, vi, vj], |k| {
        let sum = vi[k] as f64 + vj[k] as f64;
        let delta = mi[k] as f64 - mj[k] as f64;
        fast_ln(sum) + delta * delta / sum
    })
}

/// Σₖ Δₖ² / (8 σ̄²ₖ) + ½ ln σ̄²ₖ with σ̄² = (σ²ᵢ + σ²ⱼ)/2 (the Bhattacharyya sum), in f64.
fn bc_sum(mi: &[f32], mj: &[f32], vi: &[f32], vj: &[f32]) -> f64 {
    let d = mi.len();
    let (mj, vi, vj) = (&mj[..d], &vi[..d], &vj[..d]);
    lane_sum!(f64, from f32, 4, d, [mi, mj, vi, vj], |k| {
        let bar = 0.5 * (vi[k] as f64 + vj[k] as f64);
        let delta = mi[k] as f64 - mj[k] as f64;
        delta * delta / (8.0 * bar) + 0.5 * fast_ln(bar)
    })
}

/// Σₖ σ²ᵢ/σ²ⱼ + σ²ⱼ/σ²ᵢ + Δ²(1/σ²ᵢ + 1/σ²ⱼ) (twice the symmetric KL plus 2d), in f64.
fn kl_sum(mi: &[f32], mj: &[f32], vi: &[f32], vj: &[f32]) -> f64 {
    let d = mi.len();
    let (mj, vi, vj) = (&mj[..d], &vi[..d], &vj[..d]);
    lane_sum!(f64, from f32, 4, d, [mi, mj, vi, vj], |k| {
        let (a, b) = (vi[k] as f64, vj[k] as f64);
        let (ia, ib) = (1.0 / a, 1.0 / b);
        let delta = mi[k] as f64 - mj[k] as f64;
        a * ib + b * ia + delta * delta * (ia + ib)
    })
}

/// Pairwise similarity between two lists of rows, read in place from the Gaussian table
/// (the diagonal formulas widen the stored f32 values; no copy, no allocation per pair).
struct SimBlock<'a> {
    g: &'a Gaussians,
    sim: Similarity,
    rows: &'a [PhraseId],
    diagonal: bool,
}

impl<'a> SimBlock<'a> {
    fn new(g: &'a Gaussians, sim: Similarity, rows: &'a [PhraseId]) -> Self {
        SimBlock {
            g,
            sim,
            rows,
            diagonal: g.kind() == CovarianceKind::Diagonal,
        }
    }

    /// Similarity of local rows i of `self` and j of `other` (symmetric to the last bit).
    #[inline]
    fn pair(&self, i: usize, other: &SimBlock, j: usize) -> f64 {
        let (ri, rj) = (self.rows[i] as usize, other.rows[j] as usize);
        if !self.diagonal {
            return self.sim.score(&self.g.get(ri), &other.g.get(rj));
        }
        let g = self.g;
        let d = g.dim();
        let (mi, mj) = (g.mean(ri), g.mean(rj));
        let (vi, vj) = (g.variances(ri), g.variances(rj));
        match self.sim {
            Similarity::Elk => {
                let s = elk_sum(mi, mj, vi, vj);
                -0.5 * (d as f64 * LN_2PI + s)
            }
            Similarity::Bhattacharyya => {
                let s = bc_sum(mi, mj, vi, vj);
                let q = 0.25 * g.log_det(ri) + 0.25 * g.log_det(rj);
                let db = (s - q).max(0.0);
                (-db).exp()
            }
            Similarity::Kl => {
                let s = kl_sum(mi, mj, vi, vj);
                d as f64 - 0.5 * s
            }
        }
    }
}

/// Mean similarity of each of `candidates` to the members of `refs` other than itself.
/// Parallel over candidates; each sum runs in `refs` order, so results do not depend on
/// the number of threads.
fn mean_scores(
    g: &Gaussians,
    sim: Similarity,
    candidates: &[PhraseId],
    refs: &[PhraseId],
    cancel: &AtomicBool,
) -> Result<Vec<f64>, BuildError> {
    let cb = SimBlock::new(g, sim, candidates);
    let rb = SimBlock::new(g, sim, refs);
    let out: Vec<Option<f64>> = (0..candidates.len())
        .into_par_iter()
        .with_min_len(8)
        .map(|i| {
            if cancel.load(Ordering::Relaxed) {
                return None;
            }
            let me = candidates[i];
            let mut sum = 0.0;
            let mut count = 0usize;
            for (j, &r) in refs.iter().enumerate() {
                if r != me {
                    sum += cb.pair(i, &rb, j);
                    count += 1;
                }
            }
            Some(if count == 0 { 0.0 } else { sum / count as f64 })
        })
        .collect();
    out.into_iter()
        .map(|x| x.ok_or(BuildError::Cancelled))
        .collect()
}

/// ln x in f32 for the screening pass, by the same reduction as [`fast_ln`] with the
/// series up to the 9th power (truncation below 10⁻⁹, under f32 precision).
#[inline(always)]
fn fast_ln_f32(x: f32) -> f32 {
    const SQRT_HALF_BITS: u32 = 0x3F35_04F3; // √½
    let bits = x.to_bits();
    let adj = bits.wrapping_sub(SQRT_HALF_BITS);
    let e = (adj as i32 >> 23) as f32;
    let m = f32::from_bits(bits.wrapping_sub(adj & 0xFF80_0000));
    let f = (m - 1.0) / (m + 1.0);
    let s = f * f;
    let poly = 1.0 + s * (1.0 / 3.0 + s * (1.0 / 5.0 + s * (1.0 / 7.0 + s * (1.0 / 9.0))));
    e * std::f32::consts::LN_2 + 2.0 * f * poly
}

/// Screening scores: like [`mean_scores`] but in f32 arithmetic for diagonal covariance
/// (the stored precision of the embeddings); used only to shortlist candidates, whose
/// scores are then recomputed in f64.
fn screen_scores(
    g: &Gaussians,
    sim: Similarity,
    candidates: &[PhraseId],
    refs: &[PhraseId],
    cancel: &AtomicBool,
) -> Result<Vec<f64>, BuildError> {
    if g.kind() != CovarianceKind::Diagonal {
        return mean_scores(g, sim, candidates, refs, cancel);
    }
    let d = g.dim();
    let mut rm = Vec::with_capacity(refs.len() * d);
    let mut rv = Vec::with_capacity(refs.len() * d);
    for &r in refs {
        rm.extend_from_slice(g.mean(r as usize));
        rv.extend_from_slice(g.variances(r as usize));
    }
    let rinv: Vec<f32> = if sim == Similarity::Kl {
        rv.iter().map(|v| 1.0 / v).collect()
    } else {
        Vec::new()
    };
    let out: Vec<Option<f64>> = candidates
        .par_iter()
        .with_min_len(8)
        .map(|&me| {
            if cancel.load(Ordering::Relaxed) {
                return None;
            }
            let mi = g.mean(me as usize);
            let vi = g.variances(me as usize);
            let ii: Vec<f32> = if sim == Similarity::Kl {
                vi.iter().map(|v| 1.0 / v).collect()
            } else {
                Vec::new()
            };
            let qi = 0.25 * g.log_det(me as usize);
            let mut sum = 0.0;
            let mut count = 0usize;
            for (j, &r) in refs.iter().enumerate() {
                if r == me {
                    continue;
                }
                let mj = &rm[j * d..(j + 1) * d];
                let vj = &rv[j * d..(j + 1) * d];
                let (mi, vi) = (&mi[..d], &vi[..d]);
                sum += match sim {
                    Similarity::Elk => {
                        let t = lane_sum!(f32, 8, d, [mi, mj, vi, vj], |k| {
                            let s = vi[k] + vj[k];
                            let delta = mi[k] - mj[k];
                            fast_ln_f32(s) + delta * delta / s
                        });
                        -0.5 * (d as f64 * LN_2PI + t)
                    }
                    Similarity::Bhattacharyya => {
                        let t = lane_sum!(f32, 8, d, [mi, mj, vi, vj], |k| {
                            let bar = 0.5 * (vi[k] + vj[k]);
                            let delta = mi[k] - mj[k];
                            delta * delta / (8.0 * bar) + 0.5 * fast_ln_f32(bar)
                        });
                        let qj = 0.25 * g.log_det(r as usize);
                        (-(t - (qi + qj)).max(0.0)).exp()
                    }
                    Similarity::Kl => {
                        let ij = &rinv[j * d..(j + 1) * d];
                        let ii = &ii[..d];
                        let t = lane_sum!(f32, 8, d, [mi, mj, vi, vj, ii, ij], |k| {
                            let delta = mi[k] - mj[k];
                            vi[k] * ij[k] + vj[k] * ii[k] + delta * delta * (ii[k] + ij[k])
                        });
                        d as f64 - 0.5 * t
                    }
                };
                count += 1;
            }
            Some(if count == 0 { 0.0 } else { sum / count as f64 })
        })
        .collect();
    out.into_iter()
        .map(|x| x.ok_or(BuildError::Cancelled))
        .collect()
}

/// Up to this many members, [`exact_scores`] evaluates each pair once (the triangle is
/// kept in memory: at most 8 MB·(this/1024)²/2); above it each row is computed in full.
const SYMMETRIC_LIMIT: usize = 2048;

/// Exact mean similarity of every member to every other member (O(m²·d)).
///
/// Each pair is evaluated once and used for both members (the similarities are symmetric
/// to the last bit); each member's sum still runs in member order, so the result is the
/// same as summing its row in full.
pub fn exact_scores(
    g: &Gaussians,
    sim: Similarity,
    members: &[PhraseId],
    cancel: &AtomicBool,
) -> Result<Vec<f64>, BuildError> {
    let m = members.len();
    if m > SYMMETRIC_LIMIT {
        return mean_scores(g, sim, members, members, cancel);
    }
    let b = SimBlock::new(g, sim, members);
    // upper[i][j - i - 1] = pair(i, j) for j > i
    let upper: Vec<Option<Vec<f64>>> = (0..m)
        .into_par_iter()
        .map(|i| {
            if cancel.load(Ordering::Relaxed) {
                return None;
            }
            Some(((i + 1)..m).map(|j| b.pair(i, &b, j)).collect())
        })
        .collect();
    let upper: Vec<Vec<f64>> = upper
        .into_iter()
        .map(|r| r.ok_or(BuildError::Cancelled))
        .collect::<Result<_, _>>()?;
    Ok((0..m)
        .map(|i| {
            let mut sum = 0.0;
            for (j, row) in upper.iter().enumerate().take(i) {
                sum += row[i - j - 1];
            }
            for &v in &upper[i] {
                sum += v;
            }
            if m > 1 { sum / (m - 1) as f64 } else { 0.0 }
        })
        .collect())
}

/// The representative of `members`: highest mean similarity to the others; ties go to the
/// broader phrase (larger ln det Σ), then to the lower row. Exact up to `exact_limit`
/// members. Above it every member is screened against `sample_size` members drawn with
/// `seed`, and the `refine` best of the screening are rescored exactly against all members.
#[allow(clippy::too_many_arguments)]
pub fn representative(
    g: &Gaussians,
    sim: Similarity,
    members: &[PhraseId],
    exact_limit: usize,
    sample_size: usize,
    refine: usize,
    seed: u64,
    cancel: &AtomicBool,
) -> Result<Representative, BuildError> {
    if members.is_empty() {
        return Err(BuildError::Empty);
    }
    if members.len() <= exact_limit || sample_size >= members.len() {
        let scores = exact_scores(g, sim, members, cancel)?;
        let best = best_index(g, members, &scores);
        return Ok(Representative {
            row: members[best],
            score: scores[best],
            sample: 0,
        });
    }
    // screen every member against a sample, then rescore the best few exactly
    let refs = random_subset(members, sample_size, seed);
    let screened = screen_scores(g, sim, members, &refs, cancel)?;
    let mut order: Vec<usize> = (0..members.len()).collect();
    order.sort_by(|&a, &b| {
        screened[b]
            .total_cmp(&screened[a])
            .then(members[a].cmp(&members[b]))
    });
    let mut finalists: Vec<PhraseId> = order
        .iter()
        .take(refine.max(1))
        .map(|&i| members[i])
        .collect();
    finalists.sort_unstable();
    let scores = mean_scores(g, sim, &finalists, members, cancel)?;
    let best = best_index(g, &finalists, &scores);
    Ok(Representative {
        row: finalists[best],
        score: scores[best],
        sample: refs.len(),
    })
}

/// Index of the highest score; ties go to the larger ln det Σ, then to the lower row.
fn best_index(g: &Gaussians, rows: &[PhraseId], scores: &[f64]) -> usize {
    let mut best = 0usize;
    for i in 1..rows.len() {
        let (a, b) = (scores[i], scores[best]);
        let (la, lb) = (g.log_det(rows[i] as usize), g.log_det(rows[best] as usize));
        if a > b || (a == b && (la > lb || (la == lb && rows[i] < rows[best]))) {
            best = i;
        }
    }
    best
}

/// `size` members drawn without replacement with `seed`, in their original order.
fn random_subset(members: &[PhraseId], size: usize, seed: u64) -> Vec<PhraseId> {
    if size >= members.len() {
        return members.to_vec();
    }
    let mut rng = Xoshiro256Plus::seed_from_u64(seed);
    let mut idx = sample_indices(&mut rng, members.len(), size).into_vec();
    idx.sort_unstable();
    idx.into_iter().map(|i| members[i]).collect()
}

/// The k-means feature vectors of `rows`, in that order: each phrase's mean, then
/// `with_variance · ln σ²` per dimension when `with_variance` > 0. The builder makes the
/// matrix of each cluster it splits this way instead of keeping the whole n × d (or
/// n × 2d) f64 matrix for the run and copying rows out of it.
pub fn feature_rows(g: &Gaussians, rows: &[PhraseId], with_variance: f64) -> Array2<f64> {
    let d = g.dim();
    let f = if with_variance > 0.0 { 2 * d } else { d };
    let mut out = Array2::<f64>::zeros((rows.len(), f));
    for (&i, mut row) in rows.iter().zip(out.rows_mut()) {
        for (k, &m) in g.mean(i as usize).iter().enumerate() {
            row[k] = m as f64;
        }
        if with_variance > 0.0 {
            for (k, &v) in g.variances(i as usize).iter().enumerate() {
                row[d + k] = with_variance * (v as f64).ln();
            }
        }
    }
    out
}

/// splitmix64: a well-mixed seed for a child from its parent's seed and its index.
fn mix(seed: u64, salt: u64) -> u64 {
    let mut z = seed ^ salt.wrapping_mul(0x9E37_79B9_7F4A_7C15);
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// Salts of the different random choices at one node.
const SALT_REPRESENTATIVE: u64 = 1;
const SALT_ELBOW_SAMPLE: u64 = 2;
const SALT_KMEANS: u64 = 3;
const SALT_CHILD: u64 = 1 << 32;

struct Ctx<'a> {
    g: &'a Gaussians,
    phrases: &'a PhraseTable,
    params: &'a BuildParams,
    progress: &'a (dyn Fn(BuildProgress) + Sync),
    cancel: &'a AtomicBool,
    placed: AtomicUsize,
    total: usize,
}

impl Ctx<'_> {
    fn check(&self) -> Result<(), BuildError> {
        if self.cancel.load(Ordering::Relaxed) {
            Err(BuildError::Cancelled)
        } else {
            Ok(())
        }
    }

    fn place(&self, count: usize, depth: usize) {
        let placed = self.placed.fetch_add(count, Ordering::Relaxed) + count;
        (self.progress)(BuildProgress {
            placed,
            total: self.total,
            depth,
        });
    }
}

/// The result of building one cluster: its root, its edges and its reports (pre-order).
struct Sub {
    root: PhraseId,
    edges: Vec<(PhraseId, PhraseId)>,
    reports: Vec<NodeReport>,
    depth: usize,
}

/// How a cluster's non-representative members are split.
struct Split {
    k_tried: Vec<usize>,
    inertia: Vec<f64>,
    elbow_rows: usize,
    chosen_k: usize,
    reason: String,
    /// Sub-clusters, each sorted by row, ordered by their first row.
    clusters: Vec<Vec<PhraseId>>,
}

fn build_cluster(
    ctx: &Ctx,
    members: Vec<PhraseId>,
    depth: usize,
    seed: u64,
) -> Result<Sub, BuildError> {
    ctx.check()?;
    let p = ctx.params;
    if members.len() == 1 {
        ctx.place(1, depth);
        return Ok(Sub {
            root: members[0],
            edges: Vec::new(),
            reports: Vec::new(),
            depth,
        });
    }
    let rep = representative(
        ctx.g,
        p.similarity,
        &members,
        p.exact_limit,
        p.sample_size,
        p.refine,
        mix(seed, SALT_REPRESENTATIVE),
        ctx.cancel,
    )?;
    ctx.place(1, depth);
    let rest: Vec<PhraseId> = members.iter().copied().filter(|&r| r != rep.row).collect();
    let split = if depth + 1 >= p.max_depth {
        flat(
            &rest,
            "max depth reached: the other members become children",
        )
    } else if rest.len() < p.min_cluster.max(3) {
        flat(
            &rest,
            "fewer members than min_cluster: they become children",
        )
    } else {
        choose_split(ctx, &rest, seed)?
    };
    let mut report = NodeReport {
        node: ctx.phrases.id(rep.row).to_string(),
        depth,
        size: members.len(),
        representative_score: rep.score,
        score_sample: rep.sample,
        k_tried: split.k_tried,
        inertia: split.inertia,
        elbow_rows: split.elbow_rows,
        chosen_k: split.chosen_k,
        reason: split.reason,
        cluster_sizes: split.clusters.iter().map(Vec::len).collect(),
    };
    drop(members);
    if split.chosen_k == 0 {
        ctx.place(rest.len(), depth + 1);
        report.cluster_sizes = vec![1; rest.len()];
        return Ok(Sub {
            root: rep.row,
            edges: rest.iter().map(|&c| (c, rep.row)).collect(),
            reports: vec![report],
            depth: depth + usize::from(!rest.is_empty()),
        });
    }
    let subs: Vec<Result<Sub, BuildError>> = split
        .clusters
        .into_par_iter()
        .enumerate()
        .map(|(i, c)| build_cluster(ctx, c, depth + 1, mix(seed, SALT_CHILD + i as u64)))
        .collect();
    let mut edges = Vec::with_capacity(rest.len());
    let mut reports = vec![report];
    let mut max_depth = depth;
    for s in subs {
        let s = s?;
        edges.push((s.root, rep.row));
        edges.extend(s.edges);
        reports.extend(s.reports);
        max_depth = max_depth.max(s.depth);
    }
    Ok(Sub {
        root: rep.row,
        edges,
        reports,
        depth: max_depth,
    })
}

fn flat(rest: &[PhraseId], reason: &str) -> Split {
    Split {
        k_tried: Vec::new(),
        inertia: Vec::new(),
        elbow_rows: 0,
        chosen_k: 0,
        reason: reason.to_string(),
        clusters: rest.iter().map(|&r| vec![r]).collect(),
    }
}

/// Number of distinct rows of a feature matrix (compared bit for bit).
fn distinct_rows(x: &Array2<f64>) -> usize {
    let mut keys: Vec<Vec<u64>> = x
        .rows()
        .into_iter()
        .map(|r| r.iter().map(|v| v.to_bits()).collect())
        .collect();
    keys.sort_unstable();
    keys.dedup();
    keys.len()
}

fn choose_split(ctx: &Ctx, rest: &[PhraseId], seed: u64) -> Result<Split, BuildError> {
    let p = ctx.params;
    let full = feature_rows(ctx.g, rest, p.with_variance);
    let elbow_members = random_subset(rest, p.elbow_sample, mix(seed, SALT_ELBOW_SAMPLE));
    let sampled = elbow_members.len() < rest.len();
    let elbow_x = if sampled {
        feature_rows(ctx.g, &elbow_members, p.with_variance)
    } else {
        full.clone()
    };
    let distinct = distinct_rows(&elbow_x);
    // at most k_max, at most the number of distinct points, and sub-clusters of two
    // members on average (k ≤ m / 2; always k ≥ 2 when there are 3 or more members)
    let k_top = p.k_max.min(distinct).min((elbow_x.nrows() / 2).max(2));
    if k_top < 2 {
        return Ok(flat(
            rest,
            "members have identical features: they become children",
        ));
    }
    let cfg = |k: usize, n_init: usize| KMeansConfig {
        k,
        n_init,
        max_iter: p.max_iter,
        tolerance: p.tolerance,
        seed: mix(seed, SALT_KMEANS + ((k as u64) << 8)),
    };
    // the elbow fits are independent: run them in parallel, collect in k order
    let fits: Vec<Result<kmeans::KMeansFit, BuildError>> = (2..=k_top)
        .into_par_iter()
        .map(|k| {
            ctx.check()?;
            Ok(kmeans::kmeans(elbow_x.view(), &cfg(k, p.elbow_n_init))?)
        })
        .collect();
    let mut k_tried = vec![1usize];
    let mut inertia = vec![kmeans::total_sum_of_squares(elbow_x.view())];
    let mut labels_by_k = BTreeMap::new();
    for (k, fit) in (2..=k_top).zip(fits) {
        let fit = fit?;
        k_tried.push(k);
        inertia.push(fit.inertia);
        labels_by_k.insert(k, fit.labels);
    }
    let (chosen_k, reason) = pick_k(&k_tried, &inertia, p)?;
    ctx.check()?;
    let reuse = !sampled && p.elbow_n_init >= p.n_init;
    let labels = match labels_by_k.remove(&chosen_k) {
        Some(l) if reuse => l,
        _ => kmeans::kmeans(full.view(), &cfg(chosen_k, p.n_init))?.labels,
    };
    let mut groups: Vec<Vec<PhraseId>> = vec![Vec::new(); chosen_k];
    for (&r, &l) in rest.iter().zip(&labels) {
        groups[l].push(r);
    }
    let mut clusters: Vec<Vec<PhraseId>> = groups.into_iter().filter(|c| !c.is_empty()).collect();
    for c in clusters.iter_mut() {
        c.sort_unstable();
    }
    clusters.sort_by_key(|c| c[0]);
    Ok(Split {
        k_tried,
        inertia,
        elbow_rows: elbow_x.nrows(),
        chosen_k,
        reason,
        clusters,
    })
}

/// Choose k from the elbow curve (`ks[0] = 1`): the kneedle knee, else the fallback share.
fn pick_k(ks: &[usize], inertia: &[f64], p: &BuildParams) -> Result<(usize, String), BuildError> {
    let k_top = *ks.last().unwrap_or(&1);
    if k_top == 2 {
        return Ok((2, "only k = 2 possible".to_string()));
    }
    // kneedle runs on the k-means part of the curve (k ≥ 2); k = 1 only anchors the fallback
    let x: Vec<f64> = ks[1..].iter().map(|&k| k as f64).collect();
    if let Some(knee) = kneedle::kneedle(&x, &inertia[1..], Curve::ConvexDecreasing, p.sensitivity)?
    {
        let k = ks[1 + knee.index];
        return Ok((
            k,
            format!("knee at k = {k} (kneedle, S = {})", p.sensitivity),
        ));
    }
    let total = inertia[0] - inertia[inertia.len() - 1];
    if total <= 0.0 {
        return Ok((2, "no knee and no inertia drop: k = 2".to_string()));
    }
    for (i, &k) in ks.iter().enumerate().skip(1) {
        if (inertia[0] - inertia[i]) / total >= p.fallback_share {
            return Ok((
                k,
                format!(
                    "no knee: smallest k explaining {:.0}% of the inertia drop",
                    100.0 * p.fallback_share
                ),
            ));
        }
    }
    Ok((k_top, "no knee: k_max".to_string()))
}

/// Build a tree over `rows` (all phrases when None) of `g` with `params`.
///
/// `progress` is called (from worker threads) whenever phrases are placed; setting `cancel`
/// stops the build promptly with [`BuildError::Cancelled`]. The tree covers every given
/// phrase exactly once; same input, parameters and seed give identical output.
pub fn build(
    g: &Gaussians,
    phrases: &PhraseTable,
    rows: Option<&[PhraseId]>,
    params: &BuildParams,
    progress: &(dyn Fn(BuildProgress) + Sync),
    cancel: &AtomicBool,
) -> Result<BuiltTree, BuildError> {
    params.validate()?;
    if phrases.len() != g.len() {
        return Err(BuildError::Mismatch {
            phrases: phrases.len(),
            gaussians: g.len(),
        });
    }
    let members: Vec<PhraseId> = match rows {
        None => (0..g.len() as PhraseId).collect(),
        Some(r) => {
            let mut seen = vec![false; g.len()];
            for &x in r {
                let xi = x as usize;
                if xi >= g.len() {
                    return Err(BuildError::UnknownRow {
                        row: x,
                        len: g.len(),
                    });
                }
                if seen[xi] {
                    return Err(BuildError::DuplicateRow(phrases.id(x).to_string()));
                }
                seen[xi] = true;
            }
            let mut v = r.to_vec();
            v.sort_unstable();
            v
        }
    };
    if members.is_empty() {
        return Err(BuildError::Empty);
    }
    let ctx = Ctx {
        g,
        phrases,
        params,
        progress,
        cancel,
        placed: AtomicUsize::new(0),
        total: members.len(),
    };
    let total = members.len();
    let sub = build_cluster(&ctx, members, 0, mix(params.seed, 0))?;
    let mut parent = BTreeMap::new();
    for (c, p) in &sub.edges {
        parent.insert(phrases.id(*c).to_string(), phrases.id(*p).to_string());
    }
    let tree_file = TreeFile {
        root: phrases.id(sub.root).to_string(),
        parent,
    };
    Ok(BuiltTree {
        tree_file,
        report: BuildReport {
            format: REPORT_FORMAT.to_string(),
            version: REPORT_VERSION,
            params: params.clone(),
            phrases: total,
            dim: g.dim(),
            root: phrases.id(sub.root).to_string(),
            depth: sub.depth,
            nodes: sub.reports,
        },
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::fsutil::to_json_pretty;
    use crate::model::gaussian::{bhattacharyya_coefficient, log_expected_likelihood, sym_kl};
    use crate::model::phrase::PhraseRecord;
    use crate::model::tree::Tree;
    use rand::Rng;
    use rand_distr::{Distribution, StandardNormal};

    fn table(n: usize) -> PhraseTable {
        let recs: Vec<PhraseRecord> = (0..n)
            .map(|i| PhraseRecord {
                id: Some(format!("tag-{i:05}")),
                label: format!("tag {i}"),
            })
            .collect();
        PhraseTable::from_records(&recs).unwrap()
    }

    /// A planted hierarchy: one broad root phrase, `b1` groups, each with `b2` sub-groups,
    /// each with `leaves` narrow phrases. Returns the Gaussians and, per row, its
    /// (level-1 group, level-2 group) or None for the root.
    #[allow(clippy::type_complexity)]
    fn planted(
        d: usize,
        b1: usize,
        b2: usize,
        leaves: usize,
        seed: u64,
    ) -> (Gaussians, Vec<Option<(usize, usize)>>) {
        let mut rng = Xoshiro256Plus::seed_from_u64(seed);
        let mut normal = |s: f64| -> f64 {
            let z: f64 = StandardNormal.sample(&mut rng);
            s * z
        };
        let mut means = Vec::new();
        let mut vars = Vec::new();
        let mut truth = Vec::new();
        let mut push = |m: &[f64], v: f64, t: Option<(usize, usize)>, means: &mut Vec<f64>| {
            means.extend_from_slice(m);
            vars.extend(std::iter::repeat_n(v, d));
            truth.push(t);
        };
        push(&vec![0.0; d], 30.0, None, &mut means);
        for a in 0..b1 {
            let ca: Vec<f64> = (0..d).map(|_| normal(10.0)).collect();
            push(&ca, 4.0, Some((a, usize::MAX)), &mut means);
            for b in 0..b2 {
                let cb: Vec<f64> = ca.iter().map(|x| x + normal(2.5)).collect();
                push(&cb, 1.0, Some((a, b)), &mut means);
                for _ in 0..leaves {
                    let cl: Vec<f64> = cb.iter().map(|x| x + normal(0.4)).collect();
                    push(&cl, 0.1, Some((a, b)), &mut means);
                }
            }
        }
        let n = truth.len();
        (
            Gaussians::from_diagonal(n, d, means, vars, 1e-6).unwrap(),
            truth,
        )
    }

    fn random_gaussians(n: usize, d: usize, seed: u64) -> Gaussians {
        let mut rng = Xoshiro256Plus::seed_from_u64(seed);
        let means: Vec<f64> = (0..n * d).map(|_| rng.gen_range(-3.0..3.0)).collect();
        let vars: Vec<f64> = (0..n * d).map(|_| rng.gen_range(0.2..2.0)).collect();
        Gaussians::from_diagonal(n, d, means, vars, 1e-6).unwrap()
    }

    fn quiet() -> impl Fn(BuildProgress) + Sync {
        |_| {}
    }

    /// The tree must be valid and hold every given row exactly once.
    fn assert_covers(t: &TreeFile, phrases: &PhraseTable, rows: &[PhraseId]) -> Tree {
        assert_eq!(t.parent.len() + 1, rows.len(), "node count");
        assert!(!t.parent.contains_key(&t.root), "root has a parent");
        let tree = Tree::from_id_map(phrases, &t.root, &t.parent).expect("valid tree");
        for &r in rows {
            assert!(tree.is_placed(r), "{} is not placed", phrases.id(r));
        }
        assert_eq!(tree.node_count(), rows.len());
        tree
    }

    #[test]
    fn fast_ln_matches_the_library_logarithm() {
        let mut rng = Xoshiro256Plus::seed_from_u64(4);
        let mut worst: f64 = 0.0;
        for i in 0..200_000 {
            let x: f64 = match i % 3 {
                0 => rng.gen_range(1e-6..1e6),
                1 => rng.gen_range(0.5..2.0),
                _ => (rng.gen_range(-700.0..700.0f64)).exp(),
            };
            worst = worst.max((fast_ln(x) - x.ln()).abs() / x.ln().abs().max(1.0));
        }
        for x in [1.0, 2.0, 0.5, std::f64::consts::SQRT_2, 1e-300, 1e300] {
            worst = worst.max((fast_ln(x) - x.ln()).abs() / x.ln().abs().max(1.0));
        }
        assert!(worst < 1e-14, "worst relative error {worst:e}");
    }

    #[test]
    fn exact_scores_use_each_pair_once_with_the_same_result() {
        let g = random_gaussians(120, 7, 5);
        let rows: Vec<PhraseId> = (0..120).rev().collect();
        let cancel = AtomicBool::new(false);
        for sim in [Similarity::Elk, Similarity::Bhattacharyya, Similarity::Kl] {
            let a = exact_scores(&g, sim, &rows, &cancel).unwrap();
            let b = mean_scores(&g, sim, &rows, &rows, &cancel).unwrap();
            let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
            assert_eq!(bits(&a), bits(&b), "{sim:?}");
        }
    }

    #[test]
    fn screening_scores_agree_with_the_f64_scores() {
        let g = random_gaussians(300, 13, 8);
        let rows: Vec<PhraseId> = (0..300).collect();
        let cancel = AtomicBool::new(false);
        for sim in [Similarity::Elk, Similarity::Bhattacharyya, Similarity::Kl] {
            let a = mean_scores(&g, sim, &rows, &rows[..100], &cancel).unwrap();
            let b = screen_scores(&g, sim, &rows, &rows[..100], &cancel).unwrap();
            for (x, y) in a.iter().zip(&b) {
                assert!(
                    (x - y).abs() <= 1e-4 * x.abs().max(1e-3),
                    "{sim:?}: {x} vs {y}"
                );
            }
        }
        let mut worst: f32 = 0.0;
        for i in 1..100_000 {
            let x = i as f32 * 1e-3;
            worst = worst.max((fast_ln_f32(x) - x.ln()).abs() / x.ln().abs().max(1.0));
        }
        assert!(worst < 1e-6, "worst {worst:e}");
    }

    #[test]
    fn block_similarities_match_the_reference_formulas() {
        let g = random_gaussians(6, 5, 3);
        let rows: Vec<PhraseId> = (0..6).collect();
        for sim in [Similarity::Elk, Similarity::Bhattacharyya, Similarity::Kl] {
            let b = SimBlock::new(&g, sim, &rows);
            for i in 0..6 {
                for j in 0..6 {
                    let (p, q) = (g.get(i), g.get(j));
                    let want = match sim {
                        Similarity::Elk => log_expected_likelihood(&p, &q),
                        Similarity::Bhattacharyya => bhattacharyya_coefficient(&p, &q),
                        Similarity::Kl => -sym_kl(&p, &q),
                    };
                    let got = b.pair(i, &b, j);
                    assert!(
                        (got - want).abs() <= 1e-9 * want.abs().max(1.0),
                        "{sim:?} {i} {j}"
                    );
                    assert_eq!(got.to_bits(), b.pair(j, &b, i).to_bits(), "symmetry");
                }
            }
        }
    }

    #[test]
    fn planted_hierarchy_is_recovered() {
        let (g, truth) = planted(8, 4, 3, 12, 5);
        let n = g.len();
        let phrases = table(n);
        let params = BuildParams::default();
        let built = build(
            &g,
            &phrases,
            None,
            &params,
            &quiet(),
            &AtomicBool::new(false),
        )
        .unwrap();
        let all: Vec<PhraseId> = (0..n as PhraseId).collect();
        let tree = assert_covers(&built.tree_file, &phrases, &all);
        // the root cluster splits into the 4 planted groups
        let root_report = built.report.node(&built.tree_file.root).unwrap();
        assert_eq!(root_report.chosen_k, 4, "{root_report:?}");
        // Each phrase's ancestor at depth `level` defines its built cluster; a cluster is
        // matched with the planted group most of its phrases belong to.
        let depths = tree.depths();
        for level in [1usize, 2] {
            let key = |r: usize| -> Option<(usize, usize)> {
                truth[r].map(|(a, b)| if level == 1 { (a, 0) } else { (a, b) })
            };
            let mut clusters: BTreeMap<PhraseId, BTreeMap<(usize, usize), usize>> = BTreeMap::new();
            let mut counted = 0;
            for r in 0..n {
                let Some(k) = key(r) else { continue };
                if level == 2 && k.1 == usize::MAX {
                    continue; // level-1 phrases have no level-2 group
                }
                if (depths[r] as usize) < level {
                    continue;
                }
                let mut anc = r as PhraseId;
                while depths[anc as usize] as usize > level {
                    anc = tree.parent(anc).unwrap();
                }
                *clusters.entry(anc).or_default().entry(k).or_default() += 1;
                counted += 1;
            }
            let right: usize = clusters
                .values()
                .map(|m| m.values().copied().max().unwrap_or(0))
                .sum();
            let share = right as f64 / counted as f64;
            assert!(
                share >= 0.95,
                "level {level}: {right}/{counted} under the right cluster"
            );
            assert!(
                counted as f64 >= 0.9 * (n - 1 - 4) as f64,
                "level {level}: only {counted} counted"
            );
        }
    }

    #[test]
    fn same_seed_gives_byte_identical_output() {
        let (g, _) = planted(6, 3, 3, 15, 9);
        let phrases = table(g.len());
        let params = BuildParams {
            seed: 42,
            exact_limit: 40,
            sample_size: 30,
            elbow_sample: 50,
            with_variance: 0.5,
            ..BuildParams::default()
        };
        let run = || {
            build(
                &g,
                &phrases,
                None,
                &params,
                &quiet(),
                &AtomicBool::new(false),
            )
            .unwrap()
        };
        let (a, b) = (run(), run());
        assert_eq!(to_json_pretty(&a.tree_file), to_json_pretty(&b.tree_file));
        assert_eq!(to_json_pretty(&a.report), to_json_pretty(&b.report));
        // a single thread gives the same bytes as the shared pool
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(1)
            .build()
            .unwrap();
        let c = pool.install(run);
        assert_eq!(to_json_pretty(&a.report), to_json_pretty(&c.report));
        assert_eq!(to_json_pretty(&a.tree_file), to_json_pretty(&c.tree_file));
    }

    #[test]
    fn cancellation_stops_the_build() {
        let (g, _) = planted(6, 3, 3, 15, 9);
        let phrases = table(g.len());
        let params = BuildParams::default();
        let set = AtomicBool::new(true);
        assert_eq!(
            build(&g, &phrases, None, &params, &quiet(), &set),
            Err(BuildError::Cancelled)
        );
        // cancelled from the progress callback after the first placement
        let flag = AtomicBool::new(false);
        let calls = AtomicUsize::new(0);
        let progress = |_: BuildProgress| {
            calls.fetch_add(1, Ordering::Relaxed);
            flag.store(true, Ordering::Relaxed);
        };
        assert_eq!(
            build(&g, &phrases, None, &params, &progress, &flag),
            Err(BuildError::Cancelled)
        );
        assert!(calls.load(Ordering::Relaxed) < 10, "stopped promptly");
    }

    #[test]
    fn progress_reaches_the_total() {
        let (g, _) = planted(4, 2, 2, 6, 1);
        let phrases = table(g.len());
        let last = AtomicUsize::new(0);
        let progress = |p: BuildProgress| {
            assert_eq!(p.total, g.len());
            last.fetch_max(p.placed, Ordering::Relaxed);
        };
        build(
            &g,
            &phrases,
            None,
            &BuildParams::default(),
            &progress,
            &AtomicBool::new(false),
        )
        .unwrap();
        assert_eq!(last.load(Ordering::Relaxed), g.len());
    }

    #[test]
    fn identical_phrases_become_one_flat_node() {
        let (n, d) = (20, 3);
        let g = Gaussians::from_diagonal(n, d, vec![0.5; n * d], vec![1.0; n * d], 1e-6).unwrap();
        let phrases = table(n);
        let built = build(
            &g,
            &phrases,
            None,
            &BuildParams::default(),
            &quiet(),
            &AtomicBool::new(false),
        )
        .unwrap();
        let all: Vec<PhraseId> = (0..n as PhraseId).collect();
        let tree = assert_covers(&built.tree_file, &phrases, &all);
        // all scores tie, so the lowest row is the representative
        assert_eq!(built.tree_file.root, "tag-00000");
        assert_eq!(tree.max_depth(), 1);
        let r = built.report.node("tag-00000").unwrap();
        assert_eq!(r.chosen_k, 0);
        assert!(r.reason.contains("identical"), "{}", r.reason);
    }

    #[test]
    fn one_dimension_works() {
        let mut means = Vec::new();
        for c in [-10.0, 0.0, 10.0] {
            for i in 0..10 {
                means.push(c + 0.1 * i as f64);
            }
        }
        let n = means.len();
        let g = Gaussians::from_diagonal(n, 1, means, vec![0.5; n], 1e-6).unwrap();
        let phrases = table(n);
        let built = build(
            &g,
            &phrases,
            None,
            &BuildParams::default(),
            &quiet(),
            &AtomicBool::new(false),
        )
        .unwrap();
        let all: Vec<PhraseId> = (0..n as PhraseId).collect();
        assert_covers(&built.tree_file, &phrases, &all);
        let root = built.report.node(&built.tree_file.root).unwrap();
        assert!(root.chosen_k >= 2);
    }

    #[test]
    fn full_covariance_builds_with_the_reference_similarities() {
        // 2-D full covariances: two groups of 12, correlated within each phrase
        let mut means = Vec::new();
        let mut covs = Vec::new();
        for i in 0..24 {
            let c = if i < 12 { -4.0 } else { 4.0 };
            means.extend([c + 0.1 * (i % 12) as f64, 0.05 * i as f64]);
            covs.extend([1.0, 0.3, 0.3, 0.5]);
        }
        let g = Gaussians::from_full(24, 2, means, covs, 1e-6).unwrap();
        let phrases = table(24);
        let params = BuildParams {
            exact_limit: 10,
            sample_size: 8,
            ..BuildParams::default()
        };
        let b = build(
            &g,
            &phrases,
            None,
            &params,
            &quiet(),
            &AtomicBool::new(false),
        )
        .unwrap();
        let all: Vec<PhraseId> = (0..24).collect();
        assert_covers(&b.tree_file, &phrases, &all);
        let root = b.report.node(&b.tree_file.root).unwrap();
        assert_eq!(root.score_sample, 8);
        // the reported score is the exact mean similarity (gaussian.rs formulas)
        let r = phrases.get(&b.tree_file.root).unwrap() as usize;
        let want: f64 = (0..24)
            .filter(|&j| j != r)
            .map(|j| log_expected_likelihood(&g.get(r), &g.get(j)))
            .sum::<f64>()
            / 23.0;
        assert!((root.representative_score - want).abs() < 1e-9);
    }

    #[test]
    fn one_and_two_phrases() {
        let g = Gaussians::from_diagonal(1, 2, vec![1.0, 2.0], vec![1.0, 1.0], 1e-6).unwrap();
        let phrases = table(1);
        let b = build(
            &g,
            &phrases,
            None,
            &BuildParams::default(),
            &quiet(),
            &AtomicBool::new(false),
        )
        .unwrap();
        assert_eq!(b.tree_file.root, "tag-00000");
        assert!(b.tree_file.parent.is_empty());
        assert!(b.report.nodes.is_empty());
        assert_eq!(b.report.depth, 0);

        // two phrases: equal summed similarity, so the broader one is the root
        let g = Gaussians::from_diagonal(
            2,
            2,
            vec![0.0, 0.0, 1.0, 1.0],
            vec![1.0, 1.0, 3.0, 3.0],
            1e-6,
        )
        .unwrap();
        let phrases = table(2);
        for sim in [Similarity::Elk, Similarity::Bhattacharyya, Similarity::Kl] {
            let params = BuildParams {
                similarity: sim,
                ..BuildParams::default()
            };
            let b = build(
                &g,
                &phrases,
                None,
                &params,
                &quiet(),
                &AtomicBool::new(false),
            )
            .unwrap();
            assert_eq!(b.tree_file.root, "tag-00001", "{sim:?}");
            assert_eq!(
                b.tree_file.parent.get("tag-00000").map(String::as_str),
                Some("tag-00001")
            );
            assert_eq!(b.report.depth, 1);
        }
    }

    #[test]
    fn a_subset_of_rows_is_built_alone() {
        let (g, _) = planted(4, 2, 2, 6, 2);
        let phrases = table(g.len());
        let rows: Vec<PhraseId> = (0..g.len() as PhraseId).filter(|r| r % 3 != 0).collect();
        let b = build(
            &g,
            &phrases,
            Some(&rows),
            &BuildParams::default(),
            &quiet(),
            &AtomicBool::new(false),
        )
        .unwrap();
        assert_eq!(b.tree_file.parent.len() + 1, rows.len());
        let tree = Tree::from_id_map(&phrases, &b.tree_file.root, &b.tree_file.parent).unwrap();
        for r in 0..g.len() as PhraseId {
            assert_eq!(tree.is_placed(r), r % 3 != 0);
        }
        let dup = [1, 2, 1];
        assert_eq!(
            build(
                &g,
                &phrases,
                Some(&dup),
                &BuildParams::default(),
                &quiet(),
                &AtomicBool::new(false)
            ),
            Err(BuildError::DuplicateRow("tag-00001".into()))
        );
        assert_eq!(
            build(
                &g,
                &phrases,
                Some(&[]),
                &BuildParams::default(),
                &quiet(),
                &AtomicBool::new(false)
            ),
            Err(BuildError::Empty)
        );
        assert!(matches!(
            build(
                &g,
                &phrases,
                Some(&[9999]),
                &BuildParams::default(),
                &quiet(),
                &AtomicBool::new(false)
            ),
            Err(BuildError::UnknownRow { row: 9999, .. })
        ));
    }

    #[test]
    fn bad_parameters_name_the_field() {
        let g = random_gaussians(5, 2, 1);
        let phrases = table(5);
        let params = BuildParams {
            k_max: 1,
            ..BuildParams::default()
        };
        let e = build(
            &g,
            &phrases,
            None,
            &params,
            &quiet(),
            &AtomicBool::new(false),
        )
        .unwrap_err();
        assert_eq!(e.to_string(), "parameter k_max is 1: it must be ≥ 2");
        let deep = BuildParams {
            max_depth: 65,
            ..BuildParams::default()
        };
        assert_eq!(
            deep.validate().unwrap_err().to_string(),
            "parameter max_depth is 65: it must be between 1 and 64"
        );
        let params = BuildParams {
            fallback_share: 0.0,
            ..BuildParams::default()
        };
        assert!(matches!(
            params.validate(),
            Err(BuildError::BadParam {
                field: "fallback_share",
                ..
            })
        ));
    }

    #[test]
    fn fallback_share_picks_the_smallest_sufficient_k() {
        let p = BuildParams {
            fallback_share: 0.8,
            ..BuildParams::default()
        };
        // a straight line has no knee: drop from k = 1 to 5 is 4; 80 % is reached at k = 5 − …
        let ks = [1, 2, 3, 4, 5];
        let inertia = [10.0, 9.0, 8.0, 7.0, 6.0];
        let (k, why) = pick_k(&ks, &inertia, &p).unwrap();
        // (10 − 7) / 4 = 0.75 < 0.8, (10 − 6) / 4 = 1 ≥ 0.8
        assert_eq!(k, 5, "{why}");
        assert!(why.starts_with("no knee"));
        let (k, why) = pick_k(&[1, 2], &[10.0, 1.0], &p).unwrap();
        assert_eq!((k, why.as_str()), (2, "only k = 2 possible"));
        let (k, why) = pick_k(&ks, &[100.0, 60.0, 10.0, 9.0, 8.5], &p).unwrap();
        assert_eq!(k, 3, "{why}");
        assert!(why.starts_with("knee"));
    }

    #[test]
    fn sampled_representative_is_close_to_the_exact_one() {
        // mid-size data: 1 531 phrases of a planted hierarchy in 16 dimensions, with the
        // default sample size and number of finalists
        let d = BuildParams::default();
        let (g, _) = planted(16, 5, 5, 60, 77);
        let members: Vec<PhraseId> = (0..g.len() as PhraseId).collect();
        let cancel = AtomicBool::new(false);
        for sim in [Similarity::Elk, Similarity::Bhattacharyya, Similarity::Kl] {
            let exact = exact_scores(&g, sim, &members, &cancel).unwrap();
            let best = exact.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            let mut worst_rank = 0;
            let mut worst_gap: f64 = 0.0;
            for seed in 0..5 {
                let rep = representative(
                    &g,
                    sim,
                    &members,
                    d.exact_limit,
                    d.sample_size,
                    d.refine,
                    seed,
                    &cancel,
                )
                .unwrap();
                assert_eq!(rep.sample, d.sample_size);
                let got = exact[rep.row as usize];
                let rank = exact.iter().filter(|&&s| s > got).count();
                worst_rank = worst_rank.max(rank);
                // shortfall of the chosen phrase's exact score, relative to the best one
                worst_gap = worst_gap.max((best - got) / best.abs());
            }
            eprintln!(
                "{sim:?}: worst rank {worst_rank} of {}, worst relative shortfall {worst_gap:.2e}",
                members.len()
            );
            assert!(worst_rank < 15, "{sim:?}: rank {worst_rank}");
            // BC saturates (≈ 1 inside a tight group, ≈ 0 across groups), so its mean is
            // dominated by a few close neighbours and a 256-member screen is noisier for it
            let limit = if sim == Similarity::Bhattacharyya {
                0.1
            } else {
                0.01
            };
            assert!(worst_gap < limit, "{sim:?}: gap {worst_gap}");
        }
        // within the exact limit the choice is the exact argmax
        let g = random_gaussians(200, 16, 77);
        let rep = representative(
            &g,
            Similarity::Elk,
            &members[..200],
            256,
            64,
            32,
            0,
            &cancel,
        )
        .unwrap();
        let ex = exact_scores(&g, Similarity::Elk, &members[..200], &cancel).unwrap();
        let arg = (0..200).max_by(|&a, &b| ex[a].total_cmp(&ex[b])).unwrap();
        assert_eq!(rep.row as usize, arg);
        assert_eq!(rep.sample, 0);
    }
}
