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

use serde::Serialize;
use timing_core::closed_form::{FastF32, FixedPoint, LibmF32};
use timing_core::table::{DelayTable, Entries};
use timing_core::{AdcCode, Ticks};

use crate::check::doubling::{whole_row, Doubling};
use crate::model::design::Design;
use crate::model::exact::ExactModel;
use crate::model::exact_chunk::{ExactChunk, CHUNK};

/// A runtime delay method: what the interrupt would command at a code pair.
pub trait DelayMethod: Sync {
    /// Method name as the CLI and the firmware print it.
    fn name(&self) -> &'static str;
    /// Commanded ticks, and the delay before rounding (ticks) for methods
    /// that compute one (the closed forms).
    fn eval(&self, vin: u16, io: u16) -> (u32, Option<f64>);

    /// Whether [`DelayMethod::eval`] commands the same delay at codes
    /// (`2v`, `z + 2c`) as at (`v`, `z + c`) wherever both pairs are in the
    /// design range (see [`crate::check::doubling`]). Only when this holds by
    /// construction; `false` unless a method says otherwise.
    fn same_at_doubled_codes(&self) -> bool {
        false
    }

    /// [`DelayMethod::eval`] at voltage code `vin` and the current codes
    /// `first`, `first + step`, ... (one a slot of `ticks`), into `ticks`
    /// and `raw`; returns whether the method computes a delay before
    /// rounding (then `raw` holds it; else `raw` is left alone). The same
    /// answers as `eval`, one dynamic call a run instead of one a pair
    /// (this default is compiled for each method, so `eval` is inlined
    /// into its loop).
    fn eval_run(
        &self,
        vin: u16,
        first: u16,
        step: u16,
        ticks: &mut [Ticks],
        raw: &mut [f64],
    ) -> bool {
        let mut has_raw = false;
        for (k, (t, r)) in ticks.iter_mut().zip(raw.iter_mut()).enumerate() {
            let (got, x) = self.eval(vin, first.wrapping_add(step.wrapping_mul(k as u16)));
            *t = Ticks::new(got);
            if let Some(x) = x {
                *r = x;
                has_raw = true;
            }
        }
        has_raw
    }
}

impl<E: Entries + Sync> DelayMethod for DelayTable<E> {
    fn name(&self) -> &'static str {
        "table"
    }
    fn eval(&self, vin: u16, io: u16) -> (u32, Option<f64>) {
        (
            self.delay(AdcCode::new(vin), AdcCode::new(io)).ticks.get(),
            None,
        )
    }
    fn same_at_doubled_codes(&self) -> bool {
        DelayTable::same_at_doubled_codes(self)
    }
    fn eval_run(
        &self,
        vin: u16,
        first: u16,
        step: u16,
        ticks: &mut [Ticks],
        _raw: &mut [f64],
    ) -> bool {
        self.delays_along_io(AdcCode::new(vin), AdcCode::new(first), step, ticks);
        false
    }
}

impl DelayMethod for FastF32 {
    fn name(&self) -> &'static str {
        "closed-form-f32"
    }
    fn eval(&self, vin: u16, io: u16) -> (u32, Option<f64>) {
        let (v, i) = (AdcCode::new(vin), AdcCode::new(io));
        let (raw, _) = self.raw_ticks(v, i);
        (self.delay(v, i).ticks.get(), Some(f64::from(raw)))
    }
}

impl DelayMethod for FixedPoint {
    fn name(&self) -> &'static str {
        "fixed-point"
    }
    fn eval(&self, vin: u16, io: u16) -> (u32, Option<f64>) {
        let (v, i) = (AdcCode::new(vin), AdcCode::new(io));
        let (raw, _) = self.raw_ticks_q8(v, i);
        (self.delay(v, i).ticks.get(), Some(f64::from(raw) / 256.0))
    }
}

impl DelayMethod for LibmF32 {
    fn name(&self) -> &'static str {
        "libm-f32"
    }
    fn eval(&self, vin: u16, io: u16) -> (u32, Option<f64>) {
        let (v, i) = (AdcCode::new(vin), AdcCode::new(io));
        let (raw, _) = self.raw_ticks(v, i);
        (self.delay(v, i).ticks.get(), Some(f64::from(raw)))
    }
}

