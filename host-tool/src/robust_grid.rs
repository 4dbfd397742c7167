//! The robust window of any tank the host can model (ideal, Coss curve,
//! lossy loop) over an uncertainty box, from a grid of the nominal model's
//! windows; timing-core's [`timing_core::robust`] proves the ideal tank's
//! in closed form, this serves the others and the tables.
//!
//! # The reduction
//! Scale Lr by `l` and the whole switch capacitance (fixed capacitor and
//! Coss curve together) by `k`. With `t = sqrt(l*k)*tau` and the current
//! `u = I*sqrt(l/k)` the scaled cell's equations `k*C(v)*dv/dt = i`,
//! `l*Lr*di/dt = Vc - v - R*i` become the nominal ones in `tau` with the
//! initial current `u` and the loss `R*sqrt(k/l)`. So every window time of
//! the scaled cell at (V, I) is `sqrt(l*k)` times the nominal model's at
//! (V, u), exactly for a lossless tank (the loss's change with
//! `sqrt(k/l)` is not modelled: within 5 % tolerances it moves the demo's
//! times by well under a picosecond, measured in `tests/robust_grid.rs`).
//!
//! Over the box (V, I, l, k) the latest opening is then the largest
//! `M(u)*open(V, u)` and the earliest close the least `m(u)*close(V, u)`
//! over V and `u` in `[I_lo*sqrt(l_lo/k_hi), I_hi*sqrt(l_hi/k_lo)]`, where
//! `M(u)` and `m(u)` are the largest and least `sqrt(l*k)` that some
//! (I, l, k) of the box reaches with `I*sqrt(l/k) = u`: writing
//! `sqrt(l*k) = l*I/u = k*u/I`,
//! `M(u) = min(sqrt(l_hi*k_hi), l_hi*I_hi/u, k_hi*u/I_lo)` and
//! `m(u) = max(sqrt(l_lo*k_lo), l_lo*I_lo/u, k_lo*u/I_hi)` (each the
//! binding constraint of a box; derived here, no source).
//!
//! # The bound
//! The nominal open and close times sit on a grid uniform in ln(V) and
//! ln(u); between nodes they are interpolated bilinearly. The interpolant
//! is linear along each axis, so its extremes over a rectangle lie at the
//! rectangle's corners; `M` rises, stays flat and falls, `m` the reverse,
//! so their extremes over an interval are in closed form. A grid cell's
//! contribution is bounded by the product of the two extremes (both
//! positive), widened by the cell's interpolation error: three times the
//! error measured at the cell's centre against the model (a kink of the
//! Coss curve inside a cell makes the largest error up to twice the
//! centre's; the square-root rise of the window at the ZVS boundary 1.2
//! times). A cell with a corner or centre below the ZVS boundary makes
//! any box that touches it ZVS-impossible. For speed (verification asks
//! at every code pair) a row of cells is bounded along the current
//! through each cell's two edges: at voltage fraction `s` the
//! interpolant is `(1 - s)*lower + s*upper` of the edges' values, so the
//! largest over the row's cells is at most `(1 - s)` times the largest
//! lower edge plus `s` times the largest upper one; those extremes come
//! from per-cell and per-block (8 cells) tables, and only the cells at
//! the ends of each piece of `M` and `m` are interpolated at their
//! corners. The demo's verification counts came out the same as with
//! every cell interpolated. The result is never later
//! (opening) or earlier (close) than the grid model allows; the tests
//! compare it with the ring evaluated at every corner and at sampled
//! interior points of held-out boxes.

use timing_core::robust::RobustWindow;
use timing_core::{CellPoint, Error};

use crate::real_tank::{CellSolver, RealTank};

/// Spacing of the grid in ln(current): 1e-3 keeps the product bound's
/// slack (the two extremes of a cell need not coincide) under 0.1 % of the
/// window times.
const LN_STEP: f64 = 1e-3;
/// Spacing in ln(voltage).
const LN_V_STEP: f64 = 0.005;
/// Safety factor on the measured centre error of a cell.
const EPS_FACTOR: f64 = 3.0;
/// The ring's step-placement noise between a tank and its scaled copy,
/// relative (measured up to 9e-6 in `tests/robust_grid.rs`).
const RING_REL: f64 = 3e-5;
/// Grid size limit per axis.
const MAX_NODES: usize = 8192;

