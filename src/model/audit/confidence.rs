//! Confidence of the placement findings, from the project's own distribution of scores.
//!
//! A placement finding (`better-parent`, `weak-inclusion`, `inverted-generality`) says that
//! a node may sit in the wrong place. How sure that is depends on how unusual the node's
//! figures are *for this project*: real hierarchies differ in how tightly children sit in
//! their parents, so a fixed threshold flags far too much on one and too little on another.
//! Each node with a parent is therefore put through robust outlier tests against the other
//! nodes, and the p-values are turned into a confidence with a
//! false-discovery-rate correction over the whole tree:
//!
//! 1. **Misplacement** (`better-parent`, `weak-inclusion`): two one-sided tests,
//!    - s₁ = ln KL(node ‖ parent): a node far from its parent;
//!    - s₂ = ln KL(node ‖ parent) − ln KL(node ‖ best other broader node) (the candidate
//!      of the search; nodes without one are not tested): a node that another node
//!      contains better than its parent does, measured against how much better the best
//!      alternative usually is in this project.
//!
//!    Each score becomes a robust z-score z = (s − median) / (1.4826 · MAD) among all tested
//!    nodes of the tree (the factor makes the MAD a consistent estimate of σ under
//!    normality: Rousseeuw & Croux 1993, JASA 88(424): 1273–1283), a one-sided normal p-value pₖ = 1 − Φ(zₖ), and the two are
//!    combined by the Bonferroni bound p = min(1, 2 · min(p₁, p₂)).
//! 2. **Inversion** (`inverted-generality`): s₃ = ln det Σ(node) − ln det Σ(parent), the
//!    same robust z-score and one-sided p-value.
//!
//! For each family the p-values of all tested nodes get Benjamini–Hochberg q-values
//! (Benjamini & Hochberg 1995, JRSS B 57(1): 289–300): q₍ᵢ₎ = minⱼ≥ᵢ p₍ⱼ₎ · m / j. The
//! confidence is 1 − q, the complement of the false-discovery rate at which the node would
//! be reported. Severity follows it (see [`level`]): `error` at q ≤ 0.01, `warning` at
//! q ≤ 0.05 (the conventional levels), `info` below ("consider"). Nothing here is fitted to
//! a data set: the only constants are the conventional levels and [`MIN_NODES`].
//!
//! The scores are compared across the whole tree, not per depth: nodes moved to a wrong
//! parent can make up most of a depth of their own (leaves hung under leaves), and a
//! per-depth median would then take them as the norm.
//!
//! With fewer than [`MIN_NODES`] tested nodes, or no spread (MAD 0 overall), there is no
//! distribution to speak of: the findings keep confidence 1 and their configured severity.

use statrs::function::erf::erfc;

use super::Severity;
use super::search::Placement;
use crate::model::effective::EffectiveTree;
use crate::model::gaussian::PhraseId;
use crate::model::stats::Stats;

/// Fewer tested nodes than this: no confidence is computed (every finding keeps 1).
pub const MIN_NODES: usize = 20;
/// q-value at or below which a placement finding is an error.
pub const Q_ERROR: f64 = 0.01;
/// q-value at or below which a placement finding is a warning (else info).
pub const Q_WARNING: f64 = 0.05;

/// The confidence of every node's placement findings (None: not tested).
#[derive(Debug, Clone, Default, PartialEq)]
pub(super) struct Confidences {
    /// Misplacement (`better-parent`, `weak-inclusion`), 1 − q.
    pub misplaced: Vec<Option<f64>>,
    /// Inversion (`inverted-generality`), 1 − q.
    pub inverted: Vec<Option<f64>>,
    /// The p-values behind `misplaced` (1 where not tested): ties of q break by them.
    pub p_misplaced: Vec<f64>,
    /// The p-values behind `inverted`.
    pub p_inverted: Vec<f64>,
}

