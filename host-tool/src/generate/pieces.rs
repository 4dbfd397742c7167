//! The pieces of the fast closed form ([`timing_core::closed_form::pieces`])
//! fitted to a design's exact model: ideal-cell stand-ins that follow the
//! Coss curve, the loop's losses and the tolerance box where one stand-in
//! cannot.
//!
//! # The fit
//! Every code pair of the design has an interval its delay before rounding
//! must lie in ([`Requirements`]: inside the robust window where one a
//! tick wide exists, inside the nominal window where that is a tick wide,
//! within the error budget of the aim everywhere), here also held within
//! [`AIM_BAND_TICKS`] of the design's aim. Within a band of voltage codes
//! the pairs are sorted by the code ratio `y` (in f32, as the firmware
//! computes it). A piece is fitted to a run of them for the largest margin
//! inside all their intervals:
//!
//! - for a given `kx`, the delay `a(y) * t + off + c * dv` is linear in
//!   the ticks per radian `t`, the offset and the voltage slope `c`; `c`
//!   is the least-squares slope of the aims on `(a, dv, 1)`, and the
//!   margin, concave in `t`, is maximised by golden-section search, with
//!   the offset centred in what remains;
//! - `kx` by golden-section search around the ideal stand-in's;
//! - cutting planes: the search runs on a sample of the run, and the pairs
//!   the result misses join it until none does.
//!
//! A run whose margin falls short of [`TARGET_SLACK_TICKS`] is cut in two
//! at its middle ratio; then neighbours are merged while the merged piece
//! keeps the margin. When a run of the smallest size still has no margin,
//! the bands are halved and the fit starts again (down to bands of
//! [`MIN_BAND_SHIFT`]); the last attempt is kept and `zvs-timing verify`
//! reports what it misses.
//!
//! The ZVS test of each band is the line through the model's boundary at
//! the band's first and last voltage codes (found by bisection on the
//! current), in the ratio `y`.

use timing_core::closed_form::{Band, FastF32, Piece, PiecewiseParts};
use timing_core::normalized::turn_on_angle;
use timing_core::table::Fallback;
use timing_core::CodeRange;

use crate::generate::fit::Requirements;
use crate::model::design::Design;
use crate::model::exact::ExactModel;

/// Each pair's delay before rounding is also held this close to the
/// design's aim, ticks (the approximation error stays under half a tick).
pub const AIM_BAND_TICKS: f64 = 0.45;

/// A piece is cut when the room left inside its pairs' intervals (the
/// width of the offsets that would serve them all) is below this, ticks.
pub const TARGET_SLACK_TICKS: f64 = 0.04;

/// Room a piece needs at least, ticks: more than the f32 arithmetic and
/// the approximations move the delay (a few ten-thousandths of a tick).
pub const MIN_SLACK_TICKS: f64 = 0.005;

/// Runs of fewer pairs are not cut further.
const MIN_RUN: usize = 64;

/// The narrowest bands tried: `2^MIN_BAND_SHIFT` voltage codes.
pub const MIN_BAND_SHIFT: u8 = 4;

/// Every `SAMPLE`th pair of a run starts the cutting-plane search.
const SAMPLE: usize = 32;

/// The fitted pieces of a design, owned; [`PieceSet::fast_f32`] borrows
/// them as timing-core's method.
#[derive(Debug, Clone, PartialEq)]
pub struct PieceSet {
    vin: CodeRange,
    io: CodeRange,
    io_zero: u16,
    band_shift: u8,
    bands: Vec<Band>,
    pieces: Vec<Piece>,
    position: f32,
    max_ticks: u32,
    fallback: Fallback,
    /// Least room left inside a piece's intervals, ticks (negative: some
    /// pair of that piece is missed).
    pub least_slack_ticks: f64,
}

