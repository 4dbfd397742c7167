//! What a design's tolerances leave of the ZVS window at each reading: the
//! robust window behind a pair of ADC codes, over every board (Lr and the
//! switch capacitance within their tolerances) and every conversion (gain
//! and offset errors, noise and the code's own rounding), less the timer
//! jitter. Tables aim inside it, and verification measures how far each
//! commanded turn-on lies from its edges.
//!
//! # The box behind a reading
//! A channel reads `code = round(x*(1 + g)/lsb + offset + noise)` (the
//! model `zvs-timing montecarlo` draws boards and cycles from), so the
//! true value behind the reading `m = code*lsb` lies in
//! [`true_range`]`(m, g, (0.5 + offset + noise)*lsb)`. The converter box
//! maps to the cell through its corners (the mapping is monotonic in
//! each quantity) and [`WindowGrid::robust`] bounds the window over it.
//!
//! A reading whose robust window is narrower than one timer tick (or
//! empty, or reaching below the ZVS boundary) cannot be hit reliably: it
//! is treated as ZVS-impossible there and the design's fallback aim
//! applies (the nominal window's aim point, which joins the valley
//! continuously at the boundary).

use std::sync::OnceLock;

use timing_core::robust::RobustWindow;

use crate::input::design::DesignSpec;
use crate::input::design::Tolerance;
use crate::tank::aim_grid::{interval, minimax, AimGrid, AimRow};
use crate::tank::robust_grid::{true_range, TankSpread, WindowGrid, WindowRow};

/// The robust windows of a design's readings.
#[derive(Debug, Clone)]
pub struct RobustAim {
    grid: WindowGrid,
    /// The nominal model's intervals, for the continuous aim.
    aim_grid: AimGrid,
    spread: TankSpread,
    tol: Tolerance,
    /// One timer tick, second: the narrowest window a rounded command can
    /// be sure to hit.
    min_width_s: f64,
}

impl RobustAim {
    /// The robust windows of `design`'s code range under its
    /// `[tolerance]` table (`None` without one), the grid computed on all
    /// cores.
    ///
    /// # Errors
    /// timing-core's error for a point the model refuses.
    pub fn new(design: &DesignSpec) -> Result<Option<Self>, timing_core::Error> {
        let Some(tol) = design.tolerance else {
            return Ok(None);
        };
        let spread = TankSpread::new(tol.lr_rel, tol.cr_rel);
        let (vv, iv) = (design.vin_codes, design.io_codes);
        let vin = (
            sensed_vin(design, &tol, design.vin_of(vv.lo)).0,
            sensed_vin(design, &tol, design.vin_of(vv.hi)).1,
        );
        let io_hi = sensed_io(design, &tol, design.io_of(iv.hi)).1;
        // Readings whose box reaches 0 A have no robust window; the grid's
        // current range starts below every ZVS boundary anyway.
        let io = (
            sensed_io(design, &tol, design.io_of(iv.lo))
                .0
                .max(1e-3 * io_hi),
            io_hi,
        );
        let (v, i) = cell_box(design, vin, io).ok_or(timing_core::Error::NotPositive {
            quantity: timing_core::Quantity::OutputCurrent,
            value: io.1,
        })?;
        let u = spread.current_range(i);
        Ok(Some(Self {
            grid: WindowGrid::new(&design.real, &spread, v, i)?,
            aim_grid: AimGrid::new(&design.real.solver()?, v, u)?,
            spread,
            tol,
            min_width_s: 1.0 / design.timer.clock_hz(),
        }))
    }

    /// The robust window behind the reading (`vin_v` volt, `io_a` ampere,
    /// the values of a code pair), second from gate turn-off, with the
    /// jitter taken off both ends; `None` where no turn-on is reliably ZVS
    /// on every board (the box reaches below the ZVS boundary, the true
    /// windows do not overlap, or what they share is narrower than a
    /// tick). Bounded as [`WindowGrid::robust`] states: never later
    /// (opening) or earlier (close) than the model allows.
    #[must_use]
    pub fn window(&self, design: &DesignSpec, vin_v: f64, io_a: f64) -> Option<RobustWindow<f64>> {
        self.point(design, vin_v, io_a).window(design, io_a)
    }

