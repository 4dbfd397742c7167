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
//! Tolerances (the issue's acceptance figures): Lr and the total switch
//! capacitance within 1 %, the loop resistance within 15 %, the turn-off
//! delay within 1 ns.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use cross_checks::require_program;
use host_tool::analysis::fit_capture::{fit, Param, Shot, TankFit};
use host_tool::input::capture::{self, Capture, Columns};
use host_tool::model::design::Design;
use host_tool::sim::scope::Scope;
use host_tool::sim::spice::{ngspice_available, ngspice_stdout, CellDeck, NGSPICE_TIME_LIMIT};
use host_tool::sim::trace::parse_print;
use host_tool::tank::real_tank::RealTank;

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
    /// Silicon diodes (saturation current 1 pA, emission coefficient 1:
    /// about 0.75 V at the cell current) instead of the deck's
    /// near-ideal ones.
    silicon: bool,
}

/// The board's deck at (vin, io), the gate left off, or with `switching`
/// turned on again a third of the way into the board's ZVS window (a
/// capture of normal switching, no gate column).
fn deck_with(design: &Design, b: &Board, vin: f64, io: f64, switching: bool) -> CellDeck {
    let cell = design.cell(vin, io).unwrap();
    let tank = board_tank(design, b);
    let mut deck = CellDeck::single_pulse(
        design.topology,
        &tank,
        (vin, design.vout_v.unwrap_or(0.0), cell.i_amp()),
        100e-9,
        // Past the capture's end (1.1 us after the turn-off command).
        1.3e-6,
    );
    deck.turn_on_s = switching.then(|| {
        let ring = timing_core::ring::RingCell::new(
            tank.lr_h,
            tank.capacitance().unwrap(),
            tank.r_tank_ohm,
        )
        .unwrap();
        let w = ring.transition(&cell).unwrap().turn_on.window().unwrap();
        w.open_s + (w.close_s - w.open_s) / 3.0
    });
    deck
}

/// The board's tank.
fn board_tank(design: &Design, b: &Board) -> RealTank {
    design
        .real
        .board(b.lr, b.cr, b.coss, design.real.r_tank_ohm * b.r + b.r_ohm)
}

/// The capture CSV of the board at (vin, io) as an 8-bit scope records
/// it: time zero at the turn-off command, the switch turning off the
/// board's delay later; white noise of half a per cent of the range, a
/// sample clock jittering by 10 ps RMS.
fn scope_capture(deck: &CellDeck, b: &Board, rate: f64, seed: u64) -> String {
    let trace = if b.silicon {
        let text: String = deck
            .trace_netlist(0)
            .lines()
            .map(|l| {
                if l.starts_with(".model dbody") {
                    ".model dbody D(IS=1e-12 N=1 RS=0.005)\n".to_owned()
                } else if l.starts_with(".model dconv") {
                    ".model dconv D(IS=1e-12 N=1 RS=0.005 CJO=5e-12)\n".to_owned()
                } else {
                    format!("{l}\n")
                }
            })
            .collect();
        let out = ngspice_stdout(&text, NGSPICE_TIME_LIMIT).unwrap();
        parse_print(&out, deck.t_off_s).resampled(50e-12)
    } else {
        deck.trace(50e-12).unwrap()
    };
    Scope::eight_bit(&trace, (rate, 1.2e-6, 100e-9), 0.005, seed).record(&trace, b.delay_off_s)
}

fn demo() -> Design {
    Design::load(&cross_checks::repo().join("tables/winch_aux.toml")).unwrap()
}

/// The board's total switch capacitance, charge-equivalent at `v`.
fn board_c_total(design: &Design, b: &Board, v: f64) -> f64 {
    board_tank(design, b)
        .capacitance()
        .unwrap()
        .charge_equivalent(v)
}

