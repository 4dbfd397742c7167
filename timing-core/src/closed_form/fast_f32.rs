//! The closed form in f32 with fast approximations: the root by
//! [`rsqrt_f32`], the arcsine by the [`asin_factor_f32`] polynomial, no
//! library call. About 70 instructions on a Cortex-M4F (see the firmware
//! example's ISR-COST lines); every operation is an IEEE single-precision
//! add, multiply or divide, so the host's exhaustive proof of its error
//! holds on the target bit for bit.

use super::{check_f32_parts, f32_delay, F32Parts};
use crate::approx::asin_f32::asin_factor_f32;
use crate::approx::rsqrt_f32::rsqrt_f32;
use crate::table::Lookup;
use crate::{AdcCode, Error};

/// The f32 closed form with fast approximations (validated coefficients).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FastF32 {
    parts: F32Parts,
    /// `ticks_per_rad * 3pi/2 - lead_ticks`: the delay at x = 0 of both branches.
    offset: f32,
}

impl FastF32 {
    /// Validate the coefficients (usable in `const` items).
    ///
    /// # Errors
    /// [`Error::OutOfRange`] for a non-finite or non-positive coefficient,
    /// a position outside 0..=1, or inconsistent code ranges.
    pub const fn from_parts(parts: F32Parts) -> Result<Self, Error> {
        match check_f32_parts(&parts) {
            Ok(()) => Ok(Self {
                parts,
                offset: parts.ticks_per_rad * (1.5 * core::f32::consts::PI) - parts.lead_ticks,
            }),
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
        let p = &self.parts;
        let v = f32::from(p.vin.clamp(vin));
        let i = f32::from(p.io.clamp(io).wrapping_sub(p.io_zero));
        let kv = p.kx * v;
        let x = kv / i;
        let base = x * p.ticks_per_rad + self.offset;
        if x <= 1.0 {
            let t = 1.0 - x;
            let u = 1.0 + x;
            // sqrt(1 - x) and sqrt(1 + x), in ticks per radian for the root.
            let a = p.ticks_per_rad * (t * rsqrt_f32(t));
            let q = u * rsqrt_f32(u);
            let j = i / kv;
            let open = base - a * asin_factor_f32(x);
            let width = a * q * j;
            (open + p.position * width, Some((open, open + width)))
        } else {
            (base, None)
        }
    }

    /// The delay before rounding, ticks, and whether the point is
    /// ZVS-capable (x <= 1). Never panics; no NaN for any codes (they are
    /// clamped to the design range, where the current is above the sensor
    /// zero).
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
