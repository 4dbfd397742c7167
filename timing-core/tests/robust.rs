//! The robust window against brute force: at every corner of the
//! uncertainty box and at sampled interior points, the true window (the
//! f64 transition) contains the robust one; and the robust window is tight
//! (its opening is the corners' latest, its close within 1e-6 of the
//! densest sampled earliest).

use proptest::prelude::*;
use timing_core::robust::{robust_window, Uncertainty};
use timing_core::{CellPoint, Error, Quantity, Tank, Transition};

fn window(l: f64, c: f64, v: f64, i: f64) -> Option<(f64, f64)> {
    let t = Transition::new(&Tank::new(l, c).unwrap(), &CellPoint::new(v, i).unwrap()).unwrap();
    t.window().map(|w| (w.open_s, w.close_s))
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    #[test]
    fn the_robust_window_lies_inside_every_true_window(
        l0 in 0.3e-6f64..10e-6,
        c0 in 1e-9f64..40e-9,
        v0 in 10.0f64..400.0,
        j0 in 1.05f64..6.0,
        a in 0.0f64..0.2,
        b in 0.0f64..0.2,
        ev in 0.0f64..0.05,
        ei in 0.0f64..0.05,
        samples in proptest::collection::vec((0.0f64..1.0, 0.0f64..1.0, 0.0f64..1.0, 0.0f64..1.0), 300),
    ) {
        let z0 = (l0 / c0).sqrt();
        let i0 = j0 * v0 / z0;
        let u = Uncertainty::new(a, b, ev, ei, 0.0).unwrap();
        let rw = robust_window(&Tank::new(l0, c0).unwrap(), &CellPoint::new(v0, i0).unwrap(), &u).unwrap();
        // The true point (V, I) given the sensed (v0, i0) and the errors.
        let point = |fl: f64, fc: f64, fv: f64, fi: f64| {
            let l = l0 * (1.0 - a + 2.0 * a * fl);
            let c = c0 * (1.0 - b + 2.0 * b * fc);
            let v = v0 * (1.0 - ev + 2.0 * ev * fv);
            let i = i0 * (1.0 - ei + 2.0 * ei * fi);
            window(l, c, v, i)
        };
        let mut all: Vec<(f64, f64, f64, f64)> = Vec::new();
        for k in 0..16u32 {
            let bit = |n: u32| f64::from((k >> n) & 1);
            all.push((bit(0), bit(1), bit(2), bit(3)));
        }
        all.extend(samples);
        // A regular grid as well: the earliest close can sit inside the box
        // (near J = 1.272, where the close is least), in a region random
        // samples may all miss, and the tightness check below needs the
        // true minimum, not a sampled one above it.
        for k in 0..9u32.pow(4) {
            let at = |n: u32| f64::from((k / 9u32.pow(n)) % 9) / 8.0;
            all.push((at(0), at(1), at(2), at(3)));
        }
        let mut latest_open_corner = 0.0f64;
        let mut earliest_close = f64::INFINITY;
        let mut any_without_zvs = false;
        for (n, &(fl, fc, fv, fi)) in all.iter().enumerate() {
            match point(fl, fc, fv, fi) {
                Some((o, c)) => {
                    if n < 16 {
                        latest_open_corner = latest_open_corner.max(o);
                    }
                    earliest_close = earliest_close.min(c);
                    if let Some(w) = rw {
                        let eps = 1e-12 * c;
                        prop_assert!(w.open_s >= o - eps, "opening {} before a true one {}", w.open_s, o);
                        prop_assert!(w.close_s <= c + eps, "close {} after a true one {}", w.close_s, c);
                    }
                }
                None => any_without_zvs = true,
            }
        }
        match rw {
            Some(w) => {
                prop_assert!(!any_without_zvs, "a robust window where some point has no ZVS");
                // Tight: the opening is the corners' latest (proven exact) ...
                prop_assert!((w.open_s - latest_open_corner).abs() <= 1e-12 * w.open_s);
                // ... and the close is not far below the sampled earliest.
                prop_assert!(earliest_close - w.close_s <= 0.05 * (earliest_close - w.open_s).max(1e-15) + 1e-9 * earliest_close);
            }
            None => {
                // Empty: either a point without ZVS exists at the corners'
                // lowest J, or the true windows do not overlap.
                let jmin = i0 * (1.0 - ei) / (v0 * (1.0 + ev)) * (l0 * (1.0 - a) / (c0 * (1.0 + b))).sqrt();
                prop_assert!(jmin < 1.0 || earliest_close < latest_open_corner + 1e-9 * earliest_close,
                    "empty robust window with J_min {jmin}, close {earliest_close}, open {latest_open_corner}");
            }
        }
    }
}

