//! The ideal tank's turn-on as a function of the normalised load alone,
//! tabulated once, with its error counted.
//!
//! In the ideal cell (constant capacitance, no loss) every time of the
//! transition is a function of J = I*Z0/V and the tank's w0 alone: the
//! charge T1 = Cr*V/I = 1/(J*w0), the ring angles and the ramp are
//! functions of J ([`timing_core::Transition`]). A design's exhaustive
//! verification asks for millions of code pairs, each an `asin` and a
//! `sqrt` through timing-core's validated arithmetic; [`LoadGrid`] answers
//! the same from a 1-D table in a few multiply-adds, each answer with a
//! bound on its difference from [`timing_core::Transition`].
//!
//! # Coordinates
//! - Above the boundary (J >= 1), `sigma = sqrt(J - 1)`: `w0*open = 1/J +
//!   pi + asin(1/J)` has a square-root corner at J = 1, which sigma turns
//!   into an analytic function (see [`crate::tank::event_grid`]); the width
//!   `sqrt(J^2 - 1)/w0 = sigma*sqrt(2 + sigma^2)/w0` is analytic too.
//! - Below it, `y = 1/sqrt(J)`: the charge grows as 1/J = y^2 at light
//!   load, so the valley (the charge plus a constant angle) is a quadratic
//!   in y, which a cubic holds exactly, and the ramp (J/w0 = 1/(y^2*w0))
//!   is smooth for y >= 1. A square root and a division, where a logarithm
//!   would cost a library call a reading.
//!
//! Each cell holds the four-point Lagrange cubic through its nodes (the
//! stencil shifted inward at the ends) as Horner coefficients in the
//! cell's local coordinate.
//!
//! # The bound
//! Each cell's bound is [`EPS_FACTOR`] times the largest difference
//! between the cubic and timing-core's transition found at the cell's
//! quarter points (a cubic's error peaks inside the cell), plus
//! [`ROUND_REL`] times the cell's largest time for the rounding of J from
//! a reading's V and I. The ZVS test is J >= 1 with J computed as
//! timing-core computes it, so a grid answer is on the same side of the
//! boundary as the transition. The bound is a measured one; it is tested
//! against timing-core at dense random points, the boundary's
//! neighbourhood included (`cargo test -p host-tool --test load_grid --
//! --nocapture`).

use timing_core::{CellPoint, Error, Tank, Transition, TurnOn, Valley, ZvsWindow};

/// Node spacing in sigma above the boundary.
pub const SIGMA_STEP: f64 = 0.01;
/// Node spacing in y = 1/sqrt(J) below the boundary.
pub const Y_STEP: f64 = 0.01;
/// The side below the boundary stops at this y (J = 1e-6): lighter loads
/// get no answer (the caller computes the transition).
pub const Y_MAX: f64 = 1e3;
/// Safety factor on the largest difference measured in a cell.
pub const EPS_FACTOR: f64 = 3.0;
/// Allowance for the rounding of J, relative to the cell's largest time.
pub const ROUND_REL: f64 = 1e-12;
/// The tabulated sides stop this far from the boundary (sigma above it,
/// y - 1 below): a node there has J clear of 1 by far more than its
/// rounding, so timing-core puts it on its side. Readings closer to the
/// boundary get no answer (the caller computes the transition).
pub const EDGE_SIGMA: f64 = 1e-5;
/// See [`EDGE_SIGMA`].
pub const EDGE_Y: f64 = 1e-9;
/// Most nodes on either side.
const MAX_NODES: usize = 1 << 16;

/// One side of the boundary: `Q` interpolated times per node.
#[derive(Debug, Clone)]
struct Side<const Q: usize> {
    /// Coordinate of node 0.
    c0: f64,
    /// Reciprocal of the node spacing.
    inv_h: f64,
    /// Cells (nodes less one); 0: the side is not tabulated.
    cells: usize,
    /// `cells` as a float, and the index of the last cell.
    cells_f: f64,
    last_cell: i32,
    /// Per cell: Horner coefficients (constant first) of each time, second,
    /// in the local coordinate t in [0, 1].
    coef: Vec<[[f64; 4]; Q]>,
    /// Per cell: the bound, second.
    eps: Vec<f64>,
}

