//! The exact model of a design at a reading or a code pair: the ZVS window
//! (or the valley) of the tank as built, the aim inside it (the robust
//! window's where the design's tolerances leave one), the command the
//! design's fallback asks for, and the bound of each answer against the
//! ring itself. Answers come from the grids of [`crate::tank`] where they
//! decide, from timing-core's ring or closed forms otherwise. All physics
//! comes from timing-core.
//!
//! One file of about 580 lines: the model at a point and at a row of code
//! pairs (the sweeps' fast path) answer alike to the bit, which a test
//! checks; keeping them side by side keeps them alike.

use timing_core::robust::RobustWindow;
use timing_core::table::Fallback;
use timing_core::{CodeRange, ZvsWindow};

use crate::model::design::Design;
use crate::model::exact_chunk::{ExactChunk, CHUNK};
use crate::model::robust_aim::{RobustAim, RobustRow};
use crate::tank::real_tank::CellSolver;

/// The exact (f64) commanded delay of a design, before quantisation.
#[derive(Debug, Clone, Copy)]
pub struct ExactModel<'a> {
    design: &'a Design,
    solver: CellSolver<'a>,
    /// The robust windows of the readings, when the design has tolerances.
    aim: Option<&'a RobustAim>,
    /// The ring's events tabulated over the design range, when the tank
    /// needs the ring ([`crate::tank::event_grid`]); `None`: every point from
    /// `solver`.
    grid: Option<&'a crate::tank::event_grid::EventGrid>,
    /// The ideal tank's turn-on tabulated over the normalised load, when
    /// the tank is ideal ([`crate::tank::load_grid`]).
    loads: Option<&'a crate::tank::load_grid::LoadGrid>,
    /// Largest grid bound accepted, second; beyond it the ring answers.
    max_grid_eps_s: f64,
    /// What the tolerances leave of every reading of the design range,
    /// computed once ([`ExactModel::with_readings`]), so the fit's
    /// requirements and the verification do not bound each box again.
    readings: Option<&'a Readings>,
    /// Planning only: every point is 0 ticks, no physics is run (candidate
    /// layouts are sized before their entries are worth computing).
    dry: bool,
    clock_hz: f64,
    lead_s: f64,
}

/// The exact model at one operating point (a reading: the values of a
/// code pair).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ExactPoint {
    /// The delay the design asks for, from the turn-off command, ticks (not
    /// rounded): the aim point inside the robust window where the design's
    /// tolerances leave one a tick wide or more, inside the nominal window
    /// elsewhere, with the design's fallback below the ZVS boundary.
    pub ticks: f64,
    /// The same with the valley fallback, which is continuous across the
    /// ZVS boundary: what table entries hold, so interpolation near the
    /// boundary never blends in a fixed fallback delay (a fixed fallback is
    /// applied by the lookup's ZVS test instead).
    pub table_ticks: f64,
    /// The aim point inside the nominal window (the valley below the
    /// boundary), ticks: what the closed-form methods compute, whose
    /// approximation error is measured against it.
    pub nominal_ticks: f64,
    /// The ZVS window, `None` below the boundary.
    pub window: Option<ZvsWindow<f64>>,
    /// The robust window behind the reading ([`crate::model::robust_aim`]),
    /// `None` without tolerances or where it is not reliably hittable.
    pub robust: Option<RobustWindow<f64>>,
    /// The interval the command must hit, ticks (not rounded): the robust
    /// window where one a tick wide exists, else the nominal window where
    /// that is a tick wide; `None` where neither is (near and below the
    /// ZVS boundary, where only the aim and the error budget apply).
    /// Where the nominal window sets it, it is that window less the
    /// model's bound at both ends.
    pub required_ticks: Option<(f64, f64)>,
    /// Bound on the difference of every time above (window, aim) from the
    /// ring's at this point, ticks: 0 where the ring or the closed forms
    /// answered, the event grid's bound where it did.
    pub model_eps_ticks: f64,
}

