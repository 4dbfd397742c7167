//! What `point` reports, for people (through [`crate::report::render`]) and
//! for scripts (JSON): times in seconds from the gate's turn-off.

use serde::Serialize;

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
