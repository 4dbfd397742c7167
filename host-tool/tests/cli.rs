//! The `zvs-timing point` command as a user runs it: JSON fields, and one
//! clear line on stderr for every kind of bad input, never a panic.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

mod common;

const DEMO: &[&str] = &[
    "point", "--lr", "1u", "--cr", "6.8n", "--vin", "48", "--io", "6",
];

fn run(args: &[&str]) -> (i32, String, String) {
    let r = common::zvs(args);
    (r.code, r.stdout, r.stderr)
}

fn with(extra: &[&str]) -> Vec<&'static str> {
    let mut v: Vec<&'static str> = DEMO.to_vec();
    for e in extra {
        v.push(Box::leak(e.to_string().into_boxed_str()));
    }
    v
}

/// Replace the value of `opt` in the demo arguments.
fn replace(opt: &str, value: &str) -> Vec<&'static str> {
    let mut v = DEMO.to_vec();
    let k = v.iter().position(|a| *a == opt).unwrap();
    v[k + 1] = Box::leak(value.to_string().into_boxed_str());
    v
}

#[test]
fn json_has_the_documented_fields() {
    let (code, out, err) = run(&with(&[
        "--clock-hz",
        "170M",
        "--driver-delay",
        "25n",
        "--json",
    ]));
    assert_eq!(code, 0, "{err}");
    let j: serde_json::Value = serde_json::from_str(&out).unwrap();
    for key in [
        "zvs",
        "normalized_load",
        "charge_end_s",
        "window_open_s",
        "window_close_s",
        "peak_switch_voltage_v",
        "valley_s",
        "valley_voltage_v",
        "delay_ticks",
    ] {
        assert!(j.get(key).is_some(), "missing {key}");
    }
    assert_eq!(j["zvs"], true);
    let open = j["window_open_s"].as_f64().unwrap();
    let close = j["window_close_s"].as_f64().unwrap();
    let on = j["commanded_turn_on_s"].as_f64().unwrap();
    assert!(open < on && on < close);
    assert!(j["delay_ticks"].as_u64().unwrap() > 0);
    assert!(j["valley_s"].is_null());
}

#[test]
fn json_below_the_boundary_reports_the_valley() {
    let (code, out, err) = run(&[
        "point", "--lr", "1u", "--cr", "6.8n", "--vin", "48", "--io", "2", "--json",
    ]);
    assert_eq!(code, 0, "{err}");
    let j: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(j["zvs"], false);
    assert!(j["valley_s"].as_f64().unwrap() > 0.0);
    assert!(j["valley_voltage_v"].as_f64().unwrap() > 0.0);
    assert!(j["window_open_s"].is_null());
    assert!(j["delay_ticks"].is_null());
    assert!(j["warnings"][0].as_str().unwrap().contains("ZVS is lost"));
}

#[test]
fn human_output_has_the_window_and_the_caution() {
    let (code, out, _) = run(&with(&["--clock-hz", "170M", "--driver-delay", "25n"]));
    assert_eq!(code, 0);
    assert!(out.contains("ZVS window opens"));
    assert!(out.contains("ticks"));
    assert!(out.contains("CAUTION"));
    assert!(out.contains("reduced voltage"));
}

