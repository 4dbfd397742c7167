//! The online trim: it learns a constant offset at the rate of a
//! first-order low-pass (`e_k = e_0*(1 - 2^-g)^k`, the textbook step
//! response of a one-pole IIR filter, from memory), keeps every command
//! inside its envelope and never before the corrected opening, and freezes
//! to the feed-forward on each kind of fault within its stated count.

use proptest::prelude::*;
use timing_core::trim::{Freeze, Regions, Trim, TrimConfig, TrimStatus};
use timing_core::{AdcCode, Error, Quantity, Ticks};

/// Gain 2^-3, envelope 8 ticks, comparator 2 ticks, plausible 40, noise
/// 6, freeze at 8 faults of a kind in the 32-cycle window.
const CFG: TrimConfig = match TrimConfig::new(3, 8.0, 2.0, 40.0, 6.0, [8, 8, 8]) {
    Ok(c) => c,
    Err(_) => panic!("bad trim settings"),
};

#[test]
fn learns_a_constant_offset_at_the_low_pass_rate() {
    let mut trim: Trim<4, 32> = Trim::new();
    // The board opens 5 ticks after the prediction, plus the comparator's 2.
    let offset = 5.0f32;
    let mut k_within = None;
    for k in 1..=200u32 {
        trim.update(&CFG, 2, Ticks::new(100), Some(Ticks::new(107)));
        let e = (trim.correction_ticks(2) - offset).abs();
        if e < 0.05 * offset && k_within.is_none() {
            k_within = Some(k);
        }
    }
    // (1 - 1/8)^k < 0.05 from k = 23 on (ln 0.05 / ln 0.875 = 22.4); the
    // integer shift truncates, so allow a few updates more.
    let k = k_within.unwrap();
    println!("within 5 % after {k} updates (a one-pole filter: 23)");
    assert!((23..=27).contains(&k), "{k}");
    assert!((trim.correction_ticks(2) - offset).abs() < 0.05);
    // Other regions learnt nothing.
    assert_eq!(trim.correction_ticks(0), 0.0);
    assert_eq!(
        trim.apply(&CFG, 2, Ticks::new(110), Ticks::new(100)).get(),
        115
    );
    assert_eq!(
        trim.apply(&CFG, 0, Ticks::new(110), Ticks::new(100)).get(),
        110
    );
}

#[test]
fn a_correction_stops_at_the_envelope() {
    let mut trim: Trim<2, 32> = Trim::new();
    for _ in 0..300 {
        trim.update(&CFG, 0, Ticks::new(100), Some(Ticks::new(100 + 2 + 20)));
    }
    // The envelope saturates at 8 ticks less the last 1/256 upwards (a
    // power of two's signed range), and at -8 downwards.
    assert_eq!(trim.correction_ticks(0), 8.0 - 1.0 / 256.0);
    assert_eq!(
        trim.apply(&CFG, 0, Ticks::new(120), Ticks::new(100)).get(),
        128
    );
    for _ in 0..300 {
        trim.update(&CFG, 0, Ticks::new(100), Some(Ticks::new(100 + 2 - 20)));
    }
    assert_eq!(trim.correction_ticks(0), -8.0);
    assert_eq!(
        trim.apply(&CFG, 0, Ticks::new(120), Ticks::new(100)).get(),
        112
    );
}

#[test]
fn never_before_the_corrected_opening() {
    let mut trim: Trim<1, 32> = Trim::new();
    for _ in 0..200 {
        trim.update(&CFG, 0, Ticks::new(50), Some(Ticks::new(56)));
    }
    // Opening corrected to 54; a feed-forward of 48 (before the predicted
    // opening) is raised to it, within the envelope (48 + 8 = 56).
    assert_eq!(
        trim.apply(&CFG, 0, Ticks::new(48), Ticks::new(50)).get(),
        54
    );
}

