//! How long the exhaustive work on a design will take, estimated before it
//! starts: the code pairs (or boards and cycles) over the speed measured on
//! this project's 2-core machine. A rough figure for a warning and a
//! limit, never a result: a faster machine takes less.
//!
//! Speeds, measured with `/usr/bin/time` on the release build (two cores):
//! the demo (Coss curve, lossy loop, tolerances, 2.75 M pairs) generates
//! and proves its table in 3.0 s (0.9 M pairs/s) and verifies in 1.9 s
//! (1.4 M pairs/s); the ideal full-scale benchmark (16.7 M pairs) generates
//! in 2.7 s (6 M pairs/s) and verifies in 0.26 s (64 M pairs/s); Monte
//! Carlo of the demo, 200 boards x 500 cycles, takes 3.1 s (32 k cycles/s).

use crate::model::design::Design;

/// Work longer than this (second) needs the user's go-ahead
/// (`--allow-long`): a run the user did not expect to take minutes is
/// refused with its estimate instead of hanging silently.
pub const LIMIT_S: f64 = 300.0;

/// Code pairs of the design range.
#[must_use]
pub fn pairs(design: &Design) -> u64 {
    u64::from(design.vin_codes.len()) * u64::from(design.io_codes.len())
}

/// Whether the model answers from the ideal tank's closed forms (no Coss
/// curve, no loss, no tolerances): the fast case.
fn ideal(design: &Design) -> bool {
    design.real.is_ideal() && design.tolerance.is_none()
}

/// Estimated seconds to generate and prove the design's table.
#[must_use]
pub fn table_s(design: &Design) -> f64 {
    pairs(design) as f64 / if ideal(design) { 6.0e6 } else { 0.9e6 }
}

/// Estimated seconds to verify a method at every code pair.
#[must_use]
pub fn verify_s(design: &Design) -> f64 {
    pairs(design) as f64 / if design.real.is_ideal() { 6.0e7 } else { 1.4e6 }
}

/// Estimated seconds for Monte Carlo over `boards` x `cycles`.
#[must_use]
pub fn montecarlo_s(boards: u64, cycles: u64) -> f64 {
    boards as f64 * cycles as f64 / 3.2e4
}

/// A duration as people say it: seconds, minutes or hours.
#[must_use]
pub fn spoken(seconds: f64) -> String {
    if seconds < 90.0 {
        format!("{seconds:.0} s")
    } else if seconds < 5400.0 {
        format!("{:.0} min", seconds / 60.0)
    } else {
        format!("{:.1} h", seconds / 3600.0)
    }
}
