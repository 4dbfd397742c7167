//! The grid-based robust window against brute force: the true windows of
//! scaled tanks (Lr and the whole capacitance scaled, the ring solved from
//! scratch for each) at every corner and at sampled interior points of
//! held-out uncertainty boxes; and, for an ideal tank, against
//! timing-core's closed-form proof.

use host_tool::tank::real_tank::RealTank;
use host_tool::tank::robust_grid::{TankSpread, WindowGrid};
use rand::{Rng, SeedableRng};
use timing_core::coss::CossPoint;
use timing_core::CellPoint;

/// An invented steep Coss curve (demo data style, not a real part):
/// 2.2 nF at 0 V falling to 150 pF at 100 V.
fn curve() -> Vec<CossPoint<f64>> {
    [
        (0.0, 2.2e-9),
        (5.0, 1.4e-9),
        (15.0, 0.7e-9),
        (40.0, 0.3e-9),
        (100.0, 0.15e-9),
    ]
    .iter()
    .map(|&(volts, farads)| CossPoint { volts, farads })
    .collect()
}

/// The true window at one point of the box (None: no ZVS).
fn truth(t: &RealTank, v: f64, i: f64, l: f64, k: f64) -> Option<(f64, f64)> {
    let s = t.scaled(l, k);
    let solver = s.solver().unwrap();
    let tr = solver.transition(&CellPoint::new(v, i).unwrap()).unwrap();
    tr.turn_on.window().map(|w| (w.open_s, w.close_s))
}

struct Found {
    boxes: usize,
    robust: usize,
    worst_open_slack: f64,
    worst_close_slack: f64,
}

/// Random boxes around held-out points; every robust window must lie
/// inside every sampled true window.
fn check(tank: &RealTank, seed: u64, boxes: usize, interior: usize) -> Found {
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
    let spread_max = 0.08;
    let (v_all, i_all) = ((30.0, 70.0), (2.0, 14.0));
    let worst = TankSpread::new(spread_max, spread_max);
    let grid = WindowGrid::new(
        tank,
        &worst,
        (v_all.0 * 0.95, v_all.1 * 1.05),
        (i_all.0 * 0.9, i_all.1 * 1.1),
    )
    .unwrap();
    let mut f = Found {
        boxes: 0,
        robust: 0,
        worst_open_slack: 0.0,
        worst_close_slack: 0.0,
    };
    for _ in 0..boxes {
        let v0 = rng.random_range(v_all.0..v_all.1);
        let i0 = rng.random_range(i_all.0..i_all.1);
        let dv = rng.random_range(0.005..0.04);
        let di = rng.random_range(0.01..0.08);
        let spread = TankSpread::new(
            rng.random_range(0.0..spread_max),
            rng.random_range(0.0..spread_max),
        );
        let v = (v0 * (1.0 - dv), v0 * (1.0 + dv));
        let i = (i0 * (1.0 - di), i0 * (1.0 + di));
        f.boxes += 1;
        let Some(rw) = grid.robust(v, i, &spread, 0.0) else {
            continue;
        };
        f.robust += 1;
        let mut latest_open = f64::NEG_INFINITY;
        let mut earliest_close = f64::INFINITY;
        let mut visit = |p: [f64; 4]| {
            let w = truth(tank, p[0], p[1], p[2], p[3])
                .unwrap_or_else(|| panic!("robust window {rw:?} claimed, but no ZVS at {p:?}"));
            assert!(
                rw.open_s >= w.0 && rw.close_s <= w.1,
                "robust {rw:?} not inside the true window {w:?} at {p:?}"
            );
            latest_open = latest_open.max(w.0);
            earliest_close = earliest_close.min(w.1);
        };
        for c in 0..16u32 {
            let e = |bit: u32, r: (f64, f64)| if c & (1 << bit) == 0 { r.0 } else { r.1 };
            visit([e(0, v), e(1, i), e(2, spread.l), e(3, spread.k)]);
        }
        for _ in 0..interior {
            visit([
                rng.random_range(v.0..=v.1),
                rng.random_range(i.0..=i.1),
                rng.random_range(spread.l.0..=spread.l.1),
                rng.random_range(spread.k.0..=spread.k.1),
            ]);
        }
        f.worst_open_slack = f.worst_open_slack.max(rw.open_s - latest_open);
        f.worst_close_slack = f.worst_close_slack.max(earliest_close - rw.close_s);
    }
    f
}

