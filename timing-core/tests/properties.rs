//! Property tests of the invariants of the ideal cell (DESIGN.md section 2).
//! The relations checked here follow from the closed forms themselves; the
//! comparisons with references outside the project live in `tests/` at the
//! workspace root (ngspice, ODE solver, textbook).

use proptest::prelude::*;
use timing_core::{CellPoint, Error, Tank, Timer, Topology, Transition, TurnOn, WindowPosition};

/// Realistic tank and operating-point ranges (log-uniform).
fn log_uniform(lo: f64, hi: f64) -> impl Strategy<Value = f64> {
    (lo.ln()..hi.ln()).prop_map(f64::exp)
}

fn tank() -> impl Strategy<Value = Tank<f64>> {
    (log_uniform(50e-9, 100e-6), log_uniform(100e-12, 1e-6))
        .prop_filter_map("valid tank", |(l, c)| Tank::new(l, c).ok())
}

fn transition(tank: &Tank<f64>, v: f64, i: f64) -> Transition<f64> {
    let cell = CellPoint::new(v, i).unwrap();
    Transition::new(tank, &cell).unwrap()
}

/// Cell current giving normalised load `j` at voltage `v`.
fn current_for(tank: &Tank<f64>, v: f64, j: f64) -> f64 {
    j * v / tank.z0_ohm()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(2000))]

    #[test]
    fn window_opens_before_it_closes(tank in tank(), v in log_uniform(1.0, 1000.0), j in 1.0001f64..50.0) {
        let t = transition(&tank, v, current_for(&tank, v, j));
        let w = t.window().unwrap();
        prop_assert!(t.charge_end_s() > 0.0);
        prop_assert!(t.charge_end_s() < w.open_s);
        prop_assert!(w.open_s < w.close_s);
        prop_assert!(w.close_s < w.ramp_end_s);
    }

    #[test]
    fn window_shrinks_to_zero_as_j_approaches_one(tank in tank(), v in log_uniform(1.0, 1000.0), e in log_uniform(1e-12, 1e-2)) {
        // width*w0 = sqrt(J^2 - 1) = sqrt(e*(2 + e)) for J = 1 + e.
        let t = transition(&tank, v, current_for(&tank, v, 1.0 + e));
        let w = t.window().unwrap();
        let w0 = tank.w0_rad_s();
        let j = t.normalized_load();
        let expect = ((j - 1.0) * (j + 1.0)).sqrt();
        prop_assert!(w.width_s() >= 0.0);
        prop_assert!((w.width_s() * w0 - expect).abs() <= 1e-9 * (1.0 + expect) + 8.0 * f64::EPSILON * w.close_s * w0);
        prop_assert!(w.width_s() * w0 <= (2.0 * e * 1.01).sqrt() + 1e-12);
    }

    #[test]
    fn valley_meets_window_open_at_the_boundary(tank in tank(), v in log_uniform(1.0, 1000.0)) {
        let i1 = current_for(&tank, v, 1.0);
        let below = transition(&tank, v, i1 * (1.0 - 1e-9));
        let above = transition(&tank, v, i1 * (1.0 + 1e-9));
        let valley = below.valley().unwrap();
        let window = above.window().unwrap();
        let scale = 1.0 / tank.w0_rad_s();
        // Both are T1 + 3pi/2/w0 at J = 1; the asin near 1 moves by sqrt(2e-9).
        prop_assert!((valley.valley_s - window.open_s).abs() < 1e-4 * scale);
        prop_assert!(window.width_s() < 1e-4 * scale);
        prop_assert!(valley.valley_voltage_v.abs() < 1e-6 * v);
    }

    #[test]
    fn more_load_opens_earlier_widens_and_stresses_more(tank in tank(), v in log_uniform(1.0, 1000.0), j in 1.0f64..40.0, k in 1.001f64..3.0) {
        let a = transition(&tank, v, current_for(&tank, v, j));
        let b = transition(&tank, v, current_for(&tank, v, j * k));
        let (wa, wb) = (a.window().unwrap(), b.window().unwrap());
        prop_assert!(b.charge_end_s() < a.charge_end_s());
        prop_assert!(wb.open_s < wa.open_s);
        prop_assert!(wb.width_s() > wa.width_s());
        prop_assert!(b.peak_switch_voltage_v() > a.peak_switch_voltage_v());
    }

    #[test]
    fn light_load_has_a_valley_not_a_window(tank in tank(), v in log_uniform(1.0, 1000.0), j in 1e-3f64..0.999) {
        let t = transition(&tank, v, current_for(&tank, v, j));
        prop_assert!(!t.is_zvs());
        let valley = t.valley().unwrap();
        prop_assert!(valley.valley_voltage_v > 0.0 && valley.valley_voltage_v < v);
        prop_assert!(valley.valley_s > t.peak_s());
    }

    #[test]
    fn cell_mappings_balance_power(vin in log_uniform(1.0, 800.0), ratio in 1.01f64..10.0, io in log_uniform(0.01, 200.0)) {
        // Lossless converter: Vin*Iin = Vout*Io (power balance).
        let buck = CellPoint::from_converter(Topology::Buck, vin, vin / ratio, io).unwrap();
        prop_assert_eq!((buck.v_volt(), buck.i_amp()), (vin, io));

        let vout = vin * ratio;
        let boost = CellPoint::from_converter(Topology::Boost, vin, vout, io).unwrap();
        let iin = boost.i_amp(); // the boost switch carries the input current
        prop_assert!((vin * iin - vout * io).abs() <= 1e-12 * vout * io);
        prop_assert_eq!(boost.v_volt(), vout);

        let vo = vin * ratio / 3.0;
        let bb = CellPoint::from_converter(Topology::BuckBoost, vin, vo, io).unwrap();
        let iin = bb.i_amp() - io; // the switch carries Iin + Io
        prop_assert!((vin * iin - vo * io).abs() <= 1e-9 * vo * io);
        prop_assert!((bb.v_volt() - (vin + vo)).abs() <= 1e-12 * (vin + vo));
    }

    #[test]
    fn commanded_turn_on_lands_in_the_window(tank in tank(), v in log_uniform(5.0, 800.0), j in 1.0f64..20.0,
                                              clock in log_uniform(50e6, 5e9), ton in 0.0f64..300e-9, pos in 0.0f64..=1.0) {
        let t = transition(&tank, v, current_for(&tank, v, j));
        let timer = Timer::new(clock, 32, ton, 0.0).unwrap();
        let w = t.window().unwrap();
        match timer.command(&t, WindowPosition::new(pos).unwrap()) {
            Ok(cmd) => {
                let tick = 1.0 / clock;
                prop_assert!((timer.turn_on_s(cmd.ticks()) - cmd.turn_on_s()).abs() < 1e-18);
                if cmd.is_in_window() {
                    prop_assert!(cmd.turn_on_s() >= w.open_s && cmd.turn_on_s() <= w.close_s);
                    // Rounded to nearest unless moved into the window.
                    // Nearest tick, or moved by at most one tick to stay inside the window.
                    prop_assert!((cmd.turn_on_s() - cmd.target_s()).abs() <= tick * (1.0 + 1e-9) || cmd.target_s() < timer.lead_s());
                } else {
                    // Only allowed when no tick fits in the window (or the window starts before the command can).
                    prop_assert!(w.width_s() < tick * (1.0 + 1e-6) || w.open_s < timer.lead_s());
                }
            }
            Err(Error::DelayNegative { delay_s }) => prop_assert!(delay_s < 0.0 && w.close_s < ton),
            Err(e) => prop_assert!(false, "unexpected {e}"),
        }
    }

    #[test]
    fn no_input_gives_a_nan_or_a_panic(l in any::<f64>(), c in any::<f64>(), v in any::<f64>(), i in any::<f64>(),
                                        clock in any::<f64>(), d in any::<f64>(), p in any::<f64>(), bits in any::<u8>()) {
        let Ok(tank) = Tank::new(l, c) else { return Ok(()) };
        prop_assert!(tank.z0_ohm().is_normal() && tank.w0_rad_s().is_normal());
        let Ok(cell) = CellPoint::new(v, i) else { return Ok(()) };
        let Ok(t) = Transition::new(&tank, &cell) else { return Ok(()) };
        let times = match t.turn_on() {
            TurnOn::Zvs(w) => [w.open_s, w.close_s, w.ramp_end_s],
            TurnOn::Valley(v) => [v.valley_s, v.valley_voltage_v, v.ramp_end_s],
        };
        for x in times.into_iter().chain([t.charge_end_s(), t.peak_s(), t.peak_switch_voltage_v(), t.normalized_load()]) {
            prop_assert!(x.is_finite(), "{x} in {t:?}");
        }
        if let (Ok(timer), Ok(pos)) = (Timer::new(clock, bits, d, 0.0), WindowPosition::new(p)) {
            if let Ok(cmd) = timer.command(&t, pos) {
                prop_assert!(cmd.ticks() <= timer.max_ticks());
                prop_assert!(cmd.turn_on_s().is_finite());
            }
        }
    }
}