/// Tolerance spread of the tank: multipliers of Lr and of the switch
/// capacitance.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TankSpread {
    /// Lr multiplier range (e.g. 0.95..1.05).
    pub l: (f64, f64),
    /// Capacitance multiplier range.
    pub k: (f64, f64),
}

impl TankSpread {
    /// The spread of relative tolerances `lr_rel` and `cr_rel` (half-widths).
    #[must_use]
    pub fn new(lr_rel: f64, cr_rel: f64) -> Self {
        Self {
            l: (1.0 - lr_rel, 1.0 + lr_rel),
            k: (1.0 - cr_rel, 1.0 + cr_rel),
        }
    }

    /// The range of the scaled current `u = I*sqrt(l/k)` for cell currents
    /// `i`, ampere.
    #[must_use]
    pub fn current_range(&self, i: (f64, f64)) -> (f64, f64) {
        (
            i.0 * (self.l.0 / self.k.1).sqrt(),
            i.1 * (self.l.1 / self.k.0).sqrt(),
        )
    }
}

/// The true value behind a sensed `measured` one: gain error up to
/// `gain_rel` (relative) and an additive error up to `abs` (offset, noise
/// and quantisation, in the quantity's unit). The reading is
/// `true*(1 + g) + e`, so the true value lies in
/// `[(measured - abs)/(1 + gain), (measured + abs)/(1 - gain)]`.
#[must_use]
pub fn true_range(measured: f64, gain_rel: f64, abs: f64) -> (f64, f64) {
    (
        (measured - abs) / (1.0 + gain_rel),
        (measured + abs) / (1.0 - gain_rel),
    )
}

/// The nominal model's window times on a grid of cell voltage and current.
#[derive(Debug, Clone)]
pub struct WindowGrid {
    ln_v0: f64,
    d_ln_v: f64,
    nv: usize,
    ln_u0: f64,
    d_ln_u: f64,
    nu: usize,
    /// The spread the grid serves.
    spread: TankSpread,
    /// Relative allowance for the model's own numerical error (the ring's
    /// steps fall differently in a scaled tank), fraction.
    model_rel: f64,
    /// At node (a, b), index `a*nu + b`: the opening, the opening times u,
    /// the opening over u, then the same three of the close; NaN: no ZVS.
    nodes: Vec<[f64; 6]>,
    /// Error allowance of each of the six functions in cell (a, b), index
    /// `a*(nu - 1) + b`; NaN: the cell is not all ZVS.
    eps: Vec<[f64; 6]>,
    /// Bounds of each function on each cell's two edges along the current
    /// (the lower-voltage edge's two nodes, then the upper one's; the
    /// larger node plus the cell's allowance for the opening's three
    /// functions, the smaller less it for the close's), index as `eps`.
    /// Along a voltage fraction `s` of the cell the bilinear interpolant is
    /// at most `(1 - s)*lower + s*upper`.
    edges: Vec<[[f64; 6]; 2]>,
    /// The same over blocks of [`BLOCK`] cells of a row, index
    /// `a*blocks_per_row + j`.
    blocks: Vec<[[f64; 6]; 2]>,
    blocks_per_row: usize,
    /// Per cell row, the first cell from which every cell is all ZVS
    /// (cells below the ZVS boundary sit at the low-current end).
    first_zvs: Vec<usize>,
}

/// Cells per block of a row's precomputed extremes: a query takes whole
/// blocks where it can, so its cost is about the box's cells / BLOCK plus
/// twice BLOCK per row and piece.
const BLOCK: usize = 8;

/// Extreme of two bounds: the larger for the opening's functions (f < 3),
/// the smaller for the close's.
fn outer(f: usize, x: f64, y: f64) -> f64 {
    if f < 3 {
        x.max(y)
    } else {
        x.min(y)
    }
}

/// The six gridded functions of a window (open, close) at current u.
fn six(o: f64, c: f64, u: f64) -> [f64; 6] {
    [o, o * u, o / u, c, c * u, c / u]
}

fn nodes(lo: f64, hi: f64, step: f64) -> usize {
    (((hi / lo).ln() / step).ceil() as usize + 1).clamp(2, MAX_NODES)
}

