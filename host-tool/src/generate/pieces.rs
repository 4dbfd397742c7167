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
//! A run whose margin falls short of the target (at first
//! [`TARGET_SLACK_TICKS`]) is cut in two at its middle ratio; then
//! neighbours are merged while the merged piece keeps the margin. The
//! pieces are then checked at every pair with the firmware's own
//! arithmetic (timing-core's f32 and integer methods); a band where either
//! puts a pair outside its interval, or half a tick from its aim, is
//! fitted again with twice the target. When that does not settle, the
//! bands are halved and the fit starts again (down to bands of
//! [`MIN_BAND_SHIFT`]); the best attempt is kept and `zvs-timing verify`
//! reports what it misses.
//!
//! Cuts fall on the thresholds timing-core tests in integers (the code
//! ratio in `ratio_bits` fractional bits), and the pairs are assigned by
//! that same test, so the runtime picks the piece each pair was fitted in.
//! The fixed-point pieces are the same stand-ins rounded to their integer
//! formats, each offset centred again for the rounded constants.
//!
//! The ZVS test of each band is the line through the model's boundary
//! current at the band's first and last voltage codes (found by
//! bisection).

use timing_core::closed_form::pieces::band_offset;
use timing_core::closed_form::{
    Band, F32Piece, FastF32, FastF32Parts, FixedPiece, FixedPoint, FixedPointParts, PieceLayout,
};
use timing_core::normalized::turn_on_angle;
use timing_core::table::Fallback;
use timing_core::{AdcCode, CodeRange};

use crate::generate::fit::Requirements;
use crate::model::design::Design;
use crate::model::exact::ExactModel;

/// Each pair's delay before rounding is also held this close to the
/// design's aim, ticks (the approximation error stays under half a tick).
pub const AIM_BAND_TICKS: f64 = 0.45;

/// A piece is cut when the room left inside its pairs' intervals (the
/// width of the offsets that would serve them all) is below this, ticks,
/// at first: small, for few pieces, as the check with the firmware's
/// arithmetic asks for more room only where it is needed.
pub const TARGET_SLACK_TICKS: f64 = 0.004;

/// The approximation error the check allows, ticks (the model's own
/// bound, thousandths of a tick where the event grid answers, comes on
/// top of it in `verify`).
const APPROX_LIMIT_TICKS: f64 = 0.49;

/// Runs of fewer pairs are not cut further.
const MIN_RUN: usize = 16;

/// The narrowest bands tried: `2^MIN_BAND_SHIFT` voltage codes.
pub const MIN_BAND_SHIFT: u8 = 4;

/// Every `SAMPLE`th pair of a run starts the cutting-plane search.
const SAMPLE: usize = 32;

/// The fitted pieces of a design, owned; [`PieceSet::fast_f32`] and
/// [`PieceSet::fixed_point`] borrow them as timing-core's methods.
#[derive(Debug, Clone, PartialEq)]
pub struct PieceSet {
    vin: CodeRange,
    io: CodeRange,
    io_zero: u16,
    band_shift: u8,
    ratio_bits: u8,
    bands: Vec<Band>,
    ends: Vec<u32>,
    f32_pieces: Vec<F32Piece>,
    fixed_pieces: Result<Vec<FixedPiece>, timing_core::Error>,
    position: f64,
    max_ticks: u32,
    fallback: Fallback,
    /// Least room left inside a piece's intervals, ticks (negative: some
    /// pair of that piece is missed).
    pub least_slack_ticks: f64,
}

