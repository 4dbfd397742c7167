//! The numerical ring against relations that hold without it:
//! - constant capacitance, no loss: the closed forms of DESIGN.md section 2
//!   (Erickson and Maksimovic, ch. 23);
//! - constant capacitance with a series resistance: the textbook solution of
//!   the underdamped series RLC circuit, x'' + 2*alpha*x' + w0^2*x = 0 with
//!   alpha = R/(2L), solved here in closed form and its zero found by
//!   bisection;
//! - a non-linear capacitance, no loss: the energy balance of DESIGN.md
//!   section 3 (peak voltage and ZVS boundary), and Q, E against a fine
//!   midpoint-rule quadrature.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use timing_core::coss::{CossPoint, SwitchCapacitance};
use timing_core::ring::RingCell;
use timing_core::{CellPoint, Error, Quantity, Tank, Transition};

const CURVE: [CossPoint<f64>; 6] = [
    CossPoint {
        volts: 0.0,
        farads: 3.1e-9,
    },
    CossPoint {
        volts: 5.0,
        farads: 2.0e-9,
    },
    CossPoint {
        volts: 15.0,
        farads: 1.0e-9,
    },
    CossPoint {
        volts: 30.0,
        farads: 0.62e-9,
    },
    CossPoint {
        volts: 60.0,
        farads: 0.45e-9,
    },
    CossPoint {
        volts: 100.0,
        farads: 0.38e-9,
    },
];

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}

#[test]
fn constant_capacitance_without_loss_gives_the_closed_forms() {
    let (lr, cr) = (1.0e-6, 6.8e-9);
    let tank = Tank::new(lr, cr).unwrap();
    let cell = RingCell::new(lr, SwitchCapacitance::new(cr, &[]).unwrap(), 0.0).unwrap();
    let mut worst = 0.0f64;
    for k in 0..200 {
        let j = 0.305 + 0.1 * f64::from(k);
        let p = CellPoint::new(48.0, j * 48.0 / tank.z0_ohm()).unwrap();
        let exact = Transition::new(&tank, &p).unwrap();
        let got = cell.transition(&p).unwrap();
        worst = worst.max(rel(got.charge_end_s, exact.charge_end_s()));
        worst = worst.max(rel(got.peak_s, exact.peak_s()));
        worst = worst.max(rel(
            got.peak_switch_voltage_v,
            exact.peak_switch_voltage_v(),
        ));
        match (got.turn_on.window(), exact.window()) {
            (Some(g), Some(e)) => {
                worst = worst.max(rel(g.open_s, e.open_s));
                // The width as a share of the whole time: it goes to 0 at J = 1.
                worst = worst.max((g.close_s - e.close_s).abs() / e.close_s);
                worst = worst.max(rel(g.ramp_end_s, e.ramp_end_s));
            }
            (None, None) => {
                let (g, e) = (got.turn_on.valley().unwrap(), exact.valley().unwrap());
                worst = worst.max(rel(g.valley_s, e.valley_s));
                assert!((g.valley_voltage_v - e.valley_voltage_v).abs() < 1e-6 * 48.0);
            }
            _ => panic!("ZVS disagrees at J = {j}"),
        }
    }
    println!("worst relative difference to the closed forms: {worst:.2e}");
    assert!(worst < 2e-7, "{worst}");
}

/// Textbook underdamped RLC: x = vC - V obeys Lr*Cr*x'' + R*Cr*x' + x = 0 from
/// x(0) = -R*I, x'(0) = I/Cr; i = Cr*x'.
fn rlc(lr: f64, cr: f64, r: f64, v: f64, i: f64, t: f64) -> (f64, f64) {
    let a = r / (2.0 * lr);
    let wd = (1.0 / (lr * cr) - a * a).sqrt();
    let x0 = -r * i;
    let dx0 = i / cr;
    let b = (dx0 + a * x0) / wd;
    let e = (-a * t).exp();
    let x = e * (x0 * (wd * t).cos() + b * (wd * t).sin());
    let dx = e * ((-a * x0 + b * wd) * (wd * t).cos() + (-a * b - x0 * wd) * (wd * t).sin());
    (v + x, cr * dx)
}

