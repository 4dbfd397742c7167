//! The closed-form turn-on delay evaluated from the ADC codes on the
//! interrupt path, without a table, four ways:
//!
//! - [`FastF32`]: f32 with this crate's own approximations
//!   ([`approx`](crate::approx)): adds, multiplies and two divides, for cores
//!   with a single-precision FPU;
//! - [`FixedPoint`]: 32-bit integer arithmetic only, no division and no
//!   leading-zero count, for cores without an FPU or a divider (ARMv6-M);
//! - [`LibmF32`]: the straightforward f32 formula with `libm`'s `asinf` and
//!   `sqrtf` on one stand-in, the baseline the other two are measured
//!   against;
//! - `MicromathF32` (feature `micromath`): the same formula with
//!   `micromath`'s bit-trick `asin` and `sqrt`, smaller and faster than
//!   libm's and less accurate ([`micromath_f32`] states the bounds).
//!
//! With `x = 1/J = kx * vin_code / (io_code - io_zero)`, where
//! `kx = (V per code) / ((A per code) * Z0)` (J = Io*Z0/Vin for every cell),
//! the ideal turn-on angle `w0 * t` from gate turn-off (DESIGN.md section 2,
//! [`normalized::turn_on_angle`](crate::normalized::turn_on_angle)) is
//!
//! - ZVS (`x <= 1`): `x + pi + asin(x) + p*sqrt(1 - x^2)/x`, written as
//!   `x + 3pi/2 + sqrt(1 - x) * G(x) / x` with
//!   `G(x) = p*sqrt(1 + x) - x*P(x)` and `P(x) = (pi/2 - asin x) / sqrt(1 - x)`;
//! - valley (`x > 1`): `x + 3pi/2`;
//!
//! the two branches meet at `x = 1`. The delay in ticks is the angle times
//! `f_clk / w0`, less the driver's net lead. [`FastF32`] and [`FixedPoint`]
//! evaluate it in pieces ([`pieces`]): each run of code ratios in a band of
//! voltage codes has its own `kx`, ticks per radian, offset and voltage
//! slope, which the host tool fits to a real tank (Coss curve, losses,
//! tolerance box); [`ClosedForm`] gives the ideal cell as one piece. They
//! round to the nearest tick and clamp to the counter ([`LibmF32`] also
//! moves a rounded tick by one into its window when rounding left it
//! outside and the next tick is inside). Codes outside the design range
//! clamp to its edge, as in the tables.
//!
//! Accuracy: each method's worst error against the f64 model is proven on
//! the host by evaluating the method (bit-identical IEEE f32 or integer
//! arithmetic) at every code pair of the design range: `zvs-timing verify
//! DESIGN.toml --method <name>`.

pub mod fast_f32;
pub mod fixed_point;
pub mod libm_f32;
#[cfg(feature = "micromath")]
pub mod micromath_f32;
pub mod pieces;

pub use fast_f32::{F32Piece, FastF32, FastF32Parts};
pub use fixed_point::{FixedPiece, FixedPoint, FixedPointParts};
pub use libm_f32::{AsinSqrt, Libm, LibmF32, StandInF32};
#[cfg(feature = "micromath")]
pub use micromath_f32::{Micromath, MicromathF32};
pub use pieces::{Band, PieceLayout};

use crate::error::{positive, Error, Quantity};
use crate::table::{Fallback, Lookup};
use crate::{CodeRange, Tank, Ticks, Timer, WindowPosition};

/// How ADC codes map to volts and amperes, with the design's code ranges.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct CodeScaling {
    /// Input-voltage codes of the design range (others clamp to its edge).
    pub vin: CodeRange,
    /// Output-current codes of the design range (others clamp to its edge).
    pub io: CodeRange,
    /// Current code that reads 0 A; `io.lo` must exceed it.
    pub io_zero: u16,
    /// Input voltage per code, V.
    pub vin_volts_per_code: f64,
    /// Output current per code, A.
    pub io_amps_per_code: f64,
}