#[test]
fn every_bad_input_gets_one_clear_line() {
    let cases: Vec<(Vec<&'static str>, &str, &str)> = vec![
        (replace("--lr", "nan"), "--lr", "finite"),
        (replace("--lr", "inf"), "--lr", "finite"),
        (replace("--lr", "0"), "--lr", "greater than zero"),
        (replace("--lr", "-2u"), "--lr", "greater than zero"),
        (replace("--lr", "1e-310"), "--lr", "outside"),
        (replace("--lr", "1e-20"), "--lr", "outside"),
        (replace("--lr", "2uF"), "--lr", "unit"),
        (replace("--lr", "two"), "--lr", "not a number"),
        (replace("--cr", "-10n"), "--cr", "greater than zero"),
        (replace("--cr", "NaN"), "--cr", "finite"),
        (replace("--vin", "0"), "--vin", "greater than zero"),
        (replace("--vin", "-inf"), "--vin", "finite"),
        (replace("--io", "-5"), "--io", "greater than zero"),
        (replace("--io", "0"), "--io", "greater than zero"),
        (replace("--io", "1e-320"), "--io", "outside"),
        (
            with(&["--topology", "boost"]),
            "--vout",
            "needs the output voltage",
        ),
        (
            with(&["--topology", "boost", "--vout", "24"]),
            "--vout",
            "must lie in",
        ),
        (
            with(&["--topology", "buck-boost", "--vout", "-5"]),
            "--vout",
            "greater than zero",
        ),
        (with(&["--position", "1.5"]), "--position", "[0, 1]"),
        (with(&["--position", "-0.1"]), "--position", "[0, 1]"),
        (
            with(&["--clock-hz", "0"]),
            "--clock-hz",
            "greater than zero",
        ),
        (
            with(&["--clock-hz", "170M", "--counter-bits", "40"]),
            "--counter-bits",
            "1 to 32",
        ),
        (
            with(&["--clock-hz", "170M", "--counter-bits", "4"]),
            "--clock-hz",
            "counter",
        ),
        (
            with(&["--clock-hz", "170M", "--driver-delay", "-5n"]),
            "--driver-delay",
            "negative",
        ),
        (
            with(&["--clock-hz", "170M", "--driver-delay", "900n"]),
            "--driver-delay",
            "lead",
        ),
        (with(&["--fs", "5M"]), "--fs", "no on-time"),
        (with(&["--fs", "0"]), "--fs", "greater than zero"),
        (with(&["--vout", "60"]), "--vout", "out of reach"),
        (with(&["--vds-rating", "-100"]), "--vds-rating", "positive"),
        (replace("--lr", "1e300"), "--lr", "unit prefix"),
        (replace("--cr", "6.8"), "--cr", "unit prefix"),
    ];
    for (args, option, phrase) in cases {
        let (code, out, err) = run(&args);
        assert_ne!(code, 0, "{args:?} succeeded: {out}");
        assert!(!err.contains("panicked"), "{args:?} panicked: {err}");
        assert_eq!(
            err.trim_end().lines().count(),
            1,
            "{args:?}: not one line: {err}"
        );
        assert!(
            err.contains(option),
            "{args:?}: `{err}` does not name {option}"
        );
        assert!(
            err.contains(phrase),
            "{args:?}: `{err}` does not say `{phrase}`"
        );
    }
}

#[test]
fn high_stress_and_narrow_windows_are_warned_about() {
    // J about 6: the switch sees about 7 times Vin.
    let (_, out, _) = run(&replace("--io", "24"));
    assert!(out.contains("high voltage stress"), "{out}");
    let (_, out, _) = run(&with(&["--vds-rating", "100"]));
    assert!(out.contains("exceeds the switch rating"), "{out}");
    // Just above the boundary the window is narrower than a 170 MHz tick.
    let (_, out, _) = run(&with(&["--clock-hz", "170M"])
        .into_iter()
        .map(|a| if a == "6" { "3.96" } else { a })
        .collect::<Vec<_>>());
    assert!(
        out.contains("no timer tick lands") || out.contains("ticks wide"),
        "{out}"
    );
}

