//! The MBAR weights of one chunk of samples with AVX2 and FMA: four states per
//! vector, the last vector of a row filled by a masked load, so every exp of a
//! row runs in vector registers.

use super::mbar::{ChunkIn, Sums};
use std::arch::x86_64::*;

/// Rows per block of the phased loop.
const BLOCK: usize = 16;

const LOG2E: f64 = std::f64::consts::LOG2_E;
// The same Cody–Waite split and rounding shift as `fastexp`.
const LN2_HI: f64 = 0.693_147_180_369_123_8;
const LN2_LO: f64 = 1.908_214_929_270_587_7e-10;
const SHIFT: f64 = 6_755_399_441_055_744.0;

/// e^x lane by lane for x ≤ 0, as `fastexp::exp_nonpos` but with fused
/// multiply-adds.
#[inline(always)]
unsafe fn exp_nonpos4(x: __m256d) -> __m256d {
    let x = _mm256_max_pd(x, _mm256_set1_pd(-708.0));
    let t = _mm256_fmadd_pd(x, _mm256_set1_pd(LOG2E), _mm256_set1_pd(SHIFT));
    let n = _mm256_sub_pd(t, _mm256_set1_pd(SHIFT));
    let r = _mm256_fnmadd_pd(n, _mm256_set1_pd(LN2_HI), x);
    let r = _mm256_fnmadd_pd(n, _mm256_set1_pd(LN2_LO), r);
    let mut p = _mm256_set1_pd(1.0 / 3_628_800.0);
    for c in [
        1.0 / 362_880.0,
        1.0 / 40_320.0,
        1.0 / 5_040.0,
        1.0 / 720.0,
        1.0 / 120.0,
        1.0 / 24.0,
        1.0 / 6.0,
        0.5,
        1.0,
        1.0,
    ] {
        p = _mm256_fmadd_pd(p, r, _mm256_set1_pd(c));
    }
    let ni = _mm256_sub_epi64(
        _mm256_castpd_si256(t),
        _mm256_set1_epi64x(SHIFT.to_bits() as i64),
    );
    let scale = _mm256_slli_epi64(_mm256_add_epi64(ni, _mm256_set1_epi64x(1023)), 52);
    _mm256_mul_pd(p, _mm256_castsi256_pd(scale))
}

#[inline(always)]
unsafe fn hmax(v: __m256d) -> f64 {
    let m = _mm_max_pd(_mm256_castpd256_pd128(v), _mm256_extractf128_pd(v, 1));
    _mm_cvtsd_f64(_mm_max_pd(m, _mm_unpackhi_pd(m, m)))
}

#[inline(always)]
unsafe fn hsum(v: __m256d) -> f64 {
    let m = _mm_add_pd(_mm256_castpd256_pd128(v), _mm256_extractf128_pd(v, 1));
    _mm_cvtsd_f64(_mm_add_pd(m, _mm_unpackhi_pd(m, m)))
}

/// The weights p_nk of the chunk's samples into `out.buf` (row stride `kp`), their
/// column sums added to `out.colsum` and Σ_n ln Σ_k e^{c_k − u_nk} to `out.lse`.
///
/// # Safety
/// The CPU must support AVX2 and FMA. `kp` is `k` rounded up to a multiple of 4,
/// `c` and `out.colsum` hold `kp` values (`c[k..]` = −∞), `out.buf` at least
/// `rows.len() · kp`, and every row index is below `u.len() / k`.
#[target_feature(enable = "avx2,fma")]
pub(super) unsafe fn weights(input: &ChunkIn, out: &mut Sums) {
    let ChunkIn { u, rows, k, kp, c } = *input;
    debug_assert!(kp % 4 == 0 && kp >= k && kp < k + 4);
    debug_assert!(c.len() == kp && out.colsum.len() == kp && out.buf.len() >= rows.len() * kp);
    let lse = &mut out.lse;
    let buf = &mut out.buf;
    let full = k / 4;
    let nv = kp / 4;
    let rem = (k % 4) as i64;
    let mask = _mm256_set_epi64x(
        -((rem > 3) as i64),
        -((rem > 2) as i64),
        -((rem > 1) as i64),
        -((rem > 0) as i64),
    );
    let cp = c.as_ptr();
    let cs = out.colsum.as_mut_ptr();
    // Rows go in blocks, one phase at a time over the block (differences and
    // maxima, then exps and sums, then normalisation), so the long exp and sum
    // latencies of one row overlap with the next row's instead of waiting on them.
    let mut mrow = [0.0f64; BLOCK];
    let mut srow = [0.0f64; BLOCK];
    let blocks = rows.chunks(BLOCK);
    let mut ahead = rows.chunks(BLOCK).skip(1);
    for (bi, blk) in blocks.enumerate() {
        let base = buf.as_mut_ptr().add(bi * BLOCK * kp);
        // The next block's rows are fetched while this one computes its exps.
        if let Some(next) = ahead.next() {
            for &r in next {
                let p = u.as_ptr().add(r * k) as *const i8;
                let mut off = 0;
                while off < 8 * k {
                    _mm_prefetch::<_MM_HINT_T0>(p.add(off));
                    off += 64;
                }
                _mm_prefetch::<_MM_HINT_T0>(p.add(8 * k - 1));
            }
        }
        for (i, &r) in blk.iter().enumerate() {
            debug_assert!((r + 1) * k <= u.len());
            let urow = u.as_ptr().add(r * k);
            let out = base.add(i * kp);
            let mut mx = _mm256_set1_pd(f64::NEG_INFINITY);
            for v in 0..full {
                let a = _mm256_sub_pd(
                    _mm256_loadu_pd(cp.add(4 * v)),
                    _mm256_loadu_pd(urow.add(4 * v)),
                );
                _mm256_storeu_pd(out.add(4 * v), a);
                mx = _mm256_max_pd(mx, a);
            }
            if rem > 0 {
                // Masked-off lanes read as 0 and meet c = −∞.
                let tail = _mm256_maskload_pd(urow.add(4 * full), mask);
                let a = _mm256_sub_pd(_mm256_loadu_pd(cp.add(4 * full)), tail);
                _mm256_storeu_pd(out.add(4 * full), a);
                mx = _mm256_max_pd(mx, a);
            }
            mrow[i] = hmax(mx);
        }
        for i in 0..blk.len() {
            let out = base.add(i * kp);
            let mv = _mm256_set1_pd(mrow[i]);
            let mut sv = _mm256_setzero_pd();
            for v in 0..nv {
                let e = exp_nonpos4(_mm256_sub_pd(_mm256_loadu_pd(out.add(4 * v)), mv));
                _mm256_storeu_pd(out.add(4 * v), e);
                sv = _mm256_add_pd(sv, e);
            }
            srow[i] = hsum(sv);
        }
        for i in 0..blk.len() {
            lse.add(mrow[i], srow[i]);
            srow[i] = 1.0 / srow[i];
        }
        for v in 0..nv {
            let mut acc = _mm256_loadu_pd(cs.add(4 * v));
            for (i, inv) in srow.iter().enumerate().take(blk.len()) {
                let o = base.add(i * kp + 4 * v);
                let p = _mm256_mul_pd(_mm256_loadu_pd(o), _mm256_set1_pd(*inv));
                _mm256_storeu_pd(o, p);
                acc = _mm256_add_pd(acc, p);
            }
            _mm256_storeu_pd(cs.add(4 * v), acc);
        }
    }
}
