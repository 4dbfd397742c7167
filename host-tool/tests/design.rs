//! Design files: malformed ones are reported with line, column and key;
//! impossible or inconsistent ones in a plain sentence; the `table` and
//! `verify` commands as users run them.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

mod common;

use std::path::Path;

use host_tool::input::design::DesignError;
use host_tool::model::design::Design;

fn demo_text() -> String {
    std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables/winch_aux.toml"))
        .unwrap()
}

/// Where parsed texts pretend to live: beside the demo, so its Coss file
/// resolves.
const ORIGIN: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/../tables/d.toml");

fn malformed(text: &str) -> String {
    match Design::parse(text, ORIGIN) {
        Err(DesignError::Malformed { message, .. }) => message,
        other => panic!("expected a malformed-file error, got {other:?}"),
    }
}

fn invalid(text: &str) -> String {
    match Design::parse(text, ORIGIN) {
        Err(DesignError::Invalid { problem, .. }) => problem.to_string(),
        other => panic!("expected an invalid-design error, got {other:?}"),
    }
}

#[test]
fn the_demo_design_is_valid() {
    let d = Design::parse(&demo_text(), ORIGIN).unwrap();
    assert_eq!(d.name, "winch_aux");
    assert_eq!((d.vin_codes.lo, d.vin_codes.hi), (2237, 3726)); // ceil(36/0.0161), floor(60/0.0161)
}

#[test]
fn malformed_files_name_line_column_and_key() {
    let t = demo_text().replace("lr = \"1u\"", "lr = \"1uF\"");
    let m = malformed(&t);
    assert!(m.contains("line 6") && m.contains("lr"), "{m}");
    assert!(m.contains("unit"), "{m}");

    let t = demo_text().replace("bits = 12", "bits = \"twelve\"");
    let m = malformed(&t);
    assert!(
        m.contains("line") && m.contains("column") && m.contains("bits"),
        "{m}"
    );

    let t = demo_text().replace("position = 0.25", "positon = 0.25");
    let m = malformed(&t);
    assert!(m.contains("positon"), "{m}");

    let m = malformed("name = \"x\"\nlr = [1");
    assert!(m.contains("line 2"), "{m}");
}

#[test]
fn impossible_designs_get_a_plain_sentence() {
    let cases = [
        (
            demo_text().replace("lr = \"1u\"", "lr = \"-1u\""),
            "greater than zero",
        ),
        (
            demo_text().replace("vin = [36, 60]", "vin = [60, 36]"),
            "empty range",
        ),
        (
            demo_text().replace("io = [1, 10]", "io = [0, 10]"),
            "must be positive",
        ),
        (
            demo_text().replace("io = [1, 10]", "io = [1, 30]"),
            "beyond the 12-bit ADC's full scale",
        ),
        (
            demo_text().replace("vin = [36, 60]", "vin = [36, 80]"),
            "beyond the 12-bit ADC's full scale",
        ),
        (
            demo_text().replace("name = \"winch_aux\"", "name = \"9lives\""),
            "C identifier",
        ),
        (
            demo_text().replace("vout = 12", "vout = 40"),
            "below the lowest input voltage",
        ),
        (
            demo_text().replace("position = 0.25", "position = 1.5"),
            "position",
        ),
        (
            demo_text().replace("max_error_ticks = 1.0", "max_error_ticks = 0.2"),
            "at least 0.5",
        ),
        (
            demo_text().replace("fallback = \"valley\"", "fallback = \"fixed\""),
            "fallback_ticks",
        ),
        (
            demo_text().replace("topology = \"buck\"", "topology = \"boost\""),
            "must exceed the highest input voltage",
        ),
        (demo_text().replace("bits = 12", "bits = 20"), "8 to 16"),
    ];
    for (text, phrase) in cases {
        let m = invalid(&text);
        assert!(m.contains(phrase), "`{m}` should say `{phrase}`");
        assert_eq!(m.lines().count(), 1, "{m}");
    }
}

fn zvs_timing(args: &[&str]) -> (i32, String, String) {
    let r = common::zvs(args);
    (r.code, r.stdout, r.stderr)
}