impl PieceSet {
    /// The coefficients as timing-core takes them.
    #[must_use]
    pub fn parts(&self) -> PiecewiseParts<'_> {
        PiecewiseParts {
            vin: self.vin,
            io: self.io,
            io_zero: self.io_zero,
            band_shift: self.band_shift,
            bands: &self.bands,
            pieces: &self.pieces,
            position: self.position,
            max_ticks: self.max_ticks,
            fallback: self.fallback,
        }
    }

    /// timing-core's fast f32 method on these pieces.
    ///
    /// # Errors
    /// timing-core's refusal of the coefficients (not expected: they are
    /// built finite and in order).
    pub fn fast_f32(&self) -> Result<FastF32<'_>, timing_core::Error> {
        FastF32::from_parts(self.parts())
    }

    /// Number of pieces over all bands.
    #[must_use]
    pub fn len(&self) -> usize {
        self.pieces.len()
    }

    /// Whether there are no pieces (never, for a fitted set).
    #[must_use]
    pub fn is_empty(&self) -> bool {
        self.pieces.is_empty()
    }

    /// Number of voltage bands.
    #[must_use]
    pub fn bands(&self) -> usize {
        self.bands.len()
    }
}

/// One pair as the fit sees it.
#[derive(Debug, Clone, Copy)]
struct Pair {
    /// Code ratio, as the firmware computes it in f32.
    y: f64,
    /// Voltage codes from the band's centre.
    dv: f64,
    /// The interval of the delay before rounding, ticks.
    lo: f64,
    hi: f64,
    /// The design's aim, ticks.
    aim: f64,
}

/// A stand-in in f64, its coefficients already rounded to f32.
#[derive(Debug, Clone, Copy)]
struct StandIn {
    kx: f64,
    tpr: f64,
    off: f64,
    c: f64,
}

impl StandIn {
    fn raw(&self, p: &Pair, position: f64) -> f64 {
        turn_on_angle(1.0 / (self.kx * p.y), position) * self.tpr + self.off + self.c * p.dv
    }

    /// Twice the least distance of the pairs' delays from their
    /// intervals' ends (comparable with the fit's slack).
    fn slack(&self, pairs: &[Pair], position: f64) -> f64 {
        2.0 * pairs
            .iter()
            .map(|p| {
                let r = self.raw(p, position);
                (r - p.lo).min(p.hi - r)
            })
            .fold(f64::INFINITY, f64::min)
    }

    fn rounded(self) -> Self {
        let r = |v: f64| f64::from(v as f32);
        Self {
            kx: r(self.kx),
            tpr: r(self.tpr),
            off: r(self.off),
            c: r(self.c),
        }
    }
}

fn golden(mut lo: f64, mut hi: f64, steps: usize, f: impl Fn(f64) -> f64) -> f64 {
    const R: f64 = 0.381_966_011_250_105_1;
    let (mut m1, mut m2) = (lo + (hi - lo) * R, hi - (hi - lo) * R);
    let (mut f1, mut f2) = (f(m1), f(m2));
    for _ in 0..steps {
        if f1 > f2 {
            hi = m2;
            (m2, f2) = (m1, f1);
            m1 = lo + (hi - lo) * R;
            f1 = f(m1);
        } else {
            lo = m1;
            (m1, f1) = (m2, f2);
            m2 = hi - (hi - lo) * R;
            f2 = f(m2);
        }
    }
    0.5 * (lo + hi)
}

/// The ideal stand-in's `kx` and ticks per radian, the centres of the
/// searches.
#[derive(Debug, Clone, Copy)]
struct Start {
    kx: f64,
    tpr: f64,
    position: f64,
}