/// The coefficients shared by the f32 methods, in the units the interrupt
/// needs. Built by [`ClosedForm::f32_parts`]; generated firmware sources
/// write them out as literals for `const` construction.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct F32Parts {
    /// Input-voltage code range.
    pub vin: CodeRange,
    /// Output-current code range.
    pub io: CodeRange,
    /// Current code that reads 0 A.
    pub io_zero: u16,
    /// `x = kx * vin_code / (io_code - io_zero)`, dimensionless per code ratio.
    pub kx: f32,
    /// Timer ticks per radian of the resonance, `f_clk / w0`.
    pub ticks_per_rad: f32,
    /// The driver's net turn-on lead, ticks.
    pub lead_ticks: f32,
    /// Aim point in the ZVS window, 0..=1.
    pub position: f32,
    /// Largest count the timer holds.
    pub max_ticks: u32,
    /// What to command where ZVS is impossible.
    pub fallback: Fallback,
}

/// A design validated for the closed-form methods.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct ClosedForm {
    scaling: CodeScaling,
    kx: f64,
    ticks_per_rad: f64,
    lead_ticks: f64,
    position: f64,
    max_ticks: u32,
    fallback: Fallback,
    /// The ideal cell as one piece a band (two bands for a range of more
    /// than 2^15 voltage codes).
    ideal_shift: u8,
    ideal_bands: Result<[Band; 2], Error>,
    ideal_f32: [F32Piece; 2],
    ideal_fixed: Result<[FixedPiece; 2], Error>,
}

/// Threshold list of one piece a band (not read).
const IDEAL_ENDS: [u32; 2] = [u32::MAX; 2];

