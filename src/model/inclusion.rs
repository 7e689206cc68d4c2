//! The inclusion builder: a tree in which each phrase's parent is a broader phrase that
//! contains it, chosen for the whole tree at once.
//!
//! 1. **Candidates.** A phrase p is a candidate parent of c when it is broader by the
//!    generality margin: ln det Σp > ln det Σc + [`InclusionParams::generality_margin`] (a
//!    negative margin also admits slightly narrower parents; the arborescence then resolves
//!    the cycles this allows). Each candidate edge costs
//!    `cost(c, p) = D(c ‖ p) + breadth_weight · (ln det Σp − ln det Σc)`, D being the
//!    asymmetric KL(c ‖ p) (closed form) or the symmetric Bhattacharyya distance
//!    ([`InclusionCost`]). Each phrase keeps its [`InclusionParams::candidates_per_node`]
//!    cheapest candidates (ties: lower row). Up to [`InclusionParams::exact_limit`] phrases
//!    every broader phrase is scored; above it an inverted-file index over the means (a
//!    k-means partition into cells, deterministic Lloyd iterations from a seeded choice of
//!    rows) restricts the scan to the [`InclusionParams::probe`] cells nearest to the
//!    phrase's mean plus the [`InclusionParams::broad_pool`] broadest phrases, so the work
//!    is O(n·(cells + probe·n/cells)·d), not O(n²·d). Blocks of rows run in parallel (rayon)
//!    and are joined in row order, so the result does not depend on the thread count.
//! 2. **Root.** The broadest phrase (largest ln det Σ; equal: the lower row) that has no
//!    fixed parent. It is also added as a candidate of every phrase, at its true cost, so
//!    every phrase can be reached; a phrase whose only edge is the root's is reported as a
//!    `fallback`.
//! 3. **Arborescence.** A minimum-cost spanning arborescence over the candidate edges
//!    (Chu–Liu/Edmonds, [`super::arborescence`]). Fixed parents (pins) are the only edge of
//!    their child. With a margin ≥ 0 every candidate edge points from a broader to a
//!    narrower phrase, the graph has no cycle, and the arborescence is each phrase's
//!    cheapest candidate; with a negative margin it is a genuinely global choice.
//! 4. **Repair** (only with [`InclusionParams::max_fanout`] / [`InclusionParams::max_depth`]):
//!    top-down, a node with too many children keeps its cheapest ones; each other child
//!    moves to its cheapest candidate that has room, keeps the depth limit and is not in the
//!    child's own subtree, else under its cheapest kept sibling. Then every node deeper than
//!    the limit moves to its cheapest candidate at a depth that fits (with fanout room),
//!    else to its ancestor one level above the limit. The depth limit wins when both cannot
//!    hold. Fixed parents are never moved.
//! 5. **Refinement.** Local moves that lower the total cost: a node moves to a cheaper
//!    candidate (a sibling or the grandparent's other children among them: the
//!    one-level-too-high and sibling confusions) when the move keeps the tree acyclic and
//!    within the limits; rounds until nothing moves. Without limits the arborescence is
//!    already optimal for this additive cost, so the pass moves nothing then.
//! 6. **Coherence.** A parent must contain the union of its children: local moves that
//!    lower the edge costs plus each node's disagreement between its given spread and the
//!    spread its children imply (law of total variance; [`coherence`]). This is what lifts
//!    the tree above the per-phrase cheapest candidate.
//!
//! Same input and parameters give identical output on any thread count.
//!
//! **Defaults** (KL cost, margin 0, no breadth weight, 8 candidates, coherent root,
//! coherence weight 1, spread model auto, own phrase placed) carry no constant fitted to
//! data (the own-phrase rule adds none: it is the mean identity of a fitted Gaussian, see
//! [`coherence`]): KL(c ‖ p) is the
//! asymmetric "how well does the parent cover the child" cost, a zero margin adds nothing to
//! "broader", the coherence term is a KL divergence like the edge cost and is added with
//! weight 1, counted once per phrase of the node's subtree (a log-likelihood over its
//! phrases), and the spread model is chosen by a sign test whose two predictions come from the
//! two readings of a Gaussian ([`coherence`]). The *forms* (the law-of-total-variance check,
//! the subtree-size count, the coherent root, the two spread models) were chosen after
//! measuring on all eight real check sets of `benches/real/` (no half was held out), and
//! both Gaussian versions of those sets were made the way the two spread models read them,
//! so those sets favour these choices; Gaussians trained by an embedding model need not
//! follow either reading. The grid in `tests/inclusion_real.rs` (test `grid`) shows the
//! sensitivity (coherence weight 0.5 … 2, spread model forced, root rules).

