//! The coherence pass of the inclusion builder (step 6 of the parent module's
//! documentation): a parent must contain the union of its children.
//!
//! By the law of total variance, the spread of a parent p about its mean is the
//! size-weighted mixture of its parts' spreads about that mean. Each node's parts are its
//! own phrase (a point: variance v₀, the set's smallest variance per dimension) and the
//! subtree of every child c (nₖ phrases, spread σ²_c + (μ_c − μ_p)² per dimension):
//!
//! `σ̂²_p = (v₀ + Σ_c n_c (σ²_c + (μ_c − μ_p)²)) / (1 + Σ_c n_c)`   (per dimension)
//!
//! A tree that puts phrases under the wrong parent makes σ̂²_p disagree with the given
//! σ²_p: a phrase hung under a sibling inflates the sibling's σ̂², a phrase hung one level
//! too high leaves its true parent's σ̂² short. The disagreement of a node is the KL
//! divergence between the zero-mean Gaussians of the two diagonal spreads,
//! `½ Σ_j (r_j − 1 − ln r_j)`, r = σ²_p / σ̂²_p. The pass moves one phrase (with its
//! subtree) at a time to the candidate that lowers
//! `Σ_children KL(c ‖ parent) + Σ_nodes disagreement` the most, keeping the tree acyclic,
//! fixed parents and the limits, in row order, for a few rounds. Both terms are KL
//! divergences in nats and are added with weight 1 ([`super::InclusionParams::coherence_weight`]
//! scales the second; 1 is the default and was not tuned). Only the diagonal of Σ is used
//! (with full covariances this is an approximation).

use super::repair::Shape;
use crate::model::gaussian::Gaussians;

/// How a node's spread is implied by its descendants (see the module documentation).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum SpreadModel {
    /// Whichever of the two disagrees less on the tree before the pass (chosen once).
    Auto,
    /// A mixture of the children's Gaussians (exact for Gaussians fitted to each subtree).
    Children,
    /// A mixture of the descendants' means as points (exact for Gaussians centred on the
    /// phrase's own vector with the spread of its descendants about it).
    Points,
}

/// One node's change under a move: (node, Δcount, Δfirst sums, Δsecond sums).
type Change = (usize, f64, Vec<f64>, Vec<f64>);

/// Sums per node. Children model: s0 = Σ_c n_c, s1 = Σ_c n_c (σ²_c + (μ_c − μ_p)²).
/// Points model: s0 = strict descendants, s1 = Σ μ_x, s2 = Σ μ_x² over them.
pub(super) struct Coherence<'a> {
    g: &'a Gaussians,
    members: &'a [u32],
    d: usize,
    v0: Vec<f64>,
    points: bool,
    /// Subtree sizes.
    size: Vec<f64>,
    s0: Vec<f64>,
    s1: Vec<f64>,
    s2: Vec<f64>,
    /// Current weighted disagreement of every node.
    dis: Vec<f64>,
    weight: f64,
}

impl<'a> Coherence<'a> {
    pub(super) fn with_model(
        g: &'a Gaussians,
        members: &'a [u32],
        shape: &Shape,
        weight: f64,
        points: bool,
    ) -> Self {
        let d = g.dim();
        let m = members.len();
        let v0 = point_variance(g, members);
        let mut size = vec![1.0f64; m];
        // children after parents in bfs order: sizes bottom-up
        let order = shape.bfs();
        for &v in order.iter().rev() {
            if let Some(p) = shape.parent[v] {
                size[p as usize] += size[v];
            }
        }
        let mut c = Coherence {
            g,
            members,
            d,
            v0,
            points,
            size,
            s0: vec![0.0; m],
            s1: vec![0.0; m * d],
            s2: if points { vec![0.0; m * d] } else { Vec::new() },
            dis: Vec::new(),
            weight,
        };
        if points {
            // bottom-up: a node's sums are its children's sums plus the children's means
            for &v in order.iter().rev() {
                if let Some(p) = shape.parent[v] {
                    let (p, mv) = (p as usize, g.mean(members[v] as usize));
                    c.s0[p] += c.s0[v] + 1.0;
                    for (j, &x) in mv.iter().enumerate() {
                        let x = x as f64;
                        c.s1[p * d + j] += c.s1[v * d + j] + x;
                        c.s2[p * d + j] += c.s2[v * d + j] + x * x;
                    }
                }
            }
        } else {
            let mut t = vec![0.0; d];
            for v in 0..m {
                if let Some(p) = shape.parent[v] {
                    let p = p as usize;
                    let w = c.size[v];
                    c.s0[p] += w;
                    c.term(v, p, &mut t);
                    for (s, x) in c.s1[p * d..(p + 1) * d].iter_mut().zip(&t) {
                        *s += w * x;
                    }
                }
            }
        }
        c.dis = c.all_disagreements();
        c
    }