impl ClosedForm {
    /// Validate the code scaling against the tank, timer and aim point.
    ///
    /// # Errors
    /// [`Error::OutOfRange`] naming [`Quantity::AdcCode`] for an empty code
    /// range, a current range not above the sensor zero, or a voltage range
    /// starting at code 0; [`Error::NotPositive`]/[`Error::NotFinite`] for
    /// the ADC scales; [`Error::Overflow`] when the derived coefficients do
    /// not fit.
    ///
    /// ```
    /// # fn main() -> Result<(), timing_core::Error> {
    /// use timing_core::closed_form::{ClosedForm, CodeScaling};
    /// use timing_core::table::Fallback;
    /// use timing_core::{AdcCode, CodeRange, Tank, Timer, WindowPosition};
    /// let scaling = CodeScaling {
    ///     vin: CodeRange { lo: 2237, hi: 3726 }, io: CodeRange { lo: 205, hi: 2049 },
    ///     io_zero: 0, vin_volts_per_code: 0.0161, io_amps_per_code: 0.00488,
    /// };
    /// let cf = ClosedForm::new(
    ///     &Tank::new(1.0e-6, 6.8e-9)?, &Timer::new(170.0e6, 16, 25.0e-9, 0.0)?,
    ///     WindowPosition::new(0.25)?, scaling, Fallback::Valley,
    /// )?;
    /// let fast = cf.fast_f32()?;
    /// let d = fast.delay(AdcCode::new(2981), AdcCode::new(1229)); // 48 V, 6 A
    /// assert!(d.zvs && (60..90).contains(&d.ticks.get()));
    /// # Ok(()) }
    /// ```
    pub fn new(
        tank: &Tank<f64>,
        timer: &Timer<f64>,
        position: WindowPosition<f64>,
        scaling: CodeScaling,
        fallback: Fallback,
    ) -> Result<Self, Error> {
        let s = &scaling;
        let code_err = |value: u16, min: u16, max: u16| Error::OutOfRange {
            quantity: Quantity::AdcCode,
            value: f64::from(value),
            min: f64::from(min),
            max: f64::from(max),
        };
        if s.vin.is_empty() {
            return Err(code_err(s.vin.lo, 0, s.vin.hi));
        }
        if s.io.is_empty() {
            return Err(code_err(s.io.lo, 0, s.io.hi));
        }
        if s.vin.lo == 0 {
            return Err(code_err(0, 1, u16::MAX));
        }
        if s.io.lo <= s.io_zero {
            return Err(code_err(s.io.lo, s.io_zero.saturating_add(1), u16::MAX));
        }
        let kv = positive(Quantity::VoltsPerCode, s.vin_volts_per_code)?;
        let ki = positive(Quantity::AmpsPerCode, s.io_amps_per_code)?;
        let kx = crate::error::derived(Quantity::MethodCoefficient, kv / (ki * tank.z0_ohm()))?;
        let clock = timer.clock_hz();
        let ticks_per_rad =
            crate::error::derived(Quantity::MethodCoefficient, clock / tank.w0_rad_s())?;
        let lead_ticks = timer.lead_s() * clock;
        let piece = F32Piece {
            kx: kx as f32,
            ticks_per_rad: ticks_per_rad as f32,
            offset_ticks: (ticks_per_rad * (1.5 * core::f64::consts::PI) - lead_ticks) as f32,
            ticks_per_vin_code: 0.0,
        };
        let fixed = FixedPiece::new(kx, ticks_per_rad, -lead_ticks, 0.0, s.io.hi - s.io_zero)
            .map(|p| [p; 2]);
        // One band over the range (two past 2^15 codes); ZVS where J >= 1,
        // i.e. at currents above kx * vin_code (in codes above the zero).
        let span = s.vin.hi - s.vin.lo;
        let ideal_shift = (16 - span.leading_zeros()).min(15) as u8;
        let half = f64::from((1u32 << ideal_shift) >> 1);
        let line = move |b: u16| -> Result<Band, Error> {
            let centre = f64::from(s.vin.lo) + f64::from(b) * f64::from(1u32 << ideal_shift) + half;
            let q8 = libm::round(kx * centre * 256.0);
            let per_code = libm::round(kx * 65536.0);
            if q8 > f64::from(1u32 << 30)
                || per_code * f64::from(1u32 << ideal_shift) > f64::from(1u32 << 30)
            {
                return Err(Error::OutOfRange {
                    quantity: Quantity::MethodCoefficient,
                    value: kx,
                    min: 0.0,
                    max: f64::from(1u32 << 14) / f64::from(1u32 << ideal_shift),
                });
            }
            Ok(Band {
                first: b,
                zvs_io_q8: q8 as i32,
                zvs_io_q16_per_code: per_code as i32,
            })
        };
        Ok(Self {
            scaling,
            kx,
            ticks_per_rad,
            lead_ticks,
            position: position.get(),
            max_ticks: timer.max_ticks().get(),
            fallback,
            ideal_shift,
            ideal_bands: line(0).and_then(|b0| {
                Ok([
                    b0,
                    if span >> ideal_shift > 0 {
                        line(1)?
                    } else {
                        Band {
                            first: 1,
                            zvs_io_q8: 0,
                            zvs_io_q16_per_code: 0,
                        }
                    },
                ])
            }),
            ideal_f32: [piece; 2],
            ideal_fixed: fixed,
        })
    }

    /// The code scaling.
    #[must_use]
    pub fn scaling(&self) -> &CodeScaling {
        &self.scaling
    }

    /// `kx` of `x = 1/J = kx * vin_code / (io_code - io_zero)`.
    #[must_use]
    pub fn kx(&self) -> f64 {
        self.kx
    }

    /// Timer ticks per radian of the resonance, `f_clk / w0`.
    #[must_use]
    pub fn ticks_per_rad(&self) -> f64 {
        self.ticks_per_rad
    }

