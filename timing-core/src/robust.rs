//! The robust ZVS window: the intersection of the true windows over an
//! uncertainty box of tank tolerances and sensing errors, proven rather
//! than sampled.
//!
//! With T = sqrt(Lr*Cr) and J = Io*Z0/Vin = (Io/Vin)*sqrt(Lr/Cr) (every
//! cell), the window opens at `T*f(J)` and closes at `T*g(J)` after gate
//! turn-off, with `f(J) = 1/J + pi + asin(1/J)` and
//! `g(J) = f(J) + sqrt(J^2 - 1)` (DESIGN.md section 2). The box is
//! Lr in `Lr0*(1 +- a)`, Cr in `Cr0*(1 +- b)`, and the true ratio Io/Vin in
//! `r0*(1 - e_i)/(1 + e_v) .. r0*(1 + e_i)/(1 - e_v)` for relative
//! sensing errors `e_v`, `e_i` of the measured Vin and Io.
//!
//! - Opening, the latest over the box: `f` decreases with J (f' = -(1 + 1/sqrt(1 - x^2))/J^2 < 0),
//!   so the latest opening has the smallest ratio and, as T*f grows with
//!   Cr at fixed Lr (T up, J down), the largest Cr; along Lr,
//!   `sqrt(Lr)*f(k*sqrt(Lr))` has the derivative sign of
//!   `pi + asin(x) - x/sqrt(1 - x^2)` (x = 1/J), which falls as x rises, so
//!   it is quasi-convex in Lr and its largest value is at an end. The latest
//!   opening is the larger of the two corners: exact.
//! - Close, the earliest over the box: `g` is unimodal in J with its least
//!   value at J* = sqrt((1 + sqrt 5)/2) (g' = sqrt(J^2 - 1)/J - 1/J^2), so for
//!   given Lr, Cr the smallest g over the ratio range is at J* clamped to
//!   the range: exact. Over (Lr, Cr) a branch-and-bound on sub-boxes: a
//!   sub-box's lower bound is `T_lo * min g` over its whole range of J, a
//!   valid bound because T and g are positive; boxes whose bound exceeds
//!   the best value found are dropped, the rest split, until the bound and
//!   the best value agree within [`ROBUST_TOLERANCE`] (relative). The
//!   returned close is the lower bound: never later than the true earliest
//!   close.
//!
//! Timer jitter (peak) shrinks the robust window at both ends.

use crate::error::{non_negative, Error, Quantity};
use crate::normalized as n;
use crate::{CellPoint, Real, Tank};

/// Relative agreement of the branch-and-bound's bound and best value at
/// which the earliest close is accepted (the result is the bound, on the
/// safe side).
pub const ROBUST_TOLERANCE: f64 = 1e-9;

/// Tolerances and sensing errors: the uncertainty box around a nominal
/// tank and a sensed operating point.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct Uncertainty<F> {
    lr_rel: F,
    cr_rel: F,
    vin_rel: F,
    io_rel: F,
    jitter_s: F,
}

impl<F: Real> Uncertainty<F> {
    /// Relative tolerances of Lr and Cr, relative errors of the sensed Vin
    /// and Io (gain errors, as fractions: 0.05 for 5 %), and the timer's
    /// peak jitter, second.
    ///
    /// # Errors
    /// [`Error::OutOfRange`] naming the quantity for a fraction outside
    /// [0, 0.5]; [`Error::Negative`] / [`Error::NotFinite`] for the jitter.
    pub fn new(lr_rel: F, cr_rel: F, vin_rel: F, io_rel: F, jitter_s: F) -> Result<Self, Error> {
        let frac = |q: Quantity, v: F| {
            if v.is_finite() && v >= F::ZERO && v <= F::HALF {
                Ok(v)
            } else {
                Err(Error::OutOfRange {
                    quantity: q,
                    value: v.to_f64(),
                    min: 0.0,
                    max: 0.5,
                })
            }
        };
        Ok(Self {
            lr_rel: frac(Quantity::ResonantInductance, lr_rel)?,
            cr_rel: frac(Quantity::ResonantCapacitance, cr_rel)?,
            vin_rel: frac(Quantity::InputVoltage, vin_rel)?,
            io_rel: frac(Quantity::OutputCurrent, io_rel)?,
            jitter_s: non_negative(Quantity::Interval, jitter_s)?,
        })
    }

