//! Human-readable rendering of reports.

use std::fmt::Write as _;

use crate::analysis::point::PointReport;
use crate::check::montecarlo::MonteCarloReport;
use crate::check::verify::VerifyReport;
use crate::units::format_si;

/// A margin (second) in ticks of `clock_hz` and in time, at a precision
/// that shows it: under a hundredth of a tick it is said to be so, with the
/// time in picoseconds.
fn margin_text(m: f64, clock_hz: f64) -> String {
    let ticks = m * clock_hz;
    if ticks.abs() >= 0.01 {
        format!("{ticks:.2} ticks ({:.3} ns)", m * 1e9)
    } else {
        format!("under 0.01 tick ({:.2} ps)", m * 1e12)
    }
}

fn ns(t: f64) -> String {
    format_si(t, "s")
}

/// The `point` report as a short table, times from gate turn-off.
#[must_use]
pub fn point_text(r: &PointReport) -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "{} cell   V = {}   I = {}   Z0 = {}   f0 = {}",
        r.topology,
        format_si(r.cell_voltage_v, "V"),
        format_si(r.cell_current_a, "A"),
        format_si(r.z0_ohm, "Ω"),
        format_si(r.f0_hz, "Hz"),
    );
    if let (Some(tr), Some(er), Some(b)) = (
        r.coss_charge_equivalent_f,
        r.coss_energy_equivalent_f,
        r.boundary_capacitance_f,
    ) {
        let _ = writeln!(
            s,
            "Coss at {}: Co(tr) = {}   Co(er) = {}   boundary-equivalent Cr = {} (cr + 2*Co(tr) - Co(er))",
            format_si(r.cell_voltage_v, "V"),
            format_si(tr, "F"),
            format_si(er, "F"),
            format_si(b, "F")
        );
    }
    if r.r_tank_ohm > 0.0 {
        let _ = writeln!(
            s,
            "resonant loop resistance {}",
            format_si(r.r_tank_ohm, "Ω")
        );
    }
    let _ = writeln!(
        s,
        "normalised load J = {:.4}   ({}; boundary at I = {})",
        r.normalized_load,
        if r.zvs {
            "ZVS possible"
        } else {
            "ZVS impossible"
        },
        format_si(r.zvs_boundary_current_a, "A")
    );
    let _ = writeln!(s);
    let _ = writeln!(s, "  event (from gate turn-off)            time");
    let _ = writeln!(s, "  ------------------------------------  ----------");
    let row = |s: &mut String, what: &str, t: f64| {
        let _ = writeln!(s, "  {what:<36}  {:>10}", ns(t));
    };
    row(&mut s, "switch voltage reaches V", r.charge_end_s);
    row(
        &mut s,
        &format!(
            "peak switch voltage {}",
            format_si(r.peak_switch_voltage_v, "V")
        ),
        r.peak_s,
    );
    if let (Some(open), Some(close)) = (r.window_open_s, r.window_close_s) {
        row(&mut s, "ZVS window opens (switch at 0 V)", open);
        row(&mut s, "ZVS window closes (Lr current at 0)", close);
        let _ = writeln!(s, "  {:<36}  {:>10}", "  window width", ns(close - open));
    }
    if let (Some(v), Some(vv)) = (r.valley_s, r.valley_voltage_v) {
        row(&mut s, &format!("valley at {}", format_si(vv, "V")), v);
    }
    row(&mut s, "current ramp ends", r.current_ramp_end_s);
    if r.coss_charge_equivalent_f.is_some() {
        // What the constant-capacitance formulas would have said.
        let show = |s: &mut String, what: &str, w: Option<(f64, f64)>| {
            let text = match (w, r.window_open_s, r.window_close_s) {
                (Some((o, c)), Some(eo), Some(ec)) => format!(
                    "{} to {} (opens {:+.1} ns, closes {:+.1} ns off the curve's)",
                    ns(o),
                    ns(c),
                    (o - eo) * 1e9,
                    (c - ec) * 1e9
                ),
                (Some((o, c)), _, _) => format!("{} to {} (the curve gives no ZVS)", ns(o), ns(c)),
                (None, Some(_), _) => "no ZVS (the curve gives a window)".to_owned(),
                (None, None, _) => "no ZVS".to_owned(),
            };
            let _ = writeln!(s, "  ideal formulas with cr + {what}: {text}");
        };
        let _ = writeln!(s);
        show(&mut s, "Co(tr)", r.ideal_co_tr_window_s);
        show(&mut s, "Co(er)", r.ideal_co_er_window_s);
    }
    let _ = writeln!(s);
    if r.zvs {
        let _ = writeln!(
            s,
            "aim: {:.0} % into the window, at {}",
            r.window_position * 100.0,
            ns(r.turn_on_target_s)
        );
    } else {
        let _ = writeln!(s, "aim: valley fallback, at {}", ns(r.turn_on_target_s));
    }
    if let (Some(ticks), Some(d), Some(on), Some(tick)) =
        (r.delay_ticks, r.delay_s, r.commanded_turn_on_s, r.tick_s)
    {
        let _ = writeln!(
            s,
            "delay: {ticks} ticks of {} = {} after the turn-off command; switch turns on at {}",
            ns(tick),
            ns(d),
            ns(on)
        );
        if let (Some(a), Some(b)) = (r.margin_after_open_s, r.margin_before_close_s) {
            let _ = writeln!(
                s,
                "margins: {} after the window opens, {} before it closes",
                ns(a),
                ns(b)
            );
        }
    }
    if let (Some(o), Some(c)) = (r.robust_window_open_s, r.robust_window_close_s) {
        let _ = writeln!(
            s,
            "robust window (every board within the tolerances): {} to {}{}",
            ns(o),
            ns(c),
            r.robust_delay_ticks
                .map_or_else(String::new, |t| format!("; aim there: {t} ticks"))
        );
    }
    if let (Some(fs), Some(m), Some(ton)) =
        (r.switching_frequency_hz, r.conversion_ratio, r.on_time_s)
    {
        let _ = writeln!(
            s,
            "buck: fs = {}  M = Vout/Vin = {m:.4}  on-time {}  (fs at most {})",
            format_si(fs, "Hz"),
            ns(ton),
            format_si(r.max_switching_frequency_hz, "Hz")
        );
    }
    for w in &r.warnings {
        let _ = writeln!(s, "\nWARNING: {w}");
    }
    let _ = writeln!(s, "\n{}", r.caution);
    s
}

