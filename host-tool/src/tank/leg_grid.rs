//! A half-bridge leg as built, and the window of one of its edges that
//! every leg of a tolerance box shares (the robust window), from a grid of
//! timing-core's edge solutions ([`timing_core::leg`]).
//!
//! # The edge-directed current
//! Along an edge, `u` is the current that swings the node: the current
//! out of the node on the falling edge, into it on the rising edge. A
//! `u <= 0` first waits at the outgoing rail until the inductor has
//! brought it to zero, then swings from rest.
//!
//! # What is proven, and how
//! Write `s` for the distance the node has swung. While the current is
//! positive, `di/ds = C(s)*(E(s) - R*i)/(L*i)` with `E` the voltage driving
//! the swing (falling: node less far end). This right side falls as the
//! far end rises (falling edge; the rising edge mirrors it) and as `R`
//! rises, so by the comparison theorem of ordinary differential equations
//! (from memory: a solution whose slope is everywhere at most another's,
//! from the same start, stays at or below it) the current at every `s` is
//! smaller there; two solutions from the same `s` never cross, so a larger
//! starting `u` keeps a larger current all along. The time to the rail is
//! `integral C(s)/i(s) ds`, hence:
//! - the opening is later with less `u`, more loss, and a far end that
//!   drives the swing less; a swing that completes there completes for
//!   every larger `u`;
//! - the current when the incoming diode clamps is smaller there, and the
//!   time to its reversal, `L*I_clamp/V_L` with the loss's logarithm
//!   ([`timing_core::ring::clamp_time_s`]), falls with `I_clamp`, with
//!   `V_L` and with `R`;
//! - a wrong-sign current's wait, `L*|u|/E` with the loss's logarithm,
//!   grows with `|u|`, shrinks with `R` and with `E`.
//!
//! Scaling the inductance by `l` and the whole node capacitance by `k` is
//! the nominal leg in time `sqrt(l*k)*tau` at current `u*sqrt(l/k)` with the
//! loss `R*sqrt(k/l)` (as the resonant cell's, [`crate::tank::robust_grid`]);
//! the grid is computed at the least and the largest loss that scaling
//! gives, so the loss is bounded, not approximated. At each grid node the
//! latest opening (least drive, most loss, for a wrong-sign current the
//! wait at least loss), the earliest opening and the shortest reversal are
//! stored. Over a cell of the grid in `u` the opening lies between its two
//! ends' values and the reversal likewise: no interpolation, the bound is
//! exact up to the integrator's error. With `M` and `m` the largest and
//! least `sqrt(l*k)` that a box's (current, l, k) reach inside a cell,
//! the latest opening is at most `M*open_max(u_left)` and the earliest
//! close at least `m*open_min(u_right) + min(m*rev_min(u_left), diode)`
//! (the accepted conduction does not scale).
//!
//! The bus voltage is the exception: a larger bus both adds charge and
//! drives the swing harder, and no ordering holds in general. Rows of the
//! grid sit [`LN_V_STEP`] apart in ln(Vbus); between two rows a value is
//! taken as the larger (opening) or smaller (reversal, close) of the two
//! rows', widened by [`EPS_FACTOR`] times the difference measured at the
//! midway row against the rows' mean: a measured allowance, as the
//! resonant cell's grid has, checked in `tests/leg_grid.rs` against the
//! edge solved at random points of held-out boxes.

use timing_core::coss::CossPoint;
use timing_core::leg::{Edge, EdgeTransition, Leg, LegPoint, NodeCapacitance};
use timing_core::ring::clamp_time_s;
use timing_core::robust::RobustWindow;
use timing_core::{Error, Quantity};

use crate::tank::real_tank::scaled_curve;

/// Row spacing in ln(bus voltage).
pub const LN_V_STEP: f64 = 0.005;
/// Safety factor on the difference measured at a midway row.
pub const EPS_FACTOR: f64 = 3.0;
/// Relative allowance for the integrator's own error (its steps fall
/// differently at another current), fraction.
const MODEL_REL: f64 = 1e-6;
/// Neighbouring columns closer than this (relative) are not split
/// whatever `tol_s` asks: near a small current the opening goes as 1/u, and
/// a relative step keeps the column count to a few thousand.
const REL_TOL: f64 = 1e-4;
/// Columns of the first pass, before refinement.
const FIRST_COLUMNS: usize = 129;
/// Rounds of refinement (each may halve every cell).
const ROUNDS: usize = 16;
/// Column limit.
const MAX_COLUMNS: usize = 1 << 13;