#[test]
fn the_cli_writes_the_deck_and_the_prediction() {
    let dir = std::env::temp_dir().join(format!("zvs-netlist-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let deck = dir.join("cell.cir");
    let out = common::run(
        common::zvs_timing()
            .args(["netlist"])
            .arg(std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables/winch_aux.toml"))
            .args(["--vin", "48", "--io", "6", "--json", "--out"])
            .arg(&deck),
    );
    let j = out.json();
    assert!(j["window_open_s"].as_f64().unwrap() > 0.0);
    assert!(j["caution"].as_str().unwrap().contains("scope"));
    let text = std::fs::read_to_string(&deck).unwrap();
    assert!(text.contains(".tran") && text.contains(".end") && text.contains("CAUTION"));
    // A point the design's timer cannot reach is refused by name.
    let out = common::run(
        common::zvs_timing()
            .args(["netlist"])
            .arg(std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables/winch_aux.toml"))
            .args(["--vin", "-3", "--io", "6"]),
    );
    assert_eq!(out.code, 2);
    assert!(out.stderr.contains("--vin = -3 V"), "{}", out.stderr);
}

/// `point --json` with tolerances: the robust window lies inside the true
/// window (timing-core's f64 transition) at every corner of the box and at
/// sampled interior points, for held-out inputs.
#[test]
fn point_robust_window_lies_inside_every_true_window() {
    use timing_core::{CellPoint, Tank, Transition};
    for (lr, cr, vin, io, lt, ct, ve, ie) in [
        (1.0e-6, 6.8e-9, 48.0, 6.0, 0.10, 0.05, 0.01, 0.02),
        (2.2e-6, 3.3e-9, 30.0, 2.9, 0.05, 0.05, 0.02, 0.01),
        (680e-9, 10e-9, 36.0, 14.0, 0.08, 0.10, 0.01, 0.03),
    ] {
        let out = common::run(
            common::zvs_timing()
                .args(["point", "--json"])
                .args(["--lr", &lr.to_string(), "--cr", &cr.to_string()])
                .args(["--vin", &vin.to_string(), "--io", &io.to_string()])
                .args([
                    "--lr-tol",
                    &format!("{}%", lt * 100.0),
                    "--cr-tol",
                    &cr_pct(ct),
                ])
                .args(["--vin-gain", &ve.to_string(), "--io-gain", &ie.to_string()]),
        );
        let j = out.json();
        let (Some(o), Some(c)) = (
            j["robust_window_open_s"].as_f64(),
            j["robust_window_close_s"].as_f64(),
        ) else {
            panic!("no robust window at {lr} {cr} {vin} {io}: {j}");
        };
        for [a, b, v, i] in box_points(0x5eed, 400) {
            let tank = Tank::new(
                lr * (1.0 - lt + 2.0 * lt * a),
                cr * (1.0 - ct + 2.0 * ct * b),
            )
            .unwrap();
            let cell = CellPoint::new(
                vin * (1.0 - ve + 2.0 * ve * v),
                io * (1.0 - ie + 2.0 * ie * i),
            )
            .unwrap();
            let w = Transition::new(&tank, &cell).unwrap().window().unwrap();
            assert!(
                w.open_s <= o * (1.0 + 1e-12) && w.close_s >= c * (1.0 - 1e-12),
                "{w:?} vs [{o}, {c}]"
            );
        }
    }
    // A bad tolerance names its option.
    let out = common::run(common::zvs_timing().args([
        "point", "--lr", "1u", "--cr", "6.8n", "--vin", "48", "--io", "6", "--lr-tol", "80%",
    ]));
    assert_eq!(out.code, 2);
    assert!(out.stderr.contains("--lr-tol"));
}

/// The 16 corners of the unit 4-box and `n` interior points from a
/// seeded LCG (positions 0..1 along Lr, C, Vin, Io).
fn box_points(mut seed: u64, n: usize) -> Vec<[f64; 4]> {
    let mut next = || {
        seed = seed
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (seed >> 11) as f64 / (1u64 << 53) as f64
    };
    let mut points: Vec<[f64; 4]> = (0..16u32)
        .map(|k| [0, 1, 2, 3].map(|b| f64::from((k >> b) & 1)))
        .collect();
    points.extend((0..n).map(|_| [next(), next(), next(), next()]));
    points
}

fn cr_pct(f: f64) -> String {
    format!("{}%", f * 100.0)
}

/// The same for a tank with the demo's Coss curve and a lossy loop: the
/// robust window lies inside the ring's true window (each board's tank
/// scaled and solved afresh) at every corner and at sampled interior
/// points of the box, for held-out inputs.
#[test]
fn point_robust_window_of_a_real_tank_lies_inside_every_true_window() {
    use host_tool::tank::real_tank::RealTank;
    let csv = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables/winch_aux_coss.csv");
    let (curve, _) = host_tool::input::coss_csv::load(&csv).unwrap();
    for (cr, r, vin, io, lt, ct, ve, ie) in [
        (5.6e-9, 0.08, 44.0, 7.5, 0.05, 0.05, 0.01, 0.02),
        (2.2e-9, 0.25, 58.0, 9.0, 0.08, 0.04, 0.02, 0.03),
        (4.7e-9, 0.0, 38.0, 6.2, 0.03, 0.08, 0.01, 0.01),
    ] {
        let out = common::run(
            common::zvs_timing()
                .args(["point", "--json", "--lr", "1u", "--cr", &cr.to_string()])
                .arg("--coss")
                .arg(&csv)
                .args(["--r-tank", &r.to_string()])
                .args(["--vin", &vin.to_string(), "--io", &io.to_string()])
                .args(["--lr-tol", &cr_pct(lt), "--cr-tol", &cr_pct(ct)])
                .args(["--vin-gain", &ve.to_string(), "--io-gain", &ie.to_string()]),
        );
        let j = out.json();
        let (Some(o), Some(c)) = (
            j["robust_window_open_s"].as_f64(),
            j["robust_window_close_s"].as_f64(),
        ) else {
            panic!("no robust window at {cr} {r} {vin} {io}: {j}");
        };
        for [a, b, v, i] in box_points(0xc055, 150) {
            let k = 1.0 - ct + 2.0 * ct * b;
            let tank = RealTank {
                lr_h: 1e-6 * (1.0 - lt + 2.0 * lt * a),
                cr_fixed_f: cr * k,
                coss: curve
                    .iter()
                    .map(|p| timing_core::coss::CossPoint {
                        volts: p.volts,
                        farads: p.farads * k,
                    })
                    .collect(),
                r_tank_ohm: r,
            };
            let cell = timing_core::CellPoint::new(
                vin * (1.0 - ve + 2.0 * ve * v),
                io * (1.0 - ie + 2.0 * ie * i),
            )
            .unwrap();
            let t = tank.solver().unwrap().transition(&cell).unwrap();
            let w = t.turn_on.window().unwrap();
            assert!(
                w.open_s <= o && w.close_s >= c,
                "{w:?} vs [{o}, {c}] at {cell:?}"
            );
        }
    }
}

/// `--vin-offset-volts` and `--io-offset-amps` (absolute sensing errors: offset plus
/// peak noise) widen the box: the robust window still lies inside the true
/// window at every corner and sampled interior point of the wider box, is
/// narrower than without them, and a bad value names its option.
#[test]
fn point_absolute_sensing_errors_widen_the_box() {
    use timing_core::{CellPoint, Tank, Transition};
    let (lr, cr, vin, io, ve, ie, va, ia) = (1.5e-6, 4.7e-9, 42.0, 5.5, 0.01, 0.02, 0.4, 0.15);
    let robust = |extra: &[&str]| {
        let mut args = vec![
            "point",
            "--json",
            "--lr",
            "1.5u",
            "--cr",
            "4.7n",
            "--vin",
            "42",
            "--io",
            "5.5",
            "--lr-tol",
            "4%",
            "--cr-tol",
            "4%",
            "--vin-gain",
            "1%",
            "--io-gain",
            "2%",
        ];
        args.extend_from_slice(extra);
        let (code, out, err) = run(&args);
        assert_eq!(code, 0, "{err}");
        let j: serde_json::Value = serde_json::from_str(&out).unwrap();
        (
            j["robust_window_open_s"].as_f64().unwrap(),
            j["robust_window_close_s"].as_f64().unwrap(),
        )
    };
    let plain = robust(&[]);
    let (o, c) = robust(&["--vin-offset-volts", "0.4", "--io-offset-amps", "150m"]);
    assert!(o > plain.0 && c < plain.1, "[{o}, {c}] vs {plain:?}");
    for [a, b, v, i] in box_points(0x0ff5, 300) {
        let tank = Tank::new(lr * (0.96 + 0.08 * a), cr * (0.96 + 0.08 * b)).unwrap();
        let true_v = vin * (1.0 - ve + 2.0 * ve * v) - va + 2.0 * va * v;
        let true_i = io * (1.0 - ie + 2.0 * ie * i) - ia + 2.0 * ia * i;
        let w = Transition::new(&tank, &CellPoint::new(true_v, true_i).unwrap())
            .unwrap()
            .window()
            .unwrap();
        assert!(
            w.open_s <= o * (1.0 + 1e-12) && w.close_s >= c * (1.0 - 1e-12),
            "{w:?} vs [{o}, {c}]"
        );
    }
    let (code, _, err) = run(&[
        "point",
        "--lr",
        "1u",
        "--cr",
        "6.8n",
        "--vin",
        "48",
        "--io",
        "6",
        "--io-offset-amps",
        "-0.1",
    ]);
    assert_eq!(code, 2);
    assert!(
        err.contains("--io-offset-amps") && err.contains("-0.1"),
        "{err}"
    );
}

#[test]
fn point_on_a_cell_design_takes_the_file_and_shows_its_trim() {
    let design = concat!(env!("CARGO_MANIFEST_DIR"), "/../tables/winch_aux.toml");
    let (code, out, err) = run(&["point", "--design", design, "--vin", "48", "--io", "6"]);
    assert_eq!(code, 0, "{err}");
    // The design's own robust window (its [tolerance]) and the trim at the
    // point's region.
    for part in [
        "robust window",
        "CAUTION",
        "trim at this point: region",
        "1/2 of the way",
    ] {
        assert!(out.contains(part), "{part}: {out}");
    }
    // The point comes from --vin and --io, which a cell's design needs.
    let (code, _, err) = run(&["point", "--design", design, "--vin", "48"]);
    assert_ne!(code, 0);
    assert!(err.contains("--io"), "{err}");
}