#[test]
fn the_close_is_the_dense_grid_minimum() {
    // Near J* = 1.272, where the close is least inside the box.
    let (l0, c0, v0) = (1.0e-6_f64, 6.8e-9_f64, 48.0_f64);
    let z0 = (l0 / c0).sqrt();
    let i0 = 1.272 * v0 / z0;
    let (a, b, ev, ei) = (0.03, 0.02, 0.01, 0.01);
    let u = Uncertainty::new(a, b, ev, ei, 0.0).unwrap();
    let w = robust_window(
        &Tank::new(l0, c0).unwrap(),
        &CellPoint::new(v0, i0).unwrap(),
        &u,
    )
    .unwrap()
    .unwrap();
    let n = 40;
    let mut least = f64::INFINITY;
    for p in 0..=n {
        for q in 0..=n {
            for r in 0..=n {
                let f = |k: i32| f64::from(k) / f64::from(n);
                let l = l0 * (1.0 - a + 2.0 * a * f(p));
                let c = c0 * (1.0 - b + 2.0 * b * f(q));
                let v = v0 * (1.0 - ev + 2.0 * ev * f(r));
                for s in [0.0, 0.25, 0.5, 0.75, 1.0] {
                    let i = i0 * (1.0 - ei + 2.0 * ei * s);
                    if let Some((_, cl)) = window(l, c, v, i) {
                        least = least.min(cl);
                    }
                }
            }
        }
    }
    println!(
        "robust close {:e}, dense-grid earliest {least:e}",
        w.close_s
    );
    assert!(w.close_s <= least);
    assert!(
        least - w.close_s <= 1e-6 * least,
        "{} vs {least}",
        w.close_s
    );
}

#[test]
fn jitter_shrinks_and_bad_tolerances_are_named() {
    let tank = Tank::new(1.0e-6_f64, 6.8e-9).unwrap();
    let cell = CellPoint::new(48.0_f64, 6.0).unwrap();
    let a = robust_window(
        &tank,
        &cell,
        &Uncertainty::new(0.05, 0.05, 0.01, 0.01, 0.0).unwrap(),
    )
    .unwrap()
    .unwrap();
    let b = robust_window(
        &tank,
        &cell,
        &Uncertainty::new(0.05, 0.05, 0.01, 0.01, 2e-9).unwrap(),
    )
    .unwrap()
    .unwrap();
    assert!(
        (b.open_s - a.open_s - 2e-9).abs() < 1e-15 && (a.close_s - b.close_s - 2e-9).abs() < 1e-15
    );
    // No uncertainty: the nominal window.
    let t = Transition::new(&tank, &cell).unwrap().window().unwrap();
    let n = robust_window(&tank, &cell, &Uncertainty::none())
        .unwrap()
        .unwrap();
    assert!((n.open_s - t.open_s).abs() < 1e-18 && (n.close_s - t.close_s).abs() < 1e-15);
    assert!(matches!(
        Uncertainty::new(0.7_f64, 0.0, 0.0, 0.0, 0.0),
        Err(Error::OutOfRange {
            quantity: Quantity::ResonantInductance,
            ..
        })
    ));
    assert!(matches!(
        Uncertainty::new(0.0_f64, 0.0, 0.0, 0.0, -1.0),
        Err(Error::Negative {
            quantity: Quantity::Interval,
            ..
        })
    ));
    // A box reaching below the ZVS boundary has no robust window.
    let light = CellPoint::new(48.0, 4.2).unwrap(); // J = 1.06
    assert!(robust_window(
        &tank,
        &light,
        &Uncertainty::new(0.1, 0.1, 0.02, 0.02, 0.0).unwrap()
    )
    .unwrap()
    .is_none());
}