/// What verification found.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VerifyReport {
    /// The method checked (`table`, `closed-form-f32`, `fixed-point`, `libm-f32`).
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

/// One row of voltage codes.
#[derive(Debug, Clone, Default)]
struct Row {
    max_err: f64,
    worst_ci: u16,
    sum_sq: f64,
    approx: Option<(f64, u16)>,
    points: u64,
    evaluated: u64,
    zvs: u64,
    early: u64,
    late: u64,
    narrow: u64,
    wide_out: u64,
    min_margin: Option<f64>,
    robust: u64,
    robust_out: u64,
    robust_margin: Option<f64>,
    unreliable: u64,
    miss_load: Option<f64>,
    miss_width: Option<f64>,
    max_cmd: u32,
    max_cmd_ci: u16,
    model_errors: u64,
}

/// The ring's window at a pair (open and close, second; `None` below the
/// boundary), `None` where the ring refused.
type RingAnswer = Option<Option<(f64, f64)>>;

/// A method's answers over a chunk.
struct Commands {
    /// Commanded ticks.
    got: [Ticks; CHUNK],
    /// The delay before rounding, ticks, where `has_raw`.
    raw: [f64; CHUNK],
    has_raw: bool,
    /// The model's grid answered and the turn-on lies within its bound of
    /// a decision ([`undecided`]).
    undecided: [bool; CHUNK],
    /// Scratch for the checks: each pair's error (ticks) and command
    /// (0 where the model refused).
    err: [f64; CHUNK],
    cmd_ok: [u32; CHUNK],
}

impl Commands {
    fn new() -> Box<Self> {
        Box::new(Self {
            got: [Ticks::new(0); CHUNK],
            raw: [0.0; CHUNK],
            has_raw: false,
            undecided: [false; CHUNK],
            err: [0.0; CHUNK],
            cmd_ok: [0; CHUNK],
        })
    }
}

/// One row for every method: the exact model is evaluated once per pair.
fn check_row(
    design: &Design,
    model: &ExactModel<'_>,
    methods: &[&dyn DelayMethod],
    doubling: Option<&Doubling>,
    cv: u16,
) -> Vec<Row> {
    let i = design.io_codes;
    let mut rows = vec![
        Row {
            worst_ci: i.lo,
            max_cmd_ci: i.lo,
            ..Row::default()
        };
        methods.len()
    ];
    let row = model.row_at_code(cv);
    // Each worker keeps its buffers from row to row (clearing 40 kB a row
    // is a few per cent of an ideal verification).
    thread_local! {
        static BUFFERS: std::cell::RefCell<Option<(Box<ExactChunk>, Box<Commands>)>> =
            const { std::cell::RefCell::new(None) };
    }
    let (mut chunk, mut cmd) = BUFFERS
        .take()
        .unwrap_or_else(|| (ExactChunk::new(), Commands::new()));
    let runs = doubling.map_or_else(|| vec![whole_row(i)], |d| d.runs(cv));
    let chunks = runs.iter().flat_map(|r| {
        (0..r.n).step_by(CHUNK).map(move |k| {
            let first = r.first.wrapping_add(r.step.wrapping_mul(k as u16));
            (first, r.step, (r.n - k).min(CHUNK), r.weight)
        })
    });
    for (first, step, n, weight) in chunks {
        let code = |k: usize| first.wrapping_add(step.wrapping_mul(k as u16));
        let at = Place {
            cv,
            first,
            step,
            weight,
        };
        row.fill(first, step, n, &mut chunk);
        // The ring's window, computed at most once a pair, where some
        // method needs it.
        let mut ring: Vec<(usize, RingAnswer)> = Vec::new();
        for (m, r) in methods.iter().zip(rows.iter_mut()) {
            cmd.has_raw = m.eval_run(cv, first, step, &mut cmd.got[..n], &mut cmd.raw[..n]);
            // The checks, which also find the pairs the model's grid cannot
            // decide: where there are none (nearly always), their sums
            // stand.
            let mut tentative = r.clone();
            if !check_chunk(design, at, &chunk, &mut cmd, &mut tentative) {
                *r = tentative;
                continue;
            }
            // Where the model's grid answered and this method's turn-on
            // lies within the grid's bound of a decision (a window edge, a
            // window a tick wide), the ring decides for this method; the
            // aim stays the model's. A copy of the chunk with the ring's
            // windows in those slots is checked instead (their bound is 0,
            // so none is undecided the second time).
            let mut decided = chunk.clone();
            for k in (0..n).filter(|&k| cmd.undecided[k]) {
                let w = match ring.iter().find(|(kk, _)| *kk == k) {
                    Some(&(_, w)) => w,
                    None => {
                        let ci = code(k);
                        let w = model
                            .ring_window(design.vin_of(cv), design.io_of(ci))
                            .ok()
                            .map(|w| w.map(|w| (w.open_s, w.close_s)));
                        ring.push((k, w));
                        w
                    }
                };
                match w {
                    None => decided.ok[k] = false,
                    Some(w) => {
                        decided.ok[k] &= w.is_none_or(|(a, b)| a.is_finite() && b.is_finite());
                        decided.zvs[k] = w.is_some();
                        (decided.open[k], decided.close[k]) = w.unwrap_or((0.0, 0.0));
                        decided.eps[k] = 0.0;
                    }
                }
            }
            check_chunk(design, at, &decided, &mut cmd, r);
        }
    }
    BUFFERS.set(Some((chunk, cmd)));
    rows
}

