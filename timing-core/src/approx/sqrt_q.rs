//! Square root of a Q24 fixed-point number in [0, 1], without division.
//!
//! Method: normalise `t` by an even power of two into [1/4, 1), seed the
//! reciprocal root with the line `2.13 - 1.215 t` (relative error 8.7 %),
//! two Newton steps `y <- y * (3 - t*y^2) / 2` (1.1e-2, then 1.9e-4) in
//! Q14, and `sqrt(t) = t * y` shifted back: an absolute error of about 2.4e-4,
//! which is what the turn-on angle needs (the root multiplies terms of
//! order one). [`SQRT_Q24_MAX_ERROR`] is
//! checked at every input 0..2^24 by the `sqrt_q24_exhaustive` test
//! (measured 7.7, i.e. 2.4e-4).

use crate::table::log2::floor_log2;

/// Largest absolute error of [`sqrt_q24`] over 0 <= t < 2^24, in units of
/// the result (2^-15).
pub const SQRT_Q24_MAX_ERROR: f64 = 8.0;

/// `sqrt(t / 2^24) * 2^15` (Q24 in, Q15 out) for `0 <= t < 2^24`, within
/// [`SQRT_Q24_MAX_ERROR`] units of 2^-15. Larger `t` give a meaningless but
/// finite result; never panics. Seven multiplications.
#[inline]
#[must_use]
pub const fn sqrt_q24(t: u32) -> u32 {
    if t == 0 {
        return 0;
    }
    let k = floor_log2(t) >> 1;
    // tn = t * 2^(14 - 2k), in [2^14, 2^16): up by 22 - 2k (at least 0 for
    // t < 2^24), down by 8.
    let tn = t.wrapping_shl(22u32.wrapping_sub(k.wrapping_mul(2))) >> 8;
    // 1/sqrt(tn/2^16) in Q14.
    let y = 34_898u32.wrapping_sub(tn.wrapping_mul(19_907) >> 16);
    let y = rsqrt_step(y, tn);
    let y = rsqrt_step(y, tn);
    tn.wrapping_mul(y).wrapping_shr(26u32.wrapping_sub(k))
}

/// One Newton step `y * (3 - t*y^2) / 2` for 1/sqrt(tn/2^16), y in Q14.
#[inline(always)]
const fn rsqrt_step(y: u32, tn: u32) -> u32 {
    let w = ((y.wrapping_mul(y) >> 14).wrapping_mul(tn)) >> 16;
    y.wrapping_mul(49_152u32.wrapping_sub(w)) >> 15
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
