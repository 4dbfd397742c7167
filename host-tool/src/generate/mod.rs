//! Table generation: the candidate layouts over a design's code range,
//! their entries fitted to the exact model ([`fit`]), and the choice of the
//! smallest that meets the error budget. All physics comes from timing-core.

pub mod fit;
pub mod generated;

pub use generated::Generated;

use timing_core::table::{
    log_index, log_ratio_index, ratio_bounds, GridLayout, Layout, LogRatioLayout, LogUniformLayout,
    LogVoltLayout, MarginLayout, RatioLayout, RatioVoltLayout, RecipRatioLayout, Sensing,
    LOG_OFFSET,
};

use crate::check::verify::VerifyReport;
use crate::model::design::Design;
use crate::model::exact::ExactModel;

/// Why generation failed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum GenerateError {
    /// A delay in the design range exceeds the timer counter.
    #[error("the delay reaches {ticks:.0} ticks at Vin = {vin_v:.3} V, Io = {io_a:.4} A, beyond the {bits}-bit timer counter's limit of {max} ticks; use a wider counter, a slower timer clock, raise the lightest load in `io`, or `fallback = \"fixed\"`")]
    CounterOverflow {
        /// Ticks needed.
        ticks: f64,
        /// Where.
        vin_v: f64,
        /// Where.
        io_a: f64,
        /// Counter width.
        bits: u8,
        /// Counter limit.
        max: u32,
    },
    /// A delay would be negative: the driver lead is longer than the target.
    #[error("the gate driver's net lead exceeds the turn-on target at Vin = {vin_v:.3} V, Io = {io_a:.4} A: no non-negative delay reaches it")]
    NegativeDelay {
        /// Where.
        vin_v: f64,
        /// Where.
        io_a: f64,
    },
    /// The model refused a point of the design range.
    #[error("at Vin = {vin_v:.3} V, Io = {io_a:.4} A: {message}")]
    Model {
        /// Where.
        vin_v: f64,
        /// Where.
        io_a: f64,
        /// timing-core's message.
        message: String,
    },
    /// No candidate layout meets the error budget.
    #[error("no table layout of up to 16 KiB meets max_error_ticks = {budget}: the best ({layout}) reached {best:.3} ticks with {misses} code pairs outside their window; widen max_error_ticks, narrow the design range, or allow another layout")]
    NoLayout {
        /// Budget.
        budget: f64,
        /// Best error found, ticks, checked at every code pair.
        best: f64,
        /// Code pairs of that candidate commanded outside their interval.
        misses: usize,
        /// Its layout.
        layout: &'static str,
    },
}

/// One candidate layout considered, for reports.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Candidate {
    /// `ratio` or `grid`.
    pub layout: &'static str,
    /// Entry bytes.
    pub table_bytes: usize,
    /// Worst error against the aim over the pairs screened, ticks (`None`
    /// when the candidate was not evaluated: a smaller one was chosen).
    pub screened_error_ticks: Option<f64>,
    /// Code pairs screened commanded outside their interval (robust or
    /// nominal window a tick wide, within the budget around the aim).
    pub misses: Option<usize>,
    /// Code pairs screened: every pair of the range, or a sixteenth of
    /// them (both codes multiples of 4) when those alone already exceed
    /// the error budget.
    pub screened_pairs: Option<u64>,
    /// Whether it met the budget on the sample.
    pub meets_budget: bool,
    /// Shape: `nodes=...` or `rows x cols`.
    pub shape: String,
}

/// The result of [`generate`].
#[derive(Debug, Clone)]
pub struct Outcome {
    /// The chosen table.
    pub table: Generated,
    /// Its exhaustive verification.
    pub verification: VerifyReport,
    /// Every candidate considered, smallest first.
    pub candidates: Vec<Candidate>,
    /// The closed-form methods' verification, from the same pass over the
    /// code pairs as the table's (the methods timing-core offers for the
    /// design, in the order `closed-form-f32`, `fixed-point`, `libm-f32`).
    pub closed_forms: Vec<VerifyReport>,
}

/// Bits needed to hold `x`.
fn bits(x: u32) -> u32 {
    32 - x.leading_zeros()
}

/// Largest exact delay over the design range and a check that all fit the
/// counter and are non-negative. The delay is monotonic in neither code, so
/// this scans the edges of the range finely and the interior on a grid; the
/// exhaustive verification later covers every pair.
fn delay_bounds(design: &Design, model: &ExactModel<'_>) -> Result<f64, GenerateError> {
    let v = design.vin_codes;
    let i = design.io_codes;
    // The codes of one axis: its ends and about 64 steps between.
    let codes = |r: timing_core::CodeRange| {
        let step = ((r.hi - r.lo) / 64).max(1);
        let mut out: Vec<u16> = (r.lo..=r.hi).step_by(usize::from(step)).collect();
        if out.last() != Some(&r.hi) {
            out.push(r.hi);
        }
        out
    };
    let (cvs, cis) = (codes(v), codes(i));
    let max = design.timer.max_ticks().get().min(u32::from(u16::MAX));
    let rows = crate::par::map_rows(cvs.len(), |k| -> Result<f64, GenerateError> {
        let cv = cvs[k];
        let row = model.row_at_code(cv);
        let mut max_ticks = 0.0f64;
        for &ci in &cis {
            let p = row.at_code(ci).map_err(|e| GenerateError::Model {
                vin_v: design.vin_of(cv),
                io_a: design.io_of(ci),
                message: e.to_string(),
            })?;
            if p.ticks < 0.0 {
                return Err(GenerateError::NegativeDelay {
                    vin_v: design.vin_of(cv),
                    io_a: design.io_of(ci),
                });
            }
            if p.ticks.round() > f64::from(max) {
                return Err(GenerateError::CounterOverflow {
                    ticks: p.ticks,
                    vin_v: design.vin_of(cv),
                    io_a: design.io_of(ci),
                    bits: design.timer.counter_bits(),
                    max,
                });
            }
            max_ticks = max_ticks.max(p.ticks);
        }
        Ok(max_ticks)
    });
    rows.into_iter()
        .try_fold(0.0f64, |m, r| r.map(|x| m.max(x)))
}

