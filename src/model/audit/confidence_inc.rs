//! The confidences of [`confidence`](super::confidence), kept up to date across edits and
//! computed only for the nodes that have placement findings.
//!
//! [`Confidences::of`] ranks and tests every node of the tree: medians and MADs by full
//! sorts, Spearman ranks by sorts, p-values of every node and a sort of them for
//! Benjamini–Hochberg. After one edit only a handful of scores change, so the
//! [`Auditor`](super::Auditor) keeps an [`IncConfidence`] instead:
//!
//! - every node's three scores s₁, s₂, s₃ and four arrays sorted by (score, node): s₁ of the
//!   tested nodes, s₁ of the nodes that also have s₂, s₂, s₃. An edit removes the old score
//!   of each changed node and inserts the new one (binary search and one memmove each);
//! - the median is read off the sorted array; the MAD is the median of |x − median|, and
//!   those distances, walked outwards from the median, come out of the sorted array already
//!   in order (two merged runs), so half a walk finds it;
//! - a robust z-score is an increasing function of its score, so the sorted arrays give the
//!   order of the z-scores, and Spearman's mean ranks are assigned in one pass (ties are
//!   found on the z-scores themselves, exactly as `confidence::ranks` does);
//! - p-values and Benjamini–Hochberg q-values are needed only for the nodes with a
//!   placement finding. q₍ᵢ₎ = min(1, minⱼ≥ᵢ p₍ⱼ₎ m / j) reads only the p-values at and above
//!   the node's own; and every term with p₍ⱼ₎ ≥ P is ≥ P (m / j ≥ 1). So the p-values are
//!   computed for the tests with the largest z-scores only (the smallest p-values), down to
//!   a cut below which every p-value is at least the largest q needed; the cut is lowered
//!   until that holds (at worst to every test, which is the full computation). The check
//!   relies on the normal tail being decreasing in z to within a relative 10⁻⁹ (the
//!   computed `erfc` is accurate to a few units in the last place).
//!
//! Every figure is computed by the same floating-point operations in the same order as in
//! [`Confidences::of`], so the values are identical to the bit; scores that are not
//! finite (never seen in practice) fall back to the full computation. Ties of p-values
//! get the same q-value whatever their order, so the order of the partial sort does not
//! matter. The test `tests_conf::incremental_confidence_equals_a_full_audit` checks
//! equality after random edits.

use std::cmp::Ordering;

use super::confidence::{Confidences, MIN_NODES, level, pearson, upper_tail};
use super::search::Placement;
use super::{AuditConfig, BETTER_PARENT, Finding, INVERTED_GENERALITY, WEAK_INCLUSION};
use crate::model::effective::EffectiveTree;
use crate::model::gaussian::PhraseId;
use crate::model::stats::Stats;

/// More changed nodes than 1 / this of the table: the sorted arrays are rebuilt by sorting.
const REBUILD_SHARE: usize = 16;

/// Order of (score, node) pairs: by score (total order), then node.
fn key_cmp(a: &(f64, PhraseId), b: &(f64, PhraseId)) -> Ordering {
    a.0.total_cmp(&b.0).then(a.1.cmp(&b.1))
}

/// Scores sorted by (score, node).
#[derive(Debug, Clone, Default)]
struct Sorted {
    v: Vec<(f64, PhraseId)>,
}

impl Sorted {
    fn remove(&mut self, x: f64, node: PhraseId) {
        if let Ok(i) = self.v.binary_search_by(|e| key_cmp(e, &(x, node))) {
            self.v.remove(i);
        } else {
            debug_assert!(false, "score of node {node} not found");
        }
    }

    fn insert(&mut self, x: f64, node: PhraseId) {
        let (Ok(i) | Err(i)) = self.v.binary_search_by(|e| key_cmp(e, &(x, node)));
        self.v.insert(i, (x, node));
    }

    fn sort(&mut self) {
        self.v.sort_unstable_by(key_cmp);
    }

