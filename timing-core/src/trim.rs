//! Online trim: the board's offset from the model, learned every cycle from
//! the captured instant at which the switch voltage falls below a
//! comparator's threshold (a comparator on the switch node and a timer
//! input capture, common practice, no source), and added to the
//! feed-forward command.
//!
//! The feed-forward command (a table or a closed form) comes from a model;
//! a real board drifts from it with temperature and age. The capture is the
//! end of the swing as the board has it. Per region of the operating range
//! ([`Regions`]) the trim keeps a correction `c`, in 1/256 tick, that
//! follows the residual `r = capture - comparator delay - predicted
//! crossing` through a first-order low-pass (`c += (r - c) >> gain`): a
//! bounded-gain integrator whose step response settles to within 1/e in
//! `2^gain` updates of its region. The command is then `feed-forward + c`,
//! kept inside a user-set envelope around the feed-forward and never
//! before the corrected crossing `predicted + c`, rounded up.
//!
//! Faults freeze the trim (its command is then the feed-forward alone):
//! - no capture (a comparator stuck high, captures lost);
//! - a capture farther from the prediction than the plausible residual (a
//!   comparator stuck low fires at once; a glitch);
//! - noise: a residual that jumps from its region's recent mean by more
//!   than the noise limit (an implausible capture counts as noise too, so
//!   a burst of wild captures freezes at the noise limit whichever side of
//!   the plausible bound each falls).
//!
//! Each cycle's fault flags go into a ring of the last `H` cycles (a power
//! of two) with running counts a byte each in one word, so a fault's weight
//! over that window costs a constant time per cycle; the trim is frozen
//! while any count is at or above its limit, and learns again once the
//! window has cleared. Validated once ([`TrimConfig::new`], a `const fn`);
//! the per-cycle [`Trim::update`] and [`Trim::apply`] take the
//! configuration by reference (a `const` in firmware, folded into the
//! code) and cannot fail or panic. The update costs at most 40
//! instructions on the Cortex-M4F and 79 on the Cortex-M0, measured in the
//! firmware example under QEMU (a `heapless::HistoryBuffer` for the
//! history cost 71 on the Cortex-M4F in an earlier version: reading the
//! entry a write overwrites took its iterator).

use crate::error::{Error, Quantity};
use crate::Ticks;

mod regions;
pub use regions::Regions;

// The fault counts are packed in one word, a byte each (the fourth byte
// unused); a cycle's flags are the increments it adds to them (public
// for code generators, e.g. the C export).
/// A capture went missing this cycle.
pub const MISSING: u32 = 1;
/// The capture lay beyond the plausible residual.
pub const IMPLAUSIBLE: u32 = 1 << 8;
/// The residual jumped from its region's recent mean.
pub const NOISY: u32 = 1 << 16;
/// Bit 7 of each byte: set in `count + (128 - limit)` exactly when the
/// count has reached its limit (counts and limits at most 128, so no byte
/// carries into the next). One immediate operand on the Cortex-M4.
pub const OVER: u32 = 0x8080_8080;
/// The largest history window and fault limit.
pub const MAX_WINDOW: usize = 128;
/// Shift of the fast mean the noise test compares against.
pub const MEAN_SHIFT: u32 = 2;

/// Why the trim is frozen.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub enum Freeze {
    /// Too many cycles without a capture in the window.
    NoCapture,
    /// Too many captures beyond the plausible residual.
    Implausible,
    /// Too many residuals jumping from their region's mean.
    Noisy,
}

/// What the trim is doing.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub enum TrimStatus {
    /// Learning and applying its corrections.
    Learning,
    /// Frozen: the command is the feed-forward alone.
    Frozen(Freeze),
}

/// A validated trim configuration (all times in 1/256 tick).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct TrimConfig {
    gain: u8,
    envelope_q8: i32,
    comparator_q8: i32,
    /// The comparator's delay rounded to whole ticks.
    comparator_whole: i32,
    /// What rounding took off, 1/256 tick (-128 to 127).
    comparator_frac: i32,
    /// The plausible residual, whole ticks.
    plausible_whole: i32,
    noise_q8: i32,
    limits: [u16; 3],
    /// `(128 - limit) << 8*k` summed over the limits.
    bias: u32,
}

