//! Navigation index over the children of a *wide* node (more than [`WIDE`] children in the
//! candidate index), so the candidate search does not score every child of a flat tree.
//!
//! The index is a ball tree over the children's means, built on demand (the first search
//! that reaches the node builds it; later searches share it): a range of children whose
//! ln det Σ spreads over more than max(4, d/2) nats is cut at the middle of that range (at
//! its median when one side would be lopsided; one broad member would loosen every bound
//! of its ball, and a cut through a band of equally general members would make every
//! query search each slice), any other range into two groups of near members by a few
//! rounds of 2-means seeded with two far-apart members (a member farthest from the first,
//! then the member farthest from that one; when the groups come out lopsided, at the
//! median of the projection of the means on the line between the two), down to leaves of
//! at most [`LEAF`] children. Building costs O(m log m · d) for m children.
//!
//! Every ball keeps, over its members x: the largest variance per coordinate v̂ₖ, the range
//! of ln det Σx, the centre of the means μ̄ and the radius R = maxₓ ‖μx − μ̄‖_w in the
//! norm ‖u‖²_w = Σₖ uₖ²/v̂ₖ. For a query c with D = ‖μc − μ̄‖_w (`docs/maths.md`, section 15,
//! "Navigation index bounds"):
//!
//! - KL(c ‖ x) = ½ [Σₖ (σ²c,ₖ + (μx,ₖ − μc,ₖ)²)/σ²x,ₖ − d + ln det Σx − ln det Σc]
//!   ≥ ½ [Σₖ σ²c,ₖ/v̂ₖ + max(0, D − R)² − d + min ln det Σx − ln det Σc], since σ²x,ₖ ≤ v̂ₖ
//!   and, by the triangle inequality, ‖μx − μc‖_w ≥ D − R;
//! - D_B(c, x) ≥ ¼ Σₖ Δₖ²/(σ²c,ₖ + σ²x,ₖ) ≥ ¼ ρ max(0, D − R)² with
//!   ρ = minₖ v̂ₖ/(σ²c,ₖ + v̂ₖ) (the duplicate screen of section 15, then σ²x,ₖ ≤ v̂ₖ).
//!
//! The search visits the balls nearest first and skips a ball when no member can be a
//! near-duplicate (generality out of range or the D_B bound over −ln `duplicate_bc_min`)
//! and its KL bound is above both the `search_beam`-th lowest KL among the broader
//! children seen so far and the lowest KL of an eligible candidate so far. A skipped child
//! therefore can neither enter the beam (at least `search_beam` children of the same node
//! score strictly lower), nor be the best candidate (one scores strictly lower), nor be a
//! duplicate: the search returns exactly what scoring every child returns. Before that
//! walk, one greedy descent through the balls that can hold an eligible candidate scores
//! the eligible members of one leaf ball, so the threshold is finite from the start. When
//! no node of the search's level has grandchildren (a flat level), the beam adds nothing
//! to the search and only the best candidate and the duplicates bound the walk. The bounds are
//! compared with a relative slack of 10⁻⁴ (plus 10⁻⁶ nats) that covers the `f32` rounding
//! of the KL kernel.

use std::cmp::{Ordering, Reverse};
use std::collections::BinaryHeap;

use crate::model::gaussian::{Gaussians, PhraseId};

/// A node with more children than this gets a navigation index. Below it, scoring every
/// child is cheaper than the index: at 1 000 000 × 64 with ~100 leaves per cluster, an
/// index over every 100-child node made the audit 3× slower and 40 % larger in memory.
pub(super) const WIDE: usize = 1000;
/// Children per leaf ball.
pub(super) const LEAF: usize = 4;
/// Rounds of 2-means when a ball of near-generality members is split.
const TWO_MEANS_ROUNDS: usize = 4;
/// A 2-means split is kept when each group holds at least 1/`LOPSIDED` of the members.
const LOPSIDED: usize = 16;
/// Relative slack of the bounds.
const SLACK: f64 = 1e-4;

/// One ball: a contiguous range of the index's child order.
#[derive(Debug, Clone)]
struct Ball {
    lo: u32,
    hi: u32,
    /// Child balls (indices), none for a leaf.
    kids: Option<(u32, u32)>,
    radius: f64,
    /// Range of ln det Σ (the table's values, as `broader` and the margins use them).
    ld_lo: f64,
    ld_hi: f64,
    /// Smallest Σₖ ln σ²ₖ (the KL kernel's log determinant).
    diag_ld_lo: f64,
}