    /// All scores finite (the smallest and largest in the total order are).
    fn finite(&self) -> bool {
        self.v.first().is_none_or(|e| e.0.is_finite())
            && self.v.last().is_none_or(|e| e.0.is_finite())
    }

    /// The median, as `confidence::median` computes it (the mean of the middle two for
    /// an even count). Non-empty.
    fn median(&self) -> f64 {
        let n = self.v.len();
        if n % 2 == 1 {
            self.v[n / 2].0
        } else {
            0.5 * (self.v[n / 2 - 1].0 + self.v[n / 2].0)
        }
    }

    /// 1.4826 · the median of |x − `med`|: the distances left of `med` grow to the left,
    /// those right of it to the right, so merging the two runs outwards lists them in
    /// order; the walk stops at the middle.
    fn scale(&self, med: f64) -> f64 {
        let v = &self.v;
        let n = v.len();
        let (mut l, mut r) = {
            let s = v.partition_point(|e| e.0 < med);
            (s, s)
        };
        let (mut prev, mut cur) = (0.0, 0.0);
        for _ in 0..=n / 2 {
            let dl = (l > 0).then(|| (v[l - 1].0 - med).abs());
            let dr = (r < n).then(|| (v[r].0 - med).abs());
            let d = match (dl, dr) {
                (Some(a), Some(b)) if a <= b => {
                    l -= 1;
                    a
                }
                (_, Some(b)) => {
                    r += 1;
                    b
                }
                (Some(a), None) => {
                    l -= 1;
                    a
                }
                (None, None) => unreachable!("the walk stops at the middle"),
            };
            prev = cur;
            cur = d;
        }
        let mad = if n % 2 == 1 { cur } else { 0.5 * (prev + cur) };
        1.4826 * mad
    }

    /// Median and scale, as `confidence::robust_z` accepts them (None: too few scores or no
    /// spread).
    fn location_scale(&self) -> Option<(f64, f64)> {
        if self.v.len() < MIN_NODES {
            return None;
        }
        let m = self.median();
        let sc = self.scale(m);
        (sc > 0.0 && sc.is_finite()).then_some((m, sc))
    }

    /// Spearman mean ranks (1-based, ties share their mean) of the z-scores
    /// (x − `c`) / `sc`, written to `rank[node]`.
    fn ranks_into(&self, c: f64, sc: f64, z: &mut Vec<f64>, rank: &mut [f64]) {
        z.clear();
        z.extend(self.v.iter().map(|e| (e.0 - c) / sc));
        let mut i = 0;
        while i < z.len() {
            let mut j = i;
            while j + 1 < z.len() && z[j + 1] == z[i] {
                j += 1;
            }
            let mean = (i + j) as f64 / 2.0 + 1.0;
            for e in &self.v[i..=j] {
                rank[e.1 as usize] = mean;
            }
            i = j + 1;
        }
    }
}

/// The scores of one node: (s₁, s₂, s₃) of a tested node, as [`Confidences::of`] computes
/// them.
type Scores = Option<(f64, Option<f64>, f64)>;

fn scores_of(eff: &EffectiveTree, stats: &Stats, placement: &[Placement], p: PhraseId) -> Scores {
    let tiny = 1e-12f64;
    let par = eff.tree.parent(p).filter(|_| eff.tree.is_placed(p))?;
    let s = &stats.nodes[p as usize];
    let kp = s.kl_to_parent?;
    let lkp = kp.max(tiny).ln();
    let s2 = placement[p as usize]
        .best
        .map(|(_, kb)| lkp - kb.max(tiny).ln());
    Some((lkp, s2, s.log_det - stats.nodes[par as usize].log_det))
}

/// Bit-level equality of two score tuples.
fn same(a: Scores, b: Scores) -> bool {
    let bits = |s: Scores| s.map(|(x, y, z)| (x.to_bits(), y.map(f64::to_bits), z.to_bits()));
    bits(a) == bits(b)
}