impl PieceSet {
    /// Which piece serves each code pair.
    #[must_use]
    pub fn layout(&self) -> PieceLayout<'_> {
        PieceLayout {
            vin: self.vin,
            io: self.io,
            io_zero: self.io_zero,
            band_shift: self.band_shift,
            ratio_bits: self.ratio_bits,
            bands: &self.bands,
            ends: &self.ends,
        }
    }

    /// The f32 method's coefficients.
    #[must_use]
    pub fn f32_parts(&self) -> FastF32Parts<'_> {
        FastF32Parts {
            layout: self.layout(),
            pieces: &self.f32_pieces,
            position: self.position as f32,
            max_ticks: self.max_ticks,
            fallback: self.fallback,
        }
    }

    /// The integer method's coefficients.
    ///
    /// # Errors
    /// A stand-in its integer formats cannot hold.
    pub fn fixed_parts(&self) -> Result<FixedPointParts<'_>, timing_core::Error> {
        let pieces = self.fixed_pieces.as_ref().map_err(|e| *e)?;
        Ok(FixedPointParts {
            layout: self.layout(),
            pieces,
            position_q15: (self.position * 32768.0).round() as u16,
            max_ticks: self.max_ticks,
            fallback: self.fallback,
        })
    }

    /// timing-core's fast f32 method on these pieces.
    ///
    /// # Errors
    /// timing-core's refusal of the coefficients (not expected: they are
    /// built finite and in order).
    pub fn fast_f32(&self) -> Result<FastF32<'_>, timing_core::Error> {
        FastF32::from_parts(self.f32_parts())
    }

    /// timing-core's integer method on these pieces.
    ///
    /// # Errors
    /// A stand-in its integer formats cannot hold, or an intermediate that
    /// would leave 32 bits somewhere in the design range (timing-core's
    /// refusal names it).
    pub fn fixed_point(&self) -> Result<FixedPoint<'_>, timing_core::Error> {
        FixedPoint::from_parts(self.fixed_parts()?)
    }

    /// Number of pieces over all bands.
    #[must_use]
    pub fn len(&self) -> usize {
        self.f32_pieces.len()
    }

    /// Whether there are no pieces (never, for a fitted set).
    #[must_use]
    pub fn is_empty(&self) -> bool {
        self.f32_pieces.is_empty()
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
    /// Voltage code and current code less the zero.
    v: u16,
    i: u16,
    /// Code ratio, as the f32 firmware computes it.
    y: f64,
    /// Voltage codes from the band's centre.
    dv: f64,
    /// The interval of the delay before rounding the fit aims inside,
    /// ticks: the pair's own, also held within [`AIM_BAND_TICKS`] of the
    /// aim.
    lo: f64,
    hi: f64,
    /// The pair's own interval (windows and error budget), ticks.
    own: (f64, f64),
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

    /// The offset centred in the room the pairs leave the other
    /// constants.
    fn centred(self, pairs: &[Pair], position: f64) -> Self {
        let (width, centre) = room(pairs.iter().map(|p| (p, self.raw(p, position) - self.off)));
        Self {
            off: if width >= 0.0 { centre } else { self.off },
            ..self
        }
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

/// The offsets that put every pair's delay (its part `e` without the
/// offset) inside its interval: their width (negative when none does)
/// and their centre, ticks.
fn room<'p>(parts: impl Iterator<Item = (&'p Pair, f64)>) -> (f64, f64) {
    let (mut f, mut g) = (f64::NEG_INFINITY, f64::INFINITY);
    for (p, e) in parts {
        f = f.max(p.lo - e);
        g = g.min(p.hi - e);
    }
    (g - f, 0.5 * (f + g))
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
    /// The largest current code less the zero (bounds the integer
    /// method's `k_shift`).
    io_span: u16,
}

