//! A SPICE deck of one switching edge of a half-bridge leg: the bus, two
//! switches with their body diodes and behavioural (charge-based) Coss,
//! an added node capacitor, and the inductor from the node through the
//! loop's resistance to its far end. Before `t_off` the outgoing switch is
//! on and the far end's source sits where the loop's resistance carries
//! exactly the current at the switching instant (so the DC operating
//! point sets it); at `t_off` the switch turns off and the source steps to
//! the far end's voltage. The incoming switch stays off, so its body diode
//! clamps the node and the current's reversal through it shows the
//! window's close. The deck measures the swing's arrival at the rail and
//! the current's zero crossing with `.meas` ([`meas`]).
//!
//! Each Coss is a linear capacitor of the curve's largest value plus a
//! behavioural source for the (negative) rest: ngspice leaves a `ddt`
//! source's own capacitance out of its Newton matrix, and a node whose
//! capacitance was all behavioural collapsed its time step at the
//! switch's edge; with the linear part the matrix sees the largest one.

use std::collections::BTreeMap;
use std::fmt::Write as _;

use timing_core::coss::CossPoint;
use timing_core::leg::Edge;

use crate::sim::spice::{
    coss_charge_expression, down_the_ladder, run_ngspice, Solver, SpiceError, SOLVER_LADDER,
};

/// Names of the `.meas` results a [`LegDeck`] prints.
pub mod meas {
    /// The node reaches the incoming switch's rail (window opens), s from
    /// gate turn-off.
    pub const RAIL: &str = "t_rail";
    /// The inductor current crosses zero (window close, or the extremum of
    /// a swing that stops short), s from gate turn-off.
    pub const CURRENT_ZERO: &str = "t_izero";
    /// Node voltage at that instant, V.
    pub const VOLTAGE_AT_CURRENT_ZERO: &str = "v_izero";
    /// Voltage across the incoming switch when it turns on, V.
    pub const VOLTAGE_AT_TURN_ON: &str = "v_turn_on";
}

/// One edge of a leg in ngspice.
#[derive(Debug, Clone, PartialEq)]
pub struct LegDeck {
    /// Which switch turns off.
    pub edge: Edge,
    /// Low switch's Coss curve (empty: none).
    pub low_coss: Vec<CossPoint<f64>>,
    /// High switch's Coss curve.
    pub high_coss: Vec<CossPoint<f64>>,
    /// Capacitor added from the node to the negative rail, farad.
    pub c_ext_f: f64,
    /// Transition inductance, henry.
    pub l_h: f64,
    /// Loop resistance in series with it, ohm.
    pub r_ohm: f64,
    /// Bus voltage, volt.
    pub vbus_v: f64,
    /// Inductor's far-end voltage, volt.
    pub far_v: f64,
    /// Current out of the node into the inductor at the switching instant,
    /// ampere (signed).
    pub current_a: f64,
    /// Gate turn-off instant in the simulation, second.
    pub t_off_s: f64,
    /// End of the simulation, second from gate turn-off.
    pub duration_s: f64,
    /// Largest time step, second.
    pub max_step_s: f64,
    /// When the incoming switch turns on, second after the outgoing one
    /// turned off (`None`: it stays off, and its body diode shows the
    /// window's close). With it the deck also measures the node voltage
    /// at that instant ([`meas::VOLTAGE_AT_TURN_ON`]).
    pub turn_on_s: Option<f64>,
}

impl LegDeck {
    /// Simulate with ngspice along [`SOLVER_LADDER`] (as the cell's decks):
    /// the `.meas` results, times from gate turn-off, and the rung used.
    ///
    /// # Errors
    /// The last rung's [`SpiceError`] when every rung fails.
    pub fn simulate(&self) -> Result<(BTreeMap<String, f64>, usize), SpiceError> {
        let (mut m, rung) =
            down_the_ladder(|rung| run_ngspice(&self.netlist_with(&SOLVER_LADDER[rung])))?;
        for key in [meas::RAIL, meas::CURRENT_ZERO] {
            if let Some(t) = m.get_mut(key) {
                *t -= self.t_off_s;
            }
        }
        Ok((m, rung))
    }

