//! The arcsine factor `P(x) = (pi/2 - asin(x)) / sqrt(1 - x)` on [0, 1] in
//! fixed point (see [`asin_f32`](super::asin_f32) for the form and the fit).
//!
//! Horner in signed 32-bit integers: `x` in Q16, the tail `c1 + c2 x + ...`
//! in Q17 (every partial sum stays below 2^15 in magnitude, so each product
//! with x fits 31 bits), the constant term added last. The error against
//! the exact factor, [`ASIN_FACTOR_Q17_MAX_ERROR`], is checked at every
//! input 0..=2^16 by the `asin_factor_q17_exhaustive` test (measured 4.2).

/// round(2^17 * c_k) of a degree-4 fit (least squares at 4000 Chebyshev
/// nodes; fit error 9.6e-6 rad, one degree fewer than the f32 version: the
/// fixed-point method spends its instructions elsewhere), lowest order
/// first.
pub const ASIN_FACTOR_Q17: [i32; 5] = [205_888, -28_060, 11_074, -4_649, 1_115];

/// Largest absolute error of [`asin_factor_q17`] against
/// `(pi/2 - asin(x)) / sqrt(1 - x)`, in units of 2^-17.
pub const ASIN_FACTOR_Q17_MAX_ERROR: f64 = 5.5;

/// `P(x) * 2^17` for `x = x_q16 / 2^16`, `0 <= x_q16 <= 2^16`, within
/// [`ASIN_FACTOR_Q17_MAX_ERROR`]. Four multiplications; never panics.
#[inline]
#[must_use]
pub const fn asin_factor_q17(x_q16: u32) -> u32 {
    let x = x_q16 as i32;
    let [c0, c1, c2, c3, c4] = ASIN_FACTOR_Q17;
    let mut acc = c4;
    acc = c3.wrapping_add(acc.wrapping_mul(x) >> 16);
    acc = c2.wrapping_add(acc.wrapping_mul(x) >> 16);
    acc = c1.wrapping_add(acc.wrapping_mul(x) >> 16);
    c0.wrapping_add(acc.wrapping_mul(x) >> 16) as u32
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn asin_factor_q17_exhaustive() {
        let mut worst = (0.0f64, 0u32);
        for xq in 0..=(1u32 << 16) {
            let x = f64::from(xq) / 65536.0;
            let exact = if xq == 1 << 16 {
                // The limit at x = 1: 2^(1/2).
                core::f64::consts::SQRT_2
            } else {
                (core::f64::consts::FRAC_PI_2 - x.asin()) / (1.0 - x).sqrt()
            };
            let e = (f64::from(asin_factor_q17(xq)) - exact * 131_072.0).abs();
            if e > worst.0 {
                worst = (e, xq);
            }
        }
        println!(
            "asin_factor_q17: worst error {:.2} units of 2^-17 at x = {}/2^16",
            worst.0, worst.1
        );
        assert!(worst.0 <= ASIN_FACTOR_Q17_MAX_ERROR, "{worst:?}");
    }
}