    pub(super) fn total(&self) -> f64 {
        self.dis.iter().sum()
    }

    fn all_disagreements(&self) -> Vec<f64> {
        let d = self.d;
        (0..self.members.len())
            .map(|x| {
                let s2 = if self.points {
                    &self.s2[x * d..(x + 1) * d]
                } else {
                    &[][..]
                };
                self.disagreement(x, self.s0[x], &self.s1[x * d..(x + 1) * d], s2)
            })
            .collect()
    }

    /// σ²_x + (μ_x − μ_y)² per dimension, into `out`.
    fn term(&self, x: usize, y: usize, out: &mut [f64]) {
        let (gx, gy) = (self.members[x] as usize, self.members[y] as usize);
        let (mx, my, vx) = (self.g.mean(gx), self.g.mean(gy), self.g.variances(gx));
        for j in 0..self.d {
            let dm = (mx[j] - my[j]) as f64;
            out[j] = vx[j] as f64 + dm * dm;
        }
    }

    /// Weighted disagreement of node x given its sums: a disagreement per phrase of its
    /// subtree (1 + s0 phrases).
    fn disagreement(&self, x: usize, s0: f64, s1: &[f64], s2: &[f64]) -> f64 {
        let gx = self.members[x] as usize;
        let var = self.g.variances(gx);
        let mu = self.g.mean(gx);
        let mut sum = 0.0;
        for j in 0..self.d {
            let vh = if !self.points {
                (self.v0[j] + s1[j]) / (1.0 + s0)
            } else if s0 > 0.5 {
                let m = mu[j] as f64;
                self.v0[j] + ((s2[j] - 2.0 * m * s1[j] + s0 * m * m) / s0).max(0.0)
            } else {
                self.v0[j]
            };
            let r = var[j] as f64 / vh;
            sum += r - 1.0 - r.ln();
        }
        0.5 * self.weight * sum * (1.0 + s0)
    }

    /// The (node, child on the path) pairs from `from` up to the root, `first` being the
    /// child at `from`.
    fn path(shape: &Shape, from: usize, first: usize) -> Vec<(usize, usize)> {
        let mut out = vec![(from, first)];
        let mut y = from;
        while let Some(p) = shape.parent[y] {
            out.push((p as usize, y));
            y = p as usize;
        }
        out
    }

