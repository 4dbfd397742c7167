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
//! [`crate::tank::robust_grid`]). `L` and `U` are taken over the box's 16
//! corners (voltage, current, `l`, `k`). This is a preference, not a
//! bound: the proofs use [`crate::tank::robust_grid`]'s bounded windows. The
//! interpolation error against the ring is measured in
//! `tests/aim_grid.rs` (`cargo test -p host-tool --test aim_grid --
//! --nocapture`).

use timing_core::{CellPoint, Error};

use crate::tank::event_grid::EventGrid;
use crate::tank::real_tank::CellSolver;
use crate::tank::robust_grid::TankSpread;

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
        crate::tank::real_tank::check_cell_ranges(v, i)?;
        let count = |lo: f64, hi: f64, step: f64| ((hi / lo).ln() / step).ceil() as usize + 2;
        let (nv, ni) = (count(v.0, v.1, LN_V_STEP), count(i.0, i.1, LN_I_STEP));
        let (ln_v0, ln_i0) = (v.0.ln(), i.0.ln());
        let d_ln_v = ((v.1 / v.0).ln() / (nv - 1) as f64).max(1e-12);
        let d_ln_i = ((i.1 / i.0).ln() / (ni - 1) as f64).max(1e-12);
        // The ring's events tabulated over the range where the tank needs
        // the ring (the aim is a preference: the grid's answers serve
        // within their bound, the ring elsewhere).
        let events = match solver {
            CellSolver::Ring(r) => {
                let top = |x: f64, d: f64, n: usize| (x + d * (n - 1) as f64).exp();
                EventGrid::new(
                    r,
                    (v.0, top(ln_v0, d_ln_v, nv)),
                    (i.0, top(ln_i0, d_ln_i, ni)),
                )
                .ok()
            }
            CellSolver::Ideal(_) => None,
        };
        let rows = crate::par::map_rows(nv, |a| -> Result<Vec<[f64; 2]>, Error> {
            let va = (ln_v0 + a as f64 * d_ln_v).exp();
            (0..ni)
                .map(|b| {
                    let ib = (ln_i0 + b as f64 * d_ln_i).exp();
                    let cell = CellPoint::new(va, ib)?;
                    Ok(interval(&match events.as_ref().and_then(|g| g.at(&cell)) {
                        Some(g) => g.turn_on,
                        None => solver.transition(&cell)?.turn_on,
                    }))
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
        self.prepare(v, spread).extremes(i)
    }

    /// The grid at the two cell voltages `v` (volt) of a row of boxes
    /// over the tank `spread`, interpolated once: [`AimRow::extremes`] then
    /// interpolates along the current only.
    #[must_use]
    pub fn prepare(&self, v: (f64, f64), spread: &TankSpread) -> AimRow<'_> {
        let line = |v: f64| {
            let x = ((v.ln() - self.ln_v0) / self.d_ln_v).clamp(0.0, (self.nv - 1) as f64);
            let a = (x.floor() as usize).min(self.nv - 2);
            let s = x - a as f64;
            (0..self.ni)
                .map(|b| {
                    let (n0, n1) = (
                        self.nodes[a * self.ni + b],
                        self.nodes[(a + 1) * self.ni + b],
                    );
                    [n0[0] * (1.0 - s) + n1[0] * s, n0[1] * (1.0 - s) + n1[1] * s]
                })
                .collect()
        };
        AimRow {
            grid: self,
            lines: [line(v.0), line(v.1)],
            corners: corners_of(spread),
        }
    }
}

/// An [`AimGrid`] interpolated at the two cell voltages of a row of boxes
/// ([`AimGrid::prepare`]).
#[derive(Debug, Clone)]
pub struct AimRow<'g> {
    grid: &'g AimGrid,
    /// `[lo, hi]` along the current at the lower and the upper voltage.
    lines: [Vec<[f64; 2]>; 2],
    /// The corners of the tank spread ([`corners_of`]).
    corners: [(f64, f64); 4],
}

/// The four tank corners of `spread`: the shift of ln(current) to the
/// scaled current, `ln(sqrt(l/k))`, and the time scale `sqrt(l*k)`.
fn corners_of(spread: &TankSpread) -> [(f64, f64); 4] {
    let (l, k) = (spread.l, spread.k);
    [(l.0, k.0), (l.0, k.1), (l.1, k.0), (l.1, k.1)]
        .map(|(l, k)| (0.5 * (l / k).ln(), (l * k).sqrt()))
}

impl AimRow<'_> {
    /// `[lo, hi]` at voltage `k` (0: the lower, 1: the upper) and
    /// ln(current) `ln_i`, interpolated (clamped to the grid's range).
    fn at(&self, k: usize, ln_i: f64) -> [f64; 2] {
        let g = self.grid;
        let x = ((ln_i - g.ln_i0) / g.d_ln_i).clamp(0.0, (g.ni - 1) as f64);
        let b = (x.floor() as usize).min(g.ni - 2);
        let t = x - b as f64;
        let (n0, n1) = (self.lines[k][b], self.lines[k][b + 1]);
        [n0[0] * (1.0 - t) + n1[0] * t, n0[1] * (1.0 - t) + n1[1] * t]
    }

    /// The latest `lo` and earliest `hi` over the 16 corners of the box
    /// of this row's voltages and spread and cell currents `i` (ampere),
    /// second: as [`AimGrid::extremes`].
    #[must_use]
    pub fn extremes(&self, i: (f64, f64)) -> (f64, f64) {
        let (mut lo, mut hi) = (f64::NEG_INFINITY, f64::INFINITY);
        for ln_i in [i.0.ln(), i.1.ln()] {
            for (shift, scale) in self.corners {
                for side in 0..2 {
                    let w = self.at(side, ln_i + shift);
                    lo = lo.max(scale * w[0]);
                    hi = hi.min(scale * w[1]);
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
