//! Design-file text through the parse the `table` command runs on it: a
//! half-bridge leg's file (`topology = "half-bridge-leg"`) through
//! `LegSpec::parse`, any other through `Design::parse` (which
//! `Design::load` runs on the file's text). The text is named as a file in
//! the repository's `tables/`, so a `coss` key that names one of the
//! demo's curves reads it; a text naming any other path (a folder, `..`)
//! is skipped, so the fuzzer reads no file outside `tables/`.
//!
//! Contract checked: an error or a design, no panic; every error has a
//! message; a design's numbers are finite and keep the rules its
//! validation documents (positive, ordered ranges; ADC codes within the
//! converter's bits and above the current sensor's zero; tolerances within
//! their bounds; a C identifier as its name).

#![no_main]

use host_tool::input::design::DesignSpec;
use host_tool::input::invalid::c_identifier;
use host_tool::input::leg_design::{is_leg, LegSpec};
use host_tool::model::design::Design;
use libfuzzer_sys::fuzz_target;
use timing_core::CodeRange;

/// Where the text is said to come from: files it names are read beside it.
const ORIGIN: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/../tables/fuzz.toml");

/// Keys that name a Coss curve file.
const FILE_KEYS: [&str; 3] = ["coss", "coss_low", "coss_high"];

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    if !names_only_files_beside(text) {
        return;
    }
    if is_leg(text) {
        match LegSpec::parse(text, ORIGIN) {
            Ok(spec) => check_leg(&spec),
            Err(e) => assert!(!e.to_string().is_empty()),
        }
    } else {
        match Design::parse(text, ORIGIN) {
            Ok(design) => check_cell(&design),
            Err(e) => assert!(!e.to_string().is_empty()),
        }
    }
});

/// Whether every file the text names is a plain file name (letters,
/// digits, `_`, `-`, `.`, not starting with `.`): a file in `tables/`.
fn names_only_files_beside(text: &str) -> bool {
    let Ok(table) = text.parse::<toml::Table>() else {
        // The design parse refuses it before reading any file.
        return true;
    };
    FILE_KEYS.iter().all(|k| match table.get(*k) {
        Some(toml::Value::String(f)) => {
            !f.is_empty()
                && !f.starts_with('.')
                && f.chars()
                    .all(|c| c.is_ascii_alphanumeric() || matches!(c, '_' | '-' | '.'))
        }
        _ => true,
    })
}

fn finite(what: &str, v: f64) {
    assert!(v.is_finite(), "{what} = {v} is not finite");
}

fn positive(what: &str, v: f64) {
    assert!(
        v.is_finite() && v > 0.0,
        "{what} = {v} is not a positive number"
    );
}

fn codes(what: &str, r: CodeRange, bits: u8) {
    let max = (1u32 << bits) - 1;
    assert!(
        1 <= r.lo && r.lo <= r.hi && u32::from(r.hi) <= max,
        "{what} codes {r:?} outside 1..={max}"
    );
}