use std::collections::BTreeMap;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};

use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use super::arborescence::{ArborescenceError, Edge, min_arborescence};
use super::gaussian::{CovarianceKind, Gaussians, PhraseId, bhattacharyya_distance, kl};
use super::kernels;
use super::phrase::PhraseTable;
use super::tree::TreeFile;

mod coherence;
mod index;
mod lanes;
pub use coherence::SpreadModel;
use index::build_index;
mod options;
use options::{Opt, OptionBlock, Options, cheapest_if_acyclic};
mod repair;
use repair::Shape;

/// Largest accepted [`InclusionParams::max_depth`].
pub const MAX_DEPTH_LIMIT: usize = 64;

/// Largest accepted [`InclusionParams::candidates_per_node`]: far above any useful list,
/// and it keeps the candidates of a block of 256 phrases countable in 32 bits.
pub const MAX_CANDIDATES_PER_NODE: usize = 65_536;

/// The divergence an edge child → parent is weighted by.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum InclusionCost {
    /// KL(child ‖ parent): low when the parent's Gaussian covers the child's.
    Kl,
    /// Bhattacharyya distance (symmetric: overlap, not containment).
    Bhattacharyya,
}

impl InclusionCost {
    /// Name used in reports and on the command line.
    pub fn as_str(self) -> &'static str {
        match self {
            InclusionCost::Kl => "kl",
            InclusionCost::Bhattacharyya => "bhattacharyya",
        }
    }
}

/// How the root is chosen.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum InclusionRoot {
    /// The broadest phrase (largest ln det Σ; equal: the lower row).
    Broadest,
    /// Among the [`InclusionParams::broad_pool`] broadest phrases, the one that covers the
    /// others best: the lowest mean divergence D(c ‖ root) over every phrase c (a sample of
    /// at most 4096 evenly spaced rows above that size).
    BestCover,
    /// Among the [`InclusionParams::broad_pool`] broadest phrases, the one whose spread best
    /// matches the spread of all phrases about its mean (law of total variance, every phrase
    /// a point of the smallest variance; disagreement as in [`coherence`]).
    Coherent,
}

/// Everything that steers an inclusion build. Check with [`InclusionParams::check`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct InclusionParams {
    /// Candidate parents kept per phrase (the cheapest). ≥ 1.
    pub candidates_per_node: usize,
    /// A candidate parent must have ln det Σ > the child's + this (nats). Finite; may be
    /// negative (admits slightly narrower parents).
    pub generality_margin: f64,
    /// Extra weight on the parent's breadth, ln det Σp − ln det Σc, in the cost (0 = the
    /// divergence alone; positive prefers the tightest container, negative a broader one).
    /// Finite, > −0.5 (KL itself weighs the breadth by 0.5).
    pub breadth_weight: f64,
    /// Deepest allowed node (root = 0), 1 ..= 64; None = no limit.
    pub max_depth: Option<usize>,
    /// Most children per node, ≥ 1; None = no limit.
    pub max_fanout: Option<usize>,
    /// The divergence of the edge cost.
    pub cost: InclusionCost,
    /// Up to this many phrases every broader phrase is scored; above it the index is used. ≥ 1.
    pub exact_limit: usize,
    /// Cells of the index (None: ⌈√n⌉). ≥ 1.
    pub cells: Option<usize>,
    /// Cells scanned per phrase. ≥ 1.
    pub probe: usize,
    /// The broadest phrases scored for every phrase besides the probed cells. ≥ 0.
    pub broad_pool: usize,
    /// Lloyd iterations of the index's k-means. ≥ 1.
    pub index_iterations: usize,
    /// Rounds of the refinement pass (0 = off).
    pub refine_rounds: usize,
    /// Weight of the coherence term (0 = no coherence pass; see [`coherence`]). Finite, ≥ 0.
    #[serde(default = "default_coherence_weight")]
    pub coherence_weight: f64,
    /// How the coherence pass reads a node's spread.
    #[serde(default = "default_spread_model")]
    pub spread_model: SpreadModel,
    /// Children spread model: each parent's own phrase is placed where the parent's mean
    /// puts it (μ_p = (x_p + Σ_c n_c μ_c) / (1 + Σ_c n_c)) instead of at μ_p, which makes
    /// the law of total variance exact for Gaussians fitted to subtrees; the coherence pass
    /// then runs twice, first with the phrase at μ_p, then with it placed (see
    /// [`coherence`]). Missing in reports written before it existed: false, the old
    /// behaviour.
    #[serde(default)]
    pub own_phrase: bool,
    /// How the root is chosen.
    pub root: InclusionRoot,
    /// Seed of the index's initial centroids (the only random choice).
    pub seed: u64,
}