/// Work buffers (not copied with the auditor).
#[derive(Debug, Default)]
struct Scratch {
    rank_a: Vec<f64>,
    rank_b: Vec<f64>,
    ra: Vec<f64>,
    rb: Vec<f64>,
    z: Vec<f64>,
    list: Vec<PhraseId>,
    prefix: Vec<(f64, usize)>,
    q: Vec<f64>,
    need: Vec<bool>,
    need_pos: Vec<bool>,
}

impl Clone for Scratch {
    fn clone(&self) -> Self {
        Scratch::default()
    }
}

/// A value that a copy of its owner does not take along (it starts from the default).
#[derive(Debug, Default)]
struct NotCopied<T: Default>(T);

impl<T: Default> Clone for NotCopied<T> {
    fn clone(&self) -> Self {
        NotCopied(T::default())
    }
}

/// The incremental state (see the module documentation).
#[derive(Debug, Clone, Default)]
pub(super) struct IncConfidence {
    scores: Vec<Scores>,
    by1: Sorted,
    by12: Sorted,
    by2: Sorted,
    by3: Sorted,
    /// The confidences of the nodes listed in `filled` (the others untested: None, p 1);
    /// rebuilt by the next fill, so a copy of the auditor does not copy them.
    out: NotCopied<Confidences>,
    filled: NotCopied<Vec<PhraseId>>,
    /// `out` was filled by the full computation (every entry may be set).
    out_full: bool,
    scratch: Scratch,
    /// A deliberately broken twin for the tests: edits insert the new scores but leave
    /// the old ones in the sorted arrays.
    #[cfg(test)]
    pub broken_keeps_old_scores: bool,
}

impl IncConfidence {
    /// The scores of every node of `eff`.
    pub fn new(eff: &EffectiveTree, stats: &Stats, placement: &[Placement]) -> Self {
        let n = eff.tree.table_len();
        let mut s = IncConfidence {
            scores: (0..n as PhraseId)
                .map(|p| scores_of(eff, stats, placement, p))
                .collect(),
            ..IncConfidence::default()
        };
        s.rebuild();
        s
    }

    /// Rebuild the sorted arrays from `scores`.
    fn rebuild(&mut self) {
        for a in [&mut self.by1, &mut self.by12, &mut self.by2, &mut self.by3] {
            a.v.clear();
        }
        for (p, sc) in self.scores.iter().enumerate() {
            let Some((s1, s2, s3)) = *sc else { continue };
            let p = p as PhraseId;
            self.by1.v.push((s1, p));
            self.by3.v.push((s3, p));
            if let Some(s2) = s2 {
                self.by12.v.push((s1, p));
                self.by2.v.push((s2, p));
            }
        }
        for a in [&mut self.by1, &mut self.by12, &mut self.by2, &mut self.by3] {
            a.sort();
        }
    }

    /// Take in the new figures of the nodes `changed(p)` says may have changed (their
    /// statistics, search, parent or membership); the others must be as last seen.
    pub fn refresh(
        &mut self,
        eff: &EffectiveTree,
        stats: &Stats,
        placement: &[Placement],
        changed: impl Fn(usize) -> bool,
    ) {
        let n = eff.tree.table_len();
        if n != self.scores.len() {
            *self = IncConfidence::new(eff, stats, placement);
            return;
        }
        let mut diffs: Vec<(PhraseId, Scores)> = Vec::new();
        for p in (0..n).filter(|&p| changed(p)) {
            let new = scores_of(eff, stats, placement, p as PhraseId);
            if !same(new, self.scores[p]) {
                diffs.push((p as PhraseId, new));
            }
        }
        if diffs.len() * REBUILD_SHARE > n && !self.broken() {
            for (p, new) in diffs {
                self.scores[p as usize] = new;
            }
            self.rebuild();
            return;
        }
        for (p, new) in diffs {
            #[cfg(test)]
            let old = self.scores[p as usize].filter(|_| !self.broken_keeps_old_scores);
            #[cfg(not(test))]
            let old = self.scores[p as usize];
            if let Some((s1, s2, s3)) = old {
                self.by1.remove(s1, p);
                self.by3.remove(s3, p);
                if let Some(s2) = s2 {
                    self.by12.remove(s1, p);
                    self.by2.remove(s2, p);
                }
            }
            if let Some((s1, s2, s3)) = new {
                self.by1.insert(s1, p);
                self.by3.insert(s3, p);
                if let Some(s2) = s2 {
                    self.by12.insert(s1, p);
                    self.by2.insert(s2, p);
                }
            }
            self.scores[p as usize] = new;
        }
    }

