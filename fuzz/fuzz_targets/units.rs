//! `host_tool::units::parse_quantity` with every unit the design files and
//! options use, and `parse_fraction`, on any text.
//!
//! Contract checked: an error or a value, no panic; a value is finite; an
//! error other than `Empty` carries the text as given, and `Empty` comes
//! only for blank text. What `design_number` writes for a value reads back
//! to it (its documented round trip), checked over the prefixes' range
//! (1e-15 to 1e12 in magnitude, and zero).

#![no_main]

use host_tool::units::{design_number, format_si, parse_fraction, parse_quantity, NumberError};
use libfuzzer_sys::fuzz_target;

const UNITS: [&str; 8] = ["", "H", "F", "V", "A", "Hz", "s", "ohm"];

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    for unit in UNITS {
        match parse_quantity(text, unit) {
            Ok(v) => {
                assert!(v.is_finite(), "`{text}` in {unit:?} gave {v}");
                round_trip(v);
                let _ = format_si(v, unit);
            }
            Err(e) => {
                assert!(!e.to_string().is_empty());
                match e {
                    NumberError::Empty => assert!(text.trim().is_empty(), "`{text}` empty?"),
                    NumberError::Malformed { text: t, .. }
                    | NumberError::WrongUnit { text: t, .. }
                    | NumberError::NotFinite { text: t } => assert_eq!(t, text),
                }
            }
        }
    }
    if let Some(v) = parse_fraction(text) {
        assert!(v.is_finite(), "fraction `{text}` gave {v}");
    }
});

fn round_trip(v: f64) {
    if !(v == 0.0 || (1e-15..=1e12).contains(&v.abs())) {
        return;
    }
    let written = design_number(v, 17);
    let back = parse_quantity(&written, "")
        .unwrap_or_else(|e| panic!("design_number({v:e}) = `{written}` does not read back: {e}"));
    assert!(
        (back - v).abs() <= 1e-12 * v.abs(),
        "design_number({v:e}) = `{written}` reads back as {back:e}"
    );
}