/// The largest-slack stand-in for `pairs` (all of them in the fit).
fn fit_sample(pairs: &[Pair], s: Start) -> (StandIn, f64) {
    let at_kx = |kx: f64| -> (StandIn, f64) {
        let a: Vec<f64> = pairs
            .iter()
            .map(|p| turn_on_angle(1.0 / (kx * p.y), s.position))
            .collect();
        let c = voltage_slope(pairs, &a);
        let room = |t: f64| -> (f64, f64) {
            let (mut f, mut g) = (f64::NEG_INFINITY, f64::INFINITY);
            for (p, a) in pairs.iter().zip(&a) {
                let e = a * t + c * p.dv;
                f = f.max(p.lo - e);
                g = g.min(p.hi - e);
            }
            (g - f, 0.5 * (f + g))
        };
        let t = golden(0.6 * s.tpr, 1.6 * s.tpr, 40, |t| room(t).0);
        let (slack, off) = room(t);
        (StandIn { kx, tpr: t, off, c }, slack)
    };
    let kx = golden(0.6 * s.kx, 1.6 * s.kx, 36, |k| at_kx(k).1);
    at_kx(kx)
}

/// Least-squares slope of the aims over the voltage codes, with the
/// angle and a constant: the aims' voltage dependence at a fixed ratio.
fn voltage_slope(pairs: &[Pair], a: &[f64]) -> f64 {
    let mut m = nalgebra::Matrix3::<f64>::zeros();
    let mut r = nalgebra::Vector3::<f64>::zeros();
    for (p, &a) in pairs.iter().zip(a) {
        let x = nalgebra::Vector3::new(a, p.dv, 1.0);
        m += x * x.transpose();
        r += x * p.aim;
    }
    m.lu().solve(&r).map_or(0.0, |x| x[1])
}

/// [`fit_sample`] by cutting planes over all of `pairs`; the stand-in with
/// its coefficients rounded to f32 and its slack over every pair.
fn fit_run(pairs: &[Pair], s: Start) -> (StandIn, f64) {
    let mut sel: Vec<Pair> = pairs.iter().step_by(SAMPLE).copied().collect();
    if let Some(last) = pairs.last() {
        sel.push(*last);
    }
    loop {
        let (fit, slack) = fit_sample(&sel, s);
        let fit = fit.rounded();
        let all = fit.slack(pairs, s.position);
        // Done when the sample has no room to give or every pair has it.
        if slack < TARGET_SLACK_TICKS || all >= TARGET_SLACK_TICKS {
            return (fit, all);
        }
        let before = sel.len();
        sel.extend(
            pairs
                .iter()
                .filter(|p| {
                    let r = fit.raw(p, s.position);
                    (r - p.lo).min(p.hi - r) < 0.5 * TARGET_SLACK_TICKS
                })
                .step_by(4)
                .take(1000),
        );
        if sel.len() == before {
            return (fit, all);
        }
    }
}

/// A run of a band's sorted pairs and its fit.
#[derive(Debug, Clone, Copy)]
struct Run {
    start: usize,
    end: usize,
    fit: StandIn,
    slack: f64,
}

/// The pieces of one band's sorted pairs.
fn fit_band(pairs: &[Pair], s: Start) -> Vec<Run> {
    let mut todo = vec![(0, pairs.len())];
    let mut done: Vec<Run> = Vec::new();
    while let Some((start, end)) = todo.pop() {
        let (fit, slack) = fit_run(&pairs[start..end], s);
        let run = Run {
            start,
            end,
            fit,
            slack,
        };
        if slack >= TARGET_SLACK_TICKS || end - start <= MIN_RUN {
            done.push(run);
            continue;
        }
        // Cut in the middle, never between pairs of the same ratio.
        let mut mid = (start + end) / 2;
        while mid < end && pairs[mid].y == pairs[mid - 1].y {
            mid += 1;
        }
        if mid == end {
            done.push(run);
            continue;
        }
        todo.push((mid, end));
        todo.push((start, mid));
    }
    done.sort_by_key(|r| r.start);
    // Merge neighbours while the merged piece keeps the room.
    let mut k = 0;
    while k + 1 < done.len() {
        let (a, b) = (done[k], done[k + 1]);
        let (fit, slack) = fit_run(&pairs[a.start..b.end], s);
        if slack >= TARGET_SLACK_TICKS.min(a.slack).min(b.slack) {
            done[k] = Run {
                start: a.start,
                end: b.end,
                fit,
                slack,
            };
            done.remove(k + 1);
        } else {
            k += 1;
        }
    }
    done
}

