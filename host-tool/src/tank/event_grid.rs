//! The ring's events at interpolation speed, with their error counted.
//!
//! timing-core's numerical ring ([`timing_core::ring`]) takes a few
//! microseconds a transition; tables and their proofs ask for millions.
//! [`EventGrid`] integrates the ring once per design at the nodes of a grid
//! over the cell's voltage and current, and answers between them by
//! interpolation, each answer with a bound on its difference from the ring.
//! Where the bound cannot be had (next to the ZVS boundary, or where the
//! checks below find the interpolant poor) it answers nothing and the
//! caller runs the ring for that point.
//!
//! # Coordinates
//! - Rows: uniform in ln V, [`LN_V_STEP`] apart. At each row the ZVS
//!   boundary current Ib(V) comes from timing-core
//!   ([`RingCell::boundary_current_a`]: the energy balance without loss, a
//!   bisection with it); between rows ln Ib is interpolated in ln V.
//! - Above the boundary the column coordinate is `sigma = sqrt(I/Ib(V) -
//!   1)`, which keeps the boundary on a grid line and turns the
//!   square-root opening of the window there into a smooth function: in the
//!   ideal cell `w0*open = x + pi + asin(x)` with `x = 1/J`, and
//!   `asin(1 - e) = pi/2 - sqrt(2e) + O(e^1.5)` with `e = sigma^2/(1 +
//!   sigma^2)`, so `open` and the width `sqrt(J^2 - 1)/w0 = sigma*sqrt(2 +
//!   sigma^2)/w0` are analytic in sigma (derived here, no source).
//! - Below it the column coordinate is `y = ln(I/Ib(V))`: the valley time
//!   grows as 1/I at light load (the linear charge).
//!
//! Values between nodes come from the tensor product of four-point
//! Lagrange cubics along both axes (the stencil shifted inward at the
//! grid's ends).
//!
//! # The bound
//! Each grid cell's bound is [`EPS_FACTOR`] times the largest difference
//! between the interpolant and the ring found at five points of the cell
//! (its centre and the midpoints of its four edges, where a cubic's error
//! peaks), plus [`RING_REL`] times the cell's largest time (the ring's own
//! step-placement noise, about 1e-7 relative, module doc of
//! [`timing_core::ring`]). A check point that the ring puts on the other
//! side of the boundary makes its cells ring cells. Queries within the
//! boundary's band (the interpolated Ib's largest error at the row
//! midpoints, times [`EPS_FACTOR`], plus [`BOUNDARY_REL`] for the ring's
//! own integration error near the boundary) also get no
//! answer, so a grid answer never puts a point on the wrong side of the
//! boundary. The bound is a measured one, not a derivative bound; it is
//! tested against the ring at dense random points, the band around the
//! boundary included (`cargo test -p host-tool --test event_grid --
//! --nocapture`).
//!
//! Over 500 lines: building the grid and bounding its cells share the
//! node layout, which stays private to this file.

use timing_core::ring::{clamp_time_s, RingCell};
use timing_core::{CellPoint, Error, TurnOn, Valley, ZvsWindow};

/// Row spacing in ln(cell voltage).
pub const LN_V_STEP: f64 = 0.02;
/// Column spacing in sigma above the boundary.
pub const SIGMA_STEP: f64 = 0.02;
/// Column spacing in ln(I/Ib) below the boundary.
pub const LN_I_STEP: f64 = 0.02;
/// Safety factor on the largest difference measured in a cell.
pub const EPS_FACTOR: f64 = 3.0;
/// The ring's own noise allowance, relative to the cell's largest time.
pub const RING_REL: f64 = 2e-5;
/// Where the ring itself puts the boundary, relative to timing-core's
/// boundary current: the allowance added to the band.
pub const BOUNDARY_REL: f64 = 2e-5;
/// Most nodes along any axis.
const MAX_NODES: usize = 4096;

/// One side of the boundary: columns, node values and cell bounds.
#[derive(Debug, Clone, Default)]
struct Side {
    /// Column coordinate of node 0.
    c0: f64,
    /// Column coordinate of the last node (exactly, so the boundary
    /// line is 0 on either side).
    c1: f64,
    /// Column spacing.
    h: f64,
    /// Columns (0: the side is not in the grid).
    n: usize,
    /// `[open, close]` above the boundary, `[valley time, valley voltage]`
    /// below, second and volt; index `a*n + c`.
    nodes: Vec<[f64; 2]>,
    /// Bound of the cell (a, c), second; index `a*(n - 1) + c`; infinite:
    /// a ring cell.
    eps: Vec<f64>,
}