impl WindowGrid {
    /// The grid of `tank` for boxes within `spread`, cell voltages `v`
    /// (volt) and cell currents `i` (ampere), both ranges positive,
    /// computed on all cores. Scaled currents below 98 % of the least ZVS
    /// boundary current over `v` are left out (a box reaching there is
    /// ZVS-impossible anyway). A lossy loop is gridded at the largest
    /// loss the spread's scaling gives, `R*sqrt(k_hi/l_lo)`: more loss
    /// opens the window later and closes it earlier (checked in
    /// `tests/robust_grid.rs`), so that grid bounds every tank of the box.
    ///
    /// # Errors
    /// timing-core's error for a component or a point the model refuses.
    pub fn new(
        tank: &RealTank,
        spread: &TankSpread,
        v: (f64, f64),
        i: (f64, f64),
    ) -> Result<Self, Error> {
        let bad = |q, x: f64| Error::NotPositive {
            quantity: q,
            value: x,
        };
        let lossiest = RealTank {
            r_tank_ohm: tank.r_tank_ohm * (spread.k.1 / spread.l.0).sqrt(),
            ..tank.clone()
        };
        let solver = &lossiest.solver()?;
        let u = spread.current_range(i);
        if !(v.0 > 0.0 && v.1 >= v.0 && v.1.is_finite()) {
            return Err(bad(timing_core::Quantity::CellVoltage, v.0));
        }
        if !(u.0 > 0.0 && u.1 >= u.0 && u.1.is_finite()) {
            return Err(bad(timing_core::Quantity::CellCurrent, u.0));
        }
        // A hair wider than asked, so a query at the range's ends is inside.
        let (v0, v1) = (v.0 * (1.0 - 1e-9), v.1 * (1.0 + 1e-9));
        let nv = nodes(v0, v1, LN_V_STEP);
        let d_ln_v = (v1 / v0).ln() / (nv - 1) as f64;
        let mut least_boundary = f64::INFINITY;
        for a in 0..nv {
            let va = (v0.ln() + a as f64 * d_ln_v).exp();
            least_boundary = least_boundary.min(solver.boundary_current_a(va)?);
        }
        let u0 = (u.0 * (1.0 - 1e-9)).max(0.98 * least_boundary);
        let u1 = (u.1 * (1.0 + 1e-9)).max(u0 * (1.0 + LN_STEP));
        let nu = nodes(u0, u1, LN_STEP);
        let mut g = Self {
            ln_v0: v0.ln(),
            d_ln_v,
            nv,
            ln_u0: u0.ln(),
            d_ln_u: (u1 / u0).ln() / (nu - 1) as f64,
            nu,
            spread: *spread,
            model_rel: match solver {
                CellSolver::Ideal(_) => 0.0,
                CellSolver::Ring(_) => RING_REL,
            },
            nodes: Vec::new(),
            eps: Vec::new(),
            edges: Vec::new(),
            blocks: Vec::new(),
            blocks_per_row: 0,
            first_zvs: Vec::new(),
        };
        // Rows of nodes and of cell centres, in parallel.
        let rows: Vec<Result<RowOut, Error>> = crate::par::map_rows(nv, |a| g.row(solver, a));
        let mut centres = Vec::with_capacity(nv);
        for r in rows {
            let r = r?;
            g.nodes.extend_from_slice(&r.nodes);
            centres.push(r.centres);
        }
        for (a, row) in centres.iter().enumerate().take(nv - 1) {
            for (b, centre) in row.iter().enumerate() {
                let e = g.cell_eps(a, b, centre);
                g.eps.push(e);
            }
        }
        g.precompute_extremes();
        Ok(g)
    }