/// The ball tree over the first `covered` children of one node.
#[derive(Debug, Clone)]
pub(super) struct NavIndex {
    /// How many children of the node (a prefix of its list) the index covers.
    pub(super) covered: usize,
    order: Vec<PhraseId>,
    balls: Vec<Ball>,
    /// Per ball (in the order of `balls`), 2d values side by side: the centre μ̄, then
    /// wₖ = 1/v̂ₖ (one block per ball, so a bound reads one contiguous run of memory).
    geo: Vec<f32>,
}

/// What one query needs to know about the search it serves.
pub(super) struct Query<'q> {
    /// The node searched for.
    pub c: PhraseId,
    /// ln det Σc (table value) and Σₖ ln σ²c,ₖ.
    pub ld_c: f64,
    pub diag_ld_c: f64,
    /// `search_beam`.
    pub beam: usize,
    /// Whether the beam is followed further: false when no node of the search's current
    /// level has a child with children of its own in the candidate index; then the next
    /// level adds nothing whatever the beam holds, and a ball is looked into only for the
    /// best candidate and the duplicates.
    pub beam_matters: bool,
    /// Nats added to every ball's KL bound: 0 except in tests, where a positive value is a
    /// deliberately broken twin whose pruning is too tight.
    pub bias: f64,
    /// Lowest KL of an eligible candidate found before this node (∞ if none).
    pub best_so_far: f64,
    /// ln det Σ a candidate must exceed to be eligible.
    pub min_ld: f64,
    /// Whether a broader child is an eligible candidate (placed, not the parent, not a
    /// descendant).
    pub eligible: &'q dyn Fn(PhraseId) -> bool,
    /// −ln `duplicate_bc_min` and `duplicate_generality_margin`.
    pub dup_dmax: f64,
    pub dup_margin: f64,
    /// KL(c ‖ x) as the search scores it.
    pub kl: &'q dyn Fn(PhraseId) -> f64,
}

/// f64 that orders totally (for the heaps).
#[derive(Debug, Clone, Copy, PartialEq)]
struct Key(f64);
impl Eq for Key {}
impl PartialOrd for Key {
    fn partial_cmp(&self, o: &Self) -> Option<Ordering> {
        Some(self.cmp(o))
    }
}
impl Ord for Key {
    fn cmp(&self, o: &Self) -> Ordering {
        self.0.total_cmp(&o.0)
    }
}

/// Σₖ (aₖ − bₖ)² in f64.
fn sq_dist(a: &[f32], b: &[f32]) -> f64 {
    wdist2_any(a, b, None)
}

impl NavIndex {
    /// Build the index over `children` (all of them are covered).
    pub(super) fn build(g: &Gaussians, diag_ld: &[f64], children: &[PhraseId]) -> Self {
        let mut nav = NavIndex {
            covered: children.len(),
            order: children.to_vec(),
            balls: Vec::with_capacity(2 * children.len() / LEAF + 2),
            geo: Vec::with_capacity((2 * children.len() / LEAF + 2) * 2 * g.dim()),
        };
        nav.split(g, diag_ld, 0, children.len());
        nav
    }