/// A transition from the grid: the window or the valley, and the bound on
/// the difference of every time in it from the ring's, second.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GridTurnOn {
    /// The window (with the ramp's end) or the valley.
    pub turn_on: TurnOn<f64>,
    /// Bound on the difference of each time from the ring's, second (the
    /// valley voltage is interpolated too but not bounded).
    pub eps_s: f64,
}

/// The ring's events on a grid of cell voltage and current; see the module
/// documentation.
#[derive(Debug, Clone)]
pub struct EventGrid {
    lr_h: f64,
    r_ohm: f64,
    /// ln V of row 0.
    x0: f64,
    /// Row spacing in ln V.
    hx: f64,
    /// Rows (1: a single voltage).
    nv: usize,
    /// ln Ib at each row.
    ln_ib: Vec<f64>,
    /// Relative half-width of the band around the interpolated boundary
    /// where the grid does not answer.
    band: f64,
    zvs: Side,
    valley: Side,
}

/// A four-point Lagrange stencil along one axis.
#[derive(Debug, Clone, Copy)]
struct Stencil {
    /// Its first node.
    first: usize,
    /// The cell holding the point.
    cell: usize,
    /// The weights of nodes `first..first + 4`.
    w: [f64; 4],
}

/// The four-point stencil at grid coordinate `u` (node units) on `n`
/// nodes (1, or at least 4); `None` outside the nodes.
fn stencil(u: f64, n: usize) -> Option<Stencil> {
    if n == 1 {
        return (u.abs() <= 1e-6).then_some(Stencil {
            first: 0,
            cell: 0,
            w: [1.0, 0.0, 0.0, 0.0],
        });
    }
    let last = (n - 1) as f64;
    if !(u >= -1e-9 && u <= last + 1e-9) || n < 4 {
        return None;
    }
    let u = u.clamp(0.0, last);
    let cell = (u.floor() as usize).min(n - 2);
    let first = cell.saturating_sub(1).min(n - 4);
    let t = u - first as f64;
    Some(Stencil {
        first,
        cell,
        w: [
            -(t - 1.0) * (t - 2.0) * (t - 3.0) / 6.0,
            t * (t - 2.0) * (t - 3.0) / 2.0,
            -t * (t - 1.0) * (t - 3.0) / 2.0,
            t * (t - 1.0) * (t - 2.0) / 6.0,
        ],
    })
}

/// Nodes for a span of `len` at spacing `step`: 1 for an empty span, else
/// at least 4.
fn count(len: f64, step: f64) -> usize {
    if len <= 0.0 {
        1
    } else {
        ((len / step).ceil() as usize + 1).clamp(4, MAX_NODES)
    }
}

impl Side {
    fn new(c0: f64, c1: f64, step: f64) -> Self {
        let n = count(c1 - c0, step).max(4);
        Self {
            c0,
            c1,
            h: (c1 - c0) / (n - 1) as f64,
            n,
            nodes: Vec::new(),
            eps: Vec::new(),
        }
    }

    fn coord(&self, c: f64) -> f64 {
        if c == (self.n - 1) as f64 {
            self.c1
        } else {
            self.c0 + c * self.h
        }
    }

    /// The interpolant at row stencil `row` and column coordinate `u`
    /// (node units), with the column cell.
    fn interp(&self, row: &Stencil, u: f64) -> Option<([f64; 2], usize)> {
        let col = stencil(u, self.n)?;
        let mut acc = [0.0; 2];
        for (ka, &w_a) in row.w.iter().enumerate() {
            if w_a == 0.0 {
                continue;
            }
            let base = (row.first + ka) * self.n + col.first;
            for (kc, &w_c) in col.w.iter().enumerate() {
                let node = self.nodes.get(base + kc)?;
                let w = w_a * w_c;
                acc[0] += w * node[0];
                acc[1] += w * node[1];
            }
        }
        Some((acc, col.cell))
    }
}

/// Where a check point sits on the grid: row coordinate (node units) and
/// column coordinate (node units).
#[derive(Debug, Clone, Copy)]
struct Check {
    a: f64,
    c: f64,
}

