//! One operating point: the transition, the ZVS window or valley, the
//! commanded delay and (buck) the regulating frequency, as a report for
//! people and for scripts. All physics comes from timing-core.

use serde::Serialize;
use timing_core::{
    CellPoint, Error as CoreError, Quantity, Tank, Timer, Topology, Transition, WindowPosition,
};

use crate::tank::real_tank::RealTank;

/// Derating applied to a given switch voltage rating when none is stated:
/// use at most 80 % of the rated drain-source voltage (common practice, no source).
pub const DEFAULT_DERATING: f64 = 0.8;

/// Peak-to-cell voltage ratio above which the report warns about stress when
/// no switch rating is given: 1 + J > 4, i.e. J > 3 (our choice: at that
/// load the switch blocks four times the supply).
pub const HIGH_STRESS_RATIO: f64 = 4.0;

/// Safety notice carried by every report.
pub const CAUTION: &str = "CAUTION: resonant converters run at lethal voltages and store energy. \
These figures come from a model of the cell: bring the board up at reduced voltage, check the switch \
node with a scope before relying on them, and follow local electrical codes and licensed practice.";

/// The timer and gate driver of a [`PointInput`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TimerInput {
    /// Timer clock, hertz.
    pub clock_hz: f64,
    /// Counter width, bits.
    pub counter_bits: u8,
    /// Gate-driver turn-on propagation delay, second.
    pub turn_on_delay_s: f64,
    /// Gate-driver turn-off propagation delay, second.
    pub turn_off_delay_s: f64,
}

/// Everything the `point` command takes, in SI units.
#[derive(Debug, Clone, PartialEq)]
pub struct PointInput {
    /// Converter topology.
    pub topology: Topology,
    /// Resonant inductance, henry.
    pub lr_h: f64,
    /// Resonant capacitance, farad (with `coss`, the fixed part in parallel
    /// with the curve; may then be 0).
    pub cr_f: f64,
    /// The MOSFET's Coss curve (empty: none, `cr_f` is the whole Cr).
    pub coss: Vec<timing_core::coss::CossPoint<f64>>,
    /// Series resistance of the resonant loop, ohm (0: lossless).
    pub r_tank_ohm: f64,
    /// Input voltage, volt.
    pub vin_v: f64,
    /// Output voltage, volt (needed for boost and buck-boost; for the buck it
    /// asks for the regulating switching frequency).
    pub vout_v: Option<f64>,
    /// Output current, ampere.
    pub io_a: f64,
    /// Timer and driver, if a delay in ticks is wanted.
    pub timer: Option<TimerInput>,
    /// Aim point in the ZVS window, 0..=1.
    pub position: f64,
    /// Switching frequency for the buck conversion ratio, hertz.
    pub fs_hz: Option<f64>,
    /// Switch drain-source voltage rating, volt, for the stress warning.
    pub vds_rating_v: Option<f64>,
    /// Fraction of the rating allowed in use.
    pub derating: f64,
    /// Tolerances and sensing errors for the robust window (`None`: not asked).
    pub uncertainty: Option<UncertaintyInput>,
}

/// Tolerances and sensing errors of `point` (fractions, second).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct UncertaintyInput {
    /// Relative tolerance of Lr (0.1 for 10 %).
    pub lr_rel: f64,
    /// Relative tolerance of Cr.
    pub cr_rel: f64,
    /// Relative error of the sensed Vin.
    pub vin_rel: f64,
    /// Relative error of the sensed Io.
    pub io_rel: f64,
    /// Peak timer jitter, second.
    pub jitter_s: f64,
    /// Absolute error of the sensed Vin (offset plus peak noise), volt.
    pub vin_abs_v: f64,
    /// Absolute error of the sensed Io (offset plus peak noise), ampere.
    pub io_abs_a: f64,
}

/// A rejected input: which option and why, in one line.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{option}: {message}")]
pub struct InputError {
    /// The command-line option (or design-file key) at fault, e.g. `--lr`.
    pub option: &'static str,
    /// What is wrong, naming the value.
    pub message: String,
}

impl InputError {
    /// An error on `option`.
    pub fn new(option: &'static str, message: impl Into<String>) -> Self {
        Self {
            option,
            message: message.into(),
        }
    }
}

/// The command-line option that sets `q` (for error messages).
#[must_use]
pub fn option_for(q: Quantity) -> &'static str {
    match q {
        Quantity::ResonantInductance => "--lr",
        Quantity::ResonantCapacitance => "--cr",
        Quantity::InputVoltage => "--vin",
        Quantity::OutputVoltage => "--vout",
        Quantity::OutputCurrent => "--io",
        Quantity::TimerClock => "--timer-hz",
        Quantity::CounterBits => "--counter-bits",
        Quantity::TurnOnDelay => "--driver-delay",
        Quantity::TurnOffDelay => "--driver-delay-off",
        Quantity::WindowPosition => "--position",
        Quantity::SwitchingFrequency => "--fs",
        Quantity::ConversionRatio => "--vout",
        Quantity::DelayTicks => "--timer-hz",
        _ => "operating point",
    }
}