impl ExactPoint {
    /// 0 ticks, no window: what a dry model answers.
    pub const EMPTY: Self = Self {
        ticks: 0.0,
        table_ticks: 0.0,
        nominal_ticks: 0.0,
        window: None,
        robust: None,
        required_ticks: None,
        model_eps_ticks: 0.0,
    };
}

/// Largest event-grid bound the exact model accepts, ticks; a point whose
/// bound is wider is computed with the ring.
pub const MAX_GRID_EPS_TICKS: f64 = 0.01;

impl<'a> ExactModel<'a> {
    /// The model of `design`: the closed forms for an ideal tank, the
    /// numerical ring with the Coss curve and the loop resistance otherwise;
    /// aimed inside the robust windows when the design has tolerances (see
    /// [`Design::robust_aim`], which reports a failure to build them; the
    /// model then aims at the nominal windows).
    #[must_use]
    pub fn new(design: &'a Design) -> Self {
        Self {
            design,
            // Validated with the design; the fallback cannot be reached.
            solver: design
                .real
                .solver()
                .unwrap_or(CellSolver::Ideal(design.tank)),
            aim: design.robust_aim().ok().flatten(),
            grid: design.event_grid(),
            loads: design.load_grid(),
            max_grid_eps_s: MAX_GRID_EPS_TICKS / design.timer.clock_hz(),
            readings: None,
            dry: false,
            clock_hz: design.timer.clock_hz(),
            lead_s: design.timer.lead_s(),
        }
    }

    /// The window at (`vin` V, `io` A) from the ring (or the closed forms)
    /// itself, never the grid: for the points where a decision falls
    /// within the grid's bound.
    ///
    /// # Errors
    /// timing-core's error for an impossible point.
    pub fn ring_window(
        &self,
        vin: f64,
        io: f64,
    ) -> Result<Option<ZvsWindow<f64>>, timing_core::Error> {
        Ok(self
            .solver
            .transition(&self.design.cell(vin, io)?)?
            .turn_on
            .window())
    }

    /// The turn-on at `cell` and the bound of its times, second: from the
    /// event grid (a tank that needs the ring) or the load grid (an ideal
    /// tank) where it answers within [`MAX_GRID_EPS_TICKS`], else from the
    /// solver (bound 0).
    fn turn_on(
        &self,
        cell: &timing_core::CellPoint<f64>,
    ) -> Result<(timing_core::TurnOn<f64>, f64), timing_core::Error> {
        if let Some((t, eps_s)) = self.loads.and_then(|l| l.at(cell)) {
            if eps_s <= self.max_grid_eps_s {
                return Ok((t, eps_s));
            }
        }
        if let Some(g) = self.grid.and_then(|g| g.at(cell)) {
            if g.eps_s <= self.max_grid_eps_s {
                return Ok((g.turn_on, g.eps_s));
            }
        }
        Ok((self.solver.transition(cell)?.turn_on, 0.0))
    }