/// The `size` report: the Z0 interval, the trade-offs where it is empty,
/// the Lr/Cr pairs and the caution.
#[must_use]
pub fn size_text(r: &crate::analysis::size::SizeReport) -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "ZVS over the load range needs Z0 >= {}; the peak switch voltage within {} needs Z0 <= {}",
        format_si(r.zvs_z0_min_ohm, "Ω"),
        format_si(r.vds_limit_v, "V"),
        format_si(r.stress_z0_max_ohm, "Ω"),
    );
    match (r.z0_min_ohm, r.z0_max_ohm) {
        (Some(lo), Some(hi)) => {
            let _ = writeln!(
                s,
                "feasible Z0: {} to {}",
                format_si(lo, "Ω"),
                format_si(hi, "Ω")
            );
        }
        _ => {
            let _ = writeln!(s, "no Z0 satisfies both; the trade-offs:");
            for t in &r.trade_offs {
                let _ = writeln!(s, "  - {t}");
            }
        }
    }
    if let Some(f0) = r.f0_hz {
        let _ = writeln!(s, "\nLr/Cr at f0 = {}:", format_si(f0, "Hz"));
        let _ = writeln!(
            s,
            "  {:>10}  {:>10}  {:>10}  {:>12}  switching frequency",
            "Z0", "Lr", "Cr", "peak Vds"
        );
        for p in &r.pairs {
            let fs = p.fs_range_hz.map_or_else(
                || "-".to_owned(),
                |(a, b)| format!("{} to {}", format_si(a, "Hz"), format_si(b, "Hz")),
            );
            let _ = writeln!(
                s,
                "  {:>10}  {:>10}  {:>10}  {:>12}  {fs}",
                format_si(p.z0_ohm, "Ω"),
                format_si(p.lr_h, "H"),
                format_si(p.cr_f, "F"),
                format_si(p.peak_switch_voltage_v, "V"),
            );
        }
    }
    if let (Some(c), Some(z)) = (r.coss_budget_f, r.coss_budget_z0_ohm) {
        let _ = writeln!(
            s,
            "\nMOSFET output capacitance budget: its charge-equivalent Coss at the operating voltage must stay below {} (Cr of the Z0 = {} pair); the external capacitor makes up the rest.",
            format_si(c, "F"),
            format_si(z, "Ω")
        );
    }
    for w in &r.warnings {
        let _ = writeln!(s, "WARNING: {w}");
    }
    let _ = writeln!(s, "\n{}", crate::analysis::point::CAUTION);
    s
}

