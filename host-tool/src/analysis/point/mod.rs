//! One operating point: the transition, the ZVS window or valley, the
//! commanded delay and (buck) the regulating frequency, as a report for
//! people and for scripts. All physics comes from timing-core.

use timing_core::{
    CellPoint, Error as CoreError, Quantity, Tank, Topology, Transition, WindowPosition,
};

mod input;
mod report;
mod robust;

use input::plausible;
pub use input::{option_for, InputError, PointInput, TimerInput, UncertaintyInput, PLAUSIBLE};
pub use report::PointReport;
use robust::robust;

use crate::tank::real_tank::RealTank;

/// Derating applied to a given switch voltage rating when none is stated:
/// use at most 80 % of the rated drain-source voltage (common practice, no source).
pub const DEFAULT_DERATING: f64 = 0.8;

/// Peak-to-cell voltage ratio above which the report warns about stress when
/// no switch rating is given: 1 + J > 4, i.e. J > 3 (our choice: at that
/// load the switch blocks four times the supply).
pub const HIGH_STRESS_RATIO: f64 = 4.0;

/// Safety notice carried by every report.
pub const CAUTION: &str = "CAUTION: soft-switched converters run at lethal voltages and store energy. \
These figures come from a model of the circuit: bring the board up at reduced voltage, check the switch \
node with a scope before relying on them, and follow local electrical codes and licensed practice.";