    /// Smallest and largest `x = 1/J` over the design range.
    #[must_use]
    pub fn x_range(&self) -> (f64, f64) {
        let s = &self.scaling;
        let i = |c: u16| f64::from(c - s.io_zero);
        (
            self.kx * f64::from(s.vin.lo) / i(s.io.hi),
            self.kx * f64::from(s.vin.hi) / i(s.io.lo),
        )
    }

    /// The coefficients of the f32 methods.
    #[must_use]
    pub fn f32_parts(&self) -> F32Parts {
        F32Parts {
            vin: self.scaling.vin,
            io: self.scaling.io,
            io_zero: self.scaling.io_zero,
            kx: self.kx as f32,
            ticks_per_rad: self.ticks_per_rad as f32,
            lead_ticks: self.lead_ticks as f32,
            position: self.position as f32,
            max_ticks: self.max_ticks,
            fallback: self.fallback,
        }
    }

    /// The ideal cell's piece layout: one piece a band.
    #[must_use]
    pub fn ideal_layout(&self) -> PieceLayout<'static> {
        let s = &self.scaling;
        let n = usize::from((s.vin.hi.saturating_sub(s.vin.lo)) >> self.ideal_shift) + 1;
        PieceLayout {
            vin: s.vin,
            io: s.io,
            io_zero: s.io_zero,
            band_shift: self.ideal_shift,
            ratio_bits: 0,
            bands: &[],
            ends: IDEAL_ENDS.get(..n).unwrap_or(&[]),
        }
    }

    /// The ideal cell as the coefficients of [`FastF32`]: one piece a band.
    ///
    /// # Errors
    /// [`Error::OutOfRange`] naming [`Quantity::MethodCoefficient`] when
    /// the ZVS line `J = 1` does not fit its fixed-point format (`kx`
    /// beyond `2^14` over the band's width in codes).
    pub fn ideal_parts(&self) -> Result<FastF32Parts<'_>, Error> {
        let bands = self.ideal_bands.as_ref().map_err(|e| *e)?;
        let layout = self.ideal_layout();
        let n = layout.ends.len();
        Ok(FastF32Parts {
            layout: PieceLayout {
                bands: bands.get(..n).unwrap_or(&[]),
                ..layout
            },
            pieces: self.ideal_f32.get(..n).unwrap_or(&[]),
            position: self.position as f32,
            max_ticks: self.max_ticks,
            fallback: self.fallback,
        })
    }

    /// The f32 method with fast approximations, on the ideal cell (one
    /// piece; the host tool fits the pieces that follow a real tank).
    ///
    /// # Errors
    /// As [`ClosedForm::ideal_parts`] and [`FastF32::from_parts`].
    pub fn fast_f32(&self) -> Result<FastF32<'_>, Error> {
        FastF32::from_parts(self.ideal_parts()?)
    }

    /// The libm f32 baseline.
    ///
    /// # Errors
    /// As [`LibmF32::from_parts`].
    pub fn libm_f32(&self) -> Result<LibmF32, Error> {
        LibmF32::from_parts(self.f32_parts())
    }

    /// The `libm-f32` formula with `micromath`'s approximations (feature
    /// `micromath`), on the same coefficients.
    ///
    /// # Errors
    /// As [`MicromathF32::from_parts`].
    #[cfg(feature = "micromath")]
    pub fn micromath_f32(&self) -> Result<MicromathF32, Error> {
        MicromathF32::from_parts(self.f32_parts())
    }

    /// The integer method on the ideal cell (one piece a band).
    ///
    /// # Errors
    /// As [`FixedPoint::from_parts`], and [`Error::OutOfRange`] naming
    /// [`Quantity::MethodCoefficient`] when a coefficient does not fit its
    /// fixed-point format.
    pub fn fixed_point(&self) -> Result<FixedPoint<'_>, Error> {
        let pieces = self.ideal_fixed.as_ref().map_err(|e| *e)?;
        let bands = self.ideal_bands.as_ref().map_err(|e| *e)?;
        let layout = self.ideal_layout();
        let n = layout.ends.len();
        FixedPoint::from_parts(FixedPointParts {
            layout: PieceLayout {
                bands: bands.get(..n).unwrap_or(&[]),
                ..layout
            },
            pieces: pieces.get(..n).unwrap_or(&[]),
            position_q15: libm::round(self.position * 32768.0) as u16,
            max_ticks: self.max_ticks,
            fallback: self.fallback,
        })
    }
}

