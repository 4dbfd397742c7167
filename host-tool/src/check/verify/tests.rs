//! Verification's own checks: every pair counted, runs equal to single
//! evaluations, doubled pairs' verdicts equal to their evaluation, a
//! panicking worker failing the whole.

use timing_core::Ticks;

use super::*;

fn small() -> Design {
    small_with("")
}

/// [`small`] with `extra` appended to its text.
fn small_with(extra: &str) -> Design {
    Design::parse(
        &(r#"
name = "t"
topology = "buck"
lr = "1u"
cr = "6.8n"
vin = [30, 40]
io = [1, 4]
vout = 12
[adc]
bits = 12
vin_volts_per_code = 0.0161
io_amps_per_code = 0.00488
io_zero_code = 0
[timer]
clock_hz = "170M"
counter_bits = 16
driver_delay = "25n"
"#
        .to_string()
            + extra),
        "small",
    )
    .unwrap()
}

#[test]
fn every_pair_of_the_range_is_checked() {
    let d = small();
    let cf = d.closed_form().unwrap();
    let cf = cf.fast_f32().unwrap();
    let r = verify(&d, &cf, None);
    assert_eq!(
        r.points_checked,
        u64::from(d.vin_codes.len()) * u64::from(d.io_codes.len())
    );
    assert_eq!(r.points_checked, r.pairs_in_range);
}

#[test]
fn a_run_of_a_method_is_the_method_at_each_pair() {
    let d = small();
    let cf = d.closed_form().unwrap();
    let (fast, fixed, libm, micromath) = (
        cf.fast_f32().unwrap(),
        cf.fixed_point().unwrap(),
        cf.libm_f32().unwrap(),
        cf.micromath_f32().unwrap(),
    );
    let gen = crate::generate::generate(&d).unwrap();
    let table = gen.table.table().unwrap();
    let methods: [&dyn DelayMethod; 5] = [&table, &fast, &fixed, &libm, &micromath];
    for m in methods {
        for cv in [d.vin_codes.lo, d.vin_codes.hi, 0, u16::MAX] {
            for (first, step) in [
                (0u16, 1u16),
                (d.io_codes.lo, 1),
                (d.io_codes.lo, 2),
                (65_500, 3),
            ] {
                let (mut ticks, mut raw) = ([Ticks::new(0); 300], [f64::NAN; 300]);
                let has_raw = m.eval_run(cv, first, step, &mut ticks, &mut raw);
                for (k, (&t, &r)) in ticks.iter().zip(&raw).enumerate() {
                    let ci = first.wrapping_add(step.wrapping_mul(k as u16));
                    let (want, want_raw) = m.eval(cv, ci);
                    assert_eq!(t.get(), want, "{} at ({cv}, {ci})", m.name());
                    assert_eq!(has_raw, want_raw.is_some(), "{}", m.name());
                    if let Some(w) = want_raw {
                        assert_eq!(r.to_bits(), w.to_bits(), "{} at ({cv}, {ci})", m.name());
                    }
                }
            }
        }
    }
}

#[test]
fn a_run_of_each_layouts_table_is_its_lookup_at_each_pair() {
    // timing-core's run matches the layout once, outside its loop: every
    // layout's loop against the lookup pair by pair.
    for layout in [
        "ratio",
        "log-ratio",
        "log-uniform",
        "grid",
        "recip-ratio",
        "log-volt",
        "margin",
        "ratio-volt",
    ] {
        let d = small_with(&format!(
            "[table]\nlayout = \"{layout}\"\nmax_error_ticks = 50\n"
        ));
        let gen = crate::generate::generate(&d).unwrap();
        assert_eq!(gen.table.layout_name(), layout);
        let table = gen.table.table().unwrap();
        for cv in [
            0,
            d.vin_codes.lo,
            (d.vin_codes.lo + d.vin_codes.hi) / 2,
            u16::MAX,
        ] {
            for (first, step) in [
                (0u16, 1u16),
                (d.io_codes.lo, 1),
                (d.io_codes.lo + 1, 2),
                (65_500, 1),
            ] {
                let (mut ticks, mut raw) = ([Ticks::new(0); 700], [0.0; 700]);
                table.eval_run(cv, first, step, &mut ticks, &mut raw);
                for (k, t) in ticks.iter().enumerate() {
                    let ci = first.wrapping_add(step.wrapping_mul(k as u16));
                    assert_eq!(t.get(), table.eval(cv, ci).0, "{layout} at ({cv}, {ci})");
                }
            }
        }
    }
}

/// A 10-bit ideal design whose voltage range spans more than a factor
/// of four (rows double twice): `topology` and `vout`, the current
/// sensor's zero code, and `extra` appended.
fn wide(topology: &str, vout: f64, io_zero: u16, extra: &str) -> Design {
    Design::parse(
        &format!(
            r#"
name = "wide"
topology = "{topology}"
lr = "1u"
cr = "6.8n"
vin = [12, 60]
io = [0.3, 7]
vout = {vout}
[adc]
bits = 10
vin_volts_per_code = 0.0644
io_amps_per_code = 0.0195
io_zero_code = {io_zero}
[timer]
clock_hz = "170M"
counter_bits = 16
driver_delay = "25n"
{extra}"#
        ),
        "wide",
    )
    .unwrap()
}

