//! Bring-up: the switch-node trace a tank predicts, to compare with a scope
//! capture ([`crate::input::capture`]) and, in a later step, to fit the
//! tank to captures by least squares.
//!
//! The capture's time zero is the turn-off command; the switch turns off
//! `delay_off_s` later (the gate driver's turn-off delay), and in a
//! single-pulse test the gate stays off, so the ring runs until the model
//! no longer follows the circuit (after the window closes, or past the
//! valley), where the prediction is NaN and the sample does not count.

use timing_core::coss::CossPoint;
use timing_core::CellPoint;

use crate::input::capture::Capture;
use crate::input::design::DesignSpec;
use crate::tank::real_tank::{CellSolver, RealTank};

/// The tank as a fit sees it: what bring-up captures pin down.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TankGuess {
    /// Resonant inductance, henry.
    pub lr_h: f64,
    /// The fixed capacitance across the switch (the external capacitor, or
    /// the whole of it without a Coss curve), farad.
    pub cr_f: f64,
    /// Scale on the MOSFET's Coss curve (1: as in the datasheet).
    pub coss_scale: f64,
    /// Series resistance of the resonant loop, ohm.
    pub r_tank_ohm: f64,
    /// Gate driver's turn-off delay, second: from the turn-off command
    /// (the capture's time zero) to the switch turning off.
    pub delay_off_s: f64,
}

impl TankGuess {
    /// The design's own tank, with no turn-off delay: the start of a fit
    /// (the delay is read off the capture's edge).
    #[must_use]
    pub fn of(design: &DesignSpec) -> Self {
        Self {
            lr_h: design.real.lr_h,
            cr_f: design.real.cr_fixed_f,
            coss_scale: 1.0,
            r_tank_ohm: design.real.r_tank_ohm,
            delay_off_s: 0.0,
        }
    }

    /// The tank as built with these values, the design's Coss curve scaled.
    #[must_use]
    pub fn tank(&self, design: &DesignSpec) -> RealTank {
        RealTank {
            lr_h: self.lr_h,
            cr_fixed_f: self.cr_f,
            coss: design
                .real
                .coss
                .iter()
                .map(|p| CossPoint {
                    volts: p.volts,
                    farads: p.farads * self.coss_scale,
                })
                .collect(),
            r_tank_ohm: self.r_tank_ohm,
        }
    }
}

/// The switch voltage (volt) `guess` predicts at `times` (second from the
/// turn-off command) at the converter point `vin_v` (volt), `io_a`
/// (ampere) of `design`'s topology, the gate left off: NaN where the model
/// does not follow the circuit.
///
/// # Errors
/// timing-core's error for values no tank or operating point can have.
pub fn model_trace(
    design: &DesignSpec,
    guess: &TankGuess,
    vin_v: f64,
    io_a: f64,
    times: &[f64],
) -> Result<Vec<f64>, timing_core::Error> {
    let cell: CellPoint<f64> = design.cell(vin_v, io_a)?;
    let tank = guess.tank(design);
    let shifted: Vec<f64> = times.iter().map(|t| t - guess.delay_off_s).collect();
    // The gate stays off: a turn-on far past any capture.
    let never = 1.0;
    match tank.solver()? {
        CellSolver::Ideal(t) => {
            let w = timing_core::waveform::Waveform::new(&t, &cell, never)?;
            Ok(shifted.iter().map(|&s| w.at(s).switch_voltage_v).collect())
        }
        CellSolver::Ring(ring) => {
            let mut out = vec![
                timing_core::waveform::WaveSample {
                    switch_voltage_v: f64::NAN,
                    inductor_current_a: f64::NAN,
                    gate_on: false,
                };
                shifted.len()
            ];
            ring.waveform(&cell, never, &shifted, &mut out)?;
            Ok(out.iter().map(|w| w.switch_voltage_v).collect())
        }
    }
}

/// RMS of the capture less the prediction (volt) over the samples where
/// the prediction is defined, and how many those are.
#[must_use]
pub fn residual_rms(capture: &Capture, predicted: &[f64]) -> (f64, usize) {
    let (sum, n) = capture
        .switch_v
        .iter()
        .zip(predicted)
        .filter(|(_, p)| p.is_finite())
        .fold((0.0, 0usize), |(s, n), (v, p)| {
            (s + (v - p) * (v - p), n + 1)
        });
    ((sum / n.max(1) as f64).sqrt(), n)
}
