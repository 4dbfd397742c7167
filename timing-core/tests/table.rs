//! The fixed-point table lookup: validation refuses inconsistent layouts,
//! interpolation reproduces linear data exactly (up to the final rounding),
//! and any code pair at all, in range or not, gives a result without panic.

use timing_core::table::{
    DelayTable, Fallback, GridLayout, Layout, RatioLayout, Sensing, TableError,
};
use timing_core::{AdcCode, CodeRange, Ticks};

fn sensing() -> Sensing {
    Sensing {
        vin: CodeRange { lo: 2000, hi: 3000 },
        io: CodeRange { lo: 300, hi: 2000 },
        io_zero: 100,
        zvs_io_mul: 1000,
        zvs_vin_mul: 500,
    }
}

fn ratio(nodes: u16) -> Layout {
    // q = (v << 8) / (i - 100): from 2000*256/1900 = 269 to 3000*256/200 = 3840.
    Layout::Ratio(RatioLayout {
        ratio_shift: 8,
        q_lo: 256,
        step_shift: 5,
        nodes,
    })
}

#[test]
fn ratio_lookup_interpolates_linear_data_exactly() {
    // Entries linear in q: ticks(q) = 10 + q/32 (frac_bits 4 -> entry = 16*ticks).
    let nodes = 113u16; // 256 + 112*32 = 3840
                        // q_lo = 256 -> ticks 10 + 8 at node 0, one more per node.
    let entries: Vec<u16> = (0..nodes).map(|k| 16 * (10 + 8 + k)).collect();
    let t = DelayTable::new(
        sensing(),
        ratio(nodes),
        4,
        Fallback::Valley,
        entries.as_slice(),
    )
    .unwrap();
    for v in (2000u16..=3000).step_by(37) {
        for i in (300u16..=2000).step_by(41) {
            let q = (u32::from(v) << 8) / u32::from(i - 100);
            let expect = 10.0 + f64::from(q) / 32.0;
            let got = t.delay(AdcCode::new(v), AdcCode::new(i)).ticks.get();
            assert!(
                (f64::from(got) - expect).abs() <= 0.5,
                "v {v} i {i}: {got} vs {expect}"
            );
        }
    }
}

#[test]
fn grid_lookup_interpolates_bilinear_data_exactly() {
    let g = GridLayout {
        vin_shift: 4,
        io_shift: 5,
        rows: 64, // 63*16 = 1008 >= 1000
        cols: 55, // 54*32 = 1728 >= 1700
    };
    // ticks = 20 + r + 2c at node (r, c); frac_bits 3.
    let mut entries = Vec::new();
    for r in 0..g.rows {
        for c in 0..g.cols {
            entries.push(8 * (20 + r + 2 * c));
        }
    }
    let t = DelayTable::new(
        sensing(),
        Layout::Grid(g),
        3,
        Fallback::Valley,
        entries.as_slice(),
    )
    .unwrap();
    for v in (2000u16..=3000).step_by(13) {
        for i in (300u16..=2000).step_by(17) {
            let expect = 20.0 + f64::from(v - 2000) / 16.0 + 2.0 * f64::from(i - 300) / 32.0;
            let got = t.delay(AdcCode::new(v), AdcCode::new(i)).ticks.get();
            assert!(
                (f64::from(got) - expect).abs() <= 0.5 + 1e-9,
                "v {v} i {i}: {got} vs {expect}"
            );
        }
    }
}

/// A ratio table over `entries` (4 fraction bits) with a fixed fallback of
/// 77 ticks.
fn ratio_table_fixed_77(entries: &[u16]) -> DelayTable<&[u16]> {
    DelayTable::new(
        sensing(),
        ratio(entries.len() as u16),
        4,
        Fallback::Fixed(Ticks::new(77)),
        entries,
    )
    .unwrap()
}

#[test]
fn any_code_pair_clamps_and_never_panics() {
    let entries = vec![u16::MAX; 113];
    let t = ratio_table_fixed_77(&entries);
    for v in (0..=u16::MAX).step_by(97).chain([0, u16::MAX]) {
        for i in (0..=u16::MAX).step_by(89).chain([0, u16::MAX]) {
            let r = t.delay(AdcCode::new(v), AdcCode::new(i));
            if r.zvs {
                assert_eq!(r.ticks.get(), 4096, "all-max entries give 65535/16 rounded");
            } else {
                assert_eq!(r.ticks.get(), 77);
            }
        }
    }
    // Out-of-range codes give exactly the edge's result.
    let edge = t.delay(AdcCode::new(3000), AdcCode::new(2000));
    assert_eq!(
        t.delay(AdcCode::new(u16::MAX), AdcCode::new(u16::MAX)),
        edge
    );
}

