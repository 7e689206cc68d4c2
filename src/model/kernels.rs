//! Inner loops of the audit for diagonal Gaussians, in `f32`.
//!
//! Each kernel is written once as plain Rust and compiled twice: for the baseline target and,
//! on x86-64 processors that have it, with AVX2 enabled (chosen at run time). Only the
//! vector width differs: no fused multiply-add is enabled, so both versions perform the same
//! IEEE operations in the same order and give bit-identical results. The quantities they
//! compute and the bounds they screen with are derived in `docs/maths.md` §15.

/// Σₖ (vc[k] + (mx[k] − mc[k])²) / vx[k], the data term of KL(c ‖ x).
///
/// It divides by the variance rather than multiplying by a stored reciprocal: an n × d
/// table of reciprocals would cost as much memory as the variances themselves, and the
/// packed division is not what bounds this loop (measured in `benches/audit.rs`).
#[inline(always)]
fn kl_sum_impl(mc: &[f32], vc: &[f32], mx: &[f32], vx: &[f32]) -> f32 {
    let mut acc = [0.0f32; 8];
    let n = mc.len() / 8 * 8;
    for (((a, b), c), d) in mc[..n]
        .chunks_exact(8)
        .zip(vc[..n].chunks_exact(8))
        .zip(mx[..n].chunks_exact(8))
        .zip(vx[..n].chunks_exact(8))
    {
        for j in 0..8 {
            let dl = c[j] - a[j];
            acc[j] += (b[j] + dl * dl) / d[j];
        }
    }
    let mut s: f32 = acc.iter().sum();
    for k in n..mc.len() {
        let dl = mx[k] - mc[k];
        s += (vc[k] + dl * dl) / vx[k];
    }
    s
}

/// Whether Σₖ (mx[k] − mc[k])² / (vc[k] + vx[k]) exceeds `limit`. Every term is ≥ 0, so
/// the sum is checked after each block of 16 dimensions and the loop stops as soon as it is
/// over: most pairs are far apart in the first few dimensions already.
#[inline(always)]
fn mean_term_exceeds_impl(mc: &[f32], vc: &[f32], mx: &[f32], vx: &[f32], limit: f32) -> bool {
    const BLOCK: usize = 16;
    let n = mc.len() / BLOCK * BLOCK;
    let mut total = 0.0f32;
    for (((a, b), c), d) in mc[..n]
        .chunks_exact(BLOCK)
        .zip(vc[..n].chunks_exact(BLOCK))
        .zip(mx[..n].chunks_exact(BLOCK))
        .zip(vx[..n].chunks_exact(BLOCK))
    {
        let mut acc = [0.0f32; BLOCK];
        for j in 0..BLOCK {
            let dl = c[j] - a[j];
            acc[j] = dl * dl / (b[j] + d[j]);
        }
        total += acc.iter().sum::<f32>();
        if total > limit {
            return true;
        }
    }
    for k in n..mc.len() {
        let dl = mx[k] - mc[k];
        total += dl * dl / (vc[k] + vx[k]);
    }
    total > limit
}

/// acc[s] = Σₖ (mp[k] − mq[k] + sp[k] · z[k][s])² / vq[k] for every bank point s, where
/// `bank` holds the d rows of `acc.len()` standard-normal values. The reciprocal of vq[k]
/// is taken once per dimension and shared by the whole row.
#[inline(always)]
fn mahalanobis_rows_impl(
    acc: &mut [f32],
    bank: &[f32],
    mp: &[f32],
    sp: &[f32],
    mq: &[f32],
    vq: &[f32],
) {
    let n = acc.len();
    acc.fill(0.0);
    for (k, row) in bank.chunks_exact(n).enumerate().take(mp.len()) {
        let a = mp[k] - mq[k];
        let b = sp[k];
        let w = 1.0 / vq[k];
        for (m, &z) in acc.iter_mut().zip(row) {
            let t = a + b * z;
            *m += t * t * w;
        }
    }
}

#[cfg(target_arch = "x86_64")]
mod avx2 {
    #[target_feature(enable = "avx2")]
    pub(super) fn kl_sum(mc: &[f32], vc: &[f32], mx: &[f32], vx: &[f32]) -> f32 {
        super::kl_sum_impl(mc, vc, mx, vx)
    }