/// The voltage at the inductor's far end.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum FarEnd {
    /// A fixed voltage (a regulated output), volt.
    Volts(f64),
    /// A fraction of the bus (a split capacitor, a transformer's
    /// reflected mid-point).
    OfBus(f64),
}

impl FarEnd {
    /// The far end's voltage on a bus of `vbus` volt.
    #[must_use]
    pub fn at(&self, vbus: f64) -> f64 {
        match *self {
            FarEnd::Volts(v) => v,
            FarEnd::OfBus(f) => f * vbus,
        }
    }
}

/// A half-bridge leg as built: the transition inductance, both switches'
/// output-capacitance curves, the added capacitance, the loop's
/// resistance, the body-diode conduction accepted, and the far end.
#[derive(Debug, Clone, PartialEq)]
pub struct LegAsBuilt {
    /// Inductance from the node to the far end, henry.
    pub l_h: f64,
    /// Low switch's Coss curve (empty: none).
    pub low: Vec<CossPoint<f64>>,
    /// High switch's Coss curve (empty: none).
    pub high: Vec<CossPoint<f64>>,
    /// Capacitance added at the node, farad.
    pub c_ext_f: f64,
    /// Loop resistance, ohm.
    pub r_ohm: f64,
    /// Longest body-diode conduction accepted after the swing, second.
    pub max_diode_s: f64,
    /// The inductor's far end.
    pub far_end: FarEnd,
}

/// The signed current out of the node for the edge-directed current `u`.
#[must_use]
pub fn node_current(edge: Edge, u: f64) -> f64 {
    match edge {
        Edge::Falling => u,
        Edge::Rising => -u,
    }
}

impl LegAsBuilt {
    /// This leg on a board whose inductance is `l` times and whose whole
    /// node capacitance (curves and added capacitor) is `k` times the
    /// nominal, with the loop resistance `r_ohm`.
    #[must_use]
    pub fn board(&self, l: f64, k: f64, r_ohm: f64) -> Self {
        Self {
            l_h: self.l_h * l,
            low: scaled_curve(&self.low, k),
            high: scaled_curve(&self.high, k),
            c_ext_f: self.c_ext_f * k,
            r_ohm,
            ..self.clone()
        }
    }

    /// timing-core's leg over these parts.
    ///
    /// # Errors
    /// As [`Leg::new`] and [`NodeCapacitance::new`].
    pub fn leg(&self) -> Result<Leg<'_, f64>, Error> {
        Leg::new(
            self.l_h,
            NodeCapacitance::new(&self.low, &self.high, self.c_ext_f)?,
            self.r_ohm,
            self.max_diode_s,
        )
    }

    /// The far end on a bus of `vbus` volt, times `mult`, kept on the bus.
    #[must_use]
    pub fn far_v(&self, vbus: f64, mult: f64) -> f64 {
        (self.far_end.at(vbus) * mult).clamp(0.0, vbus)
    }

    /// The edge at bus `vbus` volt and edge-directed current `u` ampere,
    /// with the far end at `far_v` volt.
    ///
    /// # Errors
    /// As [`LegPoint::new`] and [`Leg::edge`].
    pub fn edge(
        &self,
        leg: &Leg<'_, f64>,
        edge: Edge,
        vbus: f64,
        u: f64,
        far_v: f64,
    ) -> Result<EdgeTransition<f64>, Error> {
        leg.edge(edge, &LegPoint::new(vbus, node_current(edge, u), far_v)?)
    }
}

/// The voltage driving an edge's swing (falling: bus less far end above
/// it, node less far end; rising: the far end) and the voltage across the
/// inductor once the incoming diode clamps (falling: the far end; rising:
/// bus less far end).
#[must_use]
pub fn edge_voltages(edge: Edge, vbus: f64, far_v: f64) -> (f64, f64) {
    match edge {
        Edge::Falling => (vbus - far_v, far_v),
        Edge::Rising => (far_v, vbus - far_v),
    }
}