    /// No uncertainty.
    #[must_use]
    pub fn none() -> Self {
        Self {
            lr_rel: F::ZERO,
            cr_rel: F::ZERO,
            vin_rel: F::ZERO,
            io_rel: F::ZERO,
            jitter_s: F::ZERO,
        }
    }

    /// Relative tolerance of Lr.
    #[must_use]
    pub fn lr_rel(&self) -> F {
        self.lr_rel
    }
    /// Relative tolerance of Cr.
    #[must_use]
    pub fn cr_rel(&self) -> F {
        self.cr_rel
    }
    /// Relative error of the sensed Vin.
    #[must_use]
    pub fn vin_rel(&self) -> F {
        self.vin_rel
    }
    /// Relative error of the sensed Io.
    #[must_use]
    pub fn io_rel(&self) -> F {
        self.io_rel
    }
    /// Peak timer jitter, second.
    #[must_use]
    pub fn jitter_s(&self) -> F {
        self.jitter_s
    }
}

/// The robust window, second from gate turn-off.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct RobustWindow<F> {
    /// The latest opening over the box, plus the jitter.
    pub open_s: F,
    /// The earliest close over the box, less the jitter.
    pub close_s: F,
}

/// A sub-box of (Lr, Cr) with its lower bound on the close.
type SubBox<F> = ((F, F), (F, F), F);

/// The box in (Lr, Cr, Io/Vin).
#[derive(Clone, Copy)]
struct Bounds<F> {
    l: (F, F),
    c: (F, F),
    r: (F, F),
}

/// g(J) = f(J) + sqrt(J^2 - 1), the close angle (J >= 1).
fn close_angle<F: Real>(j: F) -> F {
    n::window_close_angle(j)
}

/// The least g over [j_lo, j_hi] (both >= 1): at J* clamped to the range.
fn min_close_angle<F: Real>(j_lo: F, j_hi: F) -> F {
    let golden = (F::ONE + F::from_f64(5.0).sqrt()) * F::HALF;
    let star = golden.sqrt();
    let j = if star < j_lo {
        j_lo
    } else if star > j_hi {
        j_hi
    } else {
        star
    };
    close_angle(j)
}

/// The robust window of `cell` (the sensed point) in `tank` under `u`,
/// `None` where some point of the box has no ZVS window or the intersection
/// is empty.
///
/// # Errors
/// [`Error::Overflow`] when a bound does not fit the float type.
pub fn robust_window<F: Real>(
    tank: &Tank<F>,
    cell: &CellPoint<F>,
    u: &Uncertainty<F>,
) -> Result<Option<RobustWindow<F>>, Error> {
    let (l0, c0) = (tank.lr_h(), tank.cr_f());
    let r0 = cell.i_amp() / cell.v_volt();
    let b = Bounds {
        l: (l0 * (F::ONE - u.lr_rel), l0 * (F::ONE + u.lr_rel)),
        c: (c0 * (F::ONE - u.cr_rel), c0 * (F::ONE + u.cr_rel)),
        r: (
            r0 * (F::ONE - u.io_rel) / (F::ONE + u.vin_rel),
            r0 * (F::ONE + u.io_rel) / (F::ONE - u.vin_rel),
        ),
    };
    let j_of = |l: F, c: F, r: F| r * (l / c).sqrt();
    // ZVS at every point: the smallest J over the box is at least 1.
    if j_of(b.l.0, b.c.1, b.r.0) < F::ONE {
        return Ok(None);
    }
    // Latest opening: smallest ratio, largest Cr, an end of the Lr range.
    let open_at = |l: F| (l * b.c.1).sqrt() * n::window_open_angle(j_of(l, b.c.1, b.r.0));
    let o1 = open_at(b.l.0);
    let o2 = open_at(b.l.1);
    let open = if o1 > o2 { o1 } else { o2 };
    let close = earliest_close(&b);
    let open = crate::error::derived(Quantity::Interval, open + u.jitter_s)?;
    let close = close - u.jitter_s;
    if !close.is_finite() {
        return Err(Error::Overflow {
            quantity: Quantity::Interval,
        });
    }
    Ok((close >= open).then_some(RobustWindow {
        open_s: open,
        close_s: close,
    }))
}