    /// Make the ball of `order[lo..hi]` (and its sub-balls); returns its index.
    fn split(&mut self, g: &Gaussians, diag_ld: &[f64], lo: usize, hi: usize) -> u32 {
        let d = g.dim();
        let members = &self.order[lo..hi];
        let mut centre = vec![0.0f64; d];
        let mut vhi = vec![0.0f32; d];
        let (mut ld_lo, mut ld_hi, mut dld_lo) = (f64::INFINITY, f64::NEG_INFINITY, f64::INFINITY);
        for &x in members {
            for (k, (&m, &v)) in g
                .mean(x as usize)
                .iter()
                .zip(g.variances(x as usize))
                .enumerate()
            {
                centre[k] += m as f64;
                vhi[k] = vhi[k].max(v);
            }
            let ld = g.log_det(x as usize);
            ld_lo = ld_lo.min(ld);
            ld_hi = ld_hi.max(ld);
            dld_lo = dld_lo.min(diag_ld[x as usize]);
        }
        let centre: Vec<f32> = centre
            .iter()
            .map(|&s| (s / members.len() as f64) as f32)
            .collect();
        let w: Vec<f32> = vhi.iter().map(|&v| 1.0 / v).collect();
        let radius = members
            .iter()
            .map(|&x| wdist2(g.mean(x as usize), &centre, &w))
            .fold(0.0f64, f64::max)
            .sqrt();
        let me = self.balls.len() as u32;
        self.balls.push(Ball {
            lo: lo as u32,
            hi: hi as u32,
            kids: None,
            radius,
            ld_lo,
            ld_hi,
            diag_ld_lo: dld_lo,
        });
        self.geo.extend_from_slice(&centre);
        self.geo.extend_from_slice(&w);
        if hi - lo > LEAF && ld_hi - ld_lo > (0.5 * d as f64).max(4.0) {
            // generality spread wide (a broad member would loosen every bound of the
            // ball): cut at the middle of the range of ln det Σ, so that members of one
            // generality stay together (a cut at the median would slice a band of
            // equally general members, and every query would search each slice); at the
            // median when that leaves one side with less than 1/LOPSIDED of the members
            let cut = 0.5 * (ld_lo + ld_hi);
            let members = &self.order[lo..hi];
            let (front, back): (Vec<PhraseId>, Vec<PhraseId>) =
                members.iter().partition(|&&x| g.log_det(x as usize) < cut);
            let mid = if front.len().min(back.len()) * LOPSIDED >= members.len() {
                self.order[lo..lo + front.len()].copy_from_slice(&front);
                self.order[lo + front.len()..hi].copy_from_slice(&back);
                lo + front.len()
            } else {
                let mid = (hi - lo) / 2;
                self.order[lo..hi].select_nth_unstable_by(mid, |&x, &y| {
                    g.log_det(x as usize)
                        .total_cmp(&g.log_det(y as usize))
                        .then(x.cmp(&y))
                });
                lo + mid
            };
            let l = self.split(g, diag_ld, lo, mid);
            let r = self.split(g, diag_ld, mid, hi);
            self.balls[me as usize].kids = Some((l, r));
        } else if hi - lo > LEAF {
            // two groups of near members (a few rounds of 2-means from two far-apart
            // members); the median of the projection on the line between them when the
            // groups come out lopsided
            let mid = self
                .split_two_means(g, &w, lo, hi)
                .unwrap_or_else(|| self.split_median(g, lo, hi));
            let l = self.split(g, diag_ld, lo, mid);
            let r = self.split(g, diag_ld, mid, hi);
            self.balls[me as usize].kids = Some((l, r));
        }
        me
    }

    /// Two far-apart members of `order[lo..hi]`: a member farthest from the first, then the
    /// member farthest from that one (Euclidean distance of the means, ties by row).
    fn far_pair(&self, g: &Gaussians, lo: usize, hi: usize) -> (PhraseId, PhraseId) {
        let order = &self.order[lo..hi];
        // one distance per member; the farthest, ties by the lower row
        let far = |from: &[f32]| {
            let mut best = (f64::NEG_INFINITY, order[0]);
            for &x in order {
                let dx = sq_dist(g.mean(x as usize), from);
                if dx > best.0 || (dx == best.0 && x < best.1) {
                    best = (dx, x);
                }
            }
            best.1
        };
        let a = far(g.mean(order[0] as usize));
        (a, far(g.mean(a as usize)))
    }

    /// Cut `order[lo..hi]` at the median of the projection of the means on the line
    /// between two far-apart members; returns the cut.
    fn split_median(&mut self, g: &Gaussians, lo: usize, hi: usize) -> usize {
        let (a, b) = self.far_pair(g, lo, hi);
        let (ma, mb) = (g.mean(a as usize), g.mean(b as usize));
        let dir: Vec<f64> = mb
            .iter()
            .zip(ma)
            .map(|(&y, &x)| y as f64 - x as f64)
            .collect();
        let proj = |x: PhraseId| -> f64 {
            g.mean(x as usize)
                .iter()
                .zip(&dir)
                .map(|(&m, &u)| m as f64 * u)
                .sum()
        };
        let mid = (hi - lo) / 2;
        self.order[lo..hi]
            .select_nth_unstable_by(mid, |&x, &y| proj(x).total_cmp(&proj(y)).then(x.cmp(&y)));
        lo + mid
    }