/// Whole ticks to 1/256 tick, refusing what does not fit.
const fn q8(quantity: Quantity, ticks: f32, max: f32) -> Result<i32, Error> {
    if !ticks.is_finite() {
        return Err(Error::NotFinite {
            quantity,
            value: ticks as f64,
        });
    }
    if ticks < 0.0 || ticks > max {
        return Err(Error::OutOfRange {
            quantity,
            value: ticks as f64,
            min: 0.0,
            max: max as f64,
        });
    }
    Ok((ticks * 256.0 + 0.5) as i32)
}

/// A fault limit's share of the bias: `(128 - limit)` in count byte `k`.
const fn limit_bias(limit: u16, k: u32) -> Result<u32, Error> {
    if limit == 0 || limit as usize > MAX_WINDOW {
        return Err(Error::OutOfRange {
            quantity: Quantity::TrimThreshold,
            value: limit as f64,
            min: 1.0,
            max: MAX_WINDOW as f64,
        });
    }
    Ok((128 - limit as u32) << (8 * k))
}

impl TrimConfig {
    /// The trim's settings:
    /// - `gain`: each update moves a region's correction `2^-gain` of the way
    ///   to the residual (1 to 12; 4 settles within 1/e in 16 updates);
    /// - `envelope_ticks`: the largest correction either way (0 to 4096;
    ///   rounded down to a power of two ticks, or of 1/256 tick below one
    ///   tick);
    /// - `comparator_ticks`: how much later the captured edge comes than the
    ///   command that would turn the switch on at the zero: the comparator's
    ///   and the capture's delay plus the timer's lead (the driver's
    ///   turn-on delay), since commands count to the gate signal and
    ///   captures to the edge (0 to 4096);
    /// - `plausible_ticks`: a residual beyond this is not a capture of the
    ///   opening (0 to 65536; whole ticks, rounded down);
    /// - `noise_ticks`: a residual this far from its region's recent mean
    ///   counts as noise (0 to 65536);
    /// - `limits`: counts of cycles without a capture, of implausible
    ///   captures and of noisy ones within the history window at which the
    ///   trim freezes (each 1 to [`MAX_WINDOW`]).
    ///
    /// ```
    /// # fn main() -> Result<(), timing_core::Error> {
    /// use timing_core::trim::{Trim, TrimConfig, TrimStatus};
    /// use timing_core::Ticks;
    /// let cfg = TrimConfig::new(3, 8.0, 2.0, 40.0, 6.0, [8, 8, 8])?;
    /// let mut trim: Trim<4, 32> = Trim::new();
    /// // The board opens 3 ticks later than the model predicts.
    /// for _ in 0..64 {
    ///     trim.update(&cfg, 1, Ticks::new(40), Some(Ticks::new(45)));
    /// }
    /// assert_eq!(trim.status(), TrimStatus::Learning);
    /// assert_eq!(trim.apply(&cfg, 1, Ticks::new(50), Ticks::new(40)).get(), 53);
    /// # Ok(()) }
    /// ```
    ///
    /// # Errors
    /// [`Error::OutOfRange`] or [`Error::NotFinite`] naming
    /// [`Quantity::TrimGain`], [`Quantity::TrimEnvelope`],
    /// [`Quantity::ComparatorDelay`] or [`Quantity::TrimThreshold`].
    pub const fn new(
        gain: u8,
        envelope_ticks: f32,
        comparator_ticks: f32,
        plausible_ticks: f32,
        noise_ticks: f32,
        limits: [u16; 3],
    ) -> Result<Self, Error> {
        if gain < 1 || gain > 12 {
            return Err(Error::OutOfRange {
                quantity: Quantity::TrimGain,
                value: gain as f64,
                min: 1.0,
                max: 12.0,
            });
        }
        let [missing, implausible, noisy] = limits;
        // The unused fourth byte gets the first limit's bias (it never
        // counts, so never reaches 128): with equal limits the bias is one
        // byte repeated, an immediate operand on the Cortex-M4.
        let bias = match (
            limit_bias(missing, 0),
            limit_bias(implausible, 1),
            limit_bias(noisy, 2),
            limit_bias(missing, 3),
        ) {
            (Ok(a), Ok(b), Ok(c), Ok(d)) => a | b | c | d,
            (Err(e), _, _, _) | (_, Err(e), _, _) | (_, _, Err(e), _) | (_, _, _, Err(e)) => {
                return Err(e)
            }
        };
        let envelope_q8 = match q8(Quantity::TrimEnvelope, envelope_ticks, 4096.0) {
            // Rounded down to a power of two ticks (at least 1/256 tick):
            // the correction then saturates in one instruction on the
            // Cortex-M4 (`ssat`).
            Ok(v) if v > 0 => 1 << (31 - v.leading_zeros()),
            Ok(_) => 1,
            Err(e) => return Err(e),
        };
        let comparator_q8 = match q8(Quantity::ComparatorDelay, comparator_ticks, 4096.0) {
            Ok(v) => v,
            Err(e) => return Err(e),
        };
        let plausible_q8 = match q8(Quantity::TrimThreshold, plausible_ticks, 65536.0) {
            Ok(v) => v,
            Err(e) => return Err(e),
        };
        let noise_q8 = match q8(Quantity::TrimThreshold, noise_ticks, 65536.0) {
            Ok(v) => v,
            Err(e) => return Err(e),
        };
        Ok(Self {
            gain,
            envelope_q8,
            comparator_q8,
            comparator_whole: (comparator_q8 + 128) >> 8,
            comparator_frac: ((comparator_q8 + 128) >> 8 << 8) - comparator_q8,
            plausible_whole: plausible_q8 >> 8,
            noise_q8,
            limits,
            bias,
        })
    }