impl EventGrid {
    /// The grid of `ring` over cell voltages `v` and cell currents `i`
    /// (volt and ampere, positive ranges), computed on all cores.
    ///
    /// # Errors
    /// timing-core's error for a point the ring refuses (a loop that drops
    /// the whole cell voltage, a boundary no current below V/R reaches):
    /// the caller then runs the ring everywhere.
    pub fn new(ring: &RingCell<'_, f64>, v: (f64, f64), i: (f64, f64)) -> Result<Self, Error> {
        crate::tank::real_tank::check_cell_ranges(v, i)?;
        let span = (v.1 / v.0).ln();
        let nv = if span < 1e-9 {
            1
        } else {
            count(span, LN_V_STEP)
        };
        let x0 = v.0.ln();
        let hx = if nv > 1 { span / (nv - 1) as f64 } else { 0.0 };
        let row_v = |a: f64| (x0 + a * hx).exp();
        let ib: Vec<f64> = crate::par::map_rows(nv, |a| ring.boundary_current_a(row_v(a as f64)))
            .into_iter()
            .collect::<Result<_, _>>()?;
        let mut g = Self {
            lr_h: ring.lr_h(),
            r_ohm: ring.r_tank_ohm(),
            x0,
            hx,
            nv,
            ln_ib: ib.iter().map(|x| x.ln()).collect(),
            band: 0.0,
            zvs: Side::default(),
            valley: Side::default(),
        };
        // The band: the interpolated boundary against the ring's at the
        // row midpoints.
        let mids = crate::par::map_rows(nv.saturating_sub(1), |a| {
            let va = row_v(a as f64 + 0.5);
            let interp = g.boundary_at(va.ln()).map_or(f64::NAN, |(ib, _)| ib);
            ring.boundary_current_a(va)
                .map(|t| (interp / t - 1.0).abs())
        });
        let mut worst = 0.0f64;
        for m in mids {
            worst = worst.max(m?);
        }
        if !worst.is_finite() {
            return Err(Error::NotPositive {
                quantity: timing_core::Quantity::CellCurrent,
                value: worst,
            });
        }
        // The ring's own boundary differs from the energy balance's (and
        // from the bisection's) by its integration error: about 1e-6
        // relative measured; 2e-5 leaves room.
        g.band = EPS_FACTOR * worst + BOUNDARY_REL;
        let (ib_lo, ib_hi) = ib
            .iter()
            .fold((f64::INFINITY, 0.0f64), |(l, h), &x| (l.min(x), h.max(x)));
        let (lo, hi) = (ib_lo * (1.0 - g.band), ib_hi * (1.0 + g.band));
        if i.1 > lo {
            g.zvs = Side::new(0.0, (i.1 / lo - 1.0).sqrt() * (1.0 + 1e-9), SIGMA_STEP);
        }
        if i.0 < hi {
            let y0 = (i.0 / hi).ln() * (1.0 + 1e-9);
            g.valley = Side::new(y0, 0.0, LN_I_STEP);
        }
        // Nodes, row by row.
        let rows = crate::par::map_rows(nv, |a| -> Result<_, Error> {
            let va = row_v(a as f64);
            let zvs = (0..g.zvs.n)
                .map(|c| g.ring_at(ring, va, ib[a], true, g.zvs.coord(c as f64)))
                .collect::<Result<Vec<_>, _>>()?;
            let valley = (0..g.valley.n)
                .map(|c| g.ring_at(ring, va, ib[a], false, g.valley.coord(c as f64)))
                .collect::<Result<Vec<_>, _>>()?;
            Ok((zvs, valley))
        });
        for r in rows {
            let (z, vl) = r?;
            g.zvs
                .nodes
                .extend(z.into_iter().map(|x| x.unwrap_or([f64::NAN; 2])));
            g.valley
                .nodes
                .extend(vl.into_iter().map(|x| x.unwrap_or([f64::NAN; 2])));
        }
        g.zvs.eps = g.side_eps(ring, true)?;
        g.valley.eps = g.side_eps(ring, false)?;
        Ok(g)
    }

    /// ln Ib at `x = ln V` interpolated, with the row stencil.
    fn boundary_at(&self, x: f64) -> Option<(f64, Stencil)> {
        let u = if self.nv > 1 {
            (x - self.x0) / self.hx
        } else {
            x - self.x0
        };
        let st = stencil(u, self.nv)?;
        let mut ln = 0.0;
        for (k, &w) in st.w.iter().enumerate() {
            if w != 0.0 {
                ln += w * self.ln_ib.get(st.first + k)?;
            }
        }
        Some((ln.exp(), st))
    }