    /// Split `order[lo..hi]` into two groups of near members: [`TWO_MEANS_ROUNDS`] rounds
    /// of 2-means in the ball's norm ‖·‖_w, seeded with two far-apart members; the members
    /// nearer the first centre move to the front (each group keeps its order). Returns the
    /// cut, or None when a group would hold less than 1/[`LOPSIDED`] of the members (which
    /// keeps the depth logarithmic).
    fn split_two_means(&mut self, g: &Gaussians, w: &[f32], lo: usize, hi: usize) -> Option<usize> {
        let d = g.dim();
        let (a, b) = self.far_pair(g, lo, hi);
        let mut ca: Vec<f32> = g.mean(a as usize).to_vec();
        let mut cb: Vec<f32> = g.mean(b as usize).to_vec();
        let members = &self.order[lo..hi];
        let mut side = vec![false; members.len()];
        for round in 0..TWO_MEANS_ROUNDS {
            for (s, &x) in side.iter_mut().zip(members) {
                let m = g.mean(x as usize);
                *s = wdist2(m, &cb, w) < wdist2(m, &ca, w);
            }
            if round + 1 == TWO_MEANS_ROUNDS {
                break;
            }
            let (mut sa, mut sb) = (vec![0.0f64; d], vec![0.0f64; d]);
            let (mut na, mut nb) = (0usize, 0usize);
            for (&s, &x) in side.iter().zip(members) {
                let (acc, cnt) = if s {
                    (&mut sb, &mut nb)
                } else {
                    (&mut sa, &mut na)
                };
                *cnt += 1;
                for (t, &m) in acc.iter_mut().zip(g.mean(x as usize)) {
                    *t += m as f64;
                }
            }
            if na == 0 || nb == 0 {
                return None;
            }
            for (c, t) in ca.iter_mut().zip(&sa) {
                *c = (t / na as f64) as f32;
            }
            for (c, t) in cb.iter_mut().zip(&sb) {
                *c = (t / nb as f64) as f32;
            }
        }
        let nb = side.iter().filter(|&&s| s).count();
        let na = members.len() - nb;
        if na.min(nb) * LOPSIDED < members.len() {
            return None;
        }
        let (front, back): (Vec<PhraseId>, Vec<PhraseId>) = {
            let mut f = Vec::with_capacity(na);
            let mut k = Vec::with_capacity(nb);
            for (&s, &x) in side.iter().zip(members) {
                if s { k.push(x) } else { f.push(x) }
            }
            (f, k)
        };
        self.order[lo..lo + na].copy_from_slice(&front);
        self.order[lo + na..hi].copy_from_slice(&back);
        Some(lo + na)
    }

    /// Lower bound of KL(c ‖ x) over the ball's broader members (`None` when no member is
    /// broader than c), and whether a member can be a near-duplicate of c.
    fn bounds(&self, bi: usize, g: &Gaussians, q: &Query) -> (Option<f64>, bool) {
        let ball = &self.balls[bi];
        let broader = ball.ld_hi > q.ld_c;
        let in_window = ball.ld_hi >= q.ld_c - q.dup_margin && ball.ld_lo <= q.ld_c + q.dup_margin;
        if !broader && !in_window {
            return (None, false);
        }
        let mc = g.mean(q.c as usize);
        let vc = g.variances(q.c as usize);
        // one pass: Σₖ wₖ (μc,ₖ − μ̄ₖ)², Σₖ σ²c,ₖ wₖ and maxₖ σ²c,ₖ wₖ
        let d = mc.len();
        let geo = &self.geo[2 * d * bi..2 * d * (bi + 1)];
        let (dd2, var_term, max_vw) = ball_terms(mc, vc, &geo[..d], &geo[d..]);
        let gap = (dd2.sqrt() - ball.radius).max(0.0);
        let gap2 = gap * gap;
        let kl = broader.then(|| {
            let s = (var_term + gap2) * (1.0 - SLACK);
            // only broader members count (ln det Σx > ln det Σc), whatever the ball's
            // lowest ln det Σ; the two log determinants agree to ~10⁻¹² relative
            let ld_gap = (ball.diag_ld_lo - q.diag_ld_c).max(0.0);
            0.5 * (s - d as f64 + ld_gap) - 1e-6 * (1.0 + q.diag_ld_c.abs()) + q.bias
        });
        // ρ = minₖ v̂ₖ/(σ²c,ₖ + v̂ₖ) = 1/(1 + maxₖ σ²c,ₖ wₖ)
        let dup = in_window && {
            let rho = 1.0 / (1.0 + max_vw);
            0.25 * rho * gap2 * (1.0 - SLACK) <= q.dup_dmax * (1.0 + SLACK) + 1e-9
        };
        (kl, dup)
    }