    /// The gain shift: each update moves a correction `2^-gain` of the way.
    #[must_use]
    pub const fn gain(&self) -> u8 {
        self.gain
    }

    /// The envelope, ticks (in steps of 1/256 tick).
    #[must_use]
    pub fn envelope_ticks(&self) -> f32 {
        self.envelope_q8 as f32 / 256.0
    }

    /// The comparator's delay taken off each capture, ticks.
    #[must_use]
    pub fn comparator_ticks(&self) -> f32 {
        self.comparator_q8 as f32 / 256.0
    }

    /// The plausible residual, whole ticks (the setting rounded down).
    #[must_use]
    pub fn plausible_ticks(&self) -> f32 {
        self.plausible_whole as f32
    }

    /// The noise limit, ticks.
    #[must_use]
    pub fn noise_ticks(&self) -> f32 {
        self.noise_q8 as f32 / 256.0
    }

    /// The fault limits: cycles without a capture, with an implausible
    /// capture and with a noisy one in the window at which the trim freezes.
    #[must_use]
    pub const fn limits(&self) -> [u16; 3] {
        self.limits
    }

    /// The settings as the update and the command compute with them: what
    /// a code generator writes out to run the trim elsewhere (the C
    /// export).
    #[must_use]
    pub const fn integers(&self) -> TrimIntegers {
        TrimIntegers {
            gain: self.gain,
            envelope_q8: self.envelope_q8,
            comparator_whole: self.comparator_whole,
            comparator_frac: self.comparator_frac,
            plausible_whole: self.plausible_whole,
            noise_q8: self.noise_q8,
            bias: self.bias,
        }
    }
}

/// A [`TrimConfig`] as the trim's arithmetic uses it ([`TrimConfig::integers`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct TrimIntegers {
    /// The gain shift.
    pub gain: u8,
    /// The envelope, 1/256 tick (a power of two).
    pub envelope_q8: i32,
    /// The comparator's delay rounded to whole ticks.
    pub comparator_whole: i32,
    /// What that rounding took off, 1/256 tick (-128 to 127).
    pub comparator_frac: i32,
    /// The plausible residual, whole ticks.
    pub plausible_whole: i32,
    /// The noise limit, 1/256 tick.
    pub noise_q8: i32,
    /// `(128 - limit) << 8*k` summed over the fault limits `k` (missing,
    /// implausible, noisy; the fourth byte repeats the first).
    pub bias: u32,
}