    /// The ring's values at cell voltage `v`, at the column coordinate `c`
    /// of the ZVS side (`zvs`) or of the valley side, with boundary
    /// current `ib`: `None` where the ring puts the point on the other side
    /// (away from the boundary line that is a check point's failure).
    fn ring_at(
        &self,
        ring: &RingCell<'_, f64>,
        v: f64,
        ib: f64,
        zvs: bool,
        c: f64,
    ) -> Result<Option<[f64; 2]>, Error> {
        let on_line = c == 0.0;
        let i = if zvs {
            ib * (1.0 + c * c)
        } else {
            ib * c.exp()
        };
        // A node the ring refuses (it does not settle, or the loop drops
        // the whole cell voltage) leaves its cells to the ring, which
        // reports the error where it is asked.
        let Ok(t) = CellPoint::new(v, i).and_then(|c| ring.transition(&c)) else {
            return Ok(None);
        };
        Ok(match (t.turn_on, zvs) {
            // On the boundary line the window has closed onto the valley.
            // The close joins the valley continuously, the opening does
            // so only in the limit (the ring's voltage just grazes zero
            // there and its opening is off by the square root of its
            // rounding), so the close stands for both.
            (TurnOn::Zvs(w), true) if on_line => Some([w.close_s, w.close_s]),
            (TurnOn::Valley(vl), true) if on_line => Some([vl.valley_s, vl.valley_s]),
            (TurnOn::Zvs(w), false) if on_line => Some([w.close_s, 0.0]),
            (TurnOn::Zvs(w), true) => Some([w.open_s, w.close_s]),
            (TurnOn::Valley(vl), false) => Some([vl.valley_s, vl.valley_voltage_v]),
            _ => None,
        })
    }

    /// The interpolant of one side at row coordinate `a` and column
    /// coordinate `c` (node units).
    fn side_value(&self, zvs: bool, a: f64, c: f64) -> Option<([f64; 2], f64)> {
        let side = if zvs { &self.zvs } else { &self.valley };
        let x = self.x0 + a * self.hx;
        let (ib, row) = self.boundary_at(x)?;
        let (val, _) = side.interp(&row, c)?;
        Some((val, ib))
    }

    /// Every cell's bound on one side, from the check points.
    fn side_eps(&self, ring: &RingCell<'_, f64>, zvs: bool) -> Result<Vec<f64>, Error> {
        let side = if zvs { &self.zvs } else { &self.valley };
        if side.n == 0 {
            return Ok(Vec::new());
        }
        let (nv, n) = (self.nv, side.n);
        // The difference at one check point; infinite where the ring puts
        // it on the other side or the interpolant has no value.
        let err = |p: Check| -> Result<f64, Error> {
            let Some((val, ib)) = self.side_value(zvs, p.a, p.c) else {
                return Ok(f64::INFINITY);
            };
            let v = (self.x0 + p.a * self.hx).exp();
            let truth = self.ring_at(ring, v, ib, zvs, side.coord(p.c))?;
            let d = match truth {
                // Only the times are bounded (the valley voltage is not).
                Some(t) if zvs => (val[0] - t[0]).abs().max((val[1] - t[1]).abs()),
                Some(t) => (val[0] - t[0]).abs(),
                None => f64::INFINITY,
            };
            // NaN (a node the ring refused in the stencil) is no bound.
            Ok(if d.is_nan() { f64::INFINITY } else { d })
        };
        // Per row a: the midpoints of the row's column edges (a, c + 1/2),
        // and for a < nv - 1 the cell centres (a + 1/2, c + 1/2) and the
        // midpoints of the row edges (a + 1/2, c).
        type RowChecks = (Vec<f64>, Vec<f64>, Vec<f64>);
        let rows = crate::par::map_rows(nv, |a| -> Result<RowChecks, Error> {
            let af = a as f64;
            let along = (0..n - 1)
                .map(|c| {
                    err(Check {
                        a: af,
                        c: c as f64 + 0.5,
                    })
                })
                .collect::<Result<Vec<_>, _>>()?;
            if a + 1 == nv {
                return Ok((along, Vec::new(), Vec::new()));
            }
            let centre = (0..n - 1)
                .map(|c| {
                    err(Check {
                        a: af + 0.5,
                        c: c as f64 + 0.5,
                    })
                })
                .collect::<Result<Vec<_>, _>>()?;
            let across = (0..n)
                .map(|c| {
                    err(Check {
                        a: af + 0.5,
                        c: c as f64,
                    })
                })
                .collect::<Result<Vec<_>, _>>()?;
            Ok((along, centre, across))
        });
        let rows = rows.into_iter().collect::<Result<Vec<_>, _>>()?;
        let cell_rows = if nv == 1 { 1 } else { nv - 1 };
        let mut eps = Vec::with_capacity(cell_rows * (n - 1));
        for a in 0..cell_rows {
            for c in 0..n - 1 {
                let mut worst = rows[a].0[c];
                if nv > 1 {
                    worst = worst
                        .max(rows[a + 1].0[c])
                        .max(rows[a].1[c])
                        .max(rows[a].2[c])
                        .max(rows[a].2[c + 1]);
                }
                let mut largest = 0.0f64;
                for da in 0..(if nv > 1 { 2 } else { 1 }) {
                    for dc in 0..2 {
                        let node = side.nodes[(a + da) * n + c + dc];
                        largest =
                            largest
                                .max(node[0].abs())
                                .max(if zvs { node[1].abs() } else { 0.0 });
                    }
                }
                // The first column above the boundary is always the
                // ring's: the window opens from zero width there, and the
                // ring's own solution, which just grazes zero, is not
                // smooth enough to interpolate.
                let e = if zvs && c == 0 {
                    f64::INFINITY
                } else {
                    EPS_FACTOR * worst + RING_REL * largest
                };
                eps.push(if e.is_finite() { e } else { f64::INFINITY });
            }
        }
        Ok(eps)
    }