    /// The broken twin is on (tests only).
    fn broken(&self) -> bool {
        #[cfg(test)]
        return self.broken_keeps_old_scores;
        #[cfg(not(test))]
        false
    }

    /// Clear the entries of the last fill.
    fn reset_out(&mut self, n: usize) {
        let out = &mut self.out.0;
        if self.out_full || out.misplaced.len() != n {
            *out = Confidences {
                misplaced: vec![None; n],
                inverted: vec![None; n],
                p_misplaced: vec![1.0; n],
                p_inverted: vec![1.0; n],
            };
            self.out_full = false;
        } else {
            for &p in &self.filled.0 {
                let p = p as usize;
                out.misplaced[p] = None;
                out.inverted[p] = None;
                out.p_misplaced[p] = 1.0;
                out.p_inverted[p] = 1.0;
            }
        }
        self.filled.0.clear();
    }

    /// The confidences [`Confidences::of`] gives, correct at the nodes of the placement
    /// findings in `findings` (every other node reads as untested).
    pub fn fill(
        &mut self,
        eff: &EffectiveTree,
        stats: &Stats,
        placement: &[Placement],
        findings: &[Finding],
    ) -> &Confidences {
        let n = self.scores.len();
        self.reset_out(n);
        if ![&self.by1, &self.by12, &self.by2, &self.by3]
            .iter()
            .all(|a| a.finite())
        {
            self.out.0 = Confidences::of(eff, stats, placement);
            self.out_full = true;
            return &self.out.0;
        }
        let sc = &mut self.scratch;
        sc.need.clear();
        sc.need.resize(n, false);
        let mut need3 = false;
        let mut need1 = false;
        for f in findings {
            let fam1 = f.rule == BETTER_PARENT || f.rule == WEAK_INCLUSION;
            let fam3 = f.rule == INVERTED_GENERALITY;
            if (fam1 || fam3) && self.scores[f.node as usize].is_some() {
                need1 |= fam1;
                need3 |= fam3;
                if !sc.need[f.node as usize] {
                    sc.need[f.node as usize] = true;
                    self.filled.0.push(f.node);
                }
            }
        }
        if need1 {
            self.fill_misplaced();
        }
        if need3 {
            self.fill_inverted();
        }
        let sc = &mut self.scratch;
        for &p in &self.filled.0 {
            sc.need[p as usize] = false;
        }
        &self.out.0
    }

    /// The misplacement test (family 1 of [`Confidences::of`]).
    fn fill_misplaced(&mut self) {
        let Some((m1, sc1)) = self.by1.location_scale() else {
            return;
        };
        let n = self.scores.len();
        let s = &mut self.scratch;
        let z2 = self.by2.location_scale();
        let mut rho = 0.0;
        if let Some((m2, sc2)) = z2 {
            s.rank_a.resize(n, 0.0);
            s.rank_b.resize(n, 0.0);
            self.by12.ranks_into(m1, sc1, &mut s.z, &mut s.rank_a);
            self.by2.ranks_into(m2, sc2, &mut s.z, &mut s.rank_b);
            s.ra.clear();
            s.rb.clear();
            for (p, sc) in self.scores.iter().enumerate() {
                if let Some((_, Some(_), _)) = sc {
                    s.ra.push(s.rank_a[p]);
                    s.rb.push(s.rank_b[p]);
                }
            }
            if s.ra.len() >= 2 {
                let r = pearson(&s.ra, &s.rb);
                rho = (2.0 * (std::f64::consts::PI * r / 6.0).sin()).clamp(0.0, 1.0);
            }
        }
        let denom = (2.0 + 2.0 * rho).sqrt();
        s.z.clear();
        s.list.clear();
        for (p, sc) in self.scores.iter().enumerate() {
            let Some((s1, s2, _)) = *sc else { continue };
            let a = (s1 - m1) / sc1;
            let z = match (s2, z2) {
                (Some(s2), Some((m2, sc2))) => (a + (s2 - m2) / sc2) / denom,
                _ => a,
            };
            s.z.push(z);
            s.list.push(p as PhraseId);
        }
        let out = &mut self.out.0;
        bh_needed(s, |node, p, q| {
            out.misplaced[node as usize] = Some(1.0 - q);
            out.p_misplaced[node as usize] = p;
        });
    }

