//! Reciprocal of an integer in fixed point, without division.
//!
//! Method: normalise `n` to `m = n * 2^(15 - e)` in [2^15, 2^16) (`e` the
//! floor(log2) of the table module, no leading-zero instruction), read a
//! seed from a 64-entry table on `m`'s top bits (the value that balances
//! the relative error at the ends of its interval: at most 0.78 %), and
//! take one Newton step `y <- y * (2 - m*y)` in Q15 (the error squared,
//! 6.1e-5, and the Q15 truncations). [`RECIP_Q15_MAX_ERROR`] is checked at
//! every `n` in 1..2^24 by the `recip_q15_exhaustive` test (measured
//! 9.3e-5). 128 bytes of table, two multiplications.

use crate::table::log2::floor_log2;

/// Largest relative error of [`recip_q15`] over 1 <= n < 2^24.
pub const RECIP_Q15_MAX_ERROR: f64 = 1.0e-4;

/// The seeds (public for code generators, e.g. the C export): `2^32 / (2 m_lo + 512)` for the interval `[m_lo, m_lo + 512)`
/// of `m`, `m_lo = (64 + k) * 512`, all in (2^15, 2^16).
#[allow(clippy::indexing_slicing)]
pub const RECIP_Q15_SEED: [u16; 64] = {
    let mut t = [0u16; 64];
    let mut k = 0;
    while k < 64 {
        let m_lo = (64 + k as u64) * 512;
        t[k] = ((1u64 << 32) / (2 * m_lo + 512)) as u16;
        k += 1;
    }
    t
};

/// `(y, s)` with `1/n ~= y / 2^s`, `y` in (2^15, 2^16) and
/// `s = 16 + floor(log2 n)`, within [`RECIP_Q15_MAX_ERROR`] (relative) for
/// `1 <= n < 2^24` (above 2^16, `n` is first cut to its top 16 bits).
/// `n = 0` gives a meaningless but finite result; never panics.
#[inline]
#[must_use]
pub const fn recip_q15(n: u32) -> (u32, u32) {
    recip_q15_at(n, floor_log2(n))
}

/// [`recip_q15`] with `e = floor(log2 n)` given by the caller (who may know
/// a cheaper way to find it); a wrong `e` gives a meaningless but finite
/// result.
#[inline]
#[must_use]
pub const fn recip_q15_at(n: u32, e: u32) -> (u32, u32) {
    let m = if e <= 15 {
        n.wrapping_shl(15u32.wrapping_sub(e))
    } else {
        n.wrapping_shr(e.wrapping_sub(15))
    };
    recip_q15_normalised(m, e)
}

/// [`recip_q15`] of `m * 2^(e - 15)` for a caller who has normalised it:
/// `m` in [2^15, 2^16) and `e` its exponent; `(y, 16 + e)`.
#[inline]
#[must_use]
pub const fn recip_q15_normalised(m: u32, e: u32) -> (u32, u32) {
    // The mask keeps the index in the table (and makes that visible to the
    // compiler); for m in [2^15, 2^16) it is m's interval.
    #[allow(clippy::indexing_slicing)]
    let y = RECIP_Q15_SEED[((m >> 9) & 63) as usize] as u32;
    // (2 - m*y) in Q15: m*y is 2^31 (1 - error) and below 2^32.
    let d = 0u32.wrapping_sub(m.wrapping_mul(y)) >> 16;
    (y.wrapping_mul(d) >> 15, e.wrapping_add(16))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn recip_q15_exhaustive() {
        let mut worst = (0.0f64, 0u32);
        for n in 1..(1u32 << 24) {
            let (y, s) = recip_q15(n);
            let got = f64::from(y) / 2f64.powi(s as i32);
            let e = (got * f64::from(n) - 1.0).abs();
            if e > worst.0 {
                worst = (e, n);
            }
        }
        println!(
            "recip_q15: worst relative error {:.3e} at n = {}",
            worst.0, worst.1
        );
        assert!(worst.0 <= RECIP_Q15_MAX_ERROR, "{worst:?}");
    }
}
