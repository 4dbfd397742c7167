//! The closed-form methods against timing-core's own f64 transition at
//! random designs and codes (proptest), and their refusals of impossible
//! coefficients. The exhaustive proofs over whole designs live in the
//! cross-checks crate (tests/closed_form.rs).

use proptest::prelude::*;
use timing_core::closed_form::{
    Band, ClosedForm, CodeScaling, F32Piece, FastF32, FastF32Parts, FixedPoint, FixedPointParts,
    PieceLayout,
};
use timing_core::table::Fallback;
use timing_core::{
    AdcCode, CellPoint, CodeRange, Error, Quantity, Tank, Timer, Topology, Transition,
    WindowPosition,
};

/// The f64 delay before rounding at the codes (buck cell: V = Vin, I = Io).
fn exact_ticks(
    tank: &Tank<f64>,
    timer: &Timer<f64>,
    position: WindowPosition<f64>,
    s: &CodeScaling,
    v: u16,
    i: u16,
) -> f64 {
    let vin = f64::from(v) * s.vin_volts_per_code;
    let io = f64::from(i - s.io_zero) * s.io_amps_per_code;
    let cell = CellPoint::from_converter(Topology::Buck, vin, 0.0, io).unwrap();
    let t = Transition::new(tank, &cell).unwrap();
    (t.turn_on_target_s(position) - timer.lead_s()) * timer.clock_hz()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    #[test]
    fn fast_f32_and_fixed_point_follow_the_f64_transition(
        lr in 0.2e-6f64..10e-6,
        cr in 1e-9f64..30e-9,
        clock in 50e6f64..500e6,
        kv in 0.005f64..0.05,
        ki in 0.002f64..0.02,
        vin_lo in 500u16..2000,
        vin_span in 200u16..2000,
        io_lo in 100u16..1000,
        io_span in 200u16..3000,
        position in 0.0f64..1.0,
        samples in proptest::collection::vec((0.0f64..1.0, 0.0f64..1.0), 40),
    ) {
        let tank = Tank::new(lr, cr).unwrap();
        let timer = Timer::new(clock, 16, 20e-9, 5e-9).unwrap();
        let pos = WindowPosition::new(position).unwrap();
        let s = CodeScaling {
            vin: CodeRange { lo: vin_lo, hi: vin_lo + vin_span },
            io: CodeRange { lo: io_lo, hi: io_lo + io_span },
            io_zero: 0,
            vin_volts_per_code: kv,
            io_amps_per_code: ki,
        };
        let cf = ClosedForm::new(&tank, &timer, pos, s, Fallback::Valley).unwrap();
        let fast = cf.fast_f32().unwrap();
        let fixed = cf.fixed_point();
        let tpr = cf.ticks_per_rad();
        for (a, b) in samples {
            let v = vin_lo + (a * f64::from(vin_span)) as u16;
            let i = io_lo + (b * f64::from(io_span)) as u16;
            let exact = exact_ticks(&tank, &timer, pos, &s, v, i);
            if exact > 60_000.0 {
                continue;
            }
            let (raw, _) = fast.raw_ticks(AdcCode::new(v), AdcCode::new(i));
            // f32: the two roots (4.7e-6 relative each) scale the window term,
            // the arcsine polynomial adds 1e-5 rad, f32 rounding a few ulp.
            let bound = 1.2e-5 * exact.abs() + 2e-5 * tpr + 1e-3;
            prop_assert!((f64::from(raw) - exact).abs() <= bound,
                "fast f32 at ({v}, {i}): {raw} vs {exact}");
            // The fixed-point method refuses designs beyond J = 63; where it
            // serves, its angle error stays below 2e-3 rad (the root near
            // the ZVS boundary) plus 2e-4 of the delay (the Q15 reciprocal
            // and polynomial errors scale with the window term, which grows
            // with J).
            if let Ok(fx) = &fixed {
                let (q8, _) = fx.raw_ticks_q8(AdcCode::new(v), AdcCode::new(i));
                let got = f64::from(q8) / 256.0;
                prop_assert!((got - exact).abs() <= 2e-3 * tpr + 2e-4 * exact.abs() + 0.01,
                    "fixed point at ({v}, {i}): {got} vs {exact}");
            }
        }
    }
}

fn demo_scaling() -> CodeScaling {
    CodeScaling {
        vin: CodeRange { lo: 2237, hi: 3726 },
        io: CodeRange { lo: 205, hi: 2049 },
        io_zero: 0,
        vin_volts_per_code: 0.0161,
        io_amps_per_code: 0.00488,
    }
}

