//! The closed form in 32-bit integer arithmetic, for cores without an FPU
//! or a divide instruction: reciprocals by [`recip_q23`] and [`recip_q15_normalised`]
//! (Newton), the root by [`sqrt_q24`] (Newton), and one polynomial
//! `G(x) = p*sqrt(1 + x) - x*P(x)` built from the [`sqrt1p_q16`] and
//! [`asin_factor_q17`] fits, so that the ZVS turn-on angle is
//! `x + 3pi/2 + sqrt(1 - x) * G(x) / x`. Wide products by [`mul_shr`]. No
//! division, no leading-zero instruction, no 64-bit multiply.
//!
//! Formats: `x = 1/J` in Q24 (fine enough that `sqrt(1 - x)` near the ZVS
//! boundary, where it is steep, stays within a few thousandths of a tick),
//! Q16 for the polynomial and for the angle in radians, the root in Q15,
//! `G` in Q15, `J` in Q10, the result in Q8 ticks. The bounds that keep
//! every intermediate within 32 bits are checked once by
//! [`FixedPoint::from_parts`], at the corners of the design range.
//!
//! Piece by piece ([`PieceLayout`]), picked by the same integer test as
//! the f32 method's. The result is rounded to the nearest tick (as the
//! tables do); the host tool fits the pieces so that the rounded tick
//! lands inside every window a tick wide.

use super::pieces::PieceLayout;
use crate::approx::asin_q::ASIN_FACTOR_Q17;
use crate::approx::mul_shr::mul_shr;
use crate::approx::recip_q::{recip_q15_normalised, recip_q23};
use crate::approx::sqrt1p_q::SQRT1P_Q16;
use crate::approx::sqrt_q::sqrt_q24;
use crate::error::{Error, Quantity};
use crate::table::log2::{floor_log2, floor_log2_byte};
use crate::table::{Fallback, Lookup};
use crate::{AdcCode, Ticks};

/// 3*pi/2 in Q16.
const THREE_HALF_PI_Q16: u32 = 308_831;
/// 1.0 in Q24.
const ONE_Q24: u32 = 1 << 24;

/// One stand-in of [`FixedPoint`] in integers: the ideal closed form with
/// its own constants.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct FixedPiece {
    /// `kx = k_mant * 2^-k_shift` (`k_mant` in [2^31, 2^32): 32 bits, as a
    /// relative error of 2^-16 in x would cost a few thousandths of a
    /// radian near the ZVS boundary).
    pub k_mant: u32,
    /// See `k_mant`.
    pub k_shift: u8,
    /// Ticks per radian `= t_mant * 2^-t_shift` (`t_mant` in [2^15, 2^16)).
    pub t_mant: u16,
    /// See `t_mant`.
    pub t_shift: u8,
    /// Ticks added to the angle's, Q8, at the band's centre voltage code
    /// (the driver's lead taken off and the fitted shift).
    pub offset_q8: i32,
    /// Ticks per voltage code away from the band's centre, Q16.
    pub q16_per_vin_code: i32,
}

impl FixedPiece {
    /// The piece of a stand-in: `x = kx * y`, `ticks_per_rad`, the offset
    /// (ticks, without the `3*pi/2` angle) and the voltage slope (ticks per
    /// code), rounded to their formats.
    ///
    /// # Errors
    /// [`Error::OutOfRange`] naming [`Quantity::MethodCoefficient`] for a
    /// coefficient its format cannot hold.
    pub fn new(
        kx: f64,
        ticks_per_rad: f64,
        offset_ticks: f64,
        ticks_per_vin_code: f64,
    ) -> Result<Self, Error> {
        let (k_mant, k_shift) = normalise(kx, 32)?;
        let (t_mant, t_shift) = normalise(ticks_per_rad, 16)?;
        let q8 = libm::round(offset_ticks * 256.0);
        if q8.is_nan() || q8.abs() >= f64::from(1u32 << 30) {
            return Err(range_error(offset_ticks, f64::from(1u32 << 22)));
        }
        let q16 = libm::round(ticks_per_vin_code * 65536.0);
        if q16.is_nan() || q16.abs() >= f64::from(1u32 << 30) {
            return Err(range_error(ticks_per_vin_code, f64::from(1u32 << 14)));
        }
        Ok(Self {
            k_mant,
            k_shift,
            t_mant: t_mant as u16,
            t_shift,
            offset_q8: q8 as i32,
            q16_per_vin_code: q16 as i32,
        })
    }