#[test]
fn constant_capacitance_with_loss_follows_the_damped_rlc_solution() {
    let (lr, cr) = (1.0e-6, 6.8e-9);
    let mut checked = 0;
    let mut worst = 0.0f64;
    for &r in &[0.05, 0.3, 1.0, 2.5] {
        let cell = RingCell::new(lr, SwitchCapacitance::new(cr, &[]).unwrap(), r).unwrap();
        for &(v, i) in &[(48.0, 6.0), (36.0, 9.0), (60.0, 5.3), (40.0, 3.0)] {
            let t = cell.transition(&CellPoint::new(v, i).unwrap()).unwrap();
            let t1 = cr * (v - r * i) / i;
            assert!(rel(t.charge_end_s, t1) < 1e-12);
            // The zero of vC after the peak (or the current's return through
            // zero), by bisection on the closed-form RLC solution.
            let w0 = 1.0 / (lr * cr).sqrt();
            let peak = |tt: f64| rlc(lr, cr, r, v, i, tt).1;
            let (mut lo, mut hi) = (0.0, std::f64::consts::PI / w0);
            for _ in 0..200 {
                let m = 0.5 * (lo + hi);
                if peak(m) > 0.0 {
                    lo = m
                } else {
                    hi = m
                }
            }
            let tp = lo;
            worst = worst.max(rel(t.peak_s, t1 + tp));
            let volt = |tt: f64| rlc(lr, cr, r, v, i, tt).0;
            let cur = |tt: f64| rlc(lr, cr, r, v, i, tt).1;
            // Search after the peak for vC = 0 before the current returns to 0.
            let mut tt = tp;
            let dt = 0.001 / w0;
            let mut zvs = None;
            while tt < tp + 4.0 / w0 {
                if volt(tt + dt) <= 0.0 {
                    zvs = Some(true);
                    break;
                }
                if cur(tt + dt) >= 0.0 {
                    zvs = Some(false);
                    break;
                }
                tt += dt;
            }
            let (mut lo, mut hi) = (tt, tt + dt);
            let f = |x: f64| if zvs == Some(true) { volt(x) } else { -cur(x) };
            for _ in 0..200 {
                let m = 0.5 * (lo + hi);
                if f(m) > 0.0 {
                    lo = m
                } else {
                    hi = m
                }
            }
            let te = t1 + lo;
            match (t.turn_on.window(), zvs) {
                (Some(w), Some(true)) => {
                    worst = worst.max(rel(w.open_s, te));
                    // Clamp: Lr*i' = V - R*i from i0 to 0.
                    let i0 = cur(lo);
                    let t3a = lr / r * (1.0 + r * (-i0) / v).ln();
                    worst = worst.max((w.close_s - (te + t3a)).abs() / w.close_s);
                }
                (None, Some(false)) => {
                    let val = t.turn_on.valley().unwrap();
                    worst = worst.max(rel(val.valley_s, te));
                    assert!((val.valley_voltage_v - volt(lo)).abs() < 1e-6 * v);
                }
                other => panic!("ZVS disagrees at R {r}, V {v}, I {i}: {other:?}"),
            }
            checked += 1;
        }
    }
    assert_eq!(checked, 16);
    println!("worst relative difference to the damped RLC solution: {worst:.2e}");
    assert!(worst < 1e-7, "{worst}");
}

#[test]
fn charge_and_energy_match_a_fine_quadrature() {
    let c = SwitchCapacitance::new(1.5e-9, &CURVE).unwrap();
    for &v in &[0.5, 5.0, 12.3, 30.0, 48.0, 99.0, 140.0] {
        let n = 200_000;
        let h = v / f64::from(n);
        let (mut q, mut e) = (0.0, 0.0);
        for k in 0..n {
            let u = (f64::from(k) + 0.5) * h;
            q += c.at(u) * h;
            e += u * c.at(u) * h;
        }
        assert!(rel(c.charge(v), q) < 1e-8, "Q({v})");
        assert!(rel(c.energy(v), e) < 1e-8, "E({v})");
        let (tr, er, b) = (
            c.charge_equivalent(v),
            c.energy_equivalent(v),
            c.boundary_equivalent(v),
        );
        assert!(rel(b, 2.0 * tr - er) < 1e-12);
        // A falling curve stores less energy than its charge suggests.
        assert!(er <= tr && b >= tr);
    }
    let k = SwitchCapacitance::new(6.8e-9, &[]).unwrap();
    for v in [1.0, 48.0] {
        assert!(rel(k.charge_equivalent(v), 6.8e-9) < 1e-15);
        assert!(rel(k.energy_equivalent(v), 6.8e-9) < 1e-15);
        assert!(rel(k.boundary_equivalent(v), 6.8e-9) < 1e-15);
    }
}

