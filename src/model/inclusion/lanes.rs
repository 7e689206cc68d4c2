//! Squared distances from one mean to every centroid of the inclusion index, many centroids
//! at once: the centroids are stored in blocks of [`LANES`], dimension-major inside a block,
//! and each lane adds its own terms in dimension order. Every distance is therefore the
//! same left-to-right `f32` sum as the one-pair distance `Σ (a − b)²` (bit for bit: no reordering, no
//! fused multiply-add), only [`LANES`] of them advance together, which the compiler turns
//! into vector instructions. At 1 000 000 phrases the index has 1 000 cells and the
//! one-pair loop, bound by the latency of 64 dependent additions, took minutes.

/// Centroids per block.
pub(super) const LANES: usize = 32;

/// Squared Euclidean distance, summed left to right (the reference for [`Lanes::dists`]).
#[cfg(test)]
fn dist2(a: &[f32], b: &[f32]) -> f32 {
    a.iter().zip(b).map(|(x, y)| (x - y) * (x - y)).sum()
}

/// Centroids laid out in blocks for [`Lanes::dists`].
pub(super) struct Lanes {
    d: usize,
    k: usize,
    /// Block `b`, dimension `j`, lane `l` at `(b·d + j)·LANES + l`; unused lanes are 0.
    blocks: Vec<f32>,
}

impl Lanes {
    /// The layout of `k = centroids.len() / d` row-major centroids.
    pub(super) fn of(centroids: &[f32], d: usize) -> Self {
        let k = centroids.len() / d.max(1);
        let nb = k.div_ceil(LANES);
        let mut blocks = vec![0.0f32; nb * d * LANES];
        for (c, row) in centroids.chunks_exact(d.max(1)).enumerate() {
            let (b, l) = (c / LANES, c % LANES);
            for (j, &x) in row.iter().enumerate() {
                blocks[(b * d + j) * LANES + l] = x;
            }
        }
        Lanes { d, k, blocks }
    }

    /// `out[j] = dist2(m, centroid j)` for every centroid, in centroid order.
    pub(super) fn dists(&self, m: &[f32], out: &mut Vec<f32>) {
        out.clear();
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the processor supports AVX2 (checked at run time).
            unsafe { avx2::dists(self, m, out) };
            return;
        }
        dists_impl(self, m, out);
    }
}

#[inline(always)]
fn dists_impl(lanes: &Lanes, m: &[f32], out: &mut Vec<f32>) {
    let d = lanes.d;
    if d == 0 {
        out.resize(lanes.k, 0.0);
        return;
    }
    for (b, block) in lanes.blocks.chunks_exact(d * LANES).enumerate() {
        // one running sum per lane, each over the dimensions in order, as dist2 adds them
        // (starting from 0: the first term is ≥ +0, so -0.0 + t and 0.0 + t are both t)
        let mut acc = [0.0f32; LANES];
        for (&x, row) in m.iter().zip(block.chunks_exact(LANES)) {
            for (a, &c) in acc.iter_mut().zip(row) {
                let t = x - c;
                *a += t * t;
            }
        }
        let valid = (lanes.k - b * LANES).min(LANES);
        out.extend_from_slice(&acc[..valid]);
    }
}

#[cfg(target_arch = "x86_64")]
mod avx2 {
    #[target_feature(enable = "avx2")]
    pub(super) fn dists(lanes: &super::Lanes, m: &[f32], out: &mut Vec<f32>) {
        super::dists_impl(lanes, m, out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn block_distances_equal_the_one_pair_sum_bit_for_bit() {
        // common practice, no source: the lane layout against the left-to-right sum, for
        // dimensions and centroid counts around the block size, with values whose sums
        // round differently when reordered
        let mut state = 12345u64;
        let mut next = || {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            ((state >> 40) as f32 / (1u64 << 24) as f32 - 0.5)
                * 1e3f32.powf(((state >> 20) & 3) as f32 / 3.0)
        };
        for d in [1usize, 3, 16, 64, 65] {
            for k in [1usize, 5, LANES - 1, LANES, LANES + 1, 3 * LANES + 7] {
                let cents: Vec<f32> = (0..k * d).map(|_| next()).collect();
                let lanes = Lanes::of(&cents, d);
                let mut out = Vec::new();
                for _ in 0..4 {
                    let m: Vec<f32> = (0..d).map(|_| next()).collect();
                    lanes.dists(&m, &mut out);
                    assert_eq!(out.len(), k);
                    for (j, c) in cents.chunks_exact(d).enumerate() {
                        assert_eq!(
                            out[j].to_bits(),
                            dist2(&m, c).to_bits(),
                            "d {d} k {k} j {j}"
                        );
                    }
                    // and the portable path (what runs without AVX2)
                    let mut plain = Vec::new();
                    dists_impl(&lanes, &m, &mut plain);
                    assert_eq!(plain, out);
                }
            }
        }
    }
}
