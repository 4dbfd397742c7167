//! The closed form in f32 with fast approximations, piece by piece
//! ([`PiecewiseParts`]): the root by [`rsqrt_f32`], the arcsine by the
//! [`asin_factor_f32`] polynomial, no library call. Every operation is an
//! IEEE single-precision add, multiply or divide (two divides), so the
//! host's exhaustive proof of its error holds on the target bit for bit;
//! the firmware example's ISR-COST lines give its cost.

use super::pieces::{Piece, PiecewiseParts};
use super::round_ticks;
use crate::approx::asin_f32::asin_factor_f32;
use crate::approx::rsqrt_f32::rsqrt_f32;
use crate::table::{Fallback, Lookup};
use crate::{AdcCode, Error, Ticks};

/// The f32 closed form with fast approximations (validated coefficients).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FastF32<'a> {
    parts: PiecewiseParts<'a>,
    /// Half a band, codes: the band's centre from its first code.
    half_band: i32,
}

impl<'a> FastF32<'a> {
    /// Validate the coefficients (usable in `const` items).
    ///
    /// # Errors
    /// As [`PiecewiseParts::check`].
    pub const fn from_parts(parts: PiecewiseParts<'a>) -> Result<Self, Error> {
        match parts.check() {
            Ok(()) => Ok(Self {
                parts,
                half_band: (1i32 << parts.band_shift) >> 1,
            }),
            Err(e) => Err(e),
        }
    }

    /// The coefficients.
    #[must_use]
    pub const fn parts(&self) -> &PiecewiseParts<'a> {
        &self.parts
    }

    /// The delay before rounding, ticks, and whether ZVS is expected.
    #[inline]
    fn eval(&self, vin: AdcCode, io: AdcCode) -> (f32, bool) {
        let p = &self.parts;
        let v = p.vin.clamp(vin);
        let i = p.io.clamp(io).wrapping_sub(p.io_zero);
        let from_lo = v.wrapping_sub(p.vin.lo);
        let b = usize::from(from_lo >> p.band_shift);
        let dv = (i32::from(from_lo) - ((b as i32) << p.band_shift) - self.half_band) as f32;
        let y = f32::from(v) / f32::from(i);
        // Validation makes every band and its pieces exist; the fallbacks
        // below keep the interrupt path free of panics all the same.
        let Some(band) = p.bands.get(b) else {
            return (0.0, false);
        };
        let end = p
            .bands
            .get(b + 1)
            .map_or(p.pieces.len(), |n| usize::from(n.first));
        let Some(run) = p.pieces.get(usize::from(band.first)..end) else {
            return (0.0, false);
        };
        let k = run.partition_point(|q| y >= q.y_end);
        let Some(piece) = run.get(k).or(run.last()) else {
            return (0.0, false);
        };
        let zvs = y < band.zvs_y + band.zvs_y_per_code * dv;
        (ticks(piece, y, dv, p.position), zvs)
    }

    /// The delay before rounding, ticks, and whether ZVS is expected at
    /// the codes (clamped to the design range). Never panics; no NaN for
    /// any codes.
    #[inline]
    #[must_use]
    pub fn raw_ticks(&self, vin: AdcCode, io: AdcCode) -> (f32, bool) {
        self.eval(vin, io)
    }

    /// The delay to command: the nearest tick, clamped to the counter;
    /// where ZVS is not expected, the fixed fallback if the design has one.
    #[inline]
    pub fn delay(&self, vin: AdcCode, io: AdcCode) -> Lookup {
        let (raw, zvs) = self.eval(vin, io);
        let ticks = match self.parts.fallback {
            Fallback::Fixed(t) if !zvs => t,
            _ => Ticks::new(round_ticks(raw, self.parts.max_ticks)),
        };
        Lookup { ticks, zvs }
    }
}

/// One piece's delay at code ratio `y` and `dv` codes from its band's
/// centre, ticks: `x = kx * y`; for `x <= 1` the ZVS angle
/// `x + 3pi/2 + sqrt(1 - x) * (p*J*sqrt(1 + x) - P(x))`, else the valley's
/// `x + 3pi/2`.
#[inline]
fn ticks(piece: &Piece, y: f32, dv: f32, position: f32) -> f32 {
    let x = piece.kx * y;
    let base = x * piece.ticks_per_rad + piece.offset_ticks + piece.ticks_per_vin_code * dv;
    if x <= 1.0 {
        let t = 1.0 - x;
        let u = 1.0 + x;
        // sqrt(1 - x) and sqrt(1 + x), in ticks per radian for the root.
        let a = piece.ticks_per_rad * (t * rsqrt_f32(t));
        let q = u * rsqrt_f32(u);
        let j = 1.0 / x;
        let open = base - a * asin_factor_f32(x);
        open + position * (a * q * j)
    } else {
        base
    }
}