#[test]
fn the_non_linear_ring_keeps_the_energy_balance() {
    let lr = 1.0e-6;
    let c = SwitchCapacitance::new(1.5e-9, &CURVE).unwrap();
    let cell = RingCell::new(lr, c, 0.0).unwrap();
    let (mut worst_e, mut worst_w) = (0.0f64, 0.0f64);
    for &v in &[24.0, 36.0, 48.0, 60.0] {
        // Boundary: 1/2*Lr*I^2 = V*Q(V) - E(V).
        let ib = cell.boundary_current_a(v).unwrap();
        let above = cell
            .transition(&CellPoint::new(v, ib * 1.0005).unwrap())
            .unwrap();
        let below = cell
            .transition(&CellPoint::new(v, ib * 0.9995).unwrap())
            .unwrap();
        assert!(
            above.turn_on.is_zvs() && !below.turn_on.is_zvs(),
            "boundary at {v} V"
        );
        // The boundary is the one of the constant 2*Co(tr) - Co(er).
        let tank = cell.boundary_tank(v).unwrap();
        assert!(rel(ib * tank.z0_ohm(), v) < 1e-12);
        for &f in &[1.2, 2.0, 4.0] {
            let i = f * ib;
            let t = cell.transition(&CellPoint::new(v, i).unwrap()).unwrap();
            // At the peak all of 1/2*Lr*I^2 sits in the capacitance above V.
            let vp = t.peak_switch_voltage_v;
            let stored = (c.energy(vp) - c.energy(v)) - v * (c.charge(vp) - c.charge(v));
            worst_e = worst_e.max(rel(stored, 0.5 * lr * i * i));
            // At the window's opening: 1/2*Lr*i0^2 = 1/2*Lr*I^2 - (V*Q(V) - E(V)),
            // and i0 sets the clamp time Lr*|i0|/V.
            let w = t.turn_on.window().unwrap();
            let i0 = (i * i - ib * ib).sqrt();
            worst_w = worst_w.max(rel(w.close_s - w.open_s, lr * i0 / v));
            // Linear charge: Q(V)/I.
            assert!(rel(t.charge_end_s, c.charge(v) / i) < 1e-14);
        }
    }
    println!(
        "energy at the peak: {worst_e:.2e}; clamp time from the energy balance: {worst_w:.2e}"
    );
    assert!(worst_e < 1e-6 && worst_w < 1e-4, "{worst_e} {worst_w}");
}

#[test]
fn losses_narrow_the_window_and_raise_the_boundary() {
    let c = SwitchCapacitance::new(4.7e-9, &CURVE).unwrap();
    let ideal = RingCell::new(1.0e-6, c, 0.0).unwrap();
    let lossy = RingCell::new(1.0e-6, c, 0.5).unwrap();
    let p = CellPoint::new(48.0, 8.0).unwrap();
    let a = ideal.transition(&p).unwrap().turn_on.window().unwrap();
    let b = lossy.transition(&p).unwrap().turn_on.window().unwrap();
    assert!(b.close_s - b.open_s < a.close_s - a.open_s);
    let (ia, ib) = (
        ideal.boundary_current_a(48.0).unwrap(),
        lossy.boundary_current_a(48.0).unwrap(),
    );
    assert!(ib > ia, "{ib} vs {ia}");
    let just = lossy
        .transition(&CellPoint::new(48.0, ib * 1.00001).unwrap())
        .unwrap();
    let not = lossy
        .transition(&CellPoint::new(48.0, ib * 0.99999).unwrap())
        .unwrap();
    assert!(just.turn_on.is_zvs() && !not.turn_on.is_zvs());
}