/// What varies over the box besides the operating point: multipliers of
/// the inductance, of the whole node capacitance, and of the far end's
/// voltage.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LegSpread {
    /// Inductance multiplier range.
    pub l: (f64, f64),
    /// Node-capacitance multiplier range.
    pub k: (f64, f64),
    /// Far-end voltage multiplier range.
    pub far: (f64, f64),
}

impl LegSpread {
    /// From relative half-widths (0.05 for 5 %).
    #[must_use]
    pub fn new(l_rel: f64, c_rel: f64, far_rel: f64) -> Self {
        Self {
            l: (1.0 - l_rel, 1.0 + l_rel),
            k: (1.0 - c_rel, 1.0 + c_rel),
            far: (1.0 - far_rel, 1.0 + far_rel),
        }
    }

    /// The range of `sqrt(l/k)`.
    fn rho(&self) -> (f64, f64) {
        ((self.l.0 / self.k.1).sqrt(), (self.l.1 / self.k.0).sqrt())
    }
}

/// The true value behind a sensed, signed `measured` one: the reading is
/// `true*(1 + g) + e` with `|g| <= gain_rel` and `|e| <= abs`.
#[must_use]
pub fn true_range_signed(measured: f64, gain_rel: f64, abs: f64) -> (f64, f64) {
    let (a, b) = (measured - abs, measured + abs);
    let lo = (a / (1.0 + gain_rel)).min(a / (1.0 - gain_rel));
    let hi = (b / (1.0 + gain_rel)).max(b / (1.0 - gain_rel));
    (lo, hi)
}

/// The larger of two values, NaN when either is.
fn nan_max(a: f64, b: f64) -> f64 {
    if a.is_nan() || b.is_nan() {
        f64::NAN
    } else {
        a.max(b)
    }
}

/// The values stored at a node: latest and earliest opening, shortest
/// reversal, second (NaN opening: some leg of the box may stop short).
#[derive(Debug, Clone, Copy, PartialEq)]
struct Node {
    open_max: f64,
    open_min: f64,
    rev_min: f64,
}

impl Node {
    const SHORT: Self = Self {
        open_max: f64::NAN,
        open_min: f64::NAN,
        rev_min: f64::NAN,
    };
    fn values(&self) -> [f64; 3] {
        [self.open_max, self.open_min, self.rev_min]
    }
}

/// The two legs a node is solved on (least and largest loss) and the far
/// end's worst and best multipliers for the edge.
struct Solvers<'a> {
    edge: Edge,
    built: &'a LegAsBuilt,
    lossy: Leg<'a, f64>,
    lossless: Leg<'a, f64>,
    r: (f64, f64),
    far_worst: f64,
    far_best: f64,
}

/// The opening and the reversal (uncapped) of one solve; NaN where the
/// swing stops short.
fn open_and_reversal(t: &EdgeTransition<f64>, l_h: f64, r: f64, v_l: f64) -> (f64, f64) {
    match t.turn_on.window() {
        Some(w) => {
            let rev = if v_l > 0.0 {
                clamp_time_s(l_h, r, v_l, -t.clamp_start_current_a, 0.0)
            } else {
                f64::INFINITY
            };
            (w.open_s, rev)
        }
        None => (f64::NAN, f64::NAN),
    }
}

impl Solvers<'_> {
    /// The node at bus `v` and edge-directed current `u`.
    fn node(&self, v: f64, u: f64) -> Result<Node, Error> {
        let b = self.built;
        let far_w = b.far_v(v, self.far_worst);
        let far_b = b.far_v(v, self.far_best);
        let (e_w, vl_w) = edge_voltages(self.edge, v, far_w);
        let (e_b, _) = edge_voltages(self.edge, v, far_b);
        let from = u.max(0.0);
        let worst = b.edge(&self.lossy, self.edge, v, from, far_w)?;
        let best = b.edge(&self.lossless, self.edge, v, from, far_b)?;
        let (open_w, rev) = open_and_reversal(&worst, b.l_h, self.r.1, vl_w);
        let (open_b, _) = open_and_reversal(&best, b.l_h, self.r.0, 0.0);
        if open_w.is_nan() || open_b.is_nan() {
            return Ok(Node::SHORT);
        }
        if u >= 0.0 {
            return Ok(Node {
                open_max: open_w,
                open_min: open_b,
                rev_min: rev,
            });
        }
        // A wrong-sign current waits first: longest at the least loss and
        // the least drive, shortest at the largest loss and the most.
        if e_w <= 0.0 || e_b <= 0.0 {
            return Ok(Node::SHORT);
        }
        Ok(Node {
            open_max: clamp_time_s(b.l_h, self.r.0, e_w, u, 0.0) + open_w,
            open_min: clamp_time_s(b.l_h, self.r.1, e_b, u, 0.0) + open_b,
            rev_min: rev,
        })
    }
}