/// The ZVS test multipliers. J = Io*Z0/Vin >= 1 with Io = ki*(io - zero)
/// and Vin = kv*vin reads `(io - zero)*ki*Z0 >= vin*kv`: the multipliers
/// are ki*Z0 and kv, scaled so the larger is 65535.
fn zvs_multipliers(design: &Design) -> (u16, u16) {
    let a = design.io_amps_per_code * design.zvs_z0_ohm;
    let b = design.vin_volts_per_code;
    let scale = f64::from(u16::MAX) / a.max(b);
    (
        (a * scale).round().max(1.0) as u16,
        (b * scale).round().max(1.0) as u16,
    )
}

fn sensing(design: &Design) -> Sensing {
    let (zvs_io_mul, zvs_vin_mul) = zvs_multipliers(design);
    Sensing {
        vin: design.vin_codes,
        io: design.io_codes,
        io_zero: design.io_zero_code,
        zvs_io_mul,
        zvs_vin_mul,
    }
}

fn entry(ticks: f64, frac_bits: u32) -> u16 {
    (ticks * f64::from(1u32 << frac_bits))
        .round()
        .clamp(0.0, f64::from(u16::MAX)) as u16
}

/// Normalised load at ratio `q` of a 1-D table with ratio shift `shift`:
/// q = (vin_code << shift)/(io_code - zero) and J = Io*Z0/Vin give
/// J = ki*Z0*2^shift/(kv*q).
#[must_use]
pub fn load_at_ratio(design: &Design, shift: u8, q: f64) -> f64 {
    design.io_amps_per_code * design.tank.z0_ohm() * f64::from(1u32 << shift)
        / design.vin_volts_per_code
        / q
}

/// Entries of a 1-D table whose node `k` sits at ratio `node_q(k)`.
fn ratio_entries(
    design: &Design,
    model: &ExactModel<'_>,
    shift: u8,
    frac: u32,
    nodes: u32,
    node_q: impl Fn(u32) -> f64,
) -> Result<Vec<u16>, GenerateError> {
    (0..nodes)
        .map(|k| {
            let j = load_at_ratio(design, shift, node_q(k));
            model
                .at_ratio_node(j)
                .map(|p| entry(p.table_ticks, frac))
                .map_err(|e| GenerateError::Model {
                    vin_v: design.vin_v.0,
                    io_a: j * design.vin_v.0 / design.tank.z0_ohm(),
                    message: e.to_string(),
                })
        })
        .collect()
}

/// log2 of the node step of a uniform table over `q_lo..=q_hi` with about
/// `target_nodes` nodes (a power of two, at least 1).
fn uniform_step(q_lo: u32, q_hi: u32, target_nodes: u32) -> u32 {
    let per = (f64::from(q_hi - q_lo) / f64::from(target_nodes.max(2) - 1)).max(1.0);
    per.log2().ceil().max(0.0) as u32
}

/// The ratio layout with about `target_nodes` nodes and `frac` fractional
/// bits: the ratio shift is the largest (finest ratio resolution) that
/// keeps the node step within the fixed-point limit `step + frac <= 16`.
fn ratio_candidate(
    design: &Design,
    model: &ExactModel<'_>,
    max_ticks: f64,
    target_nodes: u32,
    frac: u32,
) -> Result<Option<Generated>, GenerateError> {
    let s = sensing(design);
    if bits(max_ticks.ceil() as u32) + frac > 16 {
        return Ok(None);
    }
    let step_for = |q_lo: u32, q_hi: u32| uniform_step(q_lo, q_hi, target_nodes);
    let Some((shift, q_lo, q_hi)) = finest_shift(&s, |lo, hi| step_for(lo, hi) + frac <= 16) else {
        return Ok(None);
    };
    let step = step_for(q_lo, q_hi);
    // The ratio must resolve the lightest-load end: q of the first node
    // at least 64 (truncation of the division moves it by under 2 %).
    if q_lo < 64 {
        return Ok(None);
    }
    let nodes = ((q_hi - q_lo).div_ceil(1 << step) + 1).max(2);
    if nodes > u32::from(u16::MAX) {
        return Ok(None);
    }
    let entries = ratio_entries(design, model, shift as u8, frac, nodes, |k| {
        f64::from(q_lo) + f64::from(k) * f64::from(1u32 << step)
    })?;
    Ok(Some(Generated {
        sensing: s,
        layout: Layout::Ratio(RatioLayout {
            ratio_shift: shift as u8,
            q_lo,
            step_shift: step as u8,
            nodes: nodes as u16,
        }),
        frac_bits: frac as u8,
        fallback: design.fallback,
        entries,
    }))
}