    /// The solver behind the model.
    #[must_use]
    pub fn solver(&self) -> CellSolver<'a> {
        self.solver
    }

    /// The exact delay at converter input voltage `vin` (V) and output current
    /// `io` (A), with the design's aim point and fallback.
    ///
    /// # Errors
    /// timing-core's error for an impossible point.
    pub fn at(&self, vin: f64, io: f64) -> Result<ExactPoint, timing_core::Error> {
        let robust = self
            .aim
            .filter(|_| !self.dry)
            .map(|a| a.point(self.design, vin, io));
        self.point(vin, io, robust.as_ref(), None)
    }

    /// The model prepared for the readings of voltage code `cv`: what
    /// verification and generation sweep, a row of code pairs at a time
    /// ([`ExactRow::at_code`]); with [`ExactModel::with_readings`] the
    /// robust windows and aims come from those.
    #[must_use]
    pub fn row_at_code(&self, cv: u16) -> ExactRow<'_, 'a> {
        let vin = self.design.vin_of(cv);
        let cached = self
            .readings
            .is_some_and(|r| (r.vin.lo..=r.vin.hi).contains(&cv));
        // An ideal tank without tolerances: J = Io*Z0/Vin for every cell,
        // and the load grid answers from J alone.
        let by_load = match (self.loads, self.aim) {
            (Some(_), None) if !self.dry => self
                .design
                .cell(vin, self.design.io_of(self.design.io_codes.hi))
                .ok()
                .map(|c| (self.design.tank.z0_ohm() / vin, c.v_volt())),
            _ => None,
        };
        ExactRow {
            model: self,
            vin,
            cv,
            robust: self
                .aim
                .filter(|_| !self.dry && !cached)
                .map(|a| a.row(self.design, vin)),
            by_load,
        }
    }

    /// The same model for planning only: every point is 0 ticks and no
    /// physics runs (candidate layouts are sized before their entries are
    /// worth computing).
    #[must_use]
    pub fn dry(&self) -> Self {
        Self { dry: true, ..*self }
    }

    /// Whether this is a planning model ([`ExactModel::dry`]).
    #[must_use]
    pub fn is_dry(&self) -> bool {
        self.dry
    }

    /// The same model reading each code pair's robust window and aim from
    /// `readings` (made by [`ExactModel::readings`] of this model).
    #[must_use]
    pub fn with_readings(&self, readings: &'a Readings) -> Self {
        Self {
            readings: Some(readings),
            ..*self
        }
    }

    /// The robust window and aim of every code pair of the design range,
    /// computed on all cores: what [`ExactModel::with_readings`] reads.
    /// `None` without tolerances (nothing to keep) or beyond
    /// [`Readings::MAX_PAIRS`] (24 bytes a pair).
    #[must_use]
    pub fn readings(&self) -> Option<Readings> {
        let aim = self.aim.filter(|_| !self.dry)?;
        let (v, i) = (self.design.vin_codes, self.design.io_codes);
        if u64::from(v.len()) * u64::from(i.len()) > Readings::MAX_PAIRS {
            return None;
        }
        let rows = crate::par::map_rows(v.len() as usize, |k| {
            let cv = v.lo + k as u16;
            let vin = self.design.vin_of(cv);
            let row = aim.row(self.design, vin);
            (i.lo..=i.hi)
                .map(|ci| {
                    let io = self.design.io_of(ci);
                    let reading = self
                        .design
                        .cell(vin, io)
                        .and_then(|c| self.turn_on(&c))
                        .map(|(t, _)| row.reading(self.design, io, &t));
                    match reading {
                        Ok(r) => {
                            let w = r.robust.map_or([f64::NAN; 2], |w| [w.open_s, w.close_s]);
                            [r.aim_s, w[0], w[1]]
                        }
                        Err(_) => [f64::NAN; 3],
                    }
                })
                .collect::<Vec<_>>()
        });
        Some(Readings {
            vin: v,
            io: i,
            values: rows.into_iter().flatten().collect(),
        })
    }

    fn point(
        &self,
        vin: f64,
        io: f64,
        robust_row: Option<&RobustRow<'_>>,
        codes: Option<(u16, u16)>,
    ) -> Result<ExactPoint, timing_core::Error> {
        if self.dry {
            return Ok(ExactPoint::EMPTY);
        }
        let cell = self.design.cell(vin, io)?;
        let (turn_on, eps_s) = self.turn_on(&cell)?;
        let turn_on = &turn_on;
        // The robust window and the continuous aim of the tolerances
        // where the design has them.
        let cached = codes.and_then(|(cv, ci)| self.readings?.get(cv, ci));
        let reading = match (cached, robust_row, self.aim) {
            (Some(r), _, _) => Some(r),
            (None, Some(row), _) => Some(row.reading(self.design, io, turn_on)),
            // A row prepared for the readings that were not there.
            (None, None, Some(aim)) if !self.dry => Some(aim.point(self.design, vin, io).reading(
                self.design,
                io,
                turn_on,
            )),
            _ => None,
        };
        Ok(self.finish_with(turn_on, eps_s, reading))
    }

    /// The aim inside the nominal window (`Ok((open, close))`, second) or
    /// at the valley (`Err(valley)`, second), in ticks from the turn-off
    /// command: [`ExactPoint::nominal_ticks`].
    #[inline(always)]
    fn nominal_ticks(&self, at: Result<(f64, f64), f64>) -> f64 {
        let target_s = match at {
            Ok((open_s, close_s)) => self.design.position.between(open_s, close_s),
            Err(valley_s) => valley_s,
        };
        (target_s - self.lead_s) * self.clock_hz
    }

    /// [`ExactPoint::ticks`] from the table's aim (ticks): the design's
    /// fixed fallback below the boundary, else the aim.
    #[inline(always)]
    fn commanded_ticks(&self, zvs: bool, table_ticks: f64) -> f64 {
        match (zvs, self.design.fallback) {
            (false, Fallback::Fixed(n)) => f64::from(n.get()),
            _ => table_ticks,
        }
    }

    /// [`ExactModel::point`] from the turn-on, the bound of its times
    /// (second) and the reading's robust window and aim (`None`: the
    /// nominal window's aim).
    #[inline(always)]
    fn finish_with(
        &self,
        turn_on: &timing_core::TurnOn<f64>,
        eps_s: f64,
        reading: Option<crate::model::robust_aim::Reading>,
    ) -> ExactPoint {
        let to_ticks = |s: f64| (s - self.lead_s) * self.clock_hz;
        let (window, nominal_ticks) = match turn_on {
            timing_core::TurnOn::Zvs(w) => {
                (Some(*w), self.nominal_ticks(Ok((w.open_s, w.close_s))))
            }
            timing_core::TurnOn::Valley(v) => (None, self.nominal_ticks(Err(v.valley_s))),
        };
        let robust = reading.and_then(|r| r.robust).filter(|_| window.is_some());
        let table_ticks = reading.map_or(nominal_ticks, |r| to_ticks(r.aim_s));
        let tick_wide = |o: f64, c: f64| (c - o) * self.clock_hz >= 1.0;
        let required_ticks = robust
            .map(|r| (r.open_s, r.close_s))
            .or(window.map(|w| (w.open_s + eps_s, w.close_s - eps_s)))
            .filter(|&(o, c)| tick_wide(o, c))
            .map(|(o, c)| (to_ticks(o), to_ticks(c)));
        let ticks = self.commanded_ticks(window.is_some(), table_ticks);
        ExactPoint {
            ticks,
            table_ticks,
            nominal_ticks,
            window,
            robust,
            required_ticks,
            model_eps_ticks: eps_s * self.clock_hz,
        }
    }

    /// The exact delay at ADC codes (`vin_code`, `io_code`).
    ///
    /// # Errors
    /// As [`ExactModel::at`].
    pub fn at_codes(&self, vin_code: u16, io_code: u16) -> Result<ExactPoint, timing_core::Error> {
        self.at(self.design.vin_of(vin_code), self.design.io_of(io_code))
    }

    /// The exact delay at normalised load `j`. For every cell
    /// J = Io*Z0/Vin (the Vout factors of the boost and buck-boost mappings
    /// cancel), so the point Vin = the design's lowest input voltage,
    /// Io = J*Vin/Z0 has it.
    ///
    /// # Errors
    /// As [`ExactModel::at`].
    pub fn at_load(&self, j: f64) -> Result<ExactPoint, timing_core::Error> {
        let vin = self.design.vin_v.0;
        self.at(vin, j * vin / self.design.tank.z0_ohm())
    }

    /// What a 1-D table node at normalised load `j` should hold. For an
    /// ideal tank the delay is a function of J alone ([`ExactModel::at_load`]).
    /// With a Coss curve or losses it also moves with the voltage along the
    /// ray Io = J*Vin/Z0; the node then holds the middle of the targets at
    /// 17 voltages over the design range (those whose current lies in the
    /// range, or all if none does), which halves the spread the 1-D table
    /// cannot follow. The spread shows up in verification.
    ///
    /// # Errors
    /// As [`ExactModel::at`].
    pub fn at_ratio_node(&self, j: f64) -> Result<ExactPoint, timing_core::Error> {
        let base = self.at_load(j)?;
        if self.dry || matches!(self.solver, CellSolver::Ideal(_)) {
            return Ok(base);
        }
        let (vlo, vhi) = self.design.vin_v;
        let (ilo, ihi) = self.design.io_a;
        let z0 = self.design.tank.z0_ohm();
        let mut spread: Option<(f64, f64)> = None;
        let mut any: Option<(f64, f64)> = None;
        for k in 0..=16 {
            let vin = vlo + (vhi - vlo) * f64::from(k) / 16.0;
            let io = j * vin / z0;
            let p = self.at(vin, io)?;
            let widen = |s: Option<(f64, f64)>| {
                Some(s.map_or((p.table_ticks, p.table_ticks), |(a, b)| {
                    (a.min(p.table_ticks), b.max(p.table_ticks))
                }))
            };
            any = widen(any);
            if (ilo..=ihi).contains(&io) {
                spread = widen(spread);
            }
        }
        let (a, b) = spread
            .or(any)
            .unwrap_or((base.table_ticks, base.table_ticks));
        let mid = 0.5 * (a + b);
        Ok(ExactPoint {
            ticks: match (base.window, self.design.fallback) {
                (None, Fallback::Fixed(n)) => f64::from(n.get()),
                _ => mid,
            },
            table_ticks: mid,
            ..base
        })
    }
}