impl<const Q: usize> Side<Q> {
    fn empty() -> Self {
        Self {
            c0: 0.0,
            inv_h: 1.0,
            cells: 0,
            cells_f: 0.0,
            last_cell: -1,
            coef: Vec::new(),
            eps: Vec::new(),
        }
    }

    /// Tabulate `f` (the `Q` times at coordinate `c`) from `c0` to `c1`,
    /// nodes at most `step` apart.
    fn new(
        c0: f64,
        c1: f64,
        step: f64,
        f: &dyn Fn(f64) -> Result<[f64; Q], Error>,
    ) -> Result<Self, Error> {
        let n = (((c1 - c0) / step).ceil() as usize + 1).clamp(4, MAX_NODES);
        let h = (c1 - c0) / (n - 1) as f64;
        let at = |k: f64| c0 + k * h;
        let nodes = (0..n)
            .map(|k| f(at(k as f64)))
            .collect::<Result<Vec<_>, _>>()?;
        // A node on the wrong side of the boundary (no window, or no
        // valley) would poison its cells: refuse the grid instead.
        if let Some(&bad) = nodes.iter().flatten().find(|t| !t.is_finite()) {
            return Err(Error::NotFinite {
                quantity: timing_core::Quantity::Interval,
                value: bad,
            });
        }
        let mut coef = Vec::with_capacity(n - 1);
        let mut eps = Vec::with_capacity(n - 1);
        for c in 0..n - 1 {
            // The stencil's first node, shifted inward at the ends.
            let first = c.saturating_sub(1).min(n - 4);
            let off = first as f64 - c as f64;
            let mut q = [[0.0; 4]; Q];
            for (k, qk) in q.iter_mut().enumerate() {
                let y = [0, 1, 2, 3].map(|m| nodes[first + m][k]);
                *qk = cubic_through(off, y);
            }
            let mut worst = 0.0f64;
            let mut largest = 0.0f64;
            for t in [0.25, 0.5, 0.75] {
                let exact = f(at(c as f64 + t))?;
                for k in 0..Q {
                    let d = (horner(&q[k], t) - exact[k]).abs();
                    // NaN (a check point past the boundary) makes an
                    // infinite bound: the cell never answers.
                    worst = if d.is_nan() {
                        f64::INFINITY
                    } else {
                        worst.max(d)
                    };
                    largest = largest.max(exact[k].abs());
                }
            }
            for (a, b) in nodes[c].iter().zip(&nodes[c + 1]) {
                largest = largest.max(a.abs()).max(b.abs());
            }
            coef.push(q);
            eps.push(EPS_FACTOR * worst + ROUND_REL * largest);
        }
        Ok(Self {
            c0,
            inv_h: 1.0 / h,
            cells: n - 1,
            cells_f: (n - 1) as f64,
            last_cell: (n - 2) as i32,
            coef,
            eps,
        })
    }

    /// The times at coordinate `c` and the cell's bound; `None` outside.
    #[inline]
    fn at(&self, c: f64) -> Option<([f64; Q], f64)> {
        let u = (c - self.c0) * self.inv_h;
        // Signed 32-bit conversions: one instruction each way (the side
        // has at most MAX_NODES cells).
        if !(u >= 0.0 && u <= self.cells_f) {
            return None;
        }
        let k = (u as i32).min(self.last_cell);
        self.cubics(k, u - f64::from(k))
    }

    /// The first `P` times at place `t` (0..=1) in cell `k` and the cell's
    /// bound; `None` for a cell outside the side (a negative one included).
    #[inline(always)]
    fn cubics<const P: usize>(&self, k: i32, t: f64) -> Option<([f64; P], f64)> {
        let k = usize::try_from(k).ok()?;
        let (q, eps) = (self.coef.get(k)?, *self.eps.get(k)?);
        let mut v = [0.0; P];
        for (v, p) in v.iter_mut().zip(q) {
            *v = horner(p, t);
        }
        Some((v, eps))
    }

    fn worst_eps(&self) -> f64 {
        self.eps.iter().copied().fold(0.0, f64::max)
    }
}

#[inline]
fn horner(p: &[f64; 4], t: f64) -> f64 {
    ((p[3] * t + p[2]) * t + p[1]) * t + p[0]
}