#[test]
fn bad_inputs_are_named() {
    use timing_core::Quantity;
    let cases: [(Result<Tank<f64>, Error>, Quantity); 5] = [
        (Tank::new(f64::NAN, 1e-9), Quantity::ResonantInductance),
        (Tank::new(1e-6, -1e-9), Quantity::ResonantCapacitance),
        (Tank::new(0.0, 1e-9), Quantity::ResonantInductance),
        (
            Tank::new(1e-6, f64::INFINITY),
            Quantity::ResonantCapacitance,
        ),
        (Tank::new(1e-6, 1e-310), Quantity::ResonantCapacitance),
    ];
    for (r, q) in cases {
        let e = r.unwrap_err();
        let named = matches!(e, Error::NotFinite { quantity, .. } | Error::NotPositive { quantity, .. } | Error::Subnormal { quantity, .. } if quantity == q);
        assert!(named, "{e:?} should name {q:?}");
        assert!(e.to_string().contains(q.describe()));
    }
    assert!(matches!(
        Tank::new(1e308, 1e308),
        Err(Error::Overflow { .. })
    ));
    assert!(matches!(
        CellPoint::new(48.0, -1.0),
        Err(Error::NotPositive {
            quantity: Quantity::CellCurrent,
            ..
        })
    ));
    assert!(matches!(
        CellPoint::from_converter(Topology::Boost, 48.0, 24.0, 1.0),
        Err(Error::OutOfRange {
            quantity: Quantity::OutputVoltage,
            ..
        })
    ));
    assert!(matches!(
        Timer::new(170e6, 33, 0.0, 0.0),
        Err(Error::OutOfRange {
            quantity: Quantity::CounterBits,
            ..
        })
    ));
    assert!(matches!(
        Timer::new(170e6, 16, -1e-9, 0.0),
        Err(Error::Negative {
            quantity: Quantity::TurnOnDelay,
            ..
        })
    ));
    assert!(matches!(
        WindowPosition::new(1.5),
        Err(Error::OutOfRange {
            quantity: Quantity::WindowPosition,
            ..
        })
    ));
}