    /// The inversion test (family 3 of [`Confidences::of`]): z₃ = s₃ / scale.
    fn fill_inverted(&mut self) {
        let Some((_, sc3)) = self.by3.location_scale() else {
            return;
        };
        let s = &mut self.scratch;
        s.z.clear();
        s.list.clear();
        for (p, sc) in self.scores.iter().enumerate() {
            let Some((_, _, s3)) = *sc else { continue };
            s.z.push((s3 - 0.0) / sc3);
            s.list.push(p as PhraseId);
        }
        let out = &mut self.out.0;
        bh_needed(s, |node, p, q| {
            out.inverted[node as usize] = Some(1.0 - q);
            out.p_inverted[node as usize] = p;
        });
    }
}

/// Benjamini–Hochberg over the tests `s.list` with z-scores `s.z` (p = 1 − Φ(z)), reporting
/// (node, p, q) for the nodes marked in `s.need` only; `q` is bit-identical to
/// `confidence::bh_q_values` over all p-values (see the module documentation).
fn bh_needed(s: &mut Scratch, mut emit: impl FnMut(PhraseId, f64, f64)) {
    let m = s.z.len();
    s.need_pos.clear();
    s.need_pos
        .extend(s.list.iter().map(|&p| s.need[p as usize]));
    let mut cut =
        s.z.iter()
            .zip(&s.need_pos)
            .filter(|x| *x.1)
            .map(|x| *x.0)
            .fold(f64::INFINITY, f64::min);
    if cut == f64::INFINITY {
        return;
    }
    for round in 0.. {
        s.prefix.clear();
        let mut out_max: Option<f64> = None;
        for (i, &z) in s.z.iter().enumerate() {
            if z >= cut {
                s.prefix.push((upper_tail(z), i));
            } else {
                out_max = Some(out_max.map_or(z, |o: f64| o.max(z)));
            }
        }
        s.prefix
            .sort_unstable_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        let k = s.prefix.len();
        s.q.clear();
        s.q.resize(k, 1.0);
        let mut running = 1.0f64;
        let mut r_max = 0;
        for (rank, &(p, i)) in s.prefix.iter().enumerate().rev() {
            running = running.min(p * m as f64 / (rank + 1) as f64);
            s.q[rank] = running.min(1.0);
            if s.need_pos[i] && r_max == 0 {
                r_max = rank + 1;
            }
        }
        let worst = s.q[r_max - 1];
        // the tests left out of the prefix (if any) cannot change the q-values needed: done
        let undecided = out_max.filter(|&zo| {
            let po = upper_tail(zo);
            let lb = po * (1.0 - 1e-9);
            !(po >= f64::MIN_POSITIVE && lb > s.prefix[k - 1].0 && worst <= lb)
        });
        let Some(zo) = undecided else {
            for (rank, &(p, i)) in s.prefix.iter().enumerate() {
                if s.need_pos[i] {
                    emit(s.list[i], p, s.q[rank]);
                }
            }
            return;
        };
        // lower the cut to where the tail is at least twice the largest q needed
        let target = (2.0 * worst).max(1e-290);
        cut = if target >= 0.5 || round >= 8 {
            f64::NEG_INFINITY
        } else if upper_tail(zo) >= target {
            zo
        } else {
            let (mut lo, mut hi) = (-40.0f64, zo);
            for _ in 0..64 {
                let mid = 0.5 * (lo + hi);
                if upper_tail(mid) >= target {
                    lo = mid;
                } else {
                    hi = mid;
                }
            }
            lo.min(zo)
        };
    }
}

