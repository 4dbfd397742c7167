//! The closed form in 32-bit integer arithmetic, for cores without an FPU
//! or a divide instruction: two reciprocals ([`recip_q15_normalised`]: of
//! the current code, and of `x` for J) and one root ([`sqrt_q24`]), each a
//! seed read from a small table and one Newton step (relative error about
//! 1e-4), and one polynomial `G(x) = p*sqrt(1 + x) - x*P(x)` built from the
//! [`sqrt1p_q16`](crate::approx::sqrt1p_q::sqrt1p_q16) and
//! [`asin_factor_q17`](crate::approx::asin_q::asin_factor_q17) fits, so that the ZVS turn-on
//! angle is `x + 3pi/2 + sqrt(1 - x) * G(x) / x`. Wide products by
//! [`mul_shr`]. No division, no leading-zero instruction, no 64-bit
//! multiply. About 240 instructions at worst on a Cortex-M0 (the methods
//! table in docs/methods.md has the measured figure).
//!
//! Formats: `x = 1/J` in Q24 from `kx`'s 16-bit mantissa, the voltage code
//! and the current code's reciprocal; `1 - x` as the difference of two
//! quotients through the same reciprocal, so that it keeps its relative
//! precision next to the ZVS boundary, where its root is steep (the ZVS
//! test itself is exact, in integers); Q15 for the polynomial, the angle
//! in Q16 radians, the root in Q15, `G` in Q15, `J` in Q10, the result in
//! Q8 ticks. Against the ideal cell's formula the arithmetic costs at most
//! 0.017 tick on the demo's timer and 0.10 tick on a 2 GHz one (the
//! `closed_form` cross-check); the host tool's fit works with the
//! arithmetic as it is, so the proof at every code pair includes it. The
//! bounds that keep every intermediate within 32 bits are checked once by
//! [`FixedPoint::from_parts`], at the corners of the design range.
//!
//! Piece by piece ([`PieceLayout`]), picked by the same integer test as
//! the f32 method's. The result is rounded to the nearest tick (as the
//! tables do); the host tool fits the pieces so that the rounded tick
//! lands inside every window a tick wide.

use super::pieces::PieceLayout;
use crate::approx::asin_q::ASIN_FACTOR_Q17;
use crate::approx::mul_shr::mul_shr;
use crate::approx::recip_q::recip_q15_normalised;
use crate::approx::sqrt1p_q::SQRT1P_Q16;
use crate::approx::sqrt_q::sqrt_q24;
use crate::error::{Error, Quantity};
use crate::table::log2::{floor_log2_16, floor_log2_byte};
use crate::table::{Fallback, Lookup};
use crate::{AdcCode, Ticks};

/// 3*pi/2 in Q16.
pub const THREE_HALF_PI_Q16: u32 = 308_831;
/// 1.0 in Q24.
const ONE_Q24: u32 = 1 << 24;

