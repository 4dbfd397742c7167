//! `sqrt(1 + x)` on [0, 1] in fixed point: a degree-5 polynomial fitted
//! (least squares at 4000 Chebyshev nodes; fit error 1.4e-6, 4.3 units of
//! 2^-16 measured with the rounding), Horner in
//! signed 32-bit integers with `x` in Q16 and the tail in Q16.
//! [`SQRT1P_Q16_MAX_ERROR`] is checked at every input 0..=2^16 by the
//! `sqrt1p_q16_exhaustive` test.

/// round(2^16 * c_k) of the fit, lowest order first.
pub const SQRT1P_Q16: [i32; 6] = [65_536, 32_761, -8_101, 3_653, -1_493, 326];

/// Largest absolute error of [`sqrt1p_q16`], in units of 2^-16.
pub const SQRT1P_Q16_MAX_ERROR: f64 = 4.5;

/// `sqrt(1 + x) * 2^16` for `x = x_q16 / 2^16`, `0 <= x_q16 <= 2^16`, within
/// [`SQRT1P_Q16_MAX_ERROR`]. Five multiplications; never panics.
#[inline]
#[must_use]
pub const fn sqrt1p_q16(x_q16: u32) -> u32 {
    let x = x_q16 as i32;
    let [c0, c1, c2, c3, c4, c5] = SQRT1P_Q16;
    let mut acc = c5;
    acc = c4.wrapping_add(acc.wrapping_mul(x) >> 16);
    acc = c3.wrapping_add(acc.wrapping_mul(x) >> 16);
    acc = c2.wrapping_add(acc.wrapping_mul(x) >> 16);
    acc = c1.wrapping_add(acc.wrapping_mul(x) >> 16);
    c0.wrapping_add(acc.wrapping_mul(x) >> 16) as u32
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sqrt1p_q16_exhaustive() {
        let mut worst = (0.0f64, 0u32);
        for xq in 0..=(1u32 << 16) {
            let exact = (1.0 + f64::from(xq) / 65536.0).sqrt() * 65536.0;
            let e = (f64::from(sqrt1p_q16(xq)) - exact).abs();
            if e > worst.0 {
                worst = (e, xq);
            }
        }
        println!(
            "sqrt1p_q16: worst error {:.2} units of 2^-16 at x = {}/2^16",
            worst.0, worst.1
        );
        assert!(worst.0 <= SQRT1P_Q16_MAX_ERROR, "{worst:?}");
    }
}