/// The reciprocal-ratio layout (the ratio layout without the division)
/// with about `target_nodes` nodes and `frac` fractional bits. The
/// reciprocals use the most bits that keep every one within 16 bits; the
/// post-multiplication shift is the smallest (finest ratio resolution)
/// that keeps the node step within `step + frac <= 16`.
fn recip_ratio_candidate(
    design: &Design,
    model: &ExactModel<'_>,
    max_ticks: f64,
    target_nodes: u32,
    frac: u32,
) -> Result<Option<Generated>, GenerateError> {
    let s = sensing(design);
    if bits(max_ticks.ceil() as u32) + frac > 16 {
        return Ok(None);
    }
    let i_lo = u32::from(s.io.lo - s.io_zero);
    let i_hi = u32::from(s.io.hi - s.io_zero);
    // 2^rs / i_lo <= 65535 (rounded).
    let rs = (0..=31u32)
        .rev()
        .find(|&rs| ((1u64 << rs) as f64 / f64::from(i_lo)).round() <= 65535.0)
        .unwrap_or(0);
    let recips: Vec<u16> = (i_lo..=i_hi)
        .map(|i| ((1u64 << rs) as f64 / f64::from(i)).round() as u16)
        .collect();
    let (r_min, r_max) = (
        u32::from(*recips.last().unwrap_or(&0)),
        u32::from(*recips.first().unwrap_or(&0)),
    );
    let step_for = |q_lo: u32, q_hi: u32| uniform_step(q_lo, q_hi, target_nodes);
    // q is increasing in vin and in R, so the corners bound it.
    let Some((ps, q_lo, q_hi)) = (0..=rs).find_map(|ps| {
        let lo = (u32::from(s.vin.lo) * r_min) >> ps;
        let hi = (u32::from(s.vin.hi) * r_max) >> ps;
        (step_for(lo, hi) + frac <= 16).then_some((ps, lo, hi))
    }) else {
        return Ok(None);
    };
    if q_lo < 64 {
        return Ok(None);
    }
    let step = step_for(q_lo, q_hi);
    let nodes = ((q_hi - q_lo).div_ceil(1 << step) + 1).max(2);
    if nodes > u32::from(u16::MAX) {
        return Ok(None);
    }
    let mut entries = ratio_entries(design, model, (rs - ps) as u8, frac, nodes, |k| {
        f64::from(q_lo) + f64::from(k) * f64::from(1u32 << step)
    })?;
    entries.extend_from_slice(&recips);
    Ok(Some(Generated {
        sensing: s,
        layout: Layout::RecipRatio(RecipRatioLayout {
            recip_shift: rs as u8,
            post_shift: ps as u8,
            q_lo,
            step_shift: step as u8,
            nodes: nodes as u16,
        }),
        frac_bits: frac as u8,
        fallback: design.fallback,
        entries,
    }))
}

/// The largest ratio shift (finest ratio resolution) at which `fits(q_lo,
/// q_hi)` holds, with the design range's ratio bounds there (timing-core's
/// own `ratio_bounds`, the ones its validation checks).
fn finest_shift(s: &Sensing, fits: impl Fn(u32, u32) -> bool) -> Option<(u32, u32, u32)> {
    (0..=32 - bits(u32::from(s.vin.hi)))
        .rev()
        .find_map(|shift| {
            let (lo, hi) = ratio_bounds(s, shift as u8).ok()?;
            fits(lo, hi).then_some((shift, lo, hi))
        })
}

/// The log-spaced ratio layout with `2^m` nodes per octave and `frac`
/// fractional bits; the ratio shift is the largest that keeps the top
/// octave's step within 2^15.
fn log_ratio_candidate(
    design: &Design,
    model: &ExactModel<'_>,
    max_ticks: f64,
    m: u32,
    frac: u32,
) -> Result<Option<Generated>, GenerateError> {
    let s = sensing(design);
    if bits(max_ticks.ceil() as u32) + frac > 16 {
        return Ok(None);
    }
    let top_step_fits = |_: u32, hi: u32| bits(hi).saturating_sub(1).saturating_sub(m) <= 15;
    let Some((shift, q_lo, q_hi)) = finest_shift(&s, top_step_fits) else {
        return Ok(None);
    };
    if q_lo == 0 || bits(q_lo) - 1 < m {
        return Ok(None);
    }
    let e_lo = bits(q_lo) - 1;
    let nodes = log_index(q_hi, e_lo, m).0 + 2;
    if nodes > u32::from(u16::MAX) {
        return Ok(None);
    }
    let entries = ratio_entries(design, model, shift as u8, frac, nodes, |k| {
        log_node_q(k, e_lo, m)
    })?;
    Ok(Some(Generated {
        sensing: s,
        layout: Layout::LogRatio(LogRatioLayout {
            ratio_shift: shift as u8,
            mant_bits: m as u8,
            e_lo: e_lo as u8,
            nodes: nodes as u16,
        }),
        frac_bits: frac as u8,
        fallback: design.fallback,
        entries,
    }))
}

/// The log-domain axis of the log-uniform and log-volt layouts for node
/// step `2^step`: node 0 on a multiple of the step at or below the design
/// range's smallest lambda, and the node count that covers its largest.
fn log_axis(s: &Sensing, step: u32) -> (u32, u32) {
    let l_lo = log_ratio_index(u32::from(s.vin.lo), u32::from(s.io.hi - s.io_zero));
    let l_hi = log_ratio_index(u32::from(s.vin.hi), u32::from(s.io.lo - s.io_zero));
    let lambda_lo = (l_lo >> step) << step;
    (
        lambda_lo,
        ((l_hi - lambda_lo).div_ceil(1 << step) + 1).max(2),
    )
}

/// The code ratio vin/io at node `k` of a log-domain axis from `lambda_lo`
/// in steps of `2^step` (the inverse of [`log_ratio_index`]).
fn log_node_ratio(lambda_lo: u32, step: u32, k: u32) -> f64 {
    let lambda = f64::from(lambda_lo) + f64::from(k) * f64::from(1u32 << step);
    2f64.powf((lambda - f64::from(LOG_OFFSET)) / 32768.0)
}

/// The log-uniform layout with node step `2^step` in lambda and `frac`
/// fractional bits.
fn log_uniform_candidate(
    design: &Design,
    model: &ExactModel<'_>,
    max_ticks: f64,
    step: u32,
    frac: u32,
) -> Result<Option<Generated>, GenerateError> {
    let s = sensing(design);
    if bits(max_ticks.ceil() as u32) + frac > 16 || step + frac > 16 || step > 15 {
        return Ok(None);
    }
    let (lambda_lo, nodes) = log_axis(&s, step);
    if nodes > 4096 {
        return Ok(None);
    }
    // The ratio vin/io at node k, as the q of a zero-shift ratio table.
    let entries = ratio_entries(design, model, 0, frac, nodes, |k| {
        log_node_ratio(lambda_lo, step, k)
    })?;
    Ok(Some(Generated {
        sensing: s,
        layout: Layout::LogUniform(LogUniformLayout {
            lambda_lo,
            step_shift: step as u8,
            nodes: nodes as u16,
        }),
        frac_bits: frac as u8,
        fallback: design.fallback,
        entries,
    }))
}

