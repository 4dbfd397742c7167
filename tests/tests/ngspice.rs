//! Cross-check of timing-core (through the `point` command's library path,
//! the same code `zvs-timing point --json` prints) against ngspice
//! transient simulations of the switch cell, for all three cells.
//!
//! Reference: ngspice (Debian package `ngspice`), a general-purpose SPICE
//! simulator; the deck is a voltage-controlled switch with an antiparallel
//! diode, Cr across it, Lr in series, the converter diode and the big
//! inductor as a constant current (DESIGN.md section 6). Its crossing times
//! come from `.meas` statements.
//!
//! Tolerance: 0.5 % + 2 ns on times (the acceptance figure). The
//! deck's diodes drop a few tens of mV, which moves the simulated times by
//! under 0.1 %; the time step is 1/2000 of 1/w0.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use cross_checks::{assert_close, require_program, Scenario};
use host_tool::analysis::point::{evaluate, PointInput};
use host_tool::sim::spice::{meas, ngspice_available, CellDeck};

const REL: f64 = 0.005;
const ABS_S: f64 = 2e-9;

/// The `point` input of a scenario (Vout only where the cell needs it: for
/// the buck it would ask for regulation).
fn point_input(s: &Scenario) -> PointInput {
    PointInput {
        topology: s.topology,
        lr_h: s.lr_h,
        cr_f: s.cr_f,
        coss: Vec::new(),
        r_tank_ohm: 0.0,
        vin_v: s.vin_v,
        vout_v: s.topology.needs_vout().then_some(s.vout_v),
        io_a: s.io_a,
        timer: None,
        position: 0.5,
        fs_hz: None,
        vds_rating_v: None,
        derating: 0.8,
        uncertainty: None,
    }
}

/// The deck of a scenario: gate off at `t_off`, optionally on again, time
/// step 1/2000 of 1/w0.
fn cell_deck(
    s: &Scenario,
    t_off: f64,
    turn_on_s: Option<f64>,
    duration_s: f64,
    average_over_s: Option<f64>,
) -> CellDeck {
    CellDeck {
        topology: s.topology,
        lr_h: s.lr_h,
        cr_f: s.cr_f,
        coss: Vec::new(),
        r_tank_ohm: 0.0,
        vin_v: s.vin_v,
        vout_v: s.vout_v,
        inductor_current_a: s.inductor_current_a,
        t_off_s: t_off,
        turn_on_s,
        duration_s,
        max_step_s: 1.0 / s.w0() / 2000.0,
        average_over_s,
    }
}

/// Checks one scenario; returns the worst relative error of a time.
fn check(s: &Scenario) -> f64 {
    let input = point_input(s);
    let r = evaluate(&input).unwrap();
    let w0 = s.w0();
    let t_off = 20.0 / w0;
    // Simulate past the event of interest: one ring period plus the charge
    // and clamp intervals, with margin.
    let duration =
        1.3 * (r.charge_end_s + 2.0 * std::f64::consts::PI / w0 + r.normalized_load / w0);
    let deck = cell_deck(s, t_off, None, duration, None);
    if std::env::var_os("ZVS_SPICE_DUMP").is_some() {
        eprintln!("{}", deck.netlist());
    }
    let (m, _rung) = deck.simulate().unwrap_or_else(|e| {
        panic!(
            "{e}\nfor {s:?} (J = {})\n{}",
            r.normalized_load,
            deck.netlist()
        )
    });
    let get = |k: &str| -> f64 {
        *m.get(k)
            .unwrap_or_else(|| panic!("ngspice did not report {k} for {s:?}\n{}", deck.netlist()))
    };
    let ctx: &dyn std::fmt::Debug = s;
    assert_close(
        "cell voltage",
        r.cell_voltage_v,
        s.clamp_voltage_v,
        1e-12,
        0.0,
        ctx,
    );
    let mut worst = [
        assert_close(
            "charge end",
            r.charge_end_s,
            get(meas::CHARGE_END) - t_off,
            REL,
            ABS_S,
            ctx,
        ),
        assert_close(
            "peak time",
            r.peak_s,
            get(meas::PEAK) - t_off,
            REL,
            ABS_S,
            ctx,
        ),
        assert_close(
            "peak voltage",
            r.peak_switch_voltage_v,
            get(meas::PEAK_VOLTAGE),
            REL,
            0.0,
            ctx,
        ),
    ]
    .into_iter()
    .fold(0.0, f64::max);
    if r.zvs {
        worst = worst
            .max(assert_close(
                "window open",
                r.window_open_s.unwrap(),
                get(meas::SWING_TO_ZERO) - t_off,
                REL,
                ABS_S,
                ctx,
            ))
            .max(assert_close(
                "window close",
                r.window_close_s.unwrap(),
                get(meas::CURRENT_ZERO_RISE) - t_off,
                REL,
                ABS_S,
                ctx,
            ));
    } else {
        assert!(
            !m.contains_key(meas::SWING_TO_ZERO),
            "ngspice swung to zero although J = {} < 1: {s:?}",
            r.normalized_load
        );
        worst = worst.max(assert_close(
            "valley time",
            r.valley_s.unwrap(),
            get(meas::CURRENT_ZERO_RISE) - t_off,
            REL,
            ABS_S,
            ctx,
        ));
        // Valley voltage V(1 - J): 0.5 % of V (diode drops shift the clamp by tens of mV).
        assert_close(
            "valley voltage",
            r.valley_voltage_v.unwrap(),
            get(meas::VOLTAGE_AT_CURRENT_ZERO_RISE),
            0.0,
            REL * s.clamp_voltage_v,
            ctx,
        );
    }
    if std::env::var_os("ZVS_SPICE_DUMP").is_some() {
        eprintln!(
            "worst {:.3} % at J = {:.3}, {s:?}",
            worst * 100.0,
            r.normalized_load
        );
    }
    worst
}