#[test]
fn a_run_along_the_current_codes_is_the_lookup_at_each() {
    // Entries that vary, so a slot taken from the wrong code would show.
    let entries: Vec<u16> = (0..113).map(|k| 16 * 40 + 37 * k).collect();
    let t = ratio_table_fixed_77(&entries);
    // Below, across and above the design range, and across the wrap at
    // 65535.
    for v in [0u16, 1999, 2000, 2471, 3000, u16::MAX] {
        for (first, step) in [(0u16, 1u16), (250, 1), (1900, 2), (65_400, 1), (65_401, 3)] {
            let mut run = [Ticks::new(0); 200];
            t.delays_along_io(AdcCode::new(v), AdcCode::new(first), step, &mut run);
            for (k, got) in run.iter().enumerate() {
                let i = first.wrapping_add(step.wrapping_mul(k as u16));
                assert_eq!(
                    *got,
                    t.delay(AdcCode::new(v), AdcCode::new(i)).ticks,
                    "v {v} i {i}"
                );
            }
        }
    }
}

#[test]
fn inconsistent_tables_are_refused() {
    let e = vec![0u16; 113];
    let ok = |l, f, s: Sensing| DelayTable::new(s, l, f, Fallback::Valley, e.as_slice());
    assert!(
        matches!(ok(ratio(100), 4, sensing()), Err(TableError::Layout(_))),
        "nodes must cover the range"
    );
    assert!(
        matches!(ok(ratio(113), 12, sensing()), Err(TableError::Layout(_))),
        "step + frac <= 16"
    );
    let mut s = sensing();
    s.io_zero = 300;
    assert!(
        matches!(ok(ratio(113), 4, s), Err(TableError::Layout(_))),
        "io range above the zero"
    );
    let mut s = sensing();
    s.vin = CodeRange { lo: 3000, hi: 2000 };
    assert!(
        matches!(ok(ratio(113), 4, s), Err(TableError::Layout(_))),
        "empty range"
    );
    let short = vec![0u16; 112];
    assert!(matches!(
        DelayTable::new(sensing(), ratio(113), 4, Fallback::Valley, short.as_slice()),
        Err(TableError::EntryCount {
            expected: 113,
            found: 112
        })
    ));
    let big_shift = Layout::Ratio(RatioLayout {
        ratio_shift: 21,
        q_lo: 0,
        step_shift: 1,
        nodes: 2,
    });
    assert!(
        matches!(ok(big_shift, 0, sensing()), Err(TableError::Layout(_))),
        "vin << shift must fit 32 bits"
    );
}

#[test]
fn log_ratio_lookup_interpolates_linear_data_exactly() {
    use timing_core::table::{log_index, LogRatioLayout};
    // q from 269 (octave 8) to 3840 (octave 11); 2^4 nodes per octave.
    let (e_lo, m) = (8u32, 4u32);
    let nodes = log_index(3840, e_lo, m).0 as u16 + 2;
    let node_q = |k: u32| ((16 + (k & 15)) << (e_lo + (k >> 4) - m)) as f64;
    // ticks = 5 + q/64, frac_bits 6.
    let entries: Vec<u16> = (0..u32::from(nodes))
        .map(|k| ((5.0 + node_q(k) / 64.0) * 64.0) as u16)
        .collect();
    let layout = Layout::LogRatio(LogRatioLayout {
        ratio_shift: 8,
        mant_bits: m as u8,
        e_lo: e_lo as u8,
        nodes,
    });
    let t = DelayTable::new(sensing(), layout, 6, Fallback::Valley, entries.as_slice()).unwrap();
    for v in (2000u16..=3000).step_by(29) {
        for i in (300u16..=2000).step_by(31) {
            let q = (u32::from(v) << 8) / u32::from(i - 100);
            let expect = 5.0 + f64::from(q) / 64.0;
            let got = t.delay(AdcCode::new(v), AdcCode::new(i)).ticks.get();
            assert!(
                (f64::from(got) - expect).abs() <= 0.5,
                "v {v} i {i}: {got} vs {expect}"
            );
        }
    }
    // Node positions: the octave boundary 2^9 is node 16 exactly.
    assert_eq!(log_index(512, e_lo, m), (16, 0, 5));
    assert_eq!(log_index(511, e_lo, m), (15, 15, 4));
}

