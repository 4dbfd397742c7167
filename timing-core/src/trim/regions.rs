//! The operating range cut into the trim's regions: bins of the voltage
//! code by the bins of the current code, each a power of two codes wide, so
//! a region's index costs two subtractions, two shifts and a multiply-add
//! (no division: the Cortex-M0 has none).

use crate::error::{Error, Quantity};
use crate::AdcCode;

/// A validated grid of regions over the voltage and current codes.
///
/// Codes below the range fall in its first bin, codes above it in its last.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct Regions {
    vin_lo: u16,
    vin_hi: u16,
    io_lo: u16,
    io_hi: u16,
    vin_shift: u8,
    io_shift: u8,
    /// Index of the last voltage bin.
    vin_last: u16,
    /// Index of the last current bin.
    io_last: u16,
}

/// The widest a bin may be: 2^16 codes.
const MAX_SHIFT: u8 = 16;

/// The smallest shift `s` that puts `span` codes in at most `bins` bins.
const fn shift_for(span: u16, bins: u16) -> u8 {
    let mut s = 0u8;
    while s < MAX_SHIFT && (span as u32 >> s) >= bins as u32 {
        s += 1;
    }
    s
}

/// A bin count from 1 to 256.
const fn check_bins(bins: u16) -> Result<(), Error> {
    if bins == 0 || bins > 256 {
        return Err(Error::OutOfRange {
            quantity: Quantity::TrimRegions,
            value: bins as f64,
            min: 1.0,
            max: 256.0,
        });
    }
    Ok(())
}

impl Regions {
    /// At most `vin_bins` x `io_bins` regions over voltage codes
    /// `vin_codes` and current codes `io_codes` (each `(lowest, highest)`,
    /// inclusive): each bin is the smallest power of two codes wide that
    /// keeps the count within the bound. `const`, for a `static`.
    ///
    /// ```
    /// # fn main() -> Result<(), timing_core::Error> {
    /// use timing_core::trim::Regions;
    /// use timing_core::AdcCode;
    /// // Voltage codes 2236..=3727 in 4 bins, current codes 205..=2049 in 16.
    /// let r = Regions::new((2236, 3727), (205, 2049), 4, 16)?;
    /// assert_eq!(r.count(), 3 * 15);
    /// assert_eq!(r.index(AdcCode::new(2236), AdcCode::new(205)), 0);
    /// assert_eq!(r.index(AdcCode::new(4095), AdcCode::new(4095)), r.count() - 1);
    /// # Ok(()) }
    /// ```
    ///
    /// # Errors
    /// [`Error::OutOfRange`] naming [`Quantity::TrimRegions`] when a range
    /// is reversed or a bound is 0 or above 256.
    pub const fn new(
        vin_codes: (u16, u16),
        io_codes: (u16, u16),
        vin_bins: u16,
        io_bins: u16,
    ) -> Result<Self, Error> {
        if let Err(e) = check_bins(vin_bins) {
            return Err(e);
        }
        if let Err(e) = check_bins(io_bins) {
            return Err(e);
        }
        if vin_codes.0 > vin_codes.1 || io_codes.0 > io_codes.1 {
            let (lo, hi) = if vin_codes.0 > vin_codes.1 {
                vin_codes
            } else {
                io_codes
            };
            return Err(Error::OutOfRange {
                quantity: Quantity::TrimRegions,
                value: lo as f64,
                min: 0.0,
                max: hi as f64,
            });
        }
        let vin_span = vin_codes.1 - vin_codes.0;
        let io_span = io_codes.1 - io_codes.0;
        let vin_shift = shift_for(vin_span, vin_bins);
        let io_shift = shift_for(io_span, io_bins);
        Ok(Self {
            vin_lo: vin_codes.0,
            vin_hi: vin_codes.1,
            io_lo: io_codes.0,
            io_hi: io_codes.1,
            vin_shift,
            io_shift,
            vin_last: (vin_span as u32 >> vin_shift) as u16,
            io_last: (io_span as u32 >> io_shift) as u16,
        })
    }

    /// The voltage and the current bins as `(lowest code, shift, last bin)`:
    /// a code's bin is `min((code - lowest) >> shift, last)` (0 below the
    /// lowest code). For code generators (the C export).
    #[must_use]
    pub const fn bins(&self) -> [(u16, u8, u16); 2] {
        [
            (self.vin_lo, self.vin_shift, self.vin_last),
            (self.io_lo, self.io_shift, self.io_last),
        ]
    }

    /// The number of regions (at most 65536).
    #[must_use]
    pub const fn count(&self) -> usize {
        (self.vin_last as usize + 1) * (self.io_last as usize + 1)
    }

    /// The region of a code pair: `voltage bin * current bins + current
    /// bin`. Cannot fail or panic.
    #[must_use]
    #[inline(always)]
    pub fn index(&self, vin: AdcCode, io: AdcCode) -> usize {
        // In 32 bits: a bin may be 2^16 codes wide.
        let bin = |c: u16, lo: u16, shift: u8, last: u16| {
            (u32::from(c.saturating_sub(lo)) >> shift).min(u32::from(last)) as usize
        };
        let v = bin(vin.get(), self.vin_lo, self.vin_shift, self.vin_last);
        let i = bin(io.get(), self.io_lo, self.io_shift, self.io_last);
        v * (usize::from(self.io_last) + 1) + i
    }

    /// The codes region `region` spans: `((vin_lo, vin_hi), (io_lo,
    /// io_hi))`, inclusive, within the range (`None` past the last region).
    #[must_use]
    pub fn codes(&self, region: usize) -> Option<((u16, u16), (u16, u16))> {
        if region >= self.count() {
            return None;
        }
        let per = usize::from(self.io_last) + 1;
        // Bin `k` of `shift` codes from `lo`, the last one ending at `hi`.
        let bin = |k: usize, lo: u16, shift: u8, hi: u16| {
            let a = u32::from(lo) + ((k as u32) << shift);
            let b = (a + (1u32 << shift) - 1).min(u32::from(hi));
            (a as u16, b as u16)
        };
        Some((
            bin(region / per, self.vin_lo, self.vin_shift, self.vin_hi),
            bin(region % per, self.io_lo, self.io_shift, self.io_hi),
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_bin_as_wide_as_the_code_space_holds_every_code() {
        // One bin over more than 2^15 codes takes a shift of 16, beyond a
        // 16-bit code's width: the index is taken in 32 bits.
        let r = Regions::new((0, 40_000), (0, 65_535), 1, 1).unwrap();
        assert_eq!(r.bins(), [(0, 16, 0), (0, 16, 0)]);
        for c in [0, 1, 32_768, 40_000, 65_535] {
            assert_eq!(r.index(AdcCode::new(c), AdcCode::new(c)), 0);
        }
    }
}