/// The robust windows of one edge of a leg over a tolerance box, for
/// boxes of bus voltage and current inside the ranges it was built for.
#[derive(Debug, Clone)]
pub struct LegGrid {
    edge: Edge,
    spread: LegSpread,
    max_diode_s: f64,
    ln_v0: f64,
    d_ln_v: f64,
    nv: usize,
    /// Edge-directed currents of the columns, ascending.
    u: Vec<f64>,
    /// Node (a, b) at `a*u.len() + b`.
    nodes: Vec<Node>,
    /// Allowance between rows a and a + 1 at column b, per stored value,
    /// index `a*u.len() + b`.
    eps: Vec<[f64; 3]>,
}

/// Rows of nodes, each over all columns.
type Rows = Vec<Vec<Node>>;

/// One row of nodes (at bus `v`) over the columns `u`.
fn row(s: &Solvers<'_>, v: f64, u: &[f64]) -> Result<Vec<Node>, Error> {
    u.iter().map(|&x| s.node(v, x)).collect()
}

impl LegGrid {
    /// The grid of `edge` of `built` for boxes within `spread`, true bus
    /// voltages `v` (volt, positive) and true signed currents out of the
    /// node `i` (ampere), refined along the current until neighbouring
    /// columns differ by at most `tol_s` second or 1e-4 of their value (or
    /// a column is a millionth of the range wide), on all cores.
    ///
    /// # Errors
    /// timing-core's error for parts or a point the model refuses;
    /// [`Error::OutOfRange`] naming [`Quantity::BusVoltage`] or
    /// [`Quantity::NodeCurrent`] for an empty or non-finite range.
    pub fn new(
        built: &LegAsBuilt,
        edge: Edge,
        spread: &LegSpread,
        v: (f64, f64),
        i: (f64, f64),
        tol_s: f64,
    ) -> Result<Self, Error> {
        if !(v.0 > 0.0 && v.1 >= v.0 && v.1.is_finite()) {
            return Err(Error::OutOfRange {
                quantity: Quantity::BusVoltage,
                value: v.0,
                min: 0.0,
                max: f64::INFINITY,
            });
        }
        if !(i.0.is_finite() && i.1.is_finite() && i.1 >= i.0) {
            return Err(Error::OutOfRange {
                quantity: Quantity::NodeCurrent,
                value: i.0,
                min: f64::NEG_INFINITY,
                max: i.1,
            });
        }
        let rho = spread.rho();
        let r = (
            built.r_ohm * (spread.k.0 / spread.l.1).sqrt(),
            built.r_ohm * (spread.k.1 / spread.l.0).sqrt(),
        );
        let lossy_parts = LegAsBuilt {
            r_ohm: r.1,
            ..built.clone()
        };
        let lossless_parts = LegAsBuilt {
            r_ohm: r.0,
            ..built.clone()
        };
        let (far_worst, far_best) = match edge {
            Edge::Falling => (spread.far.1, spread.far.0),
            Edge::Rising => (spread.far.0, spread.far.1),
        };
        let solvers = Solvers {
            edge,
            built,
            lossy: lossy_parts.leg()?,
            lossless: lossless_parts.leg()?,
            r,
            far_worst,
            far_best,
        };
        // Edge-directed currents the boxes reach, a hair wider.
        let (ua, ub) = match edge {
            Edge::Falling => (i.0, i.1),
            Edge::Rising => (-i.1, -i.0),
        };
        let u_lo = (ua * rho.0).min(ua * rho.1);
        let u_hi = (ub * rho.0).max(ub * rho.1);
        let pad = 1e-9 * (u_hi - u_lo).max(u_hi.abs()).max(1e-9);
        let (u_lo, u_hi) = (u_lo - pad, u_hi + pad);
        let (v0, v1) = (v.0 * (1.0 - 1e-9), v.1 * (1.0 + 1e-9));
        let nv = (((v1 / v0).ln() / LN_V_STEP).ceil() as usize + 1).max(2);
        let d_ln_v = (v1 / v0).ln() / (nv - 1) as f64;
        let v_at = |a: f64| (v0.ln() + a * d_ln_v).exp();
        // Rows, then the midway rows, over the columns.
        let mut u: Vec<f64> = (0..FIRST_COLUMNS)
            .map(|b| u_lo + (u_hi - u_lo) * b as f64 / (FIRST_COLUMNS - 1) as f64)
            .collect();
        let solve = |u: &[f64]| -> Result<(Rows, Rows), Error> {
            let rows: Vec<Result<Vec<Node>, Error>> =
                crate::par::map_rows(2 * nv - 1, |k| row(&solvers, v_at(k as f64 / 2.0), u));
            let mut full = Vec::with_capacity(nv);
            let mut mid = Vec::with_capacity(nv);
            for (k, r) in rows.into_iter().enumerate() {
                if k % 2 == 0 {
                    full.push(r?);
                } else {
                    mid.push(r?);
                }
            }
            Ok((full, mid))
        };
        let (mut full, mut mid) = solve(&u)?;
        let min_width = (u_hi - u_lo) * 1e-6;
        for _ in 0..ROUNDS {
            let split: Vec<usize> = (0..u.len() - 1)
                .filter(|&b| {
                    u[b + 1] - u[b] > 2.0 * min_width
                        && full.iter().chain(&mid).any(|r| {
                            let (p, q) = (r[b].values(), r[b + 1].values());
                            p.iter().zip(&q).any(|(x, y)| {
                                x.is_nan() != y.is_nan()
                                    || (x - y).abs() > tol_s.max(REL_TOL * x.abs())
                            })
                        })
                })
                .collect();
            if split.is_empty() || u.len() + split.len() > MAX_COLUMNS {
                break;
            }
            let new: Vec<f64> = split.iter().map(|&b| 0.5 * (u[b] + u[b + 1])).collect();
            let (nf, nm) = solve(&new)?;
            let merge = |old: &mut Rows, add: Rows| {
                for (o, a) in old.iter_mut().zip(add) {
                    let mut out = Vec::with_capacity(o.len() + a.len());
                    let mut it = a.into_iter();
                    let mut next = 0;
                    for (b, n) in o.iter().enumerate() {
                        out.push(*n);
                        if split.get(next) == Some(&b) {
                            if let Some(x) = it.next() {
                                out.push(x);
                            }
                            next += 1;
                        }
                    }
                    *o = out;
                }
            };
            merge(&mut full, nf);
            merge(&mut mid, nm);
            let mut merged = Vec::with_capacity(u.len() + new.len());
            let mut next = 0;
            for (b, &x) in u.iter().enumerate() {
                merged.push(x);
                if split.get(next) == Some(&b) {
                    merged.push(new[next]);
                    next += 1;
                }
            }
            u = merged;
        }
        let nu = u.len();
        let mut eps = Vec::with_capacity((nv - 1) * nu);
        for a in 0..nv - 1 {
            for b in 0..nu {
                let (p, q, c) = (
                    full[a][b].values(),
                    full[a + 1][b].values(),
                    mid[a][b].values(),
                );
                eps.push([0, 1, 2].map(|f| {
                    if p[f].is_infinite() && q[f].is_infinite() && c[f].is_infinite() {
                        // No reversal anywhere between the rows.
                        return 0.0;
                    }
                    EPS_FACTOR * (c[f] - 0.5 * (p[f] + q[f])).abs()
                        + MODEL_REL * p[f].abs().max(q[f].abs())
                }));
            }
        }
        Ok(Self {
            edge,
            spread: *spread,
            max_diode_s: built.max_diode_s,
            ln_v0: v0.ln(),
            d_ln_v,
            nv,
            u,
            nodes: full.into_iter().flatten().collect(),
            eps,
        })
    }