    /// The change of the summed disagreement if `v` moved from its parent to `q`, and the
    /// per-node changes that the move would apply; None when the move cannot pay for an
    /// edge-cost rise of `rise` (the disagreement of the nodes it touches, its largest
    /// possible fall, is not above `rise`).
    fn delta(&self, shape: &Shape, v: usize, q: usize, rise: f64) -> Option<(f64, Vec<Change>)> {
        let a = shape.parent[v].expect("not the root") as usize;
        let mut pa = Self::path(shape, a, v);
        let mut pb = Self::path(shape, q, v);
        // common tail (same node, same child on the path) cancels
        while let (Some(x), Some(y)) = (pa.last(), pb.last()) {
            if x == y {
                pa.pop();
                pb.pop();
            } else {
                break;
            }
        }
        let s = self.size[v];
        let d = self.d;
        if rise > 0.0 {
            let mut room: f64 = pa.iter().map(|x| self.dis[x.0]).sum();
            room += pb.iter().map(|x| self.dis[x.0]).sum::<f64>();
            if room <= rise {
                return None;
            }
        }
        let mut changes: Vec<Change> = Vec::with_capacity(pa.len() + pb.len());
        if self.points {
            // the common ancestor keeps v's subtree: only the nodes below it change
            if let (Some(x), Some(y)) = (pa.last(), pb.last())
                && x.0 == y.0
            {
                pa.pop();
                pb.pop();
            }
            let gv = self.members[v] as usize;
            let mv = self.g.mean(gv);
            let mut m1 = self.s1[v * d..(v + 1) * d].to_vec();
            let mut m2 = self.s2[v * d..(v + 1) * d].to_vec();
            for j in 0..d {
                let x = mv[j] as f64;
                m1[j] += x;
                m2[j] += x * x;
            }
            for (sign, path) in [(-1.0, &pa), (1.0, &pb)] {
                for &(x, _) in path.iter() {
                    changes.push((
                        x,
                        sign * s,
                        m1.iter().map(|a| sign * a).collect(),
                        m2.iter().map(|a| sign * a).collect(),
                    ));
                }
            }
        } else {
            let mut t = vec![0.0; d];
            for (sign, path) in [(-1.0, &pa), (1.0, &pb)] {
                for &(x, y) in path.iter() {
                    self.term(y, x, &mut t);
                    let pos = changes.iter().position(|c| c.0 == x);
                    let entry = match pos {
                        Some(i) => &mut changes[i],
                        None => {
                            changes.push((x, 0.0, vec![0.0; d], Vec::new()));
                            changes.last_mut().expect("just pushed")
                        }
                    };
                    entry.1 += sign * s;
                    for (e, &tv) in entry.2.iter_mut().zip(&t) {
                        *e += sign * s * tv;
                    }
                }
            }
        }
        let mut total = 0.0;
        let (mut b1, mut b2) = (vec![0.0; d], vec![0.0; d]);
        for (x, ds0, ds1, ds2) in &changes {
            let o1 = &self.s1[x * d..(x + 1) * d];
            let o2 = if self.points {
                &self.s2[x * d..(x + 1) * d]
            } else {
                &[][..]
            };
            for j in 0..d {
                b1[j] = o1[j] + ds1[j];
                if self.points {
                    b2[j] = o2[j] + ds2[j];
                }
            }
            total += self.disagreement(*x, self.s0[*x] + ds0, &b1, &b2) - self.dis[*x];
        }
        Some((total, changes))
    }

    fn apply(&mut self, v: usize, changes: Vec<Change>) {
        let d = self.d;
        let s = self.size[v];
        for (x, ds0, ds1, ds2) in changes {
            self.s0[x] += ds0;
            // subtree sizes move with the counts: ± s on either side of the common
            // ancestor, 0 at it
            if ds0 != 0.0 {
                self.size[x] += ds0.signum() * s;
            }
            for (a, b) in self.s1[x * d..(x + 1) * d].iter_mut().zip(&ds1) {
                *a += b;
            }
            if self.points {
                for (a, b) in self.s2[x * d..(x + 1) * d].iter_mut().zip(&ds2) {
                    *a += b;
                }
            }
            let s2 = if self.points {
                &self.s2[x * d..(x + 1) * d]
            } else {
                &[][..]
            };
            self.dis[x] = self.disagreement(x, self.s0[x], &self.s1[x * d..(x + 1) * d], s2);
        }
    }
}

