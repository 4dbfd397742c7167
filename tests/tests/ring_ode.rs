//! timing-core's numerical ring (a voltage-dependent capacitance and a
//! lossy loop) against a general-purpose ODE solver: `ode_solvers`'
//! Dormand-Prince 5(4) (Hairer, Norsett and Wanner, Solving Ordinary
//! Differential Equations I) at rtol = atol = 1e-12 with dense output every
//! 1/40000 of a ring period, integrating the same circuit equations written
//! here independently (the capacitance by its own linear interpolation of
//! the points, the linear charge by integrating vC' = I/C(vC)):
//! - linear charge: C(vC)*vC' = I until vC = V - R*I (the freewheel diode
//!   node reaches zero);
//! - ring: C(vC)*vC' = iL, Lr*iL' = V - vC - R*iL, until vC = 0 or iL
//!   returns through zero;
//! - clamp: Lr*iL' = V - R*iL until iL = 0.
//!
//! Also the instant the switch voltage falls below a comparator's 2 V
//! threshold on its way down (`RingCell::threshold_crossing`, what the
//! online trim's model predicts), against the solver's own crossing.
//!
//! Events by linear interpolation between dense points. Agreement: 1e-3
//! relative + 5 ps. Measured: with a fixed capacitor beside the curve,
//! within 7 ps (2.7e-5); the curve alone (capacitance changing fourfold
//! within a few volts of zero, where the ring crosses it fastest), the
//! window opens up to 47 ps (5.9e-4) early: the ring's steps follow the
//! local resonance, not how fast C changes. 0.008 of a 5.9 ns tick.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use ode_solvers::{Dopri5, System, Vector2};
use timing_core::coss::{CossPoint, SwitchCapacitance};
use timing_core::ring::RingCell;
use timing_core::CellPoint;

type State = Vector2<f64>;

/// An invented Coss curve for the check (volt, farad), steeper than the demo's.
const CURVE: [(f64, f64); 7] = [
    (0.0, 4.0e-9),
    (3.0, 3.1e-9),
    (8.0, 1.6e-9),
    (20.0, 0.8e-9),
    (45.0, 0.5e-9),
    (90.0, 0.36e-9),
    (150.0, 0.3e-9),
];

fn c_of(fixed: f64, v: f64) -> f64 {
    let pts = &CURVE;
    if v <= pts[0].0 {
        // Continue the first piece below zero (as the ring does inside a
        // step; physically the switch never goes below zero).
        let s = (pts[1].1 - pts[0].1) / (pts[1].0 - pts[0].0);
        return fixed + (pts[0].1 + s * (v - pts[0].0)).max(pts[0].1);
    }
    for w in pts.windows(2) {
        if v <= w[1].0 {
            let f = (v - w[0].0) / (w[1].0 - w[0].0);
            return fixed + w[0].1 + f * (w[1].1 - w[0].1);
        }
    }
    fixed + pts[pts.len() - 1].1
}

/// The comparator threshold of the crossing check, volt.
const THRESHOLD_V: f64 = 2.0;

#[derive(Clone, Copy)]
struct Ring {
    lr: f64,
    fixed: f64,
    r: f64,
    v: f64,
    i: f64,
    charge: bool,
    event: fn(&Ring, &State) -> f64,
    fired: bool,
    /// A comparator's threshold on the switch voltage, volt.
    threshold: f64,
}

impl System<f64, State> for Ring {
    fn system(&self, _t: f64, y: &State, dy: &mut State) {
        if self.charge {
            dy[0] = self.i / c_of(self.fixed, y[0]);
            dy[1] = 0.0;
        } else {
            dy[0] = y[1] / c_of(self.fixed, y[0]);
            dy[1] = (self.v - y[0] - self.r * y[1]) / self.lr;
        }
    }
    fn solout(&mut self, _t: f64, y: &State, _dy: &State) -> bool {
        if (self.event)(self, y) > 0.0 {
            self.fired = true;
        }
        self.fired
    }
}

fn run_until(
    base: &Ring,
    charge: bool,
    event: fn(&Ring, &State) -> f64,
    t0: f64,
    y0: State,
    horizon: f64,
    dx: f64,
) -> Option<(f64, State)> {
    let cell = Ring {
        charge,
        event,
        fired: false,
        ..*base
    };
    let mut solver = Dopri5::new(cell, t0, t0 + horizon, dx, y0, 1e-12, 1e-12);
    solver.integrate().ok()?;
    let (ts, ys) = (solver.x_out(), solver.y_out());
    for k in 1..ts.len() {
        let (ga, gb) = (event(&cell, &ys[k - 1]), event(&cell, &ys[k]));
        if ga <= 0.0 && gb > 0.0 {
            let f = -ga / (gb - ga);
            return Some((
                ts[k - 1] + f * (ts[k] - ts[k - 1]),
                ys[k - 1] + (ys[k] - ys[k - 1]) * f,
            ));
        }
    }
    None
}