    /// `kx`, as the integers hold it.
    #[must_use]
    pub fn kx(&self) -> f64 {
        f64::from(self.k_mant) * libm::exp2(-f64::from(self.k_shift))
    }

    /// Ticks per radian, as the integers hold it.
    #[must_use]
    pub fn ticks_per_rad(&self) -> f64 {
        f64::from(self.t_mant) * libm::exp2(-f64::from(self.t_shift))
    }

    /// Ticks per voltage code, as the integers hold it.
    #[must_use]
    pub fn ticks_per_vin_code(&self) -> f64 {
        f64::from(self.q16_per_vin_code) / 65536.0
    }
}

/// The coefficients of [`FixedPoint`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct FixedPointParts<'a> {
    /// Which piece serves each code pair.
    pub layout: PieceLayout<'a>,
    /// The pieces, one per entry of `layout.ends`.
    pub pieces: &'a [FixedPiece],
    /// Aim point in each stand-in's ZVS window, Q15 (0..=32768).
    pub position_q15: u16,
    /// Largest count the timer holds.
    pub max_ticks: u32,
    /// What to command where ZVS is not expected.
    pub fallback: Fallback,
}

/// The integer closed form (validated coefficients).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FixedPoint<'a> {
    parts: FixedPointParts<'a>,
    /// `G(x)` in Q15, lowest order first (degree 5).
    g: [i32; 6],
}

/// Mantissa in [2^(bits-1), 2^bits) and shift of a positive value:
/// `v ~= m * 2^-s`.
fn normalise(v: f64, bits: i32) -> Result<(u32, u8), Error> {
    let bad = Error::OutOfRange {
        quantity: Quantity::MethodCoefficient,
        value: v,
        min: 1.0e-12,
        max: 65535.0,
    };
    if !(v.is_finite() && v > 1.0e-12 && v < 65535.5) {
        return Err(bad);
    }
    let top = libm::exp2(f64::from(bits));
    let mut s = bits - 1 - libm::floor(libm::log2(v)) as i32;
    let mut m = libm::round(v * libm::exp2(f64::from(s)));
    if m >= top {
        s -= 1;
        m = libm::round(v * libm::exp2(f64::from(s)));
    }
    if !(0..=63).contains(&s) {
        return Err(bad);
    }
    Ok((m as u32, s as u8))
}

const fn range_error(value: f64, max: f64) -> Error {
    Error::OutOfRange {
        quantity: Quantity::MethodCoefficient,
        value,
        min: 0.0,
        max,
    }
}

/// `G = p*Q - x*P` in Q15 from the Q16 `sqrt(1 + x)` and the Q17 arcsine
/// factor coefficients, rounded to nearest. Every Horner partial sum of G
/// stays below 1.58 in magnitude for any p in 0..=1 (below 2^16 in Q15),
/// so with x in Q15 each product fits 31 bits.
const fn g_coefficients(p15: u16) -> [i32; 6] {
    // p*Q_k: Q15 * Q16 = Q31, to Q15; P_k: Q17 to Q15.
    const fn pq(p15: u16, q: i32) -> i64 {
        (p15 as i64 * q as i64 + (1 << 15)) >> 16
    }
    const fn xp(c: i32) -> i64 {
        (c as i64 + 2) >> 2
    }
    let [q0, q1, q2, q3, q4, q5] = SQRT1P_Q16;
    let [a0, a1, a2, a3, a4] = ASIN_FACTOR_Q17;
    [
        pq(p15, q0) as i32,
        (pq(p15, q1) - xp(a0)) as i32,
        (pq(p15, q2) - xp(a1)) as i32,
        (pq(p15, q3) - xp(a2)) as i32,
        (pq(p15, q4) - xp(a3)) as i32,
        (pq(p15, q5) - xp(a4)) as i32,
    ]
}

