//! Buck conversion ratio of the quasi-resonant converter, and its inverse
//! for feed-forward: the switching frequency (or on-time) that gives a
//! target output voltage at the measured operating point.
//!
//! Derivation (the freewheel-diode voltage averages to Vout): the diode
//! node sits at Vin during the on-interval, falls linearly from Vin to 0
//! during the linear charge T1, and is clamped at 0 from then until the
//! current ramp ends. So `Vout*Ts = Vin*(T1/2 + T_on)` with
//! `T_on = Ts - ramp_end`, i.e.
//!
//! `M = Vout/Vin = 1 - (ramp_end - T1/2)/Ts`,
//!
//! which with the closed-form intervals is the textbook
//! `M = 1 - F*P(1/J)` (Erickson and Maksimovic, Fundamentals of Power
//! Electronics, 3rd ed., eqs. 23.46 and 23.61), F = fs/f0. Below the ZVS
//! boundary the same argument holds for a turn-on at the valley, with the
//! ring lasting 3*pi/2 and the ramp starting from zero current:
//! `M = 1 - (F/2pi)*(1/(2J) + 3pi/2 + J)`, which meets the ZVS expression at
//! J = 1 (derived here from the same average, not from a textbook).

use crate::error::{positive, Error, Quantity};
use crate::{Real, Transition};

/// A regulating operating point of the buck: period split into the resonant
/// off-interval and the controller's on-interval.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct Regulation<F> {
    /// Switching frequency fs, hertz.
    pub switching_frequency_hz: F,
    /// Switching period 1/fs, second.
    pub period_s: F,
    /// On-interval T4 from the end of the current ramp to the next gate
    /// turn-off, second (never negative).
    pub on_time_s: F,
    /// Conversion ratio M = Vout/Vin.
    pub conversion_ratio: F,
}

impl<F: Real> Transition<F> {
    /// Resonant part of the period that does not deliver Vin to the diode
    /// node: `ramp_end - T1/2`, second.
    fn lost_s(&self) -> F {
        self.ramp_end_s() - self.charge_end_s() * F::HALF
    }

    /// Highest switching frequency with a non-negative on-time, hertz:
    /// `1/ramp_end`.
    #[must_use]
    pub fn max_switching_frequency_hz(&self) -> F {
        F::ONE / self.ramp_end_s()
    }

    /// Buck conversion ratio M = Vout/Vin at switching frequency `fs_hz`
    /// (exact for the ideal cell; f64 within a few ulp).
    ///
    /// # Errors
    /// Invalid `fs_hz` (not finite, not positive, subnormal);
    /// [`Error::FrequencyTooHigh`] when the period is shorter than the
    /// resonant transition.
    pub fn buck_regulation_at(&self, fs_hz: F) -> Result<Regulation<F>, Error> {
        let fs = positive(Quantity::SwitchingFrequency, fs_hz)?;
        let period_s = F::ONE / fs;
        let max_hz = self.max_switching_frequency_hz();
        if period_s < self.ramp_end_s() {
            return Err(Error::FrequencyTooHigh {
                fs_hz: fs.to_f64(),
                max_hz: max_hz.to_f64(),
            });
        }
        Ok(Regulation {
            switching_frequency_hz: fs,
            period_s,
            on_time_s: period_s - self.ramp_end_s(),
            conversion_ratio: F::ONE - self.lost_s() * fs,
        })
    }

    /// The switching frequency and on-time that give conversion ratio
    /// `ratio` = Vout/Vin for the buck at this operating point (feed-forward).
    ///
    /// ```
    /// # fn main() -> Result<(), timing_core::Error> {
    /// use timing_core::{CellPoint, Tank, Transition};
    /// let t = Transition::new(&Tank::new(1.0e-6_f64, 6.8e-9)?, &CellPoint::new(48.0, 6.0)?)?;
    /// let r = t.buck_regulation_for_ratio(12.0 / 48.0)?;
    /// let back = t.buck_regulation_at(r.switching_frequency_hz)?;
    /// assert!((back.conversion_ratio - 0.25).abs() < 1e-12);
    /// # Ok(()) }
    /// ```
    ///
    /// # Errors
    /// [`Error::OutOfRange`] on [`Quantity::ConversionRatio`] unless
    /// `T1/(2*ramp_end) < ratio < 1`: 1 needs fs = 0, and the smallest ratio is
    /// the one at the highest frequency, where the on-time is zero.
    pub fn buck_regulation_for_ratio(&self, ratio: F) -> Result<Regulation<F>, Error> {
        let ramp_end = self.ramp_end_s();
        let min_ratio = self.charge_end_s() * F::HALF / ramp_end;
        if !ratio.is_finite() {
            return Err(Error::NotFinite {
                quantity: Quantity::ConversionRatio,
                value: ratio.to_f64(),
            });
        }
        if ratio < min_ratio || ratio >= F::ONE {
            return Err(Error::OutOfRange {
                quantity: Quantity::ConversionRatio,
                value: ratio.to_f64(),
                min: min_ratio.to_f64(),
                max: 1.0,
            });
        }
        let period_s = self.lost_s() / (F::ONE - ratio);
        let on_time = period_s - ramp_end;
        Ok(Regulation {
            switching_frequency_hz: F::ONE / period_s,
            period_s,
            on_time_s: if on_time < F::ZERO { F::ZERO } else { on_time },
            conversion_ratio: ratio,
        })
    }
}