    /// The children the search must look at (with their KL when broader than c), in an
    /// order of its own; every other covered child can be skipped (module documentation).
    pub(super) fn query(&self, g: &Gaussians, q: &Query, out: &mut Vec<(PhraseId, Option<f64>)>) {
        out.clear();
        // the `beam` lowest KLs of broader children so far (max-heap), the best eligible
        let mut top: BinaryHeap<Key> = BinaryHeap::with_capacity(q.beam + 1);
        let mut best = q.best_so_far;
        let threshold = |top: &BinaryHeap<Key>, best: f64| {
            if !q.beam_matters {
                return best;
            }
            let beam_cut = if top.len() >= q.beam {
                top.peek().map_or(f64::INFINITY, |k| k.0)
            } else {
                f64::INFINITY
            };
            beam_cut.max(best)
        };
        // a ball is looked into when a member may be a duplicate or, having a broader
        // member, its KL bound is within the threshold
        let wanted = |kl: Option<f64>, dup: bool, top: &BinaryHeap<Key>, best: f64| {
            dup || kl.is_some_and(|lb| lb <= threshold(top, best))
        };
        // a first eligible candidate, so that the threshold is finite from the start (the
        // nearest balls by bound are mostly of narrower members, which cannot be one):
        // walk down the balls that can hold one, the lower KL bound first, and score the
        // eligible members of the leaf ball reached. `best` stays the KL of a real
        // candidate, which the search below also reaches (its bound is below its KL).
        let mut bi = 0usize;
        loop {
            let ball = &self.balls[bi];
            if ball.ld_hi <= q.min_ld {
                break;
            }
            match ball.kids {
                Some((l, r)) => {
                    let bound = |k: u32| {
                        let b = &self.balls[k as usize];
                        if b.ld_hi <= q.min_ld {
                            f64::INFINITY
                        } else {
                            self.bounds(k as usize, g, q).0.unwrap_or(f64::INFINITY)
                        }
                    };
                    let (bl, br) = (bound(l), bound(r));
                    if bl.min(br) == f64::INFINITY {
                        break;
                    }
                    bi = if bl <= br { l } else { r } as usize;
                }
                None => {
                    for &x in &self.order[ball.lo as usize..ball.hi as usize] {
                        if x != q.c && g.log_det(x as usize) > q.min_ld && (q.eligible)(x) {
                            best = best.min((q.kl)(x));
                        }
                    }
                    break;
                }
            }
        }
        // nearest first: a min-heap on the KL bound (duplicate-only balls last)
        let mut heap: BinaryHeap<(Reverse<Key>, u32, bool)> = BinaryHeap::new();
        let (kl0, dup0) = self.bounds(0, g, q);
        if wanted(kl0, dup0, &top, best) {
            heap.push((Reverse(Key(kl0.unwrap_or(f64::INFINITY))), 0, dup0));
        }
        while let Some((Reverse(Key(lb)), bi, dup)) = heap.pop() {
            let ball = &self.balls[bi as usize];
            if !wanted((lb < f64::INFINITY).then_some(lb), dup, &top, best) {
                continue;
            }
            match ball.kids {
                Some((l, r)) => {
                    for k in [l, r] {
                        let (kl, dup) = self.bounds(k as usize, g, q);
                        if wanted(kl, dup, &top, best) {
                            heap.push((Reverse(Key(kl.unwrap_or(f64::INFINITY))), k, dup));
                        }
                    }
                }
                None => {
                    for &x in &self.order[ball.lo as usize..ball.hi as usize] {
                        if x == q.c {
                            continue;
                        }
                        let k = (g.log_det(x as usize) > q.ld_c).then(|| (q.kl)(x));
                        if let Some(k) = k {
                            top.push(Key(k));
                            if top.len() > q.beam {
                                top.pop();
                            }
                            if g.log_det(x as usize) > q.min_ld && (q.eligible)(x) {
                                best = best.min(k);
                            }
                        }
                        out.push((x, k));
                    }
                }
            }
        }
    }
}