/// [`fit_pieces`] with the design's own exact model (every reading's
/// robust window computed once first).
///
/// # Errors
/// As [`fit_pieces`].
pub fn fit_design_pieces(design: &Design) -> Result<PieceSet, timing_core::Error> {
    let model = ExactModel::new(design);
    let readings = model.readings();
    let model = match &readings {
        Some(r) => model.with_readings(r),
        None => model,
    };
    fit_pieces(design, &model)
}

/// The fitted pieces of `design` from `model`. Runs on all cores.
///
/// # Errors
/// timing-core's refusal of the design's code scaling or tank (not
/// expected for a validated design).
pub fn fit_pieces(design: &Design, model: &ExactModel<'_>) -> Result<PieceSet, timing_core::Error> {
    let cf = design.closed_form()?;
    let ideal = cf.ideal_parts();
    let (vv, iv) = (design.vin_codes, design.io_codes);
    let span = vv.hi - vv.lo;
    let widest = (16 - span.leading_zeros()).min(15) as u8;
    let start = Start {
        kx: cf.kx(),
        tpr: cf.ticks_per_rad(),
        position: design.position.get(),
    };
    let attempt = |shift: u8| -> PieceSet {
        let bands = boundary_bands(design, model, shift);
        let fixed = matches!(design.fallback, Fallback::Fixed(_));
        let zvs = |cv: u16, ci: u16| {
            let (b, dv) = band_of(vv, shift, cv);
            let y = f64::from(f32::from(cv) / f32::from(ci - design.io_zero_code));
            bands
                .get(b)
                .is_some_and(|band| (y as f32) < band.zvs_y + band.zvs_y_per_code * dv as f32)
        };
        let req = Requirements::new(design, model, &|cv, ci| !fixed || zvs(cv, ci));
        let per_band = crate::par::map_rows(bands.len(), |b| {
            let first = vv.lo + ((b as u16) << shift);
            let last = first.saturating_add((1u16 << shift) - 1).min(vv.hi);
            let mut pairs: Vec<Pair> = req
                .pairs
                .iter()
                .filter(|q| q.vin >= first && q.vin <= last)
                .map(|q| {
                    let (lo, hi) = (
                        q.lo.max(q.aim - AIM_BAND_TICKS),
                        q.hi.min(q.aim + AIM_BAND_TICKS),
                    );
                    let (lo, hi) = if lo < hi { (lo, hi) } else { (q.lo, q.hi) };
                    Pair {
                        y: f64::from(f32::from(q.vin) / f32::from(q.io - design.io_zero_code)),
                        dv: band_of(vv, shift, q.vin).1,
                        lo,
                        hi,
                        aim: q.aim,
                    }
                })
                .collect();
            pairs.sort_by(|a, b| a.y.total_cmp(&b.y));
            if pairs.is_empty() {
                return Vec::new();
            }
            let runs = fit_band(&pairs, start);
            let n = runs.len();
            runs.iter()
                .enumerate()
                .map(|(k, r)| {
                    let y_end = if k + 1 < n {
                        pairs[r.end].y as f32
                    } else {
                        f32::INFINITY
                    };
                    (piece(r.fit, y_end), r.slack)
                })
                .collect::<Vec<_>>()
        });
        let mut set_bands = Vec::with_capacity(bands.len());
        let mut pieces = Vec::new();
        let mut least = f64::INFINITY;
        for (band, runs) in bands.iter().zip(per_band) {
            set_bands.push(Band {
                first: pieces.len() as u16,
                ..*band
            });
            if runs.is_empty() {
                // No pair to serve (all sent to a fixed fallback): the
                // ideal stand-in.
                pieces.extend(ideal.pieces.first().copied());
            }
            for (p, slack) in runs {
                least = least.min(slack);
                pieces.push(p);
            }
        }
        PieceSet {
            vin: vv,
            io: iv,
            io_zero: design.io_zero_code,
            band_shift: shift,
            bands: set_bands,
            pieces,
            position: design.position.get() as f32,
            max_ticks: design.timer.max_ticks().get(),
            fallback: design.fallback,
            least_slack_ticks: least,
        }
    };
    let mut shift = widest;
    let mut best = attempt(shift);
    while best.least_slack_ticks < MIN_SLACK_TICKS && shift > MIN_BAND_SHIFT && !too_big(&best) {
        shift -= 1;
        let next = attempt(shift);
        if next.least_slack_ticks > best.least_slack_ticks {
            best = next;
        }
    }
    Ok(best)
}