fn demo(s: CodeScaling) -> Result<ClosedForm, Error> {
    ClosedForm::new(
        &Tank::new(1.0e-6, 6.8e-9)?,
        &Timer::new(170.0e6, 16, 25.0e-9, 0.0)?,
        WindowPosition::new(0.25)?,
        s,
        Fallback::Valley,
    )
}

#[test]
fn impossible_scalings_are_refused_by_name() {
    let mut s = demo_scaling();
    s.io.lo = 0;
    assert!(matches!(
        demo(s),
        Err(Error::OutOfRange {
            quantity: Quantity::AdcCode,
            ..
        })
    ));
    let mut s = demo_scaling();
    s.vin = CodeRange { lo: 3000, hi: 2000 };
    assert!(matches!(
        demo(s),
        Err(Error::OutOfRange {
            quantity: Quantity::AdcCode,
            ..
        })
    ));
    let mut s = demo_scaling();
    s.vin_volts_per_code = 0.0;
    assert!(matches!(
        demo(s),
        Err(Error::NotPositive {
            quantity: Quantity::VoltsPerCode,
            ..
        })
    ));
    let mut s = demo_scaling();
    s.io_amps_per_code = f64::NAN;
    let e = demo(s).unwrap_err();
    assert!(matches!(
        e,
        Error::NotFinite {
            quantity: Quantity::AmpsPerCode,
            ..
        }
    ));
    assert!(e.to_string().contains("A per code"), "{e}");
}

#[test]
fn the_fixed_point_method_names_the_load_it_cannot_reach() {
    // 10 mA per code at 12 ohm against 0.5 V codes: J up to ~97 at the
    // range's corner (5 V, 40 A), beyond the method's 63.
    let s = CodeScaling {
        vin: CodeRange { lo: 10, hi: 100 },
        io: CodeRange { lo: 10, hi: 4000 },
        io_zero: 0,
        vin_volts_per_code: 0.5,
        io_amps_per_code: 0.01,
    };
    let cf = demo(s).unwrap();
    let e = cf.fixed_point().unwrap_err();
    assert!(
        matches!(e, Error::OutOfRange { quantity: Quantity::NormalizedLoad, value, .. } if value > 63.0),
        "{e:?}"
    );
    // The f32 methods have no such limit.
    assert!(cf.fast_f32().is_ok());
}