/// Σₖ wₖ (μc,ₖ − μ̄ₖ)², Σₖ σ²c,ₖ wₖ and maxₖ σ²c,ₖ wₖ, in f64 over eight interleaved
/// accumulators so that the loop vectorises (the ball bounds' only pass over the
/// dimensions).
#[inline(always)]
fn ball_terms_impl(mc: &[f32], vc: &[f32], centre: &[f32], w: &[f32]) -> (f64, f64, f64) {
    const LANES: usize = 8;
    let d = mc.len();
    let (vc, centre, w) = (&vc[..d], &centre[..d], &w[..d]);
    let (mut dd, mut vt, mut mx) = ([0.0f64; LANES], [0.0f64; LANES], [0.0f64; LANES]);
    let full = d / LANES * LANES;
    for (((a, b), c), e) in mc[..full]
        .chunks_exact(LANES)
        .zip(vc[..full].chunks_exact(LANES))
        .zip(centre[..full].chunks_exact(LANES))
        .zip(w[..full].chunks_exact(LANES))
    {
        for j in 0..LANES {
            let t = a[j] as f64 - c[j] as f64;
            let wk = e[j] as f64;
            dd[j] += t * t * wk;
            let vw = b[j] as f64 * wk;
            vt[j] += vw;
            mx[j] = if vw > mx[j] { vw } else { mx[j] };
        }
    }
    for (j, k) in (full..d).enumerate() {
        let t = mc[k] as f64 - centre[k] as f64;
        let wk = w[k] as f64;
        dd[j] += t * t * wk;
        let vw = vc[k] as f64 * wk;
        vt[j] += vw;
        mx[j] = if vw > mx[j] { vw } else { mx[j] };
    }
    (
        dd.iter().sum(),
        vt.iter().sum(),
        mx.iter().fold(0.0f64, |a, &b| a.max(b)),
    )
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn ball_terms_avx2(mc: &[f32], vc: &[f32], centre: &[f32], w: &[f32]) -> (f64, f64, f64) {
    ball_terms_impl(mc, vc, centre, w)
}

/// See [`ball_terms_impl`] (compiled with AVX2 too, chosen at run time).
fn ball_terms(mc: &[f32], vc: &[f32], centre: &[f32], w: &[f32]) -> (f64, f64, f64) {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") {
        // SAFETY: the processor supports AVX2 (checked at run time).
        return unsafe { ball_terms_avx2(mc, vc, centre, w) };
    }
    ball_terms_impl(mc, vc, centre, w)
}

/// Σₖ (aₖ − bₖ)² wₖ in f64.
fn wdist2(a: &[f32], b: &[f32], w: &[f32]) -> f64 {
    wdist2_any(a, b, Some(w))
}

/// Σₖ (aₖ − bₖ)² wₖ in f64 (wₖ = 1 without `w`), over eight interleaved accumulators so
/// that the loop vectorises (the index build's passes over the members).
#[inline(always)]
fn wdist2_impl(a: &[f32], b: &[f32], w: Option<&[f32]>) -> f64 {
    const LANES: usize = 8;
    let d = a.len();
    let b = &b[..d];
    let full = d / LANES * LANES;
    let mut acc = [0.0f64; LANES];
    match w {
        Some(w) => {
            let w = &w[..d];
            for ((x, y), z) in a[..full]
                .chunks_exact(LANES)
                .zip(b[..full].chunks_exact(LANES))
                .zip(w[..full].chunks_exact(LANES))
            {
                for j in 0..LANES {
                    let t = x[j] as f64 - y[j] as f64;
                    acc[j] += t * t * z[j] as f64;
                }
            }
            for (j, k) in (full..d).enumerate() {
                let t = a[k] as f64 - b[k] as f64;
                acc[j] += t * t * w[k] as f64;
            }
        }
        None => {
            for (x, y) in a[..full]
                .chunks_exact(LANES)
                .zip(b[..full].chunks_exact(LANES))
            {
                for j in 0..LANES {
                    let t = x[j] as f64 - y[j] as f64;
                    acc[j] += t * t;
                }
            }
            for (j, k) in (full..d).enumerate() {
                let t = a[k] as f64 - b[k] as f64;
                acc[j] += t * t;
            }
        }
    }
    acc.iter().sum()
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn wdist2_avx2(a: &[f32], b: &[f32], w: Option<&[f32]>) -> f64 {
    wdist2_impl(a, b, w)
}

/// See [`wdist2_impl`] (compiled with AVX2 too, chosen at run time).
fn wdist2_any(a: &[f32], b: &[f32], w: Option<&[f32]>) -> f64 {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") {
        // SAFETY: the processor supports AVX2 (checked at run time).
        return unsafe { wdist2_avx2(a, b, w) };
    }
    wdist2_impl(a, b, w)
}

#[cfg(test)]
mod tests {
    use rand::{Rng, SeedableRng};
    use rand_distr::{Distribution, StandardNormal};
    use rand_xoshiro::Xoshiro256PlusPlus;

    use crate::model::audit::treefit::tests::small_tree;
    use crate::model::audit::{AuditConfig, Auditor};

