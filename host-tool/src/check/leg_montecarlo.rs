//! Monte Carlo for a half-bridge leg: how often each edge's table turns
//! the incoming switch on inside the *true* window of a board whose parts
//! and sensing differ from the design's.
//!
//! Each board draws, uniformly within the design's `[tolerance]`
//! half-widths, its transition inductance, its whole node capacitance
//! (both curves and the added capacitor together), its far end's voltage,
//! and the gain and offset errors of both ADC channels. Each cycle draws a
//! true bus voltage and a true current uniformly over the edge's design
//! range, the sensing noise of both channels and the timer jitter; the
//! table commands a dead time from the sensed codes, and the board's own
//! leg (timing-core's `leg` with the drawn parts) says whether the turn-on
//! falls inside its window.

use rand::Rng;
use serde::Serialize;
use timing_core::leg::{Edge, EdgeTurnOn};
use timing_core::table::DelayTable;
use timing_core::AdcCode;

use crate::check::montecarlo::{board_rng, sensed_code, spread};
use crate::input::leg_design::{edge_index, LegSpec, LegTolerance};
use crate::model::leg_model::LegModel;

/// What the run found for one edge.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EdgeRun {
    /// `falling` or `rising`.
    pub edge: &'static str,
    /// Boards drawn.
    pub boards: u32,
    /// Cycles per board.
    pub cycles_per_board: u32,
    /// Cycles whose true window is a step wide or more.
    pub zvs_cycles: u64,
    /// Of those, turn-ons inside it.
    pub inside: u64,
    /// Before it opened.
    pub early: u64,
    /// After it closed.
    pub late: u64,
    /// Cycles whose reading has a robust window a step wide (the tables aim
    /// into it; every board of the box shares it).
    pub robust_cycles: u64,
    /// Of those, turn-ons inside the board's true window: equal to
    /// `robust_cycles` when the table keeps its promise.
    pub robust_cycles_inside: u64,
    /// Cycles whose true window is narrower than a step.
    pub narrow_cycles: u64,
    /// Cycles whose board's swing stops short (the fallback's).
    pub short_cycles: u64,
    /// `inside / zvs_cycles`.
    pub inside_fraction: f64,
    /// Cycles whose board model refused the point (should be 0).
    pub model_errors: u64,
}

/// A leg's run: the tolerances and each edge given.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LegMonteCarloReport {
    /// Random seed.
    pub seed: u64,
    /// The tolerances used.
    pub tolerance: LegTolerance,
    /// One entry per edge checked.
    pub edges: Vec<EdgeRun>,
}

/// Why a run could not start.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum LegMonteCarloError {
    /// The design has no `[tolerance]` table.
    #[error("the leg's design has no [tolerance] table: add l, c, far_end, vbus_gain, current_gain, vbus_offset_codes, current_offset_codes, noise_codes or jitter")]
    NoTolerance,
    /// The model refused the design (not expected for a validated one).
    #[error("the leg's model: {0}")]
    Model(String),
    /// A count of zero.
    #[error("{what} must be at least 1")]
    Zero {
        /// `--boards` or `--cycles`.
        what: &'static str,
    },
}

/// Run `boards` x `cycles` draws of `table` on `edge` of `spec` with `seed`.
///
/// # Errors
/// [`LegMonteCarloError`].
pub fn run_edge(
    spec: &LegSpec,
    edge: Edge,
    table: &DelayTable<&[u16]>,
    boards: u32,
    cycles: u32,
    seed: u64,
) -> Result<EdgeRun, LegMonteCarloError> {
    let tol = spec.tolerance.ok_or(LegMonteCarloError::NoTolerance)?;
    for (what, n) in [("--boards", boards), ("--cycles", cycles)] {
        if n == 0 {
            return Err(LegMonteCarloError::Zero { what });
        }
    }
    let model = LegModel::new(spec, edge).map_err(|e| LegMonteCarloError::Model(e.to_string()))?;
    let timer = spec.timer.edge_timer(edge);
    let step_hz = timer.clock_hz();
    let max_code = f64::from((1u32 << spec.adc_bits) - 1);
    let range = spec.current_a[edge_index(edge)];
    let per_board = crate::par::map_rows(boards as usize, |b| {
        let mut rng = board_rng(seed, b);
        let mut o = [0u64; 9];
        let (dl, dc, df) = (
            spread(&mut rng, tol.l_rel),
            spread(&mut rng, tol.c_rel),
            spread(&mut rng, tol.far_rel),
        );
        let (gv, gi) = (
            spread(&mut rng, tol.vbus_gain_rel),
            spread(&mut rng, tol.current_gain_rel),
        );
        let (ov, oi) = (
            spread(&mut rng, tol.vbus_offset_codes),
            spread(&mut rng, tol.current_offset_codes),
        );
        let board = spec.built.board(1.0 + dl, 1.0 + dc, spec.built.r_ohm);
        let Ok(leg) = board.leg() else {
            o[8] += u64::from(cycles);
            return o;
        };
        for _ in 0..cycles {
            let vbus = rng.random_range(spec.vbus_v.0..=spec.vbus_v.1);
            let current = rng.random_range(range.0..=range.1);
            let (nv, ni) = (
                spread(&mut rng, tol.noise_codes),
                spread(&mut rng, tol.noise_codes),
            );
            let jitter = spread(&mut rng, tol.jitter_s);
            let bus_code = sensed_code(vbus, spec.vbus_volts_per_code, 0.0, [gv, ov, nv], max_code);
            let current_code = sensed_code(
                current,
                spec.current_amps_per_code,
                f64::from(spec.current_zero_code),
                [gi, oi, ni],
                max_code,
            );
            let steps = table
                .delay(AdcCode::new(bus_code), AdcCode::new(current_code))
                .ticks;
            let on = timer.turn_on_s(steps) + jitter;
            let far = board.far_v(vbus, 1.0 + df);
            let Ok(t) = board.edge(
                &leg,
                edge,
                vbus,
                crate::tank::leg_grid::node_current(edge, current),
                far,
            ) else {
                o[8] += 1;
                continue;
            };
            match t.turn_on {
                EdgeTurnOn::Short(_) => o[7] += 1,
                EdgeTurnOn::Zvs(w) if (w.close_s - w.open_s) * step_hz < 1.0 => o[6] += 1,
                EdgeTurnOn::Zvs(w) => {
                    o[0] += 1;
                    let inside = on >= w.open_s && on <= w.close_s;
                    if inside {
                        o[1] += 1;
                    } else if on < w.open_s {
                        o[2] += 1;
                    } else {
                        o[3] += 1;
                    }
                    let robust = model
                        .at_codes(bus_code, current_code)
                        .ok()
                        .and_then(|p| p.robust)
                        .is_some_and(|r| r.1 - r.0 >= 1.0);
                    if robust {
                        o[4] += 1;
                        if inside {
                            o[5] += 1;
                        }
                    }
                }
            }
        }
        o
    });
    let mut s = [0u64; 9];
    for b in per_board {
        for (a, x) in s.iter_mut().zip(b) {
            *a += x;
        }
    }
    Ok(EdgeRun {
        edge: crate::input::leg_design::edge_name(edge),
        boards,
        cycles_per_board: cycles,
        zvs_cycles: s[0],
        inside: s[1],
        early: s[2],
        late: s[3],
        robust_cycles: s[4],
        robust_cycles_inside: s[5],
        narrow_cycles: s[6],
        short_cycles: s[7],
        inside_fraction: if s[0] > 0 {
            s[1] as f64 / s[0] as f64
        } else {
            1.0
        },
        model_errors: s[8],
    })
}
