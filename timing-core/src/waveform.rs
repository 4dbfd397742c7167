//! The ideal cell's switch voltage and resonant-inductor current against
//! time through one turn-off transition and the following turn-on, for
//! pictures and for checks against simulation (DESIGN.md section 2):
//!
//! - linear charge, `0 <= t < T1`: `v = V t / T1`, `i = I`;
//! - resonance: `v = V + I Z0 sin(w0 tau)`, `i = I cos(w0 tau)`, `tau = t - T1`;
//! - J >= 1, from the window's opening: the body diode clamps `v = 0` and
//!   `i` rises at `V / Lr` from `-I sqrt(1 - 1/J^2)`; if the gate is still off
//!   when `i` reaches 0 (the window's close), the tank rings again from
//!   `v = 0, i = 0`: `v = V (1 - cos w0 s)`, `i = (V / Z0) sin w0 s`;
//! - from the turn-on: the switch holds `v = 0` (a turn-on at `v > 0` is a hard
//!   turn-on: the capacitor is discharged through the switch at once) and
//!   `i` rises at `V / Lr` until it reaches `I` (the freewheel diode turns
//!   off), then stays at `I`.
//!
//! Times are from gate turn-off, second; `t < 0` is the on-state before it.

use crate::error::{derived, positive, Error, Quantity};
use crate::{CellPoint, Real, Tank, Transition};

/// One instant of the waveform.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct WaveSample<F> {
    /// Switch (drain-source) voltage, volt.
    pub switch_voltage_v: F,
    /// Resonant-inductor current, ampere (positive towards the output).
    pub inductor_current_a: F,
    /// Whether the switch is commanded on (after the turn-on, before the
    /// turn-off at t = 0).
    pub gate_on: bool,
}

/// The waveform of one transition with a turn-on at `turn_on_s`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Waveform<F> {
    v: F,
    i: F,
    z0: F,
    w0: F,
    lr: F,
    j: F,
    charge_end_s: F,
    /// Window opening and closing where J >= 1.
    window: Option<(F, F)>,
    turn_on_s: F,
}

impl<F: Real> Waveform<F> {
    /// The waveform of `cell` in `tank` with the switch turned on again at
    /// `turn_on_s` after gate turn-off.
    ///
    /// # Errors
    /// The transition's errors, and [`Error::NotPositive`] /
    /// [`Error::NotFinite`] naming [`Quantity::Interval`] for the turn-on.
    ///
    /// ```
    /// # fn main() -> Result<(), timing_core::Error> {
    /// use timing_core::waveform::Waveform;
    /// use timing_core::{CellPoint, Tank, Topology};
    /// let tank = Tank::new(1.0e-6_f64, 6.8e-9)?;
    /// let cell = CellPoint::from_converter(Topology::Buck, 48.0, 12.0, 6.0)?;
    /// let w = Waveform::new(&tank, &cell, 420e-9)?;  // the window is 373-467 ns
    /// let s = w.at(400e-9);                         // body diode conducting
    /// assert_eq!(s.switch_voltage_v, 0.0);
    /// assert!(s.inductor_current_a < 0.0 && !s.gate_on);
    /// # Ok(()) }
    /// ```
    pub fn new(tank: &Tank<F>, cell: &CellPoint<F>, turn_on_s: F) -> Result<Self, Error> {
        let t = Transition::new(tank, cell)?;
        let turn_on_s = positive(Quantity::Interval, turn_on_s)?;
        Ok(Self {
            v: cell.v_volt(),
            i: cell.i_amp(),
            z0: tank.z0_ohm(),
            w0: tank.w0_rad_s(),
            lr: derived(Quantity::ResonantInductance, tank.lr_h())?,
            j: t.normalized_load(),
            charge_end_s: t.charge_end_s(),
            window: t.window().map(|w| (w.open_s, w.close_s)),
            turn_on_s,
        })
    }

    /// The gate-off trajectory at `t` (voltage, current).
    fn natural(&self, t: F) -> (F, F) {
        if t < self.charge_end_s {
            return (self.v * t / self.charge_end_s, self.i);
        }
        if let Some((open, close)) = self.window {
            if t >= close {
                let s = (t - close) * self.w0;
                return (self.v * (F::ONE - s.cos()), self.v / self.z0 * s.sin());
            }
            if t >= open {
                let i0 = -(self.i * (F::ONE - F::ONE / (self.j * self.j)).sqrt());
                return (F::ZERO, i0 + self.v / self.lr * (t - open));
            }
        }
        let a = (t - self.charge_end_s) * self.w0;
        (self.v + self.i * self.z0 * a.sin(), self.i * a.cos())
    }

    /// The waveform at `t`, second from gate turn-off.
    #[must_use]
    pub fn at(&self, t: F) -> WaveSample<F> {
        if t < F::ZERO {
            return WaveSample {
                switch_voltage_v: F::ZERO,
                inductor_current_a: self.i,
                gate_on: true,
            };
        }
        if t < self.turn_on_s {
            let (v, i) = self.natural(t);
            return WaveSample {
                switch_voltage_v: v,
                inductor_current_a: i,
                gate_on: false,
            };
        }
        let (_, i_on) = self.natural(self.turn_on_s);
        let i = i_on + self.v / self.lr * (t - self.turn_on_s);
        WaveSample {
            switch_voltage_v: F::ZERO,
            inductor_current_a: if i > self.i { self.i } else { i },
            gate_on: true,
        }
    }

    /// Switch voltage just before the turn-on, volt: 0 for a ZVS turn-on.
    #[must_use]
    pub fn voltage_at_turn_on_v(&self) -> F {
        self.natural(self.turn_on_s).0
    }
}
