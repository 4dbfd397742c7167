//! The tank as built: Lr, a fixed capacitance, the MOSFET's Coss curve and
//! the resonant loop's series resistance. Where the curve is absent and the
//! resistance zero this is the ideal tank and the closed forms apply;
//! otherwise timing-core's numerical ring ([`timing_core::ring`]) does.

use timing_core::coss::{CossPoint, SwitchCapacitance};
use timing_core::ring::RingCell;
use timing_core::{CellPoint, Error, Tank, Transition, TurnOn};

/// Lr, capacitance and loss of a design or an operating point.
#[derive(Debug, Clone, PartialEq)]
pub struct RealTank {
    /// Resonant inductance, henry.
    pub lr_h: f64,
    /// Fixed capacitance across the switch (the external capacitor; with no
    /// Coss curve, the whole Cr), farad.
    pub cr_fixed_f: f64,
    /// The MOSFET's output capacitance curve (empty: none).
    pub coss: Vec<CossPoint<f64>>,
    /// Series resistance of the resonant loop, ohm.
    pub r_tank_ohm: f64,
}

/// One transition of a [`RealTank`]: from the closed forms for an ideal
/// tank, from the numerical ring otherwise.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CellTransition {
    /// End of the linear charge, second from gate turn-off.
    pub charge_end_s: f64,
    /// Peak switch voltage instant, second from gate turn-off.
    pub peak_s: f64,
    /// Peak switch voltage, volt.
    pub peak_switch_voltage_v: f64,
    /// The window or the valley.
    pub turn_on: TurnOn<f64>,
}

impl From<&Transition<f64>> for CellTransition {
    fn from(t: &Transition<f64>) -> Self {
        Self {
            charge_end_s: t.charge_end_s(),
            peak_s: t.peak_s(),
            peak_switch_voltage_v: t.peak_switch_voltage_v(),
            turn_on: t.turn_on(),
        }
    }
}

/// A validated [`RealTank`] ready to compute: the closed forms or the ring.
#[derive(Debug, Clone, Copy)]
pub enum CellSolver<'a> {
    /// Constant capacitance, no loss.
    Ideal(Tank<f64>),
    /// Anything else.
    Ring(RingCell<'a, f64>),
}

impl CellSolver<'_> {
    /// The transition at `cell`.
    ///
    /// # Errors
    /// timing-core's error for the point.
    pub fn transition(&self, cell: &CellPoint<f64>) -> Result<CellTransition, Error> {
        match self {
            CellSolver::Ideal(tank) => Ok((&Transition::new(tank, cell)?).into()),
            CellSolver::Ring(ring) => {
                let t = ring.transition(cell)?;
                Ok(CellTransition {
                    charge_end_s: t.charge_end_s,
                    peak_s: t.peak_s,
                    peak_switch_voltage_v: t.peak_switch_voltage_v,
                    turn_on: t.turn_on,
                })
            }
        }
    }

    /// Smallest cell current with ZVS at cell voltage `v`, ampere.
    ///
    /// # Errors
    /// timing-core's error.
    pub fn boundary_current_a(&self, v: f64) -> Result<f64, Error> {
        match self {
            CellSolver::Ideal(tank) => Ok(v / tank.z0_ohm()),
            CellSolver::Ring(ring) => ring.boundary_current_a(v),
        }
    }
}

/// Checks a grid's cell ranges: voltages `v` (volt) and currents `i`
/// (ampere), each positive, finite and not reversed.
///
/// # Errors
/// [`Error::NotPositive`] naming the cell voltage or current and the
/// range's low end.
pub fn check_cell_ranges(v: (f64, f64), i: (f64, f64)) -> Result<(), Error> {
    let bad = |quantity, value| Error::NotPositive { quantity, value };
    if !(v.0 > 0.0 && v.1 >= v.0 && v.1.is_finite()) {
        return Err(bad(timing_core::Quantity::CellVoltage, v.0));
    }
    if !(i.0 > 0.0 && i.1 >= i.0 && i.1.is_finite()) {
        return Err(bad(timing_core::Quantity::CellCurrent, i.0));
    }
    Ok(())
}

/// The Coss curve `curve` with every capacitance times `k`.
#[must_use]
pub fn scaled_curve(curve: &[CossPoint<f64>], k: f64) -> Vec<CossPoint<f64>> {
    curve
        .iter()
        .map(|p| CossPoint {
            volts: p.volts,
            farads: p.farads * k,
        })
        .collect()
}

impl RealTank {
    /// This tank on another board: Lr times `l`, the whole switch
    /// capacitance (the fixed capacitor and the Coss curve together) times
    /// `k`, the loop resistance unchanged.
    #[must_use]
    pub fn scaled(&self, l: f64, k: f64) -> Self {
        self.board(l, k, k, self.r_tank_ohm)
    }

    /// This tank as built on a board whose parts differ: Lr times `l`, the
    /// fixed capacitor times `k_fixed`, the Coss curve times `k_curve`,
    /// and a loop resistance of `r_tank_ohm`.
    #[must_use]
    pub fn board(&self, l: f64, k_fixed: f64, k_curve: f64, r_tank_ohm: f64) -> Self {
        Self {
            lr_h: self.lr_h * l,
            cr_fixed_f: self.cr_fixed_f * k_fixed,
            coss: scaled_curve(&self.coss, k_curve),
            r_tank_ohm,
        }
    }

    /// The ideal tank of `lr_h` and `cr_f`.
    #[must_use]
    pub fn ideal(lr_h: f64, cr_f: f64) -> Self {
        Self {
            lr_h,
            cr_fixed_f: cr_f,
            coss: Vec::new(),
            r_tank_ohm: 0.0,
        }
    }

    /// Whether this is the ideal tank (no curve, no loss).
    #[must_use]
    pub fn is_ideal(&self) -> bool {
        self.coss.is_empty() && self.r_tank_ohm == 0.0
    }

    /// The validated capacitance across the switch.
    ///
    /// # Errors
    /// timing-core's error naming the offending curve point or capacitance.
    pub fn capacitance(&self) -> Result<SwitchCapacitance<'_, f64>, Error> {
        SwitchCapacitance::new(self.cr_fixed_f, &self.coss)
    }

    /// The solver for this tank (validates it).
    ///
    /// # Errors
    /// timing-core's error naming the offending component.
    pub fn solver(&self) -> Result<CellSolver<'_>, Error> {
        if self.is_ideal() {
            Ok(CellSolver::Ideal(Tank::new(self.lr_h, self.cr_fixed_f)?))
        } else {
            Ok(CellSolver::Ring(RingCell::new(
                self.lr_h,
                self.capacitance()?,
                self.r_tank_ohm,
            )?))
        }
    }

    /// The constant-capacitance tank with the same lossless ZVS boundary at
    /// cell voltage `v`: Cr = fixed + 2*Co(tr) - Co(er) of the curve at `v`.
    ///
    /// # Errors
    /// timing-core's error.
    pub fn equivalent_tank(&self, v: f64) -> Result<Tank<f64>, Error> {
        Tank::new(self.lr_h, self.capacitance()?.boundary_equivalent(v))
    }
}