impl Default for InclusionParams {
    fn default() -> Self {
        InclusionParams {
            candidates_per_node: 8,
            generality_margin: 0.0,
            breadth_weight: 0.0,
            max_depth: None,
            max_fanout: None,
            cost: InclusionCost::Kl,
            exact_limit: 8192,
            cells: None,
            probe: 8,
            broad_pool: 32,
            index_iterations: 6,
            refine_rounds: 4,
            coherence_weight: 1.0,
            spread_model: SpreadModel::Auto,
            own_phrase: true,
            root: InclusionRoot::Coherent,
            seed: 0,
        }
    }
}

fn default_coherence_weight() -> f64 {
    1.0
}

fn default_spread_model() -> SpreadModel {
    SpreadModel::Auto
}

/// Parameters that passed [`InclusionParams::check`].
#[derive(Debug, Clone, PartialEq)]
pub struct CheckedInclusionParams(InclusionParams);

impl std::ops::Deref for CheckedInclusionParams {
    type Target = InclusionParams;
    fn deref(&self) -> &InclusionParams {
        &self.0
    }
}

impl CheckedInclusionParams {
    /// The parameters (for the report).
    pub fn params(&self) -> &InclusionParams {
        &self.0
    }
}

impl InclusionParams {
    /// Check every range rule; the error names the parameter.
    pub fn check(self) -> Result<CheckedInclusionParams, InclusionError> {
        fn rule(
            ok: bool,
            field: &'static str,
            value: String,
            rule: &'static str,
        ) -> Result<(), InclusionError> {
            if ok {
                Ok(())
            } else {
                Err(InclusionError::BadParam { field, value, rule })
            }
        }
        let p = &self;
        rule(
            (1..=MAX_CANDIDATES_PER_NODE).contains(&p.candidates_per_node),
            "candidates_per_node",
            p.candidates_per_node.to_string(),
            "must be between 1 and 65 536",
        )?;
        rule(
            p.generality_margin.is_finite(),
            "generality_margin",
            p.generality_margin.to_string(),
            "must be a finite number",
        )?;
        rule(
            p.breadth_weight.is_finite() && p.breadth_weight > -0.5,
            "breadth_weight",
            p.breadth_weight.to_string(),
            "must be a finite number > −0.5",
        )?;
        if let Some(d) = p.max_depth {
            rule(
                (1..=MAX_DEPTH_LIMIT).contains(&d),
                "max_depth",
                d.to_string(),
                "must be between 1 and 64",
            )?;
        }
        if let Some(f) = p.max_fanout {
            rule(f >= 1, "max_fanout", f.to_string(), "must be ≥ 1")?;
        }
        rule(
            p.exact_limit >= 1,
            "exact_limit",
            p.exact_limit.to_string(),
            "must be ≥ 1",
        )?;
        if let Some(c) = p.cells {
            rule(c >= 1, "cells", c.to_string(), "must be ≥ 1")?;
        }
        rule(
            p.coherence_weight.is_finite() && p.coherence_weight >= 0.0,
            "coherence_weight",
            p.coherence_weight.to_string(),
            "must be a finite number ≥ 0",
        )?;
        rule(p.probe >= 1, "probe", p.probe.to_string(), "must be ≥ 1")?;
        rule(
            p.index_iterations >= 1,
            "index_iterations",
            p.index_iterations.to_string(),
            "must be ≥ 1",
        )?;
        Ok(CheckedInclusionParams(self))
    }
}

