//! The load grid against timing-core's closed-form transition: at dense
//! random readings (J from light load to heavy load, a quarter of them
//! within 1 % of the ZVS boundary), every answer lies within its stated
//! bound of `Transition::new` at the same cell, on the same side of the
//! boundary. Tanks: small, middling and large resonant tanks of the ranges
//! timing-core's f32 test covers (100 nH/220 pF to 22 uH/47 nF), and the
//! benchmark design's, through the design's own cache.

use host_tool::tank::load_grid::LoadGrid;
use rand::{Rng, SeedableRng};
use timing_core::{CellPoint, Tank, Transition, TurnOn};

struct Found {
    answered: usize,
    refused: usize,
    worst_ratio: f64,
    worst_eps_s: f64,
}

fn times(t: &TurnOn<f64>) -> Vec<f64> {
    match *t {
        TurnOn::Zvs(w) => vec![w.open_s, w.close_s, w.ramp_end_s],
        TurnOn::Valley(v) => vec![v.valley_s, v.ramp_end_s],
    }
}

fn check(tank: &Tank<f64>, j: (f64, f64), points: usize, seed: u64) -> Found {
    let grid = LoadGrid::new(tank, j.0, j.1).unwrap();
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
    let mut f = Found {
        answered: 0,
        refused: 0,
        worst_ratio: 0.0,
        worst_eps_s: grid.worst_eps_s(),
    };
    for k in 0..points {
        // Readings as a converter sees them: a cell voltage and a current.
        let v = rng.random_range(5.0..400.0);
        let jj = if k % 8 == 0 && j.0 < 1.0 && j.1 > 1.0 {
            // Within rounding of the boundary, where timing-core's own J
            // decides the side.
            1.0 + rng.random_range(-1e-12..1e-12)
        } else if k % 4 == 0 && j.0 < 1.0 && j.1 > 1.0 {
            rng.random_range(0.99..1.01)
        } else {
            (rng.random_range(j.0.ln()..=j.1.ln())).exp()
        };
        let cell = CellPoint::new(v, jj * v / tank.z0_ohm()).unwrap();
        let exact = Transition::new(tank, &cell).unwrap();
        let Some((got, eps)) = grid.at(&cell) else {
            // Only next to the boundary (inside the edges the sides stop
            // at) may the grid leave a reading to the transition.
            let near = (jj - 1.0).abs() <= 2.0 * host_tool::tank::load_grid::EDGE_SIGMA.powi(2)
                || (jj < 1.0 && (1.0 / jj).sqrt() - 1.0 < 2.0 * host_tool::tank::load_grid::EDGE_Y);
            assert!(near, "no answer at J = {jj} inside the tabulated range");
            f.refused += 1;
            continue;
        };
        assert_eq!(
            got.is_zvs(),
            exact.is_zvs(),
            "J = {jj}: the grid and the transition disagree on ZVS"
        );
        for (a, b) in times(&got).iter().zip(times(&exact.turn_on())) {
            let d = (a - b).abs();
            assert!(
                d <= eps,
                "J = {jj}: grid {a:e} s, transition {b:e} s, difference {d:e} s above the bound {eps:e} s"
            );
            if eps > 0.0 {
                f.worst_ratio = f.worst_ratio.max(d / eps);
            }
        }
        if let TurnOn::Valley(vg) = got {
            let ve = exact.valley().unwrap();
            assert!((vg.valley_voltage_v - ve.valley_voltage_v).abs() <= 1e-12 * v);
        }
        f.answered += 1;
    }
    f
}

