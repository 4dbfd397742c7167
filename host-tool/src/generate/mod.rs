//! Table generation: the candidate layouts over a design's code range,
//! their entries fitted to the exact model ([`fit`]), and the choice of the
//! smallest that meets the error budget. All physics comes from timing-core.

mod error;
pub mod fit;
pub mod generated;
mod layouts_1d;
mod layouts_2d;
pub mod leg_tables;
mod nodes;
pub mod pieces;

pub use error::GenerateError;
pub use generated::Generated;
pub use layouts_1d::{load_at_ratio, log_node_q};
use layouts_1d::{
    log_ratio_candidate, log_uniform_candidate, ratio_candidate, recip_ratio_candidate,
};
use layouts_2d::{grid_candidate, log_volt_candidate, margin_candidate, ratio_volt_candidate};
pub use layouts_2d::{row_node, BoundaryLine};
use nodes::bits;

use timing_core::table::Layout;

use crate::check::verify::VerifyReport;
use crate::model::design::Design;
use crate::model::exact::ExactModel;

/// One candidate layout considered, for reports.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Candidate {
    /// `ratio` or `grid`.
    pub layout: &'static str,
    /// Entry bytes.
    pub table_bytes: usize,
    /// Worst error against the aim over the pairs screened, ticks (`None`
    /// when the candidate was not evaluated: a smaller one was chosen).
    pub screened_error_ticks: Option<f64>,
    /// Code pairs screened commanded outside their interval (robust or
    /// nominal window a tick wide, within the budget around the aim).
    pub misses: Option<usize>,
    /// Code pairs screened: every pair of the range, or a sixteenth of
    /// them (both codes multiples of 4) when those alone already exceed
    /// the error budget.
    pub screened_pairs: Option<u64>,
    /// Whether it met the budget on the sample.
    pub meets_budget: bool,
    /// Shape: `nodes=...` or `rows x cols`.
    pub shape: String,
}

/// The result of [`generate`].
#[derive(Debug, Clone)]
pub struct Outcome {
    /// The chosen table.
    pub table: Generated,
    /// Its exhaustive verification.
    pub verification: VerifyReport,
    /// Every candidate considered, smallest first.
    pub candidates: Vec<Candidate>,
    /// The closed-form methods' verification, from the same pass over the
    /// code pairs as the table's (the methods timing-core offers for the
    /// design, in the order `closed-form-f32`, `fixed-point`, `libm-f32`).
    pub closed_forms: Vec<VerifyReport>,
    /// The fast closed form's pieces, fitted to the exact model (`None`
    /// when timing-core refuses the design's closed form).
    pub pieces: Option<pieces::PieceSet>,
}

/// Largest exact delay over the design range and a check that all fit the
/// counter and are non-negative. The delay is monotonic in neither code, so
/// this scans the edges of the range finely and the interior on a grid; the
/// exhaustive verification later covers every pair.
fn delay_bounds(design: &Design, model: &ExactModel<'_>) -> Result<f64, GenerateError> {
    let v = design.vin_codes;
    let i = design.io_codes;
    // The codes of one axis: its ends and about 64 steps between.
    let codes = |r: timing_core::CodeRange| {
        let step = ((r.hi - r.lo) / 64).max(1);
        let mut out: Vec<u16> = (r.lo..=r.hi).step_by(usize::from(step)).collect();
        if out.last() != Some(&r.hi) {
            out.push(r.hi);
        }
        out
    };
    let (cvs, cis) = (codes(v), codes(i));
    let max = design.timer.max_ticks().get().min(u32::from(u16::MAX));
    let rows = crate::par::map_rows(cvs.len(), |k| -> Result<f64, GenerateError> {
        let cv = cvs[k];
        let row = model.row_at_code(cv);
        let mut max_ticks = 0.0f64;
        for &ci in &cis {
            let p = row.at_code(ci).map_err(|e| GenerateError::Model {
                vin_v: design.vin_of(cv),
                io_a: design.io_of(ci),
                message: e.to_string(),
            })?;
            if p.ticks < 0.0 {
                return Err(GenerateError::NegativeDelay {
                    vin_v: design.vin_of(cv),
                    io_a: design.io_of(ci),
                });
            }
            if p.ticks.round() > f64::from(max) {
                return Err(GenerateError::CounterOverflow {
                    ticks: p.ticks,
                    vin_v: design.vin_of(cv),
                    io_a: design.io_of(ci),
                    bits: design.timer.counter_bits(),
                    max,
                });
            }
            max_ticks = max_ticks.max(p.ticks);
        }
        Ok(max_ticks)
    });
    rows.into_iter()
        .try_fold(0.0f64, |m, r| r.map(|x| m.max(x)))
}

