//! The half-bridge leg's edges against relations outside the integrator:
//! the closed-form LC swing of a constant capacitance, the constant-current
//! swing time, and the charge and energy balances of Coss curves.

use timing_core::coss::CossPoint;
use timing_core::leg::{
    switching_points, DriverDelays, Edge, EdgeTurnOn, Leg, LegConverter, LegPoint, LegTimer,
    NodeCapacitance, ShortSwing,
};
use timing_core::WindowPosition;
use timing_core::{Error, Quantity};

/// An invented 60 V-class curve for the low side (not a real part).
const LOW: [CossPoint<f64>; 4] = [
    CossPoint {
        volts: 0.0,
        farads: 2.2e-9,
    },
    CossPoint {
        volts: 5.0,
        farads: 1.1e-9,
    },
    CossPoint {
        volts: 20.0,
        farads: 0.45e-9,
    },
    CossPoint {
        volts: 60.0,
        farads: 0.3e-9,
    },
];

/// A curve whose points are not round numbers (their images `Vbus - p`
/// on the other switch's side do not round-trip exactly).
const ODD: [CossPoint<f64>; 4] = [
    CossPoint {
        volts: 0.1,
        farads: 2.6e-9,
    },
    CossPoint {
        volts: 0.7,
        farads: 1.9e-9,
    },
    CossPoint {
        volts: 7.7,
        farads: 0.8e-9,
    },
    CossPoint {
        volts: 133.3,
        farads: 0.21e-9,
    },
];

/// An invented, different curve for the high side.
const HIGH: [CossPoint<f64>; 3] = [
    CossPoint {
        volts: 0.0,
        farads: 1.5e-9,
    },
    CossPoint {
        volts: 10.0,
        farads: 0.6e-9,
    },
    CossPoint {
        volts: 60.0,
        farads: 0.25e-9,
    },
];

fn window(t: &timing_core::leg::EdgeTransition<f64>) -> timing_core::leg::EdgeWindow<f64> {
    t.turn_on
        .window()
        .unwrap_or_else(|| panic!("no window: {t:?}"))
}

/// The lossless LC swing from u = 0 with current j0 towards E: textbook
/// (any circuits text; from memory) u(t) = E(1 - cos wt) + j0*Z0*sin wt,
/// j(t) = j0*cos wt + (E/Z0)*sin wt. Its first reach of `vbus`, by
/// bisection on the rising part.
fn lc_open(c: f64, l: f64, e: f64, j0: f64, vbus: f64) -> (f64, f64) {
    let w = 1.0 / (l * c).sqrt();
    let z0 = (l / c).sqrt();
    let u = |t: f64| e * (1.0 - (w * t).cos()) + j0 * z0 * (w * t).sin();
    // The peak: where j = 0 first.
    let peak = ((-j0 * z0 / e).atan() + std::f64::consts::PI) / w;
    let (mut a, mut b) = (0.0, peak);
    assert!(u(b) >= vbus, "the swing does not reach the rail");
    for _ in 0..200 {
        let m = 0.5 * (a + b);
        if u(m) >= vbus {
            b = m;
        } else {
            a = m;
        }
    }
    let t = 0.5 * (a + b);
    (t, j0 * (w * t).cos() + e / z0 * (w * t).sin())
}

