//! A half-bridge leg's design file: the demo validates; every bad value is
//! refused naming its key and value; the cell's commands refuse a leg's
//! file saying which commands serve it.

use host_tool::input::design::DesignSpec;
use host_tool::input::leg_design::{LegSpec, LEG_TOPOLOGY};
use host_tool::tank::leg_grid::FarEnd;

fn demo_text() -> String {
    std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../tables/lantern_leg.toml"
    ))
    .unwrap()
}

/// Parse `text` as if it sat beside the demo (its curve resolves).
fn parse(text: &str) -> Result<LegSpec, String> {
    LegSpec::parse(
        text,
        concat!(env!("CARGO_MANIFEST_DIR"), "/../tables/variant.toml"),
    )
    .map_err(|e| e.to_string())
}

#[test]
fn the_demo_validates() {
    let spec = parse(&demo_text()).unwrap();
    assert_eq!(spec.name, "lantern_leg");
    assert_eq!(spec.built.far_end, FarEnd::Volts(12.0));
    assert_eq!(
        spec.built.low, spec.built.high,
        "one curve serves both switches"
    );
    assert!((spec.built.max_diode_s - 40e-9).abs() < 1e-15);
    // Codes: 40 V / 0.0161 V rounds up to 2485, 56 V down to 3478.
    assert_eq!((spec.bus_codes.lo, spec.bus_codes.hi), (2485, 3478));
    // The rising edge's negative currents sit below the sensor's zero.
    assert!(spec.current_codes[1].hi < spec.current_zero_code);
    assert!(spec.tolerance.is_some());
}

#[test]
fn bad_values_are_refused_naming_the_key() {
    let demo = demo_text();
    for (from, to, says) in [
        ("far_end = 12 ", "far_end = 70 ", "far_end = 70"),
        ("far_end = 12 ", "far_end = \"1.5 bus\" ", "far_end = 1.5"),
        ("l = \"2.2u\"", "l = \"-2.2u\"", "l: "),
        (
            "current = [0.5, 9]",
            "current = [9, 0.5]",
            "falling_edge.current",
        ),
        (
            "current = [-4, -0.6]",
            "current = [-4]",
            "rising_edge.current",
        ),
        ("vbus = [40, 56]", "vbus = [40, 80]", "vbus reaches 80"),
        ("c = \"8%\"", "c = \"80%\"", "tolerance.c = 0.8"),
        ("step = \"1n\"", "step = \"0\"", "dead_time"),
        ("position = 0.3", "position = 1.3", "dead_time.position"),
        ("min_dead = \"8n\"", "min_dead = \"1u\"", "dead_time"),
        ("r_loop = \"40m\"", "r_loop = \"2k\"", "r_loop"),
        ("max_diode = \"40n\"", "max_diode = \"0\"", "max_diode"),
        (
            "coss_low = \"lantern_leg_coss.csv\"",
            "coss_low = \"no_such_curve.csv\"",
            "no_such_curve.csv",
        ),
        ("name = \"lantern_leg\"", "name = \"9lantern\"", "9lantern"),
    ] {
        assert!(demo.contains(from), "the demo has `{from}`");
        let text = demo.replace(from, to);
        let err = parse(&text).expect_err(to);
        assert!(
            err.contains(says),
            "`{to}` gives `{err}`, which should name `{says}`"
        );
    }
}

#[test]
fn the_cells_loader_refuses_a_leg_naming_what_serves_it() {
    let err = DesignSpec::parse(&demo_text(), "lantern_leg.toml").unwrap_err();
    let text = err.to_string();
    assert!(
        text.contains(LEG_TOPOLOGY) && text.contains("`table`"),
        "{text}"
    );
}