/// One candidate layout's parameters, to build it on a dry model (for its
/// size) and again on the real one (for its entries).
#[derive(Debug, Clone, Copy)]
enum Plan {
    /// Uniform ratio: nodes, fractional bits.
    Ratio(u32, u32),
    /// Uniform ratio with reciprocals: nodes, fractional bits.
    RecipRatio(u32, u32),
    /// Log-spaced ratio: mantissa bits, fractional bits.
    LogRatio(u32, u32),
    /// Uniform in log2: step, fractional bits.
    LogUniform(u32, u32),
    /// Grid: voltage and current spacing shifts.
    Grid(u32, u32),
    /// Log ratio by voltage: lambda step and voltage-row step shifts.
    LogVolt(u32, u32),
    /// Margin over the boundary line by voltage: column and row spacing
    /// shifts, in codes.
    Margin(BoundaryLine, u32, u32),
    /// Ratio by voltage: ratio shift and row spacing shift.
    RatioVolt(BoundaryLine, u32, u32),
}

impl Plan {
    fn build(
        self,
        design: &Design,
        model: &ExactModel<'_>,
        max_ticks: f64,
    ) -> Result<Option<Generated>, GenerateError> {
        match self {
            Plan::Ratio(n, f) => ratio_candidate(design, model, max_ticks, n, f),
            Plan::RecipRatio(n, f) => recip_ratio_candidate(design, model, max_ticks, n, f),
            Plan::LogRatio(m, f) => log_ratio_candidate(design, model, max_ticks, m, f),
            Plan::LogUniform(st, f) => log_uniform_candidate(design, model, max_ticks, st, f),
            Plan::Grid(vs, is) => grid_candidate(design, model, max_ticks, vs, is),
            Plan::LogVolt(st, vs) => log_volt_candidate(design, model, max_ticks, st, vs),
            Plan::Margin(line, c, vs) => margin_candidate(design, model, max_ticks, line, c, vs),
            Plan::RatioVolt(line, sh, vs) => {
                ratio_volt_candidate(design, model, max_ticks, line, sh, vs)
            }
        }
    }
}

/// Generate the smallest table of the allowed layouts that meets the
/// design's error budget on a screening sample and then in exhaustive
/// verification over every code pair.
///
/// # Errors
/// [`GenerateError`].
pub fn generate(design: &Design) -> Result<Outcome, GenerateError> {
    generate_with_progress(design, &mut |_, _| {})
}