/// Why an inclusion build did not produce a tree.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum InclusionError {
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
    /// A fixed parent names a phrase outside the build, or a phrase fixed twice.
    #[error("fixed parent of \"{child}\": {why}")]
    BadFixed {
        /// The child.
        child: String,
        /// What is wrong.
        why: String,
    },
    /// The fixed parents form a cycle (or leave no phrase free to be the root).
    #[error("the fixed parents form a cycle through \"{0}\"")]
    FixedCycle(String),
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
    /// The arborescence step failed (a bug if it happens: every phrase has the root edge).
    #[error(transparent)]
    Arborescence(#[from] ArborescenceError),
}

/// The step a running inclusion build is in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum InclusionStage {
    /// Building the index over the means.
    Index,
    /// Scoring candidate parents.
    Candidates,
    /// Solving the arborescence.
    Arborescence,
    /// Depth and fanout repair, refinement.
    Refine,
}

/// Progress of a running inclusion build.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct InclusionProgress {
    /// Current step.
    pub stage: InclusionStage,
    /// Units done in this step (phrases for candidates).
    pub done: usize,
    /// Units of this step.
    pub total: usize,
}

/// The cheapest candidate parent other than the chosen one.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunnerUp {
    /// Its stable id.
    pub id: String,
    /// Its edge cost.
    pub cost: f64,
}

/// How one non-root phrase was placed.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InclusionNode {
    /// The phrase, stable id.
    pub node: String,
    /// Its parent.
    pub parent: String,
    /// Cost of the edge to the parent.
    pub cost: f64,
    /// The cheapest other candidate, if any.
    pub runner_up: Option<RunnerUp>,
    /// Placed under the root only because it had no other candidate.
    pub fallback: bool,
    /// The parent was fixed by the caller (a pin).
    pub fixed: bool,
}

/// Counts of what the build did.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct InclusionStats {
    /// Whether every broader phrase was scored (no index).
    pub exact: bool,
    /// Cells of the index (0 when exact).
    pub cells: usize,
    /// Candidate edges given to the arborescence.
    pub candidate_edges: usize,
    /// Phrases whose only edge was the root's.
    pub fallback_to_root: usize,
    /// Moves made by the fanout repair.
    pub fanout_moves: usize,
    /// Moves made by the depth repair.
    pub depth_moves: usize,
    /// Moves made by the refinement pass.
    pub refine_moves: usize,
    /// Moves made by the coherence pass.
    #[serde(default)]
    pub coherence_moves: usize,
    /// The spread model the coherence pass used (None: no pass).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub spread_model: Option<SpreadModel>,
    /// Total edge cost of the arborescence before repair.
    pub arborescence_cost: f64,
}

/// A finished inclusion build.
#[derive(Debug, Clone, PartialEq)]
pub struct InclusionTree {
    /// The tree (`tree.json`), covering every given phrase exactly once.
    pub tree_file: TreeFile,
    /// Root row.
    pub root: PhraseId,
    /// Depth of the deepest node.
    pub depth: usize,
    /// Total edge cost of the final tree.
    pub total_cost: f64,
    /// Every non-root phrase, in row order.
    pub nodes: Vec<InclusionNode>,
    /// What the build did.
    pub stats: InclusionStats,
}

/// A scored candidate: (cost, parent row).
type Cand = (f64, u32);

/// Keep `list` sorted by (cost, row) with at most `k` entries.
fn push_top(list: &mut Vec<Cand>, k: usize, c: Cand) {
    if list.len() == k {
        let last = list[k - 1];
        if (c.0, c.1) >= (last.0, last.1) {
            return;
        }
        list.pop();
    }
    let pos = list.partition_point(|x| (x.0, x.1) < (c.0, c.1));
    list.insert(pos, c);
}

struct Scorer<'a> {
    g: &'a Gaussians,
    cost: InclusionCost,
    breadth: f64,
    d: f64,
}

impl Scorer<'_> {
    fn cost(&self, c: usize, p: usize) -> f64 {
        let g = self.g;
        let (ldc, ldp) = (g.log_det(c), g.log_det(p));
        let base = match (self.cost, g.kind()) {
            (InclusionCost::Kl, CovarianceKind::Diagonal) => {
                let s = kernels::kl_sum(g.mean(c), g.variances(c), g.mean(p), g.variances(p));
                0.5 * (s as f64 - self.d + ldp - ldc)
            }
            (InclusionCost::Kl, CovarianceKind::Full) => kl(&g.get(c), &g.get(p)),
            (InclusionCost::Bhattacharyya, _) => bhattacharyya_distance(&g.get(c), &g.get(p)),
        };
        base + self.breadth * (ldp - ldc)
    }
}

