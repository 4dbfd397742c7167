//! `netlist` for a half-bridge leg: the SPICE deck of one edge at one
//! operating point ([`crate::sim::leg_deck`]) with the incoming switch
//! turned on at the dead time the design commands there, and the model's
//! prediction beside it.

use timing_core::leg::Edge;

use crate::analysis::leg_point::{evaluate_leg, LegPointReport};
use crate::input::leg_design::LegSpec;
use crate::sim::leg_deck::LegDeck;

/// The deck of `edge` of `spec` at `vbus_v` volt and `current_a` ampere
/// (signed, out of the node), the incoming switch on at the commanded dead
/// time, and the model's report of the same point.
///
/// # Errors
/// timing-core's error for a point it refuses.
pub fn leg_netlist(
    spec: &LegSpec,
    edge: Edge,
    vbus_v: f64,
    current_a: f64,
) -> Result<(String, LegPointReport), timing_core::Error> {
    let report = evaluate_leg(spec, edge, vbus_v, current_a)?;
    let b = &spec.built;
    // Past the later of the turn-on and the window's close (or the
    // extremum), with room to see the node settle.
    let last = report
        .window_s
        .map(|w| w.1)
        .or(report.short.map(|s| s.0))
        .unwrap_or(0.0)
        .max(report.turn_on_s);
    let duration = 1.3 * last + 20e-9;
    let deck = LegDeck {
        edge,
        low_coss: b.low.clone(),
        high_coss: b.high.clone(),
        c_ext_f: b.c_ext_f,
        l_h: b.l_h,
        r_ohm: b.r_ohm,
        vbus_v,
        far_v: report.far_v,
        current_a,
        t_off_s: 20e-9,
        duration_s: duration,
        max_step_s: duration / 4000.0,
        turn_on_s: Some(report.turn_on_s),
    };
    let solver = &crate::sim::spice::SOLVER_LADDER[0];
    let mut text = deck.netlist_with(solver);
    let note = format!(
        "* model: {} edge, window {}, incoming switch on at {:.3} ns ({} steps of dead time)\n* CAUTION: a simulation of a model of the leg; verify on the bench at reduced voltage with a scope.\n",
        report.edge,
        report.window_s.map_or_else(
            || "none (the swing stops short)".to_owned(),
            |w| format!("{:.3} .. {:.3} ns", w.0 * 1e9, w.1 * 1e9)
        ),
        report.turn_on_s * 1e9,
        report.dead_time_steps
    );
    // After the title line.
    let at = text.find('\n').map_or(0, |k| k + 1);
    text.insert_str(at, &note);
    Ok((text, report))
}