#[test]
fn missing_captures_freeze_within_the_limit_and_clear() {
    let mut trim: Trim<1, 32> = Trim::new();
    for _ in 0..100 {
        trim.update(&CFG, 0, Ticks::new(50), Some(Ticks::new(55)));
    }
    let learnt = trim.correction_ticks(0);
    let mut frozen_at = None;
    for k in 1..=20 {
        trim.update(&CFG, 0, Ticks::new(50), None);
        if let TrimStatus::Frozen(Freeze::NoCapture) = trim.status() {
            frozen_at.get_or_insert(k);
        }
    }
    assert_eq!(frozen_at, Some(8), "frozen at the 8th missing capture");
    // Frozen: the feed-forward alone, and the correction held.
    assert_eq!(
        trim.apply(&CFG, 0, Ticks::new(60), Ticks::new(50)).get(),
        60
    );
    assert_eq!(trim.correction_ticks(0), learnt);
    // Captures return: learning again once fewer than 8 of the last 32
    // cycles lack one.
    let mut back = None;
    for k in 1..=40 {
        trim.update(&CFG, 0, Ticks::new(50), Some(Ticks::new(55)));
        if trim.status() == TrimStatus::Learning {
            back.get_or_insert(k);
        }
    }
    assert_eq!(
        back,
        Some(32 - 20 + 13),
        "the 20 misses leave the window one by one"
    );
}

#[test]
fn a_comparator_stuck_low_is_implausible() {
    let mut trim: Trim<1, 32> = Trim::new();
    // Stuck low: the capture fires at once, 50 ticks before the opening.
    let mut status = TrimStatus::Learning;
    for _ in 0..8 {
        trim.update(&CFG, 0, Ticks::new(50), Some(Ticks::new(0)));
        status = trim.status();
    }
    assert_eq!(status, TrimStatus::Frozen(Freeze::Implausible));
    assert_eq!(trim.correction_ticks(0), 0.0, "nothing learnt from it");
}

#[test]
fn a_burst_of_noise_freezes_without_moving_the_correction_much() {
    let mut trim: Trim<1, 32> = Trim::new();
    for _ in 0..100 {
        trim.update(&CFG, 0, Ticks::new(50), Some(Ticks::new(54)));
    }
    let before = trim.correction_ticks(0);
    let mut status = TrimStatus::Learning;
    for k in 0..16u32 {
        // +-15 ticks alternating: plausible, but far from the recent mean.
        let c = if k % 2 == 0 { 69 } else { 39 };
        trim.update(&CFG, 0, Ticks::new(50), Some(Ticks::new(c)));
        status = trim.status();
    }
    assert_eq!(status, TrimStatus::Frozen(Freeze::Noisy));
    assert!((trim.correction_ticks(0) - before).abs() < 1.0);
}

#[test]
fn bad_settings_name_their_quantity() {
    let q = |e: Error| e.quantity();
    assert_eq!(
        q(TrimConfig::new(0, 8.0, 2.0, 40.0, 6.0, [8; 3]).unwrap_err()),
        Some(Quantity::TrimGain)
    );
    assert_eq!(
        q(TrimConfig::new(3, -1.0, 2.0, 40.0, 6.0, [8; 3]).unwrap_err()),
        Some(Quantity::TrimEnvelope)
    );
    assert_eq!(
        q(TrimConfig::new(3, 8.0, f32::NAN, 40.0, 6.0, [8; 3]).unwrap_err()),
        Some(Quantity::ComparatorDelay)
    );
    assert_eq!(
        q(TrimConfig::new(3, 8.0, 2.0, 40.0, 6.0, [8, 0, 8]).unwrap_err()),
        Some(Quantity::TrimThreshold)
    );
}