/// An [`ExactModel`] prepared for the readings of one input voltage
/// ([`ExactModel::row_at_code`]).
#[derive(Debug, Clone)]
pub struct ExactRow<'m, 'a> {
    model: &'m ExactModel<'a>,
    vin: f64,
    /// The row's voltage code.
    cv: u16,
    robust: Option<RobustRow<'a>>,
    /// Z0/Vin (ohm/volt) and the cell voltage (volt) where the load grid
    /// answers the row from J alone.
    by_load: Option<(f64, f64)>,
}

/// The robust window and the aim of every code pair of a design range
/// ([`ExactModel::readings`]).
#[derive(Debug, Clone)]
pub struct Readings {
    vin: CodeRange,
    io: CodeRange,
    /// Row-major: the aim (second; NaN where the model refused the pair)
    /// and the robust window's open and close (second; NaN: none).
    values: Vec<[f64; 3]>,
}

impl Readings {
    /// Most code pairs kept (24 bytes each: 192 MB).
    pub const MAX_PAIRS: u64 = 8_000_000;

    fn get(&self, cv: u16, ci: u16) -> Option<crate::model::robust_aim::Reading> {
        if !((self.vin.lo..=self.vin.hi).contains(&cv) && (self.io.lo..=self.io.hi).contains(&ci)) {
            return None;
        }
        let k =
            usize::from(cv - self.vin.lo) * self.io.len() as usize + usize::from(ci - self.io.lo);
        let [aim_s, open_s, close_s] = *self.values.get(k)?;
        (!aim_s.is_nan()).then_some(crate::model::robust_aim::Reading {
            robust: (!open_s.is_nan()).then_some(RobustWindow { open_s, close_s }),
            aim_s,
        })
    }
}

