//! The ideal tank that stands in for a real one (a Coss curve, a lossy
//! loop) wherever a constant-capacitance model is needed: the 1-D layouts'
//! load axis and the closed-form methods.

use timing_core::{CellPoint, Tank, Topology, Transition, WindowPosition};

use crate::tank::real_tank::RealTank;

/// Why no stand-in could be fitted.
#[derive(Debug, Clone, Copy, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum StandInError {
    /// The tank's values (Lr, the capacitance, the loop) are refused.
    #[error("{0}")]
    Tank(timing_core::Error),
    /// The aim position is refused.
    #[error("{0}")]
    Position(timing_core::Error),
    /// An operating point of the range is no valid point of the cell.
    #[error("at {vin_v} V, {io_a} A: {source}")]
    Point {
        /// Input voltage, volt.
        vin_v: f64,
        /// Output current, ampere.
        io_a: f64,
        /// timing-core's error.
        source: timing_core::Error,
    },
    /// The lossy tank cannot reach ZVS at the middle cell voltage.
    #[error("no ZVS at {cell_v} V cell voltage: {source}")]
    NoZvs {
        /// Cell voltage, volt.
        cell_v: f64,
        /// timing-core's error.
        source: timing_core::Error,
    },
}

/// The ideal tank that stands in for a real one (Coss curve, losses) where
/// a constant-capacitance model is needed (the 1-D layouts' load axis, the
/// closed-form methods): its Z0 puts J = 1 on the real ZVS boundary at the
/// middle of the voltage range, and its w0 is the least-squares fit of the
/// closed-form turn-on targets to the real model's over a 9 x 17 grid of the
/// design range (the targets scale with 1/w0 at fixed J).
pub fn fitted_tank(
    real: &RealTank,
    topology: Topology,
    vout: Option<f64>,
    vin: (f64, f64),
    io: (f64, f64),
    position: f64,
) -> Result<Tank<f64>, StandInError> {
    let solver = real.solver().map_err(StandInError::Tank)?;
    let position = WindowPosition::new(position).map_err(StandInError::Position)?;
    let cell = |v: f64, i: f64| {
        CellPoint::from_converter(topology, v, vout.unwrap_or(f64::NAN), i).map_err(|source| {
            StandInError::Point {
                vin_v: v,
                io_a: i,
                source,
            }
        })
    };
    let mid = cell(0.5 * (vin.0 + vin.1), 1.0)?.v_volt();
    let z0 = mid
        / solver
            .boundary_current_a(mid)
            .map_err(|source| StandInError::NoZvs {
                cell_v: mid,
                source,
            })?;
    let reference = real.equivalent_tank(mid).map_err(StandInError::Tank)?;
    let w_ref = reference.w0_rad_s();
    let unit = Tank::new(z0 / w_ref, 1.0 / (z0 * w_ref)).map_err(StandInError::Tank)?;
    let (mut num, mut den) = (0.0, 0.0);
    for a in 0..9 {
        for b in 0..17 {
            let v = vin.0 + (vin.1 - vin.0) * f64::from(a) / 8.0;
            let i = io.0 + (io.1 - io.0) * f64::from(b) / 16.0;
            let c = cell(v, i)?;
            let exact = solver
                .transition(&c)
                .map_err(|source| StandInError::Point {
                    vin_v: v,
                    io_a: i,
                    source,
                })?;
            let ideal = Transition::new(&unit, &c).map_err(|source| StandInError::Point {
                vin_v: v,
                io_a: i,
                source,
            })?;
            let (te, ti) = (
                exact.turn_on.target_s(position),
                ideal.turn_on_target_s(position),
            );
            num += te * ti;
            den += ti * ti;
        }
    }
    let w = w_ref * den / num;
    Tank::new(z0 / w, 1.0 / (z0 * w)).map_err(StandInError::Tank)
}