#[test]
fn log2_q15_against_libm() {
    use timing_core::table::log2::{log2_q15, LOG2_Q15_MAX_ERROR};
    let mut worst = 0.0f64;
    for c in 1u32..=65535 {
        let got = f64::from(log2_q15(c)) / 32768.0;
        let err = (got - f64::from(c).log2()).abs();
        worst = worst.max(err);
    }
    println!("log2_q15 worst error {worst:.3e}");
    assert!(worst <= LOG2_Q15_MAX_ERROR, "{worst:e}");
    assert_eq!(log2_q15(1), 0);
    assert_eq!(log2_q15(32768), 15 << 15);
    assert_eq!(log2_q15(0), 0);
    for t in 1u32..=1 << 20 {
        assert_eq!(
            timing_core::table::log2::floor_log2(t),
            31 - t.leading_zeros()
        );
    }
    assert_eq!(timing_core::table::log2::floor_log2(u32::MAX), 31);
    for t in 1u32..1 << 16 {
        assert_eq!(
            timing_core::table::log2::floor_log2_16(t),
            31 - t.leading_zeros()
        );
    }
}

#[test]
fn log_volt_lookup_interpolates_bilinear_data_exactly() {
    use timing_core::table::{log_ratio_index, LogVoltLayout};
    let s = sensing();
    // lambda over the range: corners (log2_q15 is non-decreasing).
    let l_min = log_ratio_index(2000, 2000 - 100);
    let l_max = log_ratio_index(3000, 300 - 100);
    let step = 12u32;
    let lambda_lo = l_min - 100;
    let cols = ((l_max - lambda_lo) >> step) as u16 + 2;
    let g = LogVoltLayout {
        lambda_lo,
        step_shift: step as u8,
        cols,
        vin_shift: 6,
        rows: 17, // 16 * 64 = 1024 >= 1000
    };
    // ticks = 30 + 3 k + r/2 at node (r, k), frac_bits 4: linear in lambda
    // and in the voltage code, so interpolation reproduces it up to the
    // rounding of each row (half an entry unit) and the final rounding.
    let mut entries = Vec::new();
    for r in 0..g.rows {
        for k in 0..g.cols {
            entries.push(16 * (30 + 3 * k) + 8 * r);
        }
    }
    let t = DelayTable::new(
        s,
        Layout::LogVolt(g),
        4,
        Fallback::Valley,
        entries.as_slice(),
    )
    .unwrap();
    for v in (2000u16..=3000).step_by(11) {
        for i in (300u16..=2000).step_by(13) {
            let l = log_ratio_index(u32::from(v), u32::from(i - 100));
            let k = f64::from(l - lambda_lo) / f64::from(1u32 << step);
            let expect = 30.0 + 3.0 * k + f64::from(v - 2000) / 64.0 / 2.0;
            let got = t.delay(AdcCode::new(v), AdcCode::new(i)).ticks.get();
            assert!(
                (f64::from(got) - expect).abs() <= 0.5 + 1.0 / 32.0 + 1e-9,
                "v {v} i {i}: {got} vs {expect}"
            );
        }
    }
    // A layout whose rows stop short of the range is refused.
    let short = LogVoltLayout { rows: 16, ..g };
    let e = vec![0u16; usize::from(short.rows) * usize::from(cols)];
    assert!(matches!(
        DelayTable::new(s, Layout::LogVolt(short), 4, Fallback::Valley, e.as_slice()),
        Err(TableError::Layout(_))
    ));
    // vin_shift + frac_bits > 16 could overflow 32 bits: refused.
    assert!(matches!(
        DelayTable::new(
            s,
            Layout::LogVolt(g),
            11,
            Fallback::Valley,
            entries.as_slice()
        ),
        Err(TableError::Layout(_))
    ));
}

