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
//! 1. **Misplacement** (`better-parent`, `weak-inclusion`): two one-sided scores,
//!    - s₁ = ln KL(node ‖ parent): a node far from its parent;
//!    - s₂ = ln KL(node ‖ parent) − ln KL(node ‖ best other broader node) (the candidate
//!      of the search; nodes without one have no s₂): a node that another node contains
//!      better than its parent does, measured against how much better the best
//!      alternative usually is in this project.
//!
//!    Each score becomes a robust z-score z = (s − median) / (1.4826 · MAD) among all scored
//!    nodes of the tree (the factor makes the MAD a consistent estimate of σ under
//!    normality: Rousseeuw & Croux 1993, JASA 88(424): 1273–1283). The two z-scores are
//!    combined by Stouffer's sum for correlated tests, z = (z₁ + z₂) / √(2 + 2ρ)
//!    (Stouffer et al. 1949, *The American Soldier*; the correction for correlated
//!    z-scores, Strube 1985, Psychological Bulletin 97(2): 334–341, from memory), where ρ
//!    is the correlation of z₁ and z₂ over the project's nodes, estimated robustly from
//!    Spearman's rank correlation r by the bivariate-normal relation ρ = 2 sin(π r / 6)
//!    (Pearson 1907, from memory) and clamped to [0, 1] (a negative ρ would make the sum
//!    larger; 0 is the conservative choice). A node without s₂ keeps z₁. The p-value is
//!    the one-sided normal tail p = 1 − Φ(z). The sum, unlike the smaller of the two
//!    p-values (Bonferroni), needs *both* scores to agree: a node very close to its parent
//!    (z₁ ≪ 0) whose best alternative is closer still is not a misplacement, and a node
//!    moderately far from its parent with a moderately better alternative is.
//! 2. **Inversion** (`inverted-generality`): s₃ = ln det Σ(node) − ln det Σ(parent). The null
//!    hypothesis is "the node is not broader than its parent" (s₃ ≤ 0), so the test is
//!    taken at its boundary: z₃ = s₃ / (1.4826 · MAD of s₃), p = 1 − Φ(z₃). (Centring on
//!    the median child instead, far below 0, made every child slightly broader than its
//!    parent an outlier; in real hierarchies with own-text Gaussians such children are
//!    common and correctly placed.)
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

/// Robust z-scores (s − median) / (1.4826 · MAD) of `scores`, or with `centre` given,
/// (s − centre) / (1.4826 · MAD); None with fewer than [`MIN_NODES`] scores or no spread.
pub(super) fn robust_z(scores: &[f64], centre: Option<f64>) -> Option<Vec<f64>> {
    if scores.len() < MIN_NODES {
        return None;
    }
    let (m, sc) = location_scale(scores);
    if sc <= 0.0 || !sc.is_finite() {
        return None;
    }
    let c = centre.unwrap_or(m);
    Some(scores.iter().map(|&x| (x - c) / sc).collect())
}

/// Ranks 1 … n of `v`, ties sharing their mean rank.
fn ranks(v: &[f64]) -> Vec<f64> {
    let mut order: Vec<usize> = (0..v.len()).collect();
    order.sort_by(|&a, &b| v[a].total_cmp(&v[b]).then(a.cmp(&b)));
    let mut r = vec![0.0; v.len()];
    let mut i = 0;
    while i < order.len() {
        let mut j = i;
        while j + 1 < order.len() && v[order[j + 1]] == v[order[i]] {
            j += 1;
        }
        let mean = (i + j) as f64 / 2.0 + 1.0;
        for &k in &order[i..=j] {
            r[k] = mean;
        }
        i = j + 1;
    }
    r
}

/// Pearson correlation of two equally long slices (0 when either has no spread).
pub(super) fn pearson(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len() as f64;
    let (ma, mb) = (a.iter().sum::<f64>() / n, b.iter().sum::<f64>() / n);
    let (mut sab, mut saa, mut sbb) = (0.0, 0.0, 0.0);
    for (x, y) in a.iter().zip(b) {
        sab += (x - ma) * (y - mb);
        saa += (x - ma) * (x - ma);
        sbb += (y - mb) * (y - mb);
    }
    if saa <= 0.0 || sbb <= 0.0 {
        0.0
    } else {
        sab / (saa * sbb).sqrt()
    }
}