    /// Prepared for the readings of one input voltage `vin_v` (volt), at
    /// every current: a row of code pairs shares the voltage side of its
    /// boxes.
    #[must_use]
    pub fn row(&self, design: &DesignSpec, vin_v: f64) -> RobustRow<'_> {
        self.prepare(design, vin_v, None)
    }

    /// Prepared for the one reading (`vin_v` volt, `io_a` ampere): only
    /// the grid cells its box reaches.
    pub fn point(&self, design: &DesignSpec, vin_v: f64, io_a: f64) -> RobustRow<'_> {
        let io = sensed_io(design, &self.tol, io_a);
        let vin = sensed_vin(design, &self.tol, vin_v);
        let u = (io.0 > 0.0 && vin.0 > 0.0)
            .then(|| cell_box(design, vin, io))
            .flatten()
            .map(|(_, i)| self.spread.current_range(i));
        self.prepare(design, vin_v, Some(u.unwrap_or((1.0, 1.0))))
    }

    fn prepare(&self, design: &DesignSpec, vin_v: f64, u: Option<(f64, f64)>) -> RobustRow<'_> {
        let vin = sensed_vin(design, &self.tol, vin_v);
        // The cell voltage depends on the input voltage alone (and the
        // output voltage), so any current gives the box's voltage range.
        let v = (vin.0 > 0.0)
            .then(|| cell_box(design, vin, (1.0, 1.0)))
            .flatten()
            .map(|(v, _)| v);
        RobustRow {
            aim: self,
            vin,
            v,
            window: v.and_then(|v| self.grid.prepare(v, u)),
            aim_row: v.map(|v| self.aim_grid.prepare(v, &self.spread)),
        }
    }
}

/// A [`RobustAim`] prepared for the readings of one input voltage
/// ([`RobustAim::row`]).
#[derive(Debug, Clone)]
pub struct RobustRow<'a> {
    aim: &'a RobustAim,
    /// The true input voltages behind the reading, volt.
    vin: (f64, f64),
    /// Their cell voltages, volt (`None`: not a valid operating point).
    v: Option<(f64, f64)>,
    /// The window grid prepared for those cell voltages.
    window: Option<WindowRow<'a>>,
    /// The aim grid prepared for them.
    aim_row: Option<AimRow<'a>>,
}

/// What the tolerances leave of one reading.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Reading {
    /// The robust window ([`RobustAim::window`]).
    pub robust: Option<RobustWindow<f64>>,
    /// The continuous aim ([`RobustRow::reading`]), second.
    pub aim_s: f64,
}

