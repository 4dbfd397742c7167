//! A half-bridge leg's dead-time tables, one an edge: the requirements of
//! every code pair from the leg's exact model ([`crate::model::leg_model`]),
//! the smallest layout of timing-core's [`timing_core::leg_table`] whose
//! entries the interval fit ([`crate::generate::fit`]) makes meet them, and
//! the figures of that table at every code pair.

use timing_core::leg::Edge;
use timing_core::leg_table::edge_sensing;
use timing_core::table::{Fallback, Layout, MarginLayout};
use timing_core::AdcCode;

use crate::generate::fit::{fit_or_why, NoFit, Requirement, Requirements};
use crate::generate::generated::Generated;
use crate::generate::GenerateError;
pub use crate::input::leg_design::edge_name;
use crate::input::leg_design::{edge_index, LegSpec};
use crate::model::leg_model::{LegModel, LegPair};

/// Largest table per edge, bytes.
pub const MAX_TABLE_BYTES: usize = 16 * 1024;

/// The model at every code pair of an edge, row-major over the bus codes.
#[derive(Debug, Clone)]
pub struct EdgePairs {
    /// The edge.
    pub edge: Edge,
    /// Bus codes.
    pub bus: timing_core::CodeRange,
    /// Current codes.
    pub current: timing_core::CodeRange,
    /// The model at `(bus.lo + r, current.lo + c)`, index `r*cols + c`.
    pub pairs: Vec<LegPair>,
}

/// Figures of one edge's table at every code pair.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct EdgeFigures {
    /// Code pairs.
    pub pairs: u64,
    /// Pairs with a window a step wide (robust or nominal).
    pub windowed: u64,
    /// Pairs whose commanded step lies outside that window.
    pub outside_window: u64,
    /// Pairs with a robust window a step wide.
    pub robust: u64,
    /// Of those, pairs commanded outside it.
    pub outside_robust: u64,
    /// Pairs whose swing stops short (nominal leg).
    pub short: u64,
    /// Pairs whose least dead time lies past the window's close.
    pub floor_blocks: u64,
    /// Pairs commanded below the least dead time (must be 0).
    pub below_floor: u64,
    /// Worst |command - aim| over the pairs the error budget applies to
    /// ([`LegPair::budgeted`]), steps.
    pub worst_budgeted_steps: f64,
    /// Worst |command - aim| over all pairs, steps.
    pub worst_steps: f64,
}

/// One edge's table and its figures.
#[derive(Debug, Clone)]
pub struct EdgeOutcome {
    /// The edge.
    pub edge: Edge,
    /// The table.
    pub table: Generated,
    /// Its figures at every code pair.
    pub figures: EdgeFigures,
    /// Layouts tried before it, `(rows, cols, why not)`.
    pub tried: Vec<(u16, u16, &'static str)>,
    /// Rows and columns of the robust grid (with tolerances).
    pub grid: Option<(usize, usize)>,
}

impl EdgePairs {
    /// The model of `edge` of `spec` at every code pair, on all cores.
    ///
    /// # Errors
    /// [`GenerateError::LegModel`] for a point the model refuses.
    pub fn new(spec: &LegSpec, model: &LegModel<'_>) -> Result<Self, GenerateError> {
        let edge = model.edge();
        let bus = spec.bus_codes;
        let current = spec.current_codes[edge_index(edge)];
        let rows = crate::par::map_rows(bus.len() as usize, |r| {
            let cb = bus.lo + r as u16;
            (current.lo..=current.hi)
                .map(|ci| {
                    model.at_codes(cb, ci).map_err(|e| GenerateError::LegModel {
                        edge: edge_name(edge),
                        vbus_v: spec.vbus_of(cb),
                        current_a: spec.current_of(ci),
                        message: e.to_string(),
                    })
                })
                .collect::<Result<Vec<_>, _>>()
        });
        let mut pairs = Vec::with_capacity((bus.len() * current.len()) as usize);
        for r in rows {
            pairs.extend(r?);
        }
        Ok(Self {
            edge,
            bus,
            current,
            pairs,
        })
    }