/// The root's local index: see [`InclusionRoot`]. Only phrases without a fixed parent
/// qualify; None when there is none.
fn choose_root(
    members: &[u32],
    fixed_parent: &[Option<u32>],
    by_breadth: &dyn Fn(&u32, &u32) -> std::cmp::Ordering,
    params: &InclusionParams,
    scorer: &Scorer,
) -> Option<usize> {
    let mut free: Vec<usize> = (0..members.len())
        .filter(|&i| fixed_parent[i].is_none())
        .collect();
    free.sort_by(|&a, &b| by_breadth(&members[a], &members[b]));
    match params.root {
        InclusionRoot::Broadest => free.first().copied(),
        InclusionRoot::BestCover => {
            let pool = &free[..free.len().min(params.broad_pool.max(1))];
            let step = members.len().div_ceil(4096).max(1);
            let sample: Vec<usize> = (0..members.len()).step_by(step).collect();
            let score = |r: usize| -> f64 {
                sample
                    .iter()
                    .filter(|&&c| c != r)
                    .map(|&c| scorer.cost(members[c] as usize, members[r] as usize))
                    .sum::<f64>()
            };
            let scores: Vec<f64> = pool.par_iter().map(|&r| score(r)).collect();
            pool.iter()
                .zip(&scores)
                .min_by(|a, b| a.1.partial_cmp(b.1).unwrap_or(std::cmp::Ordering::Equal))
                .map(|(&r, _)| r)
        }
        InclusionRoot::Coherent => {
            let pool = &free[..free.len().min(params.broad_pool.max(1))];
            let scores = coherence::root_disagreement(scorer.g, members, pool);
            pool.iter()
                .zip(&scores)
                .min_by(|a, b| a.1.partial_cmp(b.1).unwrap_or(std::cmp::Ordering::Equal))
                .map(|(&r, _)| r)
        }
    }
}