/// The correlation of two scores, estimated robustly: Spearman's rank correlation r
/// turned into a Pearson correlation by ρ = 2 sin(π r / 6), clamped to [0, 1] (see the
/// module documentation).
pub(super) fn robust_correlation(a: &[f64], b: &[f64]) -> f64 {
    if a.len() < 2 {
        return 0.0;
    }
    let r = pearson(&ranks(a), &ranks(b));
    (2.0 * (std::f64::consts::PI * r / 6.0).sin()).clamp(0.0, 1.0)
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
        let v1: Vec<f64> = s1.iter().map(|s| s.1).collect();
        let (misplaced, p_misplaced) = match robust_z(&v1, None) {
            None => (vec![None; n], vec![1.0; n]),
            Some(z1) => {
                let v2: Vec<f64> = s2.iter().map(|s| s.1).collect();
                let mut z2_of: Vec<Option<f64>> = vec![None; n];
                let mut rho = 0.0;
                if let Some(z2) = robust_z(&v2, None) {
                    let mut z1_of = vec![0.0; n];
                    for (&node, &z) in nodes1.iter().zip(&z1) {
                        z1_of[node as usize] = z;
                    }
                    let a: Vec<f64> = s2.iter().map(|s| z1_of[s.0 as usize]).collect();
                    rho = robust_correlation(&a, &z2);
                    for (s, z) in s2.iter().zip(z2) {
                        z2_of[s.0 as usize] = Some(z);
                    }
                }
                let denom = (2.0 + 2.0 * rho).sqrt();
                let p: Vec<f64> = nodes1
                    .iter()
                    .zip(&z1)
                    .map(|(&node, &a)| match z2_of[node as usize] {
                        Some(b) => upper_tail((a + b) / denom),
                        None => upper_tail(a),
                    })
                    .collect();
                scatter(n, &nodes1, Some(p))
            }
        };
        let nodes3: Vec<PhraseId> = s3.iter().map(|s| s.0).collect();
        let v3: Vec<f64> = s3.iter().map(|s| s.1).collect();
        let p3 = robust_z(&v3, Some(0.0)).map(|z| z.into_iter().map(upper_tail).collect());
        let (inverted, p_inverted) = scatter(n, &nodes3, p3);
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
        let v: Vec<f64> = s.iter().map(|x| x.1).collect();
        let p: Vec<f64> = robust_z(&v, None)
            .unwrap()
            .into_iter()
            .map(upper_tail)
            .collect();
        let (m, sc) = location_scale(&v);
        assert_eq!(m, 20.0);
        assert!((sc - 14.826).abs() < 1e-9, "{sc}");
        assert!((p[40] - upper_tail(180.0 / 14.826)).abs() < 1e-15);
        assert!(p[40] < 1e-20 && p[20] == 0.5);
        // too few scores: no test
        assert!(robust_z(&v[..10], None).is_none());
        // centred at 0 instead of the median: z(200) = 200 / 14.826
        let z0 = robust_z(&v, Some(0.0)).unwrap();
        assert!((z0[40] - 200.0 / 14.826).abs() < 1e-12);
    }

    #[test]
    fn ranks_share_ties_and_correlation_follows_the_sine_rule() {
        // ranks counted by hand: 10, 30, 20, 30 -> 1, 3.5, 2, 3.5
        assert_eq!(ranks(&[10.0, 30.0, 20.0, 30.0]), vec![1.0, 3.5, 2.0, 3.5]);
        // the same order: Spearman r = 1, ρ = 2 sin(π / 6) = 1 (Pearson 1907 relation)
        let a: Vec<f64> = (0..30).map(f64::from).collect();
        let b: Vec<f64> = a.iter().map(|x| x * x).collect();
        assert!((robust_correlation(&a, &b) - 1.0).abs() < 1e-12);
        // reversed order: r = −1, clamped to 0
        let c: Vec<f64> = a.iter().map(|x| -x).collect();
        assert_eq!(robust_correlation(&a, &c), 0.0);
    }

    #[test]
    fn levels_follow_the_q_value() {
        assert_eq!(level(0.995), Severity::Error);
        assert_eq!(level(0.99), Severity::Error);
        assert_eq!(level(0.97), Severity::Warning);
        assert_eq!(level(0.9), Severity::Info);
    }
}
