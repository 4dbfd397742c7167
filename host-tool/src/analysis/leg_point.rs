//! One operating point of a half-bridge leg's edge in detail: the swing,
//! the window (nominal and robust), and the dead time to command.

use timing_core::leg::{Edge, EdgeTurnOn};

use crate::input::leg_design::LegSpec;
use crate::model::leg_model::LegModel;

/// The edge at one reading, for people and for `--json`.
#[derive(Debug, Clone, serde::Serialize)]
pub struct LegPointReport {
    /// Design name.
    pub name: String,
    /// `falling` or `rising`.
    pub edge: &'static str,
    /// Bus voltage, volt.
    pub vbus_v: f64,
    /// Current out of the node at the switching instant, ampere.
    pub current_a: f64,
    /// The inductor's far end, volt.
    pub far_v: f64,
    /// The nominal window after the outgoing switch's turn-off, second
    /// (`None`: the swing stops short).
    pub window_s: Option<(f64, f64)>,
    /// Whether the window closes by the current's reversal (else at the
    /// accepted diode conduction).
    pub reverses: Option<bool>,
    /// Current into the incoming body diode when the window opens, ampere.
    pub clamp_current_a: f64,
    /// Where the swing stops short: the extremum's instant (second) and the
    /// voltage left across the incoming switch (volt).
    pub short: Option<(f64, f64)>,
    /// The window every leg of the tolerance box shares, second.
    pub robust_window_s: Option<(f64, f64)>,
    /// The dead time to command, steps (the aim, rounded half up).
    pub dead_time_steps: u32,
    /// The same, second (from the outgoing switch's turn-off command to the
    /// incoming one's turn-on command).
    pub dead_time_s: f64,
    /// When the incoming switch turns on, second after the outgoing one
    /// turned off (the drivers' delays applied).
    pub turn_on_s: f64,
    /// The aim before rounding, steps.
    pub aim_steps: f64,
    /// The least dead time, steps.
    pub least_steps: u32,
    /// Whether the turn-on lands inside the nominal window.
    pub in_window: bool,
    /// Warnings (outside the design range).
    pub warnings: Vec<String>,
    /// The safety note.
    pub caution: &'static str,
}

/// The edge of `spec` at `vbus_v` volt and `current_a` ampere (signed, out
/// of the node).
///
/// # Errors
/// timing-core's error for a point it refuses.
pub fn evaluate_leg(
    spec: &LegSpec,
    edge: Edge,
    vbus_v: f64,
    current_a: f64,
) -> Result<LegPointReport, timing_core::Error> {
    let model = LegModel::over(spec, edge, (vbus_v, vbus_v), (current_a, current_a))?;
    let p = model.at(vbus_v, current_a)?;
    let timer = spec.timer.edge_timer(edge);
    let secs = |steps: f64| steps / timer.clock_hz() + timer.lead_s();
    let steps = (p.aim + 0.5).floor().max(0.0);
    let turn_on_s = secs(steps);
    let window = p.transition.turn_on.window();
    let mut warnings = Vec::new();
    let (lo, hi) = spec.vbus_v;
    if !(lo..=hi).contains(&vbus_v) {
        warnings.push(format!(
            "vbus = {vbus_v} V lies outside the design range {lo} to {hi} V: no table was proven there"
        ));
    }
    let (lo, hi) = spec.current_a[crate::input::leg_design::edge_index(edge)];
    if !(lo..=hi).contains(&current_a) {
        warnings.push(format!(
            "current = {current_a} A lies outside the {} edge's range {lo} to {hi} A: no table was proven there",
            crate::input::leg_design::edge_name(edge)
        ));
    }
    Ok(LegPointReport {
        name: spec.name.clone(),
        edge: crate::input::leg_design::edge_name(edge),
        vbus_v,
        current_a,
        far_v: spec.built.far_v(vbus_v, 1.0),
        window_s: window.map(|w| (w.open_s, w.close_s)),
        reverses: window.map(|w| w.reverses),
        clamp_current_a: p.transition.clamp_start_current_a,
        short: match p.transition.turn_on {
            EdgeTurnOn::Short(s) => Some((s.extremum_s, s.remaining_v)),
            EdgeTurnOn::Zvs(_) => None,
        },
        robust_window_s: p.robust.map(|(a, b)| (secs(a), secs(b))),
        dead_time_steps: steps as u32,
        dead_time_s: steps / timer.clock_hz(),
        turn_on_s,
        aim_steps: p.aim,
        least_steps: spec.timer.least(edge).get(),
        in_window: window.is_some_and(|w| turn_on_s >= w.open_s && turn_on_s <= w.close_s),
        warnings,
        caution: crate::analysis::point::CAUTION,
    })
}