    /// Rows and columns of the grid.
    #[must_use]
    pub fn size(&self) -> (usize, usize) {
        (self.nv, self.u.len())
    }

    /// The largest and least `sqrt(l*k)` over the (current, l, k) of the
    /// box whose scaled current `u*sqrt(l/k)` lies in `[c0, c1]`, with the
    /// box's edge-directed currents `i`; `None` where none does.
    fn scale_range(&self, i: (f64, f64), c0: f64, c1: f64) -> Option<(f64, f64)> {
        let (mut lo, mut hi) = self.spread.rho();
        // rho*i.0 <= c1 and rho*i.1 >= c0, each a half-line in rho.
        for (a, c) in [(i.0, c1), (-i.1, -c0)] {
            if a > 0.0 {
                hi = hi.min(c / a);
            } else if a < 0.0 {
                lo = lo.max(c / a);
            } else if c < 0.0 {
                return None;
            }
        }
        if lo > hi {
            return None;
        }
        let (l, k) = (self.spread.l, self.spread.k);
        let big = (l.1 / k.1).sqrt().clamp(lo, hi);
        let small = (l.0 / k.0).sqrt().clamp(lo, hi);
        Some(((big * k.1).min(l.1 / big), (small * k.0).max(l.0 / small)))
    }

    /// The robust window over true bus voltages `v` and true signed
    /// currents out of the node `i`, with the timer's peak `jitter_s` taken
    /// off both ends, second from the outgoing switch's turn-off. `None`
    /// where some leg of the box may stop short of the rail, the windows
    /// share nothing, or the box leaves the grid.
    #[must_use]
    pub fn robust(&self, v: (f64, f64), i: (f64, f64), jitter_s: f64) -> Option<RobustWindow<f64>> {
        let (open, close) = self.bounds(v, i)?;
        let (open, close) = (open + jitter_s, close - jitter_s);
        (close >= open).then_some(RobustWindow {
            open_s: open,
            close_s: close,
        })
    }

