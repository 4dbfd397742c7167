//! The leg's robust window against brute force: the edge solved from
//! scratch on boards drawn from held-out tolerance boxes (inductance, node
//! capacitance and far end scaled, the bus voltage and current anywhere in
//! the box, the corners always among them). Every board's window must
//! contain the robust one, and the robust one must not be much narrower
//! than what the boards share.

use host_tool::tank::leg_grid::{FarEnd, LegAsBuilt, LegGrid, LegSpread};
use rand::{Rng, SeedableRng};
use timing_core::coss::CossPoint;
use timing_core::leg::{Edge, LegPoint};

/// Invented curves (not real parts): a 100 V-class low side and a
/// different high side.
fn low() -> Vec<CossPoint<f64>> {
    [
        (0.0, 2.2e-9),
        (5.0, 1.1e-9),
        (20.0, 0.45e-9),
        (80.0, 0.3e-9),
    ]
    .iter()
    .map(|&(volts, farads)| CossPoint { volts, farads })
    .collect()
}

fn high() -> Vec<CossPoint<f64>> {
    [
        (0.0, 1.6e-9),
        (8.0, 0.8e-9),
        (30.0, 0.35e-9),
        (80.0, 0.25e-9),
    ]
    .iter()
    .map(|&(volts, farads)| CossPoint { volts, farads })
    .collect()
}

fn leg(l_h: f64, far_end: FarEnd) -> LegAsBuilt {
    LegAsBuilt {
        l_h,
        low: low(),
        high: high(),
        c_ext_f: 100e-12,
        r_ohm: 0.03,
        max_diode_s: 80e-9,
        far_end,
    }
}

/// The true window of one board, `None` where its swing stops short.
fn truth(
    b: &LegAsBuilt,
    edge: Edge,
    v: f64,
    i: f64,
    l: f64,
    k: f64,
    far: f64,
) -> Option<(f64, f64)> {
    let board = b.board(l, k, b.r_ohm);
    let leg = board.leg().unwrap();
    let t = leg
        .edge(edge, &LegPoint::new(v, i, b.far_v(v, far)).unwrap())
        .unwrap();
    t.turn_on.window().map(|w| (w.open_s, w.close_s))
}

struct Found {
    boxes: usize,
    robust: usize,
    /// Largest (sampled shared opening - robust opening) over
    /// the window's width: positive means the robust window was wrong.
    worst_inside: f64,
    /// Largest slack of the robust window against the sampled shared one,
    /// second.
    worst_slack_s: f64,
}

fn check(b: &LegAsBuilt, edge: Edge, v: (f64, f64), i: (f64, f64), seed: u64) -> Found {
    let spread = LegSpread::new(0.05, 0.05, 0.02);
    // Boxes: 1 % and 2 % gain, 0.2 V and 40 mA offsets.
    let (vg, ig, voff, ioff) = (0.01, 0.02, 0.2, 0.04);
    let pad_v = (v.0 * (1.0 - vg) - voff, v.1 * (1.0 + vg) + voff);
    let wide = |x: f64| x.abs() * ig + ioff;
    let pad_i = (i.0 - wide(i.0) - 0.1, i.1 + wide(i.1) + 0.1);
    let t0 = std::time::Instant::now();
    let grid = LegGrid::new(b, edge, &spread, pad_v, pad_i, 2e-11).unwrap();
    println!(
        "grid {:?} in {:.1} s",
        grid.size(),
        t0.elapsed().as_secs_f64()
    );
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
    let mut f = Found {
        boxes: 0,
        robust: 0,
        worst_inside: f64::NEG_INFINITY,
        worst_slack_s: 0.0,
    };
    for _ in 0..60 {
        let vs = rng.random_range(v.0..v.1);
        let is = rng.random_range(i.0..i.1);
        let tv = host_tool::tank::leg_grid::true_range_signed(vs, vg, voff);
        let ti = host_tool::tank::leg_grid::true_range_signed(is, ig, ioff);
        f.boxes += 1;
        let robust = grid.robust(tv, ti, 0.0);
        // The boards: every corner, then random interior points.
        let mut open = f64::NEG_INFINITY;
        let mut close = f64::INFINITY;
        let mut short = false;
        for n in 0..160 {
            let corner = |bit: usize, r: (f64, f64)| {
                if n < 64 {
                    if (n >> bit) & 1 == 0 {
                        r.0
                    } else {
                        r.1
                    }
                } else {
                    f64::NAN
                }
            };
            let draw = |rng: &mut rand::rngs::StdRng, bit: usize, r: (f64, f64)| {
                let c = corner(bit, r);
                if c.is_nan() {
                    rng.random_range(r.0..=r.1)
                } else {
                    c
                }
            };
            let vv = draw(&mut rng, 0, tv);
            let ii = draw(&mut rng, 1, ti);
            let l = draw(&mut rng, 2, spread.l);
            let k = draw(&mut rng, 3, spread.k);
            let far = draw(&mut rng, 4, spread.far);
            match truth(b, edge, vv, ii, l, k, far) {
                Some((o, c)) => {
                    open = open.max(o);
                    close = close.min(c);
                }
                None => short = true,
            }
        }
        if let Some(r) = robust {
            f.robust += 1;
            assert!(
                !short,
                "robust window where a board stops short: {edge:?} {tv:?} {ti:?}"
            );
            let width = (r.close_s - r.open_s).max(1e-12);
            f.worst_inside = f
                .worst_inside
                .max((open - r.open_s) / width)
                .max((r.close_s - close) / width);
            assert!(
                open <= r.open_s + 1e-13 && close >= r.close_s - 1e-13,
                "{edge:?} box {tv:?} x {ti:?}: boards open by {open:e} and close from {close:e}, \
                 robust window {:e}..{:e}",
                r.open_s,
                r.close_s
            );
            if (r.open_s - open).max(close - r.close_s) > f.worst_slack_s {
                f.worst_slack_s = (r.open_s - open).max(close - r.close_s);
                println!(
                    "  slack {:.3} ns at {tv:?} x {ti:?}: open {:.2}/{:.2} close {:.2}/{:.2} ns",
                    f.worst_slack_s * 1e9,
                    r.open_s * 1e9,
                    open * 1e9,
                    r.close_s * 1e9,
                    close * 1e9
                );
            }
        }
    }
    f
}

#[test]
fn every_board_of_the_box_contains_the_robust_window() {
    // A synchronous buck from 40-56 V to 12 V: a filter inductor (large)
    // and a resonant one; both edges; currents of both signs.
    for (l_h, far) in [(4.7e-6, FarEnd::Volts(12.0)), (220e-9, FarEnd::OfBus(0.5))] {
        let b = leg(l_h, far);
        for (edge, i) in [(Edge::Falling, (0.5, 8.0)), (Edge::Rising, (-5.0, -0.3))] {
            let f = check(&b, edge, (40.0, 56.0), i, 7);
            println!(
                "L = {l_h:e} H, {edge:?}: {} of {} boxes have a robust window; \
                 worst robust-vs-sampled slack {:.3} ns (sampled boards, so slack >= the bound's own)",
                f.robust,
                f.boxes,
                f.worst_slack_s * 1e9
            );
            assert!(
                f.robust * 2 >= f.boxes,
                "too few robust windows: {}",
                f.robust
            );
            assert!(f.worst_inside <= 0.0);
        }
    }
}