proptest! {
    /// Whatever the captures (missing, wild, huge), the command stays
    /// within the envelope of the feed-forward, equals it while frozen, and
    /// nothing panics.
    #[test]
    fn commands_stay_in_the_envelope(
        events in prop::collection::vec((0usize..5, 0u32..400, prop::option::of(0u32..u32::MAX)), 1..300),
        ff in 0u32..100_000,
        predicted in 0u32..100_000,
    ) {
        let mut trim: Trim<4, 16> = Trim::new();
        for (region, p, capture) in events {
            trim.update(&CFG, region, Ticks::new(p), capture.map(Ticks::new));
            let status = trim.status();
            let cmd = trim.apply(&CFG, region, Ticks::new(ff), Ticks::new(predicted)).get();
            if status == TrimStatus::Learning {
                prop_assert!(cmd + 8 >= ff && cmd <= ff + 8, "{cmd} vs {ff}");
            } else {
                prop_assert_eq!(cmd, ff);
            }
        }
    }
}

/// Built at compile time: a configuration and a trim in a `static`.
const CONST_CFG: TrimConfig = match TrimConfig::new(4, 8.0, 3.5, 40.0, 6.0, [8, 8, 8]) {
    Ok(c) => c,
    Err(_) => panic!("bad trim settings"),
};
static CONST_TRIM: Trim<2, 64> = Trim::new();

#[test]
fn the_envelope_is_a_power_of_two_ticks() {
    for (given, used) in [
        (8.5, 8.0),
        (50.0, 32.0),
        (1.0, 1.0),
        (0.7, 0.5),
        (0.0, 1.0 / 256.0),
    ] {
        let c = TrimConfig::new(3, given, 2.0, 40.0, 6.0, [8, 8, 8]).unwrap();
        assert_eq!(c.envelope_ticks(), used, "{given}");
    }
}

#[test]
fn settings_are_built_in_const_context_and_read_back() {
    assert_eq!(CONST_TRIM.status(), TrimStatus::Learning);
    assert!(CONST_TRIM.is_learning());
    let c = &CONST_CFG;
    assert_eq!(c.gain(), 4);
    assert_eq!(c.envelope_ticks(), 8.0);
    assert_eq!(c.comparator_ticks(), 3.5);
    assert_eq!(c.plausible_ticks(), 40.0);
    assert_eq!(c.noise_ticks(), 6.0);
    assert_eq!(c.limits(), [8, 8, 8]);
}

#[test]
fn every_code_falls_in_the_region_whose_codes_hold_it() {
    for (vin, io, vb, ib) in [
        ((2236u16, 3727u16), (205u16, 2049u16), 8u16, 16u16),
        ((0, 4095), (0, 4095), 1, 1),
        ((100, 100), (7, 4000), 3, 5),
        ((0, 65535), (0, 65535), 256, 256),
    ] {
        let r = Regions::new(vin, io, vb, ib).unwrap();
        assert!(
            r.count() <= usize::from(vb) * usize::from(ib),
            "{}",
            r.count()
        );
        let mut seen = vec![false; r.count()];
        for v in (vin.0..=vin.1).step_by(7).chain([vin.1]) {
            for i in (io.0..=io.1).step_by(11).chain([io.1]) {
                let k = r.index(AdcCode::new(v), AdcCode::new(i));
                let ((v0, v1), (i0, i1)) = r.codes(k).unwrap();
                assert!((v0..=v1).contains(&v) && (i0..=i1).contains(&i));
                seen[k] = true;
            }
        }
        assert!(seen.iter().all(|&s| s), "every region is reached");
        // Outside the range: the nearest bin.
        assert_eq!(r.index(AdcCode::new(0), AdcCode::new(0)), 0);
        assert_eq!(
            r.index(AdcCode::new(u16::MAX), AdcCode::new(u16::MAX)),
            r.count() - 1
        );
        assert_eq!(r.codes(r.count()), None);
    }
}

#[test]
fn bad_regions_name_their_quantity() {
    for (vin, io, vb, ib) in [
        ((0u16, 10u16), (0u16, 10u16), 0u16, 4u16),
        ((0, 10), (0, 10), 4, 257),
        ((11, 10), (0, 10), 4, 4),
        ((0, 10), (9, 3), 4, 4),
    ] {
        match Regions::new(vin, io, vb, ib) {
            Err(Error::OutOfRange { quantity, .. }) => assert_eq!(quantity, Quantity::TrimRegions),
            other => panic!("{other:?}"),
        }
    }
}