/// The largest-slack stand-in for `pairs` (all of them in the fit).
fn fit_sample(pairs: &[Pair], s: Start) -> (StandIn, f64) {
    let at_kx = |kx: f64| -> (StandIn, f64) {
        let a: Vec<f64> = pairs
            .iter()
            .map(|p| turn_on_angle(1.0 / (kx * p.y), s.position))
            .collect();
        let c = voltage_slope(pairs, &a);
        let room_at = |t: f64| room(pairs.iter().zip(&a).map(|(p, a)| (p, a * t + c * p.dv)));
        let t = golden(0.6 * s.tpr, 1.6 * s.tpr, 40, |t| room_at(t).0);
        let (slack, off) = room_at(t);
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
fn fit_run(pairs: &[Pair], s: Start, target: f64) -> (StandIn, f64) {
    let mut sel: Vec<Pair> = pairs.iter().step_by(SAMPLE).copied().collect();
    if let Some(last) = pairs.last() {
        sel.push(*last);
    }
    loop {
        let (fit, slack) = fit_sample(&sel, s);
        let fit = fit.rounded();
        let all = fit.slack(pairs, s.position);
        // Done when the sample has no room to give or every pair has it.
        if slack < target || all >= target {
            return (fit, all);
        }
        let before = sel.len();
        sel.extend(
            pairs
                .iter()
                .filter(|p| {
                    let r = fit.raw(p, s.position);
                    (r - p.lo).min(p.hi - r) < 0.5 * target
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
    /// The ratio threshold at its end, `ratio_bits` fractional bits
    /// (`u32::MAX` for the band's last run).
    end_q: u32,
    fit: StandIn,
    slack: f64,
}

/// Whether pair `p`'s ratio is at or above the threshold `t`, as
/// timing-core tests it.
fn at_or_above(p: &Pair, t: u32, bits: u8) -> bool {
    (u32::from(p.v) << bits) >= t.wrapping_mul(u32::from(p.i))
}

/// Where to cut `pairs` (sorted by ratio) near their middle: the threshold
/// and the first pair at or above it, `None` when all share one quantum.
fn cut(pairs: &[Pair], bits: u8) -> Option<(u32, usize)> {
    let mid = pairs.get(pairs.len() / 2)?;
    let y = f64::from(mid.v) / f64::from(mid.i);
    let t = (y * f64::from(1u32 << bits)).ceil() as u32;
    for t in [t, t + 1] {
        let k = pairs.partition_point(|p| !at_or_above(p, t, bits));
        if k > 0 && k < pairs.len() {
            return Some((t, k));
        }
    }
    None
}

/// The pieces of one band's sorted pairs.
fn fit_band(pairs: &[Pair], s: Start, bits: u8, target: f64) -> Vec<Run> {
    let mut todo = vec![(0, pairs.len(), u32::MAX)];
    let mut done: Vec<Run> = Vec::new();
    while let Some((start, end, end_q)) = todo.pop() {
        let (fit, slack) = fit_run(&pairs[start..end], s, target);
        let run = Run {
            start,
            end,
            end_q,
            fit,
            slack,
        };
        let at = (slack < target && end - start > MIN_RUN)
            .then(|| cut(&pairs[start..end], bits))
            .flatten();
        match at {
            Some((t, k)) => {
                todo.push((start + k, end, end_q));
                todo.push((start, start + k, t));
            }
            None => done.push(run),
        }
    }
    done.sort_by_key(|r| r.start);
    // Merge neighbours while the merged piece keeps the room.
    let mut k = 0;
    while k + 1 < done.len() {
        let (a, b) = (done[k], done[k + 1]);
        let (fit, slack) = fit_run(&pairs[a.start..b.end], s, target);
        if slack >= target.min(a.slack).min(b.slack) {
            done[k] = Run {
                start: a.start,
                end: b.end,
                end_q: b.end_q,
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

/// Fractional bits of the ratio thresholds: as many as keep
/// `vin_code << bits` and every threshold times a current code inside 32
/// bits (at most 16).
fn ratio_bits(design: &Design) -> u8 {
    let (vv, iv) = (design.vin_codes, design.io_codes);
    let i_max = f64::from(iv.hi - design.io_zero_code);
    let y_max = f64::from(vv.hi) / f64::from(iv.lo - design.io_zero_code);
    let mut bits = 16u8.min(u32::from(vv.hi).leading_zeros() as u8);
    while bits > 0 && (y_max + 1.0) * f64::from(1u32 << bits) * i_max >= 4_294_967_295.0 {
        bits -= 1;
    }
    bits
}

/// The fitted pieces of `design` from `model`. Runs on all cores.
///
/// # Errors
/// timing-core's refusal of the design's code scaling or tank (not
/// expected for a validated design).
pub fn fit_pieces(design: &Design, model: &ExactModel<'_>) -> Result<PieceSet, timing_core::Error> {
    let cf = design.closed_form()?;
    let (vv, iv) = (design.vin_codes, design.io_codes);
    let span = vv.hi - vv.lo;
    let widest = (16 - span.leading_zeros()).min(15) as u8;
    let bits = ratio_bits(design);
    let position = design.position.get();
    let zero = design.io_zero_code;
    let start = Start {
        kx: cf.kx(),
        tpr: cf.ticks_per_rad(),
        position,
        io_span: iv.hi - zero,
    };
    let attempt = |shift: u8| -> PieceSet {
        let bands = boundary_bands(design, model, shift);
        let fixed = matches!(design.fallback, Fallback::Fixed(_));
        // The ZVS test as timing-core runs it (the thresholds do not
        // matter for it).
        let probe = PieceLayout {
            vin: vv,
            io: iv,
            io_zero: zero,
            band_shift: shift,
            ratio_bits: bits,
            bands: &bands,
            ends: &[],
        };
        let req = Requirements::new(design, model, &|cv, ci| {
            !fixed || probe.expects_zvs(AdcCode::new(cv), AdcCode::new(ci))
        });
        let band_pairs = crate::par::map_rows(bands.len(), |b| {
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
                    let i = q.io - zero;
                    Pair {
                        v: q.vin,
                        i,
                        y: f64::from(f32::from(q.vin) / f32::from(i)),
                        dv: band_offset_of(vv, shift, q.vin),
                        lo,
                        hi,
                        own: (q.lo, q.hi),
                        aim: q.aim,
                    }
                })
                .collect();
            pairs.sort_by(|a, b| {
                (u64::from(a.v) * u64::from(b.i)).cmp(&(u64::from(b.v) * u64::from(a.i)))
            });
            pairs
        });
        // Fit every band, check the pieces with the firmware's own
        // arithmetic (f32 and integers), and fit a band again with twice
        // the room wherever a pair falls outside its interval.
        let mut targets = vec![TARGET_SLACK_TICKS; bands.len()];
        let mut fitted: Vec<Option<Vec<Fitted>>> = vec![None; bands.len()];
        let mut set = None;
        for _ in 0..CHECK_ROUNDS {
            let todo: Vec<usize> = (0..bands.len()).filter(|&b| fitted[b].is_none()).collect();
            let done = crate::par::map_rows(todo.len(), |k| {
                let b = todo[k];
                fit_pieces_of_band(&band_pairs[b], start, bits, targets[b])
            });
            for (b, f) in todo.into_iter().zip(done) {
                fitted[b] = Some(f);
            }
            let assembled = assemble(design, &bands, &fitted, shift, bits, start);
            let missed = missed_bands(&assembled, &band_pairs);
            let clean = missed.is_empty();
            for b in missed {
                targets[b] *= 2.0;
                fitted[b] = None;
            }
            set = Some((assembled, clean));
            if clean {
                break;
            }
        }
        // `CHECK_ROUNDS` is at least one.
        match set {
            Some((s, true)) => s,
            Some((s, false)) => PieceSet {
                least_slack_ticks: s.least_slack_ticks.min(-f64::MIN_POSITIVE),
                ..s
            },
            None => assemble(design, &bands, &fitted, shift, bits, start),
        }
    };
    // Narrower bands while pieces still miss, up to MAX_ATTEMPTS, and not
    // after two attempts that gained nothing.
    let mut shift = widest;
    let mut best = attempt(shift);
    let (mut tries, mut stale) = (1, 0);
    while best.least_slack_ticks < 0.0
        && shift > MIN_BAND_SHIFT
        && tries < MAX_ATTEMPTS
        && stale < 2
        && !too_big(&best)
    {
        shift -= 1;
        tries += 1;
        let next = attempt(shift);
        if next.least_slack_ticks > best.least_slack_ticks {
            best = next;
            stale = 0;
        } else {
            stale += 1;
        }
    }
    Ok(best)
}

/// Band widths tried at most (each half the last).
const MAX_ATTEMPTS: usize = 5;

/// Rounds of fitting and checking with the firmware's arithmetic.
const CHECK_ROUNDS: usize = 6;

/// A fitted run with both methods' pieces.
type Fitted = (Run, F32Piece, Result<FixedPiece, timing_core::Error>);

/// The runs of one band's sorted pairs and their pieces.
fn fit_pieces_of_band(pairs: &[Pair], start: Start, bits: u8, target: f64) -> Vec<Fitted> {
    if pairs.is_empty() {
        return Vec::new();
    }
    fit_band(pairs, start, bits, target)
        .into_iter()
        .map(|r| {
            let run = &pairs[r.start..r.end];
            let fixed = FixedPiece::new(r.fit.kx, r.fit.tpr, r.fit.off, r.fit.c, start.io_span)
                .and_then(|p| {
                    let q = StandIn {
                        kx: p.kx(),
                        tpr: p.ticks_per_rad(),
                        off: r.fit.off,
                        c: p.ticks_per_vin_code(),
                    }
                    .centred(run, start.position);
                    FixedPiece::new(q.kx, q.tpr, q.off, q.c, start.io_span)
                });
            (r, f32_piece(r.fit), fixed)
        })
        .collect()
}

/// The piece set of the bands' fitted runs (a band without runs gets the
/// ideal stand-in).
fn assemble(
    design: &Design,
    bands: &[Band],
    fitted: &[Option<Vec<Fitted>>],
    shift: u8,
    bits: u8,
    start: Start,
) -> PieceSet {
    let mut set_bands = Vec::with_capacity(bands.len());
    let (mut ends, mut f32_pieces, mut fixed_pieces) = (Vec::new(), Vec::new(), Ok(Vec::new()));
    let mut least = f64::INFINITY;
    for (band, runs) in bands.iter().zip(fitted) {
        set_bands.push(Band {
            first: ends.len() as u16,
            ..*band
        });
        let runs = runs.as_deref().unwrap_or(&[]);
        if runs.is_empty() {
            // No pair to serve (all sent to a fixed fallback): the ideal
            // stand-in.
            let ideal = StandIn {
                kx: start.kx,
                tpr: start.tpr,
                off: -design.timer.lead_s() * design.timer.clock_hz(),
                c: 0.0,
            };
            ends.push(u32::MAX);
            f32_pieces.push(f32_piece(ideal));
            push_fixed(
                &mut fixed_pieces,
                FixedPiece::new(ideal.kx, ideal.tpr, ideal.off, 0.0, start.io_span),
            );
        }
        for (run, f, x) in runs {
            least = least.min(run.slack);
            ends.push(run.end_q);
            f32_pieces.push(*f);
            push_fixed(&mut fixed_pieces, *x);
        }
    }
    PieceSet {
        vin: design.vin_codes,
        io: design.io_codes,
        io_zero: design.io_zero_code,
        band_shift: shift,
        ratio_bits: bits,
        bands: set_bands,
        ends,
        f32_pieces,
        fixed_pieces,
        position: start.position,
        max_ticks: design.timer.max_ticks().get(),
        fallback: design.fallback,
        least_slack_ticks: least,
    }
}

/// The bands where the firmware's arithmetic (either method) puts a pair
/// outside its own interval or half a tick or more from its aim.
fn missed_bands(set: &PieceSet, band_pairs: &[Vec<Pair>]) -> Vec<usize> {
    let (Ok(fast), fixed) = (set.fast_f32(), set.fixed_point()) else {
        return Vec::new();
    };
    let missed = crate::par::map_rows(band_pairs.len(), |b| {
        band_pairs[b].iter().any(|p| {
            let (v, i) = (AdcCode::new(p.v), AdcCode::new(p.i + set.io_zero));
            let outside = |r: f64| {
                !(p.own.0..p.own.1).contains(&r) || (r - p.aim).abs() >= APPROX_LIMIT_TICKS
            };
            outside(f64::from(fast.raw_ticks(v, i).0))
                || fixed
                    .as_ref()
                    .is_ok_and(|m| outside(f64::from(m.raw_ticks_q8(v, i).0) / 256.0))
        })
    });
    (0..band_pairs.len()).filter(|&b| missed[b]).collect()
}

fn push_fixed(
    list: &mut Result<Vec<FixedPiece>, timing_core::Error>,
    p: Result<FixedPiece, timing_core::Error>,
) {
    if let Ok(l) = list {
        match p {
            Ok(p) => l.push(p),
            Err(e) => *list = Err(e),
        }
    }
}

/// Stop halving the bands once the pieces outgrow what timing-core can
/// index.
fn too_big(set: &PieceSet) -> bool {
    set.f32_pieces.len() > usize::from(u16::MAX) / 2
}

fn f32_piece(s: StandIn) -> F32Piece {
    F32Piece {
        kx: s.kx as f32,
        ticks_per_rad: s.tpr as f32,
        offset_ticks: (s.off + s.tpr * 1.5 * std::f64::consts::PI) as f32,
        ticks_per_vin_code: s.c as f32,
    }
}

/// Distance of voltage code `cv` from its band's centre, codes, as
/// timing-core measures it.
fn band_offset_of(vv: CodeRange, shift: u8, cv: u16) -> f64 {
    f64::from(band_offset(&vv, shift, cv.clamp(vv.lo, vv.hi)).1)
}

/// The bands of `shift` with their ZVS tests (`first` left 0): the line
/// through the model's boundary current at each band's first and last
/// code.
fn boundary_bands(design: &Design, model: &ExactModel<'_>, shift: u8) -> Vec<Band> {
    let vv = design.vin_codes;
    let n = usize::from((vv.hi - vv.lo) >> shift) + 1;
    let top = 4.0 * f64::from(design.io_codes.hi - design.io_zero_code);
    const FAR: f64 = (1u32 << 29) as f64;
    // The boundary's current (codes above the zero) at voltage code `cv`:
    // never-ZVS far above every reading, always-ZVS far below.
    let boundary = |cv: u16| -> f64 {
        let vin = design.vin_of(cv);
        let zvs = |ci: f64| {
            model
                .at(vin, ci * design.io_amps_per_code)
                .is_ok_and(|p| p.window.is_some())
        };
        let (mut lo, mut hi) = (0.5, top);
        if zvs(lo) {
            return -FAR / 256.0;
        }
        if !zvs(hi) {
            return FAR / 256.0;
        }
        while hi - lo > 0.01 {
            let mid = 0.5 * (lo + hi);
            if zvs(mid) {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        hi
    };
    crate::par::map_rows(n, |b| {
        let first = vv.lo + ((b as u16) << shift);
        let last = first.saturating_add((1u16 << shift) - 1).min(vv.hi);
        let (i0, i1) = (boundary(first), boundary(last));
        let (d0, d1) = (
            band_offset_of(vv, shift, first),
            band_offset_of(vv, shift, last),
        );
        let inside = |i: f64| i.abs() < FAR / 512.0;
        let slope = if last > first && inside(i0) && inside(i1) {
            (i1 - i0) / (d1 - d0)
        } else {
            0.0
        };
        // At most 2^30 over the band's reach (timing-core's bound).
        let reach = f64::from(1u32 << shift);
        let slope_q16 = (slope * 65536.0)
            .round()
            .clamp(-FAR * 2.0 / reach, FAR * 2.0 / reach);
        let centre_q8 = ((i0 - slope * d0) * 256.0)
            .round()
            .clamp(-FAR * 2.0, FAR * 2.0);
        Band {
            first: 0,
            zvs_io_q8: centre_q8 as i32,
            zvs_io_q16_per_code: slope_q16 as i32,
        }
    })
}