#[test]
fn doubled_pairs_take_their_halves_verdicts() {
    // Every pair evaluated against doubled pairs taking their halves'
    // verdicts: the same report (the sum of squares in another order),
    // on a buck (the cell is Vin itself), a boost (V = Vout), a
    // buck-boost (V = Vin + Vout), a sensor zero, and the three layouts
    // indexed by the code ratio.
    let cases = [
        ("buck", 5.0, 0, "log-uniform"),
        ("buck", 5.0, 37, "ratio"),
        ("boost", 80.0, 0, "log-ratio"),
        ("buck-boost", 24.0, 12, "log-uniform"),
    ];
    for (topology, vout, zero, layout) in cases {
        let d = wide(
            topology,
            vout,
            zero,
            &format!("[table]\nlayout = \"{layout}\"\nmax_error_ticks = 50\n"),
        );
        let table = crate::generate::generate(&d).unwrap().table;
        let table = table.table().unwrap();
        let model = ExactModel::new(&d);
        let run = |share| verify_rows(&d, &model, &[&table], None, &|_| {}, share).remove(0);
        let (mut shared, all) = (run(true), run(false));
        let case = format!("{topology}, zero {zero}, {layout}");
        assert_eq!(all.pairs_evaluated, all.points_checked, "{case}");
        assert_eq!(shared.points_checked, shared.pairs_in_range, "{case}");
        println!(
            "{case}: {} of {} pairs evaluated; {} ZVS, {} outside the window, {} narrower than a tick, worst {:.3} ticks at {:?}",
            shared.pairs_evaluated,
            shared.points_checked,
            shared.zvs_points,
            shared.outside_window,
            shared.narrower_than_a_tick,
            shared.max_error_ticks,
            (shared.worst_vin_code, shared.worst_io_code)
        );
        assert!(
            shared.pairs_evaluated * 10 < shared.points_checked * 9,
            "{case}: pairs were doubled"
        );
        let rel = (shared.rms_error_ticks - all.rms_error_ticks).abs() / all.rms_error_ticks;
        assert!(rel < 1e-12, "{case}: RMS {rel:e} apart");
        shared.rms_error_ticks = all.rms_error_ticks;
        shared.pairs_evaluated = all.pairs_evaluated;
        assert_eq!(shared, all, "{case}");
    }
}

#[test]
fn nothing_is_doubled_unless_every_method_doubles() {
    // A closed form's f32 arithmetic is not invariant under doubling, a
    // grid layout interpolates over the raw codes, and a Coss curve
    // moves the events with the voltage: every pair is evaluated.
    let d = wide(
        "buck",
        5.0,
        0,
        "[table]\nlayout = \"grid\"\nmax_error_ticks = 50\n",
    );
    let gen = crate::generate::generate(&d).unwrap().table;
    let grid = gen.table().unwrap();
    assert!(!DelayMethod::same_at_doubled_codes(&grid));
    let cf = d.closed_form().unwrap();
    let cf = cf.fast_f32().unwrap();
    for m in [&grid as &dyn DelayMethod, &cf] {
        let r = verify(&d, m, None);
        assert_eq!(r.pairs_evaluated, r.pairs_in_range, "{}", m.name());
    }
}

#[test]
fn the_ratio_layouts_command_the_same_at_doubled_codes() {
    // The integer identities behind DelayTable::same_at_doubled_codes,
    // at every pair whose doubling is in range, for every layout: they
    // hold for the layouts that claim them, and fail somewhere for the
    // others (so this check can fail).
    for (layout, zero) in [
        ("ratio", 0),
        ("log-ratio", 21),
        ("log-uniform", 0),
        ("log-uniform", 37),
        ("grid", 0),
        ("recip-ratio", 0),
        ("log-volt", 0),
        ("margin", 0),
        ("ratio-volt", 0),
    ] {
        let d = wide(
            "buck",
            5.0,
            zero,
            &format!("[table]\nlayout = \"{layout}\"\nmax_error_ticks = 50\n"),
        );
        let gen = crate::generate::generate(&d).unwrap().table;
        assert_eq!(gen.layout_name(), layout);
        let t = gen.table().unwrap();
        let (v, i) = (d.vin_codes, d.io_codes);
        let mut differ = 0u64;
        for cv in v.lo..=v.hi / 2 {
            for ci in i.lo..=i.hi {
                let c = ci.saturating_sub(zero);
                let (w, ci2) = (2 * cv, zero + 2 * c);
                if c == 0 || ci < zero || ci2 > i.hi {
                    continue;
                }
                differ += u64::from(t.eval(cv, ci).0 != t.eval(w, ci2).0);
            }
        }
        println!("{layout}, zero {zero}: {differ} doubled pairs differ");
        assert_eq!(
            differ == 0,
            t.same_at_doubled_codes(),
            "{layout}, zero {zero}"
        );
    }
}

#[test]
fn a_panicking_worker_fails_the_verification() {
    let d = small();
    let cf = d.closed_form().unwrap();
    let cf = cf.fast_f32().unwrap();
    let bad = d.vin_codes.lo + 7;
    let r = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
        verify_rows(
            &d,
            &ExactModel::new(&d),
            &[&cf],
            None,
            &|cv| assert_ne!(cv, bad, "injected fault"),
            true,
        )
    }));
    assert!(r.is_err(), "a worker's panic must reach the caller");
    let mut ticks = 0;
    let mut p = |_: f64| ticks += 1;
    let r = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
        verify_rows(
            &d,
            &ExactModel::new(&d),
            &[&cf],
            Some(&mut p),
            &|cv| assert_ne!(cv, bad, "injected fault"),
            true,
        )
    }));
    assert!(r.is_err(), "also with a progress bar");
}
