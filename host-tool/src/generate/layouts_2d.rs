//! The 2-D layouts, which follow the voltage as well as the ratio (what a
//! Coss curve or losses need): `log-volt` and `ratio-volt` (the log or the
//! ratio by voltage rows), `margin` (the current's margin over a line
//! through the ZVS boundary, by voltage rows) and `grid` (the raw codes).

use timing_core::table::{
    ratio_bounds, GridLayout, Layout, LogVoltLayout, MarginLayout, RatioVoltLayout, Sensing,
};

use super::error::GenerateError;
use super::generated::Generated;
use super::nodes::{bits, entry, sensing};
use crate::model::design::Design;
use crate::model::exact::ExactModel;

use super::layouts_1d::{log_axis, log_node_ratio};

/// The voltage rows shared by the 2-D row layouts (log-volt, ratio-volt,
/// margin) for rows `2^vs` codes apart: the most fractional bits the
/// largest delay and the row step leave (at most 12), and the rows that
/// cover the voltage range; `None` when the largest delay and the row step
/// together exceed the lookup's 16 bits.
pub(super) fn voltage_rows(s: &Sensing, max_ticks: f64, vs: u32) -> Option<(u32, u32)> {
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
pub(super) fn log_volt_candidate(
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
pub(super) fn margin_candidate(
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
pub(super) fn ratio_volt_candidate(
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
pub(super) fn clamped_row_table(
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
pub(super) fn node_entries(
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
pub(super) fn grid_candidate(
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
