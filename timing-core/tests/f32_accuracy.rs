//! The f32 transition against the f64 one: checks the bound documented as
//! `timing_core::F32_MAX_RELATIVE_ERROR` and fails if it is exceeded.
//! Run with `--nocapture` to see the measured worst case.

use timing_core::{CellPoint, Tank, Transition, TurnOn, F32_MAX_RELATIVE_ERROR as MAX_REL_ERROR};

fn times<F: timing_core::Real>(t: &Transition<F>) -> [f64; 4] {
    match t.turn_on() {
        TurnOn::Zvs(w) => [
            t.charge_end_s().to_f64(),
            w.open_s.to_f64(),
            w.close_s.to_f64(),
            w.ramp_end_s.to_f64(),
        ],
        TurnOn::Valley(v) => [
            t.charge_end_s().to_f64(),
            v.valley_s.to_f64(),
            v.valley_s.to_f64(),
            v.ramp_end_s.to_f64(),
        ],
    }
}

#[test]
fn f32_against_f64() {
    let mut worst = 0.0f64;
    let mut worst_at = (0.0, 0.0, 0.0);
    for &(lr, cr) in &[
        (1e-6, 6.8e-9),
        (100e-9, 1e-9),
        (22e-6, 47e-9),
        (4.7e-6, 220e-12),
    ] {
        let t64 = Tank::new(lr, cr).unwrap();
        let t32 = Tank::new(lr as f32, cr as f32).unwrap();
        for k in 0..=6000 {
            let j = 10f64.powf(-3.0 + 6.0 * f64::from(k) / 6000.0);
            let v = 48.0;
            let i = j * v / t64.z0_ohm();
            let a = Transition::new(&t64, &CellPoint::new(v, i).unwrap()).unwrap();
            let b = Transition::new(&t32, &CellPoint::new(v as f32, i as f32).unwrap()).unwrap();
            if a.is_zvs() != b.is_zvs() {
                // Only possible within f32 rounding of the boundary.
                assert!(
                    (j - 1.0).abs() < 1e-6,
                    "J = {j}: f32 and f64 disagree on ZVS"
                );
                continue;
            }
            for (x, y) in times(&a).into_iter().zip(times(&b)) {
                let rel = ((y - x) / x).abs();
                if rel > worst {
                    worst = rel;
                    worst_at = (lr, cr, j);
                }
            }
        }
    }
    println!("f32 worst relative error {worst:.3e} at (Lr, Cr, J) = {worst_at:?}");
    assert!(
        worst <= MAX_REL_ERROR,
        "f32 relative error {worst:e} at {worst_at:?} exceeds {MAX_REL_ERROR:e}"
    );
}