/// Build an inclusion tree over `rows` (all phrases when None) of `g`.
///
/// `fixed` lists (child, parent) rows whose parent is given (pins); both must be among the
/// built rows, each child at most once. `progress` is called from worker threads; setting
/// `cancel` stops the build promptly with [`InclusionError::Cancelled`].
pub fn build_inclusion(
    g: &Gaussians,
    phrases: &PhraseTable,
    rows: Option<&[PhraseId]>,
    fixed: &[(PhraseId, PhraseId)],
    params: &CheckedInclusionParams,
    progress: &(dyn Fn(InclusionProgress) + Sync),
    cancel: &AtomicBool,
) -> Result<InclusionTree, InclusionError> {
    // what the caller freed before (the project's old tree, loading) goes back first
    // (memtrim.rs)
    crate::model::memtrim::release_free_memory();
    let n_all = g.len();
    if phrases.len() != n_all {
        return Err(InclusionError::Mismatch {
            phrases: phrases.len(),
            gaussians: n_all,
        });
    }
    let members: Vec<u32> = match rows {
        None => (0..n_all as u32).collect(),
        Some(r) => {
            let mut seen = vec![false; n_all];
            for &x in r {
                if x as usize >= n_all {
                    return Err(InclusionError::UnknownRow { row: x, len: n_all });
                }
                if seen[x as usize] {
                    return Err(InclusionError::DuplicateRow(phrases.id(x).to_string()));
                }
                seen[x as usize] = true;
            }
            let mut v = r.to_vec();
            v.sort_unstable();
            v
        }
    };
    if members.is_empty() {
        return Err(InclusionError::Empty);
    }
    let m = members.len();
    // local index of every member row
    let mut local = vec![u32::MAX; n_all];
    for (i, &r) in members.iter().enumerate() {
        local[r as usize] = i as u32;
    }
    // fixed parents, by local index
    let mut fixed_parent: Vec<Option<u32>> = vec![None; m];
    for &(c, p) in fixed {
        let name = |x: u32| {
            if (x as usize) < n_all {
                phrases.id(x).to_string()
            } else {
                format!("row {x}")
            }
        };
        let lc = local.get(c as usize).copied().unwrap_or(u32::MAX);
        let lp = local.get(p as usize).copied().unwrap_or(u32::MAX);
        if lc == u32::MAX || lp == u32::MAX {
            return Err(InclusionError::BadFixed {
                child: name(c),
                why: format!(
                    "\"{}\" or \"{}\" is not among the phrases built",
                    name(c),
                    name(p)
                ),
            });
        }
        if lc == lp {
            return Err(InclusionError::FixedCycle(name(c)));
        }
        if fixed_parent[lc as usize].is_some() {
            return Err(InclusionError::BadFixed {
                child: name(c),
                why: "it is fixed twice".to_string(),
            });
        }
        fixed_parent[lc as usize] = Some(lp);
    }
    // cycles among fixed parents
    {
        let mut state = vec![0u8; m]; // 0 new, 1 on the current chain, 2 done
        for s in 0..m {
            let mut chain = Vec::new();
            let mut x = s;
            while state[x] == 0 {
                state[x] = 1;
                chain.push(x);
                match fixed_parent[x] {
                    Some(p) => x = p as usize,
                    None => break,
                }
            }
            if state[x] == 1 && fixed_parent[x].is_some() && chain.contains(&x) {
                return Err(InclusionError::FixedCycle(
                    phrases.id(members[x]).to_string(),
                ));
            }
            for c in chain {
                state[c] = 2;
            }
        }
    }
    let ld = g.log_dets();
    let by_breadth = |a: &u32, b: &u32| {
        ld[*b as usize]
            .partial_cmp(&ld[*a as usize])
            .unwrap_or(std::cmp::Ordering::Equal)
            .then(a.cmp(b))
    };
    let scorer = Scorer {
        g,
        cost: params.cost,
        breadth: params.breadth_weight,
        d: g.dim() as f64,
    };
    let root_local = choose_root(&members, &fixed_parent, &by_breadth, params, &scorer)
        .ok_or_else(|| InclusionError::FixedCycle(phrases.id(members[0]).to_string()))?;
    let root = members[root_local];
    let k = params.candidates_per_node;
    let margin = params.generality_margin;
    let mut stats = InclusionStats::default();

    // 1. candidates
    let exact = m <= params.exact_limit;
    stats.exact = exact;
    let mut order: Vec<u32> = members.clone();
    order.sort_by(by_breadth);
    let index = if exact {
        None
    } else {
        let cells = params
            .cells
            .unwrap_or_else(|| (m as f64).sqrt().ceil() as usize);
        progress(InclusionProgress {
            stage: InclusionStage::Index,
            done: 0,
            total: 1,
        });
        let ix = build_index(
            g,
            &members,
            &by_breadth,
            cells,
            params.index_iterations,
            params.seed,
            cancel,
        )?;
        stats.cells = ix.cells.len();
        Some(ix)
    };
    let pool: Vec<u32> = order.iter().take(params.broad_pool).copied().collect();
    let done = AtomicUsize::new(0);
    let candidates_of = |li: usize| -> Vec<Cand> {
        let c = members[li] as usize;
        let mut top: Vec<Cand> = Vec::with_capacity(k + 1);
        let floor = ld[c] + margin;
        let consider = |top: &mut Vec<Cand>, p: u32| {
            let pu = p as usize;
            if pu != c && pu != root as usize && ld[pu] > floor {
                push_top(top, k, (scorer.cost(c, pu), p));
            }
        };
        match &index {
            None => {
                for &p in &order {
                    if ld[p as usize] <= floor {
                        break;
                    }
                    consider(&mut top, p);
                }
            }
            Some(ix) => {
                for cell in ix.nearest(g.mean(c), params.probe) {
                    for &p in &ix.cells[cell as usize] {
                        if ld[p as usize] <= floor {
                            break;
                        }
                        consider(&mut top, p);
                    }
                }
                for &p in &pool {
                    // skip pool members already scored in a probed cell: push_top would
                    // keep a duplicate, so filter on presence
                    if top.iter().any(|x| x.1 == p) {
                        continue;
                    }
                    consider(&mut top, p);
                }
            }
        }
        top
    };
    // per local node: its candidates with local parents, sorted by (cost, row), root
    // included (before duplicates are dropped: the arborescence's edges of that child)
    let child_options = |li: usize| -> (Vec<Opt>, bool) {
        let c = members[li] as usize;
        match fixed_parent[li] {
            Some(p) => (
                vec![(scorer.cost(c, members[p as usize] as usize), p)],
                false,
            ),
            None => {
                let cand = candidates_of(li);
                let mut v: Vec<Opt> = cand.iter().map(|&(w, p)| (w, local[p as usize])).collect();
                v.push((scorer.cost(c, root as usize), root_local as u32));
                v.sort_by(|a, b| {
                    a.0.partial_cmp(&b.0)
                        .unwrap_or(std::cmp::Ordering::Equal)
                        .then(members[a.1 as usize].cmp(&members[b.1 as usize]))
                });
                (v, cand.is_empty())
            }
        }
    };
    // a block of nodes: their lists (duplicates dropped), edges before dropping, fallback
    // flags, whether a duplicate was dropped
    struct Scanned {
        block: OptionBlock,
        edges: usize,
        fallback: Vec<bool>,
        dropped: bool,
    }
    let chunk = 256;
    let scanned: Vec<Scanned> = (0..m)
        .collect::<Vec<_>>()
        .par_chunks(chunk)
        .map(|ch| {
            let mut s = Scanned {
                block: OptionBlock::with_capacity(ch.len(), k + 1),
                edges: 0,
                fallback: Vec::with_capacity(ch.len()),
                dropped: false,
            };
            if cancel.load(Ordering::Relaxed) {
                return s;
            }
            for &li in ch {
                let (mut opts, fb) = if li == root_local {
                    (Vec::new(), false)
                } else {
                    child_options(li)
                };
                s.edges += opts.len();
                let before = opts.len();
                opts.dedup_by_key(|x| x.1);
                s.dropped |= opts.len() != before;
                s.block.push(&opts);
                s.fallback.push(fb);
            }
            s.block.shrink();
            let d = done.fetch_add(ch.len(), Ordering::Relaxed) + ch.len();
            progress(InclusionProgress {
                stage: InclusionStage::Candidates,
                done: d,
                total: m,
            });
            s
        })
        .collect();
    if cancel.load(Ordering::Relaxed) {
        return Err(InclusionError::Cancelled);
    }

    // 2.–3. edges and the arborescence, on local indices
    let mut fallback = Vec::with_capacity(m);
    let mut blocks = Vec::with_capacity(scanned.len());
    let mut dropped = false;
    for s in scanned {
        stats.candidate_edges += s.edges;
        fallback.extend(s.fallback);
        dropped |= s.dropped;
        blocks.push(s.block);
    }
    let options = Options::from_blocks(chunk, blocks);
    stats.fallback_to_root = fallback.iter().filter(|&&f| f).count();
    progress(InclusionProgress {
        stage: InclusionStage::Arborescence,
        done: 0,
        total: 1,
    });
    let (parent, mut cost_of, arb_cost) = match cheapest_if_acyclic(&options, root_local) {
        Some(t) => t,
        None => {
            // the general algorithm, over every child's edges in parent-row order (equal
            // costs go to the lower row)
            let mut edges: Vec<Edge> = Vec::with_capacity(stats.candidate_edges);
            for li in 0..m {
                if li == root_local {
                    continue;
                }
                // without dropped duplicates a child's edges are its list
                let mut by_row = if dropped {
                    child_options(li).0
                } else {
                    options.get(li).to_vec()
                };
                by_row.sort_by_key(|x| members[x.1 as usize]);
                for (w, p) in by_row {
                    edges.push(Edge {
                        from: p,
                        to: li as u32,
                        cost: w,
                    });
                }
            }
            let arb = min_arborescence(m, root_local as u32, &edges)?;
            let cost_of: Vec<f64> = (0..m)
                .map(|v| arb.edge[v].map_or(0.0, |e| edges[e].cost))
                .collect();
            (arb.parent, cost_of, arb.cost)
        }
    };
    stats.arborescence_cost = arb_cost;
    // what only the candidate scan needed, freed before the passes that allocate their own
    // sums (the coherence pass)
    drop((index, order, pool, local));
    if cancel.load(Ordering::Relaxed) {
        return Err(InclusionError::Cancelled);
    }
    // 4.–5. repair and refinement
    progress(InclusionProgress {
        stage: InclusionStage::Refine,
        done: 0,
        total: 1,
    });
    let mut shape = Shape::new(parent, root_local);
    let is_fixed: Vec<bool> = fixed_parent.iter().map(|f| f.is_some()).collect();
    drop(fixed_parent);
    if let Some(f) = params.max_fanout {
        stats.fanout_moves = shape.repair_fanout(
            f,
            params.max_depth,
            &options,
            &is_fixed,
            &members,
            &scorer,
            &mut cost_of,
        );
    }
    if let Some(dmax) = params.max_depth {
        stats.depth_moves =
            shape.repair_depth(dmax, params.max_fanout, &options, &is_fixed, &mut cost_of);
    }
    if params.refine_rounds > 0 {
        stats.refine_moves = shape.refine(
            params.refine_rounds,
            params.max_depth,
            params.max_fanout,
            &options,
            &is_fixed,
            &mut cost_of,
        );
    }
    if params.coherence_weight > 0.0 && params.refine_rounds > 0 {
        let input = coherence::PassInput {
            g,
            members: &members,
            weight: params.coherence_weight,
            model: params.spread_model,
            own_phrase: params.own_phrase,
            rounds: params.refine_rounds,
            max_depth: params.max_depth,
            max_fanout: params.max_fanout,
            options: &options,
            fixed: &is_fixed,
            cancel,
        };
        let (moves, model) = coherence::coherence_pass(&mut shape, &mut cost_of, &input);
        stats.coherence_moves = moves;
        stats.spread_model = Some(model);
        if cancel.load(Ordering::Relaxed) {
            return Err(InclusionError::Cancelled);
        }
    }
    progress(InclusionProgress {
        stage: InclusionStage::Refine,
        done: 1,
        total: 1,
    });

    // output: the report's nodes while the candidate lists are at hand, then the tree file
    // from them once the lists are gone
    let depth = shape.depths().into_iter().max().unwrap_or(0);
    let mut nodes = Vec::with_capacity(m.saturating_sub(1));
    let mut total_cost = 0.0;
    for li in 0..m {
        let Some(p) = shape.parent[li] else { continue };
        let child_id = phrases.id(members[li]).to_string();
        let parent_id = phrases.id(members[p as usize]).to_string();
        total_cost += cost_of[li];
        let runner_up = options
            .get(li)
            .iter()
            .find(|x| x.1 != p)
            .map(|(w, q)| RunnerUp {
                id: phrases.id(members[q as usize]).to_string(),
                cost: w,
            });
        nodes.push(InclusionNode {
            node: child_id,
            parent: parent_id,
            cost: cost_of[li],
            runner_up,
            fallback: fallback[li] && p as usize == root_local,
            fixed: is_fixed[li],
        });
    }
    drop((options, shape, cost_of));
    let tree_parent: BTreeMap<String, String> = nodes
        .iter()
        .map(|n| (n.node.clone(), n.parent.clone()))
        .collect();
    Ok(InclusionTree {
        tree_file: TreeFile {
            root: phrases.id(root).to_string(),
            parent: tree_parent,
        },
        root,
        depth,
        total_cost,
        nodes,
        stats,
    })
}