fn quantity_of(e: &CoreError) -> Option<Quantity> {
    match *e {
        CoreError::NotFinite { quantity, .. }
        | CoreError::NotPositive { quantity, .. }
        | CoreError::Negative { quantity, .. }
        | CoreError::Subnormal { quantity, .. }
        | CoreError::OutOfRange { quantity, .. }
        | CoreError::Overflow { quantity } => Some(quantity),
        CoreError::TickOverflow { .. } => Some(Quantity::DelayTicks),
        CoreError::DelayNegative { .. } => Some(Quantity::TurnOnDelay),
        CoreError::FrequencyTooHigh { .. } => Some(Quantity::SwitchingFrequency),
        _ => None,
    }
}

impl From<CoreError> for InputError {
    fn from(e: CoreError) -> Self {
        let option = quantity_of(&e).map_or("operating point", option_for);
        InputError::new(option, e.to_string())
    }
}

/// The `point` report. Times are seconds from gate turn-off at the switch;
/// fields that do not apply are `null` in JSON.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PointReport {
    /// `buck`, `boost` or `buck-boost`.
    pub topology: &'static str,
    /// Cell voltage V the switch blocks, volt.
    pub cell_voltage_v: f64,
    /// Cell current I the switch carries, ampere.
    pub cell_current_a: f64,
    /// `closed forms` (ideal tank) or `numerical ring` (Coss curve or loss).
    pub model: &'static str,
    /// Characteristic impedance Z0 = sqrt(Lr/Cr), ohm (with a Coss curve,
    /// of the boundary-equivalent capacitance at the cell voltage).
    pub z0_ohm: f64,
    /// Resonant frequency f0, hertz.
    pub f0_hz: f64,
    /// Whether ZVS is possible (J >= 1).
    pub zvs: bool,
    /// J = I*Z0/V.
    pub normalized_load: f64,
    /// Lightest cell current with ZVS at this cell voltage, V/Z0, ampere.
    pub zvs_boundary_current_a: f64,
    /// End of the linear charge (switch voltage reaches V), s.
    pub charge_end_s: f64,
    /// Time of the peak switch voltage, s.
    pub peak_s: f64,
    /// Peak switch voltage V*(1 + J), volt.
    pub peak_switch_voltage_v: f64,
    /// ZVS window opens (switch voltage at zero), s.
    pub window_open_s: Option<f64>,
    /// ZVS window closes (inductor current at zero), s.
    pub window_close_s: Option<f64>,
    /// Window width, s.
    pub window_width_s: Option<f64>,
    /// Valley of the switch voltage below the ZVS boundary, s.
    pub valley_s: Option<f64>,
    /// Switch voltage at the valley, volt.
    pub valley_voltage_v: Option<f64>,
    /// End of the current ramp (freewheel diode off), s.
    pub current_ramp_end_s: f64,
    /// Instant aimed at (position in the window, or the valley), s.
    pub turn_on_target_s: f64,
    /// Position in the window aimed at, 0..=1.
    pub window_position: f64,
    /// Commanded delay from the turn-off command, timer ticks.
    pub delay_ticks: Option<u32>,
    /// The same delay in seconds.
    pub delay_s: Option<f64>,
    /// When the switch turns on with that delay (after the driver), s.
    pub commanded_turn_on_s: Option<f64>,
    /// Whether that turn-on is inside the ZVS window.
    pub in_window: Option<bool>,
    /// Time from window open to the turn-on, s (negative: too early).
    pub margin_after_open_s: Option<f64>,
    /// Time from the turn-on to window close, s (negative: too late).
    pub margin_before_close_s: Option<f64>,
    /// One timer tick, s.
    pub tick_s: Option<f64>,
    /// Buck conversion ratio Vout/Vin at the switching frequency.
    pub conversion_ratio: Option<f64>,
    /// Switching frequency (given, or regulating to `--vout` for the buck), Hz.
    pub switching_frequency_hz: Option<f64>,
    /// On-interval at that frequency, s.
    pub on_time_s: Option<f64>,
    /// Highest switching frequency with a non-negative on-time, Hz.
    pub max_switching_frequency_hz: f64,
    /// The robust window's opening: the latest true opening over the
    /// tolerance box plus the jitter, second from gate turn-off (`None`
    /// where the box reaches below the ZVS boundary, the intersection is
    /// empty, or no tolerance was given).
    pub robust_window_open_s: Option<f64>,
    /// The robust window's close: the earliest true close less the jitter.
    pub robust_window_close_s: Option<f64>,
    /// Commanded turn-on (nominal aim) after the robust opening, second
    /// (negative: before it).
    pub robust_margin_after_open_s: Option<f64>,
    /// Robust close after the commanded turn-on, second (negative: after it).
    pub robust_margin_before_close_s: Option<f64>,
    /// The delay aimed at `position` inside the robust window, moved to the
    /// nearest tick inside it, ticks (`None` where no tick lands in it: treat
    /// the point as ZVS-impossible and apply the fallback).
    pub robust_delay_ticks: Option<u32>,
    /// With a Coss curve: the curve's charge-equivalent capacitance Co(tr) =
    /// Q(V)/V at the cell voltage, farad (MOSFET only, without `cr`).
    pub coss_charge_equivalent_f: Option<f64>,
    /// The curve's energy-equivalent capacitance Co(er) = 2E(V)/V^2, farad.
    pub coss_energy_equivalent_f: Option<f64>,
    /// The whole capacitance's boundary equivalent cr + 2*Co(tr) - Co(er),
    /// farad: the constant one with the same lossless ZVS boundary.
    pub boundary_capacitance_f: Option<f64>,
    /// Series resistance of the resonant loop, ohm.
    pub r_tank_ohm: f64,
    /// With a Coss curve: the window the ideal formulas give with a constant
    /// cr + Co(tr), as (open, close) second (`None` where they see no ZVS),
    /// to show what the curve changes.
    pub ideal_co_tr_window_s: Option<(f64, f64)>,
    /// The same with a constant cr + Co(er).
    pub ideal_co_er_window_s: Option<(f64, f64)>,
    /// Plain-language warnings.
    pub warnings: Vec<String>,
    /// Safety notice.
    pub caution: &'static str,
}