    /// Fill `edges`, `blocks` and `first_zvs` from the nodes and `eps`.
    fn precompute_extremes(&mut self) {
        let cells = self.nu - 1;
        self.blocks_per_row = cells.div_ceil(BLOCK);
        let start = [
            f64::NEG_INFINITY,
            f64::NEG_INFINITY,
            f64::NEG_INFINITY,
            f64::INFINITY,
            f64::INFINITY,
            f64::INFINITY,
        ];
        for a in 0..self.nv - 1 {
            let mut first = 0;
            for b in 0..cells {
                let e = self
                    .eps
                    .get(a * cells + b)
                    .copied()
                    .unwrap_or([f64::NAN; 6]);
                let mut w = [[0.0; 6]; 2];
                for (side, row) in w.iter_mut().enumerate() {
                    let (n0, n1) = (self.node(a + side, b), self.node(a + side, b + 1));
                    for (f, slot) in row.iter_mut().enumerate() {
                        let ext = outer(f, n0[f], n1[f]);
                        *slot = if f < 3 { ext + e[f] } else { ext - e[f] };
                    }
                }
                // NaN anywhere (no ZVS at a node or the centre) is in e.
                if w.iter().flatten().any(|x| !x.is_finite()) {
                    first = b + 1;
                }
                self.edges.push(w);
            }
            self.first_zvs.push(first);
            for j in 0..self.blocks_per_row {
                let mut acc = [start; 2];
                for b in j * BLOCK..((j + 1) * BLOCK).min(cells) {
                    let w = self
                        .edges
                        .get(a * cells + b)
                        .copied()
                        .unwrap_or([[f64::NAN; 6]; 2]);
                    for (acc, w) in acc.iter_mut().zip(w) {
                        for (f, slot) in acc.iter_mut().enumerate() {
                            *slot = outer(f, *slot, w[f]);
                        }
                    }
                }
                self.blocks.push(acc);
            }
        }
    }

    /// Bound of function `f` over the strip `[s0, s1]` (fractions of the
    /// row) of cells `c0..=c1` of row `a`, each cell whole along the
    /// current: the lower and the upper edges' bounds over the cells
    /// (whole blocks where they fit), blended at `s0` and at `s1`.
    fn strip_cells(&self, a: usize, f: usize, s: (f64, f64), c0: usize, c1: usize) -> f64 {
        let cells = self.nu - 1;
        let pick = |n: Option<&[[f64; 6]; 2]>, side: usize| {
            n.and_then(|n| n.get(side))
                .and_then(|r| r.get(f))
                .copied()
                .unwrap_or(f64::NAN)
        };
        let init = if f < 3 {
            f64::NEG_INFINITY
        } else {
            f64::INFINITY
        };
        let mut acc = [init; 2];
        let mut b = c0;
        while b <= c1 {
            let n = if b.is_multiple_of(BLOCK) && b + BLOCK - 1 <= c1 {
                let n = self.blocks.get(a * self.blocks_per_row + b / BLOCK);
                b += BLOCK;
                n
            } else {
                let n = self.edges.get(a * cells + b);
                b += 1;
                n
            };
            acc = [outer(f, acc[0], pick(n, 0)), outer(f, acc[1], pick(n, 1))];
        }
        let blend = |t: f64| acc[0] * (1.0 - t) + acc[1] * t;
        outer(f, blend(s.0), blend(s.1))
    }

    /// Bound of function `f` over `[s0, s1] x [t0, t1]` of cell (a, b).
    fn part_cell(&self, a: usize, b: usize, f: usize, s: (f64, f64), t: (f64, f64)) -> f64 {
        let pick = |n: [f64; 6]| n.get(f).copied().unwrap_or(f64::NAN);
        let (f00, f10) = (pick(self.node(a, b)), pick(self.node(a + 1, b)));
        let (f01, f11) = (pick(self.node(a, b + 1)), pick(self.node(a + 1, b + 1)));
        // The bilinear interpolant (as `interp`) at the four corners.
        let c = [(s.0, t.0), (s.0, t.1), (s.1, t.0), (s.1, t.1)].map(|(s, t)| {
            (f00 * (1.0 - t) + f01 * t) * (1.0 - s) + (f10 * (1.0 - t) + f11 * t) * s
        });
        let e = self
            .eps
            .get(a * (self.nu - 1) + b)
            .and_then(|e| e.get(f))
            .copied()
            .unwrap_or(f64::NAN);
        let ext = c[1..].iter().fold(c[0], |x, &y| outer(f, x, y));
        if f < 3 {
            ext + e
        } else {
            ext - e
        }
    }

    fn v_at(&self, a: f64) -> f64 {
        (self.ln_v0 + a * self.d_ln_v).exp()
    }

    fn u_at(&self, b: f64) -> f64 {
        (self.ln_u0 + b * self.d_ln_u).exp()
    }

