//! `host_tool::input::coss_csv::parse` on any text, as a user's Coss CSV.
//!
//! Contract checked: an error or a curve, no panic. An error names the
//! file, a line of the text (or 0 for the file as a whole) and says what
//! is wrong. A curve has at least two points, finite voltages that rise
//! from point to point, finite positive capacitances, and is one that
//! `SwitchCapacitance::new` accepts (as the parse documents).

#![no_main]

use host_tool::input::coss_csv::parse;
use libfuzzer_sys::fuzz_target;
use timing_core::coss::SwitchCapacitance;

const PATH: &str = "fuzz_coss.csv";

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    match parse(text, PATH) {
        Ok(points) => {
            assert!(points.len() >= 2, "{} points", points.len());
            for p in &points {
                assert!(p.volts.is_finite(), "volts {}", p.volts);
                assert!(
                    p.farads.is_finite() && p.farads > 0.0,
                    "farads {}",
                    p.farads
                );
            }
            for w in points.windows(2) {
                assert!(
                    w[1].volts > w[0].volts,
                    "{} V after {} V",
                    w[1].volts,
                    w[0].volts
                );
            }
            assert!(SwitchCapacitance::new(0.0, &points).is_ok());
        }
        Err(e) => {
            assert_eq!(e.path, PATH);
            assert!(
                e.line <= text.lines().count(),
                "line {} of {}",
                e.line,
                text.lines().count()
            );
            assert!(!e.message.is_empty());
            let shown = e.to_string();
            assert!(shown.starts_with(PATH), "{shown}");
        }
    }
});
