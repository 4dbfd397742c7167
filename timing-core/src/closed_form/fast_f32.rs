//! The closed form in f32 with fast approximations, piece by piece
//! ([`PieceLayout`]): one root by [`rsqrt_f32`], the arcsine factor and
//! `sqrt(1 + x)` by their fits ([`ASIN_FACTOR`], [`SQRT1P_F32`]) merged
//! into one polynomial for the design's aim position, no library call. Every float operation
//! is an IEEE single-precision add, multiply or divide (two divides), and
//! the piece is picked in integers, so the host's exhaustive proof of its
//! error holds on the target bit for bit; the firmware example's ISR-COST
//! lines give its cost.

use super::pieces::PieceLayout;
use super::round_ticks;
use crate::approx::asin_f32::ASIN_FACTOR;
use crate::approx::rsqrt_f32::rsqrt_f32;
use crate::approx::sqrt1p_f32::SQRT1P_F32;
use crate::error::{Error, Quantity};
use crate::table::{Fallback, Lookup};
use crate::{AdcCode, Ticks};

/// One stand-in of [`FastF32`]: the ideal closed form with its own
/// constants.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct F32Piece {
    /// `x = 1/J = kx * y` (`y` the code ratio), dimensionless.
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

/// The coefficients of [`FastF32`].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct FastF32Parts<'a> {
    /// Which piece serves each code pair.
    pub layout: PieceLayout<'a>,
    /// The pieces, one per entry of `layout.ends`.
    pub pieces: &'a [F32Piece],
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

impl FastF32Parts<'_> {
    /// Check the coefficients (usable in `const` items).
    ///
    /// # Errors
    /// As [`PieceLayout::check`]; [`Error::OutOfRange`] naming
    /// [`Quantity::WindowPosition`] for a position outside 0..=1 and
    /// [`Quantity::MethodCoefficient`] for a coefficient that is not finite
    /// (`kx` and `ticks_per_rad` must also be positive).
    pub const fn check(&self) -> Result<(), Error> {
        if let Err(e) = self.layout.check(self.pieces.len()) {
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
        let mut rest = self.pieces;
        while let [p, more @ ..] = rest {
            if !(p.kx.is_finite() && p.kx > 0.0) {
                return Err(coefficient(p.kx));
            }
            if !(p.ticks_per_rad.is_finite() && p.ticks_per_rad > 0.0) {
                return Err(coefficient(p.ticks_per_rad));
            }
            if !(p.offset_ticks.is_finite() && p.ticks_per_vin_code.is_finite()) {
                return Err(coefficient(p.offset_ticks));
            }
            rest = more;
        }
        Ok(())
    }
}

/// The f32 closed form with fast approximations (validated coefficients).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FastF32<'a> {
    parts: FastF32Parts<'a>,
    /// `G(x) = p*sqrt(1 + x) - x*P(x)`, lowest order first (degree 6):
    /// the [`SQRT1P_F32`] and [`ASIN_FACTOR`] fits merged for the
    /// position `p`.
    g: [f32; 7],
}

/// [`FastF32`]'s `G` coefficients for position `p` (f32 arithmetic, the
/// same in `const` evaluation as at run time).
const fn g_coefficients(p: f32) -> [f32; 7] {
    let [s0, s1, s2, s3, s4, s5] = SQRT1P_F32;
    let [a0, a1, a2, a3, a4, a5] = ASIN_FACTOR;
    [
        p * s0,
        p * s1 - a0,
        p * s2 - a1,
        p * s3 - a2,
        p * s4 - a3,
        p * s5 - a4,
        -a5,
    ]
}

impl<'a> FastF32<'a> {
    /// Validate the coefficients (usable in `const` items).
    ///
    /// # Errors
    /// As [`FastF32Parts::check`].
    pub const fn from_parts(parts: FastF32Parts<'a>) -> Result<Self, Error> {
        match parts.check() {
            Ok(()) => Ok(Self {
                parts,
                g: g_coefficients(parts.position),
            }),
            Err(e) => Err(e),
        }
    }

    /// The coefficients.
    #[must_use]
    pub const fn parts(&self) -> &FastF32Parts<'a> {
        &self.parts
    }

    /// The merged polynomial `G(x) = p*sqrt(1 + x) - x*P(x)` for the
    /// parts' position, lowest order first (degree 6): what a code
    /// generator writes out to evaluate the method elsewhere (the C export).
    #[must_use]
    pub const fn polynomial(&self) -> [f32; 7] {
        self.g
    }

    /// The delay before rounding, ticks, and whether ZVS is expected at
    /// the codes (clamped to the design range). Never panics; no NaN for
    /// any codes.
    #[inline]
    #[must_use]
    pub fn raw_ticks(&self, vin: AdcCode, io: AdcCode) -> (f32, bool) {
        let p = &self.parts;
        let s = p.layout.select(vin, io);
        // Validation gives every index a piece; the fallback keeps the
        // interrupt path free of panics all the same.
        let Some(piece) = p.pieces.get(s.index) else {
            return (0.0, false);
        };
        let y = f32::from(s.v) / f32::from(s.i);
        (ticks(piece, y, s.dv as f32, &self.g), s.zvs)
    }

    /// The delay to command: the nearest tick, clamped to the counter;
    /// where ZVS is not expected, the fixed fallback if the design has one.
    #[inline]
    pub fn delay(&self, vin: AdcCode, io: AdcCode) -> Lookup {
        let (raw, zvs) = self.raw_ticks(vin, io);
        let ticks = match self.parts.fallback {
            Fallback::Fixed(t) if !zvs => t,
            _ => Ticks::new(round_ticks(raw, self.parts.max_ticks)),
        };
        Lookup { ticks, zvs }
    }
}

/// One piece's delay at code ratio `y` and `dv` codes from its band's
/// centre, ticks: `x = kx * y`; for `x <= 1` the ZVS angle
/// `x + 3pi/2 + sqrt(1 - x) * G(x) / x` with
/// `G(x) = p*sqrt(1 + x) - x*P(x)` and `P(x) = (pi/2 - asin x)/sqrt(1 - x)`
/// (one root, one polynomial), else the valley's `x + 3pi/2`.
#[inline]
fn ticks(piece: &F32Piece, y: f32, dv: f32, g: &[f32; 7]) -> f32 {
    let x = piece.kx * y;
    let base = x * piece.ticks_per_rad + piece.offset_ticks + piece.ticks_per_vin_code * dv;
    if x <= 1.0 {
        let t = 1.0 - x;
        let [g0, g1, g2, g3, g4, g5, g6] = *g;
        let gx = (((((g6 * x + g5) * x + g4) * x + g3) * x + g2) * x + g1) * x + g0;
        base + piece.ticks_per_rad * (t * rsqrt_f32(t)) * gx / x
    } else {
        base
    }
}