    /// Node row `a` and the centres of the cells above it (none for the
    /// last row).
    fn row(&self, solver: &CellSolver<'_>, a: usize) -> Result<RowOut, Error> {
        let at = |v: f64, u: f64| -> Result<[f64; 6], Error> {
            let t = solver.transition(&CellPoint::new(v, u)?)?;
            let (o, c) = t
                .turn_on
                .window()
                .map_or((f64::NAN, f64::NAN), |w| (w.open_s, w.close_s));
            Ok(six(o, c, u))
        };
        let mut out = RowOut::default();
        let v = self.v_at(a as f64);
        for b in 0..self.nu {
            out.nodes.push(at(v, self.u_at(b as f64))?);
        }
        if a + 1 < self.nv {
            let vc = self.v_at(a as f64 + 0.5);
            for b in 0..self.nu - 1 {
                out.centres.push(at(vc, self.u_at(b as f64 + 0.5))?);
            }
        }
        Ok(out)
    }

    fn node(&self, a: usize, b: usize) -> [f64; 6] {
        self.nodes
            .get(a * self.nu + b)
            .copied()
            .unwrap_or([f64::NAN; 6])
    }

    fn cell_eps(&self, a: usize, b: usize, centre: &[f64; 6]) -> [f64; 6] {
        let c = [
            self.node(a, b),
            self.node(a + 1, b),
            self.node(a, b + 1),
            self.node(a + 1, b + 1),
        ];
        let mut e = [0.0; 6];
        for (f, slot) in e.iter_mut().enumerate() {
            let mean = c.iter().map(|n| n[f]).sum::<f64>() / 4.0;
            // NaN anywhere (a corner or the centre without ZVS) stays NaN.
            *slot = (centre[f] - mean).abs() * EPS_FACTOR + centre[f].abs() * self.model_rel;
        }
        e
    }

    /// Cell-index range covering `[x0, x1]` (grid units), `None` outside.
    fn span(x0: f64, x1: f64, n: usize) -> Option<(usize, usize)> {
        let last = (n - 1) as f64;
        if !(x0 >= -1e-9 && x1 <= last + 1e-9 && x0 <= x1) {
            return None;
        }
        let lo = (x0.max(0.0).floor() as usize).min(n - 2);
        let hi = ((x1.min(last).ceil() as usize).max(1) - 1).clamp(lo, n - 2);
        Some((lo, hi))
    }

    /// The robust window over cell voltages `v` (volt), cell currents `i`
    /// (ampere) and the tank `spread`, with the timer's peak `jitter_s`
    /// taken off both ends, second from gate turn-off. `None` where some
    /// point of the box may lack ZVS, the windows do not overlap, or the
    /// box leaves the grid above its largest current, outside its
    /// voltages or outside the spread it was built for.
    #[must_use]
    pub fn robust(
        &self,
        v: (f64, f64),
        i: (f64, f64),
        spread: &TankSpread,
        jitter_s: f64,
    ) -> Option<RobustWindow<f64>> {
        let (open, close) = self.bounds(v, i, spread, jitter_s)?;
        (close >= open).then_some(RobustWindow {
            open_s: open,
            close_s: close,
        })
    }

