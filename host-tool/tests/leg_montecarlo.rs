//! Monte Carlo of the leg demo's committed edge tables: on boards drawn
//! within the design's tolerances, every cycle read where a robust window
//! a step wide exists turns on inside the board's true window (the
//! tables' promise), and the run reports each kind of cycle.

use host_tool::check::leg_montecarlo::run_edge;
use host_tool::input::leg_design::{edge_name, LegSpec, EDGES};
use timing_core::table::Entries;

#[test]
fn the_demo_tables_keep_their_promise_on_drawn_boards() {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables");
    let spec = LegSpec::load(&dir.join("lantern_leg.toml")).unwrap();
    for edge in EDGES {
        let bytes =
            std::fs::read(dir.join(format!("lantern_leg_{}.bin", edge_name(edge)))).unwrap();
        let (_, t) = timing_core::blob::open(&bytes, Some(spec.hash)).unwrap();
        let entries: Vec<u16> = (0..t.entries().count())
            .map(|k| t.entries().at(k))
            .collect();
        let table = timing_core::table::DelayTable::new(
            *t.sensing(),
            *t.layout(),
            t.frac_bits(),
            t.fallback(),
            entries.as_slice(),
        )
        .unwrap();
        let r = run_edge(&spec, edge, &table, 40, 100, 7).unwrap();
        println!("{r:?}");
        assert_eq!(r.model_errors, 0);
        assert!(r.robust_cycles > 1000);
        assert_eq!(r.robust_cycles_inside, r.robust_cycles);
        assert_eq!(r.inside + r.early + r.late, r.zvs_cycles);
        assert_eq!(
            r.zvs_cycles + r.narrow_cycles + r.short_cycles,
            u64::from(r.boards) * u64::from(r.cycles_per_board)
        );
    }
    let bad = run_edge(
        &LegSpec::parse(
            std::fs::read_to_string(dir.join("lantern_leg.toml"))
                .unwrap()
                .split("[tolerance]")
                .next()
                .unwrap(),
            dir.join("x.toml").to_str().unwrap(),
        )
        .unwrap(),
        EDGES[0],
        &timing_core::table::DelayTable::new(
            timing_core::leg_table::edge_sensing(
                timing_core::CodeRange { lo: 1, hi: 2 },
                timing_core::CodeRange { lo: 1, hi: 2 },
            ),
            timing_core::table::Layout::Margin(timing_core::table::MarginLayout {
                io_mul: 1,
                vin_mul: 0,
                offset: 0,
                step_shift: 1,
                cols: 2,
                vin_shift: 1,
                rows: 2,
            }),
            0,
            timing_core::table::Fallback::Valley,
            [0u16; 4].as_slice(),
        )
        .unwrap(),
        1,
        1,
        1,
    )
    .unwrap_err();
    assert!(bad.to_string().contains("[tolerance]"), "{bad}");
}