/// The verification report as people read it: pairs checked, the worst
/// error and where, the window's hits and misses, margins, and what the
/// tolerances leave; `clock_hz` (hertz) turns margins into ticks.
#[must_use]
pub fn verification_text(v: &VerifyReport, clock_hz: f64) -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "method {}: verified {} of {} code pairs: max error {:.3} ticks at vin code {} ({:.3} V), io code {} ({:.4} A); RMS {:.3} ticks",
        v.method, v.points_checked, v.pairs_in_range, v.max_error_ticks, v.worst_vin_code, v.worst_vin_v, v.worst_io_code, v.worst_io_a, v.rms_error_ticks
    );
    if v.pairs_evaluated < v.points_checked {
        let _ = writeln!(
        s,
            "{} pairs evaluated; the other {} double both codes of one of them (ideal tank, table indexed by the code ratio: the same load, window and command), so share its verdict",
            v.pairs_evaluated,
            v.points_checked - v.pairs_evaluated
        );
    }
    if let (Some(e), Some((cv, ci))) = (
        v.max_approximation_error_ticks,
        v.max_approximation_error_at,
    ) {
        let _ = writeln!(
        s,
            "approximation error before rounding to whole ticks: at most {e:.4} ticks (vin code {cv}, io code {ci})"
        );
    }
    let _ = writeln!(
        s,
        "ZVS pairs: {}; commanded turn-ons outside the true window: {} ({} early, {} late), {} of them where the window is a tick wide or more; windows narrower than a tick: {}",
        v.zvs_points, v.outside_window, v.early, v.late, v.outside_window_wide, v.narrower_than_a_tick
    );
    if let (Some(j), Some(width)) = (v.outside_window_max_load, v.outside_window_max_width_ticks) {
        let _ = writeln!(
            s,
            "every miss is at J <= {j:.4}, where the ZVS window is at most {width:.2} ticks wide"
        );
    }
    if let Some(m) = v.min_margin_s {
        let _ = writeln!(
            s,
            "smallest margin to a window edge: {}",
            margin_text(m, clock_hz)
        );
    }
    if v.robust_points + v.zvs_unreliable > 0 {
        let _ = writeln!(
        s,
            "tolerances: {} ZVS pairs have a robust window a tick wide or more, {} outside it; {} are treated as ZVS-impossible (no window every board shares, a tick wide)",
            v.robust_points, v.outside_robust_window, v.zvs_unreliable
        );
        if let Some(m) = v.min_robust_margin_s {
            let _ = writeln!(
                s,
                "worst margin to a robust-window edge: {}{}",
                margin_text(m, clock_hz),
                if m < 0.0 { ", outside" } else { "" }
            );
        }
    }
    s
}

/// The Monte Carlo report as people read it: turn-ons inside the true
/// window, early and late, the worst board, the readings with a robust
/// window, and the tolerances drawn from.
#[must_use]
pub fn montecarlo_text(r: &MonteCarloReport) -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "method {}: {} boards x {} cycles (seed {}): {} of {} ZVS turn-ons inside the true window ({:.3} %), {} early, {} late; worst board {:.3} %; {} cycles below the boundary",
        r.method,
        r.boards,
        r.cycles_per_board,
        r.seed,
        r.inside,
        r.zvs_cycles,
        100.0 * r.inside_fraction,
        r.early,
        r.late,
        100.0 * r.worst_board_inside_fraction,
        r.valley_cycles
    );
    let _ = writeln!(
        s,
        "readings with a robust window a tick wide: {} cycles, {} of them inside the true window{}",
        r.robust_cycles,
        r.robust_cycles_inside,
        if r.robust_cycles_inside == r.robust_cycles {
            ""
        } else {
            " (WARNING: the method misses where the tolerances promise a window)"
        }
    );
    let t = r.tolerance;
    let _ = writeln!(
        s,
        "tolerances: Lr ±{:.1} %, C ±{:.1} %, gain Vin ±{:.1} % and Io ±{:.1} %, offset Vin ±{} and Io ±{} codes, noise ±{} codes, jitter ±{}",
        100.0 * t.lr_rel,
        100.0 * t.cr_rel,
        100.0 * t.vin_gain_rel,
        100.0 * t.io_gain_rel,
        t.vin_offset_codes,
        t.io_offset_codes,
        t.noise_codes,
        format_si(t.jitter_s, "s")
    );
    s
}

