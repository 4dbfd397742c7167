//! The `[trim]` table of a design file: the demo's settings in ticks, the
//! safe defaults, every bad value refused naming its key, and the trim's
//! source for firmware with the model's margins.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use std::path::Path;

use host_tool::emit::trim_source::{trim_source, TrimSourceError};
use host_tool::input::design::{DesignError, DesignSpec};
use host_tool::model::trim_margin::{TrimPlan, TrimPlanError};

/// The demo's text without its `[trim]` table.
fn demo_without_trim() -> String {
    let text = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables/winch_aux.toml"),
    )
    .unwrap();
    let at = text.find("\n[trim]").unwrap();
    text[..at].to_owned()
}

/// Where parsed texts pretend to live: beside the demo.
const ORIGIN: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/../tables/d.toml");

fn with_trim(keys: &str) -> Result<DesignSpec, DesignError> {
    DesignSpec::parse(
        &format!("{}\n[trim]\n{keys}\n", demo_without_trim()),
        ORIGIN,
    )
}

#[test]
fn the_demo_trim_is_in_ticks_of_its_timer() {
    let d =
        DesignSpec::load(&Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables/winch_aux.toml"))
            .unwrap();
    let t = d.trim.unwrap();
    // The default envelope; the comparator's 30 ns plus the driver's 25 ns
    // at 170 MHz, less half a tick.
    assert_eq!(t.config.envelope_ticks(), 4.0);
    assert!((t.config.comparator_ticks() - (55e-9 * 170e6 - 0.5)).abs() < 1.0 / 256.0);
    assert_eq!(t.config.gain(), 1);
    assert_eq!(t.config.limits(), [8, 8, 8]);
    assert_eq!(t.window, 64);
    // Voltage codes 2237..=3726 in bins of 256, current codes 205..=2049
    // in bins of 128.
    assert_eq!(t.regions.count(), 6 * 15);
}

#[test]
fn defaults_are_small_and_slow() {
    let t = with_trim("comparator_delay = \"20n\"")
        .unwrap()
        .trim
        .unwrap();
    assert_eq!(t.config.envelope_ticks(), 4.0);
    assert_eq!(t.config.plausible_ticks(), 16.0);
    assert_eq!(t.config.noise_ticks(), 3.0);
    assert_eq!(t.config.gain(), 4);
    assert_eq!(t.config.limits(), [8, 8, 8]);
    assert_eq!(t.window, 64);
}

#[test]
fn every_bad_value_is_refused_naming_its_key() {
    let err = |keys: &str| match with_trim(keys) {
        Err(e) => e.to_string(),
        Ok(_) => panic!("accepted: {keys}"),
    };
    assert!(
        err("gain = 4").contains("comparator_delay"),
        "{}",
        err("gain = 4")
    );
    for (keys, key) in [
        ("comparator_delay = \"20n\"\ngain = 0", "trim.gain"),
        ("comparator_delay = \"20n\"\ngain = 13", "trim.gain"),
        ("comparator_delay = \"-40n\"", "trim.comparator_delay"),
        (
            "comparator_delay = \"20n\"\nenvelope = \"-5n\"",
            "trim.envelope",
        ),
        (
            "comparator_delay = \"20n\"\nenvelope = \"1m\"",
            "trim.envelope",
        ),
        (
            "comparator_delay = \"20n\"\nplausible = \"1\"",
            "trim.plausible",
        ),
        ("comparator_delay = \"20n\"\nnoise = \"1\"", "trim.noise"),
        ("comparator_delay = \"20n\"\nwindow = 48", "trim.window"),
        ("comparator_delay = \"20n\"\nwindow = 1024", "trim.window"),
        (
            "comparator_delay = \"20n\"\nmissing_limit = 0",
            "trim.missing_limit",
        ),
        (
            "comparator_delay = \"20n\"\nimplausible_limit = 65",
            "trim.implausible_limit",
        ),
        (
            "comparator_delay = \"20n\"\nnoisy_limit = 100",
            "trim.noisy_limit",
        ),
        (
            "comparator_delay = \"20n\"\nregions = [0, 4]",
            "trim.regions",
        ),
        (
            "comparator_delay = \"20n\"\nregions = [4, 300]",
            "trim.regions",
        ),
    ] {
        let e = err(keys);
        assert!(e.contains(key), "{keys}: {e}");
    }
    assert!(err("comparator_delay = \"20n\"\nspeed = 3").contains("speed"));
}

#[test]
fn margins_widen_with_load_and_a_stuck_comparator_cannot_pass() {
    let d = with_trim("comparator_delay = \"30n\"\nregions = [4, 16]").unwrap();
    let t = d.trim.unwrap();
    let plan = TrimPlan::new(&d, &t).unwrap();
    // The window (the body-diode interval) widens with the current at a
    // given voltage (the closed forms: textbook relation, from memory), so
    // within each voltage bin the margin (a quarter of it) never falls
    // along the current bins.
    let per = plan.margin_ticks.len() / 3;
    for row in plan.margin_ticks.chunks(per) {
        for w in row.windows(2) {
            assert!(w[1] + 1e-9 >= w[0], "{row:?}");
        }
        assert!(row.last().unwrap() > &2.0, "{row:?}");
    }
    let earliest = plan.earliest_opening_ticks.unwrap();
    assert!((30.0..80.0).contains(&earliest), "{earliest}");
    // A plausible residual as long as the earliest opening lets a
    // comparator stuck low (captured at once) pass: refused.
    let d = with_trim("comparator_delay = \"30n\"\nplausible = \"600n\"").unwrap();
    match TrimPlan::new(&d, &d.trim.unwrap()) {
        Err(e @ TrimPlanError::StuckLowPasses { .. }) => {
            assert!(e.to_string().contains("trim.plausible"), "{e}")
        }
        other => panic!("{other:?}"),
    }
}

#[test]
fn the_source_builds_the_trim_at_compile_time() {
    let d =
        DesignSpec::load(&Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables/winch_aux.toml"))
            .unwrap();
    let s = trim_source(&d).unwrap();
    assert!(s.contains("pub const REGION_COUNT: usize = 90;"), "{s}");
    assert!(s.contains("pub static MARGIN_TICKS: [u16; 90] = ["), "{s}");
    assert!(s.contains("pub const WINDOW: usize = 64;"), "{s}");
    let no = DesignSpec::parse(&demo_without_trim(), ORIGIN).unwrap();
    assert!(matches!(trim_source(&no), Err(TrimSourceError::NoTrim(_))));
}

#[test]
fn table_prints_the_trim_in_ticks() {
    let d =
        DesignSpec::load(&Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables/winch_aux.toml"))
            .unwrap();
    let t = d.trim.unwrap();
    let text = host_tool::report::render::trim_text(&t, &TrimPlan::new(&d, &t).unwrap());
    for part in [
        "90 regions",
        "1/2 of the way",
        "+/-4 ticks",
        "threshold 2 V",
        "within 64 cycles",
    ] {
        assert!(text.contains(part), "{part}: {text}");
    }
}