#[test]
fn constant_capacitance_swings_as_the_lc_closed_form() {
    let c = 680e-12;
    let node = NodeCapacitance::new(&[], &[], c).unwrap();
    let l = 2.2e-6;
    let leg = Leg::new(l, node, 0.0, 1e-6).unwrap();
    let mut worst = 0.0f64;
    for (vbus, far, amps) in [
        (48.0, 12.0, 2.0),
        (48.0, 24.0, 5.0),
        (400.0, 200.0, 1.5),
        (24.0, 5.0, 8.0),
    ] {
        for edge in [Edge::Falling, Edge::Rising] {
            let (current, e) = match edge {
                Edge::Falling => (amps, vbus - far),
                Edge::Rising => (-amps, far),
            };
            let t = leg
                .edge(edge, &LegPoint::new(vbus, current, far).unwrap())
                .unwrap();
            let w = window(&t);
            let (open, jc) = lc_open(c, l, e, amps, vbus);
            // The clamp: lossless, jc*L over the inductor's voltage.
            let close = open + jc * l / (vbus - e);
            for (got, want) in [
                (w.open_s, open),
                (w.close_s.min(open + 1e-6), close.min(open + 1e-6)),
            ] {
                worst = worst.max((got - want).abs() / want);
            }
            assert!(
                (t.clamp_start_current_a - jc).abs() < 1e-6 * amps,
                "{t:?} {jc}"
            );
        }
    }
    println!("leg, constant C, lossless: worst relative error {worst:.2e}");
    assert!(worst < 1e-6, "{worst:e}");
}

#[test]
fn large_inductance_swings_in_charge_over_current() {
    // A filter inductor: the current hardly changes during the swing, and
    // the swing time is the node's charge over it (common practice, no
    // source; the constant-capacitance form is C*Vbus/I).
    let mut worst = 0.0f64;
    for (low, high, ext) in [
        (&[][..], &[][..], 470e-12),
        (&LOW[..], &HIGH[..], 0.0),
        (&LOW[..], &LOW[..], 220e-12),
        (&ODD[..], &HIGH[..], 0.0),
        (&HIGH[..], &ODD[..], 0.0),
    ] {
        let node = NodeCapacitance::new(low, high, ext).unwrap();
        let leg = Leg::new(10.0, node, 0.0, 1e-3).unwrap();
        for (vbus, amps) in [(48.0, 3.0), (36.0, 0.8), (60.0, 10.0), (133.3, 2.2)] {
            for edge in [Edge::Falling, Edge::Rising] {
                let current = if edge == Edge::Falling { amps } else { -amps };
                let t = leg
                    .edge(edge, &LegPoint::new(vbus, current, vbus / 4.0).unwrap())
                    .unwrap();
                let want = node.swing_charge(vbus) / amps;
                worst = worst.max((window(&t).open_s - want).abs() / want);
            }
        }
    }
    println!("leg, large L: swing time within {worst:.2e} of Q/I");
    assert!(worst < 1e-6, "{worst:e}");
}

/// The work the node's swing from 0 to `u` takes from the inductor,
/// integral of (s - E)*C(s) ds, by Simpson's rule on a fine grid of the
/// node capacitance along the edge (the curves' points fall on it).
fn swing_work(node: &NodeCapacitance<'_, f64>, edge: Edge, vbus: f64, e: f64, u: f64) -> f64 {
    let n = 200_000;
    let h = u / n as f64;
    let f = |s: f64| {
        let v = if edge == Edge::Falling { vbus - s } else { s };
        (s - e) * node.at(v, vbus)
    };
    let mut sum = f(0.0) + f(u);
    for k in 1..n {
        sum += f(k as f64 * h) * if k % 2 == 1 { 4.0 } else { 2.0 };
    }
    sum * h / 3.0
}

