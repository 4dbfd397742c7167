//! The exact model of a half-bridge leg's design, one edge at a time, at a
//! reading or a code pair: the nominal window from timing-core's edge
//! solution, the robust window over the design's tolerance box
//! ([`crate::tank::leg_grid`]), the aim and the interval a command must
//! hit, all in the dead-time generator's steps from the outgoing switch's
//! turn-off command (the drivers' delays applied).

use timing_core::leg::{Edge, EdgeTransition, EdgeTurnOn, Leg, LegPoint, ShortSwing};
use timing_core::Error;

use crate::input::leg_design::{edge_index, LegSpec};
use crate::tank::leg_grid::LegGrid;

/// The model at one reading, steps (not rounded).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LegPair {
    /// The nominal edge.
    pub transition: EdgeTransition<f64>,
    /// The nominal window, steps; `None` where the swing stops short.
    pub nominal: Option<(f64, f64)>,
    /// The window every leg of the tolerance box shares, steps; `None`
    /// without tolerances or where some leg of the box stops short.
    pub robust: Option<(f64, f64)>,
    /// The interval the command must hit: the robust window where it is
    /// a step wide, else the nominal one where that is, from the least
    /// dead time on; `None` elsewhere.
    pub required: Option<(f64, f64)>,
    /// The aim: the design's position in the window `required` comes from
    /// (in the nominal one where no window is a step wide), else the
    /// short-swing policy's instant; never below the least dead time.
    pub aim: f64,
    /// The least dead time lies past the close of the window a step wide:
    /// no command is both safe and inside it.
    pub floor_blocks: bool,
    /// Whether the design's error budget around the aim applies: where
    /// `required` is the robust window, or the design has no tolerances.
    /// Where the robust window has vanished (near the point where the
    /// swing stops completing, some leg of the box stops short) the aim
    /// moves from inside the robust window to inside the nominal one, a
    /// jump no table follows; there only the nominal window binds.
    pub budgeted: bool,
}

/// The model of one edge of a leg design.
#[derive(Debug)]
pub struct LegModel<'a> {
    spec: &'a LegSpec,
    edge: Edge,
    leg: Leg<'a, f64>,
    grid: Option<LegGrid>,
}

/// Refinement of the robust grid, steps: a fiftieth.
const GRID_TOL_STEPS: f64 = 0.02;

impl<'a> LegModel<'a> {
    /// The model of `edge` of `spec`; with tolerances it builds the robust
    /// grid over the design range (all cores, seconds).
    ///
    /// # Errors
    /// timing-core's error where the leg or a point of the range is
    /// refused.
    pub fn new(spec: &'a LegSpec, edge: Edge) -> Result<Self, Error> {
        let i = spec.current_a[edge_index(edge)];
        Self::over(spec, edge, spec.vbus_v, i)
    }

    /// The model of `edge` of `spec` for readings within bus voltages
    /// `vbus_v` and currents `current_a` only (its robust grid covers
    /// their boxes and no more): what one operating point needs.
    ///
    /// # Errors
    /// As [`LegModel::new`].
    pub fn over(
        spec: &'a LegSpec,
        edge: Edge,
        vbus_v: (f64, f64),
        current_a: (f64, f64),
    ) -> Result<Self, Error> {
        let leg = spec.built.leg()?;
        let grid = match spec.tolerance {
            None => None,
            Some(t) => {
                let (v_lo, i_lo) = spec.true_box(vbus_v.0, current_a.0);
                let (v_hi, i_hi) = spec.true_box(vbus_v.1, current_a.1);
                // One code beyond each end: readings clamp there.
                let pad_v = spec.vbus_volts_per_code;
                let pad_i = spec.current_amps_per_code;
                Some(LegGrid::new(
                    &spec.built,
                    edge,
                    &t.spread(),
                    (v_lo.0 - pad_v, v_hi.1 + pad_v),
                    (i_lo.0 - pad_i, i_hi.1 + pad_i),
                    GRID_TOL_STEPS * spec.step_s,
                )?)
            }
        };
        Ok(Self {
            spec,
            edge,
            leg,
            grid,
        })
    }

    /// The edge this model serves.
    #[must_use]
    pub fn edge(&self) -> Edge {
        self.edge
    }

    /// Steps from the outgoing switch's turn-off command to a turn-on at
    /// `t_s` second after its turn-off (not rounded).
    #[must_use]
    pub fn steps_at(&self, t_s: f64) -> f64 {
        let timer = self.spec.timer.edge_timer(self.edge);
        (t_s - timer.lead_s()) * timer.clock_hz()
    }

    /// The model at the reading `vbus_v` volt, `current_a` ampere (signed,
    /// out of the node).
    ///
    /// # Errors
    /// timing-core's error for a point it refuses.
    pub fn at(&self, vbus_v: f64, current_a: f64) -> Result<LegPair, Error> {
        let s = self.spec;
        let far = s.built.far_v(vbus_v, 1.0);
        let transition = self
            .leg
            .edge(self.edge, &LegPoint::new(vbus_v, current_a, far)?)?;
        let steps = |w: (f64, f64)| (self.steps_at(w.0), self.steps_at(w.1));
        let nominal = transition
            .turn_on
            .window()
            .map(|w| steps((w.open_s, w.close_s)));
        let robust = self.grid.as_ref().and_then(|g| {
            let (tv, ti) = s.true_box(vbus_v, current_a);
            let jitter = s.tolerance.map_or(0.0, |t| t.jitter_s);
            g.robust(tv, ti, jitter)
                .map(|r| steps((r.open_s, r.close_s)))
        });
        let least = f64::from(s.timer.least(self.edge).get());
        let top = f64::from(s.timer.edge_timer(self.edge).max_ticks().get());
        let wide = |w: &(f64, f64)| w.1 - w.0 >= 1.0;
        let robust_wide = robust.filter(wide);
        let chosen = robust_wide.or(nominal.filter(wide));
        let budgeted = robust_wide.is_some() || s.tolerance.is_none();
        let between = |w: (f64, f64)| s.position.between(w.0, w.1);
        let (required, aim, floor_blocks) = match (chosen, nominal) {
            (Some(w), _) => {
                let lo = w.0.max(least);
                if lo <= w.1 {
                    (Some((lo, w.1)), between(w).max(least), false)
                } else {
                    (None, least, true)
                }
            }
            (None, Some(w)) => (None, between(w).max(least), false),
            (None, None) => {
                let at = match (transition.turn_on, s.short_swing) {
                    (EdgeTurnOn::Short(sh), ShortSwing::Extremum) => {
                        self.steps_at(sh.extremum_s).max(least)
                    }
                    _ => least,
                };
                (None, at, false)
            }
        };
        Ok(LegPair {
            transition,
            nominal,
            robust,
            required,
            aim: aim.min(top),
            floor_blocks,
            budgeted: budgeted && required.is_some(),
        })
    }

    /// The model at bus code `bus` and current code `current`.
    ///
    /// # Errors
    /// As [`LegModel::at`].
    pub fn at_codes(&self, bus: u16, current: u16) -> Result<LegPair, Error> {
        self.at(self.spec.vbus_of(bus), self.spec.current_of(current))
    }

    /// Rows and columns of the robust grid (`None` without tolerances).
    #[must_use]
    pub fn grid_size(&self) -> Option<(usize, usize)> {
        self.grid.as_ref().map(LegGrid::size)
    }
}