    /// The codes of pair `k`.
    fn codes(&self, k: usize) -> (u16, u16) {
        let cols = self.current.len() as usize;
        (
            self.bus.lo + (k / cols) as u16,
            self.current.lo + (k % cols) as u16,
        )
    }

    /// What every pair asks of the table: where a window a step wide
    /// exists, a whole step inside it, within the design's error budget of
    /// the aim where the model says the budget applies
    /// ([`LegPair::budgeted`]); elsewhere (a swing that stops short, a window narrower than
    /// a step) only a whole step from the least dead time on, the aim left
    /// to the fit's least squares. Where the accepted diode conduction
    /// closes the window it is wide right at the point where the swing
    /// stops completing, and the aim jumps there from inside the window to
    /// the extremum: no table could follow that step within the budget.
    #[must_use]
    pub fn requirements(&self, spec: &LegSpec) -> Requirements {
        let least = f64::from(spec.timer.least(self.edge).get());
        let top = f64::from(spec.timer.edge_timer(self.edge).max_ticks().get());
        Requirements {
            pairs: self
                .pairs
                .iter()
                .enumerate()
                .map(|(k, p)| {
                    let (b, c) = self.codes(k);
                    match p.required {
                        Some(_) if p.budgeted => {
                            Requirement::of(b, c, p.aim, p.required, spec.max_error_ticks)
                        }
                        // The window alone: an unbounded budget.
                        Some(_) => Requirement::of(b, c, p.aim, p.required, f64::INFINITY),
                        None => Requirement {
                            vin: b,
                            io: c,
                            aim: p.aim,
                            lo: least - 0.5,
                            hi: top + 0.5,
                            windowed: false,
                        },
                    }
                })
                .collect(),
        }
    }

