//! Step 2 of every node: the number of sub-clusters k, from the elbow of the k-means
//! inertia curve (kneedle, Satopaa et al. 2011) or, without a knee, the fallback share.

use std::collections::BTreeMap;
use std::sync::atomic::{AtomicBool, Ordering};

use ndarray::{Array2, ArrayView2};
use rayon::prelude::*;

use super::BuildError;
use super::params::BuildParams;
use crate::model::kmeans::{self, KMeansConfig};
use crate::model::kneedle::{self, Curve};

/// The elbow curve of one cluster: k = 1 (the total sum of squares) and the k-means
/// inertia for k = 2..=k_top, with each fit's labels.
pub(super) struct Elbow {
    /// The k values, starting at 1.
    pub k_tried: Vec<usize>,
    /// Inertia for each of `k_tried`.
    pub inertia: Vec<f64>,
    /// The labels of each k-means fit (k ≥ 2).
    pub labels_by_k: BTreeMap<usize, Vec<usize>>,
}

/// Number of distinct rows of a feature matrix (compared bit for bit).
pub(super) fn distinct_rows(x: &Array2<f64>) -> usize {
    let mut keys: Vec<Vec<u64>> = x
        .rows()
        .into_iter()
        .map(|r| r.iter().map(|v| v.to_bits()).collect())
        .collect();
    keys.sort_unstable();
    keys.dedup();
    keys.len()
}

/// The largest k worth trying on `x`: at most `k_max`, at most the number of distinct
/// points, and sub-clusters of two members on average (k ≤ m / 2; always k ≥ 2 when there
/// are 3 or more members). Below 2 the cluster cannot be split.
pub(super) fn k_top(x: &Array2<f64>, k_max: usize) -> usize {
    let distinct = distinct_rows(x);
    k_max.min(distinct).min((x.nrows() / 2).max(2))
}

/// The elbow curve of `x` for k = 2..=`k_top` with the fit settings `cfg(k)`. The fits are
/// independent: they run in parallel and are collected in k order.
pub(super) fn elbow_curve(
    x: ArrayView2<'_, f64>,
    k_top: usize,
    cfg: &(dyn Fn(usize) -> KMeansConfig + Sync),
    cancel: &AtomicBool,
) -> Result<Elbow, BuildError> {
    let fits: Vec<Result<kmeans::KMeansFit, BuildError>> = (2..=k_top)
        .into_par_iter()
        .map(|k| {
            if cancel.load(Ordering::Relaxed) {
                return Err(BuildError::Cancelled);
            }
            Ok(kmeans::kmeans(x, &cfg(k))?)
        })
        .collect();
    let mut k_tried = vec![1usize];
    let mut inertia = vec![kmeans::total_sum_of_squares(x)];
    let mut labels_by_k = BTreeMap::new();
    for (k, fit) in (2..=k_top).zip(fits) {
        let fit = fit?;
        k_tried.push(k);
        inertia.push(fit.inertia);
        labels_by_k.insert(k, fit.labels);
    }
    Ok(Elbow {
        k_tried,
        inertia,
        labels_by_k,
    })
}

/// Choose k from the elbow curve (`ks[0] = 1`): the kneedle knee, else the fallback share.
pub(super) fn pick_k(
    ks: &[usize],
    inertia: &[f64],
    p: &BuildParams,
) -> Result<(usize, String), BuildError> {
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