/// (window open, window close) or (valley, valley voltage), and where the
/// switch voltage falls below `threshold` on its way down (if it does
/// before the opening or the valley).
fn reference(
    lr: f64,
    fixed: f64,
    r: f64,
    v: f64,
    i: f64,
    threshold: f64,
) -> ((bool, f64, f64), Option<f64>) {
    let base = Ring {
        lr,
        fixed,
        r,
        v,
        i,
        charge: true,
        event: |_, _| 0.0,
        fired: false,
        threshold,
    };
    let period = 2.0 * std::f64::consts::PI * (lr * (fixed + CURVE[0].1)).sqrt();
    let dx = period / 40000.0;
    let (t1, y1) = run_until(
        &base,
        true,
        |c, y| y[0] - (c.v - c.r * c.i),
        0.0,
        State::new(0.0, i),
        100.0 * period,
        dx,
    )
    .unwrap();
    let (tp, yp) = run_until(
        &base,
        false,
        |_, y| -y[1],
        t1,
        State::new(y1[0], i),
        period,
        dx,
    )
    .unwrap();
    let to_zero = run_until(&base, false, |_, y| -y[0], tp, yp, period, dx);
    let below = run_until(&base, false, |c, y| c.threshold - y[0], tp, yp, period, dx);
    let valley = run_until(
        &base,
        false,
        |_, y| if y[0] > 0.0 { y[1] } else { -1.0 },
        tp,
        yp,
        period,
        dx,
    );
    let clamp = |i0: f64| {
        if r > 0.0 {
            lr / r * (1.0 + r * (-i0) / v).ln()
        } else {
            lr * (-i0) / v
        }
    };
    let events = match (to_zero, valley) {
        (Some((to, yo)), None) => (true, to, to + clamp(yo[1])),
        (Some((to, yo)), Some((tv, _))) if to < tv => (true, to, to + clamp(yo[1])),
        (_, Some((tv, yv))) => (false, tv, yv[0]),
        (None, None) => panic!("no event at {v} V {i} A"),
    };
    // The crossing counts only before the opening or the valley.
    let crossing = below.map(|(t, _)| t).filter(|&t| t <= events.1 || events.0);
    (events, crossing)
}

#[test]
fn the_ring_matches_an_adaptive_solver() {
    let points: Vec<CossPoint<f64>> = CURVE
        .iter()
        .map(|&(volts, farads)| CossPoint { volts, farads })
        .collect();
    let lr = 1.5e-6;
    let mut worst = 0.0f64;
    let mut worst_trip = 0.0f64;
    let mut seen = (0, 0, 0);
    for &(fixed, r) in &[(3.3e-9, 0.0), (3.3e-9, 0.25), (0.0, 0.1), (8.2e-9, 0.5)] {
        let cell = RingCell::new(lr, SwitchCapacitance::new(fixed, &points).unwrap(), r).unwrap();
        for &(v, i) in &[
            (24.0, 2.0),
            (48.0, 4.5),
            (60.0, 9.0),
            (36.0, 1.2),
            (80.0, 6.0),
            (30.0, 14.0),
        ] {
            let got = cell.transition(&CellPoint::new(v, i).unwrap()).unwrap();
            let ((zvs, a, b), trip) = reference(lr, fixed, r, v, i, THRESHOLD_V);
            let close = |x: f64, y: f64| (x - y).abs() <= 1e-3 * y.abs() + 5e-12;
            // What a comparator on the switch node sees.
            let (_, crossing) = cell
                .threshold_crossing(&CellPoint::new(v, i).unwrap(), THRESHOLD_V)
                .unwrap();
            match (crossing, trip) {
                (Some(c), Some(t)) => {
                    seen.2 += 1;
                    worst_trip = worst_trip.max((c - t).abs());
                    assert!(
                        close(c, t),
                        "{fixed} F {r} ohm {v} V {i} A: crossing {c:e} vs {t:e}"
                    );
                }
                (None, None) => {}
                other => panic!("crossing disagrees at {fixed} F {r} ohm {v} V {i} A: {other:?}"),
            }
            match (got.turn_on.window(), got.turn_on.valley(), zvs) {
                (Some(w), _, true) => {
                    seen.0 += 1;
                    worst = worst
                        .max((w.open_s - a).abs() / a)
                        .max((w.close_s - b).abs() / b);
                    println!(
                        "{fixed:e} F {r} ohm {v} V {i} A: open {:.3} ps off, close {:.3} ps off",
                        (w.open_s - a) * 1e12,
                        (w.close_s - b) * 1e12
                    );
                    assert!(
                        close(w.open_s, a) && close(w.close_s, b),
                        "{fixed} F {r} ohm {v} V {i} A: {w:?} vs {a:e} {b:e}"
                    );
                }
                (_, Some(val), false) => {
                    seen.1 += 1;
                    worst = worst.max((val.valley_s - a).abs() / a);
                    println!(
                        "{fixed:e} F {r} ohm {v} V {i} A: valley {:.3} ps off",
                        (val.valley_s - a) * 1e12
                    );
                    assert!(
                        close(val.valley_s, a),
                        "{fixed} F {r} ohm {v} V {i} A: valley {} vs {a:e}",
                        val.valley_s
                    );
                    assert!(
                        (val.valley_voltage_v - b).abs() <= 1e-4 * v,
                        "valley voltage {} vs {b}",
                        val.valley_voltage_v
                    );
                }
                other => {
                    panic!("ZVS disagrees at {fixed} F {r} ohm {v} V {i} A: {other:?} vs {zvs}")
                }
            }
        }
    }
    println!(
        "ring vs Dormand-Prince: worst relative difference {worst:.2e}; {} ZVS, {} valley; {} crossings of {THRESHOLD_V} V, worst {:.1} ps off",
        seen.0, seen.1, seen.2, worst_trip * 1e12
    );
    assert!(seen.0 >= 8 && seen.1 >= 3 && seen.2 >= 8, "{seen:?}");
}
