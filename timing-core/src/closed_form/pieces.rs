//! The coefficients of the fast closed forms: ideal-cell stand-ins, each
//! serving one piece of the design range, so that the closed form follows
//! a tank the ideal cell does not describe (a Coss curve, a lossy loop, a
//! tolerance box).
//!
//! The voltage codes are cut into bands of `2^band_shift` codes from the
//! range's low end. Within a band, the pieces follow one another along the
//! code ratio `y = vin_code / (io_code - io_zero)` (which is `kx/J`: light
//! load at large y). Each piece is the ideal closed form
//! ([`normalized::turn_on_angle`](crate::normalized::turn_on_angle)) with
//! `x = 1/J = kx * y`, its own ticks per radian, and an offset that moves
//! linearly with the voltage code away from the band's centre:
//!
//! `ticks = angle(kx * y) * ticks_per_rad + offset_ticks + ticks_per_vin_code * dv`
//!
//! where `dv = (vin_code - vin.lo) - (band << band_shift) - 2^band_shift / 2`.
//! With one band of one piece (`kx` and `ticks_per_rad` of the ideal
//! tank, the offset the driver's lead) this is the ideal cell's closed form
//! ([`ClosedForm`](super::ClosedForm)); the host tool fits the pieces of a
//! design to its exact model (`zvs-timing table`, which writes them into
//! the `_closed_form.rs` output) and proves the result at every code pair.

use crate::error::{Error, Quantity};
use crate::table::Fallback;
use crate::CodeRange;

/// One stand-in: the ideal closed form over a run of code ratios of a band.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct Piece {
    /// The piece serves code ratios `y` below this one (dimensionless, code
    /// per code); the band's pieces are in ascending order, and the band's
    /// last piece also serves every larger ratio.
    pub y_end: f32,
    /// `x = 1/J = kx * y`, dimensionless.
    pub kx: f32,
    /// Timer ticks per radian of the stand-in's resonance.
    pub ticks_per_rad: f32,
    /// Ticks at `x = 0` at the band's centre voltage code: the stand-in's
    /// `3*pi/2` angle times `ticks_per_rad`, less the driver's lead, plus
    /// the fitted shift.
    pub offset_ticks: f32,
    /// Ticks per voltage code away from the band's centre.
    pub ticks_per_vin_code: f32,
}

/// One band of voltage codes: where its pieces start, and where ZVS is
/// expected.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct Band {
    /// Index of the band's first piece; its pieces run to the next band's
    /// first (the last band's to the end of the list).
    pub first: u16,
    /// ZVS is expected where `y < zvs_y + zvs_y_per_code * dv` (code ratio).
    pub zvs_y: f32,
    /// See `zvs_y`: change of the boundary's ratio per voltage code.
    pub zvs_y_per_code: f32,
}

/// The coefficients of [`FastF32`](super::FastF32): the design's code
/// ranges, its bands and pieces, and how the delay is commanded.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct PiecewiseParts<'a> {
    /// Input-voltage code range (others clamp to its edge).
    pub vin: CodeRange,
    /// Output-current code range (others clamp to its edge).
    pub io: CodeRange,
    /// Current code that reads 0 A; `io.lo` must exceed it.
    pub io_zero: u16,
    /// Bands of `2^band_shift` voltage codes (0..=15).
    pub band_shift: u8,
    /// One per band, `((vin.hi - vin.lo) >> band_shift) + 1` of them.
    pub bands: &'a [Band],
    /// Every band's pieces, band after band.
    pub pieces: &'a [Piece],
    /// Aim point in each stand-in's ZVS window, 0..=1.
    pub position: f32,
    /// Largest count the timer holds.
    pub max_ticks: u32,
    /// What to command where ZVS is not expected.
    pub fallback: Fallback,
}

const fn coefficient(value: f32) -> Error {
    Error::OutOfRange {
        quantity: Quantity::MethodCoefficient,
        value: value as f64,
        min: -(f32::MAX as f64),
        max: f32::MAX as f64,
    }
}

const fn index(value: usize, max: usize) -> Error {
    Error::OutOfRange {
        quantity: Quantity::MethodCoefficient,
        value: value as f64,
        min: 0.0,
        max: max as f64,
    }
}

impl PiecewiseParts<'_> {
    /// Check the coefficients (usable in `const` items).
    ///
    /// # Errors
    /// [`Error::OutOfRange`] naming [`Quantity::AdcCode`] for inconsistent
    /// code ranges, [`Quantity::WindowPosition`] for a position outside
    /// 0..=1, and [`Quantity::MethodCoefficient`] for a band count that
    /// does not match the range and shift, a band without pieces or with
    /// pieces out of order, or a coefficient that is not finite (`kx` and
    /// `ticks_per_rad` must also be positive).
    pub const fn check(&self) -> Result<(), Error> {
        if let Err(e) = super::check_codes(&self.vin, &self.io, self.io_zero) {
            return Err(e);
        }
        if !(self.position >= 0.0 && self.position <= 1.0) {
            return Err(Error::OutOfRange {
                quantity: Quantity::WindowPosition,
                value: self.position as f64,
                min: 0.0,
                max: 1.0,
            });
        }
        if self.band_shift > 15 {
            return Err(index(self.band_shift as usize, 15));
        }
        let n_bands = ((self.vin.hi - self.vin.lo) >> self.band_shift) as usize + 1;
        if self.bands.len() != n_bands {
            return Err(index(self.bands.len(), n_bands));
        }
        let n = self.pieces.len();
        if n > u16::MAX as usize {
            return Err(index(n, u16::MAX as usize));
        }
        // Band after band, each band's pieces after the previous band's.
        let (mut bands, mut pieces, mut k) = (self.bands, self.pieces, 0usize);
        while let [band, rest @ ..] = bands {
            let end = match rest {
                [next, ..] => next.first as usize,
                [] => n,
            };
            if band.first as usize != k || end <= k || end > n {
                return Err(index(band.first as usize, n));
            }
            if !(band.zvs_y.is_finite() && band.zvs_y_per_code.is_finite()) {
                return Err(coefficient(band.zvs_y));
            }
            let mut prev = f32::NEG_INFINITY;
            while k < end {
                let [p, more @ ..] = pieces else {
                    return Err(index(k, n));
                };
                if !(p.kx.is_finite() && p.kx > 0.0) {
                    return Err(coefficient(p.kx));
                }
                if !(p.ticks_per_rad.is_finite() && p.ticks_per_rad > 0.0) {
                    return Err(coefficient(p.ticks_per_rad));
                }
                if !(p.offset_ticks.is_finite() && p.ticks_per_vin_code.is_finite()) {
                    return Err(coefficient(p.offset_ticks));
                }
                if !(p.y_end > prev) {
                    return Err(coefficient(p.y_end));
                }
                prev = p.y_end;
                pieces = more;
                k += 1;
            }
            bands = rest;
        }
        Ok(())
    }
}