#[test]
fn resonant_swing_obeys_the_energy_balance() {
    // Lossless: 1/2*L*j0^2 = 1/2*L*j^2 + work of the swing, at the
    // extremum (j = 0) of a swing that stops short, and the boundary
    // current is where the work to the rail equals the inductor's energy
    // (the leg's form of DESIGN.md section 3's balance).
    let node = NodeCapacitance::new(&LOW, &HIGH, 100e-12).unwrap();
    let l = 180e-9;
    let leg = Leg::new(l, node, 0.0, 1e-6).unwrap();
    let vbus = 48.0;
    for edge in [Edge::Falling, Edge::Rising] {
        // E = 12 V on both edges: the inductor pulls the node a quarter of
        // the way, and the rest of the swing takes its energy.
        let far = if edge == Edge::Falling { 36.0 } else { 12.0 };
        let e = if edge == Edge::Falling {
            vbus - far
        } else {
            far
        };
        let need = swing_work(&node, edge, vbus, e, vbus);
        assert!(need > 0.0);
        let boundary = (2.0 * need / l).sqrt();
        let sign = if edge == Edge::Falling { 1.0 } else { -1.0 };
        let at = |amps: f64| {
            leg.edge(edge, &LegPoint::new(vbus, sign * amps, far).unwrap())
                .unwrap()
        };
        assert!(
            matches!(at(1.002 * boundary).turn_on, EdgeTurnOn::Zvs(_)),
            "{edge:?}"
        );
        let short = at(0.998 * boundary);
        let EdgeTurnOn::Short(s) = short.turn_on else {
            panic!("{edge:?}: {short:?}")
        };
        let u_max = vbus - s.remaining_v;
        let energy = 0.5 * l * (0.998 * boundary).powi(2);
        let work = swing_work(&node, edge, vbus, e, u_max);
        println!(
            "{edge:?}: boundary {boundary:.4} A, extremum {u_max:.4} V, work/energy - 1 = {:.2e}",
            work / energy - 1.0
        );
        assert!((work / energy - 1.0).abs() < 2e-6);
        assert!(s.remaining_v > 0.0 && s.remaining_v < 0.05 * vbus);
    }
}

#[test]
fn a_current_of_the_wrong_sign_waits_at_the_rail_then_rings_from_rest() {
    // Lossless, constant C: the body diode of the outgoing switch carries
    // the current until E has brought it to zero (j0*L/E), then the node
    // rings from rest to 2E (textbook LC from rest, from memory).
    let c: f64 = 1e-9;
    let l = 1e-6;
    let leg = Leg::new(l, NodeCapacitance::new(&[], &[], c).unwrap(), 0.0, 1e-6).unwrap();
    let w0 = 1.0 / (l * c).sqrt();
    // Rising edge with E = far = 30 V > Vbus/2: reaches the rail.
    let t = leg
        .edge(Edge::Rising, &LegPoint::new(48.0, 1.0, 30.0).unwrap())
        .unwrap();
    let wait = 1.0 * l / 30.0;
    let want = wait + (1.0 - 48.0 / 30.0f64).acos() / w0;
    let got = window(&t).open_s;
    assert!((got - want).abs() < 1e-6 * want, "{got} {want}");
    // E = 20 V < Vbus/2: stops short at 2E.
    let t = leg
        .edge(Edge::Rising, &LegPoint::new(48.0, 1.0, 20.0).unwrap())
        .unwrap();
    let EdgeTurnOn::Short(s) = t.turn_on else {
        panic!("{t:?}")
    };
    assert!((s.remaining_v - 8.0).abs() < 1e-5, "{s:?}");
    // E = 0 (falling edge with the far end at the bus): never leaves.
    let t = leg
        .edge(Edge::Falling, &LegPoint::new(48.0, -1.0, 48.0).unwrap())
        .unwrap();
    assert_eq!(
        t.turn_on,
        EdgeTurnOn::Short(timing_core::leg::SwingShortfall {
            extremum_s: 0.0,
            remaining_v: 48.0
        })
    );
}

#[test]
fn the_window_closes_at_the_accepted_conduction_where_the_current_does_not_reverse() {
    let leg = Leg::new(
        1e-6,
        NodeCapacitance::new(&LOW, &HIGH, 0.0).unwrap(),
        0.01,
        80e-9,
    )
    .unwrap();
    // Falling edge into a far end at 0 V: nothing reverses the current.
    let w = window(
        &leg.edge(Edge::Falling, &LegPoint::new(48.0, 4.0, 0.0).unwrap())
            .unwrap(),
    );
    assert!(!w.reverses);
    assert!((w.close_s - w.open_s - 80e-9).abs() < 1e-15);
    // A far end at 24 V reverses it within the conduction accepted.
    let w = window(
        &leg.edge(Edge::Falling, &LegPoint::new(48.0, 1.0, 24.0).unwrap())
            .unwrap(),
    );
    assert!(w.reverses && w.close_s - w.open_s < 80e-9, "{w:?}");
}

