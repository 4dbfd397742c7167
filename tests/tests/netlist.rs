//! `zvs-timing netlist`: the deck it writes, run in ngspice, reproduces the
//! tool's window and shows the commanded turn-on at zero volts (or at the
//! valley below the ZVS boundary), at held-out operating points of the demo
//! design (a non-linear Coss curve, charge-based in the deck, and a lossy
//! loop), of the same curve without loss, of a constant capacitance with a
//! strongly lossy loop, and of a boost design. Agreement: 1 % + 2 ns.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use cross_checks::{repo, require_program};
use host_tool::model::design::Design;
use host_tool::sim::spice::{meas, ngspice_available, run_ngspice};

/// The shared held-out boost with 12-bit sensing from zero and a fast
/// driver.
fn boost() -> String {
    cross_checks::HELD_OUT_BOOST
        .replace("name = \"held_out_boost\"", "name = \"netlist_boost\"")
        .replace(
            "bits = 10\nvin_volts_per_code = 0.04\nio_amps_per_code = 0.01\nio_zero_code = 512",
            "bits = 12\nvin_volts_per_code = 0.01\nio_amps_per_code = 0.002",
        )
        .replace(
            "driver_delay = \"60ns\"\ndriver_delay_off = \"20ns\"",
            "driver_delay = \"20ns\"",
        )
}

/// Agreement of ngspice's event times with the model: 1 % + 2 ns (the
/// deck's near-ideal diodes and switch shift the events slightly; the
/// transition tests in ngspice.rs hold 0.5 %).
fn agree(sim: f64, model: f64) -> bool {
    (sim - model).abs() <= 0.01 * model.abs() + 2e-9
}

#[test]
fn the_netlist_reproduces_the_window_in_ngspice() {
    if !require_program("ngspice", ngspice_available(), "apt-get install ngspice") {
        return;
    }
    // The demo: Coss curve in parallel with 5.6 nF and an 80 mohm loop.
    let demo = Design::load(&repo().join("tables/winch_aux.toml")).unwrap();
    assert!(!demo.real.coss.is_empty() && demo.real.r_tank_ohm > 0.0);
    let text = std::fs::read_to_string(repo().join("tables/winch_aux.toml")).unwrap();
    let origin = repo().join("tables/variant.toml");
    let origin = origin.to_str().unwrap();
    // The same curve without loss, and a constant 6.8 nF with a lossy loop
    // (0.6 ohm: a loop Q of 20, so the damping moves the window visibly).
    let coss_only = Design::parse(&text.replace("r_tank = \"80m\"", ""), origin).unwrap();
    let lossy = Design::parse(
        &text
            .replace("coss = \"winch_aux_coss.csv\"\n", "")
            .replace("cr = \"5.6n\"", "cr = \"6.8n\"")
            .replace("r_tank = \"80m\"", "r_tank = \"0.6\""),
        origin,
    )
    .unwrap();
    assert!(coss_only.real.r_tank_ohm == 0.0 && lossy.real.coss.is_empty());
    let boost_text = boost();
    assert!(boost_text.contains("bits = 12") && !boost_text.contains("driver_delay_off"));
    let boost = Design::parse(&boost_text, "boost.toml").unwrap();
    // Held-out points: ZVS at several loads and voltages, and valley ones.
    let points = [
        (&demo, 41.0, 7.3),
        (&demo, 57.5, 9.6),
        (&demo, 38.2, 4.4),
        (&demo, 52.0, 2.0),
        (&demo, 47.0, 3.95),
        (&coss_only, 36.5, 3.2),
        (&coss_only, 59.0, 8.8),
        (&coss_only, 44.0, 2.5),
        (&lossy, 40.0, 6.1),
        (&lossy, 58.0, 9.9),
        (&lossy, 50.0, 4.2),
        (&lossy, 37.0, 2.2),
        (&boost, 21.0, 2.7),
        (&boost, 28.5, 0.6),
    ];
    let mut zvs_seen = 0;
    let mut valley_seen = 0;
    for (d, vin, io) in points {
        let (deck, p) = host_tool::sim::netlist::netlist(d, vin, io).unwrap();
        let m = run_ngspice(&deck).unwrap_or_else(|e| panic!("{}: {vin} V {io} A: {e}", d.name));
        let v_cell = d.cell(vin, io).unwrap().v_volt();
        let v_on = m[meas::VOLTAGE_AT_TURN_ON];
        match (p.window_open_s, p.window_close_s) {
            (Some(open), Some(close)) => {
                zvs_seen += 1;
                let t_open = m[meas::SWING_TO_ZERO] - p.t_off_s;
                let t_close = m[meas::CURRENT_ZERO_RISE] - p.t_off_s;
                println!(
                    "{} {vin} V {io} A: open {t_open:e} vs {open:e}, close {t_close:e} vs {close:e}, turn-on at {:e}, v_on {v_on:.3} V",
                    d.name, p.turn_on_s
                );
                assert!(
                    agree(t_open, open),
                    "window open: ngspice {t_open:e}, tool {open:e}"
                );
                assert!(
                    agree(t_close, close),
                    "window close: ngspice {t_close:e}, tool {close:e}"
                );
                // Zero-voltage turn-on: the switch sits at the body diode's drop.
                assert!(v_on.abs() <= 0.01 * v_cell, "v_on = {v_on} V of {v_cell} V");
            }
            _ => {
                valley_seen += 1;
                let expected = p.expected_switch_voltage_at_turn_on_v;
                println!(
                    "{} {vin} V {io} A: no ZVS, valley at {:e}, v_on {v_on:.3} V vs {expected:.3} V",
                    d.name,
                    p.valley_s.unwrap()
                );
                assert!(
                    (v_on - expected).abs() <= 0.02 * v_cell,
                    "v_on {v_on} vs valley {expected}"
                );
                // The current's return through zero is the valley, unless the
                // commanded (rounded) turn-on came first and cut it short.
                let t_valley = m[meas::CURRENT_ZERO_RISE] - p.t_off_s;
                let valley = p.valley_s.unwrap();
                println!("  valley {t_valley:e} vs {valley:e}");
                if p.turn_on_s >= valley {
                    assert!(
                        agree(t_valley, valley),
                        "valley: ngspice {t_valley:e}, tool {valley:e}"
                    );
                }
            }
        }
    }
    assert!(zvs_seen >= 4 && valley_seen >= 1);
}
