//! Exhaustive verification: a runtime method (timing-core's table lookup or
//! one of its closed forms, the code the firmware runs) at every ADC code
//! pair of the design range against the exact f64 model. Rows of voltage
//! codes run in parallel on every core; the result does not depend on the
//! number of threads (rows are merged in order).
//!
//! A row is checked a chunk of current codes at a time: the model fills
//! the chunk's arrays ([`crate::model::exact_chunk::ExactChunk`]; for an ideal
//! tank the load grid answers it as a batch), each method answers the run
//! of codes in one call ([`DelayMethod::eval_run`]), and one pass checks
//! every pair. Where a grid's bound leaves a decision open, the ring
//! decides that pair and the chunk is checked again.
//!
//! For an ideal tank and a table indexed by the code ratio, a pair whose
//! codes both double another's has that pair's load, window and command,
//! so it is not evaluated again: the pair it doubles counts for it
//! ([`crate::check::doubling`]; about a quarter of a full-scale design's pairs).
//! Every pair of the range is still counted, and the count is asserted.

mod method;
mod rows;
#[cfg(test)]
mod tests;

use serde::Serialize;

pub use method::DelayMethod;
use rows::{check_row, Row};

use crate::check::doubling::Doubling;
use crate::model::design::Design;
use crate::model::exact::ExactModel;

/// What verification found.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VerifyReport {
    /// The method checked (`table`, `closed-form-f32`, `fixed-point`, `libm-f32`,
    /// `micromath-f32`).
    pub method: &'static str,
    /// Worst |commanded - exact| over all pairs, ticks (includes the
    /// rounding to whole ticks).
    pub max_error_ticks: f64,
    /// RMS error over all pairs, ticks.
    pub rms_error_ticks: f64,
    /// Voltage code of the worst pair.
    pub worst_vin_code: u16,
    /// Current code of the worst pair.
    pub worst_io_code: u16,
    /// Input voltage of the worst pair, volt.
    pub worst_vin_v: f64,
    /// Output current of the worst pair, ampere.
    pub worst_io_a: f64,
    /// Worst |delay before rounding - exact| over the pairs where the
    /// design's fallback does not override it, ticks: the approximation
    /// error of a closed-form method (`None` for tables, which hold whole
    /// entries).
    pub max_approximation_error_ticks: Option<f64>,
    /// Voltage and current codes of that worst approximation error.
    pub max_approximation_error_at: Option<(u16, u16)>,
    /// Code pairs checked: every pair of the design range, so always
    /// equal to `pairs_in_range` (a shorter count would be a failed check,
    /// not a smaller proof).
    pub points_checked: u64,
    /// Of those, the pairs where the model and the method were evaluated;
    /// each other pair doubles both codes of one of them and so has its
    /// verdict (an ideal tank and a table indexed by the code ratio; see
    /// [`crate::check::doubling`]). Equal to `points_checked` otherwise.
    pub pairs_evaluated: u64,
    /// Code pairs in the design range: voltage codes times current codes.
    pub pairs_in_range: u64,
    /// Pairs where ZVS is possible.
    pub zvs_points: u64,
    /// ZVS pairs whose commanded turn-on falls outside the true window.
    pub outside_window: u64,
    /// Of those, before the window opens.
    pub early: u64,
    /// Of those, after it closes.
    pub late: u64,
    /// ZVS pairs whose window is narrower than one tick (no tick can hit it).
    pub narrower_than_a_tick: u64,
    /// ZVS pairs whose window is a tick wide or more and whose commanded
    /// turn-on lies outside it: misses no rounding excuses.
    pub outside_window_wide: u64,
    /// Smallest margin of a commanded turn-on inside its window to the nearer
    /// edge, second (`None` when no turn-on is inside).
    pub min_margin_s: Option<f64>,
    /// ZVS pairs with a robust window a tick wide or more (the design's
    /// tolerances; 0 without a `[tolerance]` table).
    pub robust_points: u64,
    /// Of those, pairs whose commanded turn-on lies outside the robust
    /// window: some board within the tolerances may miss its window there.
    pub outside_robust_window: u64,
    /// The worst margin of a commanded turn-on to the nearer edge of its
    /// robust window over those pairs, second (negative: outside; `None`
    /// when there are none).
    pub min_robust_margin_s: Option<f64>,
    /// ZVS pairs where the tolerances leave no reliably hittable window
    /// (treated as ZVS-impossible: the fallback aim applies); 0 without a
    /// `[tolerance]` table.
    pub zvs_unreliable: u64,
    /// Largest normalised load J among the pairs whose turn-on missed the
    /// window (`None` when none did): how far above the ZVS boundary misses
    /// reach.
    pub outside_window_max_load: Option<f64>,
    /// Widest true window among the pairs whose turn-on missed it, ticks
    /// (`None` when none did): measured at each miss, not estimated.
    pub outside_window_max_width_ticks: Option<f64>,
    /// Largest delay the method commands, ticks (must fit the timer counter).
    pub max_commanded_ticks: u32,
    /// Voltage and current codes where it is commanded.
    pub max_commanded_at: (u16, u16),
    /// Pairs the model refused (should be 0).
    pub model_errors: u64,
    /// Threads the check ran on.
    pub threads: usize,
}