    /// The netlist with the given solver settings.
    #[must_use]
    pub fn netlist_with(&self, solver: &Solver) -> String {
        let t0 = self.t_off_s;
        let falling = self.edge == Edge::Falling;
        let (vbus, i) = (self.vbus_v, self.current_a);
        let mut d = String::new();
        let _ = writeln!(
            d,
            "* zvs-timing: half-bridge leg, {} edge, {} V bus, {} A at the switching instant",
            if falling { "falling" } else { "rising" },
            vbus,
            i
        );
        // The outgoing switch's gate: on, off at t0; the incoming one off.
        let edge = 1e-12;
        let on_off = format!("PWL(0 1 {t0:e} 1 {:e} 0)", t0 + edge);
        let incoming = match self.turn_on_s {
            Some(t) => format!("PWL(0 0 {:e} 0 {:e} 1)", t0 + t, t0 + t + edge),
            None => "DC 0".to_owned(),
        };
        let (gh, gl) = if falling {
            (on_off.as_str(), incoming.as_str())
        } else {
            (incoming.as_str(), on_off.as_str())
        };
        let _ = writeln!(d, "Vgh gh 0 {gh}");
        let _ = writeln!(d, "Vgl gl 0 {gl}");
        let _ = writeln!(d, "Vbus bus 0 DC {vbus:e}");
        let _ = writeln!(d, "Shi bus sw gh 0 swmod");
        let _ = writeln!(d, "Dhi sw bus dbody");
        let _ = writeln!(d, "Slo sw 0 gl 0 swmod");
        let _ = writeln!(d, "Dlo 0 sw dbody");
        for (name, curve, p, n) in [
            ("hi", &self.high_coss, "bus", "sw"),
            ("lo", &self.low_coss, "sw", "0"),
        ] {
            let v = format!("V({p},{n})");
            if let Some(q) = coss_charge_expression(curve, &v) {
                let top = curve.iter().map(|p| p.farads).fold(0.0, f64::max);
                let _ = writeln!(d, "Ccoss_{name} {p} {n} {top:e}");
                let _ = writeln!(d, "Bcoss_{name} {p} {n} I=ddt({q} - ({top:e})*({v}))");
            }
        }
        if self.c_ext_f > 0.0 {
            let _ = writeln!(d, "Cext sw 0 {:e}", self.c_ext_f);
        }
        // Near-ideal parts scaled to the point, as the cell's decks.
        let r_unit = vbus / i.abs().max(1e-6);
        let ron = 1e-4 * r_unit;
        // The inductor from the node, the loop resistance (at least 1e-4
        // of V/I: the DC point needs one to set the current), and a 0 V
        // source to read the current. Before t0 the far end sits at the
        // node's on-state voltage less the drop of that current.
        let r = self.r_ohm.max(1e-4 * r_unit);
        let _ = writeln!(d, "L1 sw la {:e}", self.l_h);
        let _ = writeln!(d, "Rloop la lb {r:e}");
        let _ = writeln!(d, "Vsense lb far 0");
        let on_node = if falling { vbus - i * ron } else { -i * ron };
        let pre = on_node - i * r;
        let _ = writeln!(
            d,
            "Vfar far 0 PWL(0 {pre:e} {t0:e} {pre:e} {:e} {:e})",
            t0 + edge,
            self.far_v
        );
        let _ = writeln!(d, ".model swmod SW(VT=0.5 VH=0.1 RON={ron:e} ROFF=1e9)");
        let is = 1e-5 * i.abs().max(1e-6);
        let _ = writeln!(
            d,
            ".model dbody D(IS={is:e} N=0.05 RS={:e})",
            solver.diode_rs * r_unit
        );
        let _ = writeln!(d, ".nodeset v(sw)={on_node:e}");
        let _ = writeln!(
            d,
            ".options reltol={:e} abstol=1e-10 vntol=1e-7 method=gear",
            solver.reltol
        );
        let step = self.max_step_s;
        let _ = writeln!(d, ".tran {step:e} {:e} 0 {step:e}", t0 + self.duration_s);
        let from = format!("FROM={:e}", t0 + 2.0 * edge);
        let (rail, cross) = if falling {
            ("0".to_owned(), "FALL")
        } else {
            (format!("{vbus:e}"), "RISE")
        };
        let _ = writeln!(
            d,
            ".meas tran {} WHEN v(sw)={rail} {cross}=1 {from}",
            meas::RAIL
        );
        // The current's zero: the window's close through the incoming
        // body diode (not measured once the incoming switch turns on).
        if self.turn_on_s.is_none() {
            let _ = writeln!(
                d,
                ".meas tran {} WHEN i(vsense)=0 {cross}=1 {from}",
                meas::CURRENT_ZERO
            );
            let _ = writeln!(
                d,
                ".meas tran {} FIND v(sw) WHEN i(vsense)=0 {cross}=1 {from}",
                meas::VOLTAGE_AT_CURRENT_ZERO
            );
        }
        if let Some(t) = self.turn_on_s {
            // The incoming switch's voltage as a node of its own (FIND
            // takes node voltages).
            let across = if falling { "v(sw)" } else { "v(bus)-v(sw)" };
            let _ = writeln!(d, "Bacross across 0 V={across}");
            let _ = writeln!(
                d,
                ".meas tran {} FIND v(across) AT={:e}",
                meas::VOLTAGE_AT_TURN_ON,
                t0 + t
            );
        }
        let _ = writeln!(d, ".end");
        d
    }
}
