//! The continuous aim where the tolerances leave no shared window: the
//! minimax turn-on over the boards and readings a box can stand for.
//!
//! # Definition
//! Every true operating point and board of a reading's box has its own
//! acceptable turn-on interval `[lo, hi]`: its ZVS window `[open, close]`,
//! or, below the ZVS boundary, its valley as a zero-width interval
//! `[valley, valley]`. Both ends are continuous across the boundary (the
//! window closes onto the valley as J falls to 1). With `L` the latest
//! `lo` and `U` the earliest `hi` over the box (the timer jitter added to
//! `L` and taken off `U`):
//!
//! - `L <= U`: some turn-on suits every board; the aim is `L +
//!   position*(U - L)`, as inside a robust window;
//! - `L > U`: no turn-on suits every board; the aim is `(L + U)/2`, the
//!   point whose largest distance to any board's interval is least.
//!
//! Both branches give `L` at `L = U`, so the aim moves continuously with
//! the reading wherever `L` and `U` do.
//!
//! # Method and accuracy
//! `lo` and `hi` of the nominal tank sit on a grid uniform in ln(cell
//! voltage) and ln(cell current) and are interpolated bilinearly; a board
//! with Lr times `l` and capacitance times `k` has `sqrt(l*k)` times the
//! nominal times at the current `I*sqrt(l/k)` (the scaling law of
//! [`crate::robust_grid`]). `L` and `U` are taken over the box's 16
//! corners (voltage, current, `l`, `k`). This is a preference, not a
//! bound: the proofs use [`crate::robust_grid`]'s bounded windows. The
//! interpolation error against the ring is measured in
//! `tests/aim_grid.rs` (`cargo test -p host-tool --test aim_grid --
//! --nocapture`).

use timing_core::{CellPoint, Error};

use crate::real_tank::CellSolver;
use crate::robust_grid::TankSpread;

/// Grid spacing in ln(cell current).
const LN_I_STEP: f64 = 2.5e-3;
/// Grid spacing in ln(cell voltage).
const LN_V_STEP: f64 = 0.01;

/// `lo` and `hi` of the nominal tank on a grid of cell voltage and current.
#[derive(Debug, Clone)]
pub struct AimGrid {
    ln_v0: f64,
    d_ln_v: f64,
    nv: usize,
    ln_i0: f64,
    d_ln_i: f64,
    ni: usize,
    /// `[lo, hi]` at node (a, b), index `a*ni + b`, second.
    nodes: Vec<[f64; 2]>,
}

/// The acceptable turn-on interval of one transition: its window, or its
/// valley as a point, second from gate turn-off.
#[must_use]
pub fn interval(turn_on: &timing_core::TurnOn<f64>) -> [f64; 2] {
    match turn_on {
        timing_core::TurnOn::Zvs(w) => [w.open_s, w.close_s],
        timing_core::TurnOn::Valley(v) => [v.valley_s, v.valley_s],
    }
}

impl AimGrid {
    /// The grid of `solver` over cell voltages `v` and cell currents `i`
    /// (both positive ranges, volt and ampere), computed on all cores.
    ///
    /// # Errors
    /// timing-core's error for a point the model refuses.
    pub fn new(solver: &CellSolver<'_>, v: (f64, f64), i: (f64, f64)) -> Result<Self, Error> {
        let bad = |q, x: f64| Error::NotPositive {
            quantity: q,
            value: x,
        };
        if !(v.0 > 0.0 && v.1 >= v.0 && v.1.is_finite()) {
            return Err(bad(timing_core::Quantity::CellVoltage, v.0));
        }
        if !(i.0 > 0.0 && i.1 >= i.0 && i.1.is_finite()) {
            return Err(bad(timing_core::Quantity::CellCurrent, i.0));
        }
        let count = |lo: f64, hi: f64, step: f64| ((hi / lo).ln() / step).ceil() as usize + 2;
        let (nv, ni) = (count(v.0, v.1, LN_V_STEP), count(i.0, i.1, LN_I_STEP));
        let (ln_v0, ln_i0) = (v.0.ln(), i.0.ln());
        let d_ln_v = ((v.1 / v.0).ln() / (nv - 1) as f64).max(1e-12);
        let d_ln_i = ((i.1 / i.0).ln() / (ni - 1) as f64).max(1e-12);
        let rows = crate::par::map_rows(nv, |a| -> Result<Vec<[f64; 2]>, Error> {
            let va = (ln_v0 + a as f64 * d_ln_v).exp();
            (0..ni)
                .map(|b| {
                    let ib = (ln_i0 + b as f64 * d_ln_i).exp();
                    Ok(interval(
                        &solver.transition(&CellPoint::new(va, ib)?)?.turn_on,
                    ))
                })
                .collect()
        });
        let mut nodes = Vec::with_capacity(nv * ni);
        for r in rows {
            nodes.extend(r?);
        }
        Ok(Self {
            ln_v0,
            d_ln_v,
            nv,
            ln_i0,
            d_ln_i,
            ni,
            nodes,
        })
    }

    /// `[lo, hi]` of the nominal tank at cell voltage `v` and current `i`,
    /// interpolated (clamped to the grid's range), second.
    #[must_use]
    pub fn at(&self, v: f64, i: f64) -> [f64; 2] {
        let locate = |x: f64, n: usize| {
            let x = x.clamp(0.0, (n - 1) as f64);
            let k = (x.floor() as usize).min(n - 2);
            (k, x - k as f64)
        };
        let (a, s) = locate((v.ln() - self.ln_v0) / self.d_ln_v, self.nv);
        let (b, t) = locate((i.ln() - self.ln_i0) / self.d_ln_i, self.ni);
        let n = |a: usize, b: usize| self.nodes[a * self.ni + b];
        let (n00, n01, n10, n11) = (n(a, b), n(a, b + 1), n(a + 1, b), n(a + 1, b + 1));
        let mix = |f: usize| {
            (n00[f] * (1.0 - t) + n01[f] * t) * (1.0 - s) + (n10[f] * (1.0 - t) + n11[f] * t) * s
        };
        [mix(0), mix(1)]
    }

    /// The latest `lo` and earliest `hi` over the 16 corners of the box
    /// (cell voltages `v`, cell currents `i`, the tank `spread`), second;
    /// `(L, U)` of the module's definition before the jitter.
    #[must_use]
    pub fn extremes(&self, v: (f64, f64), i: (f64, f64), spread: &TankSpread) -> (f64, f64) {
        let (mut lo, mut hi) = (f64::NEG_INFINITY, f64::INFINITY);
        for vv in [v.0, v.1] {
            for ii in [i.0, i.1] {
                for l in [spread.l.0, spread.l.1] {
                    for k in [spread.k.0, spread.k.1] {
                        let w = self.at(vv, ii * (l / k).sqrt());
                        let scale = (l * k).sqrt();
                        lo = lo.max(scale * w[0]);
                        hi = hi.min(scale * w[1]);
                    }
                }
            }
        }
        (lo, hi)
    }
}

/// The minimax aim of the module's definition from the latest opening
/// `lo` and the earliest close `hi` (second, jitter already applied) and
/// the preferred `position` (0..1) inside a shared window.
#[must_use]
pub fn minimax(lo: f64, hi: f64, position: f64) -> f64 {
    if lo <= hi {
        lo + position * (hi - lo)
    } else {
        0.5 * (lo + hi)
    }
}