fn check_cell(d: &DesignSpec) {
    assert!(c_identifier(&d.name), "name {:?}", d.name);
    positive("lr", d.tank.lr_h());
    positive("cr", d.tank.cr_f());
    positive("z0", d.tank.z0_ohm());
    positive("w0", d.tank.w0_rad_s());
    positive("zvs_z0", d.zvs_z0_ohm);
    positive("real lr", d.real.lr_h);
    finite("real cr", d.real.cr_fixed_f);
    finite("r_tank", d.real.r_tank_ohm);
    for p in &d.real.coss {
        finite("coss volts", p.volts);
        positive("coss farads", p.farads);
    }
    positive("coss_scale", d.coss_scale);
    positive("vin lo", d.vin_v.0);
    positive("io lo", d.io_a.0);
    assert!(
        d.vin_v.0 < d.vin_v.1 && d.vin_v.1.is_finite(),
        "vin {:?}",
        d.vin_v
    );
    assert!(
        d.io_a.0 < d.io_a.1 && d.io_a.1.is_finite(),
        "io {:?}",
        d.io_a
    );
    if let Some(v) = d.vout_v {
        positive("vout", v);
    }
    assert!((8..=16).contains(&d.adc_bits), "adc bits {}", d.adc_bits);
    positive("vin_volts_per_code", d.vin_volts_per_code);
    positive("io_amps_per_code", d.io_amps_per_code);
    codes("vin", d.vin_codes, d.adc_bits);
    codes("io", d.io_codes, d.adc_bits);
    assert!(d.io_codes.lo > d.io_zero_code, "io codes at the zero");
    positive("clock", d.timer.clock_hz());
    finite("driver delay on", d.timer.turn_on_delay_s());
    finite("driver delay off", d.timer.turn_off_delay_s());
    let p = d.position.get();
    assert!((0.0..=1.0).contains(&p), "position {p}");
    assert!(d.max_error_ticks.is_finite() && d.max_error_ticks >= 0.5);
    if let timing_core::table::Fallback::Fixed(t) = d.fallback {
        assert!(t <= d.timer.max_ticks(), "fallback ticks {t:?}");
    }
    if let Some(t) = d.tolerance {
        for (what, v, max) in [
            ("lr", t.lr_rel, 0.5),
            ("cr", t.cr_rel, 0.5),
            ("vin_gain", t.vin_gain_rel, 0.5),
            ("io_gain", t.io_gain_rel, 0.5),
            ("vin_offset_codes", t.vin_offset_codes, 4096.0),
            ("io_offset_codes", t.io_offset_codes, 4096.0),
            ("noise_codes", t.noise_codes, 4096.0),
            ("jitter", t.jitter_s, 1e-6),
        ] {
            assert!((0.0..=max).contains(&v), "tolerance.{what} = {v}");
        }
    }
    if let Some(t) = d.trim {
        finite("comparator_delay", t.comparator_delay_s);
        assert!((0.0..=50.0).contains(&t.comparator_threshold_v));
        assert!(t.window.is_power_of_two());
    }
}

fn check_leg(l: &LegSpec) {
    assert!(c_identifier(&l.name), "name {:?}", l.name);
    positive("l", l.built.l_h);
    finite("c_ext", l.built.c_ext_f);
    finite("r_loop", l.built.r_ohm);
    finite("max_diode", l.built.max_diode_s);
    for p in l.built.low.iter().chain(&l.built.high) {
        finite("coss volts", p.volts);
        positive("coss farads", p.farads);
    }
    positive("vbus lo", l.vbus_v.0);
    assert!(
        l.vbus_v.0 < l.vbus_v.1 && l.vbus_v.1.is_finite(),
        "vbus {:?}",
        l.vbus_v
    );
    for (lo, hi) in l.current_a {
        assert!(
            lo.is_finite() && hi.is_finite() && lo < hi,
            "current {lo}..{hi}"
        );
    }
    assert!((8..=16).contains(&l.adc_bits), "adc bits {}", l.adc_bits);
    positive("vbus_volts_per_code", l.vbus_volts_per_code);
    positive("current_amps_per_code", l.current_amps_per_code);
    codes("vbus", l.bus_codes, l.adc_bits);
    for r in l.current_codes {
        codes("current", r, l.adc_bits);
    }
    positive("step", l.step_s);
    let p = l.position.get();
    assert!((0.0..=1.0).contains(&p), "position {p}");
    assert!(l.max_error_ticks.is_finite() && l.max_error_ticks >= 0.5);
    if let Some(t) = l.tolerance {
        for (what, v, max) in [
            ("l", t.l_rel, 0.5),
            ("c", t.c_rel, 0.5),
            ("far_end", t.far_rel, 0.5),
            ("vbus_gain", t.vbus_gain_rel, 0.5),
            ("current_gain", t.current_gain_rel, 0.5),
            ("vbus_offset_codes", t.vbus_offset_codes, 4096.0),
            ("current_offset_codes", t.current_offset_codes, 4096.0),
            ("noise_codes", t.noise_codes, 4096.0),
            ("jitter", t.jitter_s, 1e-6),
        ] {
            assert!((0.0..=max).contains(&v), "tolerance.{what} = {v}");
        }
    }
}
