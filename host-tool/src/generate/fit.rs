//! Table entries fitted to intervals, not to points.
//!
//! Every code pair asks for a command inside an interval: the robust window
//! where the design's tolerances leave one a tick wide, else the nominal
//! window where that is a tick wide, intersected with the error budget
//! around the aim (`max_error_ticks`); where no window is a tick wide only
//! the budget applies. The lookup rounds half up, so a whole tick `n` in
//! `[a, b]` is commanded exactly when the interpolated value lies in
//! `[ceil(a) - 1/2, floor(b) + 1/2)`. The interpolated value is linear in
//! the entries (weights from the same integer index arithmetic as
//! timing-core's lookup), so the entries that meet every pair form a
//! convex set: generation solves the quadratic programme
//!
//! minimise the squared distance to the aim over all pairs (plus a small
//! pull of each entry to the aim at its node) subject to every selected
//! pair's interval, shrunk by the entries' rounding (`2^-frac_bits`
//! ticks: half a unit for the entry, half for the row interpolation)
//!
//! with Clarabel's interior-point solver. The selected pairs start as the
//! extremes of each table cell (the tightest lower and upper bound per
//! sub-cell of weights); after each solve the rounded table is checked at
//! every pair and the pairs it misses join the selection (a cutting-plane
//! loop). A layout for which the programme is infeasible is too coarse:
//! generation tries the next larger one.

use clarabel::algebra::CscMatrix;
use clarabel::solver::{
    DefaultSettingsBuilder, DefaultSolver, IPSolver, NonnegativeConeT, SolverStatus,
};
use timing_core::table::{log_ratio_index, Fallback, Layout};
use timing_core::AdcCode;

use crate::generate::generated::Generated;
use crate::model::design::Design;
use crate::model::exact::ExactModel;

/// What one code pair asks of the command.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Requirement {
    /// Voltage code.
    pub vin: u16,
    /// Current code.
    pub io: u16,
    /// The aim, ticks (not rounded).
    pub aim: f64,
    /// The interpolated value (ticks, before the lookup's rounding) must
    /// lie in `[lo, hi)`.
    pub lo: f64,
    /// See `lo`.
    pub hi: f64,
    /// Whether a window (robust or nominal) a tick wide sets the interval
    /// (else only the error budget does).
    pub windowed: bool,
}

impl Requirement {
    /// What the pair (`vin`, `io`) asks with the aim `aim` (ticks), the
    /// interval `required` the command must hit where a window a tick wide
    /// sets one, and the error budget `budget` (ticks): the window's whole
    /// ticks within the budget around the aim where the two overlap, the
    /// window's alone where they do not, the budget's alone without a
    /// window.
    #[must_use]
    pub fn of(vin: u16, io: u16, aim: f64, required: Option<(f64, f64)>, budget: f64) -> Self {
        let band = rounds_into(aim - budget, aim + budget);
        let (lo, hi, windowed) = match required {
            Some((a, b)) => {
                let w = rounds_into(a, b);
                let both = (w.0.max(band.0), w.1.min(band.1));
                if both.0 < both.1 {
                    (both.0, both.1, true)
                } else {
                    (w.0, w.1, true)
                }
            }
            None => (band.0, band.1, false),
        };
        Self {
            vin,
            io,
            aim,
            lo,
            hi,
            windowed,
        }
    }
}

/// The requirements of every code pair of a design.
#[derive(Debug, Clone)]
pub struct Requirements {
    /// Row-major over the voltage codes, then the current codes; pairs the
    /// model refused and, with a fixed fallback, pairs the lookup's ZVS
    /// test sends to it, are left out.
    pub pairs: Vec<Requirement>,
}

/// `[ceil(a) - 1/2, floor(b) + 1/2)`: the interpolated values that round
/// half up to a whole tick in `[a, b]`.
fn rounds_into(a: f64, b: f64) -> (f64, f64) {
    (a.ceil() - 0.5, b.floor() + 0.5)
}

