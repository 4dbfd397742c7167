//! The `libm-f32` closed form with `micromath`'s f32 approximations
//! (feature `micromath`): the ideal cell's formula on one
//! constant-capacitance stand-in, for cores where a small, fast f32
//! library is preferred to `libm`. The formula is `LibmF32`'s, written
//! once; only `asin` and `sqrt` differ.
//!
//! `micromath`'s `sqrt` is one integer add and shift of the float's bits
//! (no Newton step) and its `asin(x)` is `atan(x / sqrt(1 - x^2))`
//! through its bit-seeded inverse square root and a rational arctangent.
//! On (0, 1]: `asin` within [`ASIN_MAX_ERROR_RAD`] (0.018 rad; libm's
//! `asinf`: 6e-8) and `sqrt` within [`SQRT_MAX_RELATIVE_ERROR`] (6.1 %;
//! libm's `sqrtf`: correctly rounded). So the window's opening angle
//! errs by up to 0.018 rad and its width `sqrt(1 - x^2)/x` by up to
//! 6.1 %: the turn-on angle by up to `0.018 + 0.061 * position * width`
//! rad, times the ticks per radian (`f_clk / w0`) in ticks, on top of the
//! stand-in's own error. `zvs-timing verify DESIGN.toml --method
//! micromath-f32` proves the commanded error at every code pair of a
//! design; docs/methods.md has the demo's figures beside the other
//! methods'.
//!
//! ```
//! # fn main() -> Result<(), timing_core::Error> {
//! use timing_core::closed_form::{ClosedForm, CodeScaling};
//! use timing_core::table::Fallback;
//! use timing_core::{AdcCode, CodeRange, Tank, Timer, WindowPosition};
//! let scaling = CodeScaling {
//!     vin: CodeRange { lo: 2237, hi: 3726 }, io: CodeRange { lo: 205, hi: 2049 },
//!     io_zero: 0, vin_volts_per_code: 0.0161, io_amps_per_code: 0.00488,
//! };
//! let cf = ClosedForm::new(
//!     &Tank::new(1.0e-6, 6.8e-9)?, &Timer::new(170.0e6, 16, 25.0e-9, 0.0)?,
//!     WindowPosition::new(0.25)?, scaling, Fallback::Valley,
//! )?;
//! let micro = cf.micromath_f32()?;
//! let libm = cf.libm_f32()?;
//! let (vin, io) = (AdcCode::new(2981), AdcCode::new(1229)); // 48 V, 6 A
//! let d = micro.delay(vin, io);
//! assert!(d.zvs && (60..90).contains(&d.ticks.get()));
//! // Within a tick or two of libm's at this point.
//! assert!(d.ticks.get().abs_diff(libm.delay(vin, io).ticks.get()) <= 2);
//! # Ok(()) }
//! ```

use super::libm_f32::{sealed::Sealed, AsinSqrt, StandInF32};

/// Largest error of `micromath`'s `asin` on (0, 1], radians (measured
/// 0.01798 at x = 0.594 by `asin_and_sqrt_within_their_bounds`).
pub const ASIN_MAX_ERROR_RAD: f64 = 0.0180;

/// Largest relative error of `micromath`'s `sqrt` on (0, 1] (measured
/// 0.06066 by `asin_and_sqrt_within_their_bounds`; the shift's error
/// repeats every factor of four).
pub const SQRT_MAX_RELATIVE_ERROR: f64 = 0.0607;

/// `micromath`'s `asin` and `sqrt`, called through the trait: where `std`
/// is linked (the host's proofs) its inherent `f32::sqrt` would otherwise
/// shadow `micromath`'s and the host would check other arithmetic than the
/// firmware runs.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Micromath {}

impl Sealed for Micromath {}

impl AsinSqrt for Micromath {
    #[inline]
    fn asin(x: f32) -> f32 {
        micromath::F32Ext::asin(x)
    }
    #[inline]
    fn sqrt(x: f32) -> f32 {
        micromath::F32Ext::sqrt(x)
    }
}

/// The f32 closed form with `micromath` (validated coefficients).
pub type MicromathF32 = StandInF32<Micromath>;

#[cfg(test)]
mod tests {
    use super::*;
    use crate::closed_form::{F32Parts, LibmF32};
    use crate::table::Fallback;
    use crate::AdcCode;
    use crate::CodeRange;

