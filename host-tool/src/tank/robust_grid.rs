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
//! at every code pair) the boxes of a row of readings, which share their
//! voltage range, are bounded from a [`WindowRow`] prepared once: each
//! cell's bound over the rows the voltages cover (the bilinear interpolant
//! is linear in the voltage fraction, so its extremes lie at the fraction's
//! ends), a sparse table of their extremes over any run of whole cells in
//! O(1), and the interpolant along the current at the covered nodes for
//! the cells at the ends of each piece of `M` and `m`, which are
//! interpolated at their corners. The result is never later
//! (opening) or earlier (close) than the grid model allows; the tests
//! compare it with the ring evaluated at every corner and at sampled
//! interior points of held-out boxes.
//!
//! One file of about 740 lines: the grid, its per-cell bound and both ways
//! of reading it (a box at a time, a row of boxes at a time) share the
//! private cell arithmetic; apart, that arithmetic would have to be public.

use timing_core::robust::RobustWindow;
use timing_core::{CellPoint, Error};

use crate::tank::event_grid::EventGrid;
use crate::tank::real_tank::{CellSolver, RealTank};

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
    /// Per cell row, the first cell from which every cell is all ZVS
    /// (cells below the ZVS boundary sit at the low-current end).
    first_zvs: Vec<usize>,
}

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
        let lossiest = RealTank {
            r_tank_ohm: tank.r_tank_ohm * (spread.k.1 / spread.l.0).sqrt(),
            ..tank.clone()
        };
        let solver = &lossiest.solver()?;
        let u = spread.current_range(i);
        crate::tank::real_tank::check_cell_ranges(v, u)?;
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
            first_zvs: Vec::new(),
        };
        // Rows of nodes and of cell centres, in parallel.
        // The ring's events over the grid's range, when the tank needs the
        // ring (an ideal tank's closed forms are as fast).
        let events = match solver {
            CellSolver::Ring(r) => EventGrid::new(r, (v0, v1), (u0, u1)).ok(),
            CellSolver::Ideal(_) => None,
        };
        let rows: Vec<Result<RowOut, Error>> =
            crate::par::map_rows(nv, |a| g.node_row(solver, events.as_ref(), a));
        let mut centres = Vec::with_capacity(nv);
        let mut node_eps = Vec::with_capacity(nv * nu);
        for r in rows {
            let r = r?;
            g.nodes.extend_from_slice(&r.nodes);
            node_eps.extend_from_slice(&r.node_eps);
            centres.push(r.centres);
        }
        for (a, row) in centres.iter().enumerate().take(nv - 1) {
            for (b, centre) in row.iter().enumerate() {
                let e = g.cell_eps(a, b, centre, &node_eps);
                g.eps.push(e);
            }
        }
        g.precompute_extremes();
        Ok(g)
    }

    /// Fill `edges` and `first_zvs` from the nodes and `eps`.
    fn precompute_extremes(&mut self) {
        let cells = self.nu - 1;
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
    fn node_row(
        &self,
        solver: &CellSolver<'_>,
        events: Option<&EventGrid>,
        a: usize,
    ) -> Result<RowOut, Error> {
        // From the event grid where it answers within a hundredth of a
        // nanosecond (its bound joins the cell's), else the ring.
        let at = |v: f64, u: f64| -> Result<([f64; 6], f64), Error> {
            let cell = CellPoint::new(v, u)?;
            let (turn_on, e) = match events.and_then(|g| g.at(&cell)) {
                Some(g) if g.eps_s <= 1e-11 => (g.turn_on, g.eps_s),
                _ => (solver.transition(&cell)?.turn_on, 0.0),
            };
            let (o, c) = turn_on
                .window()
                .map_or((f64::NAN, f64::NAN), |w| (w.open_s, w.close_s));
            Ok((six(o, c, u), e))
        };
        let mut out = RowOut::default();
        let v = self.v_at(a as f64);
        for b in 0..self.nu {
            let (n, e) = at(v, self.u_at(b as f64))?;
            out.nodes.push(n);
            out.node_eps.push(e);
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

    /// The allowance of cell (a, b) per function: the measured centre
    /// error times [`EPS_FACTOR`], the ring's noise, and where the values
    /// came from the event grid, its bound `e` (second) at the corners and
    /// the centre: a centre measured off by up to twice it, an
    /// interpolant off by up to once it, so `(EPS_FACTOR*2 + 1)*e` scaled
    /// as each function scales the times.
    fn cell_eps(&self, a: usize, b: usize, centre: &([f64; 6], f64), node_eps: &[f64]) -> [f64; 6] {
        let corners = [(a, b), (a + 1, b), (a, b + 1), (a + 1, b + 1)];
        let c = corners.map(|(a, b)| self.node(a, b));
        let e_max = corners
            .iter()
            .map(|&(a, b)| node_eps.get(a * self.nu + b).copied().unwrap_or(f64::NAN))
            .fold(centre.1, f64::max);
        // The largest factor each function applies to a time over the
        // cell (u and 1/u at the cell's ends).
        let (u0, u1) = (self.u_at(b as f64), self.u_at(b as f64 + 1.0));
        let scale = [1.0, u1, 1.0 / u0, 1.0, u1, 1.0 / u0];
        let mut e = [0.0; 6];
        for (f, slot) in e.iter_mut().enumerate() {
            let mean = c.iter().map(|n| n[f]).sum::<f64>() / 4.0;
            let centre = centre.0[f];
            // NaN anywhere (a corner or the centre without ZVS) stays NaN.
            *slot = (centre - mean).abs() * EPS_FACTOR
                + centre.abs() * self.model_rel
                + (EPS_FACTOR * 2.0 + 1.0) * e_max * scale[f];
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
        if !(i.0 > 0.0 && i.0 <= i.1) {
            return None;
        }
        let u = spread.current_range(i);
        self.prepare(v, Some(u))?.bounds(i, spread, jitter_s)
    }

    /// The grid prepared for boxes over the cell voltages `v` (volt): the
    /// rows they cover, each cell's bound over those rows, and range
    /// extremes over the cells in O(1) (a sparse table). `u`: the scaled
    /// currents the boxes will reach (ampere), `None` for the whole grid.
    /// Verification asks a row of readings with one voltage range, so it
    /// prepares once per row and asks [`WindowRow::bounds`] per reading.
    /// `None` where `v` leaves the grid.
    #[must_use]
    pub fn prepare(&self, v: (f64, f64), u: Option<(f64, f64)>) -> Option<WindowRow<'_>> {
        if !(v.0 > 0.0 && v.0 <= v.1) {
            return None;
        }
        let xv = (
            (v.0.ln() - self.ln_v0) / self.d_ln_v,
            (v.1.ln() - self.ln_v0) / self.d_ln_v,
        );
        let (a0, a1) = Self::span(xv.0, xv.1, self.nv)?;
        let cells = self.nu - 1;
        let (c0, c1) = match u {
            None => (0, cells - 1),
            Some(u) => {
                let x = |u: f64| (u.ln() - self.ln_u0) / self.d_ln_u;
                let lo = x(u.0).clamp(0.0, cells as f64);
                let hi = x(u.1).clamp(0.0, cells as f64);
                (
                    (lo.floor() as usize).min(cells - 1),
                    (hi.ceil() as usize).clamp(1, cells) - 1,
                )
            }
        };
        let c1 = c1.max(c0);
        let nb = c1 - c0 + 1;
        let fracs: Vec<(f64, f64)> = (a0..=a1)
            .map(|a| {
                (
                    (xv.0 - a as f64).clamp(0.0, 1.0),
                    (xv.1 - a as f64).clamp(0.0, 1.0),
                )
            })
            .collect();
        let first_zvs = (a0..=a1)
            .map(|a| self.first_zvs.get(a).copied().unwrap_or(usize::MAX))
            .max()
            .unwrap_or(usize::MAX);
        let rows = fracs.len();
        // The interpolant along the current at each covered node, per
        // function, row and end of the row's voltage fraction, and each
        // cell's allowance per function and row.
        let mut lines = vec![0.0; 6 * rows * 2 * (nb + 1)];
        let mut eps = vec![0.0; 6 * rows * nb];
        let mut whole: Vec<Vec<f64>> = (0..6).map(|_| Vec::with_capacity(nb)).collect();
        for (r, (&(s0, s1), a)) in fracs.iter().zip(a0..=a1).enumerate() {
            for b in 0..=nb {
                let (lo, hi) = (self.node(a, c0 + b), self.node(a + 1, c0 + b));
                for f in 0..6 {
                    for (k, s) in [s0, s1].into_iter().enumerate() {
                        lines[((f * rows + r) * 2 + k) * (nb + 1) + b] =
                            lo[f] * (1.0 - s) + hi[f] * s;
                    }
                }
            }
            for b in 0..nb {
                let e = self
                    .eps
                    .get(a * cells + c0 + b)
                    .copied()
                    .unwrap_or([f64::NAN; 6]);
                for (f, e) in e.iter().enumerate() {
                    eps[(f * rows + r) * nb + b] = *e;
                }
            }
        }
        for (f, w) in whole.iter_mut().enumerate() {
            for b in 0..nb {
                let mut acc = if f < 3 {
                    f64::NEG_INFINITY
                } else {
                    f64::INFINITY
                };
                for (&(s0, s1), a) in fracs.iter().zip(a0..=a1) {
                    let edge = self
                        .edges
                        .get(a * cells + c0 + b)
                        .copied()
                        .unwrap_or([[f64::NAN; 6]; 2]);
                    for s in [s0, s1] {
                        acc = outer(f, acc, edge[0][f] * (1.0 - s) + edge[1][f] * s);
                    }
                }
                w.push(acc);
            }
        }
        let sparse = whole
            .into_iter()
            .enumerate()
            .map(|(f, w)| {
                let mut levels = vec![w];
                let mut step = 1usize;
                while 2 * step <= nb {
                    let prev = &levels[levels.len() - 1];
                    let next: Vec<f64> = (0..prev.len() - step)
                        .map(|b| outer(f, prev[b], prev[b + step]))
                        .collect();
                    levels.push(next);
                    step *= 2;
                }
                levels
            })
            .collect();
        Some(WindowRow {
            g: self,
            v,
            rows,
            spread_logs: (self.spread, SpreadLogs::of(&self.spread)),
            c0,
            nb,
            first_zvs,
            lines,
            eps,
            sparse,
        })
    }

    /// Grid nodes (voltage, current), for reports.
    #[must_use]
    pub fn size(&self) -> (usize, usize) {
        (self.nv, self.nu)
    }
}

/// Logarithms and products of a [`TankSpread`] that every box needs.
#[derive(Debug, Clone, Copy)]
struct SpreadLogs {
    /// ln of the scaled current's factors at the range's ends,
    /// `sqrt(l_lo/k_hi)` and `sqrt(l_hi/k_lo)`.
    ln_u_lo: f64,
    ln_u_hi: f64,
    /// ln of `sqrt(l_hi/k_hi)` and `sqrt(l_lo/k_lo)`: where `M` and `m`
    /// change pieces, as factors of the box's currents.
    ln_r_hi: f64,
    ln_r_lo: f64,
    /// `sqrt(l_hi*k_hi)` and `sqrt(l_lo*k_lo)`.
    sqrt_lk_hi: f64,
    sqrt_lk_lo: f64,
}

impl SpreadLogs {
    fn of(s: &TankSpread) -> Self {
        let (l, k) = (s.l, s.k);
        Self {
            ln_u_lo: 0.5 * (l.0 / k.1).ln(),
            ln_u_hi: 0.5 * (l.1 / k.0).ln(),
            ln_r_hi: 0.5 * (l.1 / k.1).ln(),
            ln_r_lo: 0.5 * (l.0 / k.0).ln(),
            sqrt_lk_hi: (l.1 * k.1).sqrt(),
            sqrt_lk_lo: (l.0 * k.0).sqrt(),
        }
    }
}

/// A [`WindowGrid`] prepared for boxes over one range of cell voltages
/// ([`WindowGrid::prepare`]): the bounds of [`WindowGrid::bounds`] at a few
/// hundred operations a box.
#[derive(Debug, Clone)]
pub struct WindowRow<'g> {
    g: &'g WindowGrid,
    /// The cell voltages prepared for, volt.
    v: (f64, f64),
    /// Grid rows covered.
    rows: usize,
    /// The grid's spread and its logarithms.
    spread_logs: (TankSpread, SpreadLogs),
    /// First covered cell and the number covered.
    c0: usize,
    nb: usize,
    /// The first cell from which every covered row is all ZVS.
    first_zvs: usize,
    /// Index `((f*rows + r)*2 + k)*(nb + 1) + b`: function `f` of row `r`
    /// at the `k`-th end of its voltage fraction, at node `c0 + b`.
    lines: Vec<f64>,
    /// Index `(f*rows + r)*nb + b`: the allowance of cell `c0 + b` of row `r`.
    eps: Vec<f64>,
    /// Per function, levels of a sparse table over the covered cells of
    /// each cell's bound over the rows: level `k`, entry `b` is the extreme
    /// over cells `c0 + b .. c0 + b + 2^k`.
    sparse: Vec<Vec<Vec<f64>>>,
}

impl WindowRow<'_> {
    /// Extreme of function `f` over whole cells `b0..=b1` (covered-cell
    /// indices).
    fn whole(&self, f: usize, b0: usize, b1: usize) -> f64 {
        let n = b1 - b0 + 1;
        let k = (usize::BITS - 1 - n.leading_zeros()) as usize;
        let level = &self.sparse[f][k];
        outer(f, level[b0], level[b1 + 1 - (1 << k)])
    }

    /// Bound of function `f` over current fractions `t` of cell `b`
    /// (covered-cell index), over the covered rows.
    fn part(&self, f: usize, b: usize, t: (f64, f64)) -> f64 {
        let mut acc = if f < 3 {
            f64::NEG_INFINITY
        } else {
            f64::INFINITY
        };
        let n = self.nb + 1;
        for r in 0..self.rows {
            let mut ext = if f < 3 {
                f64::NEG_INFINITY
            } else {
                f64::INFINITY
            };
            for k in 0..2 {
                let base = ((f * self.rows + r) * 2 + k) * n + b;
                let (y0, y1) = (self.lines[base], self.lines[base + 1]);
                for t in [t.0, t.1] {
                    ext = outer(f, ext, y0 * (1.0 - t) + y1 * t);
                }
            }
            let e = self.eps[(f * self.rows + r) * self.nb + b];
            acc = outer(f, acc, if f < 3 { ext + e } else { ext - e });
        }
        acc
    }

    /// The bounds of [`WindowGrid::bounds`] for the box of this row's
    /// voltages and cell currents `i` (ampere) under `spread`, with the
    /// timer's peak `jitter_s` taken off both ends.
    #[must_use]
    pub fn bounds(&self, i: (f64, f64), spread: &TankSpread, jitter_s: f64) -> Option<(f64, f64)> {
        let g = self.g;
        if !(i.0 > 0.0 && i.0 <= i.1) {
            return None;
        }
        let built = &g.spread;
        if spread.l.0 < built.l.0 || spread.k.1 > built.k.1 {
            // A lossier scaled loop than the grid's.
            return None;
        }
        let (l, k) = (spread.l, spread.k);
        let c = if *spread == self.spread_logs.0 {
            self.spread_logs.1
        } else {
            SpreadLogs::of(spread)
        };
        // Grid coordinates (ln(u) in cell units) of a current times a
        // factor whose log is `ln_f`.
        let (ln_i0, ln_i1) = (i.0.ln(), i.1.ln());
        let x = |ln_i: f64, ln_f: f64| (ln_i + ln_f - g.ln_u0) / g.d_ln_u;
        let (ninf, inf) = (f64::NEG_INFINITY, f64::INFINITY);
        // M(u) piecewise: k_hi*u/I_lo, sqrt(l_hi*k_hi), l_hi*I_hi/u, with
        // the functions u*W, W and W/u (indices 1, 0, 2 of the six), each
        // piece as its range in grid units.
        let (b0, b1) = (x(ln_i0, c.ln_r_hi), x(ln_i1, c.ln_r_hi));
        let big = [
            (ninf, b0, k.1 / i.0, 1usize),
            (b0, b1, c.sqrt_lk_hi, 0),
            (b1, inf, l.1 * i.1, 2),
        ];
        // m(u): l_lo*I_lo/u, sqrt(l_lo*k_lo), k_lo*u/I_hi on the close's
        // W/u, W and u*W (indices 5, 3, 4).
        let (s0, s1) = (x(ln_i0, c.ln_r_lo), x(ln_i1, c.ln_r_lo));
        let small = [
            (ninf, s0, l.0 * i.0, 5usize),
            (s0, s1, c.sqrt_lk_lo, 3),
            (s1, inf, k.0 / i.1, 4),
        ];
        // The scaled currents' range u = I*sqrt(l/k).
        let xu = (x(ln_i0, c.ln_u_lo), x(ln_i1, c.ln_u_hi));
        if xu.0 < -1e-9 {
            // Below the grid's first current: below the ZVS boundary (or
            // outside the grid).
            return None;
        }
        let (b_first, _) = WindowGrid::span(xu.0, xu.1, g.nu)?;
        if b_first < self.first_zvs {
            // The box touches a cell that is not all ZVS.
            return None;
        }
        let mut open = f64::NEG_INFINITY;
        let mut close = f64::INFINITY;
        for &(xl, xh, coef, f) in big.iter().chain(small.iter()) {
            let (p, q) = (xu.0.max(xl), xu.1.min(xh));
            if p > q {
                continue;
            }
            let (c_lo, c_hi) = WindowGrid::span(p, q, g.nu)?;
            if c_lo < self.c0 || c_hi >= self.c0 + self.nb {
                // Outside the cells this row was prepared for: the whole
                // grid's row answers.
                return g.prepare(self.v, None)?.bounds(i, spread, jitter_s);
            }
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
                bound = outer(f, bound, self.part(f, b - self.c0, t));
            }
            if w0 < w1 {
                bound = outer(f, bound, self.whole(f, w0 - self.c0, w1 - 1 - self.c0));
            }
            if f < 3 {
                open = open.max(coef * bound);
            } else {
                close = close.min(coef * bound);
            }
        }
        let (open, close) = (open + jitter_s, close - jitter_s);
        (open.is_finite() && close.is_finite()).then_some((open, close))
    }
}

#[derive(Debug, Default)]
struct RowOut {
    nodes: Vec<[f64; 6]>,
    /// Each node's bound from the event grid, second (0: the ring's).
    node_eps: Vec<f64>,
    /// Each cell centre's six functions and bound.
    centres: Vec<([f64; 6], f64)>,
}
