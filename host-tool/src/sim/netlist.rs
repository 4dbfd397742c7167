//! A SPICE deck of a design's switch cell at one operating point, with the
//! turn-on the design's timer would command there, for the user's own
//! simulator: `zvs-timing netlist DESIGN.toml --vin V --io A`.
//!
//! The gate edges in the deck are the switch's own (the driver's delays are
//! already applied): off at `t_off`, on again at `t_off` plus the commanded
//! delay in ticks over the timer clock plus the driver's net lead. The deck
//! measures the transition's events with `.meas` (see [`crate::sim::spice::meas`])
//! and the switch voltage at the turn-on edge, which is about 0 V when the
//! turn-on lands in the ZVS window.

use std::fmt::Write as _;

use timing_core::Ticks;

use crate::model::design::Design;
use crate::sim::spice::CellDeck;

/// What the tool predicts at the point, for comparison with the deck's
/// `.meas` results (times from gate turn-off, second).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Prediction {
    /// Normalised load J.
    pub normalized_load: f64,
    /// Window opening, second (`None` below the ZVS boundary).
    pub window_open_s: Option<f64>,
    /// Window closing, second.
    pub window_close_s: Option<f64>,
    /// Valley, second (`None` where ZVS is possible).
    pub valley_s: Option<f64>,
    /// Commanded delay, ticks.
    pub delay_ticks: u32,
    /// Switch turn-on instant, second.
    pub turn_on_s: f64,
    /// Switch voltage expected at turn-on, volt: 0 in the window, the
    /// valley voltage below the boundary.
    pub expected_switch_voltage_at_turn_on_v: f64,
    /// Gate turn-off instant in the deck, second.
    pub t_off_s: f64,
}

/// Why no deck could be written.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum NetlistError {
    /// timing-core refused the point or the delay.
    #[error(transparent)]
    Model(#[from] timing_core::Error),
}

/// The deck and the prediction at (`vin_v`, `io_a`).
///
/// # Errors
/// timing-core's error for an impossible point, or a delay the timer
/// cannot hold.
pub fn netlist(
    design: &Design,
    vin_v: f64,
    io_a: f64,
) -> Result<(String, Prediction), NetlistError> {
    let cell = design.cell(vin_v, io_a)?;
    let model = crate::model::exact::ExactModel::new(design);
    let t = model.solver().transition(&cell)?;
    let timer = &design.timer;
    let ticks: Ticks = match (t.turn_on.window(), design.fallback) {
        (None, timing_core::table::Fallback::Fixed(n)) => n,
        _ => timer.command_for(&t.turn_on, design.position)?.ticks(),
    };
    let turn_on_s = timer.turn_on_s(ticks);
    let w0 = design.tank.w0_rad_s();
    let t_off_s = 20.0 / w0;
    let ramp_end = t.turn_on.ramp_end_s();
    let deck = CellDeck {
        topology: design.topology,
        lr_h: design.real.lr_h,
        cr_f: design.real.cr_fixed_f,
        coss: design.real.coss.clone(),
        r_tank_ohm: design.real.r_tank_ohm,
        vin_v,
        vout_v: design.vout_v.unwrap_or(0.0),
        inductor_current_a: cell.i_amp(),
        t_off_s,
        turn_on_s: Some(turn_on_s),
        duration_s: 1.5 * ramp_end.max(turn_on_s),
        max_step_s: 1.0 / w0 / 2000.0,
        average_over_s: None,
    };
    let p = Prediction {
        normalized_load: design.tank.normalized_load(&cell),
        window_open_s: t.turn_on.window().map(|w| w.open_s),
        window_close_s: t.turn_on.window().map(|w| w.close_s),
        valley_s: t.turn_on.valley().map(|v| v.valley_s),
        delay_ticks: ticks.get(),
        turn_on_s,
        expected_switch_voltage_at_turn_on_v: t
            .turn_on
            .valley()
            .map_or(0.0, |v| v.valley_voltage_v),
        t_off_s,
    };
    let mut s = String::new();
    let _ = writeln!(
        s,
        "* zvs-timing netlist of design `{}` at Vin = {vin_v} V, Io = {io_a} A ({}).",
        design.name,
        design.topology.name()
    );
    let _ = writeln!(
        s,
        "* CAUTION: a simulation of a model of the cell; verify on the bench at reduced voltage with a scope."
    );
    let _ = writeln!(s, "* Model: {}.", design.model_summary());
    let q = crate::units::format_si;
    let _ = writeln!(
        s,
        "* Gate edges are the switch's (driver delays applied): off at {}, on {} later",
        q(t_off_s, "s"),
        q(turn_on_s, "s")
    );
    let _ = writeln!(
        s,
        "* (the timer's {} ticks at {} plus the driver's net lead of {}).",
        ticks.get(),
        q(timer.clock_hz(), "Hz"),
        q(timer.lead_s(), "s")
    );
    let _ = writeln!(
        s,
        "* Predicted, from gate turn-off: J = {:.5}",
        p.normalized_load
    );
    match (p.window_open_s, p.window_close_s, p.valley_s) {
        (Some(o), Some(c), _) => {
            let _ = writeln!(
                s,
                "*   ZVS window {} to {} (.meas t_open - t_off and t_rise - t_off); v_on = 0 V",
                q(o, "s"),
                q(c, "s")
            );
        }
        (_, _, Some(v)) => {
            let _ = writeln!(
                s,
                "*   no ZVS: valley at {}, switch voltage there {} (.meas v_on)",
                q(v, "s"),
                q(p.expected_switch_voltage_at_turn_on_v, "V")
            );
        }
        _ => {}
    }
    s.push_str(&deck.netlist());
    Ok((s, p))
}