    #[target_feature(enable = "avx2")]
    pub(super) fn mean_term_exceeds(
        mc: &[f32],
        vc: &[f32],
        mx: &[f32],
        vx: &[f32],
        limit: f32,
    ) -> bool {
        super::mean_term_exceeds_impl(mc, vc, mx, vx, limit)
    }

    #[target_feature(enable = "avx2")]
    pub(super) fn mahalanobis_rows(
        acc: &mut [f32],
        bank: &[f32],
        mp: &[f32],
        sp: &[f32],
        mq: &[f32],
        vq: &[f32],
    ) {
        super::mahalanobis_rows_impl(acc, bank, mp, sp, mq, vq)
    }
}

#[cfg(target_arch = "x86_64")]
fn has_avx2() -> bool {
    std::arch::is_x86_feature_detected!("avx2")
}

/// See [`kl_sum_impl`].
pub(crate) fn kl_sum(mc: &[f32], vc: &[f32], mx: &[f32], vx: &[f32]) -> f32 {
    #[cfg(target_arch = "x86_64")]
    if has_avx2() {
        // SAFETY: the processor supports AVX2 (checked at run time).
        return unsafe { avx2::kl_sum(mc, vc, mx, vx) };
    }
    kl_sum_impl(mc, vc, mx, vx)
}

/// See [`mean_term_exceeds_impl`].
pub(crate) fn mean_term_exceeds(
    mc: &[f32],
    vc: &[f32],
    mx: &[f32],
    vx: &[f32],
    limit: f32,
) -> bool {
    #[cfg(target_arch = "x86_64")]
    if has_avx2() {
        // SAFETY: the processor supports AVX2 (checked at run time).
        return unsafe { avx2::mean_term_exceeds(mc, vc, mx, vx, limit) };
    }
    mean_term_exceeds_impl(mc, vc, mx, vx, limit)
}

/// See [`mahalanobis_rows_impl`].
pub(crate) fn mahalanobis_rows(
    acc: &mut [f32],
    bank: &[f32],
    mp: &[f32],
    sp: &[f32],
    mq: &[f32],
    vq: &[f32],
) {
    #[cfg(target_arch = "x86_64")]
    if has_avx2() {
        // SAFETY: the processor supports AVX2 (checked at run time).
        unsafe { avx2::mahalanobis_rows(acc, bank, mp, sp, mq, vq) };
        return;
    }
    mahalanobis_rows_impl(acc, bank, mp, sp, mq, vq)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dispatched_kernels_equal_the_baseline_bit_for_bit() {
        let d = 67; // not a multiple of 8: exercises the tail
        let f = |s: f32| {
            (0..d)
                .map(|k| ((k as f32 * s).sin() + 1.5) * 0.7)
                .collect::<Vec<_>>()
        };
        let (a, b, c, e) = (f(0.3), f(0.7), f(1.1), f(1.9));
        assert_eq!(
            kl_sum(&a, &b, &c, &e).to_bits(),
            kl_sum_impl(&a, &b, &c, &e).to_bits()
        );
        let full: f64 = (0..d)
            .map(|k| {
                let dl = (c[k] - a[k]) as f64;
                dl * dl / (b[k] as f64 + e[k] as f64)
            })
            .sum();
        for limit in [0.0, 0.5 * full, 0.999 * full, 1.001 * full, 2.0 * full] {
            let want = full > limit;
            assert_eq!(
                mean_term_exceeds(&a, &b, &c, &e, limit as f32),
                want,
                "{limit}"
            );
            assert_eq!(mean_term_exceeds_impl(&a, &b, &c, &e, limit as f32), want);
        }
        let n = 40;
        let bank: Vec<f32> = (0..d * n).map(|i| (i as f32 * 0.37).cos()).collect();
        let mut x = vec![0.0; n];
        let mut y = vec![0.0; n];
        mahalanobis_rows(&mut x, &bank, &a, &b, &c, &e);
        mahalanobis_rows_impl(&mut y, &bank, &a, &b, &c, &e);
        assert_eq!(x, y);
        // against a direct evaluation in f64
        let direct: f64 = (0..d)
            .map(|k| {
                let dl = (c[k] - a[k]) as f64;
                (b[k] as f64 + dl * dl) / e[k] as f64
            })
            .sum();
        assert!((kl_sum(&a, &b, &c, &e) as f64 - direct).abs() < 1e-4 * direct);
    }
}