impl ExactRow<'_, '_> {
    /// Whether the load grid answers this row from J alone (an ideal tank
    /// without tolerances, a cell the row's voltage can run): then every
    /// answer of the row is a function of J (see [`crate::check::doubling`]).
    #[must_use]
    pub fn answers_by_load(&self) -> bool {
        self.by_load.is_some() && self.model.loads.is_some()
    }

    /// [`ExactRow::at_code`] at `n` (at most [`CHUNK`]) current codes
    /// `first`, `first + step`, ..., into `out` (slot `k`: code
    /// `first + k * step`): the same answers, a batch at a time where the
    /// load grid answers the row.
    #[inline]
    pub fn fill(&self, first: u16, step: u16, n: usize, out: &mut ExactChunk) {
        let n = n.min(CHUNK);
        out.n = n;
        let code = |k: usize| first.wrapping_add(step.wrapping_mul(k as u16));
        let (Some((z0_per_v, _)), Some(loads)) = (self.by_load, self.model.loads) else {
            for k in 0..n {
                out.set(k, self.at_code(code(k)));
            }
            return;
        };
        let m = self.model;
        let mut batch = out.loads.take().unwrap_or_default();
        for (k, j) in batch.j[..n].iter_mut().enumerate() {
            *j = m.design.io_of(code(k)) * z0_per_v;
        }
        loads.at_loads(&mut batch, n);
        // As finish_with without a reading, where the grid answered off the
        // boundary within the accepted bound (as at_code), in a loop without
        // branches; then the rare pairs left to at_code.
        let mut answered = [false; CHUNK];
        for (k, answered) in answered[..n].iter_mut().enumerate() {
            let (j, zvs, eps_s) = (batch.j[k], batch.zvs[k], batch.eps_s[k]);
            // Below the boundary both times are the valley, and the
            // window's aim at (valley, valley) is the valley to the bit.
            let (a, b) = (batch.first_s[k], batch.close_s[k]);
            let nominal = m.nominal_ticks(Ok((a, b)));
            let ticks = m.commanded_ticks(zvs, nominal);
            let io = m.design.io_of(code(k));
            *answered = self.load_grid_decides(io, j, eps_s);
            out.put_nominal(k, ticks, nominal, zvs, (a, b), eps_s * m.clock_hz);
        }
        // The pairs the grid left to at_code.
        for k in (0..n).filter(|&k| !answered[k]) {
            out.set(k, self.at_code(code(k)));
        }
        out.loads = Some(batch);
    }

