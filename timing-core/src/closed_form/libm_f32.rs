//! The closed form in f32 written the straightforward way, with `libm`'s
//! `asinf` and `sqrtf`: the baseline. On a Cortex-M4F `libm` has no FPU
//! square root and its arcsine works through software routines, so this
//! costs several hundred instructions (see the firmware example's
//! ISR-COST lines).

use super::{check_f32_parts, f32_delay, F32Parts};
use crate::table::Lookup;
use crate::{AdcCode, Error};

/// The f32 closed form with libm (validated coefficients).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LibmF32 {
    parts: F32Parts,
}

impl LibmF32 {
    /// Validate the coefficients (usable in `const` items).
    ///
    /// # Errors
    /// As [`FastF32::from_parts`](super::FastF32::from_parts).
    pub const fn from_parts(parts: F32Parts) -> Result<Self, Error> {
        match check_f32_parts(&parts) {
            Ok(()) => Ok(Self { parts }),
            Err(e) => Err(e),
        }
    }

    /// The coefficients.
    #[must_use]
    pub const fn parts(&self) -> &F32Parts {
        &self.parts
    }

    /// The target delay before rounding and, where ZVS is possible, the
    /// window's opening and closing delays, ticks.
    #[inline]
    fn eval(&self, vin: AdcCode, io: AdcCode) -> (f32, Option<(f32, f32)>) {
        use core::f32::consts::PI;
        let p = &self.parts;
        let v = f32::from(p.vin.clamp(vin));
        let i = f32::from(p.io.clamp(io).wrapping_sub(p.io_zero));
        let x = p.kx * v / i;
        let ticks = |angle: f32| angle * p.ticks_per_rad - p.lead_ticks;
        if x <= 1.0 {
            let open = x + PI + libm::asinf(x);
            let width = libm::sqrtf((1.0 - x) * (1.0 + x)) / x;
            (
                ticks(open + p.position * width),
                Some((ticks(open), ticks(open + width))),
            )
        } else {
            (ticks(x + 1.5 * PI), None)
        }
    }

    /// The delay before rounding, ticks, and whether the point is
    /// ZVS-capable (x <= 1).
    #[inline]
    #[must_use]
    pub fn raw_ticks(&self, vin: AdcCode, io: AdcCode) -> (f32, bool) {
        let (t, w) = self.eval(vin, io);
        (t, w.is_some())
    }

    /// The delay to command: the nearest tick inside the window (or, where
    /// none is, the nearest), clamped to the counter, with the fallback
    /// below the ZVS boundary.
    #[inline]
    pub fn delay(&self, vin: AdcCode, io: AdcCode) -> Lookup {
        let (target, window) = self.eval(vin, io);
        f32_delay(&self.parts, target, window)
    }
}