/// The severity a placement finding of confidence `c` gets: error at q = 1 − c ≤
/// [`Q_ERROR`], warning at q ≤ [`Q_WARNING`], else info.
pub fn level(c: f64) -> Severity {
    let q = 1.0 - c;
    if q <= Q_ERROR + 1e-12 {
        Severity::Error
    } else if q <= Q_WARNING + 1e-12 {
        Severity::Warning
    } else {
        Severity::Info
    }
}

/// Upper tail of the standard normal, 1 − Φ(z).
pub fn upper_tail(z: f64) -> f64 {
    0.5 * erfc(z / std::f64::consts::SQRT_2)
}

/// Median of a non-empty slice (sorted in place; the mean of the middle two for an even
/// count).
fn median(v: &mut [f64]) -> f64 {
    v.sort_unstable_by(f64::total_cmp);
    let n = v.len();
    if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    }
}

/// Median and 1.4826 · MAD.
fn location_scale(v: &[f64]) -> (f64, f64) {
    let mut w = v.to_vec();
    let med = median(&mut w);
    for x in w.iter_mut() {
        *x = (*x - med).abs();
    }
    (med, 1.4826 * median(&mut w))
}

/// One-sided robust-z p-values of `scores` (node, score) against the median and MAD of all
/// of them; None when there is no spread or too few scores.
pub(super) fn robust_p_values(scores: &[(PhraseId, f64)]) -> Option<Vec<f64>> {
    if scores.len() < MIN_NODES {
        return None;
    }
    let all: Vec<f64> = scores.iter().map(|s| s.1).collect();
    let (m, sc) = location_scale(&all);
    if sc <= 0.0 || !sc.is_finite() {
        return None;
    }
    Some(all.iter().map(|&x| upper_tail((x - m) / sc)).collect())
}

/// Benjamini–Hochberg q-values (Benjamini & Hochberg 1995): q₍ᵢ₎ = minⱼ≥ᵢ p₍ⱼ₎ m / j,
/// capped at 1, in the input order.
pub fn bh_q_values(p: &[f64]) -> Vec<f64> {
    let m = p.len();
    let mut order: Vec<usize> = (0..m).collect();
    order.sort_unstable_by(|&a, &b| p[a].total_cmp(&p[b]).then(a.cmp(&b)));
    let mut q = vec![1.0; m];
    let mut running = 1.0f64;
    for (rank, &i) in order.iter().enumerate().rev() {
        running = running.min(p[i] * m as f64 / (rank + 1) as f64);
        q[i] = running.min(1.0);
    }
    q
}

/// `1 − q` and p per node of the tested list, scattered into n-long vectors.
fn scatter(n: usize, nodes: &[PhraseId], p: Option<Vec<f64>>) -> (Vec<Option<f64>>, Vec<f64>) {
    let mut out = vec![None; n];
    let mut pv = vec![1.0; n];
    if let Some(p) = p {
        for ((&node, q), &pi) in nodes.iter().zip(bh_q_values(&p)).zip(&p) {
            out[node as usize] = Some(1.0 - q);
            pv[node as usize] = pi;
        }
    }
    (out, pv)
}

impl Confidences {
    /// The p-value behind a finding's confidence (1 for rules without a test): the
    /// ranking's tie-break among equal confidences.
    pub(super) fn p_value_of(&self, rule: &str, node: PhraseId) -> f64 {
        match rule {
            super::BETTER_PARENT | super::WEAK_INCLUSION => self.p_misplaced[node as usize],
            super::INVERTED_GENERALITY => self.p_inverted[node as usize],
            _ => 1.0,
        }
    }