/// The ratio q at node `k` of a log-spaced table (octaves from `e_lo`,
/// `2^m` nodes each).
#[must_use]
pub fn log_node_q(k: u32, e_lo: u32, m: u32) -> f64 {
    let e = e_lo + (k >> m);
    let mant = k & ((1 << m) - 1);
    f64::from((1u32 << m) + mant) * 2f64.powi(e as i32 - m as i32)
}

/// The voltage rows shared by the 2-D row layouts (log-volt, ratio-volt,
/// margin) for rows `2^vs` codes apart: the most fractional bits the
/// largest delay and the row step leave (at most 12), and the rows that
/// cover the voltage range; `None` when the largest delay and the row step
/// together exceed the lookup's 16 bits.
fn voltage_rows(s: &Sensing, max_ticks: f64, vs: u32) -> Option<(u32, u32)> {
    let tick_bits = bits(max_ticks.ceil() as u32);
    (vs + tick_bits <= 16).then(|| {
        (
            (16 - tick_bits).min(16 - vs).min(12),
            (u32::from(s.vin.hi - s.vin.lo).div_ceil(1 << vs) + 1).max(2),
        )
    })
}

/// The log-volt layout (log ratio by voltage code) with steps `2^step`
/// in lambda and `2^vs` voltage codes, and the most fractional bits the
/// largest delay and the voltage step leave. Its entries start as the aim
/// at each node; generation then fits them to the pairs' intervals
/// ([`crate::generate::fit`]).
fn log_volt_candidate(
    design: &Design,
    model: &ExactModel<'_>,
    max_ticks: f64,
    step: u32,
    vs: u32,
) -> Result<Option<Generated>, GenerateError> {
    let s = sensing(design);
    let Some((frac, rows)) = voltage_rows(&s, max_ticks, vs).filter(|_| step <= 15) else {
        return Ok(None);
    };
    let (lambda_lo, cols) = log_axis(&s, step);
    if rows * cols > 8192 {
        return Ok(None);
    }
    let entries = node_entries(model, rows, cols, frac, |r, c| {
        let cv = f64::from(u32::from(s.vin.lo) + (r << vs));
        let ratio = log_node_ratio(lambda_lo, step, c);
        (
            cv * design.vin_volts_per_code,
            cv / ratio * design.io_amps_per_code,
        )
    })?;
    Ok(Some(Generated {
        sensing: s,
        layout: Layout::LogVolt(LogVoltLayout {
            lambda_lo,
            step_shift: step as u8,
            cols: cols as u16,
            vin_shift: vs as u8,
            rows: rows as u16,
        }),
        frac_bits: frac as u8,
        fallback: design.fallback,
        entries,
    }))
}

/// A straight line through the nominal ZVS boundary in code space: the
/// boundary's current code (after the sensor zero) at the lowest and the
/// highest voltage code of the range. Found by bisection on the model's
/// window at the two voltages; where the range holds no boundary at a
/// voltage, the line J = 1 of the lookup's ZVS test stands in there.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BoundaryLine {
    /// Current code at `vin.lo`.
    pub at_lo: f64,
    /// Current code at `vin.hi`.
    pub at_hi: f64,
}

impl BoundaryLine {
    /// The line of `design`, from `model`.
    #[must_use]
    pub fn of(design: &Design, model: &ExactModel<'_>) -> Self {
        let s = sensing(design);
        let on_zvs_line =
            |cv: u16| f64::from(cv) * f64::from(s.zvs_vin_mul) / f64::from(s.zvs_io_mul);
        let at = |cv: u16| {
            let vin = design.vin_of(cv);
            let zvs = |ci: f64| {
                model
                    .at(vin, ci * design.io_amps_per_code)
                    .is_ok_and(|p| p.window.is_some())
            };
            let (mut lo, mut hi) = (0.5, 4.0 * f64::from(s.io.hi - s.io_zero));
            if model.is_dry() || zvs(lo) || !zvs(hi) {
                return on_zvs_line(cv);
            }
            while hi - lo > 0.05 {
                let mid = 0.5 * (lo + hi);
                if zvs(mid) {
                    hi = mid;
                } else {
                    lo = mid;
                }
            }
            hi
        };
        Self {
            at_lo: at(s.vin.lo),
            at_hi: at(s.vin.hi),
        }
    }
}