#[test]
fn bad_inputs_name_the_quantity() {
    let node = NodeCapacitance::new(&LOW, &HIGH, 0.0).unwrap();
    let bad = |r: Result<_, Error>, q: Quantity| match r {
        Err(
            Error::NotPositive { quantity, .. }
            | Error::NotFinite { quantity, .. }
            | Error::OutOfRange { quantity, .. }
            | Error::Negative { quantity, .. },
        ) => {
            assert_eq!(quantity, q)
        }
        other => panic!("{other:?}"),
    };
    bad(
        Leg::new(0.0, node, 0.0, 1e-7).map(|_| ()),
        Quantity::TransitionInductance,
    );
    bad(
        Leg::new(1e-6, node, -1.0, 1e-7).map(|_| ()),
        Quantity::TankResistance,
    );
    bad(
        Leg::new(1e-6, node, 0.0, 0.0).map(|_| ()),
        Quantity::DiodeConduction,
    );
    // Far beyond critical damping (20*sqrt(L/C_max) is about 440 ohm here).
    bad(
        Leg::new(1e-6, node, 1000.0, 1e-7).map(|_| ()),
        Quantity::TankResistance,
    );
    bad(
        LegPoint::new(48.0, 1.0, 60.0).map(|_| ()),
        Quantity::FarEndVoltage,
    );
    bad(
        LegPoint::new(48.0, f64::NAN, 12.0).map(|_| ()),
        Quantity::NodeCurrent,
    );
    bad(
        LegPoint::new(-1.0, 1.0, 0.0).map(|_| ()),
        Quantity::BusVoltage,
    );
    bad(
        NodeCapacitance::new(&[], &[], 0.0).map(|_| ()),
        Quantity::NodeCapacitance,
    );
    bad(
        NodeCapacitance::new(&[], &[], -1e-12).map(|_| ()),
        Quantity::NodeCapacitance,
    );
}

/// The inductor current over one period of a synchronous converter,
/// stepped through its two intervals with L*di/dt = the voltage across it
/// (the volt-second picture, from memory), against the helper's peak and
/// valley; and the sign convention (current out of the node) on a leg:
/// in triangular mode both edges swing.
#[test]
fn switching_points_follow_the_inductor_current() {
    let steps = 100_000;
    for (conv, vin, vout, l, fs, i) in [
        (LegConverter::SyncBuck, 48.0, 12.0, 4.7e-6, 500e3, 1.0),
        (LegConverter::SyncBuck, 400.0, 200.0, 60e-6, 200e3, 6.0),
        (LegConverter::SyncBoost, 12.0, 48.0, 2.2e-6, 400e3, 0.8),
    ] {
        let [fall, rise] = switching_points(conv, vin, vout, l, fs, i).unwrap();
        let (v_on, v_off, d) = match conv {
            // Buck: Vin - Vout across L while the high side is on.
            LegConverter::SyncBuck => (vin - vout, -vout, vout / vin),
            // Boost: Vin across L while the low side is on.
            LegConverter::SyncBoost => (vin, vin - vout, 1.0 - vin / vout),
        };
        // Start at an unknown valley, walk one period, and place it so the
        // average is i.
        let t = 1.0 / fs;
        let h = t / steps as f64;
        let (mut cur, mut sum, mut peak) = (0.0f64, 0.0f64, f64::MIN);
        for k in 0..steps {
            let v = if (k as f64 + 0.5) * h < d * t {
                v_on
            } else {
                v_off
            };
            sum += (cur + 0.5 * v / l * h) * h;
            cur += v / l * h;
            peak = peak.max(cur);
        }
        assert!(cur.abs() < 1e-9 * peak, "the period must close: {cur}");
        let shift = i - sum / t;
        let (valley, peak) = (shift, peak + shift);
        let (out_peak, out_valley) = match conv {
            LegConverter::SyncBuck => (fall.current_a(), rise.current_a()),
            LegConverter::SyncBoost => (-rise.current_a(), -fall.current_a()),
        };
        assert!(
            (out_peak - peak).abs() < 1e-6 * peak.abs().max(1.0),
            "{conv:?}: {out_peak} {peak}"
        );
        assert!(
            (out_valley - valley).abs() < 1e-6 * peak.abs().max(1.0),
            "{conv:?}: {out_valley} {valley}"
        );
    }
    // 48 V to 12 V in triangular mode: the valley is negative, and a leg
    // of that inductance swings on both edges.
    let [fall, rise] =
        switching_points(LegConverter::SyncBuck, 48.0, 12.0, 4.7e-6, 500e3, 1.0).unwrap();
    let leg = Leg::new(
        4.7e-6,
        NodeCapacitance::new(&LOW, &HIGH, 0.0).unwrap(),
        0.02,
        50e-9,
    )
    .unwrap();
    assert!(leg
        .edge(Edge::Falling, &fall)
        .unwrap()
        .turn_on
        .window()
        .is_some());
    assert!(leg
        .edge(Edge::Rising, &rise)
        .unwrap()
        .turn_on
        .window()
        .is_some());
    // A converter the voltages do not suit is refused, naming the output.
    for (conv, vout) in [
        (LegConverter::SyncBuck, 60.0),
        (LegConverter::SyncBoost, 30.0),
    ] {
        match switching_points(conv, 48.0, vout, 1e-6, 1e5, 1.0) {
            Err(Error::OutOfRange {
                quantity: Quantity::OutputVoltage,
                ..
            }) => {}
            other => panic!("{conv:?}: {other:?}"),
        }
    }
}

