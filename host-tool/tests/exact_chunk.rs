//! The batched model a row of code pairs is checked against
//! (`ExactRow::fill`, with the load grid answering a batch at a time for
//! an ideal tank) gives, slot for slot, what the model gives at each code
//! pair alone (`ExactRow::at_code`): the same numbers to the bit, the same
//! refusals. Designs: the benchmark's ideal tank over both 12-bit scales
//! (the load grid's path, across the ZVS boundary and down to zero current)
//! and the demo, whose Coss curve, lossy loop and tolerances take the
//! per-pair path.

use host_tool::model::design::Design;
use host_tool::model::exact::ExactModel;
use host_tool::model::exact_chunk::{ExactChunk, CHUNK};

fn design(path: &str) -> Design {
    Design::load(&std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join(path)).unwrap()
}

/// Every slot of every chunk of the rows `rows` against `at_code`, the
/// chunks taking every `step`-th current code. Returns the pairs compared,
/// those with ZVS and those the grid answered (a bound above 0).
fn check(d: &Design, rows: &[u16], step: u16) -> (u64, u64, u64) {
    let model = ExactModel::new(d);
    let i = d.io_codes;
    let mut chunk = ExactChunk::new();
    let (mut pairs, mut zvs, mut grid) = (0u64, 0u64, 0u64);
    for &cv in rows {
        let row = model.row_at_code(cv);
        let mut first = u32::from(i.lo);
        while first <= u32::from(i.hi) {
            let left = (u32::from(i.hi) - first) / u32::from(step) + 1;
            let n = left.min(CHUNK as u32) as usize;
            row.fill(first as u16, step, n, &mut chunk);
            assert_eq!(chunk.n, n);
            for k in 0..n {
                let ci = first as u16 + step * k as u16;
                let mut one = ExactChunk::new();
                one.set(0, row.at_code(ci));
                let at = format!("codes ({cv}, {ci})");
                assert_eq!(chunk.ok[k], one.ok[0], "{at}: refusal");
                if !one.ok[0] {
                    continue;
                }
                assert_eq!(
                    chunk.ticks[k].to_bits(),
                    one.ticks[0].to_bits(),
                    "{at}: aim"
                );
                assert_eq!(chunk.nominal[k].to_bits(), one.nominal[0].to_bits(), "{at}");
                assert_eq!(chunk.zvs[k], one.zvs[0], "{at}: ZVS");
                assert_eq!(chunk.robust[k], one.robust[0], "{at}: robust window");
                assert_eq!(chunk.eps[k].to_bits(), one.eps[0].to_bits(), "{at}: bound");
                if one.zvs[0] {
                    zvs += 1;
                    assert_eq!(chunk.open[k].to_bits(), one.open[0].to_bits(), "{at}");
                    assert_eq!(chunk.close[k].to_bits(), one.close[0].to_bits(), "{at}");
                }
                if one.robust[0] {
                    assert_eq!(chunk.r_open[k].to_bits(), one.r_open[0].to_bits(), "{at}");
                    assert_eq!(chunk.r_close[k].to_bits(), one.r_close[0].to_bits(), "{at}");
                }
                pairs += 1;
                grid += u64::from(one.eps[0] > 0.0);
            }
            first += n as u32 * u32::from(step);
        }
    }
    (pairs, zvs, grid)
}

#[test]
fn the_ideal_tanks_batches_are_the_pairs_answers() {
    let d = design("benches/full_scale.toml");
    let v = d.vin_codes;
    // Low, middle and high voltages: rows that cross the boundary early,
    // in the middle and late.
    let rows = [v.lo, v.lo + 1, v.lo + 7, 1000, 2600, v.hi - 1, v.hi];
    let (pairs, zvs, grid) = check(&d, &rows, 1);
    // Every other code, as verification takes the rows whose even codes
    // are doublings (host_tool::check::doubling).
    let odd = check(&d, &rows[2..5], 2);
    assert!(odd.0 > 0);
    println!("{pairs} pairs compared, {zvs} of them ZVS, {grid} answered by the grid");
    assert!(zvs > 0 && zvs < pairs, "both sides of the boundary");
    assert!(
        grid * 10 > pairs * 9,
        "the load grid's path is the one tested"
    );
}

#[test]
fn the_demos_batches_are_the_pairs_answers() {
    let d = design("../tables/winch_aux.toml");
    let v = d.vin_codes;
    let (pairs, zvs, grid) = check(&d, &[v.lo, (v.lo + v.hi) / 2, v.hi], 1);
    println!("{pairs} pairs compared, {zvs} of them ZVS, {grid} answered by a grid");
    assert!(zvs > 0 && zvs < pairs, "both sides of the boundary");
}