impl RobustRow<'_> {
    /// The box's cell ranges at the reading `io_a` (ampere): `None` where
    /// the box is not made of valid operating points.
    fn cell_box(&self, design: &DesignSpec, io_a: f64) -> Option<((f64, f64), (f64, f64))> {
        let io = sensed_io(design, &self.aim.tol, io_a);
        if !(io.0 > 0.0 && self.vin.0 > 0.0) {
            return None;
        }
        cell_box(design, self.vin, io)
    }

    /// The bounds of the box over cell voltages `v` and currents `i`
    /// (latest opening, earliest close, jitter applied), second: from the
    /// prepared row (its voltages are the box's, as the cell voltage does
    /// not depend on the current), else from the grid.
    fn bounds(&self, v: (f64, f64), i: (f64, f64)) -> Option<(f64, f64)> {
        let (spread, jitter) = (&self.aim.spread, self.aim.tol.jitter_s);
        match &self.window {
            Some(w) if Some(v) == self.v => w.bounds(i, spread, jitter),
            _ => self.aim.grid.bounds(v, i, spread, jitter),
        }
    }

    /// The robust window at the reading `io_a` (ampere) of this row, as
    /// [`RobustAim::window`].
    #[must_use]
    pub fn window(&self, design: &DesignSpec, io_a: f64) -> Option<RobustWindow<f64>> {
        let (v, i) = self.cell_box(design, io_a)?;
        self.robust_of(self.bounds(v, i))
    }

    fn robust_of(&self, bounds: Option<(f64, f64)>) -> Option<RobustWindow<f64>> {
        bounds
            .filter(|&(o, c)| c >= o && c - o >= self.aim.min_width_s)
            .map(|(o, c)| RobustWindow {
                open_s: o,
                close_s: c,
            })
    }

    /// The robust window at the reading `io_a` (ampere) of this row, as
    /// [`RobustAim::window`], and the continuous aim there, second
    /// ([`crate::tank::aim_grid`]'s minimax point over the corners of the box,
    /// kept inside the proven robust window where one exists and inside
    /// `nominal`, the reading's own transition: its window, or its valley
    /// below the boundary, which is therefore the aim there); the box is
    /// bounded once for both.
    #[must_use]
    pub fn reading(
        &self,
        design: &DesignSpec,
        io_a: f64,
        nominal: &timing_core::TurnOn<f64>,
    ) -> Reading {
        let [n_lo, n_hi] = interval(nominal);
        let position = design.position.get();
        let Some((v, i)) = self.cell_box(design, io_a) else {
            return Reading {
                robust: None,
                aim_s: n_lo + position.clamp(0.25, 0.75) * (n_hi - n_lo),
            };
        };
        let aim = self.aim;
        let jitter = aim.tol.jitter_s;
        let (lo, hi) = match &self.aim_row {
            Some(r) if Some(v) == self.v => r.extremes(i),
            _ => aim.aim_grid.extremes(v, i, &aim.spread),
        };
        let mut aim_s = minimax(lo + jitter, hi - jitter, position);
        let bounds = self.bounds(v, i);
        if let Some((lo, hi)) = bounds {
            if lo <= hi {
                aim_s = aim_s.clamp(lo, hi);
            }
        }
        // Off the nominal window's edges by a quarter of its width (the
        // nominal board is the likeliest one), continuous as the window
        // closes onto the valley.
        let q = 0.25 * (n_hi - n_lo);
        Reading {
            robust: self.robust_of(bounds),
            aim_s: aim_s.clamp(n_lo + q, n_hi - q),
        }
    }
}

/// The true input voltage behind the reading `vin_v`, volt.
fn sensed_vin(design: &DesignSpec, tol: &Tolerance, vin_v: f64) -> (f64, f64) {
    let abs = (0.5 + tol.vin_offset_codes + tol.noise_codes) * design.vin_volts_per_code;
    true_range(vin_v, tol.vin_gain_rel, abs)
}

/// The true output current behind the reading `io_a`, ampere.
fn sensed_io(design: &DesignSpec, tol: &Tolerance, io_a: f64) -> (f64, f64) {
    let abs = (0.5 + tol.io_offset_codes + tol.noise_codes) * design.io_amps_per_code;
    true_range(io_a, tol.io_gain_rel, abs)
}

/// Cell voltage and current ranges of a converter box
/// ([`crate::tank::cell_box::cell_box`]), `None` where a corner is not a
/// valid operating point.
fn cell_box(
    design: &DesignSpec,
    vin: (f64, f64),
    io: (f64, f64),
) -> Option<((f64, f64), (f64, f64))> {
    crate::tank::cell_box::cell_box(design.topology, design.vout_v, vin, io).ok()
}

/// A design's [`RobustAim`], built on first use. A clone starts empty, and
/// a change to the design through `&mut` empties it
/// ([`crate::model::design::DesignSpec`]).
#[derive(Default)]
pub struct AimCache(OnceLock<Result<Option<RobustAim>, timing_core::Error>>);

impl Clone for AimCache {
    fn clone(&self) -> Self {
        Self::default()
    }
}

impl AimCache {
    /// The aim of `design` (whose cache this is), building it the first time.
    ///
    /// # Errors
    /// As [`RobustAim::new`].
    pub fn get(&self, design: &DesignSpec) -> Result<Option<&RobustAim>, timing_core::Error> {
        match self.0.get_or_init(|| RobustAim::new(design)) {
            Ok(a) => Ok(a.as_ref()),
            Err(e) => Err(*e),
        }
    }
}

impl std::fmt::Debug for AimCache {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self.0.get() {
            None => "AimCache(not built)",
            Some(Ok(Some(_))) => "AimCache(built)",
            Some(Ok(None)) => "AimCache(no tolerances)",
            Some(Err(_)) => "AimCache(failed)",
        })
    }
}
