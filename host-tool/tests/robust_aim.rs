//! The robust windows a design's tables aim into, against brute force: at
//! held-out code pairs of the demo design, every true operating point and
//! board the reading can stand for (the reading model of
//! `zvs-timing montecarlo`, enumerated at its corners and sampled inside,
//! the ring solved from scratch on each scaled tank) must have a true
//! window that holds the robust window with the jitter added back on both
//! sides. And the exact model's aim lies inside it.

use std::path::Path;

use host_tool::model::design::Design;
use host_tool::model::exact::ExactModel;
use rand::{Rng, SeedableRng};

fn demo() -> Design {
    Design::load(&Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables/winch_aux.toml")).unwrap()
}

/// The true value behind a code: `code = round(x*(1 + g)/lsb + e)` with
/// `e` the offset plus noise and `r` the rounding residue in [-0.5, 0.5].
fn true_value(code: f64, zero: f64, lsb: f64, g: f64, e: f64, r: f64) -> f64 {
    (code - zero - e - r) * lsb / (1.0 + g)
}

#[test]
fn robust_windows_of_readings_lie_inside_every_true_window() {
    let design = demo();
    let tol = design.tolerance.unwrap();
    let aim = design.robust_aim().unwrap().unwrap();
    let model = ExactModel::new(&design);
    let clock = design.timer.clock_hz();
    let lead = design.timer.lead_s();
    let mut rng = rand::rngs::StdRng::seed_from_u64(0x2b1d);
    let (v, i) = (design.vin_codes, design.io_codes);
    let (mut pairs, mut robust, mut aim_moved, mut points) = (0, 0, 0, 0);
    let mut worst_open_slack = f64::INFINITY;
    while robust < 60 {
        pairs += 1;
        assert!(pairs < 5000, "too few held-out pairs have a robust window");
        let cv = rng.random_range(v.lo..=v.hi);
        // Near the ZVS boundary half the time, where windows are narrow.
        let ci = rng.random_range(i.lo..=i.hi.min(i.lo + (i.hi - i.lo) / 2));
        let p = model.at_codes(cv, ci).unwrap();
        let Some(rw) = aim.window(&design, design.vin_of(cv), design.io_of(ci)) else {
            continue;
        };
        assert_eq!(p.robust, Some(rw));
        robust += 1;
        // The aim: inside the robust window, a tick wide or more.
        let aimed = p.table_ticks / clock + lead;
        assert!(rw.open_s <= aimed && aimed <= rw.close_s);
        assert!((rw.close_s - rw.open_s) * clock >= 1.0);
        let nominal = p.nominal_ticks / clock + lead;
        if nominal < rw.open_s || nominal > rw.close_s {
            aim_moved += 1;
        }
        let e_v = tol.vin_offset_codes + tol.noise_codes;
        let e_i = tol.io_offset_codes + tol.noise_codes;
        let zero = f64::from(design.io_zero_code);
        let mut check = |gv: f64, ev: f64, rv: f64, gi: f64, ei: f64, ri: f64, l: f64, k: f64| {
            let vin = true_value(f64::from(cv), 0.0, design.vin_volts_per_code, gv, ev, rv);
            let io = true_value(f64::from(ci), zero, design.io_amps_per_code, gi, ei, ri);
            let tank = design.real.scaled(l, k);
            let t = tank
                .solver()
                .unwrap()
                .transition(&design.cell(vin, io).unwrap())
                .unwrap();
            let w = t.turn_on.window().unwrap_or_else(|| {
                panic!("no ZVS at {vin} V, {io} A (l {l}, k {k}) behind codes ({cv}, {ci})")
            });
            let slack = rw.open_s - tol.jitter_s - w.open_s;
            assert!(
                slack >= 0.0 && rw.close_s + tol.jitter_s <= w.close_s,
                "codes ({cv}, {ci}): robust {:?} not inside true {:?} at {vin} V, {io} A, l {l}, k {k}",
                rw,
                (w.open_s, w.close_s)
            );
            worst_open_slack = worst_open_slack.min(slack);
            points += 1;
        };
        let pm = |x: f64| [-x, x];
        for gv in pm(tol.vin_gain_rel) {
            for ev in pm(e_v + 0.5) {
                for gi in pm(tol.io_gain_rel) {
                    for ei in pm(e_i + 0.5) {
                        for l in pm(tol.lr_rel) {
                            for k in pm(tol.cr_rel) {
                                check(gv, ev, 0.0, gi, ei, 0.0, 1.0 + l, 1.0 + k);
                            }
                        }
                    }
                }
            }
        }
        for _ in 0..40 {
            let mut s = |x: f64| {
                if x > 0.0 {
                    rng.random_range(-x..=x)
                } else {
                    0.0
                }
            };
            let (gv, ev, rv) = (s(tol.vin_gain_rel), s(e_v), s(0.5));
            let (gi, ei, ri) = (s(tol.io_gain_rel), s(e_i), s(0.5));
            let (l, k) = (1.0 + s(tol.lr_rel), 1.0 + s(tol.cr_rel));
            check(gv, ev, rv, gi, ei, ri, l, k);
        }
    }
    println!(
        "{robust} of {pairs} held-out pairs have a robust window; {points} true points checked; \
         least slack at the opening {:.3} ns; the nominal aim lies outside the robust window at {aim_moved}",
        worst_open_slack * 1e9
    );
    assert!(
        aim_moved > 0,
        "the held-out pairs never needed the robust aim"
    );
}

#[test]
fn without_tolerances_the_aim_is_the_nominal_one() {
    let text = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables/winch_aux.toml"),
    )
    .unwrap();
    let plain = &text[..text.find("[tolerance]").unwrap()];
    // Named beside the demo, so its Coss file is found.
    let origin = concat!(env!("CARGO_MANIFEST_DIR"), "/../tables/variant.toml");
    let design = Design::parse(plain, origin).unwrap();
    assert!(design.robust_aim().unwrap().is_none());
    let model = ExactModel::new(&design);
    for (cv, ci) in [(2500, 900), (3700, 1500), (2236, 2000)] {
        let p = model.at_codes(cv, ci).unwrap();
        assert_eq!(p.robust, None);
        assert_eq!(p.table_ticks, p.nominal_ticks);
    }
}

