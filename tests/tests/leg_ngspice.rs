//! The half-bridge leg's edges (timing-core `leg`) against ngspice, on the
//! tool's deck of the leg (`host_tool::sim::leg_deck`: two switches with
//! body diodes, a charge-based Coss per switch, an added node capacitor,
//! the inductor to its far end carrying the current at the switching
//! instant), both edges, with a resonant transition inductance (the node
//! rings) and a large one (the current hardly changes). Agreement required:
//! 0.5 % + 2 ns; measured (`cargo test -p cross-checks --test leg_ngspice
//! -- --nocapture`): window open and close within 0.11 %.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use cross_checks::require_program;
use host_tool::sim::leg_deck::{meas, LegDeck};
use host_tool::sim::spice::ngspice_available;
use timing_core::coss::CossPoint;
use timing_core::leg::{Edge, EdgeTurnOn, Leg, LegPoint, NodeCapacitance};

/// An invented 100 V-class curve for the low side (not a real part).
const LOW: [CossPoint<f64>; 4] = [
    CossPoint {
        volts: 0.0,
        farads: 1.8e-9,
    },
    CossPoint {
        volts: 8.0,
        farads: 0.9e-9,
    },
    CossPoint {
        volts: 30.0,
        farads: 0.35e-9,
    },
    CossPoint {
        volts: 100.0,
        farads: 0.22e-9,
    },
];

/// An invented, different curve for the high side.
const HIGH: [CossPoint<f64>; 3] = [
    CossPoint {
        volts: 0.0,
        farads: 1.3e-9,
    },
    CossPoint {
        volts: 15.0,
        farads: 0.5e-9,
    },
    CossPoint {
        volts: 100.0,
        farads: 0.2e-9,
    },
];

fn agree(sim: f64, model: f64) -> bool {
    (sim - model).abs() <= 0.005 * model.abs() + 2e-9
}

struct Case {
    name: &'static str,
    edge: Edge,
    l_h: f64,
    r_ohm: f64,
    c_ext_f: f64,
    vbus: f64,
    far: f64,
    current: f64,
}

#[test]
fn leg_edges_agree_with_ngspice() {
    if !require_program("ngspice", ngspice_available(), "apt-get install ngspice") {
        return;
    }
    let cases = [
        // A synchronous buck in triangular mode with a small series
        // inductor: the node rings.
        Case {
            name: "resonant falling",
            edge: Edge::Falling,
            l_h: 120e-9,
            r_ohm: 0.03,
            c_ext_f: 100e-12,
            vbus: 48.0,
            far: 12.0,
            current: 7.0,
        },
        Case {
            name: "resonant rising",
            edge: Edge::Rising,
            l_h: 120e-9,
            r_ohm: 0.03,
            c_ext_f: 100e-12,
            vbus: 48.0,
            far: 12.0,
            current: -5.0,
        },
        // A bridge leg on a 400 V-class bus scaled to the curve: a
        // leakage inductance to the midpoint.
        Case {
            name: "resonant rising, midpoint",
            edge: Edge::Rising,
            l_h: 2.0e-6,
            r_ohm: 0.1,
            c_ext_f: 0.0,
            vbus: 80.0,
            far: 40.0,
            current: -2.5,
        },
        // A filter inductor: the current hardly changes in the swing.
        Case {
            name: "large falling",
            edge: Edge::Falling,
            l_h: 22e-6,
            r_ohm: 0.02,
            c_ext_f: 220e-12,
            vbus: 48.0,
            far: 36.0,
            current: 3.0,
        },
        Case {
            name: "large rising",
            edge: Edge::Rising,
            l_h: 22e-6,
            r_ohm: 0.02,
            c_ext_f: 220e-12,
            vbus: 48.0,
            far: 12.0,
            current: -1.5,
        },
    ];
    let mut worst = 0.0f64;
    for c in &cases {
        let node = NodeCapacitance::new(&LOW, &HIGH, c.c_ext_f).unwrap();
        let leg = Leg::new(c.l_h, node, c.r_ohm, 1.0).unwrap();
        let t = leg
            .edge(c.edge, &LegPoint::new(c.vbus, c.current, c.far).unwrap())
            .unwrap();
        let EdgeTurnOn::Zvs(w) = t.turn_on else {
            panic!("{}: {t:?}", c.name)
        };
        // Steps of 1/2000 of the swing (or of the local resonance).
        let c_min = c.c_ext_f + 0.42e-9;
        let swing = node.swing_charge(c.vbus) / c.current.abs();
        let max_step = ((c.l_h * c_min).sqrt()).min(swing) / 2000.0;
        let span = w.close_s;
        let deck = LegDeck {
            edge: c.edge,
            low_coss: LOW.to_vec(),
            high_coss: HIGH.to_vec(),
            c_ext_f: c.c_ext_f,
            l_h: c.l_h,
            r_ohm: c.r_ohm,
            vbus_v: c.vbus,
            far_v: c.far,
            current_a: c.current,
            t_off_s: 20e-9,
            duration_s: 1.3 * span,
            turn_on_s: None,
            max_step_s: max_step,
        };
        let (m, rung) = deck.simulate().unwrap();
        let open = m[meas::RAIL];
        for (what, sim, model) in [
            ("open", open, w.open_s),
            ("close", m[meas::CURRENT_ZERO], w.close_s),
        ] {
            println!(
                "{}: {what} ngspice {:.3} ns, timing-core {:.3} ns ({:+.3} %), rung {rung}",
                c.name,
                sim * 1e9,
                model * 1e9,
                100.0 * (sim / model - 1.0)
            );
            worst = worst.max((sim - model).abs() / model);
            assert!(
                agree(sim, model),
                "{}: {what}: ngspice {sim:e}, timing-core {model:e}",
                c.name
            );
        }
    }
    println!(
        "leg against ngspice: worst relative difference {:.3} %",
        100.0 * worst
    );
}