impl Requirements {
    /// The requirements of `design` at every code pair, from `model`, on
    /// all cores; `zvs` is the lookup's ZVS test (used with a fixed
    /// fallback only).
    #[must_use]
    pub fn new(
        design: &Design,
        model: &ExactModel<'_>,
        zvs: &(dyn Fn(u16, u16) -> bool + Sync),
    ) -> Self {
        let (v, i) = (design.vin_codes, design.io_codes);
        let budget = design.max_error_ticks;
        let fixed = matches!(design.fallback, Fallback::Fixed(_));
        let rows = crate::par::map_rows(v.len() as usize, |k| {
            let cv = v.lo + k as u16;
            let row = model.row_at_code(cv);
            let mut out = Vec::with_capacity(i.len() as usize);
            for ci in i.lo..=i.hi {
                if fixed && !zvs(cv, ci) {
                    continue;
                }
                let Ok(p) = row.at_code(ci) else {
                    continue;
                };
                out.push(Requirement::of(
                    cv,
                    ci,
                    p.table_ticks,
                    p.required_ticks,
                    budget,
                ));
            }
            out
        });
        Self {
            pairs: rows.into_iter().flatten().collect(),
        }
    }

    /// The pairs whose codes are both multiples of `every`: a sample for
    /// screening layouts (a layout that misses a sample's interval misses
    /// the full set's).
    #[must_use]
    pub fn sample(&self, every: u16) -> Self {
        let every = every.max(1);
        Self {
            pairs: self
                .pairs
                .iter()
                .filter(|r| r.vin % every == 0 && r.io % every == 0)
                .copied()
                .collect(),
        }
    }

    /// The pairs whose command by `g` misses its interval, and the worst
    /// |command - aim| over all pairs, ticks.
    #[must_use]
    pub fn misses(&self, g: &Generated) -> (Vec<usize>, f64) {
        let Ok(t) = g.table() else {
            return ((0..self.pairs.len()).collect(), f64::INFINITY);
        };
        const CHUNK: usize = 1 << 16;
        let chunks = crate::par::map_rows(self.pairs.len().div_ceil(CHUNK), |c| {
            let mut miss = Vec::new();
            let mut worst = 0.0f64;
            let start = c * CHUNK;
            let end = (start + CHUNK).min(self.pairs.len());
            for (k, r) in self.pairs[start..end].iter().enumerate() {
                let n = f64::from(t.delay(AdcCode::new(r.vin), AdcCode::new(r.io)).ticks.get());
                worst = worst.max((n - r.aim).abs());
                if !(n > r.lo && n < r.hi) {
                    miss.push(start + k);
                }
            }
            (miss, worst)
        });
        let mut miss = Vec::new();
        let mut worst = 0.0f64;
        for (m, w) in chunks {
            miss.extend(m);
            worst = worst.max(w);
        }
        (miss, worst)
    }
}

/// The nodes and weights the lookup of `g` blends at a code pair (the same
/// integer index arithmetic as timing-core's `DelayTable::delay`), with the
/// weights as fractions; `None` for layouts the fit does not serve.
#[must_use]
pub fn stencil(g: &Generated, vin: u16, io: u16) -> Option<[(usize, f64); 4]> {
    let s = &g.sensing;
    let v = u32::from(s.vin.clamp(AdcCode::new(vin)));
    let i = u32::from(s.io.clamp(AdcCode::new(io)).wrapping_sub(s.io_zero));
    let (d, st, cols, vs, rows) = match g.layout {
        Layout::LogVolt(l) => (
            log_ratio_index(v, i).saturating_sub(l.lambda_lo),
            l.step_shift,
            l.cols,
            l.vin_shift,
            l.rows,
        ),
        Layout::Margin(l) => (l.margin(v, i), l.step_shift, l.cols, l.vin_shift, l.rows),
        Layout::RatioVolt(l) => (
            ((v << l.ratio_shift) / i).saturating_sub(l.q_lo),
            l.step_shift,
            l.cols,
            l.vin_shift,
            l.rows,
        ),
        _ => return None,
    };
    let cell = |d: u32, shift: u8, nodes: u16| {
        let (k, f) = (d >> shift, d & ((1 << shift) - 1));
        if k > u32::from(nodes) - 2 {
            (u32::from(nodes) - 2, 1u32 << shift)
        } else {
            (k, f)
        }
    };
    let (k, fl) = cell(d, st, cols);
    let (r, fr) = cell(v - u32::from(s.vin.lo), vs, rows);
    let tl = f64::from(fl) / f64::from(1u32 << st);
    let tv = f64::from(fr) / f64::from(1u32 << vs);
    let cols = usize::from(cols);
    let b = r as usize * cols + k as usize;
    Some([
        (b, (1.0 - tl) * (1.0 - tv)),
        (b + 1, tl * (1.0 - tv)),
        (b + cols, (1.0 - tl) * tv),
        (b + cols + 1, tl * tv),
    ])
}