/// Check `method` against the exact model of `design` at every code pair
/// in the design range, on all cores; `progress` is called with the
/// fraction done (0..1) now and then.
pub fn verify(
    design: &Design,
    method: &dyn DelayMethod,
    progress: Option<&mut dyn FnMut(f64)>,
) -> VerifyReport {
    let mut all = verify_all(design, &[method], progress);
    all.swap_remove(0)
}

/// [`verify`] for several methods in one pass over the code pairs (the
/// exact model, the expensive part with a Coss curve, runs once per pair).
/// Reports in the order of `methods`.
pub fn verify_all(
    design: &Design,
    methods: &[&dyn DelayMethod],
    progress: Option<&mut dyn FnMut(f64)>,
) -> Vec<VerifyReport> {
    if methods.is_empty() {
        return Vec::new();
    }
    verify_rows(
        design,
        &ExactModel::new(design),
        methods,
        progress,
        &|_| {},
        true,
    )
}

/// [`verify_all`] against a given model of the design (generation passes
/// its own, which keeps every reading's robust window and aim).
pub fn verify_all_with(
    design: &Design,
    model: &ExactModel<'_>,
    methods: &[&dyn DelayMethod],
) -> Vec<VerifyReport> {
    if methods.is_empty() {
        return Vec::new();
    }
    verify_rows(design, model, methods, None, &|_| {}, true)
}

/// [`verify_all_with`], calling `progress` with the fraction done (0..1)
/// now and then.
pub fn verify_all_with_progress(
    design: &Design,
    model: &ExactModel<'_>,
    methods: &[&dyn DelayMethod],
    progress: &mut dyn FnMut(f64),
) -> Vec<VerifyReport> {
    if methods.is_empty() {
        return Vec::new();
    }
    verify_rows(design, model, methods, Some(progress), &|_| {}, true)
}

/// [`verify_all`] with `each_row` called in the worker before each row of
/// voltage codes (tests inject a fault there: a panicking worker must fail
/// the verification, never shorten it); doubled pairs take their halves'
/// verdicts when `share` (tests compare with every pair evaluated).
fn verify_rows(
    design: &Design,
    model: &ExactModel<'_>,
    methods: &[&dyn DelayMethod],
    progress: Option<&mut dyn FnMut(f64)>,
    each_row: &(dyn Fn(u16) + Sync),
    share: bool,
) -> Vec<VerifyReport> {
    let v = design.vin_codes;
    let doubling = Doubling::plan(
        design,
        model,
        share && methods.iter().all(|m| m.same_at_doubled_codes()),
    );
    let rows = crate::par::map_rows_with_progress(
        v.len() as usize,
        |k| {
            let cv = v.lo + k as u16;
            each_row(cv);
            check_row(design, model, methods, doubling.as_ref(), cv)
        },
        progress,
    );
    let threads = crate::par::threads();
    methods
        .iter()
        .enumerate()
        .map(|(m, method)| merge(design, method.name(), &rows, m, threads))
        .collect()
}