#[test]
fn every_answer_within_its_bound() {
    for (lr, cr, j, seed) in [
        (1e-6, 6.8e-9, (1e-3, 40.0), 1),
        (100e-9, 220e-12, (0.05, 3.0), 2),
        (22e-6, 47e-9, (0.5, 400.0), 3),
        (4.7e-6, 1e-9, (1.0, 8.0), 4),
        (4.7e-6, 1e-9, (0.01, 0.9), 5),
        // The held-out boost's tank, whose Z0 rounds J = (1/Z0)*Z0 below 1.
        (2.2e-6, 3.3e-9, (0.02, 3.0), 6),
    ] {
        let tank = Tank::new(lr, cr).unwrap();
        let f = check(&tank, j, 40_000, seed);
        println!(
            "tank {lr:e} H/{cr:e} F, J {j:?}: {} answers ({} left to the transition next to the boundary), worst difference {:.2} of the bound, worst bound {:.3e} s",
            f.answered, f.refused, f.worst_ratio, f.worst_eps_s
        );
        assert_eq!(f.answered + f.refused, 40_000);
        assert!(f.answered > 30_000);
        // The bound is meant to be far below a tick (6 ns at 170 MHz).
        assert!(f.worst_eps_s < 1e-12, "bound {:e} s", f.worst_eps_s);
    }
}

#[test]
fn outside_its_range_the_grid_does_not_answer() {
    let tank = Tank::new(1e-6, 6.8e-9).unwrap();
    let grid = LoadGrid::new(&tank, 0.2, 5.0).unwrap();
    let z0 = tank.z0_ohm();
    for j in [0.01, 0.1, 6.0, 100.0] {
        let cell = CellPoint::new(48.0, j * 48.0 / z0).unwrap();
        assert!(grid.at(&cell).is_none(), "J = {j}");
    }
    for j in [0.2, 0.9, 0.999, 1.001, 1.5, 5.0] {
        let cell = CellPoint::new(48.0, j * 48.0 / z0).unwrap();
        assert!(grid.at(&cell).is_some(), "J = {j}");
    }
    // On the boundary itself timing-core decides.
    let cell = CellPoint::new(48.0, 48.0 / z0).unwrap();
    assert!(grid.at(&cell).is_none());
}

#[test]
fn the_benchmark_design_uses_it() {
    let d = host_tool::model::design::Design::load(
        &std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/full_scale.toml"),
    )
    .unwrap();
    let g = d.load_grid().expect("an ideal tank gets a load grid");
    assert!(g.cells() > 100);
    assert!(d.event_grid().is_none());
}

#[test]
fn a_batch_answers_as_each_load_alone() {
    use host_tool::tank::load_grid::{LoadBatch, BATCH};
    let tank = Tank::new(1e-6, 6.8e-9).unwrap();
    let grid = LoadGrid::new(&tank, 1e-3, 40.0).unwrap();
    let mut rng = rand::rngs::StdRng::seed_from_u64(7);
    let mut batch = LoadBatch::default();
    let mut answered = 0;
    for round in 0..200 {
        for j in batch.j.iter_mut() {
            *j = match rng.random_range(0..10) {
                0 => 1.0 + rng.random_range(-1e-8..1e-8),
                1 => [0.0, -1.0, 1e-9, 1e3, f64::NAN, f64::INFINITY][rng.random_range(0..6)],
                _ => rng.random_range((1e-3f64).ln()..40f64.ln()).exp(),
            };
        }
        let n = if round % 2 == 0 {
            BATCH
        } else {
            rng.random_range(1..BATCH)
        };
        grid.at_loads(&mut batch, n);
        for k in 0..n {
            let j = batch.j[k];
            match grid.at_load(j, 48.0) {
                Some((TurnOn::Zvs(w), eps)) => {
                    assert!(batch.zvs[k], "J = {j}");
                    assert_eq!(batch.first_s[k].to_bits(), w.open_s.to_bits(), "J = {j}");
                    assert_eq!(batch.close_s[k].to_bits(), w.close_s.to_bits(), "J = {j}");
                    assert_eq!(batch.eps_s[k].to_bits(), eps.to_bits(), "J = {j}");
                    answered += 1;
                }
                Some((TurnOn::Valley(v), eps)) => {
                    assert!(!batch.zvs[k], "J = {j}");
                    assert_eq!(batch.first_s[k].to_bits(), v.valley_s.to_bits(), "J = {j}");
                    assert_eq!(batch.eps_s[k].to_bits(), eps.to_bits(), "J = {j}");
                    answered += 1;
                }
                None => assert!(batch.eps_s[k].is_infinite(), "J = {j}: no answer alone"),
            }
        }
    }
    assert!(answered > 30_000);
}
