//! The closed form in f32 written the straightforward way, with `libm`'s
//! `asinf` and `sqrtf`: the baseline. On a Cortex-M4F `libm` has no FPU
//! square root and its arcsine works through software routines, so this
//! costs several hundred instructions (see the firmware example's
//! ISR-COST lines).
//!
//! The formula is written once ([`StandInF32`]), generic over the two
//! functions it needs ([`AsinSqrt`]); `MicromathF32` (feature `micromath`)
//! runs the same formula with `micromath`'s approximations.

use core::marker::PhantomData;

use super::{check_f32_parts, f32_delay, F32Parts};
use crate::table::Lookup;
use crate::{AdcCode, Error};

/// The two f32 functions the straightforward closed form needs: the math
/// library a [`StandInF32`] runs on ([`Libm`], or `micromath`'s with the
/// feature `micromath`). Sealed.
pub trait AsinSqrt: sealed::Sealed {
    /// `asin(x)`, radians, for `0 < x <= 1`.
    fn asin(x: f32) -> f32;
    /// `sqrt(x)` for `0 <= x <= 1`.
    fn sqrt(x: f32) -> f32;
}

pub(crate) mod sealed {
    pub trait Sealed {}
}

/// `libm`'s `asinf` (within 1 ulp) and `sqrtf` (correctly rounded).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Libm {}

impl sealed::Sealed for Libm {}

impl AsinSqrt for Libm {
    #[inline]
    fn asin(x: f32) -> f32 {
        libm::asinf(x)
    }
    #[inline]
    fn sqrt(x: f32) -> f32 {
        libm::sqrtf(x)
    }
}

/// The ideal cell's closed form at the codes with one constant-capacitance
/// stand-in (`p`): the target delay before rounding and, where ZVS is
/// possible (`x = 1/J <= 1`), the window's opening and closing delays,
/// ticks. With `x = kx * vin / (io - io_zero)` the turn-on angle is
/// `x + pi + asin(x) + position * sqrt(1 - x^2) / x` in the ZVS branch and
/// `x + 3pi/2` (the valley) beyond it.
#[inline]
pub(crate) fn eval_with<M: AsinSqrt>(
    p: &F32Parts,
    vin: AdcCode,
    io: AdcCode,
) -> (f32, Option<(f32, f32)>) {
    use core::f32::consts::PI;
    let v = f32::from(p.vin.clamp(vin));
    let i = f32::from(p.io.clamp(io).wrapping_sub(p.io_zero));
    let x = p.kx * v / i;
    let ticks = |angle: f32| angle * p.ticks_per_rad - p.lead_ticks;
    if x <= 1.0 {
        let open = x + PI + M::asin(x);
        let width = M::sqrt((1.0 - x) * (1.0 + x)) / x;
        (
            ticks(open + p.position * width),
            Some((ticks(open), ticks(open + width))),
        )
    } else {
        (ticks(x + 1.5 * PI), None)
    }
}

/// The straightforward f32 closed form on one stand-in with the math
/// library `M` (validated coefficients): [`LibmF32`], and `MicromathF32`
/// with the feature `micromath`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StandInF32<M> {
    parts: F32Parts,
    math: PhantomData<M>,
}

/// The f32 closed form with libm: the baseline.
pub type LibmF32 = StandInF32<Libm>;

#[cfg(feature = "defmt")]
impl<M> defmt::Format for StandInF32<M> {
    fn format(&self, f: defmt::Formatter<'_>) {
        defmt::write!(f, "StandInF32 {{ parts: {} }}", self.parts);
    }
}

impl<M: AsinSqrt> StandInF32<M> {
    /// Validate the coefficients (usable in `const` items).
    ///
    /// # Errors
    /// As [`FastF32::from_parts`](super::FastF32::from_parts).
    pub const fn from_parts(parts: F32Parts) -> Result<Self, Error> {
        match check_f32_parts(&parts) {
            Ok(()) => Ok(Self {
                parts,
                math: PhantomData,
            }),
            Err(e) => Err(e),
        }
    }

    /// The coefficients.
    #[must_use]
    pub const fn parts(&self) -> &F32Parts {
        &self.parts
    }

    /// The delay before rounding, ticks, and whether the point is
    /// ZVS-capable (x <= 1).
    #[inline]
    #[must_use]
    pub fn raw_ticks(&self, vin: AdcCode, io: AdcCode) -> (f32, bool) {
        let (t, w) = eval_with::<M>(&self.parts, vin, io);
        (t, w.is_some())
    }

    /// The delay to command: the nearest tick inside the window (or, where
    /// none is, the nearest), clamped to the counter, with the fallback
    /// below the ZVS boundary.
    #[inline]
    pub fn delay(&self, vin: AdcCode, io: AdcCode) -> Lookup {
        let (target, window) = eval_with::<M>(&self.parts, vin, io);
        f32_delay(&self.parts, target, window)
    }
}
