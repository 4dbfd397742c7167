//! One row of voltage codes checked against the model, a chunk of current
//! codes at a time, with what each row found; rows merge into the report.

use timing_core::Ticks;

use crate::check::doubling::{whole_row, Doubling};
use crate::model::design::Design;
use crate::model::exact::ExactModel;
use crate::model::exact_chunk::{ExactChunk, CHUNK};

use super::method::DelayMethod;

/// One row of voltage codes.
#[derive(Debug, Clone, Default)]
pub(super) struct Row {
    pub(super) max_err: f64,
    pub(super) worst_ci: u16,
    pub(super) sum_sq: f64,
    pub(super) approx: Option<(f64, u16)>,
    pub(super) points: u64,
    pub(super) evaluated: u64,
    pub(super) zvs: u64,
    pub(super) early: u64,
    pub(super) late: u64,
    pub(super) narrow: u64,
    pub(super) wide_out: u64,
    pub(super) min_margin: Option<f64>,
    pub(super) robust: u64,
    pub(super) robust_out: u64,
    pub(super) robust_margin: Option<f64>,
    pub(super) unreliable: u64,
    pub(super) miss_load: Option<f64>,
    pub(super) miss_width: Option<f64>,
    pub(super) max_cmd: u32,
    pub(super) max_cmd_ci: u16,
    pub(super) model_errors: u64,
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
pub(super) fn check_row(
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
                let e = (cmd.raw[k] - ch.ticks[k]).abs() + ch.eps[k];
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