/// One stand-in of [`FixedPoint`] in integers: the ideal closed form with
/// its own constants.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct FixedPiece {
    /// `kx = k_mant * 2^-k_shift` (`k_mant` in [2^15, 2^16) unless
    /// `k_shift` is capped; the host tool fits the offsets to the rounded
    /// value).
    pub k_mant: u16,
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
    /// code), rounded to their formats, for current codes up to `io_span`
    /// above the zero (`(io - zero) << k_shift` must stay below 2^32, which
    /// caps `k_shift` and leaves `k_mant` fewer bits for large codes and
    /// small `kx`).
    ///
    /// # Errors
    /// [`Error::OutOfRange`] naming [`Quantity::MethodCoefficient`] for a
    /// coefficient its format cannot hold.
    pub fn new(
        kx: f64,
        ticks_per_rad: f64,
        offset_ticks: f64,
        ticks_per_vin_code: f64,
        io_span: u16,
    ) -> Result<Self, Error> {
        let cap = 31 - floor_log2_16(u32::from(io_span).max(1)) as i32;
        let (k_mant, k_shift) = normalise(kx, 16, cap)?;
        let (t_mant, t_shift) = normalise(ticks_per_rad, 16, 63)?;
        let q8 = libm::round(offset_ticks * 256.0);
        if q8.is_nan() || q8.abs() >= f64::from(1u32 << 30) {
            return Err(range_error(offset_ticks, f64::from(1u32 << 22)));
        }
        let q16 = libm::round(ticks_per_vin_code * 65536.0);
        if q16.is_nan() || q16.abs() >= f64::from(1u32 << 30) {
            return Err(range_error(ticks_per_vin_code, f64::from(1u32 << 14)));
        }
        Ok(Self {
            k_mant: k_mant as u16,
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

/// Mantissa and shift of a positive value, `v ~= m * 2^-s`: `m` in
/// [2^(bits-1), 2^bits) unless that needs a shift above `max_shift`, then
/// `s = max_shift` and `m` smaller (at least 1).
fn normalise(v: f64, bits: i32, max_shift: i32) -> Result<(u32, u8), Error> {
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
    let mut s = (bits - 1 - libm::floor(libm::log2(v)) as i32).min(max_shift);
    let mut m = libm::round(v * libm::exp2(f64::from(s)));
    if m >= top {
        s -= 1;
        m = libm::round(v * libm::exp2(f64::from(s)));
    }
    if !(0..=63).contains(&s) || m < 1.0 {
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
    /// 2^30, J below 63 wherever ZVS is possible, the angle below 256 rad,
    /// the Q8 result below 2^30).
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
        let reach = 1i64 << l.band_shift;
        let mut rest = parts.pieces;
        while let [p, more @ ..] = rest {
            if p.k_mant == 0 || p.t_mant < 1 << 15 || p.t_shift > 31 {
                return Err(range_error(p.k_mant as f64, u16::MAX as f64));
            }
            // (io - zero) << k_shift below 2^32.
            if p.k_shift as u32 + floor_log2_16((l.io.hi - l.io_zero) as u32) > 31 {
                return Err(range_error(p.k_shift as f64, 31.0));
            }
            let x_max = Ratio::at(p, l.vin.hi as u32, (l.io.lo - l.io_zero) as u32).x24;
            let x_min = Ratio::at(p, l.vin.lo as u32, (l.io.hi - l.io_zero) as u32).x24;
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
            // Below 170 rad, so the angle's product with t_mant (to 2^8)
            // stays below 2^32.
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

    /// The merged polynomial `G(x)` in Q15, lowest order first (degree 5):
    /// what a code generator writes out to evaluate the method elsewhere
    /// (the C export).
    #[must_use]
    pub const fn polynomial(&self) -> [i32; 6] {
        self.g
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
        let q = Ratio::at(p, u32::from(s.v), u32::from(s.i));
        let x24 = q.x24;
        let mut theta = (x24 >> 8).wrapping_add(THREE_HALF_PI_Q16);
        if q.below_one {
            // sqrt(1 - x) in Q15.
            let r = sqrt_q24(q.one_less_q24()) as i32;
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
            // by a full-width signed product (J amplifies any truncation of
            // r*G, so none is made before it): r*G = hi * 2^16 + lo with hi
            // signed below 2^15 and lo in [0, 2^16), so both products with
            // J (below 2^16) fit.
            let rg = r.wrapping_mul(g);
            let hi = (rg >> 16).wrapping_mul(j10 as i32);
            let lo = ((rg as u32 & 0xffff).wrapping_mul(j10) >> 16) as i32;
            theta = theta.wrapping_add((hi.wrapping_add(lo) >> 8) as u32);
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

/// The stand-in's ratio `x = 1/J` at clamped codes (`i` already less the
/// zero, at least 1; both below 2^16 as codes are). With
/// `w = k_mant * v` and `i_f = i << k_shift` (both exact, below 2^32:
/// `k_shift` validated against the largest current code), `x = w / i_f`:
/// the ZVS test `w <= i_f` is exact, and `1 - x` is `i_f / i_f - w / i_f`
/// with both quotients through the same reciprocal, so its error scales
/// with it (relative 1e-4, plus the two truncations, 2^-24 each) however
/// close the pair lies to the ZVS boundary, where its root is steep.
#[derive(Debug, Clone, Copy)]
struct Ratio {
    /// `x` in Q24.
    x24: u32,
    /// `i_f / i_f` in Q24 through the reciprocal (2^24 within 1e-4).
    one24: u32,
    /// `x <= 1`, exactly: `w <= i_f`.
    below_one: bool,
}

impl Ratio {
    #[inline(always)]
    const fn at(p: &FixedPiece, v: u32, i: u32) -> Self {
        // 1/i = y / 2^(16 + e), from i's mantissa m = i * 2^(15 - e).
        let e = floor_log2_16(i);
        let m = i.wrapping_shl(15u32.wrapping_sub(e) & 31);
        let (y, _) = recip_q15_normalised(m, e);
        let w = (p.k_mant as u32).wrapping_mul(v & 0xffff);
        // w * y / 2^16 = x * 2^(k_shift + e), below 2^32 as w is.
        let ke = (p.k_shift as u32).wrapping_add(e);
        Self {
            x24: to_q24(mul_shr(w, y, 16), ke),
            // i_f * y / 2^16 * 2^(24 - ke) = m * y / 2^7 (below 2^31).
            one24: m.wrapping_mul(y) >> 7,
            below_one: w <= i.wrapping_shl(p.k_shift as u32),
        }
    }

    /// `1 - x` in Q24, where `x <= 1`.
    #[inline(always)]
    const fn one_less_q24(&self) -> u32 {
        self.one24.saturating_sub(self.x24)
    }
}

/// A ratio times `2^ke` to Q24 (`ke` at most 31).
#[inline(always)]
const fn to_q24(r: u32, ke: u32) -> u32 {
    if ke >= 24 {
        r.wrapping_shr(ke.wrapping_sub(24))
    } else {
        r.wrapping_shl(24u32.wrapping_sub(ke))
    }
}

/// The angle `theta` (Q16 radians, below 256 rad) in ticks, Q8:
/// `theta * t_mant / 2^8` is below 2^32, and the shift is `t_shift`.
#[inline]
const fn scale_q8(p: &FixedPiece, theta: u32) -> u32 {
    mul_shr(theta, p.t_mant as u32, 8).wrapping_shr(p.t_shift as u32)
}