#[test]
fn bad_coefficients_are_refused_in_const_construction() {
    let cf = demo(demo_scaling()).unwrap();
    let good = cf.ideal_parts().unwrap();
    let piece = good.pieces[0];
    let bad_piece = [F32Piece {
        kx: f32::NAN,
        ..piece
    }];
    let bad = FastF32Parts {
        pieces: &bad_piece,
        ..good
    };
    let coefficient = |r: Result<FastF32<'_>, Error>| {
        matches!(
            r,
            Err(Error::OutOfRange {
                quantity: Quantity::MethodCoefficient,
                ..
            })
        )
    };
    assert!(coefficient(FastF32::from_parts(bad)));
    let bad = FastF32Parts {
        position: 1.5,
        ..good
    };
    assert!(matches!(
        FastF32::from_parts(bad),
        Err(Error::OutOfRange {
            quantity: Quantity::WindowPosition,
            ..
        })
    ));
    // Bands that do not match the range and shift, a list of thresholds
    // of another length than the pieces', thresholds out of order.
    let l = good.layout;
    let bands = [l.bands[0]; 2];
    let unordered = [300_000u32, 200_000, u32::MAX];
    let three = [piece; 3];
    for bad in [
        FastF32Parts {
            layout: PieceLayout { band_shift: 8, ..l },
            ..good
        },
        FastF32Parts {
            layout: PieceLayout { bands: &bands, ..l },
            ..good
        },
        FastF32Parts {
            pieces: &[],
            ..good
        },
        FastF32Parts {
            layout: PieceLayout {
                ends: &unordered,
                ratio_bits: 16,
                ..l
            },
            pieces: &three,
            ..good
        },
    ] {
        assert!(coefficient(FastF32::from_parts(bad)), "{bad:?}");
    }
    let fx = cf.fixed_point().unwrap();
    let mut bad_fixed = [fx.parts().pieces[0]];
    bad_fixed[0].k_mant = 3;
    let parts = FixedPointParts {
        pieces: &bad_fixed,
        ..*fx.parts()
    };
    assert!(FixedPoint::from_parts(parts).is_err());
    // A const item validates at compile time: two bands of 1024 codes, the
    // second with two pieces split at the code ratio 2.5.
    const fn stand_in(offset_ticks: f32) -> F32Piece {
        F32Piece {
            kx: 0.272,
            ticks_per_rad: 14.0,
            offset_ticks,
            ticks_per_vin_code: 0.0,
        }
    }
    const PIECES: [F32Piece; 3] = [stand_in(61.7), stand_in(61.7), stand_in(62.7)];
    const ENDS: [u32; 3] = [u32::MAX, 5 << 15, u32::MAX];
    // J = 1 at io = 0.272 * vin (codes): Q8 at the band's centre, Q16 slope.
    const fn line(first: u16, centre: i32) -> Band {
        Band {
            first,
            zvs_io_q8: 272 * centre * 256 / 1000,
            zvs_io_q16_per_code: 272 * 65536 / 1000,
        }
    }
    const BANDS: [Band; 2] = [line(0, 2237 + 512), line(1, 2237 + 1536)];
    const PARTS: FastF32Parts<'static> = FastF32Parts {
        layout: PieceLayout {
            vin: CodeRange { lo: 2237, hi: 3726 },
            io: CodeRange { lo: 205, hi: 2049 },
            io_zero: 0,
            band_shift: 10,
            ratio_bits: 16,
            bands: &BANDS,
            ends: &ENDS,
        },
        pieces: &PIECES,
        position: 0.25,
        max_ticks: 65535,
        fallback: Fallback::Valley,
    };
    const FAST: FastF32<'static> = match FastF32::from_parts(PARTS) {
        Ok(m) => m,
        Err(_) => panic!("valid parts"),
    };
    // 48 V, 6 A: the first band; the second band (codes from 3261) at
    // ratio 2.43 < 2.5: its first piece, the same stand-in; at ratio 2.6:
    // the next piece, one tick later.
    let one = FastF32Parts {
        layout: PieceLayout {
            band_shift: 11,
            bands: &BANDS[..1],
            ends: &ENDS[..1],
            ..PARTS.layout
        },
        pieces: &PIECES[..1],
        ..PARTS
    };
    let one = FastF32::from_parts(one).unwrap();
    let at = |m: &FastF32<'_>, v: u16, i: u16| m.raw_ticks(AdcCode::new(v), AdcCode::new(i));
    let (a, zvs_a) = at(&FAST, 2981, 1229);
    let (c, zvs_c) = at(&FAST, 3300, 1269);
    assert!(zvs_a && zvs_c);
    assert_eq!(a, at(&one, 2981, 1229).0);
    assert_eq!(at(&FAST, 3300, 1358).0, at(&one, 3300, 1358).0);
    let c1 = at(&one, 3300, 1269).0;
    assert!((c - c1 - 1.0).abs() < 1e-4, "{c} vs {c1}");
    assert_eq!(
        FAST.parts()
            .layout
            .piece_at(AdcCode::new(3300), AdcCode::new(1269)),
        2
    );
    // The ZVS test is the band's line: 60 V at 4.9 A is below J = 1.
    assert!(!FAST.delay(AdcCode::new(3726), AdcCode::new(1000)).zvs);
    assert!(FAST.delay(AdcCode::new(3726), AdcCode::new(1020)).zvs);
}

#[test]
fn codes_outside_the_range_clamp_and_fixed_fallback_applies() {
    let cf = ClosedForm::new(
        &Tank::new(1.0e-6, 6.8e-9).unwrap(),
        &Timer::new(170.0e6, 16, 25.0e-9, 0.0).unwrap(),
        WindowPosition::new(0.25).unwrap(),
        demo_scaling(),
        Fallback::Fixed(timing_core::Ticks::new(77)),
    )
    .unwrap();
    let fast = cf.fast_f32().unwrap();
    let fixed = cf.fixed_point().unwrap();
    let libm = cf.libm_f32().unwrap();
    for (v, i) in [
        (0u16, 0u16),
        (u16::MAX, u16::MAX),
        (0, u16::MAX),
        (u16::MAX, 0),
    ] {
        let (v, i) = (AdcCode::new(v), AdcCode::new(i));
        let clamped = (
            AdcCode::new(v.get().clamp(2237, 3726)),
            AdcCode::new(i.get().clamp(205, 2049)),
        );
        assert_eq!(fast.delay(v, i), fast.delay(clamped.0, clamped.1));
        assert_eq!(fixed.delay(v, i), fixed.delay(clamped.0, clamped.1));
        assert_eq!(libm.delay(v, i), libm.delay(clamped.0, clamped.1));
    }
    // 60 V at 1 A: far below the ZVS boundary, the fixed fallback.
    let light = (AdcCode::new(3726), AdcCode::new(205));
    for d in [
        fast.delay(light.0, light.1),
        fixed.delay(light.0, light.1),
        libm.delay(light.0, light.1),
    ] {
        assert!(!d.zvs);
        assert_eq!(d.ticks.get(), 77);
    }
}