/// [`generate`], telling `progress` what it is doing and how far along
/// (the stage's name and the fraction of it done, 0 to 1) now and then:
/// the robust windows of the readings, the candidate layouts, the proof at
/// every code pair.
///
/// # Errors
/// As [`generate`].
pub fn generate_with_progress(
    design: &Design,
    progress: &mut dyn FnMut(&str, f64),
) -> Result<Outcome, GenerateError> {
    progress("bounding the robust window of every reading", 0.0);
    design.robust_aim().map_err(|e| GenerateError::Model {
        vin_v: design.vin_v.0,
        io_a: design.io_a.0,
        message: format!("the robust windows of the tolerances: {e}"),
    })?;
    let model = ExactModel::new(design);
    // Every reading's robust window and aim, once: the requirements and
    // the verification read them.
    let readings = model.readings();
    progress("bounding the robust window of every reading", 1.0);
    let model = match &readings {
        Some(r) => model.with_readings(r),
        None => model,
    };
    let max_ticks = delay_bounds(design, &model)?;
    // The closed forms' pieces, fitted when a table first reaches its
    // proof (they join that pass over the code pairs).
    let mut pieces: Option<Option<pieces::PieceSet>> = None;
    // Candidates are sized on a dry model first; entries are computed only
    // for those screened, smallest first.
    let dry = model.dry();
    let mut pool: Vec<(Generated, Plan)> = Vec::new();
    use crate::input::design::LayoutChoice as L;
    // The two uniform ratio layouts (with a division, or with reciprocals):
    // node counts in powers of two, fractional bits in steps of two.
    type PlanFn = fn(u32, u32) -> Plan;
    let uniform: [(L, PlanFn); 2] = [(L::Ratio, Plan::Ratio), (L::RecipRatio, Plan::RecipRatio)];
    for (choice, plan) in uniform {
        if !(design.layout == L::Auto || design.layout == choice) {
            continue;
        }
        let mut n = 4u32;
        while n <= 32_768 {
            for frac in (0..=12).step_by(2) {
                if let Some(g) = plan(n, frac).build(design, &dry, max_ticks)? {
                    if !pool
                        .iter()
                        .any(|(p, _)| p.layout == g.layout && p.frac_bits == g.frac_bits)
                    {
                        pool.push((g, plan(n, frac)));
                    }
                }
            }
            n *= 2;
        }
    }
    if matches!(design.layout, L::Auto | L::LogRatio) {
        // The log layout's step does not trade against the fractional bits;
        // a few settings, the most the largest delay leaves among them.
        let most = 16u32.saturating_sub(bits(max_ticks.ceil() as u32)).min(12);
        let mut fracs = vec![most, 4, 2];
        fracs.retain(|&f| f <= most);
        fracs.dedup();
        for m in 1..=10 {
            for &frac in &fracs {
                if let Some(g) = Plan::LogRatio(m, frac).build(design, &dry, max_ticks)? {
                    pool.push((g, Plan::LogRatio(m, frac)));
                }
            }
        }
    }
    if matches!(design.layout, L::Auto | L::LogUniform) {
        let most = 16u32.saturating_sub(bits(max_ticks.ceil() as u32));
        for step in 0..=15u32 {
            for frac in [most.min(16 - step), 4, 2] {
                if frac <= most && step + frac <= 16 {
                    let plan = Plan::LogUniform(step, frac);
                    if let Some(g) = plan.build(design, &dry, max_ticks)? {
                        if !pool
                            .iter()
                            .any(|(p, _)| p.layout == g.layout && p.frac_bits == g.frac_bits)
                        {
                            pool.push((g, plan));
                        }
                    }
                }
            }
        }
    }
    // An ideal tank without tolerances asks, at every code pair, for what
    // depends on the code ratio alone (J = Io*Z0/Vin in every cell, and the
    // times scale with 1/w0): a 2-D layout's rows would repeat one another,
    // so `auto` screens the ratio layouts only.
    let ratio_only = design.real.is_ideal() && design.tolerance.is_none();
    let two_d = |choice: L| design.layout == choice || (design.layout == L::Auto && !ratio_only);
    if two_d(L::Grid) {
        for vs in 0..=10u32 {
            for is in 0..=10u32 {
                if let Some(g) = Plan::Grid(vs, is).build(design, &dry, max_ticks)? {
                    pool.push((g, Plan::Grid(vs, is)));
                }
            }
        }
    }
    if two_d(L::LogVolt) {
        for step in 6..=15u32 {
            for vs in 3..=12u32 {
                if let Some(g) = Plan::LogVolt(step, vs).build(design, &dry, max_ticks)? {
                    pool.push((g, Plan::LogVolt(step, vs)));
                }
            }
        }
    }
    if two_d(L::Margin) || two_d(L::RatioVolt) {
        let line = BoundaryLine::of(design, &model);
        for vs in 3..=12u32 {
            if two_d(L::Margin) {
                for c in 0..=12u32 {
                    if let Some(g) = Plan::Margin(line, c, vs).build(design, &dry, max_ticks)? {
                        pool.push((g, Plan::Margin(line, c, vs)));
                    }
                }
            }
            if two_d(L::RatioVolt) {
                // Finest shift first; a coarser shift with the same node
                // count covers more ratio per column and is left out.
                let mut counts = std::collections::HashSet::new();
                for sh in (0..=(32 - bits(u32::from(design.vin_codes.hi)))).rev() {
                    let plan = Plan::RatioVolt(line, sh, vs);
                    if let Some(g) = plan.build(design, &dry, max_ticks)? {
                        if counts.insert(g.entries.len()) {
                            pool.push((g, plan));
                        }
                    }
                }
            }
        }
    }
    pool.sort_by_key(|(g, _)| (g.table_bytes(), std::cmp::Reverse(g.frac_bits)));
    // What every code pair asks of the command, computed once; each
    // candidate is checked against all of it before the independent
    // exhaustive verification.
    let zvs_table = pool.first().map(|(g, _)| g.sensing);
    let zvs = move |cv: u16, ci: u16| {
        zvs_table.is_none_or(|s| {
            let i = u32::from(ci.clamp(s.io.lo, s.io.hi) - s.io_zero);
            let v = u32::from(cv.clamp(s.vin.lo, s.vin.hi));
            i * u32::from(s.zvs_io_mul) >= v * u32::from(s.zvs_vin_mul)
        })
    };
    let req = crate::generate::fit::Requirements::new(design, &model, &zvs);
    let sample = req.sample(4);
    let mut candidates = Vec::new();
    let mut best: Option<(f64, usize, &'static str, bool)> = None;
    let mut chosen = None;
    let mut fallback = None;
    let n_pool = pool.len().max(1) as f64;
    for (k, (g, plan)) in pool.into_iter().enumerate() {
        progress("fitting the candidate layouts", k as f64 / n_pool);
        if chosen.is_some() {
            candidates.push(Candidate {
                layout: g.layout_name(),
                table_bytes: g.table_bytes(),
                screened_error_ticks: None,
                misses: None,
                screened_pairs: None,
                meets_budget: false,
                shape: shape(&g),
            });
            continue;
        }
        let mut g = plan.build(design, &model, max_ticks)?.unwrap_or(g);
        if g.table().is_err() {
            // Entries the lookup's checks refuse (e.g. beyond 16 bits):
            // not a candidate.
            continue;
        }
        // A layout the solver proves infeasible on a sixteenth of the pairs
        // cannot serve them all (the sample's intervals are a subset):
        // screened on the sample first, fitted to every pair unless that
        // proof comes.
        let fitted = if crate::generate::fit::serves(&g) {
            let screened = crate::generate::fit::fit_or_why(&sample, &g)
                != Err(crate::generate::fit::NoFit::Infeasible);
            screened
                .then(|| crate::generate::fit::fit(&req, &g))
                .flatten()
                .map(|e| g.entries = e)
        } else {
            Some(())
        };
        // Checked on the sample first: its pairs are a subset of all, so
        // a sample whose worst error exceeds the budget condemns the
        // candidate without the full check; otherwise every pair.
        let (sample_miss, sample_err) = sample.misses(&g);
        let (miss, err, screened_on) = if sample_err <= design.max_error_ticks {
            let (m, e) = req.misses(&g);
            (m.len(), e, req.pairs.len())
        } else {
            (sample_miss.len(), sample_err, sample.pairs.len())
        };
        let all = screened_on == req.pairs.len();
        let meets = all && fitted.is_some() && miss == 0 && err <= design.max_error_ticks;
        candidates.push(Candidate {
            layout: g.layout_name(),
            table_bytes: g.table_bytes(),
            screened_error_ticks: Some(err),
            misses: Some(miss),
            screened_pairs: Some(screened_on as u64),
            meets_budget: meets,
            shape: shape(&g),
        });
        // The best figure is one checked at every pair where any was;
        // a sample's figure (a lower bound) only where none was.
        let better = match best {
            None => true,
            Some((b_err, _, _, b_all)) => (all && !b_all) || (all == b_all && err < b_err),
        };
        if better {
            best = Some((err, miss, g.layout_name(), all));
        }
        if meets {
            if let Some(c) = accept(design, &model, &mut pieces, g, &mut candidates, progress)? {
                chosen = Some(c);
            }
        } else if fallback.is_none() && all && err <= design.max_error_ticks {
            fallback = Some(g);
        }
    }
    // No candidate puts every pair inside its interval (windows that open
    // from zero width at the ZVS boundary can defeat any node spacing):
    // the smallest within the budget, its misses counted by verification
    // and reported.
    if chosen.is_none() {
        if let Some(g) = fallback {
            chosen = accept(design, &model, &mut pieces, g, &mut candidates, progress)?;
        }
    }
    match chosen {
        Some((table, verification, closed_forms)) => Ok(Outcome {
            table,
            verification,
            candidates,
            closed_forms,
            pieces: pieces.flatten(),
        }),
        None => {
            let (best, misses, layout, every_pair) =
                best.unwrap_or((f64::INFINITY, 0, "none", false));
            Err(GenerateError::NoLayout {
                budget: design.max_error_ticks,
                best,
                misses,
                layout,
                on: if every_pair {
                    "every code pair"
                } else {
                    "a sample of the code pairs, so at least that"
                },
            })
        }
    }
}

/// Verify candidate `g` at every code pair: `Some` with its report when it
/// meets the budget (and its commands fit the counter), `None` after
/// marking its entry in `candidates` as failing.
#[allow(clippy::type_complexity)]
fn accept(
    design: &Design,
    model: &ExactModel<'_>,
    pieces: &mut Option<Option<pieces::PieceSet>>,
    g: Generated,
    candidates: &mut [Candidate],
    progress: &mut dyn FnMut(&str, f64),
) -> Result<Option<(Generated, VerifyReport, Vec<VerifyReport>)>, GenerateError> {
    let table = g.table().map_err(|e| GenerateError::Model {
        vin_v: 0.0,
        io_a: 0.0,
        message: e.to_string(),
    })?;
    // The closed forms the design allows join the table's pass over the
    // code pairs (the exact model runs once per pair for all of them).
    let cf = design.closed_form().ok();
    if pieces.is_none() {
        progress("fitting the closed forms' pieces", 0.0);
        *pieces = Some(self::pieces::fit_pieces(design, model).ok());
        progress("fitting the closed forms' pieces", 1.0);
    }
    let pieces = pieces.as_ref().and_then(Option::as_ref);
    let fast = pieces.and_then(|p| p.fast_f32().ok());
    let fixed = pieces.and_then(|p| p.fixed_point().ok());
    let libm = cf.as_ref().and_then(|c| c.libm_f32().ok());
    let mut methods: Vec<&dyn crate::check::verify::DelayMethod> = vec![&table];
    if let Some(m) = &fast {
        methods.push(m);
    }
    if let Some(m) = &fixed {
        methods.push(m);
    }
    if let Some(m) = &libm {
        methods.push(m);
    }
    let mut tick = |f: f64| progress("proving the table at every code pair", f);
    let mut reports =
        crate::check::verify::verify_all_with_progress(design, model, &methods, &mut tick);
    let closed_forms = reports.split_off(1);
    let Some(report) = reports.pop() else {
        return Ok(None);
    };
    let max = design.timer.max_ticks().get();
    if report.max_commanded_ticks > max {
        return Err(GenerateError::CounterOverflow {
            ticks: f64::from(report.max_commanded_ticks),
            vin_v: design.vin_of(report.max_commanded_at.0),
            io_a: design.io_of(report.max_commanded_at.1),
            bits: design.timer.counter_bits(),
            max,
        });
    }
    if report.max_error_ticks <= design.max_error_ticks {
        return Ok(Some((g, report, closed_forms)));
    }
    let name = g.layout_name();
    let bytes = g.table_bytes();
    if let Some(c) = candidates
        .iter_mut()
        .rev()
        .find(|c| c.layout == name && c.table_bytes == bytes)
    {
        c.meets_budget = false;
        c.screened_error_ticks = Some(report.max_error_ticks);
    }
    Ok(None)
}

fn shape(g: &Generated) -> String {
    match g.layout {
        Layout::Ratio(r) => format!("{} nodes, q step 2^{}", r.nodes, r.step_shift),
        Layout::LogRatio(r) => format!("{} nodes, 2^{} per octave", r.nodes, r.mant_bits),
        Layout::LogUniform(r) => format!("{} nodes, step 2^{} in Q15 log2", r.nodes, r.step_shift),
        Layout::Grid(gr) => format!(
            "{} x {} nodes, steps 2^{} x 2^{} codes",
            gr.rows, gr.cols, gr.vin_shift, gr.io_shift
        ),
        Layout::RatioVolt(gr) => format!(
            "{} x {} nodes, steps 2^{} voltage codes x 2^{} in the code ratio << {}",
            gr.rows, gr.cols, gr.vin_shift, gr.step_shift, gr.ratio_shift
        ),
        Layout::Margin(gr) => format!(
            "{} x {} nodes, steps 2^{} voltage codes x 2^{} current codes over the boundary line",
            gr.rows,
            gr.cols,
            gr.vin_shift,
            u32::from(gr.step_shift) - gr.io_mul.trailing_zeros()
        ),
        Layout::LogVolt(gr) => format!(
            "{} x {} nodes, steps 2^{} codes x 2^{} in Q15 log2",
            gr.rows, gr.cols, gr.vin_shift, gr.step_shift
        ),
        Layout::RecipRatio(r) => format!(
            "{} nodes, q step 2^{}, {} reciprocals",
            r.nodes,
            r.step_shift,
            g.entries.len() - usize::from(r.nodes)
        ),
    }
}