/// An online trim over `R` regions with a fault history of `H` cycles: the
/// state alone. Its [`TrimConfig`] is passed to every call, so firmware
/// keeps it in a `const` and the compiler folds its settings into the
/// code (pass the same configuration every cycle).
#[derive(Debug, Clone)]
// In this order (the history first, the counts beside its index): the
// interrupt path then addresses a slot and loads the index and the counts
// in one instruction each on the Cortex-M4 (measured: one fewer than
// with the compiler's order).
#[repr(C)]
pub struct Trim<const R: usize, const H: usize> {
    /// Fault flags of the last `H` cycles (as count increments), a ring.
    history: [u32; H],
    /// Where the next cycle's flags go (taken modulo `H`).
    at: usize,
    /// Cycles among them with each flag, packed (missing, implausible,
    /// noisy; a byte each).
    counts: u32,
    /// The counts at their limits after the last update ([`OVER`] bits;
    /// 0 while learning).
    over: u32,
    /// Per region: the correction and the residual's fast mean (the noise
    /// test), 1/256 tick.
    region: [[i32; 2]; R],
}

/// Ticks as a signed count of 1/256 tick (saturating).
#[inline(always)]
fn ticks_q8(t: Ticks) -> i32 {
    let v = t.get();
    if v > (i32::MAX as u32) >> 8 {
        i32::MAX
    } else {
        (v << 8) as i32
    }
}

/// Whether `x` lies beyond `bound` either way (`0 <= bound < 2^30`): one
/// add and one unsigned compare.
#[inline(always)]
fn beyond(x: i32, bound: i32) -> bool {
    (x.wrapping_add(bound) as u32) > (bound as u32).wrapping_mul(2)
}

impl<const R: usize, const H: usize> Default for Trim<R, H> {
    fn default() -> Self {
        Self::new()
    }
}

impl<const R: usize, const H: usize> Trim<R, H> {
    /// A trim that has learnt nothing yet (every correction 0); `const`,
    /// so it can live in a `static`.
    ///
    /// The window `H` must be a power of two up to [`MAX_WINDOW`], and so
    /// must the number of regions `R` (round the count of
    /// [`Regions`] up; checked at compile time): a region index is taken
    /// modulo `R`, one mask on the interrupt path.
    #[must_use]
    pub const fn new() -> Self {
        const {
            assert!(
                H.is_power_of_two() && H <= MAX_WINDOW,
                "the trim's window is a power of two up to 128 cycles"
            );
            assert!(
                R.is_power_of_two(),
                "the trim's region count is a power of two (round the regions' count up)"
            );
        }
        Self {
            region: [[0; 2]; R],
            history: [0; H],
            at: 0,
            counts: 0,
            over: 0,
        }
    }

    /// One cycle in `region` (taken modulo `R`):
    /// the model's predicted opening, and the captured edge (`None` when
    /// no capture came). Learns from a plausible, quiet capture while the
    /// trim is not frozen ([`Trim::status`] tells). Always inlined: with a
    /// `const` configuration every setting folds into the caller's code.
    #[inline(always)]
    pub fn update(
        &mut self,
        cfg: &TrimConfig,
        region: usize,
        predicted: Ticks,
        capture: Option<Ticks>,
    ) {
        let flags = match capture {
            None => MISSING,
            Some(c) => {
                // Whole ticks first: exact while the capture and the
                // prediction lie within 2^31 ticks of each other; beyond,
                // implausible anyway (or, past the wrap, a residual as any
                // other: bounded below).
                let d = c.get().wrapping_sub(predicted.get()) as i32;
                // The residual in whole ticks, then in 1/256 tick.
                let e = d.wrapping_sub(cfg.comparator_whole);
                if beyond(e, cfg.plausible_whole) {
                    // Also a jump from the mean: a burst whose captures
                    // fall on both sides of the plausible bound freezes
                    // at the noise limit all the same.
                    IMPLAUSIBLE | NOISY
                } else if let Some([k, m]) = self.region.get_mut(region & (R - 1)) {
                    // |d| <= 2^17: |r|, |k|, |m| stay within 2^26, so
                    // nothing below overflows.
                    let r = e.wrapping_shl(8).wrapping_add(cfg.comparator_frac);
                    let jump = r.wrapping_sub(*m);
                    *m = m.wrapping_add(jump >> MEAN_SHIFT);
                    if beyond(jump, cfg.noise_q8) {
                        NOISY
                    } else {
                        if self.over == 0 {
                            // Within [-E, E - 1/256]: E a power of two, one
                            // signed saturation.
                            *k = k
                                .wrapping_add(r.wrapping_sub(*k) >> cfg.gain)
                                .max(-cfg.envelope_q8)
                                .min(cfg.envelope_q8 - 1);
                        }
                        0
                    }
                } else {
                    0
                }
            }
        };
        // The window's counts, in constant time: the flags about to drop
        // out leave them, this cycle's join them (each field never goes
        // below zero: what leaves was added when it came).
        let at = self.at & (H - 1);
        if let Some(slot) = self.history.get_mut(at) {
            self.counts = self.counts.wrapping_sub(*slot).wrapping_add(flags);
            *slot = flags;
        }
        self.at = at.wrapping_add(1);
        self.over = self.counts.wrapping_add(cfg.bias) & OVER;
    }