    /// The latest opening and the earliest close over the box, second,
    /// also where they cross; `None` where some leg of the box may stop
    /// short or the box leaves the grid.
    #[must_use]
    pub fn bounds(&self, v: (f64, f64), i: (f64, f64)) -> Option<(f64, f64)> {
        if !(v.0 > 0.0 && v.0 <= v.1 && i.0 <= i.1) {
            return None;
        }
        let x = |v: f64| (v.ln() - self.ln_v0) / self.d_ln_v;
        let (x0, x1) = (x(v.0), x(v.1));
        let last = (self.nv - 1) as f64;
        if !(x0 >= -1e-9 && x1 <= last + 1e-9) {
            return None;
        }
        let a0 = (x0.max(0.0).floor() as usize).min(self.nv - 2);
        let a1 = ((x1.min(last).ceil() as usize).max(1) - 1).clamp(a0, self.nv - 2);
        let di = match self.edge {
            Edge::Falling => i,
            Edge::Rising => (-i.1, -i.0),
        };
        let rho = self.spread.rho();
        let u_lo = (di.0 * rho.0).min(di.0 * rho.1);
        let u_hi = (di.1 * rho.0).max(di.1 * rho.1);
        let nu = self.u.len();
        if u_lo < self.u[0] || u_hi > self.u[nu - 1] {
            return None;
        }
        // Columns: the cell holding u_lo to the one holding u_hi.
        let b0 = self
            .u
            .partition_point(|&x| x <= u_lo)
            .saturating_sub(1)
            .min(nu - 2);
        let b1 = self.u.partition_point(|&x| x < u_hi).clamp(b0 + 1, nu - 1);
        let mut latest = f64::NEG_INFINITY;
        let mut earliest = f64::INFINITY;
        for b in b0..b1 {
            let Some((big, small)) = self.scale_range(di, self.u[b], self.u[b + 1]) else {
                continue;
            };
            for a in a0..=a1 {
                let n = |a: usize, b: usize| self.nodes[a * nu + b];
                let (e_l, e_r) = (self.eps[a * nu + b], self.eps[a * nu + b + 1]);
                let (p, q) = (n(a, b), n(a + 1, b));
                let (pr, qr) = (n(a, b + 1), n(a + 1, b + 1));
                let open_max = nan_max(p.open_max, q.open_max) + e_l[0];
                let open_min = -nan_max(-pr.open_min, -qr.open_min) - e_r[1];
                let rev_min = -nan_max(-p.rev_min, -q.rev_min) - e_l[2];
                if open_max.is_nan() || open_min.is_nan() || rev_min.is_nan() {
                    return None;
                }
                latest = latest.max(big * open_max);
                earliest = earliest.min(small * open_min + (small * rev_min).min(self.max_diode_s));
            }
        }
        (latest.is_finite() && earliest.is_finite()).then_some((latest, earliest))
    }
}
