//! Monte Carlo over boards and cycles: how often a runtime method (the
//! flash table or a closed form) turns the switch on inside the *true*
//! window of a board whose parts and sensing differ from the design's
//! nominal ones.
//!
//! Each board draws, uniformly within the design's `[tolerance]`
//! half-widths, its Lr, its switch capacitance (the external capacitor and
//! the Coss curve scale together), and the gain and offset errors of both
//! ADC channels. Each cycle draws a true operating point uniformly over the
//! design range, the sensing noise of both channels and the timer jitter;
//! the method commands a delay from the sensed codes, and the board's own
//! model (timing-core's closed forms or ring with the drawn parts) says
//! whether the turn-on falls inside its window. Uniform draws within the
//! tolerance bands put more weight at the band edges than a normal
//! distribution would (our choice: a tolerance is a band, not a spread).

use rand::{Rng, SeedableRng};
use serde::Serialize;

use crate::check::verify::DelayMethod;
use crate::input::design::Tolerance;
use crate::model::design::Design;

/// What the run found.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MonteCarloReport {
    /// Method checked.
    pub method: &'static str,
    /// Boards drawn.
    pub boards: u32,
    /// Cycles per board.
    pub cycles_per_board: u32,
    /// Random seed.
    pub seed: u64,
    /// The tolerances used.
    pub tolerance: Tolerance,
    /// Cycles whose true operating point allows ZVS on its board.
    pub zvs_cycles: u64,
    /// Of those, turn-ons inside the true window.
    pub inside: u64,
    /// Turn-ons before the window opened.
    pub early: u64,
    /// Turn-ons after the window closed.
    pub late: u64,
    /// ZVS cycles whose reading has a robust window a tick wide (the
    /// design's tolerances leave every board in the reading's box a common
    /// window there, which the tables aim into).
    pub robust_cycles: u64,
    /// Of those, turn-ons inside the true window: equal to `robust_cycles`
    /// when the method keeps the tables' promise.
    pub robust_cycles_inside: u64,
    /// `inside / zvs_cycles`.
    pub inside_fraction: f64,
    /// The worst board's inside fraction.
    pub worst_board_inside_fraction: f64,
    /// Cycles below the true ZVS boundary (valley territory).
    pub valley_cycles: u64,
    /// Cycles whose board model refused the point (should be 0).
    pub model_errors: u64,
}

/// A value drawn uniformly within `half` either side of zero (0 for no
/// spread): every board's and cycle's draw within a tolerance.
pub(crate) fn spread(rng: &mut rand::rngs::StdRng, half: f64) -> f64 {
    if half > 0.0 {
        rng.random_range(-half..=half)
    } else {
        0.0
    }
}

/// Board `b`'s own generator, seeded from the run's seed and its number,
/// so the draws do not depend on the threads.
pub(crate) fn board_rng(seed: u64, b: usize) -> rand::rngs::StdRng {
    rand::rngs::StdRng::seed_from_u64(seed ^ (b as u64 + 1).wrapping_mul(0x9E37_79B9_7F4A_7C15))
}

/// The ADC code a channel converts `x` to on a board: `x*(1 + gain)/lsb +
/// zero + offset + noise` (`err`: gain, offset and noise; offset and noise
/// in codes), rounded and kept within `0..=max_code`.
pub(crate) fn sensed_code(x: f64, lsb: f64, zero: f64, err: [f64; 3], max_code: f64) -> u16 {
    let [gain, offset, noise] = err;
    (x * (1.0 + gain) / lsb + zero + offset + noise)
        .round()
        .clamp(0.0, max_code) as u16
}

/// One board's counts.
#[derive(Debug, Default)]
struct Board {
    zvs: u64,
    inside: u64,
    early: u64,
    late: u64,
    robust: u64,
    robust_inside: u64,
    valley: u64,
    model_errors: u64,
}

/// Why a run could not start.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum MonteCarloError {
    /// The design has no `[tolerance]` table.
    #[error("the design has no [tolerance] table: add lr, cr, vin_gain, io_gain, vin_offset_codes, io_offset_codes, noise_codes or jitter")]
    NoTolerance,
    /// The design's robust windows could not be built.
    #[error("the robust windows of the tolerances: {0}")]
    Model(String),
    /// A count of zero.
    #[error("{what} must be at least 1")]
    Zero {
        /// `--boards` or `--cycles`.
        what: &'static str,
    },
}

