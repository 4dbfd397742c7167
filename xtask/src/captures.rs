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
use timing_core::coss::CossPoint;

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
        let deck = CellDeck {
            topology: design.topology,
            lr_h: design.real.lr_h * lr,
            cr_f: design.real.cr_fixed_f * cr,
            coss: design
                .real
                .coss
                .iter()
                .map(|p| CossPoint {
                    volts: p.volts,
                    farads: p.farads * coss,
                })
                .collect(),
            r_tank_ohm: design.real.r_tank_ohm * r,
            vin_v: vin,
            vout_v: design.vout_v.unwrap_or(0.0),
            inductor_current_a: cell.i_amp(),
            t_off_s: 100e-9,
            turn_on_s: None,
            duration_s: 1.3e-6,
            max_step_s: (design.real.lr_h * design.real.cr_fixed_f).sqrt() / 2000.0,
            average_over_s: None,
        };
        let trace = deck.trace(50e-12).map_err(|e| e.to_string())?;
        let top = trace.switch_v.iter().copied().fold(0.0, f64::max);
        let range_v = Scope::range_for(top);
        let csv = Scope {
            rate_hz: rate,
            samples: (1.2e-6 * rate) as usize,
            pre_trigger_s: 100e-9,
            bits: 8,
            range_v,
            noise_v: 0.004 * (range_v.1 - range_v.0),
            jitter_s: 10e-12,
            seed: 100 + k as u64,
        }
        .record(&trace, delay);
        let path = dir.join(format!("board_{vin}V_{io}A.csv"));
        std::fs::write(&path, csv).map_err(|e| format!("{}: {e}", path.display()))?;
        eprintln!("xtask: wrote {}", path.display());
    }
    Ok(())
}