impl InclusionTree {
    /// The tree and a `build-report.json` for it (method `inclusion`, each phrase's parent
    /// cost and runner-up recorded), in the form the divisive builder returns, so that the
    /// CLI and the workbench install either the same way.
    pub fn into_built(
        self,
        g: &Gaussians,
        phrases: &PhraseTable,
        params: &CheckedInclusionParams,
    ) -> super::builder::BuiltTree {
        use super::builder::{
            BuildMethod, BuildParams, BuildReport, BuiltTree, InclusionReport, REPORT_FORMAT,
            REPORT_VERSION,
        };
        let placed = self.nodes.len() + 1;
        BuiltTree {
            report: BuildReport {
                format: REPORT_FORMAT.to_string(),
                version: REPORT_VERSION,
                method: BuildMethod::Inclusion,
                // the divisive parameters play no part; the seed and depth limit are shared
                params: BuildParams {
                    seed: params.seed,
                    ..BuildParams::default()
                },
                phrases: placed,
                dim: g.dim(),
                root: phrases.id(self.root).to_string(),
                depth: self.depth,
                nodes: Vec::new(),
                inclusion: Some(InclusionReport {
                    params: params.params().clone(),
                    total_cost: self.total_cost,
                    stats: self.stats,
                    nodes: self.nodes,
                }),
            },
            tree_file: self.tree_file,
        }
    }
}
