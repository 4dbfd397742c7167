//! Where the closed forms' pieces apply: ideal-cell stand-ins, each serving
//! one piece of the design range, so that the closed form follows a tank
//! the ideal cell does not describe (a Coss curve, a lossy loop, a
//! tolerance box). Shared by [`FastF32`](super::FastF32) and
//! [`FixedPoint`](super::FixedPoint), which pick the same piece at every
//! code pair by the same integer arithmetic.
//!
//! The voltage codes are cut into bands of `2^band_shift` codes from the
//! range's low end. Within a band, the pieces follow one another along the
//! code ratio `y = vin_code / (io_code - io_zero)` (which is `kx/J`: light
//! load at large y): piece `k` serves `y < ends[k] / 2^ratio_bits`, tested
//! as `vin_code << ratio_bits < ends[k] * (io_code - io_zero)` in 32-bit
//! integers (no rounding, no division). Each piece is the ideal closed
//! form ([`normalized::turn_on_angle`](crate::normalized::turn_on_angle))
//! with `x = 1/J = kx * y`, its own ticks per radian, and an offset that
//! moves linearly with the voltage code away from the band's centre:
//!
//! `ticks = angle(kx * y) * ticks_per_rad + offset + ticks_per_vin_code * dv`
//!
//! where `dv = (vin_code - vin.lo) - (band << band_shift) - 2^band_shift / 2`.
//! ZVS is expected above a line in the current code per band.
//!
//! With one band of one piece (`kx` and `ticks_per_rad` of the ideal tank,
//! the offset the driver's lead) this is the ideal cell's closed form
//! ([`ClosedForm`](super::ClosedForm)); the host tool fits the pieces of a
//! design to its exact model (`zvs-timing table` writes them into the
//! `_closed_form.rs` output) and proves the result at every code pair.

use crate::error::{Error, Quantity};
use crate::{AdcCode, CodeRange};

/// One band of voltage codes: where its pieces start, and where ZVS is
/// expected.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct Band {
    /// Index of the band's first piece; its pieces run to the next band's
    /// first (the last band's to the end of the list).
    pub first: u16,
    /// ZVS is expected where `(io_code - io_zero) * 256 > zvs_io_q8 +
    /// (zvs_io_q16_per_code * dv) / 256` (the division an arithmetic
    /// shift): the boundary's current code (Q8) at the band's centre.
    pub zvs_io_q8: i32,
    /// See `zvs_io_q8`: the boundary's change per voltage code (Q16).
    pub zvs_io_q16_per_code: i32,
}

/// Which piece serves each code pair: the code ranges, the bands and the
/// ratio thresholds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct PieceLayout<'a> {
    /// Input-voltage code range (others clamp to its edge).
    pub vin: CodeRange,
    /// Output-current code range (others clamp to its edge).
    pub io: CodeRange,
    /// Current code that reads 0 A; `io.lo` must exceed it.
    pub io_zero: u16,
    /// Bands of `2^band_shift` voltage codes (0..=15).
    pub band_shift: u8,
    /// Fractional bits of the ratio thresholds in `ends`.
    pub ratio_bits: u8,
    /// One per band, `((vin.hi - vin.lo) >> band_shift) + 1` of them.
    pub bands: &'a [Band],
    /// One per piece, band after band: piece `k` serves code ratios below
    /// `ends[k] / 2^ratio_bits`, ascending within a band; a band's last
    /// piece also serves every larger ratio (its entry is not read).
    pub ends: &'a [u32],
}

/// The piece a code pair falls on, with the clamped codes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Selected {
    /// Index into the pieces.
    pub index: usize,
    /// Voltage code, clamped to the range.
    pub v: u16,
    /// Current code less the sensor zero, clamped to the range (at least 1).
    pub i: u16,
    /// Voltage codes from the band's centre.
    pub dv: i32,
    /// ZVS is expected (above the band's line).
    pub zvs: bool,
}

const fn index_error(value: usize, max: usize) -> Error {
    Error::OutOfRange {
        quantity: Quantity::MethodCoefficient,
        value: value as f64,
        min: 0.0,
        max: max as f64,
    }
}

/// The band of voltage code `v` (already clamped to `vin`) in bands of
/// `2^band_shift` codes from `vin.lo`, and its distance from the band's
/// centre, codes: what [`PieceLayout`]'s pieces and ZVS lines are measured
/// from (the host tool fits them with the same numbers).
#[inline(always)]
#[must_use]
pub const fn band_offset(vin: &CodeRange, band_shift: u8, v: u16) -> (usize, i32) {
    let from_lo = v.wrapping_sub(vin.lo);
    let b = (from_lo >> band_shift) as usize;
    let half = (1i32 << band_shift) >> 1;
    (b, from_lo as i32 - ((b as i32) << band_shift) - half)
}

/// Largest magnitude of a band's line terms (so that the line's value
/// stays inside 32 bits anywhere in the band).
const LINE_MAX: i64 = 1 << 30;