/// Run `boards` x `cycles` draws of `method` on `design` with `seed`;
/// `progress` gets the fraction of boards done.
///
/// # Errors
/// [`MonteCarloError`].
pub fn run(
    design: &Design,
    method: &dyn DelayMethod,
    boards: u32,
    cycles: u32,
    seed: u64,
    progress: Option<&mut dyn FnMut(f64)>,
) -> Result<MonteCarloReport, MonteCarloError> {
    let tol = design.tolerance.ok_or(MonteCarloError::NoTolerance)?;
    if boards == 0 {
        return Err(MonteCarloError::Zero { what: "--boards" });
    }
    if cycles == 0 {
        return Err(MonteCarloError::Zero { what: "--cycles" });
    }
    let aim = design
        .robust_aim()
        .map_err(|e| MonteCarloError::Model(e.to_string()))?;
    let max_code = f64::from((1u32 << design.adc_bits) - 1);
    let timer = &design.timer;
    let mut r = MonteCarloReport {
        method: method.name(),
        boards,
        cycles_per_board: cycles,
        seed,
        tolerance: tol,
        zvs_cycles: 0,
        inside: 0,
        robust_cycles: 0,
        robust_cycles_inside: 0,
        early: 0,
        late: 0,
        inside_fraction: 0.0,
        worst_board_inside_fraction: 1.0,
        valley_cycles: 0,
        model_errors: 0,
    };
    // Boards on all cores, each with its own generator seeded from the
    // run's seed and its number, so the draws do not depend on the
    // threads.
    let per_board = crate::par::map_rows_with_progress(
        boards as usize,
        |b| {
            let mut rng = board_rng(seed, b);
            let mut o = Board::default();
            let (dl, dc) = (spread(&mut rng, tol.lr_rel), spread(&mut rng, tol.cr_rel));
            let (gv, gi) = (
                spread(&mut rng, tol.vin_gain_rel),
                spread(&mut rng, tol.io_gain_rel),
            );
            let (ov, oi) = (
                spread(&mut rng, tol.vin_offset_codes),
                spread(&mut rng, tol.io_offset_codes),
            );
            let real = design.real.scaled(1.0 + dl, 1.0 + dc);
            let Ok(solver) = real.solver() else {
                o.model_errors += u64::from(cycles);
                return o;
            };
            for _ in 0..cycles {
                let vin = rng.random_range(design.vin_v.0..=design.vin_v.1);
                let io = rng.random_range(design.io_a.0..=design.io_a.1);
                let (nv, ni) = (
                    spread(&mut rng, tol.noise_codes),
                    spread(&mut rng, tol.noise_codes),
                );
                let jitter = spread(&mut rng, tol.jitter_s);
                let vin_code =
                    sensed_code(vin, design.vin_volts_per_code, 0.0, [gv, ov, nv], max_code);
                let io_code = sensed_code(
                    io,
                    design.io_amps_per_code,
                    f64::from(design.io_zero_code),
                    [gi, oi, ni],
                    max_code,
                );
                let Ok(t) = design.cell(vin, io).and_then(|c| solver.transition(&c)) else {
                    o.model_errors += 1;
                    continue;
                };
                let Some(w) = t.turn_on.window() else {
                    o.valley += 1;
                    continue;
                };
                o.zvs += 1;
                let (ticks, _) = method.eval(vin_code, io_code);
                let on = timer.turn_on_s(timing_core::Ticks::new(ticks)) + jitter;
                let inside = on >= w.open_s && on <= w.close_s;
                if on < w.open_s {
                    o.early += 1;
                } else if on > w.close_s {
                    o.late += 1;
                } else {
                    o.inside += 1;
                }
                let robust = aim.as_ref().is_some_and(|a| {
                    a.window(design, design.vin_of(vin_code), design.io_of(io_code))
                        .is_some()
                });
                if robust {
                    o.robust += 1;
                    if inside {
                        o.robust_inside += 1;
                    }
                }
            }
            o
        },
        progress,
    );
    for o in per_board {
        r.zvs_cycles += o.zvs;
        r.inside += o.inside;
        r.early += o.early;
        r.late += o.late;
        r.robust_cycles += o.robust;
        r.robust_cycles_inside += o.robust_inside;
        r.valley_cycles += o.valley;
        r.model_errors += o.model_errors;
        if o.zvs > 0 {
            r.worst_board_inside_fraction = r
                .worst_board_inside_fraction
                .min(o.inside as f64 / o.zvs as f64);
        }
    }
    r.inside_fraction = if r.zvs_cycles > 0 {
        r.inside as f64 / r.zvs_cycles as f64
    } else {
        0.0
    };
    Ok(r)
}