    /// Test every placed node with a parent (see the module documentation).
    pub(super) fn of(eff: &EffectiveTree, stats: &Stats, placement: &[Placement]) -> Self {
        let n = eff.tree.table_len();
        let tiny = 1e-12f64;
        let mut s1 = Vec::new();
        let mut s2 = Vec::new();
        let mut s3 = Vec::new();
        for p in 0..n as PhraseId {
            let Some(par) = eff.tree.parent(p).filter(|_| eff.tree.is_placed(p)) else {
                continue;
            };
            let s = &stats.nodes[p as usize];
            let Some(kp) = s.kl_to_parent else {
                continue;
            };
            let lkp = kp.max(tiny).ln();
            s1.push((p, lkp));
            if let Some((_, kb)) = placement[p as usize].best {
                s2.push((p, lkp - kb.max(tiny).ln()));
            }
            s3.push((p, s.log_det - stats.nodes[par as usize].log_det));
        }
        let nodes1: Vec<PhraseId> = s1.iter().map(|s| s.0).collect();
        let (misplaced, p_misplaced) = match robust_p_values(&s1) {
            None => (vec![None; n], vec![1.0; n]),
            Some(p1) => {
                let p2 = robust_p_values(&s2);
                let mut p2_of = vec![1.0; n];
                if let Some(p2) = p2 {
                    for (s, p) in s2.iter().zip(p2) {
                        p2_of[s.0 as usize] = p;
                    }
                }
                let p: Vec<f64> = nodes1
                    .iter()
                    .zip(&p1)
                    .map(|(&node, &a)| (2.0 * a.min(p2_of[node as usize])).min(1.0))
                    .collect();
                scatter(n, &nodes1, Some(p))
            }
        };
        let nodes3: Vec<PhraseId> = s3.iter().map(|s| s.0).collect();
        let (inverted, p_inverted) = scatter(n, &nodes3, robust_p_values(&s3));
        Confidences {
            misplaced,
            inverted,
            p_misplaced,
            p_inverted,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn q_values_by_hand() {
        // Benjamini & Hochberg 1995, step-up rule; counted by hand for m = 4:
        // sorted p 0.01, 0.02, 0.03, 0.5 -> p·m/j = 0.04, 0.04, 0.04, 0.5
        let q = bh_q_values(&[0.5, 0.03, 0.01, 0.02]);
        let want = [0.5, 0.04, 0.04, 0.04];
        for (a, b) in q.iter().zip(want) {
            assert!((a - b).abs() < 1e-12, "{q:?}");
        }
        // a later smaller ratio pulls earlier ones down: 0.01·3/1 = 0.03, 0.02·3/2 = 0.03,
        // 0.021·3/3 = 0.021 -> all 0.021
        let q = bh_q_values(&[0.01, 0.02, 0.021]);
        assert!(q.iter().all(|&x| (x - 0.021).abs() < 1e-12), "{q:?}");
    }

    #[test]
    fn normal_tail_matches_tables() {
        // standard normal table: 1 − Φ(1.6449) = 0.05, 1 − Φ(2.3263) = 0.01, 1 − Φ(0) = 0.5
        assert!((upper_tail(1.6449) - 0.05).abs() < 1e-5);
        assert!((upper_tail(2.3263) - 0.01).abs() < 1e-5);
        assert!((upper_tail(0.0) - 0.5).abs() < 1e-15);
    }

    #[test]
    fn robust_z_uses_median_and_mad_and_finds_the_outlier() {
        // 40 scores 0, 1, …, 39 plus one at 200: median 20, MAD 10 (counted by
        // hand: |x − 20| has median 10), so z(200) = 180 / 14.826
        let mut s: Vec<(PhraseId, f64)> = (0..40).map(|i| (i, i as f64)).collect();
        s.push((40, 200.0));
        let p = robust_p_values(&s).unwrap();
        let (m, sc) = location_scale(&s.iter().map(|x| x.1).collect::<Vec<_>>());
        assert_eq!(m, 20.0);
        assert!((sc - 14.826).abs() < 1e-9, "{sc}");
        assert!((p[40] - upper_tail(180.0 / 14.826)).abs() < 1e-15);
        assert!(p[40] < 1e-20 && p[20] == 0.5);
        // too few scores: no test
        assert!(robust_p_values(&s[..10]).is_none());
    }

    #[test]
    fn levels_follow_the_q_value() {
        assert_eq!(level(0.995), Severity::Error);
        assert_eq!(level(0.99), Severity::Error);
        assert_eq!(level(0.97), Severity::Warning);
        assert_eq!(level(0.9), Severity::Info);
    }
}