/// The margin layout (the current's margin over `line` by voltage code)
/// with columns `2^c` current codes apart and rows `2^vs` voltage codes
/// apart, and the fractional bits of [`log_volt_candidate`]. `d` steps
/// `2^15` per column, so `io_mul = 2^(15 - c)`; the line's slope sets
/// `vin_mul`, and the offset puts the boundary at the lowest voltage on a
/// column line (the rounding of the slope moves it by at most a
/// 2^-16 column per voltage code elsewhere).
fn margin_candidate(
    design: &Design,
    model: &ExactModel<'_>,
    max_ticks: f64,
    line: BoundaryLine,
    c: u32,
    vs: u32,
) -> Result<Option<Generated>, GenerateError> {
    const ST: u32 = 15;
    let s = sensing(design);
    let Some((frac, rows)) = voltage_rows(&s, max_ticks, vs).filter(|_| c <= ST) else {
        return Ok(None);
    };
    let a = ST - c;
    let io_mul = 1i64 << a;
    let (v0, v1) = (i64::from(s.vin.lo), i64::from(s.vin.hi));
    let slope = (line.at_hi - line.at_lo) / (v1 - v0).max(1) as f64;
    let vin_mul = (slope * io_mul as f64).round();
    if !(f64::from(i16::MIN)..=f64::from(i16::MAX)).contains(&vin_mul) {
        return Ok(None);
    }
    let vin_mul = vin_mul as i64;
    // d at the boundary at v0 before the offset, and the offset: a
    // multiple of the column step past it, large enough for d >= 0.
    let b = (line.at_lo * io_mul as f64).round() as i64 - v0 * vin_mul;
    let i0 = i64::from(s.io.lo - s.io_zero);
    let i1 = i64::from(s.io.hi - s.io_zero);
    let most_sub = if vin_mul > 0 {
        v1 * vin_mul
    } else {
        v0 * vin_mul
    };
    let least_sub = if vin_mul > 0 {
        v0 * vin_mul
    } else {
        v1 * vin_mul
    };
    let step = 1i64 << ST;
    let k = (b + most_sub - i0 * io_mul).div_euclid(step) + 1;
    let k = k.max(b.div_euclid(step) + 1);
    let offset = k * step - b;
    let hi = i1 * io_mul + offset - least_sub;
    let Ok(offset) = u32::try_from(offset) else {
        return Ok(None);
    };
    if hi > i64::from(u32::MAX) {
        return Ok(None);
    }
    let cols = (hi.div_euclid(step) + 2).max(2) as u32;
    if rows * cols > 8192 || cols > u32::from(u16::MAX) {
        return Ok(None);
    }
    let layout = Layout::Margin(MarginLayout {
        io_mul: io_mul as u16,
        vin_mul: vin_mul as i16,
        offset,
        step_shift: ST as u8,
        cols: cols as u16,
        vin_shift: vs as u8,
        rows: rows as u16,
    });
    clamped_row_table(design, model, s, layout, frac).map(Some)
}

/// The ratio-volt layout (code ratio by voltage code) with ratio shift
/// `sh`, columns `2^15` apart in the ratio, rows `2^vs` voltage codes apart
/// and the fractional bits of [`log_volt_candidate`]. Column 0 sits so that
/// a column line passes through the boundary `line` at the lowest voltage.
fn ratio_volt_candidate(
    design: &Design,
    model: &ExactModel<'_>,
    max_ticks: f64,
    line: BoundaryLine,
    sh: u32,
    vs: u32,
) -> Result<Option<Generated>, GenerateError> {
    const ST: u32 = 15;
    let s = sensing(design);
    let Some((frac, rows)) = voltage_rows(&s, max_ticks, vs) else {
        return Ok(None);
    };
    let Ok((q_min, q_max)) = ratio_bounds(&s, sh as u8) else {
        return Ok(None);
    };
    let step = 1u64 << ST;
    let q_b = (f64::from(u32::from(s.vin.lo) << sh) / line.at_lo.max(1e-3)).round() as u64;
    let q_lo = q_b
        .checked_sub(q_b.saturating_sub(u64::from(q_min)).div_ceil(step) * step)
        .filter(|&q| q <= u64::from(q_min))
        .unwrap_or(u64::from(q_min)) as u32;
    let cols = ((u64::from(q_max) - u64::from(q_lo)).div_ceil(step) + 1).max(2);
    if cols * u64::from(rows) > 8192 {
        return Ok(None);
    }
    let layout = Layout::RatioVolt(RatioVoltLayout {
        ratio_shift: sh as u8,
        q_lo,
        step_shift: ST as u8,
        cols: cols as u16,
        vin_shift: vs as u8,
        rows: rows as u16,
    });
    clamped_row_table(design, model, s, layout, frac).map(Some)
}

/// Where node (row `r`, column `c`) of a `ratio-volt` or `margin` layout
/// sits: its voltage code and its current code after the sensor zero (not
/// rounded; beyond the design range where the columns overhang it).
/// `None` for the other layouts.
#[must_use]
pub fn row_node(s: &Sensing, layout: &Layout, r: u32, c: u32) -> Option<(f64, f64)> {
    match *layout {
        Layout::RatioVolt(g) => {
            let cv = f64::from(u32::from(s.vin.lo) + (r << g.vin_shift));
            let q = f64::from(g.q_lo) + f64::from(c) * f64::from(1u32 << g.step_shift);
            Some((cv, cv * f64::from(1u32 << g.ratio_shift) / q))
        }
        Layout::Margin(g) => {
            let cv = f64::from(u32::from(s.vin.lo) + (r << g.vin_shift));
            let d = f64::from(c) * f64::from(1u32 << g.step_shift);
            Some((
                cv,
                (d - f64::from(g.offset) + cv * f64::from(g.vin_mul)) / f64::from(g.io_mul),
            ))
        }
        _ => None,
    }
}

/// A `ratio-volt` or `margin` table over `layout` whose entries start as
/// the aim at each node ([`row_node`]); nodes beyond the design range hold
/// the aim at the nearest current of the range (the fit then moves them).
fn clamped_row_table(
    design: &Design,
    model: &ExactModel<'_>,
    s: Sensing,
    layout: Layout,
    frac: u32,
) -> Result<Generated, GenerateError> {
    let (rows, cols) = match layout {
        Layout::RatioVolt(g) => (g.rows, g.cols),
        Layout::Margin(g) => (g.rows, g.cols),
        _ => (0, 0),
    };
    let (i_lo, i_hi) = (
        f64::from(s.io.lo - s.io_zero),
        f64::from(s.io.hi - s.io_zero),
    );
    let entries = node_entries(model, rows.into(), cols.into(), frac, |r, c| {
        let (cv, ci) = row_node(&s, &layout, r, c).unwrap_or((f64::from(s.vin.lo), i_lo));
        (
            cv * design.vin_volts_per_code,
            ci.clamp(i_lo, i_hi) * design.io_amps_per_code,
        )
    })?;
    Ok(Generated {
        sensing: s,
        layout,
        frac_bits: frac as u8,
        fallback: design.fallback,
        entries,
    })
}