/// Sub-cells per axis of a table cell when picking the starting pairs.
const SUB: f64 = 4.0;
/// Rounds of the cutting-plane loop.
const ROUNDS: usize = 8;

/// Entries for the skeleton `g` (its layout and fractional bits; its
/// entries, the aim at each node, are the pull's targets) that meet every
/// requirement, or `None` when the programme is infeasible (the layout is
/// too coarse) or the loop did not close.
#[must_use]
pub fn fit(req: &Requirements, g: &Generated) -> Option<Vec<u16>> {
    fit_or_why(req, g).ok()
}

/// Why [`fit`] found no entries.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NoFit {
    /// The solver proved the programme infeasible: no entries of this
    /// layout meet the selected pairs' intervals, so none meet all.
    Infeasible,
    /// The solver stopped without an answer, or the cutting-plane loop did
    /// not close within its rounds.
    Unsettled,
}

/// [`fit`], saying why when it finds no entries.
///
/// # Errors
/// [`NoFit`].
pub fn fit_or_why(req: &Requirements, g: &Generated) -> Result<Vec<u16>, NoFit> {
    let n = g.entries.len();
    let scale = f64::from(1u32 << g.frac_bits);
    // The entries' own rounding moves the interpolant by at most half a
    // unit; the rows' rounding is left to the cutting-plane loop's check.
    let margin = 0.5 / scale + 1e-9;
    let top = f64::from(u16::MAX) / scale;
    // One pass over the pairs (in parallel chunks): the least-squares
    // terms, accumulated per table cell as a 4 x 4 block over the cell's
    // nodes, and per cell and sub-cell of weights the pair with the
    // highest lower bound and the one with the lowest upper (the starting
    // selection).
    type Picks = std::collections::HashMap<(usize, u32), (usize, usize)>;
    struct Acc {
        blocks: std::collections::HashMap<usize, ([usize; 4], [[f64; 4]; 4])>,
        q: Vec<f64>,
        pick: Picks,
        complete: bool,
    }
    const CHUNK: usize = 1 << 15;
    let parts = crate::par::map_rows(req.pairs.len().div_ceil(CHUNK), |c| {
        let mut acc = Acc {
            blocks: std::collections::HashMap::new(),
            q: vec![0.0; n],
            pick: Picks::new(),
            complete: true,
        };
        let start = c * CHUNK;
        let end = (start + CHUNK).min(req.pairs.len());
        for (k, r) in req.pairs[start..end].iter().enumerate() {
            let Some(st) = stencil(g, r.vin, r.io) else {
                acc.complete = false;
                break;
            };
            let nodes = st.map(|(a, _)| a);
            let block = acc.blocks.entry(st[0].0).or_insert((nodes, [[0.0; 4]; 4]));
            for (x, &(a, wa)) in st.iter().enumerate() {
                if wa == 0.0 {
                    continue;
                }
                acc.q[a] -= wa * r.aim;
                for (y, &(_, wb)) in st.iter().enumerate() {
                    block.1[x][y] += wa * wb;
                }
            }
            let k = start + k;
            let e = acc.pick.entry(sub_cell(&st)).or_insert((k, k));
            if r.lo > req.pairs[e.0].lo {
                e.0 = k;
            }
            if r.hi < req.pairs[e.1].hi {
                e.1 = k;
            }
        }
        acc
    });
    let mut p = std::collections::BTreeMap::<(usize, usize), f64>::new();
    let mut q = vec![0.0; n];
    let mut pick = Picks::new();
    for part in parts {
        if !part.complete {
            return Err(NoFit::Unsettled);
        }
        for (qk, x) in q.iter_mut().zip(&part.q) {
            *qk += x;
        }
        for (nodes, m) in part.blocks.into_values() {
            for (x, &a) in nodes.iter().enumerate() {
                for (y, &b) in nodes.iter().enumerate() {
                    if a <= b && m[x][y] != 0.0 {
                        *p.entry((a, b)).or_insert(0.0) += m[x][y];
                    }
                }
            }
        }
        // Chunks come in order: a later chunk's pick replaces an earlier
        // one only when strictly tighter, as in one pass.
        for (key, (lo, hi)) in part.pick {
            let e = pick.entry(key).or_insert((lo, hi));
            if req.pairs[lo].lo > req.pairs[e.0].lo {
                e.0 = lo;
            }
            if req.pairs[hi].hi < req.pairs[e.1].hi {
                e.1 = hi;
            }
        }
    }
    // Plus a small pull of each entry to the aim at its node.
    let pull = 1e-3 * (req.pairs.len() as f64 / n as f64).max(1.0);
    for (k, qk) in q.iter_mut().enumerate() {
        *p.entry((k, k)).or_insert(0.0) += pull;
        *qk -= pull * f64::from(g.entries[k]) / scale;
    }
    let (pi, pj, pv) = p.into_iter().fold(
        (Vec::new(), Vec::new(), Vec::new()),
        |(mut i, mut j, mut v), ((a, b), x)| {
            i.push(a);
            j.push(b);
            v.push(x);
            (i, j, v)
        },
    );
    let pm = CscMatrix::new_from_triplets(n, n, pi, pj, pv);
    let mut chosen: Vec<usize> = pick.values().flat_map(|&(a, b)| [a, b]).collect();
    chosen.sort_unstable();
    chosen.dedup();
    let mut out = g.clone();
    for _ in 0..ROUNDS {
        let x = solve(&pm, &q, &chosen, g, req, margin, top)?;
        out.entries = x
            .iter()
            .map(|e| (e * scale).round().clamp(0.0, f64::from(u16::MAX)) as u16)
            .collect();
        let (miss, _) = req.misses(&out);
        if miss.is_empty() {
            return Ok(out.entries);
        }
        chosen.extend(miss);
        chosen.sort_unstable();
        chosen.dedup();
    }
    Err(NoFit::Unsettled)
}

