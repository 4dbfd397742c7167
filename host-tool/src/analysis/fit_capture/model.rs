//! The switch-node trace a tank predicts, to compare with a scope capture
//! ([`crate::input::capture`]).
//!
//! The capture's time zero is the turn-off command; the switch turns off
//! `delay_off_s` later (the gate driver's turn-off delay), and in a
//! single-pulse test the gate stays off, so the ring runs until the model
//! no longer follows the circuit (after the window closes, or past the
//! valley), where the prediction is NaN and the sample does not count.

use timing_core::ring::RingCell;
use timing_core::waveform::WaveSample;
use timing_core::CellPoint;
use timing_core::TurnOn;

use crate::input::capture::Capture;
use crate::input::design::DesignSpec;
use crate::tank::real_tank::{scaled_curve, RealTank};

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
    /// Forward drop of the converter's diode while it carries the ring,
    /// volt: the ring then centres on the cell voltage plus this (the
    /// linear charge ends that much higher). The design's model has ideal
    /// diodes; a fit estimates it so that it does not bend the others.
    pub diode_drop_v: f64,
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
            diode_drop_v: 0.0,
        }
    }

    /// The tank as built with these values, the design's Coss curve scaled.
    #[must_use]
    pub fn tank(&self, design: &DesignSpec) -> RealTank {
        RealTank {
            lr_h: self.lr_h,
            cr_fixed_f: self.cr_f,
            coss: scaled_curve(&design.real.coss, self.coss_scale),
            r_tank_ohm: self.r_tank_ohm,
        }
    }
}

/// The switch voltage (volt) `guess` predicts at `times` (second from the
/// turn-off command, rising) at the converter point `vin_v` (volt), `io_a`
/// (ampere) of `design`'s topology, the gate left off: the linear charge,
/// the ring, the body-diode clamp to the window's close (or the valley),
/// then the ring left to itself
/// ([`timing_core::ring::RingCell::free_ring`]). NaN where the model does
/// not follow the circuit (past a state the ring's equations do not hold
/// in). The numerical ring serves every tank, a constant capacitance
/// without loss too, so that the trace is one smooth function of the
/// tank's values.
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
    let cell = CellPoint::new(cell.v_volt() + guess.diode_drop_v, cell.i_amp())?;
    let tank = guess.tank(design);
    let ring = RingCell::new(tank.lr_h, tank.capacitance()?, tank.r_tank_ohm)?;
    let shifted: Vec<f64> = times.iter().map(|t| t - guess.delay_off_s).collect();
    // The gate stays off: a turn-on far past any capture.
    let never = 1.0;
    let mut out = vec![
        WaveSample {
            switch_voltage_v: f64::NAN,
            inductor_current_a: f64::NAN,
            gate_on: false,
        };
        shifted.len()
    ];
    let rt = ring.waveform(&cell, never, &shifted, &mut out)?;
    let mut v: Vec<f64> = out.iter().map(|w| w.switch_voltage_v).collect();
    // After the window's close (from 0 V, 0 A) or the valley (from its
    // voltage, 0 A) the ring goes on by itself.
    let from = match rt.turn_on {
        TurnOn::Zvs(w) => (w.close_s, 0.0, 0.0),
        TurnOn::Valley(vl) => (vl.valley_s, vl.valley_voltage_v, 0.0),
    };
    let last = shifted.last().copied().unwrap_or(f64::NEG_INFINITY);
    if last > from.0 {
        let first = shifted.partition_point(|&t| t <= from.0);
        let mut k = first;
        let mut prev: Option<(f64, f64)> = None;
        ring.free_ring(&cell, from, last, &mut |t, vc, _| {
            if let Some((t0, v0)) = prev {
                while let Some(&tq) = shifted.get(k) {
                    if tq > t {
                        break;
                    }
                    let f = if t > t0 { (tq - t0) / (t - t0) } else { 1.0 };
                    v[k] = v0 + (vc - v0) * f;
                    k += 1;
                }
            }
            prev = Some((t, vc));
        })?;
    }
    Ok(v)
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