/// The earliest close over the box by branch-and-bound over (Lr, Cr), the
/// ratio handled exactly; returns the proven lower bound.
fn earliest_close<F: Real>(b: &Bounds<F>) -> F {
    const CAP: usize = 256;
    // A sub-box's lower bound.
    let lower = |l: (F, F), c: (F, F)| {
        let t = (l.0 * c.0).sqrt();
        let j_lo = b.r.0 * (l.0 / c.1).sqrt();
        let j_hi = b.r.1 * (l.1 / c.0).sqrt();
        t * min_close_angle(j_lo, j_hi)
    };
    // The close at a point, least over the ratio range.
    let at = |l: F, c: F| {
        let s = (l / c).sqrt();
        (l * c).sqrt() * min_close_angle(b.r.0 * s, b.r.1 * s)
    };
    let mut boxes: [Option<SubBox<F>>; CAP] = [None; CAP];
    boxes[0] = Some((b.l, b.c, lower(b.l, b.c)));
    let mut best = at(b.l.0, b.c.0);
    for (l, c) in [(b.l.0, b.c.1), (b.l.1, b.c.0), (b.l.1, b.c.1)] {
        let v = at(l, c);
        if v < best {
            best = v;
        }
    }
    let tol = F::from_f64(ROBUST_TOLERANCE);
    for _ in 0..20_000 {
        // The open sub-box with the least bound.
        let mut pick: Option<(usize, F)> = None;
        for (k, slot) in boxes.iter().enumerate() {
            if let Some((_, _, lb)) = slot {
                if pick.is_none_or(|(_, p)| *lb < p) {
                    pick = Some((k, *lb));
                }
            }
        }
        let Some((k, lb)) = pick else {
            return best;
        };
        if best - lb <= tol * best {
            // Every point lies in a dropped box (values >= best) or an open
            // one (values >= lb): the least is at least min(lb, best).
            return if lb < best { lb } else { best };
        }
        let Some(Some((l, c, _))) = boxes.get(k).copied() else {
            return lb;
        };
        if let Some(s) = boxes.get_mut(k) {
            *s = None;
        }
        let lm = (l.0 + l.1) * F::HALF;
        let cm = (c.0 + c.1) * F::HALF;
        let v = at(lm, cm);
        if v < best {
            best = v;
        }
        for (ls, cs) in [
            ((l.0, lm), (c.0, cm)),
            ((lm, l.1), (c.0, cm)),
            ((l.0, lm), (cm, c.1)),
            ((lm, l.1), (cm, c.1)),
        ] {
            let child = lower(ls, cs);
            if child < best {
                match boxes.iter_mut().find(|s| s.is_none()) {
                    Some(free) => *free = Some((ls, cs, child)),
                    // Out of room: keep the parent's bound, which covers
                    // the child (still a valid lower bound).
                    None => {
                        if let Some(s) = boxes.get_mut(k) {
                            *s = Some((l, c, lb));
                        }
                        return global_lower(&boxes, lb);
                    }
                }
            }
        }
    }
    global_lower(&boxes, best)
}

/// The least bound among the open sub-boxes (or `fallback` if none).
fn global_lower<F: Real>(boxes: &[Option<SubBox<F>>], fallback: F) -> F {
    let mut m = fallback;
    for (_, _, lb) in boxes.iter().flatten() {
        if *lb < m {
            m = *lb;
        }
    }
    m
}
