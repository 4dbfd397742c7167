//! `cargo xtask demo-captures`: the demo's bring-up captures in
//! `tables/bringup/`, simulated by ngspice from an invented board of the
//! demo design (its parts off the design by the amounts in [`BOARD`]) and
//! recorded as an 8-bit scope would (`host_tool::sim::scope`). Invented
//! data for the demo of `zvs-timing fit`; ngspice's output may differ by
//! version in the last digits, so CI does not compare them byte for byte.

use std::path::Path;

use host_tool::model::design::Design;
use host_tool::sim::scope::Scope;
use host_tool::sim::spice::CellDeck;

/// The invented board: Lr, fixed C, Coss and loop-resistance factors,
/// and the drivers' turn-off delay (second).
pub const BOARD: (f64, f64, f64, f64, f64) = (1.08, 0.94, 1.1, 1.6, 38e-9);

/// Captures at reduced voltage: (Vin, Io, sample rate).
const POINTS: [(f64, f64, f64); 3] = [(24.0, 5.0, 1e9), (30.0, 7.0, 2e9), (30.0, 2.0, 1e9)];

pub fn demo_captures(root: &Path) -> Result<(), String> {
    let design = Design::load(&root.join("tables/winch_aux.toml")).map_err(|e| e.to_string())?;
    let dir = root.join("tables/bringup");
    std::fs::create_dir_all(&dir).map_err(|e| format!("{}: {e}", dir.display()))?;
    let (lr, cr, coss, r, delay) = BOARD;
    for (k, &(vin, io, rate)) in POINTS.iter().enumerate() {
        let cell = design.cell(vin, io).map_err(|e| e.to_string())?;
        let board = design.real.board(lr, cr, coss, design.real.r_tank_ohm * r);
        let deck = CellDeck::single_pulse(
            design.topology,
            &board,
            (vin, design.vout_v.unwrap_or(0.0), cell.i_amp()),
            100e-9,
            1.3e-6,
        );
        let trace = deck.trace(50e-12).map_err(|e| e.to_string())?;
        let csv = Scope::eight_bit(&trace, (rate, 1.2e-6, 100e-9), 0.004, 100 + k as u64)
            .record(&trace, delay);
        let path = dir.join(format!("board_{vin}V_{io}A.csv"));
        std::fs::write(&path, csv).map_err(|e| format!("{}: {e}", path.display()))?;
        eprintln!("xtask: wrote {}", path.display());
    }
    Ok(())
}