/// The entries of a 2-D layout, row-major: the table aim at the operating
/// point (volt, ampere) that `at` gives for node (row, column).
fn node_entries(
    model: &ExactModel<'_>,
    rows: u32,
    cols: u32,
    frac: u32,
    at: impl Fn(u32, u32) -> (f64, f64) + Sync,
) -> Result<Vec<u16>, GenerateError> {
    let per_row = crate::par::map_rows(rows as usize, |r| {
        (0..cols)
            .map(|c| {
                let (vin, io) = at(r as u32, c);
                model
                    .at(vin, io)
                    .map(|p| entry(p.table_ticks, frac))
                    .map_err(|e| GenerateError::Model {
                        vin_v: vin,
                        io_a: io,
                        message: e.to_string(),
                    })
            })
            .collect::<Result<Vec<u16>, _>>()
    });
    let mut entries = Vec::with_capacity((rows * cols) as usize);
    for r in per_row {
        entries.extend(r?);
    }
    Ok(entries)
}

/// The grid layout with spacings `2^vs` x `2^is`.
fn grid_candidate(
    design: &Design,
    model: &ExactModel<'_>,
    max_ticks: f64,
    vs: u32,
    is: u32,
) -> Result<Option<Generated>, GenerateError> {
    let s = sensing(design);
    let tick_bits = bits(max_ticks.ceil() as u32);
    if vs + is + tick_bits > 16 {
        return Ok(None);
    }
    let frac = 16 - tick_bits - vs - is;
    let rows = u32::from(s.vin.hi - s.vin.lo).div_ceil(1 << vs) + 1;
    let cols = u32::from(s.io.hi - s.io.lo).div_ceil(1 << is) + 1;
    if rows * cols > 1 << 16 {
        return Ok(None);
    }
    let entries = node_entries(model, rows, cols, frac, |r, c| {
        let cv = f64::from(s.vin.lo) + f64::from(r << vs);
        let ci = f64::from(s.io.lo) + f64::from(c << is);
        (
            cv * design.vin_volts_per_code,
            (ci - f64::from(s.io_zero)) * design.io_amps_per_code,
        )
    })?;
    Ok(Some(Generated {
        sensing: s,
        layout: Layout::Grid(GridLayout {
            vin_shift: vs as u8,
            io_shift: is as u8,
            rows: rows as u16,
            cols: cols as u16,
        }),
        frac_bits: frac as u8,
        fallback: design.fallback,
        entries,
    }))
}

/// One candidate layout's parameters, to build it on a dry model (for its
/// size) and again on the real one (for its entries).
#[derive(Debug, Clone, Copy)]
enum Plan {
    /// Uniform ratio: nodes, fractional bits.
    Ratio(u32, u32),
    /// Uniform ratio with reciprocals: nodes, fractional bits.
    RecipRatio(u32, u32),
    /// Log-spaced ratio: mantissa bits, fractional bits.
    LogRatio(u32, u32),
    /// Uniform in log2: step, fractional bits.
    LogUniform(u32, u32),
    /// Grid: voltage and current spacing shifts.
    Grid(u32, u32),
    /// Log ratio by voltage: lambda step and voltage-row step shifts.
    LogVolt(u32, u32),
    /// Margin over the boundary line by voltage: column and row spacing
    /// shifts, in codes.
    Margin(BoundaryLine, u32, u32),
    /// Ratio by voltage: ratio shift and row spacing shift.
    RatioVolt(BoundaryLine, u32, u32),
}

impl Plan {
    fn build(
        self,
        design: &Design,
        model: &ExactModel<'_>,
        max_ticks: f64,
    ) -> Result<Option<Generated>, GenerateError> {
        match self {
            Plan::Ratio(n, f) => ratio_candidate(design, model, max_ticks, n, f),
            Plan::RecipRatio(n, f) => recip_ratio_candidate(design, model, max_ticks, n, f),
            Plan::LogRatio(m, f) => log_ratio_candidate(design, model, max_ticks, m, f),
            Plan::LogUniform(st, f) => log_uniform_candidate(design, model, max_ticks, st, f),
            Plan::Grid(vs, is) => grid_candidate(design, model, max_ticks, vs, is),
            Plan::LogVolt(st, vs) => log_volt_candidate(design, model, max_ticks, st, vs),
            Plan::Margin(line, c, vs) => margin_candidate(design, model, max_ticks, line, c, vs),
            Plan::RatioVolt(line, sh, vs) => {
                ratio_volt_candidate(design, model, max_ticks, line, sh, vs)
            }
        }
    }
}