impl Shape {
    /// The coherence pass (see the module documentation); returns the moves made.
    #[allow(clippy::too_many_arguments)]
    pub(super) fn cohere(
        &mut self,
        coh: &mut Coherence,
        rounds: usize,
        max_depth: Option<usize>,
        max_fanout: Option<usize>,
        options: &[Vec<(f64, u32)>],
        fixed: &[bool],
        cost_of: &mut [f64],
        cancel: &std::sync::atomic::AtomicBool,
    ) -> usize {
        let mut moves = 0;
        for _ in 0..rounds {
            let mut moved = 0;
            for v in 0..self.parent.len() {
                if v == self.root || fixed[v] {
                    continue;
                }
                if v % 4096 == 0 && cancel.load(std::sync::atomic::Ordering::Relaxed) {
                    return moves + moved;
                }
                let cur = cost_of[v];
                let mut best: Option<(f64, f64, usize, Vec<Change>)> = None;
                let h = if max_depth.is_some() {
                    self.height(v)
                } else {
                    0
                };
                for &(w, q) in &options[v] {
                    let q = q as usize;
                    if Some(q as u32) == self.parent[v] || self.in_subtree(q, v) {
                        continue;
                    }
                    if max_fanout.is_some_and(|f| self.children[q].len() >= f) {
                        continue;
                    }
                    if max_depth.is_some_and(|dm| self.depth_of(q) + 1 + h > dm) {
                        continue;
                    }
                    let Some((dc, ch)) = coh.delta(self, v, q, w - cur) else {
                        continue;
                    };
                    let gain = (w - cur) + dc;
                    // strictly better by more than rounding; ties keep the earlier option
                    if gain < -1e-9 * cur.abs().max(1.0) && best.as_ref().is_none_or(|b| gain < b.0)
                    {
                        best = Some((gain, w, q, ch));
                    }
                }
                if let Some((_, w, q, ch)) = best {
                    coh.apply(v, ch);
                    self.move_to(v, q);
                    cost_of[v] = w;
                    moved += 1;
                }
            }
            moves += moved;
            if moved == 0 {
                break;
            }
        }
        moves
    }
}

/// The smallest variance of each dimension over `members`.
fn point_variance(g: &Gaussians, members: &[u32]) -> Vec<f64> {
    let mut v0 = vec![f64::INFINITY; g.dim()];
    for &r in members {
        for (a, &x) in v0.iter_mut().zip(g.variances(r as usize)) {
            *a = a.min(x as f64);
        }
    }
    v0
}

/// For every local index r in `pool`: the disagreement between r's spread and the spread
/// of all members (points of variance v₀) about r's mean,
/// `σ̂²_r = v₀ + Σ_x (μ_x − μ_r)² / n` (the root rule [`super::InclusionRoot::Coherent`]).
pub(super) fn root_disagreement(g: &Gaussians, members: &[u32], pool: &[usize]) -> Vec<f64> {
    let d = g.dim();
    let n = members.len() as f64;
    let v0 = point_variance(g, members);
    // first and second moments of the means, in row order (deterministic)
    let (mut m1, mut m2) = (vec![0.0f64; d], vec![0.0f64; d]);
    for &r in members {
        for (j, &x) in g.mean(r as usize).iter().enumerate() {
            m1[j] += x as f64;
            m2[j] += x as f64 * x as f64;
        }
    }
    pool.iter()
        .map(|&li| {
            let r = members[li] as usize;
            let (mr, vr) = (g.mean(r), g.variances(r));
            let mut sum = 0.0;
            for j in 0..d {
                let m = mr[j] as f64;
                let spread = ((m2[j] - 2.0 * m * m1[j] + n * m * m) / n).max(0.0);
                let q = vr[j] as f64 / (v0[j] + spread);
                sum += q - 1.0 - q.ln();
            }
            0.5 * sum
        })
        .collect()
}

/// Everything the coherence pass needs besides the tree.
pub(super) struct PassInput<'a> {
    pub(super) g: &'a Gaussians,
    pub(super) members: &'a [u32],
    pub(super) weight: f64,
    pub(super) model: SpreadModel,
    pub(super) rounds: usize,
    pub(super) max_depth: Option<usize>,
    pub(super) max_fanout: Option<usize>,
    pub(super) options: &'a [Vec<(f64, u32)>],
    pub(super) fixed: &'a [bool],
    pub(super) cancel: &'a std::sync::atomic::AtomicBool,
}

