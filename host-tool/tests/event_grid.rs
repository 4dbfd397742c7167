//! The event grid against timing-core's ring: at dense random points of
//! the grid's range (the band just above and below the ZVS boundary
//! included), every grid answer lies within its stated bound of the ring's
//! own times, and the grid puts no point on the wrong side of the
//! boundary. Tanks: an invented steep Coss curve (demo-data style, not a
//! real part) bare, beside a fixed capacitor, lossless and lossy, and the
//! demo's own design.

use host_tool::model::design::Design;
use host_tool::tank::event_grid::EventGrid;
use host_tool::tank::real_tank::RealTank;
use rand::{Rng, SeedableRng};
use timing_core::coss::CossPoint;
use timing_core::{CellPoint, TurnOn};

/// 2.2 nF at 0 V falling to 150 pF at 100 V (invented).
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

struct Found {
    answered: usize,
    refused: usize,
    worst_ratio: f64,
    worst_eps_s: f64,
}

/// `points` random points over the range, a quarter of them within 2 %
/// of the boundary current; every answer within its bound.
fn check(tank: &RealTank, v: (f64, f64), i: (f64, f64), points: usize, seed: u64) -> Found {
    let solver = tank.solver().unwrap();
    let ring = match solver {
        host_tool::tank::real_tank::CellSolver::Ring(r) => r,
        host_tool::tank::real_tank::CellSolver::Ideal(_) => panic!("a ring tank"),
    };
    let t0 = std::time::Instant::now();
    let grid = EventGrid::new(&ring, v, i).unwrap();
    let built = t0.elapsed();
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
    let mut f = Found {
        answered: 0,
        refused: 0,
        worst_ratio: 0.0,
        worst_eps_s: 0.0,
    };
    for k in 0..points {
        let vv = rng.random_range(v.0..=v.1);
        let ii = if k % 4 == 0 {
            let ib = ring.boundary_current_a(vv).unwrap();
            (ib * rng.random_range(0.98..1.02)).clamp(i.0, i.1)
        } else {
            rng.random_range(i.0..=i.1)
        };
        let cell = CellPoint::new(vv, ii).unwrap();
        let Ok(truth) = ring.transition(&cell).map(|t| t.turn_on) else {
            // The ring refuses the point (it does not settle): the grid
            // must not answer there either.
            assert!(
                grid.at(&cell).is_none(),
                "({vv} V, {ii} A): the ring refuses it"
            );
            f.refused += 1;
            continue;
        };
        let Some(g) = grid.at(&cell) else {
            f.refused += 1;
            continue;
        };
        f.answered += 1;
        let diff = match (g.turn_on, truth) {
            (TurnOn::Zvs(a), TurnOn::Zvs(b)) => (a.open_s - b.open_s)
                .abs()
                .max((a.close_s - b.close_s).abs()),
            (TurnOn::Valley(a), TurnOn::Valley(b)) => (a.valley_s - b.valley_s).abs(),
            (a, b) => panic!("the grid put ({vv} V, {ii} A) on the wrong side: {a:?} vs {b:?}"),
        };
        assert!(
            diff <= g.eps_s,
            "({vv} V, {ii} A): grid off the ring by {diff:e} s, bound {:e} s",
            g.eps_s
        );
        f.worst_ratio = f.worst_ratio.max(diff / g.eps_s);
        f.worst_eps_s = f.worst_eps_s.max(g.eps_s);
    }
    let (nv, nz, nl) = grid.size();
    let (worst, ring_share) = grid.worst_eps_s();
    println!(
        "grid {nv} x ({nz} + {nl}) built in {built:.2?}: {} answered, {} refused; \
         worst bound {:.3} ps (cells: {:.3} ps, {:.2} % ring cells), band {:.1e}; \
         largest difference / bound {:.3}",
        f.answered,
        f.refused,
        f.worst_eps_s * 1e12,
        worst * 1e12,
        ring_share * 100.0,
        grid.band(),
        f.worst_ratio
    );
    f
}

#[test]
fn a_bare_steep_curve_lossless_and_lossy() {
    for r in [0.0, 0.1] {
        let t = RealTank {
            lr_h: 2.2e-6,
            cr_fixed_f: 0.0,
            coss: curve(),
            r_tank_ohm: r,
        };
        let f = check(&t, (20.0, 80.0), (0.3, 12.0), 16000, 7);
        assert!(f.answered > 14000, "the grid answers almost everywhere");
    }
}

#[test]
fn a_curve_beside_a_fixed_capacitor() {
    let t = RealTank {
        lr_h: 1.0e-6,
        cr_fixed_f: 4.7e-9,
        coss: curve(),
        r_tank_ohm: 0.05,
    };
    let f = check(&t, (36.0, 60.0), (0.5, 15.0), 16000, 11);
    assert!(f.answered > 14000);
}

#[test]
fn a_single_cell_voltage() {
    // A boost's cell voltage is its output voltage: one row.
    let t = RealTank {
        lr_h: 1.5e-6,
        cr_fixed_f: 2.2e-9,
        coss: curve(),
        r_tank_ohm: 0.08,
    };
    let f = check(&t, (48.0, 48.0), (0.5, 9.0), 8000, 3);
    assert!(f.answered > 7000);
}

#[test]
fn the_demo_tank() {
    let d = Design::load(
        &std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables/winch_aux.toml"),
    )
    .unwrap();
    let f = check(&d.real, (30.0, 66.0), (0.5, 12.0), 16000, 5);
    assert!(f.answered > 14000);
}
