//! Step 1 of every node: the **representative**, the member with the highest mean
//! similarity to the others (see the [module documentation](super)).

use std::sync::atomic::{AtomicBool, Ordering};

use rand::SeedableRng;
use rand::seq::index::sample as sample_indices;
use rand_xoshiro::Xoshiro256Plus;
use rayon::prelude::*;

use super::BuildError;
use crate::model::gaussian::{CovarianceKind, Gaussians, LN_2PI, PhraseId, Similarity};
use crate::model::kernels::{
    bc_sum_f32, bc_sum_f64, elk_sum_f32, elk_sum_f64, sym_kl_sum_f32, sym_kl_sum_f64,
};

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

/// Pairwise similarity between two lists of rows, read in place from the Gaussian table
/// (the diagonal formulas widen the stored f32 values; no copy, no allocation per pair).
pub(super) struct SimBlock<'a> {
    g: &'a Gaussians,
    sim: Similarity,
    rows: &'a [PhraseId],
    diagonal: bool,
}

impl<'a> SimBlock<'a> {
    pub(super) fn new(g: &'a Gaussians, sim: Similarity, rows: &'a [PhraseId]) -> Self {
        SimBlock {
            g,
            sim,
            rows,
            diagonal: g.kind() == CovarianceKind::Diagonal,
        }
    }

    /// Similarity of local rows i of `self` and j of `other` (symmetric to the last bit).
    #[inline]
    pub(super) fn pair(&self, i: usize, other: &SimBlock, j: usize) -> f64 {
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
                let s = elk_sum_f64(mi, mj, vi, vj);
                -0.5 * (d as f64 * LN_2PI + s)
            }
            Similarity::Bhattacharyya => {
                let s = bc_sum_f64(mi, mj, vi, vj);
                let q = 0.25 * g.log_det(ri) + 0.25 * g.log_det(rj);
                let db = (s - q).max(0.0);
                (-db).exp()
            }
            Similarity::Kl => {
                let s = sym_kl_sum_f64(mi, mj, vi, vj);
                d as f64 - 0.5 * s
            }
        }
    }
}

/// Mean similarity of each of `candidates` to the members of `refs` other than itself.
/// Parallel over candidates; each sum runs in `refs` order, so results do not depend on
/// the number of threads.
pub(super) fn mean_scores(
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
/// Screening scores: like [`mean_scores`] but in f32 arithmetic for diagonal covariance
/// (the stored precision of the embeddings); used only to shortlist candidates, whose
/// scores are then recomputed in f64.
pub(super) fn screen_scores(
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
                        let t = elk_sum_f32(mi, mj, vi, vj);
                        -0.5 * (d as f64 * LN_2PI + t)
                    }
                    Similarity::Bhattacharyya => {
                        let t = bc_sum_f32(mi, mj, vi, vj);
                        let qj = 0.25 * g.log_det(r as usize);
                        (-(t - (qi + qj)).max(0.0)).exp()
                    }
                    Similarity::Kl => {
                        let ij = &rinv[j * d..(j + 1) * d];
                        let t = sym_kl_sum_f32(mi, mj, vi, vj, &ii, ij);
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
pub(super) fn random_subset(members: &[PhraseId], size: usize, seed: u64) -> Vec<PhraseId> {
    if size >= members.len() {
        return members.to_vec();
    }
    let mut rng = Xoshiro256Plus::seed_from_u64(seed);
    let mut idx = sample_indices(&mut rng, members.len(), size).into_vec();
    idx.sort_unstable();
    idx.into_iter().map(|i| members[i]).collect()
}