/// Run the coherence pass on `shape`. [`SpreadModel::Auto`] reads the Gaussians as fitted
/// to subtrees (children model) unless the parents of `shape` sit away from the centroids of
/// their children ([`centroid_offset`] > 0: Gaussians centred on the phrase's own vector,
/// points model). Returns the moves and the model used.
pub(super) fn coherence_pass(
    shape: &mut Shape,
    cost_of: &mut [f64],
    input: &PassInput,
) -> (usize, SpreadModel) {
    let models: &[bool] = match input.model {
        SpreadModel::Children => &[false],
        SpreadModel::Points => &[true],
        SpreadModel::Auto => {
            if centroid_offset(input.g, input.members, shape) <= 0.0 {
                &[false]
            } else {
                &[true]
            }
        }
    };
    let mut best: Option<(f64, Shape, Vec<f64>, usize, bool)> = None;
    for &points in models {
        let mut sh = shape.clone();
        let mut co = cost_of.to_vec();
        let mut coh = Coherence::with_model(input.g, input.members, &sh, input.weight, points);
        let moves = sh.cohere(
            &mut coh,
            input.rounds,
            input.max_depth,
            input.max_fanout,
            input.options,
            input.fixed,
            &mut co,
            input.cancel,
        );
        let total = co.iter().sum::<f64>() + coh.total();
        drop(coh);
        if best.as_ref().is_none_or(|b| total < b.0) {
            best = Some((total, sh, co, moves, points));
        }
    }
    let (_, sh, co, moves, points) = best.expect("at least one model");
    *shape = sh;
    cost_of.copy_from_slice(&co);
    let model = if points {
        SpreadModel::Points
    } else {
        SpreadModel::Children
    };
    (moves, model)
}

/// Evidence that parents sit away from the centroid of their children (> 0) rather than at
/// it (< 0). For an internal node p with n descendants let r_p = mean_j (c̄_pj − μ_pj)² /
/// σ²_pj, c̄_p being the children's means weighted by their subtree sizes. Gaussians fitted
/// to subtrees put p at the centroid of its own vector and its descendants, so the offset is
/// that vector's deviation shrunk by n + 1: r ≈ 1 / (n (n + 1)). Gaussians centred on the
/// phrase's own vector (a typical member) give r ≈ 1/2 (σ² is then the spread about the
/// centroid plus the offset²). Each node adds ln r_p minus the log of the geometric midpoint
/// of the two predictions, weighted by how far apart they are, ln (n (n + 1) / 2) (zero for
/// n = 1, where they agree). No constant is fitted.
pub(super) fn centroid_offset(g: &Gaussians, members: &[u32], shape: &Shape) -> f64 {
    let d = g.dim();
    let m = members.len();
    let mut size = vec![1.0f64; m];
    for &v in shape.bfs().iter().rev() {
        if let Some(p) = shape.parent[v] {
            size[p as usize] += size[v];
        }
    }
    let mut evidence = 0.0;
    let mut cen = vec![0.0f64; d];
    for p in 0..m {
        let ch = &shape.children[p];
        let n = size[p] - 1.0;
        if ch.is_empty() || n < 2.0 {
            continue;
        }
        cen.iter_mut().for_each(|x| *x = 0.0);
        let mut w = 0.0;
        for &c in ch {
            let c = c as usize;
            w += size[c];
            for (a, &x) in cen.iter_mut().zip(g.mean(members[c] as usize)) {
                *a += size[c] * x as f64;
            }
        }
        let gp = members[p] as usize;
        let (mp, vp) = (g.mean(gp), g.variances(gp));
        let r = (0..d)
            .map(|j| {
                let o = cen[j] / w - mp[j] as f64;
                o * o / vp[j] as f64
            })
            .sum::<f64>()
            / d as f64;
        let (pred_children, pred_points) = (1.0 / (n * (n + 1.0)), 0.5f64);
        let mid = 0.5 * (pred_children.ln() + pred_points.ln());
        let weight = (pred_points / pred_children).ln();
        evidence += weight * (r.max(1e-300).ln() - mid);
    }
    evidence
}
