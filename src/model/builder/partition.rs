//! Step 3 of every node: the feature vectors and the k-means partition of the members
//! other than the representative (k from [`super::kselect`]).

use std::sync::atomic::{AtomicBool, Ordering};

use ndarray::Array2;

use super::kselect::{self, Elbow};
use super::params::CheckedBuildParams;
use super::representative::random_subset;
use super::{BuildError, SALT_ELBOW_SAMPLE, SALT_KMEANS, mix};
use crate::model::gaussian::{Gaussians, PhraseId};
use crate::model::kmeans::{self, KMeansConfig};

/// How a cluster's non-representative members are split.
pub(super) struct Split {
    /// The k values of the elbow curve (empty when not split).
    pub k_tried: Vec<usize>,
    /// Inertia for each of `k_tried`.
    pub inertia: Vec<f64>,
    /// Rows the elbow curve was computed on.
    pub elbow_rows: usize,
    /// Number of sub-clusters (0: the members become children).
    pub chosen_k: usize,
    /// Why this k.
    pub reason: String,
    /// Sub-clusters, each sorted by row, ordered by their first row.
    pub clusters: Vec<Vec<PhraseId>>,
}

/// No split: every member becomes a child of the representative, for `reason`.
pub(super) fn flat(rest: &[PhraseId], reason: &str) -> Split {
    Split {
        k_tried: Vec::new(),
        inertia: Vec::new(),
        elbow_rows: 0,
        chosen_k: 0,
        reason: reason.to_string(),
        clusters: rest.iter().map(|&r| vec![r]).collect(),
    }
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

/// Split `rest` (a cluster without its representative): the elbow curve on all of it or
/// on a sample of [`BuildParams::elbow_sample`](super::BuildParams::elbow_sample)
/// members, k from the curve, then k-means on every member. `seed` is the node's seed.
pub(super) fn choose_split(
    g: &Gaussians,
    p: &CheckedBuildParams,
    rest: &[PhraseId],
    seed: u64,
    cancel: &AtomicBool,
) -> Result<Split, BuildError> {
    let full = feature_rows(g, rest, p.with_variance);
    let elbow_members = random_subset(rest, p.elbow_sample, mix(seed, SALT_ELBOW_SAMPLE));
    let sampled = elbow_members.len() < rest.len();
    let elbow_x = if sampled {
        feature_rows(g, &elbow_members, p.with_variance)
    } else {
        full.clone()
    };
    let k_top = kselect::k_top(&elbow_x, p.k_max);
    if k_top < 2 {
        return Ok(flat(
            rest,
            "members have identical features: they become children",
        ));
    }
    let cfg = |k: usize, restarts: usize| KMeansConfig {
        k,
        n_init: restarts,
        max_iter: p.max_iterations,
        tolerance: p.tolerance,
        seed: mix(seed, SALT_KMEANS + ((k as u64) << 8)),
    };
    let Elbow {
        k_tried,
        inertia,
        mut labels_by_k,
    } = kselect::elbow_curve(elbow_x.view(), k_top, &|k| cfg(k, p.elbow_restarts), cancel)?;
    let (chosen_k, reason) = kselect::pick_k(&k_tried, &inertia, p)?;
    if cancel.load(Ordering::Relaxed) {
        return Err(BuildError::Cancelled);
    }
    let reuse = !sampled && p.elbow_restarts >= p.kmeans_restarts;
    let labels = match labels_by_k.remove(&chosen_k) {
        Some(l) if reuse => l,
        _ => kmeans::kmeans(full.view(), &cfg(chosen_k, p.kmeans_restarts))?.labels,
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