#[test]
fn transitions_agree_with_ngspice_for_all_cells() {
    if !require_program("ngspice", ngspice_available(), "apt-get install ngspice") {
        return;
    }
    // ZVS_SPICE_SEED / ZVS_SPICE_POINTS draw a different or larger set
    // (held-out checks); the default set is fixed so CI is repeatable.
    let seed = std::env::var("ZVS_SPICE_SEED")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(0x2e55_0001);
    let n = std::env::var("ZVS_SPICE_POINTS")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(6);
    let set = Scenario::standard_set(seed, n, n.div_ceil(2));
    let worst = set.iter().map(check).fold(0.0, f64::max);
    println!(
        "ngspice agreed on {} operating points; worst relative error {:.3} %",
        set.len(),
        worst * 100.0
    );
}

#[test]
fn the_demo_point_agrees_with_ngspice() {
    if !require_program("ngspice", ngspice_available(), "apt-get install ngspice") {
        return;
    }
    // The README's demo point: 1 uH, 6.8 nF, 48 V, 6 A buck.
    let z0 = (1e-6f64 / 6.8e-9).sqrt();
    let s = Scenario {
        topology: timing_core::Topology::Buck,
        lr_h: 1e-6,
        cr_f: 6.8e-9,
        vin_v: 48.0,
        vout_v: 12.0,
        io_a: 6.0,
        inductor_current_a: 6.0,
        clamp_voltage_v: 48.0,
    };
    assert!(6.0 * z0 / 48.0 > 1.0);
    let worst = check(&s);
    println!("demo point: worst relative error {:.3} %", worst * 100.0);
}

#[test]
fn buck_conversion_ratio_agrees_with_a_full_cycle_in_ngspice() {
    if !require_program("ngspice", ngspice_available(), "apt-get install ngspice") {
        return;
    }
    // One whole switching period: gate off, turn-on mid-window (or at the
    // valley), on until the next turn-off. The diode-node voltage averaged
    // over the period is Vout (inductor volt-second balance, textbook relation,
    // from memory); compare with timing-core's M*Vin.
    let mut rng = <rand::rngs::StdRng as rand::SeedableRng>::seed_from_u64(0xc0_417);
    let mut worst = 0.0f64;
    for k in 0..8 {
        let j_range = if k < 6 { 1.1..5.0 } else { 0.3..0.9 };
        let s = Scenario::random(&mut rng, timing_core::Topology::Buck, j_range);
        let input = PointInput {
            vout_v: None,
            ..point_input(&s)
        };
        let probe = evaluate(&input).unwrap();
        // A frequency that leaves an on-time of about the transition's length.
        let fs = 0.5 * probe.max_switching_frequency_hz;
        let r = evaluate(&PointInput {
            fs_hz: Some(fs),
            ..input
        })
        .unwrap();
        let period = 1.0 / fs;
        let w0 = s.w0();
        let t_off = 20.0 / w0;
        let deck = cell_deck(
            &s,
            t_off,
            Some(r.turn_on_target_s),
            period * 1.01,
            Some(period),
        );
        if std::env::var_os("ZVS_SPICE_DUMP").is_some() {
            eprintln!("{}", deck.netlist());
        }
        let (m, _) = deck.simulate().unwrap();
        let vavg = m[meas::DIODE_NODE_AVERAGE];
        let vout = r.conversion_ratio.unwrap() * s.vin_v;
        // 0.5 % of Vin: the deck's diode drops (tens of mV) and switch resistance.
        let ctx: &dyn std::fmt::Debug = &s;
        assert_close(
            "average diode-node voltage",
            vout,
            vavg,
            0.0,
            0.005 * s.vin_v,
            ctx,
        );
        worst = worst.max((vout - vavg).abs() / s.vin_v);
    }
    println!(
        "full-cycle conversion ratio: worst error {:.3} % of Vin",
        worst * 100.0
    );
}