#[test]
fn bad_curves_and_loops_are_refused_with_the_value() {
    let falling = [
        CossPoint {
            volts: 10.0,
            farads: 1e-9,
        },
        CossPoint {
            volts: 10.0,
            farads: 1e-9,
        },
    ];
    assert_eq!(
        SwitchCapacitance::new(1e-9, &falling),
        Err(Error::OutOfRange {
            quantity: Quantity::CossVoltage,
            value: 10.0,
            min: 10.0,
            max: f64::INFINITY
        })
    );
    let negative = [CossPoint {
        volts: 0.0,
        farads: -1e-9,
    }];
    assert_eq!(
        SwitchCapacitance::new(1e-9, &negative),
        Err(Error::NotPositive {
            quantity: Quantity::CossCapacitance,
            value: -1e-9
        })
    );
    let nan = [CossPoint {
        volts: f64::NAN,
        farads: 1e-9,
    }];
    assert!(matches!(
        SwitchCapacitance::new(1e-9, &nan),
        Err(Error::NotFinite {
            quantity: Quantity::CossVoltage,
            ..
        })
    ));
    assert_eq!(
        SwitchCapacitance::<f64>::new(0.0, &[]),
        Err(Error::NotPositive {
            quantity: Quantity::ResonantCapacitance,
            value: 0.0
        })
    );
    let c = SwitchCapacitance::new(6.8e-9, &[]).unwrap();
    assert!(matches!(
        RingCell::new(1e-6, c, -0.1),
        Err(Error::Negative {
            quantity: Quantity::TankResistance,
            ..
        })
    ));
    let cell = RingCell::new(1e-6, c, 10.0).unwrap();
    let e = cell
        .transition(&CellPoint::new(48.0, 6.0).unwrap())
        .unwrap_err();
    assert_eq!(
        e,
        Error::OutOfRange {
            quantity: Quantity::TankResistance,
            value: 10.0,
            min: 0.0,
            max: 8.0
        }
    );
    assert!(e.to_string().contains("tank series resistance"));
}

#[test]
fn f32_follows_f64() {
    let c64 = SwitchCapacitance::new(4.7e-9, &CURVE).unwrap();
    let curve32: Vec<CossPoint<f32>> = CURVE
        .iter()
        .map(|p| CossPoint {
            volts: p.volts as f32,
            farads: p.farads as f32,
        })
        .collect();
    let c32 = SwitchCapacitance::new(4.7e-9_f32, &curve32).unwrap();
    let (a, b) = (
        RingCell::new(1e-6, c64, 0.1).unwrap(),
        RingCell::new(1e-6_f32, c32, 0.1).unwrap(),
    );
    let mut worst = 0.0f64;
    for k in 0..40 {
        let (v, i) = (36.0 + 0.6 * f64::from(k), 2.0 + 0.2 * f64::from(k));
        let x = a.transition(&CellPoint::new(v, i).unwrap()).unwrap();
        let y = b
            .transition(&CellPoint::new(v as f32, i as f32).unwrap())
            .unwrap();
        worst = worst.max(rel(
            f64::from(
                y.turn_on
                    .target_s(timing_core::WindowPosition::new(0.25).unwrap()),
            ),
            x.turn_on
                .target_s(timing_core::WindowPosition::new(0.25).unwrap()),
        ));
    }
    println!("f32 vs f64 target: {worst:.2e}");
    assert!(worst < 2e-6, "{worst}");
}

#[test]
fn the_waveform_follows_the_closed_form_one_for_a_constant_capacitance() {
    // timing-core's closed-form waveform (the ideal cell's piecewise
    // solution) as the reference; the ring's is straight lines between
    // steps of 1/20 radian, so within 0.05^2/8 of the swing.
    let (lr, cr) = (1.0e-6, 6.8e-9);
    let tank = Tank::new(lr, cr).unwrap();
    let cell = RingCell::new(lr, SwitchCapacitance::new(cr, &[]).unwrap(), 0.0).unwrap();
    for &(v, i) in &[(48.0, 6.0), (36.0, 9.0), (60.0, 6.5)] {
        let p = CellPoint::new(v, i).unwrap();
        let w = Transition::new(&tank, &p).unwrap().window().unwrap();
        for &on in &[w.open_s + 0.3 * w.width_s(), w.open_s - 20e-9] {
            let reference = timing_core::waveform::Waveform::new(&tank, &p, on).unwrap();
            let times: Vec<f64> = (0..400).map(|k| -50e-9 + 2e-9 * f64::from(k)).collect();
            let mut out = vec![reference.at(0.0); times.len()];
            cell.waveform(&p, on, &times, &mut out).unwrap();
            let mut checked = 0;
            for (t, got) in times.iter().zip(&out) {
                let r = reference.at(*t);
                if *t > on + 600e-9 {
                    break;
                }
                assert!(got.switch_voltage_v.is_finite(), "NaN at {t}");
                assert!(
                    (got.switch_voltage_v - r.switch_voltage_v).abs() < 1e-3 * v * 2.0,
                    "v at {t}: {} vs {}",
                    got.switch_voltage_v,
                    r.switch_voltage_v
                );
                assert!(
                    (got.inductor_current_a - r.inductor_current_a).abs() < 2e-3 * i,
                    "i at {t}: {} vs {}",
                    got.inductor_current_a,
                    r.inductor_current_a
                );
                assert_eq!(got.gate_on, r.gate_on);
                checked += 1;
            }
            assert!(checked > 200);
        }
    }
}