/// Monomial coefficients (constant first) of the cubic through
/// `(off + m, y[m])`, m = 0..4.
fn cubic_through(off: f64, y: [f64; 4]) -> [f64; 4] {
    let x = [0, 1, 2, 3].map(|m| off + f64::from(m));
    let mut out = [0.0; 4];
    for (m, &ym) in y.iter().enumerate() {
        // The Lagrange basis polynomial of node m, expanded.
        let mut basis = [1.0, 0.0, 0.0, 0.0];
        let mut denom = 1.0;
        for (k, &xk) in x.iter().enumerate() {
            if k == m {
                continue;
            }
            // basis *= (t - xk)
            for d in (1..4).rev() {
                basis[d] = basis[d - 1] - xk * basis[d];
            }
            basis[0] *= -xk;
            denom *= x[m] - xk;
        }
        for d in 0..4 {
            out[d] += ym * basis[d] / denom;
        }
    }
    out
}

/// Loads answered together by [`LoadGrid::at_loads`].
pub const BATCH: usize = 256;

/// Up to [`BATCH`] loads and the times a check of a commanded turn-on
/// reads at each ([`LoadGrid::at_loads`]; the ramp's end, which no check
/// reads, is left out), one array a quantity.
#[derive(Debug, Clone)]
pub struct LoadBatch {
    /// The normalised loads, filled by the caller.
    pub j: [f64; BATCH],
    /// Above the boundary (`zvs`): the window opens; below it: the valley;
    /// second, as [`LoadGrid::at_load`].
    pub first_s: [f64; BATCH],
    /// Above the boundary: the window closes (never before it opens);
    /// below it: the valley again; second.
    pub close_s: [f64; BATCH],
    /// The bound of both times, second; infinite where the grid does not
    /// answer (outside its range, next to the boundary).
    pub eps_s: [f64; BATCH],
    /// The load is at or above the boundary (J >= 1).
    pub zvs: [bool; BATCH],
    /// Scratch: each load's cell on its side (-1: outside) and place in it.
    cell: [i32; BATCH],
    place: [f64; BATCH],
}

impl Default for LoadBatch {
    fn default() -> Self {
        Self {
            j: [0.0; BATCH],
            first_s: [0.0; BATCH],
            close_s: [0.0; BATCH],
            eps_s: [0.0; BATCH],
            zvs: [false; BATCH],
            cell: [0; BATCH],
            place: [0.0; BATCH],
        }
    }
}

/// The ideal tank's turn-on over a range of J; see the module
/// documentation.
#[derive(Debug, Clone)]
pub struct LoadGrid {
    z0_ohm: f64,
    /// `[open, close, ramp end]`, second, over sigma.
    zvs: Side<3>,
    /// `[valley, ramp end]`, second, over 1/sqrt(J).
    valley: Side<2>,
}

impl LoadGrid {
    /// Tabulate `tank`'s transition for J from `j_lo` to `j_hi` (both > 0).
    ///
    /// # Errors
    /// timing-core's error at a node (a J whose times overflow), or
    /// [`Error::InvalidParameter`]-class errors for a non-positive J.
    pub fn new(tank: &Tank<f64>, j_lo: f64, j_hi: f64) -> Result<Self, Error> {
        let z0 = tank.z0_ohm();
        let at = |j: f64| Transition::new(tank, &CellPoint::new(1.0, j / z0)?);
        let zvs = if j_hi >= 1.0 {
            let s1 = (j_hi - 1.0).sqrt().max(4.0 * SIGMA_STEP);
            Side::new(EDGE_SIGMA, s1, SIGMA_STEP, &|s| {
                let t = at(1.0 + s * s)?;
                Ok(t.window()
                    .map_or([f64::NAN; 3], |w| [w.open_s, w.close_s, w.ramp_end_s]))
            })?
        } else {
            Side::empty()
        };
        let valley = if j_lo < 1.0 {
            let y1 = (1.0 / j_lo).sqrt().clamp(1.0 + 4.0 * Y_STEP, Y_MAX);
            Side::new(1.0 + EDGE_Y, y1, Y_STEP, &|y| {
                let t = at(1.0 / (y * y))?;
                Ok(t.valley()
                    .map_or([f64::NAN; 2], |v| [v.valley_s, v.ramp_end_s]))
            })?
        } else {
            Side::empty()
        };
        Ok(Self {
            z0_ohm: z0,
            zvs,
            valley,
        })
    }