/// Set the severity, confidence and evidence of every placement finding from `conf`, as
/// the rules set them on findings of a full audit (the other findings are left alone).
pub(super) fn stamp(findings: &mut [Finding], conf: &Confidences, cfg: &AuditConfig) {
    for f in findings.iter_mut() {
        let tested = if f.rule == BETTER_PARENT || f.rule == WEAK_INCLUSION {
            conf.misplaced[f.node as usize]
        } else if f.rule == INVERTED_GENERALITY {
            conf.inverted[f.node as usize]
        } else {
            continue;
        };
        f.severity = match tested {
            Some(c) if !cfg.severity.contains_key(f.rule) => level(c),
            _ => cfg.severity_of(f.rule),
        };
        f.confidence = tested.unwrap_or(1.0);
        f.evidence = -conf.p_value_of(f.rule, f.node).max(1e-300).log10();
    }
}

#[cfg(test)]
mod tests {
    use rand::{Rng, SeedableRng};
    use rand_xoshiro::Xoshiro256PlusPlus;

    use super::*;
    use crate::model::audit::confidence::{bh_q_values, robust_z};

    #[test]
    fn median_and_scale_equal_the_sorting_ones() {
        // against `confidence::robust_z` (full sorts) on random scores with ties, odd and
        // even counts: the z-scores must agree to the bit
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(3);
        for n in [20usize, 21, 22, 57, 200, 201] {
            for round in 0..20 {
                let v: Vec<f64> = (0..n)
                    .map(|_| {
                        let x: f64 = rng.gen_range(-3.0..3.0);
                        if round % 2 == 0 {
                            (x * 4.0).round() / 4.0
                        } else {
                            x.exp()
                        }
                    })
                    .collect();
                let mut s = Sorted {
                    v: v.iter()
                        .enumerate()
                        .map(|(i, &x)| (x, i as PhraseId))
                        .collect(),
                };
                s.sort();
                let want = robust_z(&v, None);
                let got = s
                    .location_scale()
                    .map(|(m, sc)| v.iter().map(|&x| (x - m) / sc).collect::<Vec<f64>>());
                let bits = |z: Option<Vec<f64>>| {
                    z.map(|z| z.iter().map(|x| x.to_bits()).collect::<Vec<u64>>())
                };
                assert_eq!(bits(got), bits(want), "n {n} round {round}");
            }
        }
    }

    #[test]
    fn q_values_of_the_needed_tests_equal_the_full_step_up() {
        // against `confidence::bh_q_values` over every p-value, on z-scores with ties,
        // p-values that underflow to 0 (z > 38) and that round to 1 (z < −9)
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(8);
        for round in 0..200 {
            let m = rng.gen_range(1..400);
            let spread = [1.0, 5.0, 20.0, 45.0][round % 4];
            let z: Vec<f64> = (0..m)
                .map(|_| {
                    let x: f64 = rng.gen_range(-spread..spread);
                    if rng.gen_bool(0.2) { x.round() } else { x }
                })
                .collect();
            let p: Vec<f64> = z.iter().map(|&x| upper_tail(x)).collect();
            let q = bh_q_values(&p);
            let mut s = Scratch {
                z: z.clone(),
                list: (0..m as PhraseId).collect(),
                need: (0..m)
                    .map(|_| rng.gen_bool([0.01, 0.1, 0.5][round % 3]))
                    .collect(),
                ..Scratch::default()
            };
            let mut got = vec![None; m];
            bh_needed(&mut s, |node, pv, qv| got[node as usize] = Some((pv, qv)));
            for i in 0..m {
                let want = s.need[i].then(|| (p[i].to_bits(), q[i].to_bits()));
                let got = got[i].map(|(a, b): (f64, f64)| (a.to_bits(), b.to_bits()));
                assert_eq!(got, want, "round {round} test {i} z {}", z[i]);
            }
        }
    }
}