/// Stop halving the bands once the pieces outgrow what timing-core can
/// index.
fn too_big(set: &PieceSet) -> bool {
    set.pieces.len() > usize::from(u16::MAX) / 2
}

fn piece(s: StandIn, y_end: f32) -> Piece {
    Piece {
        y_end,
        kx: s.kx as f32,
        ticks_per_rad: s.tpr as f32,
        offset_ticks: (s.off + s.tpr * 1.5 * std::f64::consts::PI) as f32,
        ticks_per_vin_code: s.c as f32,
    }
}

/// Band of voltage code `cv` and its distance from the band's centre,
/// codes, as timing-core computes them.
fn band_of(vv: CodeRange, shift: u8, cv: u16) -> (usize, f64) {
    let from_lo = cv.clamp(vv.lo, vv.hi) - vv.lo;
    let b = usize::from(from_lo >> shift);
    let half = (1i32 << shift) >> 1;
    let dv = i32::from(from_lo) - ((b as i32) << shift) - half;
    (b, f64::from(dv))
}

/// The bands of `shift` with their ZVS tests (`first` left 0): the line
/// through the model's boundary at each band's first and last code.
fn boundary_bands(design: &Design, model: &ExactModel<'_>, shift: u8) -> Vec<Band> {
    let vv = design.vin_codes;
    let n = usize::from((vv.hi - vv.lo) >> shift) + 1;
    let top = 4.0 * f64::from(design.io_codes.hi - design.io_zero_code);
    // The boundary's ratio at voltage code `cv`: never-ZVS as 0, always
    // as a ratio above every reading's.
    let ratio = |cv: u16| -> f64 {
        let vin = design.vin_of(cv);
        let zvs = |ci: f64| {
            model
                .at(vin, ci * design.io_amps_per_code)
                .is_ok_and(|p| p.window.is_some())
        };
        let (mut lo, mut hi) = (0.5, top);
        if zvs(lo) {
            return f64::from(f32::MAX) / 4.0;
        }
        if !zvs(hi) {
            return 0.0;
        }
        while hi - lo > 0.01 {
            let mid = 0.5 * (lo + hi);
            if zvs(mid) {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        f64::from(cv) / hi
    };
    crate::par::map_rows(n, |b| {
        let first = vv.lo + ((b as u16) << shift);
        let last = first.saturating_add((1u16 << shift) - 1).min(vv.hi);
        let (y0, y1) = (ratio(first), ratio(last));
        let (d0, d1) = (band_of(vv, shift, first).1, band_of(vv, shift, last).1);
        let slope = if last > first && y0 > 0.0 && y1 > 0.0 {
            (y1 - y0) / (d1 - d0)
        } else {
            0.0
        };
        Band {
            first: 0,
            zvs_y: (y0 - slope * d0) as f32,
            zvs_y_per_code: slope as f32,
        }
    })
}