impl<'a> FixedPoint<'a> {
    /// Validate the coefficients (usable in `const` items): the layout,
    /// normalised mantissas, and the 32-bit bounds of every intermediate
    /// of every piece at the corners of the design range (`x` in Q24 below
    /// 2^30, J below 63 wherever ZVS is possible, the Q8 result below
    /// 2^30).
    ///
    /// # Errors
    /// As [`PieceLayout::check`]; [`Error::OutOfRange`] naming
    /// [`Quantity::NormalizedLoad`], [`Quantity::MethodCoefficient`] (the
    /// value is the offending bound) or [`Quantity::WindowPosition`].
    pub const fn from_parts(parts: FixedPointParts<'a>) -> Result<Self, Error> {
        let l = &parts.layout;
        if let Err(e) = l.check(parts.pieces.len()) {
            return Err(e);
        }
        if parts.position_q15 > 1 << 15 {
            return Err(Error::OutOfRange {
                quantity: Quantity::WindowPosition,
                value: parts.position_q15 as f64 / 32768.0,
                min: 0.0,
                max: 1.0,
            });
        }
        let e_min = floor_log2((l.io.lo - l.io_zero) as u32) as i32;
        let e_max = floor_log2((l.io.hi - l.io_zero) as u32) as i32;
        let reach = 1i64 << l.band_shift;
        let mut rest = parts.pieces;
        while let [p, more @ ..] = rest {
            if p.k_mant < 1 << 31 || p.t_mant < 1 << 15 || p.t_shift > 31 {
                return Err(range_error(p.k_mant as f64, u32::MAX as f64));
            }
            // The shift of x after the k product, k_shift + e - 40, within
            // 31 either way over the current range.
            let k = p.k_shift as i32;
            if k + e_max - 40 > 31 || 40 - k - e_min > 31 {
                return Err(range_error(p.k_shift as f64, 63.0));
            }
            let x_max = x_q24(p, l.vin.hi as u32, (l.io.lo - l.io_zero) as u32);
            let x_min = x_q24(p, l.vin.lo as u32, (l.io.hi - l.io_zero) as u32);
            if x_max >= 1 << 30 {
                return Err(range_error(x_max as f64 / 16_777_216.0, 64.0));
            }
            // J = 1/x in Q10 must fit 16 bits wherever ZVS is possible: J
            // below 63 (x in Q24 at least 266,306, above 2^18).
            if x_min < 266_306 {
                return Err(Error::OutOfRange {
                    quantity: Quantity::NormalizedLoad,
                    value: 16_777_216.0 / x_min as f64,
                    min: 0.0,
                    max: 63.0,
                });
            }
            // The largest angle: the larger of the valley at x_max and the
            // ZVS branch bound (|sqrt(1-x) G(x) / x| < 1.6 * 63 rad).
            let big = if x_max > ONE_Q24 { x_max >> 8 } else { 1 << 16 };
            let theta_max = big + THREE_HALF_PI_Q16 + (101 << 16);
            let r8 = scale_q8(p, theta_max) as i64;
            let slope = ((p.q16_per_vin_code as i64).abs() * reach) >> 8;
            if r8 + slope + (p.offset_q8 as i64).abs() >= 1 << 30
                || (p.q16_per_vin_code as i64).abs() >= 1 << 30
            {
                return Err(range_error(r8 as f64 / 256.0, (1u32 << 22) as f64));
            }
            rest = more;
        }
        Ok(Self {
            parts,
            g: g_coefficients(parts.position_q15),
        })
    }