/// `point`'s text for a half-bridge leg's edge.
#[must_use]
pub fn leg_point_text(r: &crate::analysis::leg_point::LegPointReport) -> String {
    let ns = |s: f64| s * 1e9;
    let mut s = String::new();
    let _ = writeln!(
        s,
        "{}: {} edge at Vbus = {} V, I = {} A out of the node, far end {:.3} V",
        r.name, r.edge, r.vbus_v, r.current_a, r.far_v
    );
    match (r.window_s, r.short) {
        (Some((o, c)), _) => {
            let _ = writeln!(
                s,
                "  swing completes: window {:.2} .. {:.2} ns after the outgoing switch turns off (closes {}); {:.3} A into the incoming body diode",
                ns(o),
                ns(c),
                if r.reverses == Some(true) {
                    "as the current reverses"
                } else {
                    "at the accepted body-diode conduction"
                },
                r.clamp_current_a
            );
        }
        (None, Some((at, left))) => {
            let _ = writeln!(
                s,
                "  swing stops short: extremum at {:.2} ns with {:.2} V left across the incoming switch (no ZVS)",
                ns(at),
                left
            );
        }
        (None, None) => {}
    }
    match r.robust_window_s {
        Some((o, c)) => {
            let _ = writeln!(
                s,
                "  robust window over the design's tolerances: {:.2} .. {:.2} ns",
                ns(o),
                ns(c)
            );
        }
        None => {
            let _ = writeln!(
                s,
                "  no robust window (no [tolerance], or some leg of the box stops short)"
            );
        }
    }
    let _ = writeln!(
        s,
        "  dead time: {} steps = {:.2} ns (aim {:.2} steps, least {}): turn-on at {:.2} ns, {}",
        r.dead_time_steps,
        ns(r.dead_time_s),
        r.aim_steps,
        r.least_steps,
        ns(r.turn_on_s),
        if r.in_window {
            "inside the window"
        } else {
            "outside any window (hard switching)"
        }
    );
    for w in &r.warnings {
        let _ = writeln!(s, "  WARNING: {w}");
    }
    let _ = writeln!(s, "\n{}", r.caution);
    s
}

/// The online trim's settings in the design's ticks and the model's
/// margins over its regions, one paragraph (`table`'s text output).
#[must_use]
pub fn trim_text(
    t: &crate::input::trim_design::TrimSpec,
    plan: &crate::model::trim_margin::TrimPlan,
) -> String {
    let c = &t.config;
    let [missing, implausible, noisy] = c.limits();
    let (lo, hi) = plan
        .margin_ticks
        .iter()
        .filter(|&&m| m > 0.0)
        .fold((f64::INFINITY, 0.0f64), |(a, b), &m| (a.min(m), b.max(m)));
    let mut s = String::new();
    let _ = writeln!(
        s,
        "trim: {} regions; each update moves a correction 1/{} of the way to the residual; \
         corrections within +/-{} ticks (a power of two); a capture's offset {:.2} ticks \
         (comparator {} plus the timer's lead, less half a tick for the latch), \
         threshold {} V",
        t.regions.count(),
        1u32 << c.gain(),
        c.envelope_ticks(),
        c.comparator_ticks(),
        format_si(t.comparator_delay_s, "s"),
        t.comparator_threshold_v
    );
    let _ = writeln!(
        s,
        "  faults: beyond {} ticks implausible, a jump of {} ticks noise; frozen at {missing} \
         missing, {implausible} implausible or {noisy} noisy captures within {} cycles",
        c.plausible_ticks(),
        c.noise_ticks(),
        t.window
    );
    if lo.is_finite() {
        let _ = writeln!(
            s,
            "  margins from the threshold crossing to the aim: {lo:.1} to {hi:.1} ticks over the \
             regions with ZVS; the earliest crossing {:.1} ticks (generate the firmware's \
             settings with host_tool::emit::trim_source; see docs/trim.md)",
            plan.earliest_opening_ticks.unwrap_or(f64::NAN)
        );
    }
    s
}
