//! The closed form in f32 written the straightforward way, with `libm`'s
//! `asinf` and `sqrtf`: the baseline. On a Cortex-M4F `libm` has no FPU
//! square root and its arcsine works through software routines, so this
//! costs several hundred instructions (see the firmware example's
//! ISR-COST lines).

use super::{check_f32_parts, round_ticks, F32Parts};
use crate::table::{Fallback, Lookup};
use crate::{AdcCode, Error, Ticks};

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

    /// The delay before rounding, ticks, and whether the point is
    /// ZVS-capable (x <= 1).
    #[inline]
    #[must_use]
    pub fn raw_ticks(&self, vin: AdcCode, io: AdcCode) -> (f32, bool) {
        use core::f32::consts::PI;
        let p = &self.parts;
        let v = f32::from(p.vin.clamp(vin));
        let i = f32::from(p.io.clamp(io).wrapping_sub(p.io_zero));
        let x = p.kx * v / i;
        let zvs = x <= 1.0;
        let angle = if zvs {
            x + PI + libm::asinf(x) + p.position * libm::sqrtf((1.0 - x) * (1.0 + x)) / x
        } else {
            x + 1.5 * PI
        };
        (angle * p.ticks_per_rad - p.lead_ticks, zvs)
    }

    /// The delay to command, rounded to the nearest tick and clamped to the
    /// counter, with the fallback below the ZVS boundary.
    #[inline]
    pub fn delay(&self, vin: AdcCode, io: AdcCode) -> Lookup {
        let (raw, zvs) = self.raw_ticks(vin, io);
        if !zvs {
            if let Fallback::Fixed(t) = self.parts.fallback {
                return Lookup { ticks: t, zvs };
            }
        }
        Lookup {
            ticks: Ticks::new(round_ticks(raw, self.parts.max_ticks)),
            zvs,
        }
    }
}
