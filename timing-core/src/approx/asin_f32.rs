//! Arcsine on [0, 1] in f32 in the form `pi/2 - sqrt(1 - x) * P(x)`, which
//! keeps the square-root behaviour at x = 1 exact.
//!
//! `P` is a degree-5 polynomial fitted (least squares at 4000 Chebyshev
//! nodes) to `(pi/2 - asin(x)) / sqrt(1 - x)`; the form is the classical
//! one of Abramowitz and Stegun 4.4.45/4.4.46 (coefficients are ours).
//! Error of the polynomial in f64: 1.3e-6 rad; with f32 arithmetic and
//! [`rsqrt_f32`](super::rsqrt_f32::rsqrt_f32) for the root,
//! [`ASIN_F32_MAX_ERROR`] is checked against libm's f64 `asin` at every
//! f32 in [0, 1] by the `asin_f32_exhaustive` test (measured 8.3e-6 near
//! x = 0, where the root's 4.7e-6 relative error meets P(0) = 1.57).

use super::rsqrt_f32::rsqrt_f32;

/// Coefficients of `P`, lowest order first.
pub const ASIN_FACTOR: [f32; 6] = [
    1.570_795,
    -0.214_504_55,
    0.087_813_92,
    -0.044_784_51,
    0.019_150_963,
    -0.004_258_281,
];

/// Largest absolute error of [`asin_f32`] on [0, 1], radians.
pub const ASIN_F32_MAX_ERROR: f64 = 9.0e-6;

/// `P(x) = (pi/2 - asin(x)) / sqrt(1 - x)` for `0 <= x <= 1` (Horner,
/// five multiply-adds).
#[inline]
#[must_use]
pub fn asin_factor_f32(x: f32) -> f32 {
    let [c0, c1, c2, c3, c4, c5] = ASIN_FACTOR;
    ((((c5 * x + c4) * x + c3) * x + c2) * x + c1) * x + c0
}

/// asin(x) for `0 <= x <= 1` within [`ASIN_F32_MAX_ERROR`] radians.
#[inline]
#[must_use]
pub fn asin_f32(x: f32) -> f32 {
    let t = 1.0 - x;
    core::f32::consts::FRAC_PI_2 - t * rsqrt_f32(t) * asin_factor_f32(x)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn asin_f32_exhaustive() {
        let mut worst = (0.0f64, 0.0f32);
        for b in 0..=1.0f32.to_bits() {
            let x = f32::from_bits(b);
            let e = (f64::from(asin_f32(x)) - libm::asin(f64::from(x))).abs();
            if e > worst.0 {
                worst = (e, x);
            }
        }
        println!(
            "asin_f32: worst error {:.3e} rad at x = {}",
            worst.0, worst.1
        );
        assert!(worst.0 <= ASIN_F32_MAX_ERROR, "{worst:?}");
    }
}
