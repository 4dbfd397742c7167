//! Cross-check of timing-core against a general-purpose ODE solver
//! (`ode_solvers`' Dormand-Prince 5(4) integrator, Hairer, Norsett and
//! Wanner, Solving Ordinary Differential Equations I) integrating the
//! piecewise-linear circuit equations of the cell, mode by mode, with the
//! mode changes found as events (sign changes of an event function,
//! located by linear interpolation of the dense output).
//!
//! The circuit equations, written here independently of the closed forms
//! (state: switch voltage vC, Lr current iL; cell voltage V, current I):
//! - linear charge (converter diode off, iL = I): vC' = I/Cr, iL' = 0,
//!   until vC = V;
//! - ring (diode on): vC' = iL/Cr, iL' = (V - vC)/Lr, until vC = 0 (ZVS)
//!   or, if it never gets there, while iL < 0 (the valley is iL = 0 rising);
//! - clamp (body diode on, vC = 0): iL' = V/Lr, until iL = 0.
//!
//! Tolerance: 1e-6 relative + 1 ps; the integrator runs at rtol = atol =
//! 1e-12 and the dense output every 1/20000 of a ring period.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use cross_checks::{assert_close, Scenario};
use ode_solvers::{Dopri5, System, Vector2};
use timing_core::waveform::Waveform;
use timing_core::{CellPoint, Tank, Transition};

type State = Vector2<f64>;

#[derive(Clone, Copy, PartialEq)]
enum Mode {
    Charge,
    Ring,
    Clamp,
}

#[derive(Clone, Copy)]
struct Cell {
    lr: f64,
    cr: f64,
    v: f64,
    i: f64,
    mode: Mode,
    /// Event function; integration stops once it turns positive.
    event: fn(&Cell, &State) -> f64,
    fired: bool,
}

impl System<f64, State> for Cell {
    fn system(&self, _t: f64, y: &State, dy: &mut State) {
        match self.mode {
            Mode::Charge => {
                dy[0] = self.i / self.cr;
                dy[1] = 0.0;
            }
            Mode::Ring => {
                dy[0] = y[1] / self.cr;
                dy[1] = (self.v - y[0]) / self.lr;
            }
            Mode::Clamp => {
                dy[0] = 0.0;
                dy[1] = self.v / self.lr;
            }
        }
    }

    fn solout(&mut self, _t: f64, y: &State, _dy: &State) -> bool {
        if (self.event)(self, y) > 0.0 {
            self.fired = true;
        }
        self.fired
    }
}

/// Integrate `mode` from (t0, y0) until `event` turns positive; return the
/// crossing time and state (linear interpolation between dense points).
fn run_until(
    base: &Cell,
    mode: Mode,
    event: fn(&Cell, &State) -> f64,
    t0: f64,
    y0: State,
    horizon: f64,
    dx: f64,
) -> Option<(f64, State)> {
    let cell = Cell {
        mode,
        event,
        fired: false,
        ..*base
    };
    let probe = cell;
    let mut solver = Dopri5::new(cell, t0, t0 + horizon, dx, y0, 1e-12, 1e-12);
    solver.integrate().ok()?;
    let (ts, ys) = (solver.x_out(), solver.y_out());
    for k in 1..ts.len() {
        let (ga, gb) = (event(&probe, &ys[k - 1]), event(&probe, &ys[k]));
        if ga <= 0.0 && gb > 0.0 {
            let f = -ga / (gb - ga);
            let t = ts[k - 1] + f * (ts[k] - ts[k - 1]);
            let y = ys[k - 1] + (ys[k] - ys[k - 1]) * f;
            return Some((t, y));
        }
    }
    None
}

struct Simulated {
    charge_end: f64,
    peak: f64,
    peak_v: f64,
    open_close: Option<(f64, f64)>,
    /// Lr current when the body diode starts to conduct (window opening).
    open_current: Option<f64>,
    valley: Option<(f64, f64)>,
}

fn simulate(lr: f64, cr: f64, v: f64, i: f64) -> Simulated {
    let base = Cell {
        lr,
        cr,
        v,
        i,
        mode: Mode::Charge,
        event: |_, _| 0.0,
        fired: false,
    };
    let period = 2.0 * std::f64::consts::PI * (lr * cr).sqrt();
    let dx = period / 20000.0;
    // Linear charge: vC from 0 to V.
    let (t1, y1) = run_until(
        &base,
        Mode::Charge,
        |c, y| y[0] - c.v,
        0.0,
        State::new(0.0, i),
        10.0 * cr * v / i + period,
        dx,
    )
    .unwrap();
    // Ring up to the peak: iL falls through zero.
    let (tp, yp) = run_until(&base, Mode::Ring, |_, y| -y[1], t1, y1, period, dx).unwrap();
    // Then either vC reaches zero (ZVS) or iL comes back through zero first (valley).
    let to_zero = run_until(&base, Mode::Ring, |_, y| -y[0], tp, yp, 0.75 * period, dx);
    let valley = run_until(
        &base,
        Mode::Ring,
        |_, y| if y[0] > 0.0 { y[1] } else { -1.0 },
        tp,
        yp,
        0.75 * period,
        dx,
    );
    let open_current = to_zero.map(|(_, y2)| y2[1]);
    let (open_close, valley) = match (to_zero, valley) {
        (Some((t2, y2)), _) => {
            let (t3, _) = run_until(
                &base,
                Mode::Clamp,
                |_, y| y[1],
                t2,
                State::new(0.0, y2[1]),
                // The clamp lasts sqrt(J^2 - 1)/w0: up to several periods at high J.
                10.0 * period,
                dx,
            )
            .unwrap();
            (Some((t2, t3)), None)
        }
        (None, Some((tv, yv))) => (None, Some((tv, yv[0]))),
        (None, None) => panic!("neither a zero crossing nor a valley"),
    };
    Simulated {
        charge_end: t1,
        peak: tp,
        peak_v: yp[0],
        open_close,
        open_current,
        valley,
    }
}