#[test]
fn margin_lookup_interpolates_bilinear_data_exactly() {
    use timing_core::table::MarginLayout;
    let s = sensing();
    // d = (i - zero) * 16 + offset - v * 5: the line i - zero = 5 v / 16
    // (625 codes at v = 2000) is d = offset, the column line k = 12 for the
    // offset 12 * 1024, the least multiple of the step with d >= 0 at the
    // smallest current and highest voltage.
    let mut g = MarginLayout {
        io_mul: 16,
        vin_mul: 5,
        offset: 0,
        step_shift: 10,
        cols: 2,
        vin_shift: 6,
        rows: 17,
    };
    g.offset = 12 * 1024;
    let d = |v: u16, i: u16| i64::from(i - 100) * 16 + i64::from(g.offset) - i64::from(v) * 5;
    assert!(d(3000, 300) >= 0);
    g.cols = (d(2000, 2000) >> 10) as u16 + 2;
    assert_eq!(
        d(2000, 725) % 1024,
        0,
        "the line sits on a column at v = 2000"
    );
    // ticks = 30 + 3 k + r/2 at node (r, k), frac_bits 4: linear in d and
    // in the voltage code, so interpolation reproduces it up to the
    // rounding of each row (half an entry unit) and the final rounding.
    let mut entries = Vec::new();
    for r in 0..g.rows {
        for k in 0..g.cols {
            entries.push(16 * (30 + 3 * k) + 8 * r);
        }
    }
    let t = DelayTable::new(
        s,
        Layout::Margin(g),
        4,
        Fallback::Valley,
        entries.as_slice(),
    )
    .unwrap();
    for v in (2000u16..=3000).step_by(11) {
        for i in (300u16..=2000).step_by(13) {
            assert_eq!(
                i64::from(g.margin(u32::from(v), u32::from(i - 100))),
                d(v, i)
            );
            let k = d(v, i) as f64 / 1024.0;
            let expect = 30.0 + 3.0 * k + f64::from(v - 2000) / 64.0 / 2.0;
            let got = t.delay(AdcCode::new(v), AdcCode::new(i)).ticks.get();
            assert!(
                (f64::from(got) - expect).abs() <= 0.5 + 1.0 / 32.0 + 1e-9,
                "v {v} i {i}: {got} vs {expect}"
            );
        }
    }
    // A negative slope works the same way (wrapping arithmetic, exact).
    let neg = MarginLayout {
        vin_mul: -5,
        offset: 0,
        cols: ((1900 * 16 + 3000 * 5) >> 10) + 2,
        ..g
    };
    let e = vec![160u16; usize::from(neg.rows) * usize::from(neg.cols)];
    let tn = DelayTable::new(s, Layout::Margin(neg), 4, Fallback::Valley, e.as_slice()).unwrap();
    assert_eq!(
        tn.delay(AdcCode::new(2500), AdcCode::new(900)).ticks.get(),
        10
    );
    // d below zero somewhere in the range: refused.
    let low = MarginLayout {
        offset: g.offset - 1024,
        ..g
    };
    assert!(matches!(
        DelayTable::new(
            s,
            Layout::Margin(low),
            4,
            Fallback::Valley,
            entries.as_slice()
        ),
        Err(TableError::Layout(_))
    ));
    // Columns that stop short of the range: refused.
    let short = MarginLayout {
        cols: g.cols - 1,
        ..g
    };
    let e = vec![0u16; usize::from(short.rows) * usize::from(short.cols)];
    assert!(matches!(
        DelayTable::new(s, Layout::Margin(short), 4, Fallback::Valley, e.as_slice()),
        Err(TableError::Layout(_))
    ));
}

#[test]
fn ratio_volt_lookup_interpolates_bilinear_data_exactly() {
    use timing_core::table::{ratio_bounds, RatioVoltLayout};
    let s = sensing();
    let (q_min, q_max) = ratio_bounds(&s, 12).unwrap();
    let g = RatioVoltLayout {
        ratio_shift: 12,
        q_lo: q_min - 50,
        step_shift: 11,
        cols: ((q_max - (q_min - 50)) >> 11) as u16 + 2,
        vin_shift: 6,
        rows: 17,
    };
    let mut entries = Vec::new();
    for r in 0..g.rows {
        for k in 0..g.cols {
            entries.push(16 * (30 + k) + 8 * r);
        }
    }
    let t = DelayTable::new(
        s,
        Layout::RatioVolt(g),
        4,
        Fallback::Valley,
        entries.as_slice(),
    )
    .unwrap();
    for v in (2000u16..=3000).step_by(11) {
        for i in (300u16..=2000).step_by(13) {
            let q = (u32::from(v) << 12) / u32::from(i - 100);
            let k = f64::from(q - g.q_lo) / 2048.0;
            let expect = 30.0 + k + f64::from(v - 2000) / 64.0 / 2.0;
            let got = t.delay(AdcCode::new(v), AdcCode::new(i)).ticks.get();
            assert!(
                (f64::from(got) - expect).abs() <= 0.5 + 1.0 / 32.0 + 1e-9,
                "v {v} i {i}: {got} vs {expect}"
            );
        }
    }
    // Column 0 above the smallest ratio: refused.
    let late = RatioVoltLayout {
        q_lo: q_min + 1,
        ..g
    };
    assert!(matches!(
        DelayTable::new(
            s,
            Layout::RatioVolt(late),
            4,
            Fallback::Valley,
            entries.as_slice()
        ),
        Err(TableError::Layout(_))
    ));
}