#[test]
fn a_short_swing_stops_where_ngspice_turns_back() {
    if !require_program("ngspice", ngspice_available(), "apt-get install ngspice") {
        return;
    }
    // Too little current for the resonant swing: the extremum and the
    // voltage left across the incoming switch.
    let node = NodeCapacitance::new(&LOW, &HIGH, 100e-12).unwrap();
    let (l, vbus, far) = (120e-9, 48.0, 36.0);
    let leg = Leg::new(l, node, 0.03, 1.0).unwrap();
    let t = leg
        .edge(Edge::Falling, &LegPoint::new(vbus, 1.0, far).unwrap())
        .unwrap();
    let EdgeTurnOn::Short(s) = t.turn_on else {
        panic!("{t:?}")
    };
    let deck = LegDeck {
        edge: Edge::Falling,
        low_coss: LOW.to_vec(),
        high_coss: HIGH.to_vec(),
        c_ext_f: 100e-12,
        l_h: l,
        r_ohm: 0.03,
        vbus_v: vbus,
        far_v: far,
        current_a: 1.0,
        t_off_s: 1e-9,
        duration_s: 1.5 * s.extremum_s,
        turn_on_s: None,
        max_step_s: (l * 0.52e-9).sqrt() / 2000.0,
    };
    let (m, _) = deck.simulate().unwrap();
    let (at, v) = (m[meas::CURRENT_ZERO], m[meas::VOLTAGE_AT_CURRENT_ZERO]);
    println!(
        "short swing: extremum ngspice {:.3} ns at {v:.3} V, timing-core {:.3} ns with {:.3} V left",
        at * 1e9,
        s.extremum_s * 1e9,
        s.remaining_v
    );
    assert!(agree(at, s.extremum_s), "{at:e} {s:?}");
    // The node falls from the bus: the voltage left across the low side
    // is the node voltage there.
    assert!((v - s.remaining_v).abs() <= 0.005 * vbus, "{v} {s:?}");
}

/// `zvs-timing netlist` on the leg demo: the deck (the incoming switch
/// turned on at the dead time the design commands) runs in ngspice, the
/// node reaches the rail where the model says (0.5 % + 2 ns), and the
/// incoming switch turns on with under 1 % of the bus across it: a
/// zero-voltage turn-on in the simulation of the commanded dead time.
#[test]
fn the_demo_legs_netlist_turns_on_at_zero_voltage_in_ngspice() {
    if !require_program("ngspice", ngspice_available(), "apt-get install ngspice") {
        return;
    }
    let spec = host_tool::input::leg_design::LegSpec::load(
        &cross_checks::repo().join("tables/lantern_leg.toml"),
    )
    .unwrap();
    for (edge, vbus, current) in [
        (Edge::Falling, 48.0, 3.5),
        (Edge::Falling, 55.0, 0.7),
        (Edge::Rising, 52.0, -1.5),
        (Edge::Rising, 43.0, -3.2),
    ] {
        let (deck, report) =
            host_tool::sim::leg_netlist::leg_netlist(&spec, edge, vbus, current).unwrap();
        let m = host_tool::sim::spice::run_ngspice(&deck).unwrap();
        let (open, _) = report.window_s.expect("a point with a window");
        let rail = m[meas::RAIL] - 20e-9;
        let across = m[meas::VOLTAGE_AT_TURN_ON];
        println!(
            "{edge:?} {vbus} V {current} A: rail at {:.3} ns (model {:.3}), {:.4} V across at turn-on ({:.2} ns)",
            rail * 1e9,
            open * 1e9,
            across,
            report.turn_on_s * 1e9
        );
        assert!(agree(rail, open), "rail {rail:e} vs model {open:e}");
        assert!(
            across.abs() < 0.01 * vbus,
            "{across} V across the incoming switch"
        );
    }
}
