//! Inner loops over diagonal Gaussians: the audit's, in `f32` (this paragraph), and at the
//! end of the file the builder's similarity sums (exact in `f64`, screening in `f32`).
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

/// [`kl_sum_impl`], stopping early: `Ok(sum)` with the very same bits as [`kl_sum_impl`]
/// (same lanes, same order of additions), or `Err(partial)` as soon as the sum of the
/// lanes after a block of 16 dimensions is above `stop`. Every term is ≥ 0 and rounded
/// addition is monotone, so the full sum (the same lane sums continued, then the same
/// horizontal sum) is ≥ `partial`: a lower bound of the full sum.
#[inline(always)]
fn kl_sum_until_impl(
    mc: &[f32],
    vc: &[f32],
    mx: &[f32],
    vx: &[f32],
    stop: f32,
) -> Result<f32, f32> {
    let mut acc = [0.0f32; 8];
    let n = mc.len() / 8 * 8;
    for (i, (((a, b), c), d)) in mc[..n]
        .chunks_exact(8)
        .zip(vc[..n].chunks_exact(8))
        .zip(mx[..n].chunks_exact(8))
        .zip(vx[..n].chunks_exact(8))
        .enumerate()
    {
        for j in 0..8 {
            let dl = c[j] - a[j];
            acc[j] += (b[j] + dl * dl) / d[j];
        }
        if i % 2 == 1 && (i + 1) * 8 < mc.len() {
            let partial: f32 = acc.iter().sum();
            if partial > stop {
                return Err(partial);
            }
        }
    }
    let mut s: f32 = acc.iter().sum();
    for k in n..mc.len() {
        let dl = mx[k] - mc[k];
        s += (vc[k] + dl * dl) / vx[k];
    }
    Ok(s)
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
    pub(super) fn kl_sum_until(
        mc: &[f32],
        vc: &[f32],
        mx: &[f32],
        vx: &[f32],
        stop: f32,
    ) -> Result<f32, f32> {
        super::kl_sum_until_impl(mc, vc, mx, vx, stop)
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

/// See [`kl_sum_until_impl`].
pub(crate) fn kl_sum_until(
    mc: &[f32],
    vc: &[f32],
    mx: &[f32],
    vx: &[f32],
    stop: f32,
) -> Result<f32, f32> {
    #[cfg(target_arch = "x86_64")]
    if has_avx2() {
        // SAFETY: the processor supports AVX2 (checked at run time).
        return unsafe { avx2::kl_sum_until(mc, vc, mx, vx, stop) };
    }
    kl_sum_until_impl(mc, vc, mx, vx, stop)
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

// ---- the builder's similarity sums ----------------------------------------------------
//
// Written with `lane_sum!`: interleaved accumulators that the compiler vectorises for the
// baseline target (no run-time dispatch).

/// Natural logarithm of a positive, finite, normal f64 without a library call, so that the
/// similarity loops vectorise: x = 2ᵉ·m with m ∈ [√½, √2), ln m = 2 atanh((m − 1)/(m + 1))
/// by its odd series up to the 17th power (Abramowitz & Stegun 1964, 4.1.27). With
/// |f| ≤ 0.1716 the omitted tail is below 2 f¹⁹/(19 (1 − f²)) = 3.1·10⁻¹⁶ (4.5·10⁻¹⁶
/// relative to ln 2; docs/maths.md §13); variances are floored well above the subnormal
/// range, so the normal-range precondition holds.
#[inline(always)]
pub(crate) fn fast_ln(x: f64) -> f64 {
    const SQRT_HALF_BITS: u64 = 0x3FE6_A09E_667F_3BCD; // √½
    let bits = x.to_bits();
    // shift the exponent so that the mantissa lands in [√½, √2)
    let adj = bits.wrapping_sub(SQRT_HALF_BITS);
    let e = (adj as i64 >> 52) as f64;
    let m = f64::from_bits(bits.wrapping_sub(adj & 0xFFF0_0000_0000_0000));
    let f = (m - 1.0) / (m + 1.0);
    let s = f * f;
    let poly = 1.0
        + s * (1.0 / 3.0
            + s * (1.0 / 5.0
                + s * (1.0 / 7.0
                    + s * (1.0 / 9.0
                        + s * (1.0 / 11.0
                            + s * (1.0 / 13.0 + s * (1.0 / 15.0 + s * (1.0 / 17.0))))))));
    e * std::f64::consts::LN_2 + 2.0 * f * poly
}

/// Σₖ term(k) over the per-dimension slices `[s…]` of length ≥ d, with `lanes`
/// interleaved accumulators (dimension k goes to accumulator k mod lanes) that are added
/// up in f64 in a fixed order: independent chains let the compiler vectorise, and the
/// result is the same for every call with the same operands (swapping i and j gives the
/// same bits, as every term is symmetric).
macro_rules! lane_sum {
    ($t:ty, $lanes:expr, $d:expr, [$($s:ident),+], |$k:ident| $term:expr) => {
        lane_sum!($t, from $t, $lanes, $d, [$($s),+], |$k| $term)
    };
    // accumulate in `$t` over slices of `$e` (the term widens them)
    ($t:ty, from $e:ty, $lanes:expr, $d:expr, [$($s:ident),+], |$k:ident| $term:expr) => {{
        let d: usize = $d;
        let mut acc = [0.0 as $t; $lanes];
        let full = d / $lanes * $lanes;
        let mut base = 0;
        while base < full {
            // fixed-size chunks: no bounds checks, straight-line lanes the compiler vectorises
            $(
                let $s: &[$e; $lanes] = match $s[base..].first_chunk() {
                    Some(c) => c,
                    None => break,
                };
            )+
            for $k in 0..$lanes {
                acc[$k] += $term;
            }
            base += $lanes;
        }
        for (lane, $k) in (full..d).enumerate() {
            acc[lane] += $term;
        }
        acc.iter().fold(0.0f64, |t, &a| t + a as f64)
    }};
}

// The exact kernels read the stored f32 values and widen each one to f64 (exactly) before
// any arithmetic, so they give the bits a widened f64 copy would give without holding one:
// at the root of a 100 000 × 64 build that copy was 102 MB.

// The exact kernels read the stored f32 values and widen each one to f64 (exactly) before
// any arithmetic, so they give the bits a widened f64 copy would give without holding one:
// at the root of a 100 000 × 64 build that copy was 102 MB.

/// Σₖ ln(σ²ᵢₖ + σ²ⱼₖ) + Δₖ² / (σ²ᵢₖ + σ²ⱼₖ) (the ELK sum), in f64.
#[inline]
pub(crate) fn elk_sum_f64(mi: &[f32], mj: &[f32], vi: &[f32], vj: &[f32]) -> f64 {
    let d = mi.len();
    let (mj, vi, vj) = (&mj[..d], &vi[..d], &vj[..d]);
    lane_sum!(f64, from f32, 4, d, [mi, mj, vi, vj], |k| {
        let sum = vi[k] as f64 + vj[k] as f64;
        let delta = mi[k] as f64 - mj[k] as f64;
        fast_ln(sum) + delta * delta / sum
    })
}

/// Σₖ Δₖ² / (8 σ̄²ₖ) + ½ ln σ̄²ₖ with σ̄² = (σ²ᵢ + σ²ⱼ)/2 (the Bhattacharyya sum), in f64.
#[inline]
pub(crate) fn bc_sum_f64(mi: &[f32], mj: &[f32], vi: &[f32], vj: &[f32]) -> f64 {
    let d = mi.len();
    let (mj, vi, vj) = (&mj[..d], &vi[..d], &vj[..d]);
    lane_sum!(f64, from f32, 4, d, [mi, mj, vi, vj], |k| {
        let bar = 0.5 * (vi[k] as f64 + vj[k] as f64);
        let delta = mi[k] as f64 - mj[k] as f64;
        delta * delta / (8.0 * bar) + 0.5 * fast_ln(bar)
    })
}

/// Σₖ σ²ᵢ/σ²ⱼ + σ²ⱼ/σ²ᵢ + Δ²(1/σ²ᵢ + 1/σ²ⱼ) (twice the symmetric KL plus 2d), in f64.
#[inline]
pub(crate) fn sym_kl_sum_f64(mi: &[f32], mj: &[f32], vi: &[f32], vj: &[f32]) -> f64 {
    let d = mi.len();
    let (mj, vi, vj) = (&mj[..d], &vi[..d], &vj[..d]);
    lane_sum!(f64, from f32, 4, d, [mi, mj, vi, vj], |k| {
        let (a, b) = (vi[k] as f64, vj[k] as f64);
        let (ia, ib) = (1.0 / a, 1.0 / b);
        let delta = mi[k] as f64 - mj[k] as f64;
        a * ib + b * ia + delta * delta * (ia + ib)
    })
}

/// ln x in f32 for the screening pass, by the same reduction as [`fast_ln`] with the
/// series up to the 9th power (truncation below 10⁻⁹, under f32 precision).
#[inline(always)]
pub(crate) fn fast_ln_f32(x: f32) -> f32 {
    const SQRT_HALF_BITS: u32 = 0x3F35_04F3; // √½
    let bits = x.to_bits();
    let adj = bits.wrapping_sub(SQRT_HALF_BITS);
    let e = (adj as i32 >> 23) as f32;
    let m = f32::from_bits(bits.wrapping_sub(adj & 0xFF80_0000));
    let f = (m - 1.0) / (m + 1.0);
    let s = f * f;
    let poly = 1.0 + s * (1.0 / 3.0 + s * (1.0 / 5.0 + s * (1.0 / 7.0 + s * (1.0 / 9.0))));
    e * std::f32::consts::LN_2 + 2.0 * f * poly
}

// The screening sums: the same sums in f32 arithmetic (the stored precision), used only to
// shortlist representative candidates, whose scores are then recomputed in f64.

/// [`elk_sum_f64`] in f32 arithmetic (accumulators added up in f64).
#[inline]
pub(crate) fn elk_sum_f32(mi: &[f32], mj: &[f32], vi: &[f32], vj: &[f32]) -> f64 {
    let d = mi.len();
    let (mj, vi, vj) = (&mj[..d], &vi[..d], &vj[..d]);
    lane_sum!(f32, 8, d, [mi, mj, vi, vj], |k| {
        let s = vi[k] + vj[k];
        let delta = mi[k] - mj[k];
        fast_ln_f32(s) + delta * delta / s
    })
}

/// [`bc_sum_f64`] in f32 arithmetic (accumulators added up in f64).
#[inline]
pub(crate) fn bc_sum_f32(mi: &[f32], mj: &[f32], vi: &[f32], vj: &[f32]) -> f64 {
    let d = mi.len();
    let (mj, vi, vj) = (&mj[..d], &vi[..d], &vj[..d]);
    lane_sum!(f32, 8, d, [mi, mj, vi, vj], |k| {
        let bar = 0.5 * (vi[k] + vj[k]);
        let delta = mi[k] - mj[k];
        delta * delta / (8.0 * bar) + 0.5 * fast_ln_f32(bar)
    })
}

/// [`sym_kl_sum_f64`] in f32 arithmetic with the reciprocal variances `ii = 1/vi`,
/// `ij = 1/vj` given (accumulators added up in f64).
#[inline]
pub(crate) fn sym_kl_sum_f32(
    mi: &[f32],
    mj: &[f32],
    vi: &[f32],
    vj: &[f32],
    ii: &[f32],
    ij: &[f32],
) -> f64 {
    let d = mi.len();
    let (mj, vi, vj, ii, ij) = (&mj[..d], &vi[..d], &vj[..d], &ii[..d], &ij[..d]);
    lane_sum!(f32, 8, d, [mi, mj, vi, vj, ii, ij], |k| {
        let delta = mi[k] - mj[k];
        vi[k] * ij[k] + vj[k] * ii[k] + delta * delta * (ii[k] + ij[k])
    })
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
        // the early-stopping sum: the same bits when it runs to the end, and a stop only
        // below the full sum (common practice, no source: monotone rounded addition)
        let whole = kl_sum_impl(&a, &b, &c, &e);
        for stop in [
            f32::INFINITY,
            whole,
            0.9 * whole,
            0.5 * whole,
            0.1 * whole,
            0.0,
        ] {
            for r in [
                kl_sum_until(&a, &b, &c, &e, stop),
                kl_sum_until_impl(&a, &b, &c, &e, stop),
            ] {
                match r {
                    Ok(v) => assert_eq!(v.to_bits(), whole.to_bits(), "{stop}"),
                    Err(p) => assert!(p > stop && p <= whole, "{stop} {p} {whole}"),
                }
            }
        }
        assert!(kl_sum_until(&a, &b, &c, &e, 0.1 * whole).is_err());
        assert!(kl_sum_until(&a, &b, &c, &e, whole).is_ok());
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

    #[test]
    fn fast_ln_matches_the_library_logarithm() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_xoshiro::Xoshiro256Plus::seed_from_u64(4);
        let mut worst: f64 = 0.0;
        for i in 0..200_000 {
            let x: f64 = match i % 3 {
                0 => rng.gen_range(1e-6..1e6),
                1 => rng.gen_range(0.5..2.0),
                _ => (rng.gen_range(-700.0..700.0f64)).exp(),
            };
            worst = worst.max((fast_ln(x) - x.ln()).abs() / x.ln().abs().max(1.0));
        }
        for x in [1.0, 2.0, 0.5, std::f64::consts::SQRT_2, 1e-300, 1e300] {
            worst = worst.max((fast_ln(x) - x.ln()).abs() / x.ln().abs().max(1.0));
        }
        assert!(worst < 1e-14, "worst relative error {worst:e}");
    }

    #[test]
    fn fast_ln_f32_matches_the_library_logarithm() {
        let mut worst: f32 = 0.0;
        for i in 1..100_000 {
            let x = i as f32 * 1e-3;
            worst = worst.max((fast_ln_f32(x) - x.ln()).abs() / x.ln().abs().max(1.0));
        }
        assert!(worst < 1e-6, "worst {worst:e}");
    }
}