/// The aim moves continuously with the reading (issue: the robust aim used
/// to jump to the nominal one where the robust window fell below a tick,
/// and no interpolation follows a jump). Swept across the ZVS boundary in
/// current at three voltages and in voltage at one current: the largest
/// step between neighbouring readings must shrink with the spacing, as it
/// does for a continuous function and not for a jump, and be a small
/// fraction of a tick at the finest spacing.
#[test]
fn the_aim_is_continuous_across_the_zvs_boundary() {
    let design = demo();
    let model = ExactModel::new(&design);
    let clock = design.timer.clock_hz();
    let z0 = design.tank.z0_ohm();
    let sweep = |a: f64, b: f64, n: usize, f: &dyn Fn(f64) -> f64| {
        let mut worst = 0.0f64;
        let mut last = f(a);
        for k in 1..=n {
            let x = a + (b - a) * k as f64 / n as f64;
            let y = f(x);
            worst = worst.max((y - last).abs());
            last = y;
        }
        worst
    };
    let aim = |vin: f64, io: f64| model.at(vin, io).unwrap().table_ticks;
    for vin in [37.0, 48.0, 59.0] {
        // The boundary of the constant-capacitance stand-in, J = 1, within
        // about 10 % of the curve's: sweep 0.7-1.4 of it.
        let ib = vin / z0;
        let steps: Vec<f64> = [100, 400, 1600]
            .iter()
            .map(|&n| sweep(0.7 * ib, 1.4 * ib, n, &|io| aim(vin, io)))
            .collect();
        println!("{vin} V: largest step {steps:?} ticks (aim at {clock:e} Hz)");
        assert!(steps[2] < 0.6 * steps[0], "{vin} V: {steps:?}");
        assert!(steps[2] < 0.2, "{vin} V: {steps:?}");
    }
    let io = 4.0;
    let steps: Vec<f64> = [100, 400, 1600]
        .iter()
        .map(|&n| sweep(36.0, 60.0, n, &|vin| aim(vin, io)))
        .collect();
    println!("{io} A over 36-60 V: largest step {steps:?} ticks");
    assert!(steps[2] < 0.6 * steps[0], "{steps:?}");
    assert!(steps[2] < 0.2, "{steps:?}");
}
