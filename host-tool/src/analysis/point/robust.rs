//! The robust window at one point: the intersection of the true windows
//! over the tolerance box (timing-core's proof for an ideal tank, the
//! grid of [`crate::tank::robust_grid`] for a real one), and the commands
//! against it.

use timing_core::{CellPoint, Tank, WindowPosition};

use super::input::{InputError, PointInput, UncertaintyInput};
use super::report::PointReport;
use crate::tank::real_tank::RealTank;

/// The robust window and the commands against it.
pub(super) fn robust(
    input: &PointInput,
    real: &RealTank,
    tank: &Tank<f64>,
    cell: &CellPoint<f64>,
    u: UncertaintyInput,
    report: &mut PointReport,
) -> Result<(), InputError> {
    // Absolute errors join the relative ones at the sensed point: a true
    // value within m*(1 +- g) +- a lies within m*(1 +- (g + a/m)).
    for (option, a, m) in [
        ("--vin-offset-volts", u.vin_abs_v, input.vin_v),
        ("--io-offset-amps", u.io_abs_a, input.io_a),
    ] {
        if !(a.is_finite() && a >= 0.0 && a < m) {
            return Err(InputError::new(
                option,
                format!(
                    "the absolute sensing error must lie in [0, {m}) (below the sensed value), got {a}"
                ),
            ));
        }
    }
    let (vin_rel, io_rel) = (
        u.vin_rel + u.vin_abs_v / input.vin_v,
        u.io_rel + u.io_abs_a / input.io_a,
    );
    let unc =
        timing_core::robust::Uncertainty::new(u.lr_rel, u.cr_rel, vin_rel, io_rel, u.jitter_s)
            .map_err(|e| {
                let option = match e {
                    timing_core::Error::OutOfRange {
                        quantity: timing_core::Quantity::ResonantInductance,
                        ..
                    } => "--lr-tol",
                    timing_core::Error::OutOfRange {
                        quantity: timing_core::Quantity::ResonantCapacitance,
                        ..
                    } => "--cr-tol",
                    timing_core::Error::OutOfRange {
                        quantity: timing_core::Quantity::InputVoltage,
                        ..
                    } => "--vin-gain",
                    timing_core::Error::OutOfRange {
                        quantity: timing_core::Quantity::OutputCurrent,
                        ..
                    } => "--io-gain",
                    _ => "--jitter",
                };
                let message = match e {
                    timing_core::Error::OutOfRange {
                        value, min, max, ..
                    } if option != "--jitter" => format!(
                        "a tolerance half-width must lie in [{min}, {max}] ({} % to {} %), got {value} ({} %)",
                        100.0 * min,
                        100.0 * max,
                        100.0 * value
                    ),
                    e => e.to_string(),
                };
                InputError::new(option, message)
            })?;
    let found = if real.is_ideal() {
        timing_core::robust::robust_window(tank, cell, &unc)?
    } else {
        real_robust_window(input, real, u)?
    };
    let Some(rw) = found else {
        report.warnings.push(
            "no turn-on is ZVS on every board within the tolerances (the tolerance box reaches below \
             the ZVS boundary or the true windows do not overlap): treat this point as ZVS-impossible \
             and use the fallback"
                .to_owned(),
        );
        return Ok(());
    };
    report.robust_window_open_s = Some(rw.open_s);
    report.robust_window_close_s = Some(rw.close_s);
    if let (Some(ti), Some(on)) = (input.timer, report.commanded_turn_on_s) {
        report.robust_margin_after_open_s = Some(on - rw.open_s);
        report.robust_margin_before_close_s = Some(rw.close_s - on);
        // The timer's own placement (timing-core), on the robust window:
        // none where no tick lands in it.
        let timer = ti.timer()?;
        let robust = timing_core::TurnOn::Zvs(timing_core::ZvsWindow {
            open_s: rw.open_s,
            close_s: rw.close_s,
            ramp_end_s: rw.open_s,
        });
        report.robust_delay_ticks = WindowPosition::new(input.position)
            .and_then(|p| timer.command_for(&robust, p))
            .ok()
            .filter(|c| c.is_in_window())
            .map(|c| c.ticks().get());
        if let Some(t) = report
            .robust_delay_ticks
            .filter(|_| on < rw.open_s || on > rw.close_s)
        {
            report.warnings.push(format!(
                "the nominal delay lies outside the robust window: command the robust delay, {t} ticks, instead"
            ));
        } else if report.robust_delay_ticks.is_none() {
            report.warnings.push(format!(
                "the robust window is {:.2} ns wide, narrower than a tick ({:.2} ns): no delay is \
                 reliably ZVS on every board; treat this point as ZVS-impossible",
                (rw.close_s - rw.open_s) * 1e9,
                1e9 / ti.clock_hz
            ));
        }
    }
    Ok(())
}

/// The robust window of a tank with a Coss curve or a lossy loop: the box
/// of sensed Vin and Io mapped to the cell (the mapping is monotonic in
/// each, so its corners bound it) and the model gridded over it
/// ([`crate::tank::robust_grid`]).
pub(super) fn real_robust_window(
    input: &PointInput,
    real: &RealTank,
    u: UncertaintyInput,
) -> Result<Option<timing_core::robust::RobustWindow<f64>>, InputError> {
    use crate::tank::robust_grid::{true_range, TankSpread, WindowGrid};
    let vin = true_range(input.vin_v, u.vin_rel, u.vin_abs_v);
    let io = true_range(input.io_a, u.io_rel, u.io_abs_a);
    let (v, i) = crate::tank::cell_box::cell_box(input.topology, input.vout_v, vin, io)?;
    let spread = TankSpread::new(u.lr_rel, u.cr_rel);
    let grid = WindowGrid::new(real, &spread, v, i)?;
    Ok(grid.robust(v, i, &spread, u.jitter_s))
}