    /// Coefficients that make the delay the turn-on angle itself (one tick
    /// a radian, no lead) at `x = vin_code / 2^12` (current code 1, exact
    /// in f32), over `x` in (0, 2].
    fn unit_parts(position: f32) -> F32Parts {
        F32Parts {
            vin: CodeRange { lo: 1, hi: 8192 },
            io: CodeRange { lo: 1, hi: 1 },
            io_zero: 0,
            kx: 1.0 / 4096.0,
            ticks_per_rad: 1.0,
            lead_ticks: 0.0,
            position,
            max_ticks: u32::MAX,
            fallback: Fallback::Valley,
        }
    }

    /// Against the ideal cell's turn-on angle in f64,
    /// `normalized::turn_on_angle` (DESIGN.md section 2: gate turn-off to
    /// `1/J + pi + asin(1/J) + position * sqrt(J^2 - 1)` for J >= 1, the
    /// valley `1/J + 3pi/2` below), at every `x = 1/J` of the sweep: within
    /// [`ASIN_MAX_ERROR_RAD`] plus [`SQRT_MAX_RELATIVE_ERROR`] of the
    /// position's share of the window, and libm's figure no worse than
    /// f32 rounding.
    #[test]
    fn follows_the_f64_turn_on_angle() {
        let mut worst = [0.0f64; 2];
        for position in [0.0f32, 0.25, 0.5, 1.0] {
            let mm = MicromathF32::from_parts(unit_parts(position)).unwrap();
            let lm = LibmF32::from_parts(unit_parts(position)).unwrap();
            for v in 1..=8192u16 {
                let (vin, io) = (AdcCode::new(v), AdcCode::new(1));
                let x = f64::from(v) / 4096.0;
                let exact = crate::normalized::turn_on_angle(1.0 / x, f64::from(position));
                let width = if x < 1.0 {
                    (1.0 - x * x).sqrt() / x
                } else {
                    0.0
                };
                let (got, zvs) = mm.raw_ticks(vin, io);
                assert_eq!(zvs, x <= 1.0, "x = {x}");
                let err = (f64::from(got) - exact).abs();
                let bound = ASIN_MAX_ERROR_RAD
                    + SQRT_MAX_RELATIVE_ERROR * f64::from(position) * width
                    + 1e-6 * exact;
                assert!(err <= bound, "x = {x}, p = {position}: {err} > {bound}");
                worst[0] = worst[0].max(err);
                let err = (f64::from(lm.raw_ticks(vin, io).0) - exact).abs();
                assert!(err <= 1e-6 * exact, "libm at x = {x}: {err}");
                worst[1] = worst[1].max(err);
            }
        }
        println!(
            "turn-on angle vs f64: micromath-f32 worst {:.4} rad, libm-f32 worst {:.1e} rad",
            worst[0], worst[1]
        );
    }

    /// The two bounds, measured at every 7th f32 in [2^-31, 1] (asin
    /// against libm's f64 `asin`, sqrt against its f64 `sqrt`).
    #[test]
    fn asin_and_sqrt_within_their_bounds() {
        let (mut asin, mut sqrt) = (0.0f64, 0.0f64);
        let mut b = 0x3000_0000u32;
        while b <= 1.0f32.to_bits() {
            let x = f32::from_bits(b);
            let r = libm::asin(f64::from(x));
            asin = asin.max((f64::from(Micromath::asin(x)) - r).abs());
            let r = libm::sqrt(f64::from(x));
            sqrt = sqrt.max(((f64::from(Micromath::sqrt(x)) - r) / r).abs());
            b += 7;
        }
        println!("micromath on (0, 1]: asin within {asin:.4} rad, sqrt within {sqrt:.4} relative");
        assert!(asin <= ASIN_MAX_ERROR_RAD && sqrt <= SQRT_MAX_RELATIVE_ERROR);
    }

    /// Any codes, any counter: a finite delay, clamped, never a panic.
    #[test]
    fn every_code_gives_a_clamped_delay() {
        let mut p = unit_parts(0.25);
        p.ticks_per_rad = 40.0;
        p.lead_ticks = 3.0;
        p.max_ticks = 200;
        p.io = CodeRange { lo: 1, hi: 4095 };
        let m = MicromathF32::from_parts(p).unwrap();
        for v in (0..=u16::MAX).step_by(7) {
            for i in [0u16, 1, 2, 17, 300, 4095, u16::MAX] {
                let (raw, _) = m.raw_ticks(AdcCode::new(v), AdcCode::new(i));
                assert!(raw.is_finite(), "({v}, {i})");
                assert!(m.delay(AdcCode::new(v), AdcCode::new(i)).ticks.get() <= 200);
            }
        }
    }
}