    /// The command for `region`: `feed_forward` plus the region's
    /// correction, no earlier than the corrected opening
    /// `predicted + correction`, within the envelope around the
    /// feed-forward, rounded up to whole ticks; the feed-forward alone
    /// while frozen (`region` is taken modulo `R`). Always inlined, as
    /// [`Trim::update`].
    #[inline(always)]
    pub fn apply(
        &self,
        cfg: &TrimConfig,
        region: usize,
        feed_forward: Ticks,
        predicted: Ticks,
    ) -> Ticks {
        let Some(&[c, _]) = self.region.get(region & (R - 1)) else {
            return feed_forward;
        };
        if self.over != 0 {
            return feed_forward;
        }
        let env = cfg.envelope_q8;
        let ff = ticks_q8(feed_forward);
        let opening = ticks_q8(predicted).saturating_add(c);
        let cmd = ff
            .saturating_add(c)
            .max(opening)
            // max then min, not `clamp`: no assertion on the bounds'
            // order, so nothing here can panic whatever the state.
            .max(ff.saturating_sub(env))
            .min(ff.saturating_add(env));
        // Rounded up: a turn-on a fraction of a tick before the opening
        // switches hard, one a fraction later inside the window only lets
        // the body diode conduct a little longer (common practice, no
        // source); next to the ZVS boundary, where the window is a tick or
        // two wide and its opening moves fast, this is what keeps the
        // commands inside it.
        let ticks = cmd.saturating_add(255) >> 8;
        Ticks::new(if ticks > 0 { ticks as u32 } else { 0 })
    }

    /// The status after the last update.
    #[must_use]
    pub fn status(&self) -> TrimStatus {
        if self.over == 0 {
            TrimStatus::Learning
        } else if self.over & (1 << 7) != 0 {
            TrimStatus::Frozen(Freeze::NoCapture)
        } else if self.over & (1 << 15) != 0 {
            TrimStatus::Frozen(Freeze::Implausible)
        } else {
            TrimStatus::Frozen(Freeze::Noisy)
        }
    }

    /// Whether the trim is learning (not frozen): one compare, for the
    /// interrupt.
    #[must_use]
    #[inline(always)]
    pub fn is_learning(&self) -> bool {
        self.over == 0
    }

    /// Region `region`'s correction, ticks (0 past the last region).
    #[must_use]
    pub fn correction_ticks(&self, region: usize) -> f32 {
        self.region
            .get(region)
            .map_or(0.0, |&[c, _]| c as f32 / 256.0)
    }

    /// Cycles in the history window with no capture, an implausible one and
    /// a noisy one (an implausible capture counts as noisy too).
    #[must_use]
    pub fn fault_counts(&self) -> [u16; 3] {
        [0, 8, 16].map(|s| ((self.counts >> s) & 0xff) as u16)
    }
}

#[cfg(feature = "defmt")]
impl<const R: usize, const H: usize> defmt::Format for Trim<R, H> {
    fn format(&self, f: defmt::Formatter<'_>) {
        defmt::write!(
            f,
            "Trim {{ status: {}, faults: {} }}",
            self.status(),
            self.fault_counts()
        );
    }
}