/// The textbook underdamped series RLC (as [`rlc`]) from any start:
/// x = vC - V from x(0) = `x0`, x'(0) = `dx0`; returns vC.
fn rlc_from(lr: f64, cr: f64, r: f64, v: f64, (x0, dx0): (f64, f64), t: f64) -> f64 {
    let a = r / (2.0 * lr);
    let wd = (1.0 / (lr * cr) - a * a).sqrt();
    let b = (dx0 + a * x0) / wd;
    v + (-a * t).exp() * (x0 * (wd * t).cos() + b * (wd * t).sin())
}

#[test]
fn the_free_ring_follows_the_damped_rlc_solution_and_keeps_the_energy() {
    // Constant capacitance with loss, from (0 V, 0 A) as after the window
    // closes: the series RLC's step response over five periods.
    let (lr, cr, r, v): (f64, f64, f64, f64) = (1.0e-6, 6.8e-9, 0.1, 48.0);
    let cell = RingCell::new(lr, SwitchCapacitance::new(cr, &[]).unwrap(), r).unwrap();
    let at = CellPoint::new(v, 6.0).unwrap();
    let t0 = 1.0e-6;
    let period = std::f64::consts::TAU * (lr * cr).sqrt();
    let mut worst = 0.0f64;
    let mut steps = 0;
    let end = cell
        .free_ring(&at, (t0, 0.0, 0.0), t0 + 5.0 * period, &mut |t, vc, _| {
            let want = rlc_from(lr, cr, r, v, (-v, 0.0), t - t0);
            worst = worst.max((vc - want).abs() / v);
            steps += 1;
        })
        .unwrap();
    println!("free ring against the damped RLC: within {worst:.2e} of V over {steps} steps");
    // RK4's phase error grows with the periods: 1.4e-6 after five.
    assert!(worst < 3e-6, "{worst}");
    assert!(end >= t0 + 5.0 * period);
    // A start the equations do not hold from (the current pulling the
    // voltage below zero, where the body diode clamps) stops at once.
    let stop = cell
        .free_ring(&at, (t0, 0.0, -1.0), t0 + period, &mut |_, _, _| {})
        .unwrap();
    assert_eq!(stop, t0);
    // A non-linear curve without loss, from a valley: 1/2*Lr*i^2 + E(vC)
    // - V*Q(vC) is constant (d/dt of the first is i*(V - vC), of the rest
    // (vC - V)*C*vC' = (vC - V)*i).
    let c = SwitchCapacitance::new(1.5e-9, &CURVE).unwrap();
    let ring = RingCell::new(lr, c, 0.0).unwrap();
    let at = CellPoint::new(v, 3.0).unwrap();
    let energy = |vc: f64, i: f64| 0.5 * lr * i * i + c.energy(vc) - v * c.charge(vc);
    let e0 = energy(20.0, 0.0);
    let scale = v * c.charge(v);
    let mut drift = 0.0f64;
    ring.free_ring(&at, (0.0, 20.0, 0.0), 5.0 * period, &mut |_, vc, i| {
        drift = drift.max((energy(vc, i) - e0).abs() / scale);
    })
    .unwrap();
    println!("free ring on the curve: energy within {drift:.2e} of V*Q(V)");
    assert!(drift < 1e-5, "{drift}");
}