/// Compute the report for `input`.
///
/// # Errors
/// [`InputError`] naming the option whose value is invalid or that makes the
/// point impossible (e.g. a delay beyond the timer counter).
pub fn evaluate(input: &PointInput) -> Result<PointReport, InputError> {
    plausible("--lr", input.lr_h)?;
    plausible("--cr", input.cr_f)?;
    plausible("--vin", input.vin_v)?;
    plausible("--io", input.io_a)?;
    if let Some(v) = input.vout_v {
        plausible("--vout", v)?;
    }
    if let Some(fs) = input.fs_hz {
        plausible("--fs", fs)?;
    }
    if let Some(t) = input.timer {
        plausible("--clock-hz", t.clock_hz)?;
        plausible("--driver-delay", t.turn_on_delay_s)?;
        plausible("--driver-delay-off", t.turn_off_delay_s)?;
    }
    let real = RealTank {
        lr_h: input.lr_h,
        cr_fixed_f: input.cr_f,
        coss: input.coss.clone(),
        r_tank_ohm: input.r_tank_ohm,
    };
    let solver = real.solver().map_err(|e| match e {
        CoreError::Negative {
            quantity: Quantity::TankResistance,
            ..
        }
        | CoreError::NotFinite {
            quantity: Quantity::TankResistance,
            ..
        } => InputError::new("--r-tank", e.to_string()),
        CoreError::NotPositive {
            quantity: Quantity::ResonantCapacitance,
            ..
        } if !input.coss.is_empty() => InputError::new("--cr", e.to_string()),
        _ => e.into(),
    })?;
    let vout = match (input.topology.needs_vout(), input.vout_v) {
        (true, None) => {
            return Err(InputError::new(
                "--vout",
                format!(
                    "the {} cell needs the output voltage",
                    input.topology.name()
                ),
            ))
        }
        (_, v) => v.unwrap_or(f64::NAN),
    };
    let cell = CellPoint::from_converter(input.topology, input.vin_v, vout, input.io_a)?;
    // The ideal tank: as given, or with a Coss curve the boundary-equivalent
    // constant capacitance at this cell voltage (J = 1 is then the lossless
    // boundary). Its closed forms serve the conversion ratio.
    let tank = real.equivalent_tank(cell.v_volt())?;
    let t = Transition::new(&tank, &cell)?;
    let exact = solver.transition(&cell).map_err(|e| match e {
        CoreError::OutOfRange {
            quantity: Quantity::TankResistance,
            ..
        } => InputError::new("--r-tank", e.to_string()),
        _ => e.into(),
    })?;
    let position = WindowPosition::new(input.position)?;
    let window = exact.turn_on.window();
    let valley = exact.turn_on.valley();
    let target = exact.turn_on.target_s(position);
    let mut warnings = Vec::new();
    let j = t.normalized_load();
    let boundary_current = solver.boundary_current_a(cell.v_volt())?;
    if let Some(v) = valley {
        warnings.push(format!(
            "ZVS is lost: the ring bottoms out at {:.1} V instead of 0 V (J = {j:.3}). \
             The delay aims at the valley (hard turn-on at reduced voltage). ZVS needs a cell current \
             of at least {:.3} A here, or a larger Z0.",
            v.valley_voltage_v, boundary_current
        ));
    }
    let peak = exact.peak_switch_voltage_v;
    match input.vds_rating_v {
        Some(rating) => {
            if !(rating.is_finite() && rating > 0.0) {
                return Err(InputError::new(
                    "--vds-rating",
                    format!("must be a positive voltage, got {rating}"),
                ));
            }
            if !(input.derating > 0.0 && input.derating <= 1.0) {
                return Err(InputError::new(
                    "--derating",
                    format!("must lie in (0, 1], got {}", input.derating),
                ));
            }
            let allowed = rating * input.derating;
            if peak > rating {
                warnings.push(format!(
                    "peak switch voltage {peak:.1} V exceeds the switch rating of {rating:.0} V: the MOSFET will avalanche"
                ));
            } else if peak > allowed {
                warnings.push(format!(
                    "peak switch voltage {peak:.1} V is above {:.0} % of the {rating:.0} V rating ({allowed:.1} V)",
                    input.derating * 100.0
                ));
            }
        }
        None if peak > HIGH_STRESS_RATIO * cell.v_volt() => warnings.push(format!(
            "high voltage stress: the switch peaks at {peak:.1} V, {:.1} times the cell voltage; \
             check it against the MOSFET rating (--vds-rating)",
            peak / cell.v_volt()
        )),
        None => {}
    }

    let cap = real.capacitance()?;
    let v_cell = cell.v_volt();
    let with_curve = !input.coss.is_empty();
    let ideal_window = |c: f64| -> Result<Option<(f64, f64)>, InputError> {
        let tk = Tank::new(input.lr_h, c)?;
        Ok(Transition::new(&tk, &cell)?
            .window()
            .map(|w| (w.open_s, w.close_s)))
    };
    let (co_tr, co_er) = (
        cap.charge_equivalent(v_cell) - input.cr_f,
        cap.energy_equivalent(v_cell) - input.cr_f,
    );
    let mut report = PointReport {
        topology: input.topology.name(),
        cell_voltage_v: cell.v_volt(),
        cell_current_a: cell.i_amp(),
        model: if real.is_ideal() {
            "closed forms"
        } else {
            "numerical ring"
        },
        z0_ohm: tank.z0_ohm(),
        f0_hz: tank.f0_hz(),
        zvs: exact.turn_on.is_zvs(),
        normalized_load: j,
        zvs_boundary_current_a: boundary_current,
        charge_end_s: exact.charge_end_s,
        peak_s: exact.peak_s,
        peak_switch_voltage_v: peak,
        window_open_s: window.map(|w| w.open_s),
        window_close_s: window.map(|w| w.close_s),
        window_width_s: window.map(|w| w.width_s()),
        valley_s: valley.map(|v| v.valley_s),
        valley_voltage_v: valley.map(|v| v.valley_voltage_v),
        current_ramp_end_s: exact.turn_on.ramp_end_s(),
        turn_on_target_s: target,
        window_position: position.get(),
        delay_ticks: None,
        delay_s: None,
        commanded_turn_on_s: None,
        in_window: None,
        margin_after_open_s: None,
        margin_before_close_s: None,
        tick_s: None,
        conversion_ratio: None,
        switching_frequency_hz: None,
        on_time_s: None,
        // The on-interval is what the period leaves after the transition.
        max_switching_frequency_hz: 1.0 / exact.turn_on.ramp_end_s(),
        robust_window_open_s: None,
        robust_window_close_s: None,
        robust_margin_after_open_s: None,
        robust_margin_before_close_s: None,
        robust_delay_ticks: None,
        coss_charge_equivalent_f: with_curve.then_some(co_tr),
        coss_energy_equivalent_f: with_curve.then_some(co_er),
        boundary_capacitance_f: with_curve.then(|| cap.boundary_equivalent(v_cell)),
        r_tank_ohm: input.r_tank_ohm,
        ideal_co_tr_window_s: if with_curve {
            ideal_window(input.cr_f + co_tr)?
        } else {
            None
        },
        ideal_co_er_window_s: if with_curve {
            ideal_window(input.cr_f + co_er)?
        } else {
            None
        },
        warnings,
        caution: CAUTION,
    };

    if let Some(ti) = input.timer {
        let timer = ti.timer()?;
        let cmd = timer.command_for(&exact.turn_on, position)?;
        let on = cmd.turn_on_s();
        report.delay_ticks = Some(cmd.ticks().get());
        report.delay_s = Some(f64::from(cmd.ticks().get()) / timer.clock_hz());
        report.commanded_turn_on_s = Some(on);
        report.tick_s = Some(1.0 / timer.clock_hz());
        if let Some(w) = window {
            report.in_window = Some(cmd.is_in_window());
            report.margin_after_open_s = Some(on - w.open_s);
            report.margin_before_close_s = Some(w.close_s - on);
            if !cmd.is_in_window() {
                report.warnings.push(format!(
                    "no timer tick lands in the ZVS window: it is {:.2} ns wide and one tick is {:.2} ns; \
                     use a faster (high-resolution) timer or aim at the valley",
                    w.width_s() * 1e9,
                    1e9 / timer.clock_hz()
                ));
            } else if w.width_s() < 3.0 / timer.clock_hz() {
                report.warnings.push(format!(
                    "the ZVS window is only {:.1} ticks wide: jitter or a small error in Lr, Cr or the \
                     sensed current moves the turn-on out of it",
                    w.width_s() * timer.clock_hz()
                ));
            }
        }
    }

    if let Some(u) = input.uncertainty {
        robust(input, &real, &tank, &cell, u, &mut report)?;
    }
    if !real.is_ideal()
        && (input.fs_hz.is_some() || input.vout_v.is_some())
        && input.topology == Topology::Buck
    {
        report.warnings.push(format!(
            "the conversion ratio comes from the ideal cell with the boundary-equivalent {:.4} nF",
            tank.cr_f() * 1e9
        ));
    }

    let regulation = match (input.topology, input.fs_hz, input.vout_v) {
        (Topology::Buck, Some(fs), _) => Some(t.buck_regulation_at(fs)?),
        (Topology::Buck, None, Some(vout)) => Some(
            t.buck_regulation_for_ratio(vout / input.vin_v)
                .map_err(|e| {
                    InputError::new(
                        "--vout",
                        format!(
                            "{e}; Vout = {vout} V is out of reach at Vin = {} V",
                            input.vin_v
                        ),
                    )
                })?,
        ),
        (_, Some(_), _) => {
            return Err(InputError::new(
                "--fs",
                "the conversion ratio is implemented for the buck cell only",
            ))
        }
        _ => None,
    };
    if let Some(r) = regulation {
        report.conversion_ratio = Some(r.conversion_ratio);
        report.switching_frequency_hz = Some(r.switching_frequency_hz);
        report.on_time_s = Some(r.on_time_s);
    }
    Ok(report)
}