#[test]
fn delays_beyond_the_counter_are_refused_not_wrapped() {
    // 1 mH / 1 uF: window near 100 us, far beyond an 8-bit counter at 170 MHz.
    let tank = Tank::new(1e-3, 1e-6).unwrap();
    let t = transition(&tank, 48.0, current_for(&tank, 48.0, 2.0));
    let timer = Timer::new(170e6, 8, 0.0, 0.0).unwrap();
    let e = timer
        .command(&t, WindowPosition::new(0.5).unwrap())
        .unwrap_err();
    assert!(
        matches!(e, Error::TickOverflow { max_ticks: 255, .. }),
        "{e:?}"
    );
    // The saturating conversion for per-cycle use clamps instead.
    assert_eq!(timer.ticks_saturating(1.0).get(), 255);
    assert_eq!(timer.ticks_saturating(-1.0).get(), 0);
    assert_eq!(timer.ticks_saturating(f64::NAN).get(), 0);
}

#[test]
fn a_slow_driver_is_refused() {
    let tank = Tank::new(1e-6, 6.8e-9).unwrap();
    let t = transition(&tank, 48.0, 6.0); // window closes near 470 ns
    let timer = Timer::new(170e6, 16, 700e-9, 0.0).unwrap();
    assert!(matches!(
        timer.command(&t, WindowPosition::EARLIEST),
        Err(Error::DelayNegative { .. })
    ));
    // A turn-off delay as long as the turn-on delay cancels it.
    let timer = Timer::new(170e6, 16, 700e-9, 700e-9).unwrap();
    assert!(timer
        .command(&t, WindowPosition::EARLIEST)
        .unwrap()
        .is_in_window());
}