impl PieceLayout<'_> {
    /// Check the layout for `n_pieces` pieces (usable in `const` items).
    ///
    /// # Errors
    /// [`Error::OutOfRange`] naming [`Quantity::AdcCode`] for inconsistent
    /// code ranges, and [`Quantity::MethodCoefficient`] for a band count
    /// that does not match the range and shift, a band without pieces, an
    /// `ends` list of another length than the pieces', thresholds out of
    /// order or whose products overflow 32 bits, or a ZVS line beyond
    /// 2^30.
    pub const fn check(&self, n_pieces: usize) -> Result<(), Error> {
        if let Err(e) = super::check_codes(&self.vin, &self.io, self.io_zero) {
            return Err(e);
        }
        if self.band_shift > 15 {
            return Err(index_error(self.band_shift as usize, 15));
        }
        // vin << ratio_bits within 32 bits.
        if self.ratio_bits as u32 > (self.vin.hi as u32).leading_zeros() {
            return Err(index_error(self.ratio_bits as usize, 16));
        }
        let n_bands = ((self.vin.hi - self.vin.lo) >> self.band_shift) as usize + 1;
        if self.bands.len() != n_bands {
            return Err(index_error(self.bands.len(), n_bands));
        }
        let n = self.ends.len();
        if n != n_pieces || n > u16::MAX as usize {
            return Err(index_error(n, n_pieces));
        }
        let i_max = (self.io.hi - self.io_zero) as u32;
        let end_max = u32::MAX / i_max;
        let reach = 1i64 << self.band_shift;
        // Band after band, each band's pieces after the previous band's.
        let (mut bands, mut ends, mut k) = (self.bands, self.ends, 0usize);
        while let [band, rest @ ..] = bands {
            let end = match rest {
                [next, ..] => next.first as usize,
                [] => n,
            };
            if band.first as usize != k || end <= k || end > n {
                return Err(index_error(band.first as usize, n));
            }
            let (c, s) = (band.zvs_io_q8 as i64, band.zvs_io_q16_per_code as i64);
            if c.abs() > LINE_MAX || s.abs() * reach > LINE_MAX {
                return Err(index_error(c.unsigned_abs() as usize, LINE_MAX as usize));
            }
            let mut prev = 0u32;
            while k < end {
                let [e, more @ ..] = ends else {
                    return Err(index_error(k, n));
                };
                // Every threshold but the band's last is read.
                if k + 1 < end && (*e <= prev || *e > end_max) {
                    return Err(index_error(*e as usize, end_max as usize));
                }
                prev = *e;
                ends = more;
                k += 1;
            }
            bands = rest;
        }
        Ok(())
    }

    /// Whether ZVS is expected at the codes (clamped to the range): above
    /// the band's line. What both methods report, and where a fixed
    /// fallback applies.
    #[inline]
    #[must_use]
    pub fn expects_zvs(&self, vin: AdcCode, io: AdcCode) -> bool {
        self.select(vin, io).zvs
    }

    /// The index of the piece serving the codes (clamped to the range).
    #[inline]
    #[must_use]
    pub fn piece_at(&self, vin: AdcCode, io: AdcCode) -> usize {
        self.select(vin, io).index
    }

    /// The piece serving the codes (clamped to the range). Integer-only;
    /// never panics (an index past the pieces, impossible for a validated
    /// layout, is left to the caller's `get`). Always inlined: with a
    /// `const` layout the band arithmetic folds away.
    #[inline(always)]
    pub(crate) fn select(&self, vin: AdcCode, io: AdcCode) -> Selected {
        let v = self.vin.clamp(vin);
        let i = self.io.clamp(io).wrapping_sub(self.io_zero);
        let (b, dv) = band_offset(&self.vin, self.band_shift, v);
        let (first, end, zvs) = match self.bands.get(b) {
            Some(band) => {
                let end = self
                    .bands
                    .get(b + 1)
                    .map_or(self.ends.len(), |n| usize::from(n.first));
                let line = band
                    .zvs_io_q8
                    .wrapping_add(band.zvs_io_q16_per_code.wrapping_mul(dv) >> 8);
                (usize::from(band.first), end, (i32::from(i) << 8) > line)
            }
            None => (0, 1, false),
        };
        // The band's thresholds (all its pieces' but the last's); the piece
        // is the count of those the ratio is at or above. The first and the
        // last piece, where most readings fall, are found with one test
        // each.
        let vq = u32::from(v) << self.ratio_bits;
        let iq = u32::from(i);
        let above = |e: &u32| vq >= e.wrapping_mul(iq);
        let ends = self.ends.get(first..end.saturating_sub(1)).unwrap_or(&[]);
        let k = match ends {
            [head, ..] if !above(head) => 0,
            [.., tail] if above(tail) => ends.len(),
            // Above the first, below the last: between them.
            [_, inner @ .., _] => 1 + inner.partition_point(above),
            _ => 0,
        };
        let lo = first + k;
        Selected {
            index: lo,
            v,
            i,
            dv,
            zvs,
        }
    }
}