/// Generate the smallest table of the allowed layouts that meets the
/// design's error budget on a screening sample and then in exhaustive
/// verification over every code pair.
///
/// # Errors
/// [`GenerateError`].
pub fn generate(design: &Design) -> Result<Outcome, GenerateError> {
    design.robust_aim().map_err(|e| GenerateError::Model {
        vin_v: design.vin_v.0,
        io_a: design.io_a.0,
        message: format!("the robust windows of the tolerances: {e}"),
    })?;
    let model = ExactModel::new(design);
    // Every reading's robust window and aim, once: the requirements and
    // the verification read them.
    let readings = model.readings();
    let model = match &readings {
        Some(r) => model.with_readings(r),
        None => model,
    };
    let max_ticks = delay_bounds(design, &model)?;
    // Candidates are sized on a dry model first; entries are computed only
    // for those screened, smallest first.
    let dry = model.dry();
    let mut pool: Vec<(Generated, Plan)> = Vec::new();
    use crate::input::design::LayoutChoice as L;
    // The two uniform ratio layouts (with a division, or with reciprocals):
    // node counts in powers of two, fractional bits in steps of two.
    type PlanFn = fn(u32, u32) -> Plan;
    let uniform: [(L, PlanFn); 2] = [(L::Ratio, Plan::Ratio), (L::RecipRatio, Plan::RecipRatio)];
    for (choice, plan) in uniform {
        if !(design.layout == L::Auto || design.layout == choice) {
            continue;
        }
        let mut n = 4u32;
        while n <= 32_768 {
            for frac in (0..=12).step_by(2) {
                if let Some(g) = plan(n, frac).build(design, &dry, max_ticks)? {
                    if !pool
                        .iter()
                        .any(|(p, _)| p.layout == g.layout && p.frac_bits == g.frac_bits)
                    {
                        pool.push((g, plan(n, frac)));
                    }
                }
            }
            n *= 2;
        }
    }
    if matches!(design.layout, L::Auto | L::LogRatio) {
        // The log layout's step does not trade against the fractional bits;
        // a few settings, the most the largest delay leaves among them.
        let most = 16u32.saturating_sub(bits(max_ticks.ceil() as u32)).min(12);
        let mut fracs = vec![most, 4, 2];
        fracs.retain(|&f| f <= most);
        fracs.dedup();
        for m in 1..=10 {
            for &frac in &fracs {
                if let Some(g) = Plan::LogRatio(m, frac).build(design, &dry, max_ticks)? {
                    pool.push((g, Plan::LogRatio(m, frac)));
                }
            }
        }
    }
    if matches!(design.layout, L::Auto | L::LogUniform) {
        let most = 16u32.saturating_sub(bits(max_ticks.ceil() as u32));
        for step in 0..=15u32 {
            for frac in [most.min(16 - step), 4, 2] {
                if frac <= most && step + frac <= 16 {
                    let plan = Plan::LogUniform(step, frac);
                    if let Some(g) = plan.build(design, &dry, max_ticks)? {
                        if !pool
                            .iter()
                            .any(|(p, _)| p.layout == g.layout && p.frac_bits == g.frac_bits)
                        {
                            pool.push((g, plan));
                        }
                    }
                }
            }
        }
    }
    // An ideal tank without tolerances asks, at every code pair, for what
    // depends on the code ratio alone (J = Io*Z0/Vin in every cell, and the
    // times scale with 1/w0): a 2-D layout's rows would repeat one another,
    // so `auto` screens the ratio layouts only.
    let ratio_only = design.real.is_ideal() && design.tolerance.is_none();
    let two_d = |choice: L| design.layout == choice || (design.layout == L::Auto && !ratio_only);
    if two_d(L::Grid) {
        for vs in 0..=10u32 {
            for is in 0..=10u32 {
                if let Some(g) = Plan::Grid(vs, is).build(design, &dry, max_ticks)? {
                    pool.push((g, Plan::Grid(vs, is)));
                }
            }
        }
    }
    if two_d(L::LogVolt) {
        for step in 6..=15u32 {
            for vs in 3..=12u32 {
                if let Some(g) = Plan::LogVolt(step, vs).build(design, &dry, max_ticks)? {
                    pool.push((g, Plan::LogVolt(step, vs)));
                }
            }
        }
    }
    if two_d(L::Margin) || two_d(L::RatioVolt) {
        let line = BoundaryLine::of(design, &model);
        for vs in 3..=12u32 {
            if two_d(L::Margin) {
                for c in 0..=12u32 {
                    if let Some(g) = Plan::Margin(line, c, vs).build(design, &dry, max_ticks)? {
                        pool.push((g, Plan::Margin(line, c, vs)));
                    }
                }
            }
            if two_d(L::RatioVolt) {
                // Finest shift first; a coarser shift with the same node
                // count covers more ratio per column and is left out.
                let mut counts = std::collections::HashSet::new();
                for sh in (0..=(32 - bits(u32::from(design.vin_codes.hi)))).rev() {
                    let plan = Plan::RatioVolt(line, sh, vs);
                    if let Some(g) = plan.build(design, &dry, max_ticks)? {
                        if counts.insert(g.entries.len()) {
                            pool.push((g, plan));
                        }
                    }
                }
            }
        }
    }
    pool.sort_by_key(|(g, _)| (g.table_bytes(), std::cmp::Reverse(g.frac_bits)));
    // What every code pair asks of the command, computed once; each
    // candidate is checked against all of it before the independent
    // exhaustive verification.
    let zvs_table = pool.first().map(|(g, _)| g.sensing);
    let zvs = move |cv: u16, ci: u16| {
        zvs_table.is_none_or(|s| {
            let i = u32::from(ci.clamp(s.io.lo, s.io.hi) - s.io_zero);
            let v = u32::from(cv.clamp(s.vin.lo, s.vin.hi));
            i * u32::from(s.zvs_io_mul) >= v * u32::from(s.zvs_vin_mul)
        })
    };
    let req = crate::generate::fit::Requirements::new(design, &model, &zvs);
    let sample = req.sample(4);
    let mut candidates = Vec::new();
    let mut best: Option<(f64, usize, &'static str)> = None;
    let mut chosen = None;
    let mut fallback = None;
    for (g, plan) in pool {
        if chosen.is_some() {
            candidates.push(Candidate {
                layout: g.layout_name(),
                table_bytes: g.table_bytes(),
                screened_error_ticks: None,
                misses: None,
                screened_pairs: None,
                meets_budget: false,
                shape: shape(&g),
            });
            continue;
        }
        let mut g = plan.build(design, &model, max_ticks)?.unwrap_or(g);
        if g.table().is_err() {
            // Entries the lookup's checks refuse (e.g. beyond 16 bits):
            // not a candidate.
            continue;
        }
        // A layout the solver proves infeasible on a sixteenth of the pairs
        // cannot serve them all (the sample's intervals are a subset):
        // screened on the sample first, fitted to every pair unless that
        // proof comes.
        let fitted = if crate::generate::fit::serves(&g) {
            let screened = crate::generate::fit::fit_or_why(&sample, &g)
                != Err(crate::generate::fit::NoFit::Infeasible);
            screened
                .then(|| crate::generate::fit::fit(&req, &g))
                .flatten()
                .map(|e| g.entries = e)
        } else {
            Some(())
        };
        // Checked on the sample first: its pairs are a subset of all, so
        // a sample whose worst error exceeds the budget condemns the
        // candidate without the full check; otherwise every pair.
        let (sample_miss, sample_err) = sample.misses(&g);
        let (miss, err, screened_on) = if sample_err <= design.max_error_ticks {
            let (m, e) = req.misses(&g);
            (m.len(), e, req.pairs.len())
        } else {
            (sample_miss.len(), sample_err, sample.pairs.len())
        };
        let all = screened_on == req.pairs.len();
        let meets = all && fitted.is_some() && miss == 0 && err <= design.max_error_ticks;
        candidates.push(Candidate {
            layout: g.layout_name(),
            table_bytes: g.table_bytes(),
            screened_error_ticks: Some(err),
            misses: Some(miss),
            screened_pairs: Some(screened_on as u64),
            meets_budget: meets,
            shape: shape(&g),
        });
        if best.is_none_or(|b| err < b.0) {
            best = Some((err, miss, g.layout_name()));
        }
        if meets {
            if let Some(c) = accept(design, &model, g, &mut candidates)? {
                chosen = Some(c);
            }
        } else if fallback.is_none() && all && err <= design.max_error_ticks {
            fallback = Some(g);
        }
    }
    // No candidate puts every pair inside its interval (windows that open
    // from zero width at the ZVS boundary can defeat any node spacing):
    // the smallest within the budget, its misses counted by verification
    // and reported.
    if chosen.is_none() {
        if let Some(g) = fallback {
            chosen = accept(design, &model, g, &mut candidates)?;
        }
    }
    match chosen {
        Some((table, verification, closed_forms)) => Ok(Outcome {
            table,
            verification,
            candidates,
            closed_forms,
        }),
        None => {
            let (best, misses, layout) = best.unwrap_or((f64::INFINITY, 0, "none"));
            Err(GenerateError::NoLayout {
                budget: design.max_error_ticks,
                best,
                misses,
                layout,
            })
        }
    }
}

/// Verify candidate `g` at every code pair: `Some` with its report when it
/// meets the budget (and its commands fit the counter), `None` after
/// marking its entry in `candidates` as failing.
#[allow(clippy::type_complexity)]
fn accept(
    design: &Design,
    model: &ExactModel<'_>,
    g: Generated,
    candidates: &mut [Candidate],
) -> Result<Option<(Generated, VerifyReport, Vec<VerifyReport>)>, GenerateError> {
    let table = g.table().map_err(|e| GenerateError::Model {
        vin_v: 0.0,
        io_a: 0.0,
        message: e.to_string(),
    })?;
    // The closed forms the design allows join the table's pass over the
    // code pairs (the exact model runs once per pair for all of them).
    let cf = design.closed_form().ok();
    let fast = cf.as_ref().and_then(|c| c.fast_f32().ok());
    let fixed = cf.as_ref().and_then(|c| c.fixed_point().ok());
    let libm = cf.as_ref().and_then(|c| c.libm_f32().ok());
    let mut methods: Vec<&dyn crate::check::verify::DelayMethod> = vec![&table];
    if let Some(m) = &fast {
        methods.push(m);
    }
    if let Some(m) = &fixed {
        methods.push(m);
    }
    if let Some(m) = &libm {
        methods.push(m);
    }
    let mut reports = crate::check::verify::verify_all_with(design, model, &methods);
    let closed_forms = reports.split_off(1);
    let Some(report) = reports.pop() else {
        return Ok(None);
    };
    let max = design.timer.max_ticks().get();
    if report.max_commanded_ticks > max {
        return Err(GenerateError::CounterOverflow {
            ticks: f64::from(report.max_commanded_ticks),
            vin_v: design.vin_of(report.max_commanded_at.0),
            io_a: design.io_of(report.max_commanded_at.1),
            bits: design.timer.counter_bits(),
            max,
        });
    }
    if report.max_error_ticks <= design.max_error_ticks {
        return Ok(Some((g, report, closed_forms)));
    }
    let name = g.layout_name();
    let bytes = g.table_bytes();
    if let Some(c) = candidates
        .iter_mut()
        .rev()
        .find(|c| c.layout == name && c.table_bytes == bytes)
    {
        c.meets_budget = false;
        c.screened_error_ticks = Some(report.max_error_ticks);
    }
    Ok(None)
}

fn shape(g: &Generated) -> String {
    match g.layout {
        Layout::Ratio(r) => format!("{} nodes, q step 2^{}", r.nodes, r.step_shift),
        Layout::LogRatio(r) => format!("{} nodes, 2^{} per octave", r.nodes, r.mant_bits),
        Layout::LogUniform(r) => format!("{} nodes, step 2^{} in Q15 log2", r.nodes, r.step_shift),
        Layout::Grid(gr) => format!(
            "{} x {} nodes, steps 2^{} x 2^{} codes",
            gr.rows, gr.cols, gr.vin_shift, gr.io_shift
        ),
        Layout::RatioVolt(gr) => format!(
            "{} x {} nodes, steps 2^{} voltage codes x 2^{} in the code ratio << {}",
            gr.rows, gr.cols, gr.vin_shift, gr.step_shift, gr.ratio_shift
        ),
        Layout::Margin(gr) => format!(
            "{} x {} nodes, steps 2^{} voltage codes x 2^{} current codes over the boundary line",
            gr.rows,
            gr.cols,
            gr.vin_shift,
            u32::from(gr.step_shift) - gr.io_mul.trailing_zeros()
        ),
        Layout::LogVolt(gr) => format!(
            "{} x {} nodes, steps 2^{} codes x 2^{} in Q15 log2",
            gr.rows, gr.cols, gr.vin_shift, gr.step_shift
        ),
        Layout::RecipRatio(r) => format!(
            "{} nodes, q step 2^{}, {} reciprocals",
            r.nodes,
            r.step_shift,
            g.entries.len() - usize::from(r.nodes)
        ),
    }
}