/// The dead-time generator: steps counted from the outgoing switch's
/// turn-off command, the incoming driver's turn-on delay and the outgoing
/// one's turn-off delay (common practice, no source), the nearest step to
/// the aim inside the window, the minimum dead time as a floor, and the
/// short-swing policies.
#[test]
fn dead_time_commands_land_where_the_drivers_put_them() {
    let node = NodeCapacitance::new(&LOW, &HIGH, 0.0).unwrap();
    let leg = Leg::new(4.7e-6, node, 0.02, 60e-9).unwrap();
    let high = DriverDelays {
        on_s: 40e-9,
        off_s: 22e-9,
    };
    let low = DriverDelays {
        on_s: 28e-9,
        off_s: 35e-9,
    };
    let step = 2.5e-9;
    let timer = LegTimer::new(step, 8, high, low, 12e-9).unwrap();
    let [fall, rise] =
        switching_points(LegConverter::SyncBuck, 48.0, 12.0, 4.7e-6, 500e3, 1.0).unwrap();
    for (edge, point, on_in, off_out) in [
        (Edge::Falling, fall, low.on_s, high.off_s),
        (Edge::Rising, rise, high.on_s, low.off_s),
    ] {
        let t = leg.edge(edge, &point).unwrap();
        let w = window(&t);
        let p = 0.4;
        let cmd = timer
            .command(
                edge,
                &t,
                WindowPosition::new(p).unwrap(),
                ShortSwing::Minimum,
            )
            .unwrap();
        // The switch turns on n steps after the command, less the
        // outgoing driver's turn-off delay, plus the incoming one's turn-on.
        let n = f64::from(cmd.ticks().get());
        let on = n * step - off_out + on_in;
        assert!((cmd.turn_on_s() - on).abs() < 1e-15, "{edge:?}");
        // The nearest step to the aim, which lies inside this window.
        let aim = w.open_s + p * (w.close_s - w.open_s);
        let want = ((aim - on_in + off_out) / step).round();
        assert_eq!(n, want, "{edge:?}: {w:?}");
        assert!(cmd.is_in_window());
    }
    // A floor above the window: the command is raised and says it missed.
    let late = LegTimer::new(step, 8, high, low, 200e-9).unwrap();
    let t = leg.edge(Edge::Rising, &rise).unwrap();
    let cmd = late
        .command(
            Edge::Rising,
            &t,
            WindowPosition::new(0.4).unwrap(),
            ShortSwing::Minimum,
        )
        .unwrap();
    assert_eq!(cmd.ticks().get(), 80);
    assert!(!cmd.is_in_window());
    // Too little current: the extremum, or the least dead time.
    let weak = LegPoint::new(48.0, 0.05, 40.0).unwrap();
    let small = Leg::new(150e-9, node, 0.02, 60e-9).unwrap();
    let t = small.edge(Edge::Falling, &weak).unwrap();
    let EdgeTurnOn::Short(s) = t.turn_on else {
        panic!("{t:?}")
    };
    let at = timer
        .command(
            Edge::Falling,
            &t,
            WindowPosition::new(0.4).unwrap(),
            ShortSwing::Extremum,
        )
        .unwrap();
    assert!(
        (at.turn_on_s() - s.extremum_s).abs() <= 0.5 * step + 1e-15,
        "{at:?} {s:?}"
    );
    let min = timer
        .command(
            Edge::Falling,
            &t,
            WindowPosition::new(0.4).unwrap(),
            ShortSwing::Minimum,
        )
        .unwrap();
    // 12 ns of minimum dead time at 2.5 ns a step: 5 steps.
    assert_eq!(min.ticks().get(), 5);
    match LegTimer::new(step, 8, high, low, -1e-9) {
        Err(Error::Negative {
            quantity: Quantity::MinimumDeadTime,
            ..
        }) => {}
        other => panic!("{other:?}"),
    }
}

