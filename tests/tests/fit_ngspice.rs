//! Cross-check of the bring-up fit (`zvs-timing fit`) against captures
//! made by ngspice: the project's deck of a board whose parts differ from
//! the design by known amounts, sampled as a scope samples it.
//!
//! Reference: ngspice (Debian package `ngspice`) simulates the board's cell
//! (DESIGN.md section 6), printing the switch voltage every 50 ps. A
//! "scope" then samples that trace at 1 or 2 GS/s with its own trigger
//! offset (within half a sample), a sample clock that jitters by 10 ps
//! RMS, white noise of half a per cent of the vertical range and 8-bit
//! quantisation over that range. The fit never sees the board's values.
//!
//! Tolerances (the acceptance figures): Lr and the total switch
//! capacitance within 1 %, the loop resistance within 15 %, the turn-off
//! delay within 1 ns.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use cross_checks::require_program;
use host_tool::analysis::fit_capture::{fit, Param, Shot, TankFit};
use host_tool::input::capture::{self, Capture, Columns};
use host_tool::model::design::Design;
use host_tool::sim::spice::{ngspice_available, CellDeck};
use rand::rngs::StdRng;
use rand::{Rng, SeedableRng};
use timing_core::coss::CossPoint;

/// How a built board differs from its design.
#[derive(Debug, Clone, Copy)]
struct Board {
    lr: f64,
    cr: f64,
    coss: f64,
    r: f64,
    /// Loop resistance where the design has none, ohm.
    r_ohm: f64,
    delay_off_s: f64,
}

/// How the scope records.
#[derive(Debug, Clone, Copy)]
struct Scope {
    rate: f64,
    samples: usize,
    pre_trigger_s: f64,
    seed: u64,
}

/// The board's deck at (vin, io), the gate left off.
fn deck(design: &Design, b: &Board, vin: f64, io: f64) -> CellDeck {
    let cell = design.cell(vin, io).unwrap();
    let lr = design.real.lr_h * b.lr;
    let c = design.real.cr_fixed_f * b.cr + 2e-9 * b.coss;
    let w0 = 1.0 / (lr * c).sqrt();
    CellDeck {
        topology: design.topology,
        lr_h: lr,
        cr_f: design.real.cr_fixed_f * b.cr,
        coss: design
            .real
            .coss
            .iter()
            .map(|p| CossPoint {
                volts: p.volts,
                farads: p.farads * b.coss,
            })
            .collect(),
        r_tank_ohm: design.real.r_tank_ohm * b.r + b.r_ohm,
        vin_v: vin,
        vout_v: design.vout_v.unwrap_or(0.0),
        inductor_current_a: cell.i_amp(),
        t_off_s: 100e-9,
        turn_on_s: None,
        // Past the capture's end (1.1 us after the turn-off command).
        duration_s: 1.3e-6,
        max_step_s: 1.0 / w0 / 2000.0,
        average_over_s: None,
    }
}

