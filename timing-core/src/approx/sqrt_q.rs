//! Square root of a Q24 fixed-point number in [0, 1], without division.
//!
//! Method: normalise `t` by an even power of two to `tn / 2^16` in
//! [1/4, 1), read the reciprocal root's seed from a table on `tn`'s top
//! bits (the value that balances the relative error at the ends of its
//! interval: at most 0.8 %), take one Newton step
//! `y <- y * (3 - t*y^2) / 2` in Q14 (1.0e-4 with the truncations), and
//! `sqrt(t) = t * y` shifted back: an absolute error of about 1e-4, which
//! is what the turn-on angle needs (the root multiplies terms of order
//! one). [`SQRT_Q24_MAX_ERROR`] is checked at every input 0..2^24 by the
//! `sqrt_q24_exhaustive` test. 256 bytes of table, four multiplications.

use crate::table::log2::floor_log2;

/// Largest absolute error of [`sqrt_q24`] over 0 <= t < 2^24, in units of
/// the result (2^-15).
pub const SQRT_Q24_MAX_ERROR: f64 = 4.0;

/// Integer square root of a `u64` (for the table; const, host only).
const fn isqrt(v: u64) -> u64 {
    let mut r = 0u64;
    let mut bit = 1u64 << 62;
    let mut v = v;
    while bit > v {
        bit >>= 2;
    }
    while bit != 0 {
        if v >= r + bit {
            v -= r + bit;
            r = (r >> 1) + bit;
        } else {
            r >>= 1;
        }
        bit >>= 2;
    }
    r
}

/// The seeds, Q14 (public for code generators, e.g. the C export): `2 / (sqrt(t_lo) + sqrt(t_hi))` for the interval
/// `[k, k + 1) * 2^-7` of `t = tn / 2^16`; entries below 32 (t under 1/4,
/// which normalisation never gives but `t = 0` reaches) repeat entry 32.
#[allow(clippy::indexing_slicing)]
pub const SQRT_Q24_SEED: [u16; 128] = {
    let mut t = [0u16; 128];
    let mut k = 0;
    while k < 128 {
        let j = if k < 32 { 32 } else { k as u64 };
        // sqrt(512 j / 2^16) * 2^16 = sqrt(512 j * 2^16).
        let lo = isqrt((512 * j) << 16);
        let hi = isqrt((512 * (j + 1)) << 16);
        t[k] = (((1u64 << 31) + (lo + hi) / 2) / (lo + hi)) as u16;
        k += 1;
    }
    t
};

/// `sqrt(t / 2^24) * 2^15` (Q24 in, Q15 out) for `0 <= t < 2^24`, within
/// [`SQRT_Q24_MAX_ERROR`] units of 2^-15. Larger `t` give a meaningless but
/// finite result; never panics.
#[inline]
#[must_use]
pub const fn sqrt_q24(t: u32) -> u32 {
    let k = floor_log2(t) >> 1;
    // tn = t * 2^(14 - 2k), in [2^14, 2^16) (0 for t = 0): up by 22 - 2k
    // (at least 0 for t < 2^24), down by 8.
    let tn = t.wrapping_shl(22u32.wrapping_sub(k.wrapping_mul(2))) >> 8;
    // 1/sqrt(tn/2^16) in Q14: the seed (the mask keeps the index in the
    // table) and one step.
    #[allow(clippy::indexing_slicing)]
    let y = SQRT_Q24_SEED[((tn >> 9) & 127) as usize] as u32;
    let w = ((y.wrapping_mul(y) >> 14).wrapping_mul(tn)) >> 16;
    let y = y.wrapping_mul(49_152u32.wrapping_sub(w)) >> 15;
    tn.wrapping_mul(y).wrapping_shr(26u32.wrapping_sub(k))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sqrt_q24_exhaustive() {
        let mut worst = (0.0f64, 0u32);
        for t in 0..(1u32 << 24) {
            let exact = (f64::from(t) / 16_777_216.0).sqrt() * 32768.0;
            let e = (f64::from(sqrt_q24(t)) - exact).abs();
            if e > worst.0 {
                worst = (e, t);
            }
        }
        println!(
            "sqrt_q24: worst error {:.3} units of 2^-15 at t = {}",
            worst.0, worst.1
        );
        assert!(worst.0 <= SQRT_Q24_MAX_ERROR, "{worst:?}");
    }
}