#[test]
fn an_overdamped_loop_settles_short_of_the_rail() {
    // R = 7 ohm against 2*sqrt(L/C) = 6.3 ohm: no overshoot, the current
    // never reverses, and the node settles at E (the inductor's pull).
    let leg = Leg::new(
        10e-9,
        NodeCapacitance::new(&[], &[], 1e-9).unwrap(),
        7.0,
        1e-6,
    )
    .unwrap();
    let t = leg
        .edge(Edge::Falling, &LegPoint::new(48.0, 0.5, 24.0).unwrap())
        .unwrap();
    let EdgeTurnOn::Short(s) = t.turn_on else {
        panic!("{t:?}")
    };
    // E = 24 V of swing from the bus, plus what the 0.5 A adds (at most
    // 0.5 A * 7 ohm): about 24 V left.
    assert!(s.remaining_v > 20.0 && s.remaining_v < 24.5, "{s:?}");
}

#[test]
fn the_dead_time_floor_is_whole_steps_and_fits_the_counter() {
    let d = DriverDelays {
        on_s: 20e-9,
        off_s: 20e-9,
    };
    let node = NodeCapacitance::new(&LOW, &HIGH, 0.0).unwrap();
    let small = Leg::new(150e-9, node, 0.02, 60e-9).unwrap();
    let t = small
        .edge(Edge::Falling, &LegPoint::new(48.0, 0.05, 40.0).unwrap())
        .unwrap();
    // 17.5 ns at 2.5 ns a step: 7 steps, not 8 from the product's rounding.
    let timer = LegTimer::new(2.5e-9, 8, d, d, 17.5e-9).unwrap();
    let cmd = timer
        .command(
            Edge::Falling,
            &t,
            WindowPosition::new(0.5).unwrap(),
            ShortSwing::Minimum,
        )
        .unwrap();
    assert_eq!(cmd.ticks().get(), 7);
    // A floor the counter cannot hold is refused, not clamped.
    match LegTimer::new(2.5e-9, 4, d, d, 100e-9) {
        Err(Error::OutOfRange {
            quantity: Quantity::MinimumDeadTime,
            ..
        }) => {}
        other => panic!("{other:?}"),
    }
}
