//! The 1-D layouts, over the code ratio: `ratio` (uniform in
//! q = (vin_code << s) / io), `recip-ratio` (the same q by a table of
//! reciprocals), `log-ratio` (q log-spaced like a float) and `log-uniform`
//! (uniform in log2 of the ratio, no division). Each builder sizes its
//! axis from the design's sensing and fills its nodes from the exact model.

use timing_core::table::{
    log_index, log_ratio_index, ratio_bounds, Layout, LogRatioLayout, LogUniformLayout,
    RatioLayout, RecipRatioLayout, Sensing, LOG_OFFSET,
};

use super::error::GenerateError;
use super::generated::Generated;
use super::nodes::{bits, entry, sensing};
use crate::model::design::Design;
use crate::model::exact::ExactModel;

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
pub(super) fn ratio_entries(
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
pub(super) fn uniform_step(q_lo: u32, q_hi: u32, target_nodes: u32) -> u32 {
    let per = (f64::from(q_hi - q_lo) / f64::from(target_nodes.max(2) - 1)).max(1.0);
    per.log2().ceil().max(0.0) as u32
}

/// The ratio layout with about `target_nodes` nodes and `frac` fractional
/// bits: the ratio shift is the largest (finest ratio resolution) that
/// keeps the node step within the fixed-point limit `step + frac <= 16`.
pub(super) fn ratio_candidate(
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
pub(super) fn recip_ratio_candidate(
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
pub(super) fn finest_shift(
    s: &Sensing,
    fits: impl Fn(u32, u32) -> bool,
) -> Option<(u32, u32, u32)> {
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
pub(super) fn log_ratio_candidate(
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
pub(super) fn log_axis(s: &Sensing, step: u32) -> (u32, u32) {
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
pub(super) fn log_node_ratio(lambda_lo: u32, step: u32, k: u32) -> f64 {
    let lambda = f64::from(lambda_lo) + f64::from(k) * f64::from(1u32 << step);
    2f64.powf((lambda - f64::from(LOG_OFFSET)) / 32768.0)
}

/// The log-uniform layout with node step `2^step` in lambda and `frac`
/// fractional bits.
pub(super) fn log_uniform_candidate(
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