/// A seeded standard normal (Box-Muller).
fn normal(rng: &mut StdRng) -> f64 {
    let u: f64 = rng.random_range(1e-12..1.0);
    let v: f64 = rng.random();
    (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
}

/// The capture CSV of the board at (vin, io) as the scope records it:
/// time zero at the turn-off command, the switch turning off the board's
/// delay later.
fn scope_capture(design: &Design, b: &Board, vin: f64, io: f64, s: &Scope) -> String {
    let trace = deck(design, b, vin, io).trace(50e-12).unwrap();
    let mut rng = StdRng::seed_from_u64(s.seed);
    let top = trace.switch_v.iter().copied().fold(0.0, f64::max);
    let (lo, hi) = (-0.1 * top, 1.2 * top);
    let step = (hi - lo) / 255.0;
    let trigger = rng.random_range(-0.5..0.5) / s.rate;
    let at = |t: f64| {
        // Linear between the 50 ps rows; before the trace, the on-state.
        let k = trace.time_s.partition_point(|&x| x <= t);
        if k == 0 {
            return trace.switch_v[0];
        }
        let Some(&t1) = trace.time_s.get(k) else {
            return *trace.switch_v.last().unwrap();
        };
        let (t0, v0, v1) = (
            trace.time_s[k - 1],
            trace.switch_v[k - 1],
            trace.switch_v[k],
        );
        v0 + (v1 - v0) * (t - t0) / (t1 - t0)
    };
    let mut csv = format!(
        "Instrument,bench scope\nSample rate,{:e}\nVertical,{lo:.3} V to {hi:.3} V\nTIME,CH1\n",
        s.rate
    );
    for k in 0..s.samples {
        let t = -s.pre_trigger_s + k as f64 / s.rate;
        let t_true = t + trigger + 10e-12 * normal(&mut rng) - b.delay_off_s;
        let v = at(t_true) + 0.005 * (hi - lo) * normal(&mut rng);
        let code = ((v - lo) / step).round().clamp(0.0, 255.0);
        csv += &format!("{t:.6e},{:.5}\n", lo + code * step);
    }
    csv
}

fn demo() -> Design {
    Design::load(&cross_checks::repo().join("tables/winch_aux.toml")).unwrap()
}

/// The board's total switch capacitance, charge-equivalent at `v`.
fn board_c_total(design: &Design, b: &Board, v: f64) -> f64 {
    let d = deck(design, b, design.vin_v.1, design.io_a.1);
    let sc = timing_core::coss::SwitchCapacitance::new(d.cr_f, &d.coss).unwrap();
    sc.charge_equivalent(v)
}

fn check(design: &Design, b: &Board, fit: &TankFit) {
    let lr = design.real.lr_h * b.lr;
    let r = design.real.r_tank_ohm * b.r + b.r_ohm;
    let c = board_c_total(design, b, fit.c_total_at_v);
    let rel = |x: f64, y: f64| (x - y) / y;
    println!(
        "  Lr {:.4} uH ({:+.2} %, sigma {:.2} %), C total at {:.0} V {:.4} nF ({:+.2} %, sigma {:.2} %), R {:.1} mohm ({:+.1} %, sigma {:.1} mohm), delay {:.2} ns ({:+.2} ns, sigma {:.2} ns); Cr {:.3} nF, Coss scale {:.3}; residual {:?}, {} evaluations, held {:?}",
        fit.value(Param::Lr) * 1e6,
        100.0 * rel(fit.value(Param::Lr), lr),
        100.0 * fit.sigma_of(Param::Lr) / lr,
        fit.c_total_at_v,
        fit.c_total_f.0 * 1e9,
        100.0 * rel(fit.c_total_f.0, c),
        100.0 * fit.c_total_f.1 / c,
        fit.value(Param::RTank) * 1e3,
        100.0 * rel(fit.value(Param::RTank), r),
        fit.sigma_of(Param::RTank) * 1e3,
        fit.value(Param::DelayOff) * 1e9,
        (fit.value(Param::DelayOff) - b.delay_off_s) * 1e9,
        fit.sigma_of(Param::DelayOff) * 1e9,
        fit.value(Param::Cr) * 1e9,
        fit.value(Param::CossScale),
        fit.residuals,
        fit.evaluations,
        fit.held,
    );
    assert!(rel(fit.value(Param::Lr), lr).abs() < 0.01, "Lr");
    assert!(rel(fit.c_total_f.0, c).abs() < 0.01, "C total");
    assert!(rel(fit.value(Param::RTank), r).abs() < 0.15, "R");
    assert!(
        (fit.value(Param::DelayOff) - b.delay_off_s).abs() < 1e-9,
        "delay"
    );
}

fn captures(design: &Design, b: &Board, points: &[(f64, f64, f64)]) -> Vec<Capture> {
    points
        .iter()
        .enumerate()
        .map(|(k, &(vin, io, rate))| {
            let csv = scope_capture(
                design,
                b,
                vin,
                io,
                &Scope {
                    rate,
                    samples: (1.2e-6 * rate) as usize,
                    pre_trigger_s: 100e-9,
                    seed: 11 + k as u64,
                },
            );
            capture::parse(
                &csv,
                &format!("board_{vin}V_{io}A.csv"),
                &Columns::default(),
            )
            .unwrap()
        })
        .collect()
}

/// Fit `design` to captures of `board` at `points` (vin, io, sample rate)
/// and check the fit.
fn case(what: &str, design: &Design, board: &Board, points: &[(f64, f64, f64)]) {
    let caps = captures(design, board, points);
    let shots: Vec<Shot<'_>> = caps
        .iter()
        .zip(points)
        .map(|(c, &(vin, io, _))| Shot {
            capture: c,
            vin_v: vin,
            io_a: io,
        })
        .collect();
    let f = fit(design, &shots).unwrap();
    println!("{what}:");
    check(design, board, &f);
}

#[test]
fn a_board_off_its_design_is_fitted_from_reduced_voltage_captures() {
    if !require_program("ngspice", ngspice_available(), "apt-get install ngspice") {
        return;
    }
    let design = demo();
    // The board: Lr +12 %, C -9 %, Coss scaled 1.15, twice the
    // loop resistance; its drivers turn the switch off 42 ns after the
    // command. Bring-up at reduced voltage: 24 and 30 V on a 36-60 V
    // design, one capture below the ZVS boundary.
    let board = Board {
        lr: 1.12,
        cr: 0.91,
        coss: 1.15,
        r: 2.0,
        r_ohm: 0.0,
        delay_off_s: 42e-9,
    };
    case(
        "demo, three captures",
        &design,
        &board,
        &[(24.0, 5.0, 1e9), (30.0, 7.0, 2e9), (30.0, 2.0, 1e9)],
    );
    case("demo, one capture", &design, &board, &[(24.0, 5.0, 1e9)]);
    // A board off the other way, its capacitors large.
    let other = Board {
        lr: 0.85,
        cr: 1.2,
        coss: 0.9,
        r: 1.5,
        r_ohm: 0.0,
        delay_off_s: 15e-9,
    };
    case(
        "demo, a board off the other way",
        &design,
        &other,
        &[(20.0, 6.0, 1e9), (36.0, 8.0, 1e9)],
    );
}

#[test]
fn a_boost_with_an_ideal_tank_in_its_design_is_fitted() {
    if !require_program("ngspice", ngspice_available(), "apt-get install ngspice") {
        return;
    }
    let design = Design::parse(cross_checks::HELD_OUT_BOOST, "held_out_boost.toml").unwrap();
    // The design has no loop resistance; the board has 0.2 ohm.
    let board = Board {
        lr: 1.08,
        cr: 0.93,
        coss: 1.0,
        r: 1.0,
        r_ohm: 0.2,
        delay_off_s: 60e-9,
    };
    case(
        "boost, ideal design",
        &design,
        &board,
        &[(20.0, 2.0, 1e9), (26.0, 3.5, 2e9)],
    );
}
