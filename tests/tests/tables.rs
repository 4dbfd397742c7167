//! Flash tables: the committed demo outputs are fresh, the C header computes
//! exactly what timing-core's lookup computes (compiled with gcc), corrupt
//! blobs are refused, and a design not used during development meets its
//! budget within 2 KiB.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use std::path::PathBuf;
use std::process::Command;

use cross_checks::{repo, require_program};
use host_tool::model::design::Design;
use host_tool::{emit::export, generate};
use timing_core::table::{DelayTable, Entries, TableError};
use timing_core::AdcCode;

fn scratch(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("zvs-timing-tables-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// The shared held-out boost design (cross_checks::HELD_OUT_BOOST).
const HELD_OUT: &str = cross_checks::HELD_OUT_BOOST;

#[test]
fn committed_demo_tables_are_fresh() {
    let dir = scratch("fresh");
    let design = Design::load(&repo().join("tables/winch_aux.toml")).unwrap();
    let out = generate::generate(&design).unwrap();
    export::write_all(&dir, &design, &out.table, &out.verification).unwrap();
    for file in [
        "winch_aux.rs",
        "winch_aux.h",
        "winch_aux.bin",
        "winch_aux.csv",
        "winch_aux_closed_form.rs",
        "winch_aux_closed_form.h",
    ] {
        let fresh = std::fs::read(dir.join(file)).unwrap();
        let committed = std::fs::read(repo().join("tables").join(file)).unwrap();
        assert!(
            fresh == committed,
            "tables/{file} is stale: regenerate with `cargo run --release -p host-tool -- table tables/winch_aux.toml --out tables`"
        );
    }
    // The build.rs path writes the same Rust source.
    let via_build =
        export::rust_source_for_design_file(&repo().join("tables/winch_aux.toml")).unwrap();
    assert_eq!(
        via_build.as_bytes(),
        std::fs::read(repo().join("tables/winch_aux.rs")).unwrap()
    );
}

#[test]
fn demo_table_meets_its_budget_in_2_kib() {
    // The demo with its Coss curve (the log-volt layout follows the curve's
    // voltage dependence), and the same tank with a constant capacitance:
    // both within 1 tick.
    let real = Design::load(&repo().join("tables/winch_aux.toml")).unwrap();
    for (design, budget) in [(real, 1.0), (cross_checks::ideal_demo(), 1.0)] {
        let out = generate::generate(&design).unwrap();
        println!(
            "{}: {} B, {:.3} ticks",
            design.model_summary(),
            out.table.table_bytes(),
            out.verification.max_error_ticks
        );
        assert!(
            out.table.table_bytes() <= 2048,
            "{} bytes",
            out.table.table_bytes()
        );
        assert!(out.verification.max_error_ticks <= budget);
        let pairs = u64::from(design.vin_codes.len()) * u64::from(design.io_codes.len());
        assert_eq!(out.verification.points_checked, pairs);
        assert_eq!(out.verification.model_errors, 0);
        // Every ZVS pair is either aimed inside its robust window or
        // treated as ZVS-impossible under the tolerances; without a
        // [tolerance] table neither is counted.
        let v = &out.verification;
        if design.tolerance.is_some() {
            assert_eq!(v.robust_points + v.zvs_unreliable, v.zvs_points);
            // The promise: every command inside the robust window where one
            // a tick wide exists, and inside the nominal window wherever
            // that is a tick wide (misses only where no tick fits).
            assert!(v.robust_points > v.zvs_points / 2);
            assert_eq!(v.outside_robust_window, 0);
            assert_eq!(v.outside_window_wide, 0);
            assert!(v.min_robust_margin_s.is_some_and(|m| m >= 0.0));
            assert!(v.outside_window <= v.narrower_than_a_tick);
        } else {
            assert_eq!((v.robust_points, v.zvs_unreliable), (0, 0));
        }
    }
}

#[test]
fn held_out_design_meets_its_budget() {
    let design = Design::parse(HELD_OUT, "held_out.toml").unwrap();
    let out = generate::generate(&design).unwrap();
    println!(
        "held-out: {} layout, {} bytes, max error {:.3} ticks over {} pairs",
        out.table.layout_name(),
        out.table.table_bytes(),
        out.verification.max_error_ticks,
        out.verification.points_checked
    );
    assert!(out.table.table_bytes() <= 2048);
    assert!(out.verification.max_error_ticks <= 1.0);
    // Independent recount: every pair of the range, table against the model.
    let t = out.table.table().unwrap();
    let model = host_tool::model::exact::ExactModel::new(&design);
    let mut worst = 0.0f64;
    for cv in design.vin_codes.lo..=design.vin_codes.hi {
        let row = model.row_at_code(cv);
        for ci in design.io_codes.lo..=design.io_codes.hi {
            let exact = row.at_code(ci).unwrap().ticks;
            let got = f64::from(t.delay(AdcCode::new(cv), AdcCode::new(ci)).ticks.get());
            worst = worst.max((got - exact).abs());
        }
    }
    assert!((worst - out.verification.max_error_ticks).abs() < 1e-12);
}

/// Compile a harness around `header` and compare `<name>_delay_ticks` with
/// the Rust lookup on every pair of a strided grid that spans beyond the
/// design range (clamping) and on every pair near the ZVS boundary.
fn compare_c_with_rust<E: Entries>(
    name: &str,
    header: &str,
    table: &DelayTable<E>,
    design: &Design,
) -> usize {
    let dir = scratch(name);
    std::fs::write(dir.join("table.h"), header).unwrap();
    let harness = format!(
        "#include <stdio.h>\n#include \"table.h\"\nint main(void) {{\n  unsigned v, i;\n  while (scanf(\"%u %u\", &v, &i) == 2) printf(\"%u %d\\n\", (unsigned){name}_delay_ticks((uint16_t)v, (uint16_t)i), {name}_zvs((uint16_t)v, (uint16_t)i));\n  return 0;\n}}\n"
    );
    std::fs::write(dir.join("main.c"), harness).unwrap();
    let exe = dir.join("harness");
    let cc = Command::new("gcc")
        .args(["-std=c99", "-Wall", "-Wextra", "-Werror", "-O2", "-o"])
        .arg(&exe)
        .arg(dir.join("main.c"))
        .output()
        .unwrap();
    assert!(
        cc.status.success(),
        "gcc failed:\n{}",
        String::from_utf8_lossy(&cc.stderr)
    );
    let max = (1u32 << design.adc_bits) - 1;
    let mut pairs = Vec::new();
    let (v, i) = (design.vin_codes, design.io_codes);
    let span = |lo: u16, hi: u16| -> Vec<u32> {
        let (a, b) = (
            u32::from(lo).saturating_sub(40),
            (u32::from(hi) + 40).min(max),
        );
        (a..=b)
            .step_by(7)
            .chain([0, max, u32::from(lo), u32::from(hi)])
            .collect()
    };
    for cv in span(v.lo, v.hi) {
        for ci in span(i.lo, i.hi) {
            pairs.push((cv, ci));
        }
    }
    let mut input = String::new();
    for (a, b) in &pairs {
        input.push_str(&format!("{a} {b}\n"));
    }
    // Input from a file, so neither side can block on a full pipe.
    std::fs::write(dir.join("pairs.txt"), input).unwrap();
    let out = Command::new(&exe)
        .stdin(std::fs::File::open(dir.join("pairs.txt")).unwrap())
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    let mut n = 0;
    for ((cv, ci), line) in pairs.iter().zip(text.lines()) {
        let mut it = line.split_whitespace();
        let c_ticks: u32 = it.next().unwrap().parse().unwrap();
        let c_zvs: i32 = it.next().unwrap().parse().unwrap();
        let r = table.delay(AdcCode::new(*cv as u16), AdcCode::new(*ci as u16));
        assert_eq!(
            c_ticks,
            r.ticks.get(),
            "C and Rust differ at vin code {cv}, io code {ci}"
        );
        assert_eq!(c_zvs == 1, r.zvs, "ZVS test differs at {cv}, {ci}");
        n += 1;
    }
    assert_eq!(
        n,
        pairs.len(),
        "harness printed {} of {} lines",
        n,
        pairs.len()
    );
    n
}

#[test]
fn c_header_matches_the_rust_lookup() {
    if !require_program(
        "gcc",
        Command::new("gcc").arg("--version").output().is_ok(),
        "apt-get install gcc",
    ) {
        return;
    }
    // The demo (log-volt layout), the held-out design, and the held-out
    // design forced to the margin and the ratio-volt layouts, to the grid
    // layout with a fixed fallback, to the log-spaced and the uniform ratio
    // layouts, and to the reciprocal-ratio layout (every C branch).
    let demo = Design::load(&repo().join("tables/winch_aux.toml")).unwrap();
    let grid_text = HELD_OUT
        .replace("name = \"held_out_boost\"", "name = \"held_out_grid\"")
        // A loose budget: this design exists to exercise the grid and fixed-fallback
        // code paths of the header, not to be accurate.
        .replace(
            "max_error_ticks = 1.0",
            "max_error_ticks = 200.0\nlayout = \"grid\"\nfallback = \"fixed\"\nfallback_ticks = 90",
        );
    let ratio_text = HELD_OUT
        .replace("name = \"held_out_boost\"", "name = \"held_out_ratio\"")
        .replace(
            "max_error_ticks = 1.0",
            "max_error_ticks = 1.0\nlayout = \"ratio\"",
        );
    let log_text = HELD_OUT
        .replace("name = \"held_out_boost\"", "name = \"held_out_log\"")
        .replace(
            "max_error_ticks = 1.0",
            "max_error_ticks = 1.0\nlayout = \"log-ratio\"",
        );
    let recip_text = HELD_OUT
        .replace("name = \"held_out_boost\"", "name = \"held_out_recip\"")
        .replace(
            "max_error_ticks = 1.0",
            "max_error_ticks = 1.0\nlayout = \"recip-ratio\"",
        );
    let forced = |name: &str, layout: &str| {
        HELD_OUT
            .replace(
                "name = \"held_out_boost\"",
                &format!("name = \"held_out_{name}\""),
            )
            .replace(
                "max_error_ticks = 1.0",
                &format!("max_error_ticks = 1.0\nlayout = \"{layout}\""),
            )
    };
    let designs = [
        demo,
        Design::parse(&forced("margin", "margin"), "margin.toml").unwrap(),
        Design::parse(&forced("ratio_volt", "ratio-volt"), "ratio_volt.toml").unwrap(),
        Design::parse(&recip_text, "recip.toml").unwrap(),
        Design::parse(&log_text, "log.toml").unwrap(),
        Design::parse(HELD_OUT, "held_out.toml").unwrap(),
        Design::parse(&grid_text, "grid.toml").unwrap(),
        Design::parse(&ratio_text, "ratio.toml").unwrap(),
    ];
    for d in &designs {
        let out = generate::generate(d).unwrap();
        let header = export::c_header(d, &out.table, &out.verification);
        let n = compare_c_with_rust(&d.name, &header, &out.table.table().unwrap(), d);
        println!(
            "{}: C and Rust agree on {n} code pairs ({} layout)",
            d.name,
            out.table.layout_name()
        );
    }
}

/// A design spanning decades of Vin/Io (10-60 V, 0.5-20 A, full-scale
/// 12-bit sensing), where uniform nodes would be wasted: a log-spaced
/// layout keeps it near 2 KiB.
const WIDE: &str = r#"
name = "wide_range"
lr = "1.2u"
cr = "8.2n"
vin = [10, 60]
io = [0.5, 20]
[adc]
bits = 12
vin_volts_per_code = 0.014653
io_amps_per_code = 0.0048845
[timer]
clock_hz = "170M"
driver_delay = "25n"
"#;

#[test]
fn a_wide_range_design_is_served_by_the_log_layout() {
    let design = Design::parse(WIDE, "wide.toml").unwrap();
    let out = generate::generate(&design).unwrap();
    println!(
        "wide: {} layout, {} bytes, max error {:.3} ticks over {} pairs",
        out.table.layout_name(),
        out.table.table_bytes(),
        out.verification.max_error_ticks,
        out.verification.points_checked
    );
    assert!(out.verification.max_error_ticks <= 1.0);
    assert!(
        out.table.layout_name().starts_with("log-"),
        "{}",
        out.table.layout_name()
    );
    assert!(out.table.table_bytes() <= 2200);
}

#[test]
fn every_flipped_byte_of_the_blob_is_refused() {
    let blob = std::fs::read(repo().join("tables/winch_aux.bin")).unwrap();
    let design = Design::load(&repo().join("tables/winch_aux.toml")).unwrap();
    let (_, good) = timing_core::blob::open(&blob, Some(design.hash)).unwrap();
    assert!(good.entry_bytes() > 0);
    for k in 0..blob.len() {
        for bit in [0x01u8, 0x80] {
            let mut bad = blob.clone();
            bad[k] ^= bit;
            match timing_core::blob::open(&bad, Some(design.hash)) {
                Err(e) => {
                    let msg = e.to_string();
                    assert!(!msg.is_empty());
                    if k >= blob.len() - good.entry_bytes() {
                        // Flips in the entries are payload flips: CRC mismatch.
                        assert!(matches!(e, TableError::CrcMismatch { .. }), "byte {k}: {e}");
                        assert!(msg.contains("corrupt"), "{msg}");
                    }
                }
                Ok(_) => panic!(
                    "a flipped bit {bit:#04x} in byte {k} of {} was accepted",
                    blob.len()
                ),
            }
        }
    }
    // Truncation and another design are refused with their own messages.
    assert!(matches!(
        timing_core::blob::open(&blob[..blob.len() - 1], None),
        Err(TableError::Truncated)
    ));
    let other = timing_core::blob::open(&blob, Some(design.hash ^ 1)).unwrap_err();
    assert!(other.to_string().contains("another design"), "{other}");
}

/// Blob version policy: a reader opens only its own format version and
/// names both versions when it refuses (each version added layouts an
/// older reader cannot decode, version 2 log-volt and version 3 ratio-volt
/// and margin; an older blob may hold a table a newer reader would misread
/// if it guessed).
#[test]
fn a_blob_of_another_format_version_is_refused_by_name() {
    let mut blob = std::fs::read(repo().join("tables/winch_aux.bin")).unwrap();
    // The header is postcard: the 4-byte magic, then the version as a
    // one-byte varint (values below 128).
    assert_eq!(
        blob[4],
        u8::try_from(timing_core::blob::FORMAT_VERSION).unwrap()
    );
    let v = u8::try_from(timing_core::blob::FORMAT_VERSION).unwrap();
    for old in [1u8, v - 1, v + 1] {
        blob[4] = old;
        let e = timing_core::blob::open(&blob, None).unwrap_err();
        assert_eq!(
            e,
            TableError::UnsupportedVersion {
                found: u16::from(old)
            }
        );
        let m = e.to_string();
        assert!(
            m.contains(&format!("version {old}"))
                && m.contains(&format!("version {}", timing_core::blob::FORMAT_VERSION)),
            "{m}"
        );
        // Which way to go: update the reader or regenerate the blob.
        assert!(m.contains(if old > v { "newer" } else { "older" }), "{m}");
    }
    // A newer writer may change the header itself: the version, read
    // first, still names it (here a header cut short after the version, and
    // one with a multi-byte version number).
    for newer in [vec![v + 1], vec![0x80 | 0x2c, 0x01, 0xff, 0xff]] {
        let mut b = timing_core::blob::MAGIC.to_vec();
        b.extend_from_slice(&newer);
        let found = match timing_core::blob::open(&b, None).unwrap_err() {
            TableError::UnsupportedVersion { found } => found,
            other => panic!("{other:?}"),
        };
        assert!(found > timing_core::blob::FORMAT_VERSION, "{found}");
    }
}

#[test]
fn the_version_policy_holds_for_a_blob_of_every_layout() {
    // The held-out boost forced to each table layout (a loose budget: the
    // check is of the format, not the accuracy); each blob opens with
    // today's version and is refused by name with an older or a newer one.
    let v = u8::try_from(timing_core::blob::FORMAT_VERSION).unwrap();
    let mut seen = Vec::new();
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
        let text = HELD_OUT
            .replace(
                "name = \"held_out_boost\"",
                &format!("name = \"held_out_{}\"", layout.replace('-', "_")),
            )
            .replace(
                "max_error_ticks = 1.0",
                &format!("max_error_ticks = 200.0\nlayout = \"{layout}\""),
            );
        let d = Design::parse(&text, "layout.toml").unwrap();
        let out = generate::generate(&d).unwrap();
        let mut blob = export::blob(&d, &out.table).unwrap();
        let (_, t) = timing_core::blob::open(&blob, Some(d.hash)).unwrap();
        assert!(t.entry_bytes() > 0);
        assert_eq!(blob[4], v, "{layout}: the version follows the magic");
        for other in [v - 1, v + 1] {
            blob[4] = other;
            assert_eq!(
                timing_core::blob::open(&blob, Some(d.hash)).unwrap_err(),
                TableError::UnsupportedVersion {
                    found: u16::from(other)
                },
                "{layout}"
            );
        }
        seen.push(out.table.layout_name());
    }
    println!("version policy checked on blobs of the layouts {seen:?}");
    seen.sort_unstable();
    seen.dedup();
    assert_eq!(seen.len(), 8, "{seen:?}");
}