fn check(design: &Design, b: &Board, fit: &TankFit) {
    let lr = design.real.lr_h * b.lr;
    let r = design.real.r_tank_ohm * b.r + b.r_ohm;
    let c = board_c_total(design, b, fit.c_total_at_v);
    let rel = |x: f64, y: f64| (x - y) / y;
    println!(
        "  diode drop {:.3} V; Lr {:.4} uH ({:+.2} %, sigma {:.2} %), C total at {:.0} V {:.4} nF ({:+.2} %, sigma {:.2} %), R {:.1} mohm ({:+.1} %, sigma {:.1} mohm), delay {:.2} ns ({:+.2} ns, sigma {:.2} ns); Cr {:.3} nF, Coss scale {:.3}; residual {:?}, {} evaluations, held {:?}",
        fit.value(Param::DiodeDrop),
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

/// Captures of normal switching hold the swing only (no ring left to
/// itself): Lr and the delay still within the issue's tolerances, the
/// total capacitance within 2 %, the loop resistance not pinned down (the
/// half ring it sees loses a few per cent of its energy to it).
fn check_swing_only(design: &Design, b: &Board, fit: &TankFit) {
    let lr = design.real.lr_h * b.lr;
    let c = board_c_total(design, b, fit.c_total_at_v);
    let rel = |x: f64, y: f64| (x - y) / y;
    println!(
        "  (swing only) Lr {:+.2} %, C total {:+.2} % (sigma {:.2} %), R {:.1} mohm (sigma {:.1} mohm), delay {:+.2} ns",
        100.0 * rel(fit.value(Param::Lr), lr),
        100.0 * rel(fit.c_total_f.0, c),
        100.0 * fit.c_total_f.1 / c,
        fit.value(Param::RTank) * 1e3,
        fit.sigma_of(Param::RTank) * 1e3,
        (fit.value(Param::DelayOff) - b.delay_off_s) * 1e9,
    );
    assert!(rel(fit.value(Param::Lr), lr).abs() < 0.01, "Lr");
    assert!(rel(fit.c_total_f.0, c).abs() < 0.02, "C total");
    assert!(
        (fit.value(Param::DelayOff) - b.delay_off_s).abs() < 1e-9,
        "delay"
    );
    assert!(
        fit.spans.iter().all(|sp| sp.ring_end == sp.end),
        "the turn-on seen: the swing only"
    );
}

fn captures(
    design: &Design,
    b: &Board,
    points: &[(f64, f64, f64)],
    switching: bool,
) -> Vec<Capture> {
    points
        .iter()
        .enumerate()
        .map(|(k, &(vin, io, rate))| {
            let d = deck_with(design, b, vin, io, switching);
            let csv = scope_capture(&d, b, rate, 11 + k as u64);
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
fn case(what: &str, design: &Design, board: &Board, points: &[(f64, f64, f64)]) -> TankFit {
    case_with(what, design, board, points, false)
}

fn case_with(
    what: &str,
    design: &Design,
    board: &Board,
    points: &[(f64, f64, f64)],
    switching: bool,
) -> TankFit {
    let caps = captures(design, board, points, switching);
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
    if switching {
        check_swing_only(design, board, &f);
    } else {
        check(design, board, &f);
    }
    f
}

#[test]
fn a_board_off_its_design_is_fitted_from_reduced_voltage_captures() {
    if !require_program("ngspice", ngspice_available(), "apt-get install ngspice") {
        return;
    }
    let design = demo();
    // The issue's board: Lr +12 %, C -9 %, Coss scaled 1.15, twice the
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
        silicon: false,
    };
    let points = [(24.0, 5.0, 1e9), (30.0, 7.0, 2e9), (30.0, 2.0, 1e9)];
    let fitted = case("demo, three captures", &design, &board, &points);
    let path = cross_checks::repo().join("tables/winch_aux.toml");
    let text = std::fs::read_to_string(&path).unwrap();
    table_from_the_fit_serves_the_board(&text, &path, &board, &fitted, &points);
    case("demo, one capture", &design, &board, &[(24.0, 5.0, 1e9)]);
    // The same board with silicon diodes (about 0.75 V forward): the fit
    // estimates the drop the ring sees beside the tank.
    case(
        "demo, silicon diodes",
        &design,
        &Board {
            silicon: true,
            ..board
        },
        &[(24.0, 5.0, 1e9), (30.0, 7.0, 2e9), (30.0, 2.0, 1e9)],
    );
    // Captures of normal switching (the gate turns on again inside the
    // window, no gate column): only the swings can be fitted.
    case_with(
        "demo, normal switching",
        &design,
        &board,
        &[(24.0, 5.0, 1e9), (30.0, 7.0, 2e9)],
        true,
    );
    // A board off the other way, its capacitors large.
    let other = Board {
        lr: 0.85,
        cr: 1.2,
        coss: 0.9,
        r: 1.5,
        r_ohm: 0.0,
        delay_off_s: 15e-9,
        silicon: false,
    };
    case(
        "demo, a board off the other way",
        &design,
        &other,
        &[(20.0, 6.0, 1e9), (36.0, 8.0, 1e9)],
    );
    // Far off, as parts known only to 20-30 % before the board exists can
    // be: the fit starts from the design's values all the same.
    let far = Board {
        lr: 1.3,
        cr: 0.75,
        coss: 1.3,
        r: 3.0,
        r_ohm: 0.0,
        delay_off_s: 85e-9,
        silicon: false,
    };
    case(
        "demo, a board far off",
        &design,
        &far,
        &[(24.0, 4.0, 1e9), (30.0, 8.0, 2e9)],
    );
}

/// The table regenerated from the fitted design file against the board
/// itself (its true parts, no tolerance), at every code pair of the
/// design's range (36-60 V for the demo, above the captures' 24-30 V).
///
/// The fit has to tell the board's windows apart from the design's by a
/// fraction of a tick: the design's own table misses more than half of
/// the board's windows. Where the board's window is barely over a tick
/// wide (just above the ZVS boundary), a command has one tick to land on
/// and the fit's residual error (the deck's diodes drop a few tens of
/// millivolts the model does not have: the fitted loop resistance comes
/// out 5 % high, moving the window by a fraction of a nanosecond) can move
/// it off: those misses are counted and bounded, not zero.
fn table_from_the_fit_serves_the_board(
    design_text: &str,
    path: &std::path::Path,
    b: &Board,
    fit: &TankFit,
    points: &[(f64, f64, f64)],
) {
    use host_tool::check::verify::verify;
    use host_tool::emit::fitted_design::{fitted_design, FitSource};
    let captures: Vec<(String, f64, f64)> = points
        .iter()
        .map(|&(v, i, _)| (format!("board_{v}V_{i}A.csv"), v, i))
        .collect();
    let out = path.with_file_name("fitted.toml");
    let fitted_text = fitted_design(
        &FitSource {
            design_path: path,
            design_text,
            captures: &captures,
        },
        fit,
        &out,
    )
    .unwrap();
    let fitted = Design::parse(&fitted_text, &out.display().to_string()).unwrap();
    let outcome = host_tool::generate::generate(&fitted).unwrap();
    // The board as a design: its true parts, no tolerance to aim inside.
    let original = Design::parse(design_text, &path.display().to_string()).unwrap();
    let mut doc: toml_edit::DocumentMut = design_text.parse().unwrap();
    doc.remove("tolerance");
    doc["lr"] = toml_edit::value(original.real.lr_h * b.lr);
    doc["cr"] = toml_edit::value(original.real.cr_fixed_f * b.cr);
    if !original.real.coss.is_empty() {
        doc["coss_scale"] = toml_edit::value(b.coss);
    }
    doc["r_tank"] = toml_edit::value(original.real.r_tank_ohm * b.r + b.r_ohm);
    doc["timer"]["driver_delay_off"] = toml_edit::value(b.delay_off_s);
    let board = Design::parse(&doc.to_string(), &path.display().to_string()).unwrap();
    let r = verify(&board, &outcome.table.table().unwrap(), None);
    println!(
        "  the table from the fit on the board: {} of {} ZVS pairs outside the window, {} where it is a tick wide or more (widest missed {:?} ticks, at J up to {:?}); max error {:.3} ticks",
        r.outside_window,
        r.zvs_points,
        r.outside_window_wide,
        r.outside_window_max_width_ticks,
        r.outside_window_max_load,
        r.max_error_ticks
    );
    // The design's own table on the board, for comparison.
    let own = host_tool::generate::generate(&original).unwrap();
    let r0 = verify(&board, &own.table.table().unwrap(), None);
    println!(
        "  the design's own table on the board: {} of {} ZVS pairs outside the window, {} where it is a tick wide or more (widest missed {:?} ticks)",
        r0.outside_window, r0.zvs_points, r0.outside_window_wide, r0.outside_window_max_width_ticks
    );
    // No window of a tick and a half or more missed; the misses in
    // narrower ones at the ZVS boundary only, under 2e-4 of the pairs and
    // under a thousandth of the design's own table's.
    assert!(r.outside_window_max_width_ticks.unwrap_or(0.0) < 1.5);
    assert!(r.outside_window_max_load.unwrap_or(1.0) < 1.05);
    assert!(r.outside_window_wide * 5_000 < r.zvs_points);
    assert!(r.outside_window_wide * 1_000 < r0.outside_window_wide.max(1));
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
        silicon: false,
    };
    let points = [(20.0, 2.0, 1e9), (26.0, 3.5, 2e9)];
    let fitted = case("boost, ideal design", &design, &board, &points);
    let path = cross_checks::repo().join("tests/held_out_boost.toml");
    table_from_the_fit_serves_the_board(
        cross_checks::HELD_OUT_BOOST,
        &path,
        &board,
        &fitted,
        &points,
    );
}
