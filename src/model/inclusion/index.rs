//! The inverted-file index over the means that restricts the candidate scan of the
//! inclusion builder above [`super::InclusionParams::exact_limit`] phrases.

use std::sync::atomic::{AtomicBool, Ordering};

use rand::SeedableRng;
use rand::seq::SliceRandom;
use rand_xoshiro::Xoshiro256PlusPlus;
use rayon::prelude::*;

use super::InclusionError;
use super::lanes::Lanes;
use crate::model::gaussian::Gaussians;

/// The inverted-file index: cells of members (sorted by decreasing breadth) and centroids.
pub(super) struct Index {
    centroids: Lanes,
    pub(super) cells: Vec<Vec<u32>>,
}

pub(super) fn build_index(
    g: &Gaussians,
    members: &[u32],
    by_breadth: &dyn Fn(&u32, &u32) -> std::cmp::Ordering,
    cells: usize,
    iterations: usize,
    seed: u64,
    cancel: &AtomicBool,
) -> Result<Index, InclusionError> {
    let d = g.dim();
    let k = cells.min(members.len()).max(1);
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    let mut pick: Vec<u32> = members.to_vec();
    pick.shuffle(&mut rng);
    let mut centroids: Vec<f32> = Vec::with_capacity(k * d);
    for &r in &pick[..k] {
        centroids.extend_from_slice(g.mean(r as usize));
    }
    let assign = |centroids: &[f32]| -> Vec<u32> {
        let lanes = Lanes::of(centroids, d);
        members
            .par_chunks(1024)
            .flat_map_iter(|chunk| {
                let mut dists = Vec::with_capacity(k);
                chunk
                    .iter()
                    .map(|&r| {
                        lanes.dists(g.mean(r as usize), &mut dists);
                        let mut best = (f32::INFINITY, 0u32);
                        for (j, &x) in dists.iter().enumerate() {
                            if x < best.0 {
                                best = (x, j as u32);
                            }
                        }
                        best.1
                    })
                    .collect::<Vec<u32>>()
            })
            .collect()
    };
    let mut labels = assign(&centroids);
    for _ in 1..iterations {
        if cancel.load(Ordering::Relaxed) {
            return Err(InclusionError::Cancelled);
        }
        let mut sum = vec![0.0f64; k * d];
        let mut count = vec![0usize; k];
        for (&r, &l) in members.iter().zip(&labels) {
            let l = l as usize;
            count[l] += 1;
            for (s, &x) in sum[l * d..(l + 1) * d].iter_mut().zip(g.mean(r as usize)) {
                *s += x as f64;
            }
        }
        for l in 0..k {
            if count[l] > 0 {
                for j in 0..d {
                    centroids[l * d + j] = (sum[l * d + j] / count[l] as f64) as f32;
                }
            }
        }
        labels = assign(&centroids);
    }
    let mut cell_lists = vec![Vec::new(); k];
    for (&r, &l) in members.iter().zip(&labels) {
        cell_lists[l as usize].push(r);
    }
    for c in &mut cell_lists {
        c.sort_by(by_breadth);
    }
    Ok(Index {
        centroids: Lanes::of(&centroids, d),
        cells: cell_lists,
    })
}

impl Index {
    /// The `probe` cells nearest to `m` (ties: lower cell).
    pub(super) fn nearest(&self, m: &[f32], probe: usize) -> Vec<u32> {
        let mut best: Vec<(f32, u32)> = Vec::with_capacity(probe + 1);
        let mut dists = Vec::new();
        self.centroids.dists(m, &mut dists);
        for (j, &x) in dists.iter().enumerate() {
            if best.len() == probe {
                let last = best[probe - 1];
                if (x, j as u32) >= last {
                    continue;
                }
                best.pop();
            }
            let pos = best.partition_point(|y| *y < (x, j as u32));
            best.insert(pos, (x, j as u32));
        }
        best.into_iter().map(|x| x.1).collect()
    }
}