    /// The figures of `table` at every pair.
    #[must_use]
    pub fn figures(&self, spec: &LegSpec, table: &Generated) -> EdgeFigures {
        let least = f64::from(spec.timer.least(self.edge).get());
        let mut f = EdgeFigures {
            pairs: self.pairs.len() as u64,
            windowed: 0,
            outside_window: 0,
            robust: 0,
            outside_robust: 0,
            short: 0,
            floor_blocks: 0,
            below_floor: 0,
            worst_budgeted_steps: 0.0,
            worst_steps: 0.0,
        };
        let Ok(t) = table.table() else {
            f.outside_window = f.pairs;
            f.worst_steps = f64::INFINITY;
            return f;
        };
        for (k, p) in self.pairs.iter().enumerate() {
            let (b, c) = self.codes(k);
            let n = f64::from(t.delay(AdcCode::new(b), AdcCode::new(c)).ticks.get());
            let err = (n - p.aim).abs();
            f.worst_steps = f.worst_steps.max(err);
            if n < least {
                f.below_floor += 1;
            }
            if p.nominal.is_none() {
                f.short += 1;
            }
            if p.floor_blocks {
                f.floor_blocks += 1;
            }
            if let Some((lo, hi)) = p.required {
                f.windowed += 1;
                if p.budgeted {
                    f.worst_budgeted_steps = f.worst_budgeted_steps.max(err);
                }
                if !(n >= lo && n <= hi) {
                    f.outside_window += 1;
                }
            }
            if let Some((lo, hi)) = p.robust.filter(|w| w.1 - w.0 >= 1.0) {
                f.robust += 1;
                if !(n >= lo && n <= hi) {
                    f.outside_robust += 1;
                }
            }
        }
        f
    }
}

/// Columns slanted along the line where the swing stops completing:
/// `d = (current - lo + 1)*io_mul + offset - bus*vin_mul`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
struct Slant {
    io_mul: u16,
    vin_mul: i16,
}

/// Weight of the current code in a slanted `d`: a 256th of a code.
const SLANT_IO_MUL: u16 = 256;

/// The straight line through the current codes where the nominal swing
/// stops completing, one per bus code that has one (least squares), as a
/// slant; `None` where fewer than two bus codes have such a point or the
/// line is flat to within a 256th of a code over the bus range.
fn boundary_slant(pairs: &EdgePairs) -> Option<Slant> {
    let cols = pairs.current.len() as usize;
    let mut pts = Vec::new();
    for (r, row) in pairs.pairs.chunks(cols).enumerate() {
        if let Some(c) = row
            .windows(2)
            .position(|w| w[0].nominal.is_some() != w[1].nominal.is_some())
        {
            pts.push((r as f64, c as f64 + 0.5));
        }
    }
    if pts.len() < 2 {
        return None;
    }
    let n = pts.len() as f64;
    let (mx, my) = pts
        .iter()
        .fold((0.0, 0.0), |(a, b), &(x, y)| (a + x / n, b + y / n));
    let (sxy, sxx) = pts.iter().fold((0.0, 0.0), |(a, b), &(x, y)| {
        (a + (x - mx) * (y - my), b + (x - mx) * (x - mx))
    });
    if sxx <= 0.0 {
        return None;
    }
    let vin_mul = (sxy / sxx * f64::from(SLANT_IO_MUL)).round();
    (vin_mul != 0.0 && vin_mul.abs() <= f64::from(i16::MAX)).then_some(Slant {
        io_mul: SLANT_IO_MUL,
        vin_mul: vin_mul as i16,
    })
}

/// A candidate layout: rows `2^vs` bus codes apart, columns `2^st` apart
/// in `d` (current codes counted from one below the range, or slanted).
fn skeleton(pairs: &EdgePairs, vs: u8, st: u8, slant: Option<Slant>) -> Option<Generated> {
    let (bus, current) = (pairs.bus, pairs.current);
    let rows = u32::from(bus.hi - bus.lo).div_ceil(1 << vs) + 1;
    let (io_mul, vin_mul) = slant.map_or((1, 0), |s| (s.io_mul, s.vin_mul));
    // d at a pair before the offset, exact in i64.
    let raw = |b: u16, c: u16| {
        (i64::from(c) - i64::from(current.lo) + 1) * i64::from(io_mul)
            - i64::from(b) * i64::from(vin_mul)
    };
    let corners = [
        raw(bus.lo, current.lo),
        raw(bus.lo, current.hi),
        raw(bus.hi, current.lo),
        raw(bus.hi, current.hi),
    ];
    let d_min = corners.iter().copied().min().unwrap_or(0);
    let d_max = corners.iter().copied().max().unwrap_or(0);
    let offset = (-d_min).max(0);
    let span = d_max + offset;
    if span > i64::from(u32::MAX) || offset > i64::from(u32::MAX) {
        return None;
    }
    let cols = (span as u64).div_ceil(1 << st) as u32 + 1;
    if rows < 2 || cols < 2 || (rows * cols) as usize * 2 > MAX_TABLE_BYTES {
        return None;
    }
    let top = pairs.pairs.iter().map(|p| p.aim).fold(1.0f64, f64::max);
    let max_frac = (f64::from(u16::MAX) / (top + 1.0)).log2().floor();
    let frac = (16 - i32::from(vs)).min(15).min(max_frac as i32);
    if frac < 0 {
        return None;
    }
    let frac = frac as u8;
    let layout = MarginLayout {
        io_mul,
        vin_mul,
        offset: offset as u32,
        step_shift: st,
        cols: cols as u16,
        vin_shift: vs,
        rows: rows as u16,
    };
    // The pull targets: the aim at the pair nearest each node.
    let cols_p = i64::from(current.len());
    let scale = f64::from(1u32 << frac);
    let mut entries = Vec::with_capacity((rows * cols) as usize);
    for r in 0..rows {
        let rb = (r << vs).min(u32::from(bus.hi - bus.lo));
        let b = bus.lo + rb as u16;
        for k in 0..cols {
            let d = i64::from(k) << st;
            let c = (d - offset + i64::from(b) * i64::from(vin_mul)) / i64::from(io_mul) - 1;
            let c = c.clamp(0, cols_p - 1);
            let aim = pairs.pairs[(i64::from(rb) * cols_p + c) as usize].aim;
            entries.push((aim * scale).round().clamp(0.0, f64::from(u16::MAX)) as u16);
        }
    }
    let g = Generated {
        sensing: edge_sensing(bus, current),
        layout: Layout::Margin(layout),
        frac_bits: frac,
        fallback: Fallback::Valley,
        entries,
    };
    g.table().is_ok().then_some(g)
}

/// The smallest table for one edge that meets the design's budget at every
/// code pair, and its figures.
///
/// # Errors
/// [`GenerateError::LegNoLayout`] where none up to [`MAX_TABLE_BYTES`] does.
pub fn edge_table(spec: &LegSpec, pairs: &EdgePairs) -> Result<EdgeOutcome, GenerateError> {
    let budget = spec.max_error_ticks;
    let req = pairs.requirements(spec);
    let sample = req.sample(4);
    let slant = boundary_slant(pairs);
    let mut plans: Vec<(u8, u8, Generated)> = [None, slant]
        .into_iter()
        .collect::<std::collections::BTreeSet<_>>()
        .into_iter()
        .flat_map(|sl| (0..=10u8).flat_map(move |vs| (0..=15u8).map(move |st| (vs, st, sl))))
        .filter_map(|(vs, st, sl)| skeleton(pairs, vs, st, sl).map(|g| (vs, st, g)))
        .collect();
    plans.sort_by_key(|(vs, st, g)| (g.entries.len(), *vs, *st));
    let mut tried = Vec::new();
    let mut best: Option<(f64, usize, String)> = None;
    for (_, _, mut g) in plans {
        let shape = match g.layout {
            Layout::Margin(m) => (m.rows, m.cols),
            _ => (0, 0),
        };
        if fit_or_why(&sample, &g) == Err(NoFit::Infeasible) {
            tried.push((shape.0, shape.1, "infeasible on a sample"));
            continue;
        }
        match fit_or_why(&req, &g) {
            Ok(e) => g.entries = e,
            Err(NoFit::Infeasible) => {
                tried.push((shape.0, shape.1, "infeasible"));
                continue;
            }
            Err(NoFit::Unsettled) => {
                tried.push((shape.0, shape.1, "the fit did not settle"));
                continue;
            }
        }
        let figures = pairs.figures(spec, &g);
        let worst = figures.worst_budgeted_steps;
        if figures.outside_window == 0 && figures.below_floor == 0 && worst <= budget {
            return Ok(EdgeOutcome {
                edge: pairs.edge,
                table: g,
                figures,
                tried,
                grid: None,
            });
        }
        tried.push((shape.0, shape.1, "misses after the fit"));
        if best.as_ref().is_none_or(|b| worst < b.0) {
            best = Some((
                worst,
                figures.outside_window as usize,
                format!("{} x {}", shape.0, shape.1),
            ));
        }
    }
    let (best, misses, shape) = best.unwrap_or((f64::INFINITY, 0, "none fitted".into()));
    Err(GenerateError::LegNoLayout {
        edge: edge_name(pairs.edge),
        max_kib: MAX_TABLE_BYTES / 1024,
        budget,
        best,
        misses,
        shape,
    })
}

/// Both edges' tables of `spec`, falling first.
///
/// # Errors
/// As [`LegModel::new`] (as [`GenerateError::LegModel`]),
/// [`EdgePairs::new`] and [`edge_table`].
pub fn leg_tables(spec: &LegSpec) -> Result<[EdgeOutcome; 2], GenerateError> {
    let one = |edge: Edge| -> Result<EdgeOutcome, GenerateError> {
        let model = LegModel::new(spec, edge).map_err(|e| GenerateError::LegModel {
            edge: edge_name(edge),
            vbus_v: spec.vbus_v.0,
            current_a: spec.current_a[edge_index(edge)].0,
            message: e.to_string(),
        })?;
        let pairs = EdgePairs::new(spec, &model)?;
        let mut out = edge_table(spec, &pairs)?;
        out.grid = model.grid_size();
        Ok(out)
    };
    Ok([one(Edge::Falling)?, one(Edge::Rising)?])
}