#[test]
fn table_and_verify_commands() {
    let dir = std::env::temp_dir().join(format!("zvs-timing-cli-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    // The demo design with the layout left to `auto`, so every layout is tried.
    std::fs::create_dir_all(&dir).unwrap();
    let design = dir.join("winch_aux.toml");
    std::fs::write(&design, demo_text().replace("layout = \"log-volt\"", "")).unwrap();
    std::fs::copy(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables/winch_aux_coss.csv"),
        dir.join("winch_aux_coss.csv"),
    )
    .unwrap();
    let d = design.to_str().unwrap();
    let out = dir.to_str().unwrap();
    let (code, stdout, err) = zvs_timing(&["table", d, "--out", out, "--json"]);
    assert_eq!(code, 0, "{err}");
    let j: serde_json::Value = serde_json::from_str(&stdout).unwrap();
    assert!(j["table_bytes"].as_u64().unwrap() <= 2048);
    assert!(j["max_error_ticks"].as_f64().unwrap() <= 1.0);
    assert!([
        "ratio",
        "log-ratio",
        "log-uniform",
        "grid",
        "recip-ratio",
        "log-volt"
    ]
    .contains(&j["layout"].as_str().unwrap()));
    let alts = j["alternatives"].as_array().unwrap();
    assert!(
        alts.iter().any(|a| a["layout"] == "grid"),
        "the grid layout's size must be reported"
    );
    for ext in ["rs", "h", "bin", "csv"] {
        assert!(dir.join(format!("winch_aux.{ext}")).exists());
    }
    let bin = dir.join("winch_aux.bin");
    let (code, stdout, _) = zvs_timing(&["verify", d, "--table", bin.to_str().unwrap(), "--json"]);
    assert_eq!(code, 0);
    let j: serde_json::Value = serde_json::from_str(&stdout).unwrap();
    assert_eq!(j["points_checked"].as_u64().unwrap(), 1490 * 1845);
    assert!(j["max_error_ticks"].as_f64().unwrap() <= 1.0);
    assert_eq!(
        j["report"]["outside_window_wide"].as_u64(),
        Some(0),
        "{stdout}"
    );
    assert_eq!(
        j["report"]["outside_robust_window"].as_u64(),
        Some(0),
        "{stdout}"
    );

    // A flipped byte: refused with a message that says so.
    let mut blob = std::fs::read(&bin).unwrap();
    let k = blob.len() - 10;
    blob[k] ^= 0x20;
    let bad = dir.join("bad.bin");
    std::fs::write(&bad, &blob).unwrap();
    let (code, _, err) = zvs_timing(&["verify", d, "--table", bad.to_str().unwrap()]);
    assert_ne!(code, 0);
    assert!(
        err.contains("integrity check failed") && err.contains("corrupt"),
        "{err}"
    );
    assert!(!err.contains("panicked"));

    // A malformed design through the command: one error naming line and key.
    let broken = dir.join("broken.toml");
    std::fs::write(
        &broken,
        demo_text().replace("cr = \"5.6n\"", "cr = \"5.6q\""),
    )
    .unwrap();
    let (code, _, err) = zvs_timing(&["table", broken.to_str().unwrap(), "--out", out]);
    assert_ne!(code, 0);
    assert!(err.contains("line 7") && err.contains("cr"), "{err}");
}

#[test]
fn coss_curves_in_design_files() {
    let dir = std::env::temp_dir().join(format!("zvs-timing-coss-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    let origin = dir.join("d.toml");
    let origin = origin.to_str().unwrap();
    let curve = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables/winch_aux_coss.csv"),
    )
    .unwrap();
    std::fs::write(dir.join("winch_aux_coss.csv"), &curve).unwrap();
    let d = Design::parse(&demo_text(), origin).unwrap();
    assert!(d
        .model_summary()
        .contains("Coss curve winch_aux_coss.csv (13 points)"));
    assert!(d.model_summary().contains("numerical ring"));
    // The ideal stand-in: its Z0 puts J = 1 on the real boundary at the
    // middle of the range (48 V), its w0 lies within the ring's range of
    // local resonant frequencies.
    let c = d.real.capacitance().unwrap();
    let solver = d.real.solver().unwrap();
    let ib = solver.boundary_current_a(48.0).unwrap();
    assert!((ib * d.tank.z0_ohm() / 48.0 - 1.0).abs() < 1e-9);
    let w = |cap: f64| 1.0 / (1e-6 * cap).sqrt();
    assert!(d.tank.w0_rad_s() < w(c.min_f()) && d.tank.w0_rad_s() > w(c.max_f()));
    // The curve is part of the design hash.
    std::fs::write(
        dir.join("winch_aux_coss.csv"),
        curve.replace("0,2400p", "0,2500p"),
    )
    .unwrap();
    let d2 = Design::parse(&demo_text(), origin).unwrap();
    assert_ne!(d.hash, d2.hash);

    // Without a curve, cr is the whole capacitance and must be given.
    let no_curve = demo_text().replace("coss = \"winch_aux_coss.csv\"\n", "");
    let ideal = Design::parse(&no_curve.replace("r_tank = \"80m\"", ""), origin).unwrap();
    assert!(ideal.model_summary().contains("closed forms"));
    let m = match Design::parse(&no_curve.replace("cr = \"5.6n\"", ""), origin) {
        Err(DesignError::Invalid { problem, .. }) => problem.to_string(),
        other => panic!("{other:?}"),
    };
    assert!(m.contains("cr is missing"), "{m}");
    // With a curve, cr is optional (the curve alone).
    assert!(Design::parse(&demo_text().replace("cr = \"5.6n\"", ""), origin).is_ok());

    // A missing file, a bad number and a falling voltage: file, line, value.
    let cases = [
        ("nowhere.csv", None, "nowhere.csv: cannot read"),
        (
            "bad.csv",
            Some("volts,farads\n0,2.4n\n5,lots\n"),
            "bad.csv:3: capacitance `lots`",
        ),
        (
            "order.csv",
            Some("# c\n0,2.4n\n10,1n\n10,0.9n\n"),
            "order.csv:4:",
        ),
        ("neg.csv", Some("0,2.4n\n10,-1n\n"), "got -1e-9"),
    ];
    for (file, text, phrase) in cases {
        if let Some(t) = text {
            std::fs::write(dir.join(file), t).unwrap();
        }
        let t = demo_text().replace("winch_aux_coss.csv", file);
        let m = match Design::parse(&t, origin) {
            Err(DesignError::Invalid { problem, .. }) => problem.to_string(),
            other => panic!("{other:?}"),
        };
        assert!(m.contains(phrase), "`{m}` should say `{phrase}`");
        assert!(m.starts_with("coss: "), "{m}");
    }
    let m = match Design::parse(
        &demo_text().replace("r_tank = \"80m\"", "r_tank = \"-1\""),
        origin,
    ) {
        Err(DesignError::Invalid { problem, .. }) => problem.to_string(),
        other => panic!("{other:?}"),
    };
    assert!(m.starts_with("r_tank: ") && m.contains("-1"), "{m}");
}