    /// `n` rows: row 0 the root; with `clustered`, the means come from 20 centres (spread 3,
    /// members 0.3 around them) so the index can prune, else iid N(0, 1). Variances drawn
    /// from [0.05, 2] per coordinate (so ln det Σ varies and some rows are broader). With
    /// `flat` every row hangs under the root, else rows 1..=100 under the root and every
    /// other row under one of them (wide second-level nodes).
    fn project(
        n: usize,
        d: usize,
        clustered: bool,
        flat: bool,
        seed: u64,
    ) -> (
        crate::model::gaussian::Gaussians,
        crate::model::effective::EffectiveTree,
    ) {
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
        let centres: Vec<f64> = (0..20 * d)
            .map(|_| {
                let z: f64 = StandardNormal.sample(&mut rng);
                3.0 * z
            })
            .collect();
        let mut means = Vec::with_capacity(n * d);
        let mut vars = Vec::with_capacity(n * d);
        for i in 0..n {
            let c = rng.gen_range(0..20);
            for k in 0..d {
                let z: f64 = StandardNormal.sample(&mut rng);
                means.push(if clustered && i > 0 {
                    centres[c * d + k] + 0.3 * z
                } else {
                    z
                });
                vars.push(if i == 0 {
                    30.0
                } else {
                    rng.gen_range(0.05..2.0)
                });
            }
        }
        let parent: Vec<Option<usize>> = (0..n)
            .map(|i| match i {
                0 => None,
                _ if flat || i <= 100 => Some(0),
                _ => Some(1 + i % 100),
            })
            .collect();
        small_tree(d, &means, &vars, &parent)
    }

    /// Phrases `n0`, `n1`, … and an audit configuration that uses the candidate index for
    /// every node (no exhaustive search), for comparing the audit with and without the
    /// navigation indexes.
    fn numbered_table_and_cfg(n: usize) -> (crate::model::phrase::PhraseTable, AuditConfig) {
        let t = crate::model::phrase::PhraseTable::from_records(
            &(0..n)
                .map(|i| crate::model::phrase::PhraseRecord {
                    id: Some(format!("n{i}")),
                    label: format!("node {i}"),
                })
                .collect::<Vec<_>>(),
        )
        .unwrap();
        let cfg = AuditConfig {
            exhaustive_limit: 0,
            samples: 64,
            ..AuditConfig::default()
        };
        (t, cfg)
    }

    fn same_with_and_without_index(n: usize, clustered: bool, flat: bool, seed: u64) {
        let (g, eff) = project(n, 8, clustered, flat, seed);
        let (t, cfg) = numbered_table_and_cfg(n);
        // a low threshold so the two-level projects' nodes are indexed too
        let with = Auditor::with_nav_min(&g, &t, &eff, &[], cfg.clone(), 16);
        let without = Auditor::with_nav_min(&g, &t, &eff, &[], cfg, usize::MAX);
        assert!(
            !with.index.nav.is_empty(),
            "the test must exercise the index"
        );
        assert!(without.index.nav.is_empty());
        assert_eq!(with.placement, without.placement);
        assert_eq!(with.report.findings, without.report.findings);
    }

    /// A random wide tree of `n` rows × 8 d with a fixed seed: row 0 the root (broad), rows
    /// 1..=20 broad cluster nodes around 20 centres, every other row a narrow member near
    /// one of the centres (so members have a true cluster to fit). `mixed`: a member hangs
    /// under its cluster node with probability ½, else under the root (the root's children
    /// then include nodes with children, so the search follows its beam); else every row
    /// hangs under the root (a flat tree, the beam is never followed).
    fn wide_tree(
        n: usize,
        mixed: bool,
        seed: u64,
    ) -> (
        crate::model::gaussian::Gaussians,
        crate::model::effective::EffectiveTree,
    ) {
        let d = 8;
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
        let centres: Vec<f64> = (0..20 * d)
            .map(|_| {
                let z: f64 = StandardNormal.sample(&mut rng);
                2.0 * z
            })
            .collect();
        let (mut means, mut vars) = (Vec::with_capacity(n * d), Vec::with_capacity(n * d));
        let mut parent = Vec::with_capacity(n);
        for i in 0..n {
            let c = if (1..=20).contains(&i) {
                i - 1
            } else {
                rng.gen_range(0..20)
            };
            for k in 0..d {
                let z: f64 = StandardNormal.sample(&mut rng);
                let (m, v) = match i {
                    0 => (z, 20.0),
                    1..=20 => (centres[c * d + k] + 0.2 * z, rng.gen_range(0.6..1.4)),
                    _ => (centres[c * d + k] + 0.5 * z, rng.gen_range(0.05..0.4)),
                };
                means.push(m);
                vars.push(v);
            }
            parent.push(match i {
                0 => None,
                _ if i > 20 && mixed && rng.gen_range(0..2) == 0 => Some(1 + c),
                _ => Some(0),
            });
        }
        small_tree(d, &means, &vars, &parent)
    }