    /// The coefficients.
    #[must_use]
    pub const fn parts(&self) -> &FixedPointParts<'a> {
        &self.parts
    }

    /// The delay before rounding, ticks in Q8 (`ticks * 256`), and whether
    /// ZVS is expected. Integer-only; never panics.
    #[inline]
    #[must_use]
    pub fn raw_ticks_q8(&self, vin: AdcCode, io: AdcCode) -> (i32, bool) {
        let s = self.parts.layout.select(vin, io);
        // Validation gives every index a piece; the fallback keeps the
        // interrupt path free of panics all the same.
        let Some(p) = self.parts.pieces.get(s.index) else {
            return (0, false);
        };
        let x24 = x_q24(p, u32::from(s.v), u32::from(s.i));
        let x = x24 >> 8;
        let mut theta = x.wrapping_add(THREE_HALF_PI_Q16);
        if x24 <= ONE_Q24 {
            // sqrt(1 - x) in Q15.
            let r = sqrt_q24(ONE_Q24.wrapping_sub(x24)) as i32;
            // J = 2^24 / x24 in Q10 (2^18 <= x24 <= 2^24 here: J < 63,
            // validated), 1/x24 = y / 2^s; floor(log2 x24) = 18 + one table
            // read, and x24 cut to its top 16 bits.
            let up = 3 + floor_log2_byte(x24 >> 18);
            let (yx, sx) = recip_q15_normalised(x24 >> up, 15 + up);
            let j10 = yx.wrapping_shr(sx.wrapping_sub(34));
            // G(x) in Q15 by Horner (x in Q15).
            let xi = (x24 >> 9) as i32;
            let [g0, g1, g2, g3, g4, g5] = self.g;
            let mut acc = g5;
            acc = g4.wrapping_add(acc.wrapping_mul(xi) >> 15);
            acc = g3.wrapping_add(acc.wrapping_mul(xi) >> 15);
            acc = g2.wrapping_add(acc.wrapping_mul(xi) >> 15);
            acc = g1.wrapping_add(acc.wrapping_mul(xi) >> 15);
            let g = g0.wrapping_add(acc.wrapping_mul(xi) >> 15);
            // sqrt(1 - x) * G * J in Q16: r*G in Q30 (|r*G| < 1.6), times J
            // by a full-width product of its magnitude (J amplifies any
            // truncation of r*G, so none is made before it).
            let rg = r.wrapping_mul(g);
            let m = mul_shr(rg.unsigned_abs(), j10 as u16, 16) >> 8;
            theta = if rg < 0 {
                theta.wrapping_sub(m)
            } else {
                theta.wrapping_add(m)
            };
        }
        let slope = p.q16_per_vin_code.wrapping_mul(s.dv) >> 8;
        let r8 = (scale_q8(p, theta) as i32)
            .wrapping_add(p.offset_q8)
            .wrapping_add(slope);
        (r8, s.zvs)
    }

    /// The delay to command, rounded to the nearest tick and clamped to the
    /// counter; where ZVS is not expected, the fixed fallback if the design
    /// has one.
    #[inline]
    pub fn delay(&self, vin: AdcCode, io: AdcCode) -> Lookup {
        let (raw, zvs) = self.raw_ticks_q8(vin, io);
        if !zvs {
            if let Fallback::Fixed(t) = self.parts.fallback {
                return Lookup { ticks: t, zvs };
            }
        }
        // Round half up; below zero (a lead longer than the target) gives 0.
        let r = raw.wrapping_add(128);
        let t = if r <= 0 { 0 } else { (r >> 8) as u32 };
        Lookup {
            ticks: Ticks::new(if t > self.parts.max_ticks {
                self.parts.max_ticks
            } else {
                t
            }),
            zvs,
        }
    }
}

/// `x = 1/J` in Q24 at clamped codes (`i` already less the zero).
#[inline]
const fn x_q24(p: &FixedPiece, v: u32, i: u32) -> u32 {
    // 1/i = y / 2^s; a = v*y / 2^8 (below 2^32 for 16-bit codes).
    let (y, s) = recip_q23(i);
    let a = mul_shr(y, v as u16, 8);
    // m = k_mant * a / 2^32 (within 2 units) by the two 16-bit halves of
    // k_mant: the low half's share is below 2^16, so 16 bits of `a`
    // suffice for it.
    let m = mul_shr(a, (p.k_mant >> 16) as u16, 16)
        .wrapping_add(((a >> 16).wrapping_mul(p.k_mant & 0xffff)) >> 16);
    // x * 2^24 = m * 2^(64 - k_shift - s).
    let sh = (p.k_shift as i32).wrapping_add(s as i32).wrapping_sub(64);
    if sh >= 0 {
        m.wrapping_shr(sh as u32)
    } else {
        m.wrapping_shl(sh.wrapping_neg() as u32)
    }
}

/// The angle `theta` (Q16 radians) in ticks, Q8.
#[inline]
const fn scale_q8(p: &FixedPiece, theta: u32) -> u32 {
    let r = mul_shr(theta, p.t_mant, 16);
    if p.t_shift >= 8 {
        r.wrapping_shr(p.t_shift as u32 - 8)
    } else {
        r.wrapping_shl(8 - p.t_shift as u32)
    }
}