    /// Whether the load grid's answer (bound `eps_s`, second) at current
    /// `io` (ampere) and load `j` of this row stands: a current above zero,
    /// J off the boundary by more than its rounding can move it (the
    /// cell's J is computed in another order), a bound within the accepted
    /// one. Without branches, for the batch's loop.
    #[inline(always)]
    fn load_grid_decides(&self, io: f64, j: f64, eps_s: f64) -> bool {
        (io > 0.0) & ((j - 1.0).abs() > 1e-6) & (eps_s <= self.model.max_grid_eps_s)
    }

    /// The exact delay at current code `io_code` of this row, as
    /// [`ExactModel::at_codes`].
    ///
    /// # Errors
    /// As [`ExactModel::at`].
    #[inline]
    pub fn at_code(&self, io_code: u16) -> Result<ExactPoint, timing_core::Error> {
        let io = self.model.design.io_of(io_code);
        if let (Some((z0_per_v, v_cell)), Some(loads)) = (self.by_load, self.model.loads) {
            let j = io * z0_per_v;
            if let Some((t, eps_s)) = loads.at_load(j, v_cell) {
                if self.load_grid_decides(io, j, eps_s) {
                    return Ok(self.model.finish_with(&t, eps_s, None));
                }
            }
        }
        self.model
            .point(self.vin, io, self.robust.as_ref(), Some((self.cv, io_code)))
    }
}

impl ExactChunk {
    /// Slot `k` from the model's answer. An answer that is not a number is
    /// a refusal, never a silent pass of a check's comparisons.
    #[inline(always)]
    pub fn set(&mut self, k: usize, p: Result<ExactPoint, timing_core::Error>) {
        match p {
            Ok(p) => self.put(
                k,
                p.ticks,
                p.nominal_ticks,
                p.window.map(|w| (w.open_s, w.close_s)),
                p.robust.map(|w| (w.open_s, w.close_s)),
                p.model_eps_ticks,
            ),
            Err(_) => self.refuse(k),
        }
    }
}