#[test]
fn the_robust_window_of_a_coss_curve_with_loss_lies_inside_every_sampled_true_window() {
    let tank = RealTank {
        lr_h: 1.2e-6,
        cr_fixed_f: 3.3e-9,
        coss: curve(),
        r_tank_ohm: 0.15,
    };
    let f = check(&tank, 6061, 80, 60);
    println!(
        "Coss curve + 0.15 ohm: {} of {} boxes robust; robust opening at most {:.3} ns after the \
         sampled latest, close at most {:.3} ns before the sampled earliest",
        f.robust,
        f.boxes,
        f.worst_open_slack * 1e9,
        f.worst_close_slack * 1e9
    );
    assert!(
        f.robust >= 10,
        "too few robust boxes to mean anything: {}",
        f.robust
    );
    // Tightness: the bound gives away little (the sampled extremes are a
    // little inside the true ones, so this overstates the loss; and the
    // grid is built for the widest spread, whose loop loss is gridded at
    // R*sqrt(1.08/0.92), more than most boxes need).
    assert!(f.worst_open_slack < 2e-9 && f.worst_close_slack < 2e-9);
}

#[test]
fn the_grid_agrees_with_the_closed_form_proof_on_an_ideal_tank() {
    let tank = RealTank::ideal(1.0e-6, 6.8e-9);
    let ideal = timing_core::Tank::new(1.0e-6, 6.8e-9).unwrap();
    let grid =
        WindowGrid::new(&tank, &TankSpread::new(0.1, 0.1), (20.0, 80.0), (1.0, 20.0)).unwrap();
    let mut rng = rand::rngs::StdRng::seed_from_u64(77);
    let (mut both, mut worst) = (0, 0.0f64);
    for _ in 0..400 {
        let v0 = rng.random_range(25.0..75.0);
        let i0 = rng.random_range(2.0..18.0);
        let (lr, cr) = (rng.random_range(0.0..0.1), rng.random_range(0.0..0.1));
        let (ev, ei) = (rng.random_range(0.0..0.03), rng.random_range(0.0..0.05));
        let u = timing_core::robust::Uncertainty::new(lr, cr, ev, ei, 0.0).unwrap();
        let proof =
            timing_core::robust::robust_window(&ideal, &CellPoint::new(v0, i0).unwrap(), &u)
                .unwrap();
        let g = grid.robust(
            (v0 * (1.0 - ev), v0 * (1.0 + ev)),
            (i0 * (1.0 - ei), i0 * (1.0 + ei)),
            &TankSpread::new(lr, cr),
            0.0,
        );
        match (proof, g) {
            (Some(p), Some(g)) => {
                both += 1;
                assert!(g.open_s >= p.open_s - 1e-15 && g.close_s <= p.close_s + 1e-15);
                worst = worst.max(g.open_s - p.open_s).max(p.close_s - g.close_s);
            }
            (None, Some(g)) => panic!("grid claims {g:?} where the proof has none"),
            _ => {}
        }
    }
    println!(
        "ideal tank: {both} boxes robust in both; grid gives away at most {:.3} ns",
        worst * 1e9
    );
    assert!(both > 200);
    assert!(worst < 1.0e-9);
}

/// What the grid relies on for a lossy loop: more loss opens the window
/// later and closes it earlier.
#[test]
fn more_loop_resistance_opens_later_and_closes_earlier() {
    let mut rng = rand::rngs::StdRng::seed_from_u64(5);
    for _ in 0..30 {
        let (v, i) = (rng.random_range(30.0..70.0), rng.random_range(4.0..14.0));
        let mut last: Option<(f64, f64)> = None;
        for r in [0.0, 0.05, 0.1, 0.2, 0.4] {
            let t = RealTank {
                lr_h: 1.2e-6,
                cr_fixed_f: 3.3e-9,
                coss: curve(),
                r_tank_ohm: r,
            };
            let Some(w) = truth(&t, v, i, 1.0, 1.0) else {
                break;
            };
            if let Some(p) = last {
                assert!(
                    w.0 > p.0 && w.1 < p.1,
                    "at {v} V, {i} A, {r} ohm: {w:?} after {p:?}"
                );
            }
            last = Some(w);
        }
    }
}