/// Whether a turn-on at `on` (second) is within the model's bound of a
/// decision at slot `k`: an edge of its window, or a window width of one
/// tick. Only where the model answered from a grid (a bound above 0).
#[inline(always)]
fn undecided(ch: &ExactChunk, k: usize, on: f64, clock: f64, tick_s: f64) -> bool {
    if k >= CHUNK {
        return false;
    }
    let (e, open, close) = (ch.eps[k], ch.open[k], ch.close[k]);
    let eps = e * tick_s;
    // Without short cuts: no branch a pair.
    ch.ok[k]
        & ch.zvs[k]
        & (e > 0.0)
        & (((on - open).abs() <= eps)
            | ((on - close).abs() <= eps)
            | (((close - open) * clock - 1.0).abs() <= 2.0 * e))
}

/// Where a chunk lies: voltage code `cv`, current codes `first`,
/// `first + step`, ..., each standing for `weight` pairs of the range
/// ([`crate::check::doubling::Run`]).
#[derive(Debug, Clone, Copy)]
struct Place {
    cv: u16,
    first: u16,
    step: u16,
    weight: u64,
}

/// Add a chunk of a row (at `at`) to `r`: the method commanded `cmd`, the
/// model said `ch`; the counts and the sum of squares count each pair
/// `at.weight` times. One pass over the chunk
/// for the error and the window, then short ones for the rest. Marks in
/// `cmd.undecided` the pairs whose decision lies within the model's bound
/// ([`undecided`]) and returns whether there are any: the sums then need
/// the ring there.
// Several arrays are read at each slot, so the loops count slots.
#[allow(clippy::needless_range_loop)]
fn check_chunk(
    design: &Design,
    at: Place,
    ch: &ExactChunk,
    cmd: &mut Commands,
    r: &mut Row,
) -> bool {
    let n = ch.n;
    let clock = design.timer.clock_hz();
    let tick_s = 1.0 / clock;
    let lead = design.timer.lead_s();
    let ok = &ch.ok[..n];
    let got = &cmd.got[..n];
    let (err, cmd_ok, undecided_at) = (&mut cmd.err, &mut cmd.cmd_ok, &mut cmd.undecided);
    let (weight, weight_f) = (at.weight, at.weight as f64);
    r.points += n as u64 * weight;
    r.evaluated += n as u64;
    // Refusals, the largest command, the error of the command from the aim
    // (the chunk's largest values first, a refused pair counting as 0;
    // only where one beats the row's so far, the first pair that has it);
    // and the window: hits, misses, margins.
    let mut refused = 0u64;
    // Four partial sums, so the additions need not wait on each other.
    let mut sum_sq = [0.0f64; 4];
    let (mut zvs, mut narrow, mut early, mut late, mut wide_out) = (0u64, 0u64, 0u64, 0u64, 0u64);
    let mut min_margin = f64::INFINITY;
    let (mut miss_width, mut miss_load) = (f64::NEG_INFINITY, f64::NEG_INFINITY);
    // J = Io*Z0/Vin for every cell.
    let (z0, vin) = (design.tank.z0_ohm(), design.vin_of(at.cv));
    let ci = |k: usize| at.first.wrapping_add(at.step.wrapping_mul(k as u16));
    let mut any_undecided = false;
    // Every number below is finite (a refusal otherwise), so plain
    // comparisons pick minima and maxima.
    for k in 0..n {
        let g = got[k].get();
        let e = (f64::from(g) - ch.ticks[k]).abs();
        err[k] = if ok[k] { e } else { 0.0 };
        cmd_ok[k] = if ok[k] { g } else { 0 };
        refused += u64::from(!ok[k]);
        sum_sq[k % 4] += err[k] * err[k];
        undecided_at[k] = false;
        if !(ok[k] && ch.zvs[k]) {
            continue;
        }
        // A multiplication, not a division: this runs at every pair (the
        // two differ by an ulp, far inside the model's bound).
        let on = f64::from(g) * tick_s + lead;
        let u = undecided(ch, k, on, clock, tick_s);
        undecided_at[k] = u;
        any_undecided |= u;
        let (open_s, close_s) = (ch.open[k], ch.close[k]);
        let width = (close_s - open_s) * clock;
        zvs += 1;
        narrow += u64::from(width < 1.0);
        let (after_open, before_close) = (on - open_s, close_s - on);
        if after_open < 0.0 || before_close < 0.0 {
            early += u64::from(after_open < 0.0);
            late += u64::from(after_open >= 0.0);
            wide_out += u64::from(width >= 1.0);
            if width > miss_width {
                miss_width = width;
            }
            let j = design.io_of(ci(k)) * z0 / vin;
            if j > miss_load {
                miss_load = j;
            }
        } else {
            let nearer = if after_open < before_close {
                after_open
            } else {
                before_close
            };
            let mg = nearer - ch.eps[k] * tick_s;
            if mg < min_margin {
                min_margin = mg;
            }
        }
    }
    r.zvs += zvs * weight;
    r.narrow += narrow * weight;
    r.early += early * weight;
    r.late += late * weight;
    r.wide_out += wide_out * weight;
    if zvs > early + late {
        r.min_margin = Some(r.min_margin.map_or(min_margin, |x: f64| x.min(min_margin)));
    }
    if early + late > 0 {
        r.miss_width = Some(r.miss_width.map_or(miss_width, |x: f64| x.max(miss_width)));
        r.miss_load = Some(r.miss_load.map_or(miss_load, |x: f64| x.max(miss_load)));
    }
    let chunk_err = err[..n]
        .iter()
        .fold(0.0f64, |m, &e| if e > m { e } else { m });
    let chunk_cmd = cmd_ok[..n].iter().fold(0u32, |m, &c| m.max(c));
    r.model_errors += refused * weight;
    r.sum_sq += weight_f * ((sum_sq[0] + sum_sq[1]) + (sum_sq[2] + sum_sq[3]));
    if chunk_cmd > r.max_cmd {
        if let Some(k) = cmd_ok[..n].iter().position(|&c| c == chunk_cmd) {
            (r.max_cmd, r.max_cmd_ci) = (chunk_cmd, ci(k));
        }
    }
    if chunk_err > r.max_err {
        if let Some(k) = err[..n].iter().position(|&e| e == chunk_err) {
            (r.max_err, r.worst_ci) = (chunk_err, ci(k));
        }
    }
    // The approximation error where the method's own delay is commanded
    // (everywhere with the valley fallback; inside the ZVS region with a
    // fixed one), with the model's bound added: its upper bound.
    if cmd.has_raw {
        let fixed = matches!(design.fallback, timing_core::table::Fallback::Fixed(_));
        let mut worst = r.approx;
        for k in 0..n {
            if ok[k] && (!fixed || ch.zvs[k]) {
                let e = (cmd.raw[k] - ch.nominal[k]).abs() + ch.eps[k];
                if worst.is_none_or(|(w, _)| e > w) {
                    worst = Some((e, ci(k)));
                }
            }
        }
        r.approx = worst;
    }
    // The robust window, where the design's tolerances leave one.
    if design.tolerance.is_some() || ch.robust[..n].contains(&true) {
        let (mut robust, mut robust_out, mut unreliable) = (0u64, 0u64, 0u64);
        let mut margin = f64::INFINITY;
        for k in 0..n {
            if !(ok[k] && ch.zvs[k]) {
                continue;
            }
            if ch.robust[k] {
                robust += 1;
                let on = f64::from(got[k].get()) * tick_s + lead;
                let mg = (on - ch.r_open[k]).min(ch.r_close[k] - on);
                robust_out += u64::from(mg < 0.0);
                margin = margin.min(mg);
            } else if design.tolerance.is_some() {
                unreliable += 1;
            }
        }
        r.robust += robust * weight;
        r.robust_out += robust_out * weight;
        r.unreliable += unreliable * weight;
        if robust > 0 {
            r.robust_margin = Some(r.robust_margin.map_or(margin, |x: f64| x.min(margin)));
        }
    }
    any_undecided
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

#[cfg(test)]
mod tests {
    use super::*;

    fn small() -> Design {
        small_with("")
    }

    /// [`small`] with `extra` appended to its text.
    fn small_with(extra: &str) -> Design {
        Design::parse(
            &(r#"
name = "t"
topology = "buck"
lr = "1u"
cr = "6.8n"
vin = [30, 40]
io = [1, 4]
vout = 12
[adc]
bits = 12
vin_volts_per_code = 0.0161
io_amps_per_code = 0.00488
io_zero_code = 0
[timer]
clock_hz = "170M"
counter_bits = 16
driver_delay = "25n"
"#
            .to_string()
                + extra),
            "small",
        )
        .unwrap()
    }

    #[test]
    fn every_pair_of_the_range_is_checked() {
        let d = small();
        let cf = d.closed_form().unwrap().fast_f32().unwrap();
        let r = verify(&d, &cf, None);
        assert_eq!(
            r.points_checked,
            u64::from(d.vin_codes.len()) * u64::from(d.io_codes.len())
        );
        assert_eq!(r.points_checked, r.pairs_in_range);
    }

    #[test]
    fn a_run_of_a_method_is_the_method_at_each_pair() {
        let d = small();
        let cf = d.closed_form().unwrap();
        let (fast, fixed, libm) = (
            cf.fast_f32().unwrap(),
            cf.fixed_point().unwrap(),
            cf.libm_f32().unwrap(),
        );
        let gen = crate::generate::generate(&d).unwrap();
        let table = gen.table.table().unwrap();
        let methods: [&dyn DelayMethod; 4] = [&table, &fast, &fixed, &libm];
        for m in methods {
            for cv in [d.vin_codes.lo, d.vin_codes.hi, 0, u16::MAX] {
                for (first, step) in [
                    (0u16, 1u16),
                    (d.io_codes.lo, 1),
                    (d.io_codes.lo, 2),
                    (65_500, 3),
                ] {
                    let (mut ticks, mut raw) = ([Ticks::new(0); 300], [f64::NAN; 300]);
                    let has_raw = m.eval_run(cv, first, step, &mut ticks, &mut raw);
                    for (k, (&t, &r)) in ticks.iter().zip(&raw).enumerate() {
                        let ci = first.wrapping_add(step.wrapping_mul(k as u16));
                        let (want, want_raw) = m.eval(cv, ci);
                        assert_eq!(t.get(), want, "{} at ({cv}, {ci})", m.name());
                        assert_eq!(has_raw, want_raw.is_some(), "{}", m.name());
                        if let Some(w) = want_raw {
                            assert_eq!(r.to_bits(), w.to_bits(), "{} at ({cv}, {ci})", m.name());
                        }
                    }
                }
            }
        }
    }

    #[test]
    fn a_run_of_each_layouts_table_is_its_lookup_at_each_pair() {
        // timing-core's run matches the layout once, outside its loop: every
        // layout's loop against the lookup pair by pair.
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
            let d = small_with(&format!(
                "[table]\nlayout = \"{layout}\"\nmax_error_ticks = 50\n"
            ));
            let gen = crate::generate::generate(&d).unwrap();
            assert_eq!(gen.table.layout_name(), layout);
            let table = gen.table.table().unwrap();
            for cv in [
                0,
                d.vin_codes.lo,
                (d.vin_codes.lo + d.vin_codes.hi) / 2,
                u16::MAX,
            ] {
                for (first, step) in [
                    (0u16, 1u16),
                    (d.io_codes.lo, 1),
                    (d.io_codes.lo + 1, 2),
                    (65_500, 1),
                ] {
                    let (mut ticks, mut raw) = ([Ticks::new(0); 700], [0.0; 700]);
                    table.eval_run(cv, first, step, &mut ticks, &mut raw);
                    for (k, t) in ticks.iter().enumerate() {
                        let ci = first.wrapping_add(step.wrapping_mul(k as u16));
                        assert_eq!(t.get(), table.eval(cv, ci).0, "{layout} at ({cv}, {ci})");
                    }
                }
            }
        }
    }

    /// A 10-bit ideal design whose voltage range spans more than a factor
    /// of four (rows double twice): `topology` and `vout`, the current
    /// sensor's zero code, and `extra` appended.
    fn wide(topology: &str, vout: f64, io_zero: u16, extra: &str) -> Design {
        Design::parse(
            &format!(
                r#"
name = "wide"
topology = "{topology}"
lr = "1u"
cr = "6.8n"
vin = [12, 60]
io = [0.3, 7]
vout = {vout}
[adc]
bits = 10
vin_volts_per_code = 0.0644
io_amps_per_code = 0.0195
io_zero_code = {io_zero}
[timer]
clock_hz = "170M"
counter_bits = 16
driver_delay = "25n"
{extra}"#
            ),
            "wide",
        )
        .unwrap()
    }

    #[test]
    fn doubled_pairs_take_their_halves_verdicts() {
        // Every pair evaluated against doubled pairs taking their halves'
        // verdicts: the same report (the sum of squares in another order),
        // on a buck (the cell is Vin itself), a boost (V = Vout), a
        // buck-boost (V = Vin + Vout), a sensor zero, and the three layouts
        // indexed by the code ratio.
        let cases = [
            ("buck", 5.0, 0, "log-uniform"),
            ("buck", 5.0, 37, "ratio"),
            ("boost", 80.0, 0, "log-ratio"),
            ("buck-boost", 24.0, 12, "log-uniform"),
        ];
        for (topology, vout, zero, layout) in cases {
            let d = wide(
                topology,
                vout,
                zero,
                &format!("[table]\nlayout = \"{layout}\"\nmax_error_ticks = 50\n"),
            );
            let table = crate::generate::generate(&d).unwrap().table;
            let table = table.table().unwrap();
            let model = ExactModel::new(&d);
            let run = |share| verify_rows(&d, &model, &[&table], None, &|_| {}, share).remove(0);
            let (mut shared, all) = (run(true), run(false));
            let case = format!("{topology}, zero {zero}, {layout}");
            assert_eq!(all.pairs_evaluated, all.points_checked, "{case}");
            assert_eq!(shared.points_checked, shared.pairs_in_range, "{case}");
            println!(
                "{case}: {} of {} pairs evaluated; {} ZVS, {} outside the window, {} narrower than a tick, worst {:.3} ticks at {:?}",
                shared.pairs_evaluated,
                shared.points_checked,
                shared.zvs_points,
                shared.outside_window,
                shared.narrower_than_a_tick,
                shared.max_error_ticks,
                (shared.worst_vin_code, shared.worst_io_code)
            );
            assert!(
                shared.pairs_evaluated * 10 < shared.points_checked * 9,
                "{case}: pairs were doubled"
            );
            let rel = (shared.rms_error_ticks - all.rms_error_ticks).abs() / all.rms_error_ticks;
            assert!(rel < 1e-12, "{case}: RMS {rel:e} apart");
            shared.rms_error_ticks = all.rms_error_ticks;
            shared.pairs_evaluated = all.pairs_evaluated;
            assert_eq!(shared, all, "{case}");
        }
    }

    #[test]
    fn nothing_is_doubled_unless_every_method_doubles() {
        // A closed form's f32 arithmetic is not invariant under doubling, a
        // grid layout interpolates over the raw codes, and a Coss curve
        // moves the events with the voltage: every pair is evaluated.
        let d = wide(
            "buck",
            5.0,
            0,
            "[table]\nlayout = \"grid\"\nmax_error_ticks = 50\n",
        );
        let gen = crate::generate::generate(&d).unwrap().table;
        let grid = gen.table().unwrap();
        assert!(!DelayMethod::same_at_doubled_codes(&grid));
        let cf = d.closed_form().unwrap().fast_f32().unwrap();
        for m in [&grid as &dyn DelayMethod, &cf] {
            let r = verify(&d, m, None);
            assert_eq!(r.pairs_evaluated, r.pairs_in_range, "{}", m.name());
        }
    }

    #[test]
    fn the_ratio_layouts_command_the_same_at_doubled_codes() {
        // The integer identities behind DelayTable::same_at_doubled_codes,
        // at every pair whose doubling is in range, for every layout: they
        // hold for the layouts that claim them, and fail somewhere for the
        // others (so this check can fail).
        for (layout, zero) in [
            ("ratio", 0),
            ("log-ratio", 21),
            ("log-uniform", 0),
            ("log-uniform", 37),
            ("grid", 0),
            ("recip-ratio", 0),
            ("log-volt", 0),
            ("margin", 0),
            ("ratio-volt", 0),
        ] {
            let d = wide(
                "buck",
                5.0,
                zero,
                &format!("[table]\nlayout = \"{layout}\"\nmax_error_ticks = 50\n"),
            );
            let gen = crate::generate::generate(&d).unwrap().table;
            assert_eq!(gen.layout_name(), layout);
            let t = gen.table().unwrap();
            let (v, i) = (d.vin_codes, d.io_codes);
            let mut differ = 0u64;
            for cv in v.lo..=v.hi / 2 {
                for ci in i.lo..=i.hi {
                    let c = ci.saturating_sub(zero);
                    let (w, ci2) = (2 * cv, zero + 2 * c);
                    if c == 0 || ci < zero || ci2 > i.hi {
                        continue;
                    }
                    differ += u64::from(t.eval(cv, ci).0 != t.eval(w, ci2).0);
                }
            }
            println!("{layout}, zero {zero}: {differ} doubled pairs differ");
            assert_eq!(
                differ == 0,
                t.same_at_doubled_codes(),
                "{layout}, zero {zero}"
            );
        }
    }

    #[test]
    fn a_panicking_worker_fails_the_verification() {
        let d = small();
        let cf = d.closed_form().unwrap().fast_f32().unwrap();
        let bad = d.vin_codes.lo + 7;
        let r = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
            verify_rows(
                &d,
                &ExactModel::new(&d),
                &[&cf],
                None,
                &|cv| assert_ne!(cv, bad, "injected fault"),
                true,
            )
        }));
        assert!(r.is_err(), "a worker's panic must reach the caller");
        let mut ticks = 0;
        let mut p = |_: f64| ticks += 1;
        let r = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
            verify_rows(
                &d,
                &ExactModel::new(&d),
                &[&cf],
                Some(&mut p),
                &|cv| assert_ne!(cv, bad, "injected fault"),
                true,
            )
        }));
        assert!(r.is_err(), "also with a progress bar");
    }
}