    /// The bounds behind [`WindowGrid::robust`]: the latest opening and the
    /// earliest close over the box with the jitter applied, second, also
    /// where they cross (`close < open`: the windows share nothing); `None`
    /// where some point of the box may lack ZVS or the box leaves the grid.
    #[must_use]
    pub fn bounds(
        &self,
        v: (f64, f64),
        i: (f64, f64),
        spread: &TankSpread,
        jitter_s: f64,
    ) -> Option<(f64, f64)> {
        if !(v.0 > 0.0 && i.0 > 0.0 && v.0 <= v.1 && i.0 <= i.1) {
            return None;
        }
        let built = &self.spread;
        if spread.l.0 < built.l.0 || spread.k.1 > built.k.1 {
            // A lossier scaled loop than the grid's.
            return None;
        }
        let u = spread.current_range(i);
        let (l, k) = (spread.l, spread.k);
        // M(u) piecewise: k_hi*u/I_lo, sqrt(l_hi*k_hi), l_hi*I_hi/u, with
        // the functions u*W, W and W/u (indices 1, 0, 2 of the six).
        let r_hi = (l.1 / k.1).sqrt();
        let big = [
            (f64::NEG_INFINITY, i.0 * r_hi, k.1 / i.0, 1usize),
            (i.0 * r_hi, i.1 * r_hi, (l.1 * k.1).sqrt(), 0),
            (i.1 * r_hi, f64::INFINITY, l.1 * i.1, 2),
        ];
        // m(u): l_lo*I_lo/u, sqrt(l_lo*k_lo), k_lo*u/I_hi on the close's
        // W/u, W and u*W (indices 5, 3, 4).
        let r_lo = (l.0 / k.0).sqrt();
        let small = [
            (f64::NEG_INFINITY, i.0 * r_lo, l.0 * i.0, 5usize),
            (i.0 * r_lo, i.1 * r_lo, (l.0 * k.0).sqrt(), 3),
            (i.1 * r_lo, f64::INFINITY, k.0 / i.1, 4),
        ];
        let xv = (
            (v.0.ln() - self.ln_v0) / self.d_ln_v,
            (v.1.ln() - self.ln_v0) / self.d_ln_v,
        );
        let xu = (
            (u.0.ln() - self.ln_u0) / self.d_ln_u,
            (u.1.ln() - self.ln_u0) / self.d_ln_u,
        );
        if xu.0 < -1e-9 {
            // Below the grid's first current: below the ZVS boundary (or
            // outside the grid).
            return None;
        }
        let (a0, a1) = Self::span(xv.0, xv.1, self.nv)?;
        let (b0, _) = Self::span(xu.0, xu.1, self.nu)?;
        // The pieces' ends in grid units. On each piece the factor is a
        // constant times one of the six functions, so the piece's bound is
        // that constant times the function's extreme: whole cells from the
        // precomputed per-cell and per-block extremes, the cells at the
        // piece's ends (and the strips of partly covered rows) from the
        // interpolant at their corners.
        let x_of = |u: f64| {
            if u > 0.0 {
                (u.ln() - self.ln_u0) / self.d_ln_u
            } else {
                f64::NEG_INFINITY
            }
        };
        let in_x =
            |p: &[(f64, f64, f64, usize); 3]| p.map(|(lo, hi, c, f)| (x_of(lo), x_of(hi), c, f));
        let (big_x, small_x) = (in_x(&big), in_x(&small));
        let mut open = f64::NEG_INFINITY;
        let mut close = f64::INFINITY;
        for a in a0..=a1 {
            if b0 < self.first_zvs.get(a).copied().unwrap_or(usize::MAX) {
                // The box touches a cell that is not all ZVS.
                return None;
            }
            let s = (
                (xv.0 - a as f64).clamp(0.0, 1.0),
                (xv.1 - a as f64).clamp(0.0, 1.0),
            );
            for &(xl, xh, coef, f) in big_x.iter().chain(small_x.iter()) {
                let (p, q) = (xu.0.max(xl), xu.1.min(xh));
                if p > q {
                    continue;
                }
                let (c_lo, c_hi) = Self::span(p, q, self.nu)?;
                // Cells whole along the current: ceil(p) ..= floor(q) - 1.
                let (w0, w1) = (p.max(0.0).ceil() as usize, q.floor() as usize);
                let mut bound = if f < 3 {
                    f64::NEG_INFINITY
                } else {
                    f64::INFINITY
                };
                for b in c_lo..=c_hi {
                    if b >= w0 && b < w1 {
                        continue;
                    }
                    let t = (
                        (p - b as f64).clamp(0.0, 1.0),
                        (q - b as f64).clamp(0.0, 1.0),
                    );
                    bound = outer(f, bound, self.part_cell(a, b, f, s, t));
                }
                if w0 < w1 {
                    bound = outer(f, bound, self.strip_cells(a, f, s, w0, w1 - 1));
                }
                if f < 3 {
                    open = open.max(coef * bound);
                } else {
                    close = close.min(coef * bound);
                }
            }
        }
        let (open, close) = (open + jitter_s, close - jitter_s);
        (open.is_finite() && close.is_finite()).then_some((open, close))
    }

    /// Grid nodes (voltage, current), for reports.
    #[must_use]
    pub fn size(&self) -> (usize, usize) {
        (self.nv, self.nu)
    }
}

#[derive(Debug, Default)]
struct RowOut {
    nodes: Vec<[f64; 6]>,
    centres: Vec<[f64; 6]>,
}