/// Ranges outside which an input is taken for a typing error (a wrong unit
/// prefix, most often) rather than a real part: option, unit, lowest, highest.
/// The model itself has no such limits; these only keep nonsense out of reports.
pub const PLAUSIBLE: &[(&str, &str, f64, f64)] = &[
    ("--lr", "H", 1e-12, 1.0),
    ("--cr", "F", 1e-15, 1.0),
    ("--vin", "V", 1e-3, 1e6),
    ("--vout", "V", 1e-3, 1e6),
    ("--io", "A", 1e-6, 1e6),
    ("--timer-hz", "Hz", 1e3, 1e11),
    ("--driver-delay", "s", 0.0, 1e-3),
    ("--driver-delay-off", "s", 0.0, 1e-3),
    ("--fs", "Hz", 1.0, 1e9),
];

/// Refuse a finite, positive `value` of `option` outside [`PLAUSIBLE`].
/// Non-finite and non-positive values pass through, for timing-core to name.
fn plausible(option: &'static str, value: f64) -> Result<(), InputError> {
    let Some(&(_, unit, lo, hi)) = PLAUSIBLE.iter().find(|p| p.0 == option) else {
        return Ok(());
    };
    if value.is_finite() && value > 0.0 && !(lo..=hi).contains(&value) {
        return Err(InputError::new(
            option,
            format!(
                "{value:e} {unit} is outside what zvs-timing accepts ({} to {}); is the unit prefix right?",
                crate::units::format_si(lo, unit),
                crate::units::format_si(hi, unit)
            ),
        ));
    }
    Ok(())
}

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
        plausible("--timer-hz", t.clock_hz)?;
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
        } => InputError::new("--tank-resistance", e.to_string()),
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
        } => InputError::new("--tank-resistance", e.to_string()),
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
        let timer = Timer::new(
            ti.clock_hz,
            ti.counter_bits,
            ti.turn_on_delay_s,
            ti.turn_off_delay_s,
        )?;
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

/// The robust window and the commands against it.
fn robust(
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
        ("--vin-offset", u.vin_abs_v, input.vin_v),
        ("--io-offset", u.io_abs_a, input.io_a),
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
                    } => "--vin-err",
                    timing_core::Error::OutOfRange {
                        quantity: timing_core::Quantity::OutputCurrent,
                        ..
                    } => "--io-err",
                    _ => "--jitter",
                };
                InputError::new(option, e.to_string())
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
        let timer = Timer::new(
            ti.clock_hz,
            ti.counter_bits,
            ti.turn_on_delay_s,
            ti.turn_off_delay_s,
        )?;
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
        if report.robust_delay_ticks.is_none() {
            report.warnings.push(format!(
                "the robust window is {:.2} ns wide, narrower than a tick ({:.2} ns): no delay is \
                 reliably ZVS on every board; treat this point as ZVS-impossible",
                (rw.close_s - rw.open_s) * 1e9,
                1e9 / ti.clock_hz
            ));
        } else if on < rw.open_s || on > rw.close_s {
            report.warnings.push(
                "the nominal delay lies outside the robust window: use robust_delay_ticks"
                    .to_owned(),
            );
        }
    }
    Ok(())
}

/// The robust window of a tank with a Coss curve or a lossy loop: the box
/// of sensed Vin and Io mapped to the cell (the mapping is monotonic in
/// each, so its corners bound it) and the model gridded over it
/// ([`crate::tank::robust_grid`]).
fn real_robust_window(
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