#[test]
fn transitions_agree_with_an_ode_solver() {
    let set = Scenario::standard_set(0x0de_5eed, 8, 4);
    let mut worst = 0.0f64;
    for s in &set {
        let v = s.clamp_voltage_v;
        let i = s.inductor_current_a;
        let t = Transition::new(
            &Tank::new(s.lr_h, s.cr_f).unwrap(),
            &CellPoint::new(v, i).unwrap(),
        )
        .unwrap();
        let sim = simulate(s.lr_h, s.cr_f, v, i);
        let ctx: &dyn std::fmt::Debug = s;
        let (rel, abs) = (1e-6, 1e-12);
        worst = worst
            .max(assert_close(
                "charge end",
                t.charge_end_s(),
                sim.charge_end,
                rel,
                abs,
                ctx,
            ))
            .max(assert_close(
                "peak time",
                t.peak_s(),
                sim.peak,
                rel,
                abs,
                ctx,
            ))
            .max(assert_close(
                "peak voltage",
                t.peak_switch_voltage_v(),
                sim.peak_v,
                rel,
                0.0,
                ctx,
            ));
        match (t.window(), t.valley(), sim.open_close, sim.valley) {
            (Some(w), None, Some((open, close)), None) => {
                worst = worst
                    .max(assert_close("window open", w.open_s, open, rel, abs, ctx))
                    .max(assert_close(
                        "window close",
                        w.close_s,
                        close,
                        rel,
                        abs,
                        ctx,
                    ));
            }
            (None, Some(vy), None, Some((tv, vv))) => {
                worst = worst.max(assert_close("valley time", vy.valley_s, tv, rel, abs, ctx));
                assert_close(
                    "valley voltage",
                    vy.valley_voltage_v,
                    vv,
                    0.0,
                    1e-6 * v,
                    ctx,
                );
            }
            _ => panic!(
                "timing-core and the ODE disagree on ZVS at J = {}: {s:?}",
                t.normalized_load()
            ),
        }
    }
    println!(
        "ODE solver agreed on {} points; worst relative error {worst:.2e}",
        set.len()
    );
}

/// timing-core's waveform (the pictures' source) passes through the
/// solver's states at the solver's own event times: the end of the linear
/// charge, the peak, the window's opening and close, the valley.
#[test]
fn the_waveform_passes_through_the_solvers_states() {
    let set = Scenario::standard_set(0x0de_5eed, 8, 4);
    for s in &set {
        let (v, i) = (s.clamp_voltage_v, s.inductor_current_a);
        let tank = Tank::new(s.lr_h, s.cr_f).unwrap();
        let cell = CellPoint::new(v, i).unwrap();
        let sim = simulate(s.lr_h, s.cr_f, v, i);
        // Turn on late, so the gate-off trajectory holds through the events.
        let late = 100.0 * (s.lr_h * s.cr_f).sqrt() + sim.charge_end;
        let w = Waveform::new(&tank, &cell, late).unwrap();
        let ctx: &dyn std::fmt::Debug = s;
        let (rel, i_abs) = (1e-6, 1e-6 * i);
        let at = |t: f64| w.at(t);
        assert_close(
            "v at charge end",
            at(sim.charge_end).switch_voltage_v,
            v,
            rel,
            0.0,
            ctx,
        );
        assert_close(
            "v at peak",
            at(sim.peak).switch_voltage_v,
            sim.peak_v,
            rel,
            0.0,
            ctx,
        );
        assert_close(
            "i at peak",
            at(sim.peak).inductor_current_a,
            0.0,
            0.0,
            i_abs,
            ctx,
        );
        if let (Some((open, close)), Some(i_open)) = (sim.open_close, sim.open_current) {
            assert_close(
                "v at open",
                at(open).switch_voltage_v,
                0.0,
                0.0,
                1e-6 * v,
                ctx,
            );
            assert_close(
                "i at open",
                at(open).inductor_current_a,
                i_open,
                rel,
                i_abs,
                ctx,
            );
            assert_close(
                "i at close",
                at(close).inductor_current_a,
                0.0,
                0.0,
                i_abs,
                ctx,
            );
        }
        if let Some((tv, vv)) = sim.valley {
            assert_close(
                "v at valley",
                at(tv).switch_voltage_v,
                vv,
                0.0,
                1e-6 * v,
                ctx,
            );
        }
    }
    println!("waveform matched the ODE states at {} points", set.len());
}