/// The table cell of a stencil (its first node) and the sub-cell of its
/// weights, `SUB` per axis: the groups the starting selection and the
/// cutting planes pick their pairs from.
fn sub_cell(st: &[(usize, f64); 4]) -> (usize, u32) {
    let (tl, tv) = (st[1].1 + st[3].1, st[2].1 + st[3].1);
    let sub = ((tl * SUB).min(SUB - 1.0) as u32) * 16 + (tv * SUB).min(SUB - 1.0) as u32;
    (st[0].0, sub)
}

/// One solve of the programme over the `chosen` pairs' intervals.
fn solve(
    pm: &CscMatrix<f64>,
    q: &[f64],
    chosen: &[usize],
    g: &Generated,
    req: &Requirements,
    margin: f64,
    top: f64,
) -> Result<Vec<f64>, NoFit> {
    let n = q.len();
    let (mut ai, mut aj, mut av, mut b) = (Vec::new(), Vec::new(), Vec::new(), Vec::new());
    let mut row = 0;
    for &k in chosen {
        let r = &req.pairs[k];
        // y <= hi - margin and -y <= -(lo + margin).
        for (sign, bound) in [(1.0, r.hi - margin), (-1.0, -(r.lo + margin))] {
            for &(c, w) in &stencil(g, r.vin, r.io).ok_or(NoFit::Unsettled)? {
                if w != 0.0 {
                    ai.push(row);
                    aj.push(c);
                    av.push(sign * w);
                }
            }
            b.push(bound);
            row += 1;
        }
    }
    for c in 0..n {
        for (sign, bound) in [(1.0, top), (-1.0, 0.0)] {
            ai.push(row);
            aj.push(c);
            av.push(sign);
            b.push(bound);
            row += 1;
        }
    }
    let a = CscMatrix::new_from_triplets(row, n, ai, aj, av);
    let settings = DefaultSettingsBuilder::default()
        .verbose(false)
        .max_iter(200)
        .build()
        .map_err(|_| NoFit::Unsettled)?;
    let mut solver = DefaultSolver::new(pm, q, &a, &b, &[NonnegativeConeT(row)], settings)
        .map_err(|_| NoFit::Unsettled)?;
    solver.solve();
    match solver.solution.status {
        SolverStatus::Solved | SolverStatus::AlmostSolved => Ok(solver.solution.x.clone()),
        SolverStatus::PrimalInfeasible | SolverStatus::AlmostPrimalInfeasible => {
            Err(NoFit::Infeasible)
        }
        _ => Err(NoFit::Unsettled),
    }
}

/// Whether the layouts of `design` may be fitted to intervals (every
/// layout whose lookup [`stencil`] describes).
#[must_use]
pub fn serves(g: &Generated) -> bool {
    matches!(
        g.layout,
        Layout::LogVolt(_) | Layout::Margin(_) | Layout::RatioVolt(_)
    )
}