/// Check f32 parts (shared by both f32 methods).
const fn bad(value: f32) -> Error {
    Error::OutOfRange {
        quantity: Quantity::MethodCoefficient,
        value: value as f64,
        min: 0.0,
        max: f32::MAX as f64,
    }
}

/// Check the code ranges of a method's parts: non-empty, voltage codes from
/// 1, current codes above the sensor zero.
pub(crate) const fn check_codes(
    vin: &CodeRange,
    io: &CodeRange,
    io_zero: u16,
) -> Result<(), Error> {
    if vin.is_empty() || io.is_empty() || vin.lo == 0 || io.lo <= io_zero {
        return Err(Error::OutOfRange {
            quantity: Quantity::AdcCode,
            value: io.lo as f64,
            min: io_zero as f64 + 1.0,
            max: io.hi as f64,
        });
    }
    Ok(())
}

pub(crate) const fn check_f32_parts(p: &F32Parts) -> Result<(), Error> {
    if let Err(e) = check_codes(&p.vin, &p.io, p.io_zero) {
        return Err(e);
    }
    if !(p.kx.is_finite() && p.kx > 0.0) {
        return Err(bad(p.kx));
    }
    if !(p.ticks_per_rad.is_finite() && p.ticks_per_rad > 0.0) {
        return Err(bad(p.ticks_per_rad));
    }
    if !p.lead_ticks.is_finite() {
        return Err(bad(p.lead_ticks));
    }
    if !(p.position >= 0.0 && p.position <= 1.0) {
        return Err(Error::OutOfRange {
            quantity: Quantity::WindowPosition,
            value: p.position as f64,
            min: 0.0,
            max: 1.0,
        });
    }
    Ok(())
}

/// Round a raw delay in ticks to the nearest tick and clamp it to the
/// counter (negative and NaN give 0: Rust's float-to-int cast saturates).
#[inline]
pub(crate) fn round_ticks(raw: f32, max: u32) -> u32 {
    let t = (raw + 0.5) as u32;
    if t > max {
        max
    } else {
        t
    }
}

/// The delay an f32 method commands from its target and window (ticks):
/// the nearest tick inside the window (or, where none is, the nearest),
/// clamped to the counter; below the ZVS boundary the fallback.
#[inline]
pub(crate) fn f32_delay(p: &F32Parts, target: f32, window: Option<(f32, f32)>) -> Lookup {
    match window {
        Some((open, close)) => Lookup {
            ticks: Ticks::new(round_into_window(target, open, close, p.max_ticks)),
            zvs: true,
        },
        None => Lookup {
            ticks: match p.fallback {
                Fallback::Fixed(t) => t,
                Fallback::Valley => Ticks::new(round_ticks(target, p.max_ticks)),
            },
            zvs: false,
        },
    }
}

/// The nearest tick to `target`, moved by one tick into the window
/// `[open, close]` (all in ticks) when rounding left it outside and the
/// neighbouring tick is inside, as [`Timer::command`](crate::Timer::command)
/// does; clamped to the counter.
#[inline]
pub(crate) fn round_into_window(target: f32, open: f32, close: f32, max: u32) -> u32 {
    let t = round_ticks(target, max);
    let tf = t as f32;
    let n = if tf < open && tf + 1.0 <= close {
        t.saturating_add(1)
    } else if tf > close && tf - 1.0 >= open {
        t.saturating_sub(1)
    } else {
        t
    };
    if n > max {
        max
    } else {
        n
    }
}