    /// The turn-on at `cell` and the bound of every time in it, second;
    /// `None` outside the tabulated range (the caller computes the
    /// transition).
    #[inline]
    #[must_use]
    pub fn at(&self, cell: &CellPoint<f64>) -> Option<(TurnOn<f64>, f64)> {
        let (v, i) = (cell.v_volt(), cell.i_amp());
        // As timing-core computes J, so the ZVS test agrees.
        self.at_load(i * self.z0_ohm / v, v)
    }

    /// The turn-on at normalised load `j` in a cell of voltage `v` (volt;
    /// only the valley's voltage depends on it) and the bound of every time
    /// in it, second; `None` outside the tabulated range. The ZVS test is
    /// `j >= 1`: a caller whose J may differ from timing-core's by rounding
    /// keeps off the boundary itself ([`LoadGrid::at`] does not need to).
    #[inline]
    #[must_use]
    pub fn at_load(&self, j: f64, v: f64) -> Option<(TurnOn<f64>, f64)> {
        if j >= 1.0 {
            let ([open_s, close_s, ramp_end_s], eps) = self.zvs.at((j - 1.0).sqrt())?;
            Some((
                TurnOn::Zvs(ZvsWindow {
                    open_s,
                    close_s: close_s.max(open_s),
                    ramp_end_s,
                }),
                eps,
            ))
        } else {
            let ([valley_s, ramp_end_s], eps) = self.valley.at((1.0 / j).sqrt())?;
            Some((
                TurnOn::Valley(Valley {
                    valley_s,
                    valley_voltage_v: v * (1.0 - j),
                    ramp_end_s,
                }),
                eps,
            ))
        }
    }

    /// [`LoadGrid::at_load`]'s window or valley at each of the batch's
    /// loads (`batch.j[..n]`), into the batch: the same times, computed a
    /// batch at a time so the square roots and the cubics of neighbouring
    /// loads overlap.
    pub fn at_loads(&self, batch: &mut LoadBatch, n: usize) {
        let n = n.min(BATCH);
        // First, in a loop without branches that the compiler vectorises,
        // each load's side, cell and place in the cell, as `Side::at`
        // computes them (a cell of -1: outside the side).
        let (z, v) = (&self.zvs, &self.valley);
        for (((&j, c), t), zvs) in batch.j[..n]
            .iter()
            .zip(&mut batch.cell[..n])
            .zip(&mut batch.place[..n])
            .zip(&mut batch.zvs[..n])
        {
            *zvs = j >= 1.0;
            let s = if *zvs { j - 1.0 } else { 1.0 / j }.sqrt();
            let (c0, inv_h, cells_f, last) = if *zvs {
                (z.c0, z.inv_h, z.cells_f, z.last_cell)
            } else {
                (v.c0, v.inv_h, v.cells_f, v.last_cell)
            };
            let u = (s - c0) * inv_h;
            let inside = u >= 0.0 && u <= cells_f;
            let k = (u as i32).min(last);
            *c = if inside { k } else { -1 };
            *t = u - f64::from(k);
        }
        // Then the cubics of each load's cell.
        for k in 0..n {
            let (c, t) = (batch.cell[k], batch.place[k]);
            let found = if batch.zvs[k] {
                z.cubics::<2>(c, t)
                    .map(|([o, c], e)| ([o, if c < o { o } else { c }], e))
            } else {
                v.cubics::<1>(c, t).map(|([v], e)| ([v, v], e))
            };
            let ([a, b], eps) = found.unwrap_or(([0.0; 2], f64::INFINITY));
            batch.first_s[k] = a;
            batch.close_s[k] = b;
            batch.eps_s[k] = eps;
        }
    }

    /// Largest bound of any cell, second.
    #[must_use]
    pub fn worst_eps_s(&self) -> f64 {
        self.zvs.worst_eps().max(self.valley.worst_eps())
    }

    /// Cells tabulated (both sides).
    #[must_use]
    pub fn cells(&self) -> usize {
        self.zvs.cells + self.valley.cells
    }
}
