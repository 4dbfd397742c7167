//! Invariants of the half-bridge leg's edges over random legs and points:
//! the window's order, more current opening it earlier, f32 against f64,
//! and no input giving a NaN or a panic.

use proptest::prelude::*;
use timing_core::coss::CossPoint;
use timing_core::leg::{Edge, EdgeTurnOn, Leg, LegPoint, NodeCapacitance};

fn log_uniform(lo: f64, hi: f64) -> impl Strategy<Value = f64> {
    (lo.ln()..hi.ln()).prop_map(f64::exp)
}

/// An invented falling curve, scaled (not a real part).
fn curve(scale: f64) -> [CossPoint<f64>; 3] {
    [
        CossPoint {
            volts: 0.0,
            farads: 2.0e-9 * scale,
        },
        CossPoint {
            volts: 12.0,
            farads: 0.6e-9 * scale,
        },
        CossPoint {
            volts: 200.0,
            farads: 0.2e-9 * scale,
        },
    ]
}

fn curve_f32(scale: f64) -> [CossPoint<f32>; 3] {
    curve(scale).map(|p| CossPoint {
        volts: p.volts as f32,
        farads: p.farads as f32,
    })
}

fn edge() -> impl Strategy<Value = Edge> {
    prop_oneof![Just(Edge::Falling), Just(Edge::Rising)]
}

/// The signed current that swings `edge`, of magnitude `amps`.
fn swinging(edge: Edge, amps: f64) -> f64 {
    if edge == Edge::Falling {
        amps
    } else {
        -amps
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(300))]

    #[test]
    fn a_completed_swing_opens_before_it_closes_and_more_current_opens_it_earlier(
        scale in log_uniform(0.2, 5.0), ext in 0.0f64..1e-9, l in log_uniform(50e-9, 50e-6),
        r in 0.0f64..0.1, vbus in log_uniform(5.0, 200.0), far_frac in 0.05f64..0.95,
        amps in log_uniform(0.2, 30.0), more in 1.01f64..2.0, e in edge(),
    ) {
        let c = curve(scale);
        let leg = Leg::new(l, NodeCapacitance::new(&c, &c, ext).unwrap(), r, 1e-6).unwrap();
        let far = far_frac * vbus;
        let at = |a: f64| leg.edge(e, &LegPoint::new(vbus, swinging(e, a), far).unwrap()).unwrap();
        if let EdgeTurnOn::Zvs(w) = at(amps).turn_on {
            prop_assert!(w.open_s > 0.0 && w.close_s > w.open_s, "{w:?}");
            let EdgeTurnOn::Zvs(w2) = at(amps * more).turn_on else {
                return Err(TestCaseError::fail("more current lost the swing"));
            };
            prop_assert!(w2.open_s < w.open_s, "{w2:?} {w:?}");
        }
    }

    #[test]
    fn f32_follows_f64(
        scale in log_uniform(0.2, 5.0), l in log_uniform(100e-9, 20e-6), vbus in log_uniform(10.0, 200.0),
        far_frac in 0.1f64..0.9, amps in log_uniform(0.5, 20.0), e in edge(),
    ) {
        let (c64, c32) = (curve(scale), curve_f32(scale));
        let far = far_frac * vbus;
        let wide = Leg::new(l, NodeCapacitance::new(&c64, &c64, 0.0).unwrap(), 0.01, 1e-6).unwrap();
        let narrow = Leg::new(l as f32, NodeCapacitance::new(&c32, &c32, 0.0).unwrap(), 0.01, 1e-6).unwrap();
        let a = wide.edge(e, &LegPoint::new(vbus, swinging(e, amps), far).unwrap()).unwrap();
        let b = narrow
            .edge(e, &LegPoint::new(vbus as f32, swinging(e, amps) as f32, far as f32).unwrap())
            .unwrap();
        match (a.turn_on, b.turn_on) {
            (EdgeTurnOn::Zvs(x), EdgeTurnOn::Zvs(y)) => {
                let d = (f64::from(y.open_s) - x.open_s).abs() / x.open_s;
                prop_assert!(d < 1e-4, "{x:?} {y:?}");
            }
            (EdgeTurnOn::Short(x), EdgeTurnOn::Short(y)) => {
                prop_assert!((f64::from(y.remaining_v) - x.remaining_v).abs() < 1e-3 * vbus);
            }
            // Right at the boundary the two may differ: the short side then
            // stops within a hair of the rail.
            (EdgeTurnOn::Short(x), _) => prop_assert!(x.remaining_v < 2e-3 * vbus, "{x:?}"),
            (_, EdgeTurnOn::Short(y)) => prop_assert!(f64::from(y.remaining_v) < 2e-3 * vbus, "{y:?}"),
        }
    }

    #[test]
    fn every_valid_point_gives_a_finite_answer(
        l in log_uniform(1e-9, 1e-3), zeta in 0.0f64..10.0, diode in log_uniform(1e-9, 1e-3),
        ext in 0.0f64..1e-8, scale in log_uniform(0.01, 100.0), vbus in log_uniform(0.1, 1000.0),
        amps in -100.0f64..100.0, far_frac in 0.0f64..=1.0, e in edge(),
    ) {
        let c = curve(scale);
        // The loop's resistance as a damping factor at the largest node
        // capacitance (Leg::new refuses more than ten times critical).
        let c_max = ext + 2.0 * c[0].farads;
        let r = zeta * 2.0 * (l / c_max).sqrt();
        let leg = Leg::new(l, NodeCapacitance::new(&c, &c, ext).unwrap(), r, diode).unwrap();
        let t = leg.edge(e, &LegPoint::new(vbus, amps, far_frac * vbus).unwrap());
        let t = t.map_err(|err| TestCaseError::fail(format!("{err:?}")))?;
        match t.turn_on {
            EdgeTurnOn::Zvs(w) => prop_assert!(w.open_s.is_finite() && w.close_s >= w.open_s),
            EdgeTurnOn::Short(s) => prop_assert!(s.extremum_s >= 0.0 && s.remaining_v >= 0.0 && s.remaining_v <= vbus),
        }
    }

    #[test]
    fn no_input_gives_a_nan_or_a_panic(
        l in any::<f64>(), r in any::<f64>(), diode in any::<f64>(), ext in any::<f64>(),
        vbus in any::<f64>(), i in any::<f64>(), far in any::<f64>(), e in edge(),
    ) {
        let c = curve(1.0);
        let Ok(node) = NodeCapacitance::new(&c, &c, ext) else { return Ok(()) };
        let Ok(leg) = Leg::new(l, node, r, diode) else { return Ok(()) };
        let Ok(p) = LegPoint::new(vbus, i, far) else { return Ok(()) };
        if let Ok(t) = leg.edge(e, &p) {
            match t.turn_on {
                EdgeTurnOn::Zvs(w) => prop_assert!(w.open_s.is_finite() && w.close_s.is_finite()),
                EdgeTurnOn::Short(s) => prop_assert!(s.extremum_s.is_finite() && s.remaining_v.is_finite()),
            }
        }
    }
}