    /// The transition at `cell` from the grid, with its bound; `None`
    /// outside the grid, within the boundary's band, or in a ring cell
    /// (run the ring there).
    #[must_use]
    pub fn at(&self, cell: &CellPoint<f64>) -> Option<GridTurnOn> {
        let (v, i) = (cell.v_volt(), cell.i_amp());
        let (ib, row) = self.boundary_at(v.ln())?;
        let s = i / ib;
        if (s - 1.0).abs() <= self.band {
            return None;
        }
        let zvs = s > 1.0;
        let side = if zvs { &self.zvs } else { &self.valley };
        if side.n == 0 {
            return None;
        }
        let coord = if zvs { (s - 1.0).sqrt() } else { s.ln() };
        let (val, c_cell) = side.interp(&row, (coord - side.c0) / side.h)?;
        if !(val[0].is_finite() && val[1].is_finite()) {
            return None;
        }
        let r_cell = if self.nv == 1 { 0 } else { row.cell };
        let eps = *side.eps.get(r_cell * (side.n - 1) + c_cell)?;
        if !eps.is_finite() {
            return None;
        }
        let ramp = clamp_time_s(self.lr_h, self.r_ohm, v, 0.0, i);
        let turn_on = if zvs {
            TurnOn::Zvs(ZvsWindow {
                open_s: val[0],
                close_s: val[1],
                ramp_end_s: val[1] + ramp,
            })
        } else {
            TurnOn::Valley(Valley {
                valley_s: val[0],
                valley_voltage_v: val[1].max(0.0),
                ramp_end_s: val[0] + ramp,
            })
        };
        Some(GridTurnOn {
            turn_on,
            eps_s: eps,
        })
    }

    /// Grid nodes: rows, columns above the boundary, columns below it.
    #[must_use]
    pub fn size(&self) -> (usize, usize, usize) {
        (self.nv, self.zvs.n, self.valley.n)
    }

    /// The largest finite bound of any cell, second, and the share of the
    /// cells that are ring cells.
    #[must_use]
    pub fn worst_eps_s(&self) -> (f64, f64) {
        let all = self.zvs.eps.iter().chain(self.valley.eps.iter());
        let (mut worst, mut ring, mut n) = (0.0f64, 0usize, 0usize);
        for &e in all {
            n += 1;
            if e.is_finite() {
                worst = worst.max(e);
            } else {
                ring += 1;
            }
        }
        (worst, ring as f64 / n.max(1) as f64)
    }

    /// Relative half-width of the band around the boundary where the grid
    /// does not answer.
    #[must_use]
    pub fn band(&self) -> f64 {
        self.band
    }
}
