//! `sqrt(1 + x)` on [0, 1] in f32: a degree-5 polynomial fitted (least
//! squares at 4000 Chebyshev nodes; fit error 1.44e-6 in f64), Horner in
//! f32. [`SQRT1P_F32_MAX_ERROR`] is checked against f64 `sqrt` at every
//! f32 in [0, 1] by the `sqrt1p_f32_exhaustive` test.

/// Coefficients, lowest order first.
pub const SQRT1P_F32: [f32; 6] = [
    1.000_001_4,
    0.499_889_97,
    -0.123_606_116,
    0.055_735_18,
    -0.022_775_153,
    0.004_969_328,
];

/// Largest absolute error of [`sqrt1p_f32`] on [0, 1].
pub const SQRT1P_F32_MAX_ERROR: f64 = 1.6e-6;

/// `sqrt(1 + x)` for `0 <= x <= 1` within [`SQRT1P_F32_MAX_ERROR`] (Horner,
/// five multiply-adds; no square-root instruction, never panics).
#[inline]
#[must_use]
pub fn sqrt1p_f32(x: f32) -> f32 {
    let [c0, c1, c2, c3, c4, c5] = SQRT1P_F32;
    ((((c5 * x + c4) * x + c3) * x + c2) * x + c1) * x + c0
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sqrt1p_f32_exhaustive() {
        let mut worst = (0.0f64, 0.0f32);
        for b in 0..=1.0f32.to_bits() {
            let x = f32::from_bits(b);
            let e = (f64::from(sqrt1p_f32(x)) - (1.0 + f64::from(x)).sqrt()).abs();
            if e > worst.0 {
                worst = (e, x);
            }
        }
        println!("sqrt1p_f32: worst error {:.3e} at x = {}", worst.0, worst.1);
        assert!(worst.0 <= SQRT1P_F32_MAX_ERROR, "{worst:?}");
    }
}