    /// Whether the audit with navigation indexes over every node of more than 16 children,
    /// their KL bounds raised by `bias` nats, finds what scoring every child finds
    /// (placements and findings).
    fn index_agrees(n: usize, mixed: bool, seed: u64, bias: f64) -> bool {
        index_agrees_with(n, mixed, seed, bias, false)
    }

    /// [`index_agrees`], with the broken twin of the first pass's memo when `memo_broken`
    /// (`search.rs`, `NavMemo`).
    fn index_agrees_with(n: usize, mixed: bool, seed: u64, bias: f64, memo_broken: bool) -> bool {
        let (g, eff) = wide_tree(n, mixed, seed);
        let (t, cfg) = numbered_table_and_cfg(n);
        let with = Auditor::with_nav_opts(&g, &t, &eff, &[], cfg.clone(), 16, bias, memo_broken);
        let without = Auditor::with_nav_min(&g, &t, &eff, &[], cfg, usize::MAX);
        assert!(
            !with.index.nav.is_empty(),
            "the test must exercise the index"
        );
        with.placement == without.placement && with.report.findings == without.report.findings
    }

    #[test]
    fn the_index_agrees_with_scoring_every_child_on_random_wide_trees() {
        // fixed seeds, random data (common practice, no source: the index, its 2-means
        // balls and the search that stops following the beam of a flat level must change
        // nothing)
        for seed in 0..3 {
            for mixed in [false, true] {
                assert!(
                    index_agrees(2000, mixed, 100 + seed, 0.0),
                    "seed {seed}, mixed {mixed}"
                );
            }
        }
    }

    #[test]
    fn a_too_tight_bound_is_caught() {
        // The broken twin: every ball's KL bound raised by 2 nats, so the search skips balls
        // that hold the best candidate or a member of the beam. The comparison of the test
        // above must see it on the same trees (else it could not catch a wrong bound).
        let caught = (0..3).any(|seed| {
            [false, true]
                .into_iter()
                .any(|mixed| !index_agrees(2000, mixed, 100 + seed, 2.0))
        });
        assert!(caught, "a 2-nat too tight bound went unnoticed");
    }

    #[test]
    fn a_memo_that_keeps_too_little_is_caught() {
        // The broken twin of the first pass's memo (search.rs, `NavMemo`): it keeps only the
        // `search_beam` lowest broader children of each answer, so the searches after the
        // index repair miss the wider beam, the best candidate and the duplicates. The
        // comparison of the tests above (which run the real memo: every audit there repairs
        // its index) must see it on the same trees.
        let caught = (0..3).any(|seed| {
            [false, true]
                .into_iter()
                .any(|mixed| !index_agrees_with(2000, mixed, 100 + seed, 0.0, true))
        });
        assert!(caught, "a memo keeping too little went unnoticed");
    }

    #[test]
    fn the_index_finds_what_scoring_every_child_finds() {
        // random data (common practice, no source: the index must change nothing)
        same_with_and_without_index(3000, false, true, 1);
        same_with_and_without_index(3000, true, true, 2);
        same_with_and_without_index(3000, true, false, 3);
        same_with_and_without_index(1500, false, false, 4);
    }

    #[test]
    fn the_index_skips_most_children_of_clustered_data() {
        let (g, eff) = project(4000, 8, true, true, 7);
        let kids = eff.tree.children(0).to_vec();
        let engine = crate::model::stats::StatsEngine::new(&g, &AuditConfig::default().stats());
        let nav = super::NavIndex::build(&g, &engine.diag_log_det, &kids);
        let c = kids[10];
        let never = |_| true;
        let kl = |x| crate::model::gaussian::kl(&g.get(c as usize), &g.get(x as usize));
        let q = super::Query {
            c,
            ld_c: g.log_det(c as usize),
            diag_ld_c: engine.diag_log_det[c as usize],
            beam: 3,
            beam_matters: true,
            bias: 0.0,
            best_so_far: f64::INFINITY,
            min_ld: g.log_det(c as usize) + 1.5,
            eligible: &never,
            dup_dmax: -(0.9f64.ln()),
            dup_margin: 2.0,
            kl: &kl,
        };
        let mut out = Vec::new();
        nav.query(&g, &q, &mut out);
        assert!(
            out.len() < kids.len() / 4,
            "{} of {}",
            out.len(),
            kids.len()
        );
        // every child's order position is covered exactly once
        let mut all = nav.order.clone();
        all.sort_unstable();
        let mut want = kids.clone();
        want.sort_unstable();
        assert_eq!(all, want);
    }
}