/// The report of method number `m` from the rows.
fn merge(
    design: &Design,
    name: &'static str,
    rows: &[Vec<Row>],
    m: usize,
    threads: usize,
) -> VerifyReport {
    let (v, i) = (design.vin_codes, design.io_codes);
    let mut r = VerifyReport {
        method: name,
        max_error_ticks: 0.0,
        rms_error_ticks: 0.0,
        worst_vin_code: v.lo,
        worst_io_code: i.lo,
        worst_vin_v: 0.0,
        worst_io_a: 0.0,
        max_approximation_error_ticks: None,
        max_approximation_error_at: None,
        points_checked: 0,
        pairs_evaluated: 0,
        pairs_in_range: u64::from(v.len()) * u64::from(i.len()),
        zvs_points: 0,
        outside_window: 0,
        early: 0,
        late: 0,
        narrower_than_a_tick: 0,
        outside_window_wide: 0,
        min_margin_s: None,
        robust_points: 0,
        outside_robust_window: 0,
        min_robust_margin_s: None,
        zvs_unreliable: 0,
        outside_window_max_load: None,
        outside_window_max_width_ticks: None,
        max_commanded_ticks: 0,
        max_commanded_at: (v.lo, i.lo),
        model_errors: 0,
        threads,
    };
    let mut sum_sq = 0.0f64;
    let empty = Row::default();
    for (k, per_method) in rows.iter().enumerate() {
        let row = per_method.get(m).unwrap_or(&empty);
        let cv = v.lo + k as u16;
        r.points_checked += row.points;
        r.pairs_evaluated += row.evaluated;
        sum_sq += row.sum_sq;
        if row.max_err > r.max_error_ticks {
            r.max_error_ticks = row.max_err;
            r.worst_vin_code = cv;
            r.worst_io_code = row.worst_ci;
        }
        if let Some((e, ci)) = row.approx {
            if r.max_approximation_error_ticks.is_none_or(|w| e > w) {
                r.max_approximation_error_ticks = Some(e);
                r.max_approximation_error_at = Some((cv, ci));
            }
        }
        if row.max_cmd > r.max_commanded_ticks {
            r.max_commanded_ticks = row.max_cmd;
            r.max_commanded_at = (cv, row.max_cmd_ci);
        }
        r.zvs_points += row.zvs;
        r.early += row.early;
        r.late += row.late;
        r.narrower_than_a_tick += row.narrow;
        r.outside_window_wide += row.wide_out;
        r.model_errors += row.model_errors;
        if let Some(m) = row.min_margin {
            r.min_margin_s = Some(r.min_margin_s.map_or(m, |x| x.min(m)));
        }
        r.robust_points += row.robust;
        r.outside_robust_window += row.robust_out;
        r.zvs_unreliable += row.unreliable;
        if let Some(m) = row.robust_margin {
            r.min_robust_margin_s = Some(r.min_robust_margin_s.map_or(m, |x| x.min(m)));
        }
        if let Some(j) = row.miss_load {
            r.outside_window_max_load = Some(r.outside_window_max_load.map_or(j, |x| x.max(j)));
        }
        if let Some(w) = row.miss_width {
            r.outside_window_max_width_ticks =
                Some(r.outside_window_max_width_ticks.map_or(w, |x| x.max(w)));
        }
    }
    r.outside_window = r.early + r.late;
    r.rms_error_ticks = (sum_sq / r.points_checked.max(1) as f64).sqrt();
    r.worst_vin_v = design.vin_of(r.worst_vin_code);
    r.worst_io_a = design.io_of(r.worst_io_code);
    r
}
