//! `zvs-timing montecarlo`: reproducible with a seed, as good as the
//! exhaustive verification allows when nothing varies, worse as the
//! tolerances widen, and a plain error without a `[tolerance]` table.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

mod common;

use std::path::Path;

use host_tool::check::montecarlo::{run, MonteCarloError};
use host_tool::model::design::Design;

fn demo_text() -> String {
    std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables/winch_aux.toml"))
        .unwrap()
}

const ORIGIN: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/../tables/variant.toml");

fn with_tolerance(block: &str) -> Design {
    let text = demo_text();
    let base = &text[..text.find("[tolerance]").unwrap()];
    Design::parse(&format!("{base}[tolerance]\n{block}\n"), ORIGIN).unwrap()
}

#[test]
fn monte_carlo_runs() {
    // The committed demo table (opened without its design hash: the
    // variants below change the design text).
    let blob = std::fs::read(Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables/winch_aux.bin"))
        .unwrap();
    let (_, table) = timing_core::blob::open(&blob, None).unwrap();
    let demo = Design::parse(&demo_text(), ORIGIN).unwrap();

    let a = run(&demo, &table, 40, 200, 7, None).unwrap();
    let b = run(&demo, &table, 40, 200, 7, None).unwrap();
    let c = run(&demo, &table, 40, 200, 8, None).unwrap();
    assert_eq!(a, b, "the same seed gives the same draws");
    assert_ne!(a.inside, c.inside);
    assert_eq!(a.zvs_cycles + a.valley_cycles, 40 * 200);
    assert_eq!(a.inside + a.early + a.late, a.zvs_cycles);
    assert_eq!(a.model_errors, 0);
    // The tables' promise under the demo's own tolerances: every cycle
    // whose reading has a robust window a tick wide lands inside its true
    // window (every board and operating point the draws can produce lies
    // in the box behind the reading).
    println!(
        "demo: {} of {} ZVS cycles inside; {} of {} robust cycles",
        a.inside, a.zvs_cycles, a.robust_cycles_inside, a.robust_cycles
    );
    assert!(a.robust_cycles > a.zvs_cycles / 2, "{a:?}");
    assert_eq!(a.robust_cycles_inside, a.robust_cycles, "{a:?}");
    assert!(a.inside_fraction > 0.969, "{a:?}");

    // Nothing varies: misses only where exhaustive verification finds them
    // (0.37 % of the ZVS pairs, all just above the boundary) and from the
    // sensed codes' rounding.
    let none = with_tolerance("lr = 0");
    let n = run(&none, &table, 20, 500, 1, None).unwrap();
    println!("no tolerance: {:.4} inside", n.inside_fraction);
    assert!(n.inside_fraction > 0.99, "{n:?}");

    // Wider tolerances cost windows.
    let narrow = with_tolerance("cr = \"2%\"\nlr = \"2%\"");
    let wide = with_tolerance("cr = \"15%\"\nlr = \"15%\"");
    let (rn, rw) = (
        run(&narrow, &table, 60, 300, 3, None).unwrap(),
        run(&wide, &table, 60, 300, 3, None).unwrap(),
    );
    println!(
        "2 %: {:.4} inside (worst board {:.4}); 15 %: {:.4} (worst board {:.4})",
        rn.inside_fraction,
        rn.worst_board_inside_fraction,
        rw.inside_fraction,
        rw.worst_board_inside_fraction
    );
    assert!(
        rw.inside_fraction < rn.inside_fraction - 0.05,
        "{rn:?} {rw:?}"
    );
    assert!(rw.worst_board_inside_fraction < rn.worst_board_inside_fraction);

    // No [tolerance]: a plain error.
    let text = demo_text();
    let bare = Design::parse(&text[..text.find("[tolerance]").unwrap()], ORIGIN).unwrap();
    let e = run(&bare, &table, 1, 1, 1, None).unwrap_err();
    assert_eq!(e, MonteCarloError::NoTolerance);
    assert!(e.to_string().contains("[tolerance]"));
    assert_eq!(
        run(&demo, &table, 0, 1, 1, None).unwrap_err(),
        MonteCarloError::Zero { what: "--boards" }
    );
    // A bad tolerance is refused when the design is read.
    let m = match Design::parse(
        &format!(
            "{}[tolerance]\ncr = \"70%\"\n",
            &text[..text.find("[tolerance]").unwrap()]
        ),
        ORIGIN,
    ) {
        Err(host_tool::input::design::DesignError::Invalid { problem, .. }) => problem.to_string(),
        other => panic!("{other:?}"),
    };
    assert!(m.contains("tolerance.cr = 0.7"), "{m}");
}

#[test]
fn the_command_reports_in_json_and_names_missing_inputs() {
    let out = common::run(
        common::zvs_timing()
            .args([
                "montecarlo",
                "tables/winch_aux.toml",
                "--table",
                "tables/winch_aux.bin",
            ])
            .args(["--boards", "5", "--cycles", "50", "--seed", "3", "--json"]),
    );
    let j = out.json();
    assert_eq!(j["boards"], 5);
    assert_eq!(j["seed"], 3);
    assert!(j["inside_fraction"].as_f64().unwrap() > 0.8);
    assert!(j["caution"].as_str().unwrap().contains("lethal"));
    let out = common::run(common::zvs_timing().args(["montecarlo", "tables/winch_aux.toml"]));
    assert_eq!(out.code, 2);
    assert!(out.stderr.contains("--table"));
}
