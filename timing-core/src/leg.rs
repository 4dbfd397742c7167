//! The switching edges of a half-bridge leg: two switches in series
//! across a bus, their common node driven by an inductor. After one switch
//! turns off, the inductor's current swings the node to the other rail;
//! the incoming switch turns on at zero voltage only once the swing is
//! complete (its body diode then clamps the node), and before the current
//! through that diode reverses.
//!
//! # The circuit
//! The node voltage `v` (from the bus's negative rail) carries the
//! capacitance `C_node(v) = C_low(v) + C_high(Vbus - v) + C_ext`: each
//! switch's output capacitance at its own drain-source voltage and any
//! added capacitor. The swing moves the charge
//! `Q_low(Vbus) + Q_high(Vbus) + C_ext*Vbus` ([`NodeCapacitance::swing_charge`]).
//! The inductor `L` (a filter inductor, a transformer's leakage, a small
//! series inductor) runs from the node to a far end held at `V_far` (the
//! output voltage of a synchronous buck, the midpoint of a split bus),
//! through the loop's resistance `R`. `I` is its current out of the node
//! at the switching instant (t = 0, gate turn-off of the outgoing switch).
//!
//! - **Falling edge** (the high side turns off, `I > 0` discharges the
//!   node): with `u = Vbus - v` and `j = I`,
//!   `C(u)*u' = j, L*j' = E - u - R*j`, `E = Vbus - V_far`.
//! - **Rising edge** (the low side turns off, `I < 0` charges it): with
//!   `u = v` and `j = -I`, the same equations with `E = V_far`.
//!
//! Both are the swing of the integrator the resonant cell's ring uses
//! (`swing.rs`), from `u = 0`. The window opens
//! when `u` reaches `Vbus`; the incoming switch's body diode then carries
//! `j`, and `L*j' = E - Vbus - R*j` takes it to zero: the window closes
//! after `(L/R)*ln(1 + R*j0/(Vbus - E))` (`j0*L/(Vbus - E)` lossless),
//! `Vbus - E` being the voltage across the inductor during the clamp
//! (`V_far` on the falling edge, `Vbus - V_far` on the rising one). Where
//! that voltage does not reverse the current, or reverses it later than
//! the body-diode conduction the user accepts, the window's close is that
//! conduction after the opening ([`EdgeWindow::reverses`] says which).
//! If `j` falls to zero before `u` reaches `Vbus`, the swing stops short:
//! the node's extremum is the least-loss instant to switch, with the
//! voltage still across the incoming switch ([`SwingShortfall`]). A current
//! of the wrong sign first flows through the outgoing switch's body diode
//! (the node stays at its rail) until `E` has reversed it; with `E <= 0`
//! the node never leaves the rail.
//!
//! With a large `L` the current hardly changes during the swing and the
//! swing time is the charge over the current; with a small one the node
//! rings and completes only if the inductor's energy suffices:
//! `1/2*L*j^2 >= integral from 0 to Vbus of (u - E)*C(u) du` (lossless).
//!
//! Accuracy: classical RK4 as the resonant cell's ring, with steps of
//! [`crate::ring::STEP_ANGLE`] of the local resonance, at most 1/16 of the
//! bus and at most a 2 % change of the capacitance, ending on both curves'
//! points. Measured in f64 (`cargo test -p timing-core --test leg --
//! --nocapture`): the window of a constant capacitance within 6.9e-8
//! relative of the closed-form LC swing; with a 10 H inductor the swing
//! time within 9.1e-8 of the charge over the current, on four curve pairs
//! (points off round numbers among them); the extremum of a swing that
//! stops short within 2.6e-7 of the energy balance. A loop damped more
//! than ten times critically is refused ([`Leg::new`]); below that, a node
//! that creeps towards `E` without reaching the rail stops short once its
//! current has decayed to a millionth.

use crate::coss::{CossPoint, Piece, SwitchCapacitance};
use crate::error::{derived, non_negative, positive, Error, Quantity};
use crate::ring::{clamp_time_s, MAX_STEPS};
use crate::swing::{crossing, first_event, hermite, Capacitance, Loop, State};
use crate::timer::{DelayCommand, Ticks, Timer, WindowPosition};
use crate::transition::{TurnOn, Valley, ZvsWindow};
use crate::Real;

/// Which switch turns off.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub enum Edge {
    /// The high side turns off; a current out of the node swings it down
    /// to the negative rail, and the low side turns on.
    Falling,
    /// The low side turns off; a current into the node swings it up to the
    /// bus, and the high side turns on.
    Rising,
}

/// The capacitance at a leg's switch node: the low switch's curve at the
/// node voltage, the high switch's at the bus less it, and a fixed part.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct NodeCapacitance<'a, F> {
    /// Each switch's curve (`None` for an empty one: the switch's
    /// capacitance is left to `ext`).
    low: Option<SwitchCapacitance<'a, F>>,
    high: Option<SwitchCapacitance<'a, F>>,
    ext: F,
}

/// A switch's curve, `None` when empty.
fn curve_of<F: Real>(points: &[CossPoint<F>]) -> Result<Option<SwitchCapacitance<'_, F>>, Error> {
    if points.is_empty() {
        Ok(None)
    } else {
        SwitchCapacitance::new(F::ZERO, points).map(Some)
    }
}

/// `f` of both switches' curves and the added capacitor's `ext_part`
/// (a switch without a curve adds nothing).
fn summed<'a, F: Real>(
    node: &NodeCapacitance<'a, F>,
    ext_part: F,
    low: impl Fn(&SwitchCapacitance<'a, F>) -> F,
    high: impl Fn(&SwitchCapacitance<'a, F>) -> F,
) -> F {
    node.low.as_ref().map_or(F::ZERO, low) + node.high.as_ref().map_or(F::ZERO, high) + ext_part
}

/// No capacitance: the piece of a switch without a curve.
fn no_piece<F: Real>() -> Piece<F> {
    Piece {
        v0: F::ZERO,
        c0: F::ZERO,
        slope: F::ZERO,
    }
}

impl<'a, F: Real> NodeCapacitance<'a, F> {
    /// The node of a leg whose switches have the output-capacitance curves
    /// `low` and `high` (the same slice for identical switches) and
    /// `c_ext_f` farad added at the node.
    ///
    /// ```
    /// # fn main() -> Result<(), timing_core::Error> {
    /// use timing_core::coss::CossPoint;
    /// use timing_core::leg::NodeCapacitance;
    /// let coss = [
    ///     CossPoint { volts: 0.0_f64, farads: 1.2e-9 },
    ///     CossPoint { volts: 40.0, farads: 0.3e-9 },
    /// ];
    /// let node = NodeCapacitance::new(&coss, &coss, 100e-12)?;
    /// // Both switches' charge to 48 V and the capacitor's, coulomb.
    /// assert!(node.swing_charge(48.0) > 30e-9);
    /// # Ok(()) }
    /// ```
    ///
    /// # Errors
    /// As [`SwitchCapacitance::new`] for either curve; [`Error::Negative`]
    /// and friends naming [`Quantity::NodeCapacitance`]; [`Error::NotPositive`]
    /// naming it when the node has no capacitance at all.
    pub fn new(
        low: &'a [CossPoint<F>],
        high: &'a [CossPoint<F>],
        c_ext_f: F,
    ) -> Result<Self, Error> {
        let ext = non_negative(Quantity::NodeCapacitance, c_ext_f)?;
        let low = curve_of(low)?;
        let high = curve_of(high)?;
        let node = Self { low, high, ext };
        positive(
            Quantity::NodeCapacitance,
            summed(
                &node,
                ext,
                SwitchCapacitance::min_f,
                SwitchCapacitance::min_f,
            ),
        )?;
        Ok(node)
    }

    /// `C_node(v)` at node voltage `v` on a bus of `vbus` volt, farad.
    #[must_use]
    pub fn at(&self, v: F, vbus: F) -> F {
        summed(self, self.ext, |c| c.at(v), |c| c.at(vbus - v))
    }

    /// The charge the node's swing across the bus moves,
    /// `Q_low(Vbus) + Q_high(Vbus) + C_ext*Vbus`, coulomb (exact for the
    /// piecewise-linear curves).
    #[must_use]
    pub fn swing_charge(&self, vbus: F) -> F {
        let q = |c: &SwitchCapacitance<'a, F>| c.charge(vbus);
        summed(self, self.ext * vbus, q, q)
    }

    /// The capacitance added at the node, farad.
    #[must_use]
    pub fn c_ext_f(&self) -> F {
        self.ext
    }
}

/// The node capacitance seen along one edge's swing coordinate `u`
/// (`u = Vbus - v` falling, `u = v` rising).
struct Along<'c, 'a, F> {
    node: &'c NodeCapacitance<'a, F>,
    vbus: F,
    falling: bool,
}

impl<F: Real> Along<'_, '_, F> {
    /// The switch whose drain-source voltage is `u`, and the other (at
    /// `Vbus - u`).
    fn sides(
        &self,
    ) -> (
        Option<&SwitchCapacitance<'_, F>>,
        Option<&SwitchCapacitance<'_, F>>,
    ) {
        if self.falling {
            (self.node.high.as_ref(), self.node.low.as_ref())
        } else {
            (self.node.low.as_ref(), self.node.high.as_ref())
        }
    }
}

impl<F: Real> Capacitance<F> for Along<'_, '_, F> {
    fn piece(&self, u: F, rising: bool) -> Piece<F> {
        let (same, other) = self.sides();
        let a = same.map_or(no_piece(), |c| c.piece(u, rising));
        // The other switch sits at w = Vbus - u. Its points are located in
        // u, as `Vbus - p` (the same expression `next_point` lands the
        // steps on), so a step ended on one of them takes the next piece:
        // mapping u back to w could round to the wrong side of the point.
        let b = other.map_or(no_piece(), |c| {
            let vbus = self.vbus;
            let k = if rising {
                // w falls: the piece below the point u has reached.
                c.curve().partition_point(|p| vbus - p.volts > u)
            } else {
                c.curve().partition_point(|p| vbus - p.volts >= u)
            };
            c.piece_below(k)
        });
        // c(u) = a.at(u) + b.at(Vbus - u) + ext, a line in u: its value at
        // u = 0 and its slope (a fixed origin keeps the piece comparable
        // from step to step).
        let slope = a.slope - b.slope;
        Piece {
            v0: F::ZERO,
            c0: a.at(F::ZERO) + b.at(self.vbus) + self.node.ext,
            slope,
        }
    }

    fn next_point(&self, u: F, rising: bool) -> Option<F> {
        let (same, other) = self.sides();
        // The other switch's points, in u: Vbus - p, heading the other way.
        let a = same.and_then(|c| Capacitance::next_point(c, u, rising));
        let b = other
            .and_then(|c| Capacitance::next_point(c, self.vbus - u, !rising))
            .map(|p| self.vbus - p)
            .filter(|&p| p > F::ZERO);
        match (a, b) {
            (Some(a), Some(b)) => Some(if (a < b) == rising { a } else { b }),
            (a, None) => a,
            (None, b) => b,
        }
    }
}

/// One operating point of a leg's edge.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct LegPoint<F> {
    vbus: F,
    current: F,
    far: F,
}

impl<F: Real> LegPoint<F> {
    /// `vbus_v` across the leg, `current_a` out of the node into the
    /// inductor at the switching instant (signed: positive swings the
    /// falling edge), `far_v` at the inductor's far end (0 to `vbus_v`).
    ///
    /// # Errors
    /// [`Error::NotPositive`] and friends naming [`Quantity::BusVoltage`];
    /// [`Error::NotFinite`] naming [`Quantity::NodeCurrent`];
    /// [`Error::OutOfRange`] naming [`Quantity::FarEndVoltage`].
    pub fn new(vbus_v: F, current_a: F, far_v: F) -> Result<Self, Error> {
        let vbus = positive(Quantity::BusVoltage, vbus_v)?;
        if !current_a.is_finite() {
            return Err(Error::NotFinite {
                quantity: Quantity::NodeCurrent,
                value: current_a.to_f64(),
            });
        }
        if !(far_v >= F::ZERO && far_v <= vbus) {
            return Err(Error::OutOfRange {
                quantity: Quantity::FarEndVoltage,
                value: far_v.to_f64(),
                min: 0.0,
                max: vbus.to_f64(),
            });
        }
        Ok(Self {
            vbus,
            current: current_a,
            far: far_v,
        })
    }

    /// Bus voltage, volt.
    #[must_use]
    pub fn vbus_v(&self) -> F {
        self.vbus
    }

    /// Current out of the node at the switching instant, ampere.
    #[must_use]
    pub fn current_a(&self) -> F {
        self.current
    }

    /// Voltage at the inductor's far end, volt.
    #[must_use]
    pub fn far_v(&self) -> F {
        self.far
    }
}

/// The converter a leg's inductor belongs to, for the currents at its
/// switching instants ([`switching_points`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub enum LegConverter {
    /// Synchronous buck: the inductor runs from the node to the output;
    /// the bus is the input.
    SyncBuck,
    /// Synchronous boost: the inductor runs from the input to the node;
    /// the bus is the output.
    SyncBoost,
}

/// Both edges' operating points of a synchronous converter's leg at input
/// `vin_v` and output `vout_v` (volt), inductance `l_h` (henry),
/// switching frequency `fs_hz` and average inductor current `i_avg_a`
/// (ampere; buck: the output current, boost: the input current), from
/// the inductor's ideal ripple: `dI = (Vin - Vout)*Vout/(Vin*L*fs)` for
/// the buck and `Vin*(Vout - Vin)/(Vout*L*fs)` for the boost (lossless,
/// continuous or triangular conduction; textbook, from memory). Returned
/// as `[falling, rising]`.
///
/// - Buck: the high side turns off at the current's peak `I + dI/2`
///   (out of the node: it swings the node down), the low side at its
///   valley `I - dI/2`, which swings the node up only when negative (a
///   triangular-mode controller sets it so).
/// - Boost: the low side turns off at the peak, the current flowing into
///   the node (`-(I + dI/2)`: it swings the node up); the high side at the
///   valley, `-(I - dI/2)`, which swings it down only when the valley is
///   negative.
///
/// ```
/// # fn main() -> Result<(), timing_core::Error> {
/// use timing_core::leg::{switching_points, LegConverter};
/// // 48 V to 12 V, 4.7 uH at 500 kHz, 1 A average: a 3.83 A ripple.
/// let [fall, rise] = switching_points(LegConverter::SyncBuck, 48.0_f64, 12.0, 4.7e-6, 500e3, 1.0)?;
/// assert!((fall.current_a() - 2.915).abs() < 1e-3);
/// assert!(rise.current_a() < 0.0); // triangular mode: the rising edge swings too
/// # Ok(()) }
/// ```
///
/// # Errors
/// [`Error::NotPositive`] and friends naming [`Quantity::InputVoltage`],
/// [`Quantity::OutputVoltage`], [`Quantity::TransitionInductance`] or
/// [`Quantity::SwitchingFrequency`]; [`Error::OutOfRange`] naming
/// [`Quantity::OutputVoltage`] when it does not suit the converter;
/// [`Error::NotFinite`] naming [`Quantity::NodeCurrent`].
pub fn switching_points<F: Real>(
    converter: LegConverter,
    vin_v: F,
    vout_v: F,
    l_h: F,
    fs_hz: F,
    i_avg_a: F,
) -> Result<[LegPoint<F>; 2], Error> {
    let vin = positive(Quantity::InputVoltage, vin_v)?;
    let vout = positive(Quantity::OutputVoltage, vout_v)?;
    let l = positive(Quantity::TransitionInductance, l_h)?;
    let fs = positive(Quantity::SwitchingFrequency, fs_hz)?;
    if !i_avg_a.is_finite() {
        return Err(Error::NotFinite {
            quantity: Quantity::NodeCurrent,
            value: i_avg_a.to_f64(),
        });
    }
    let wrong = |min: F, max: F| Error::OutOfRange {
        quantity: Quantity::OutputVoltage,
        value: vout.to_f64(),
        min: min.to_f64(),
        max: max.to_f64(),
    };
    match converter {
        LegConverter::SyncBuck => {
            if vout >= vin {
                return Err(wrong(F::ZERO, vin));
            }
            let ripple = derived(Quantity::NodeCurrent, (vin - vout) * vout / (vin * l * fs))?;
            let half = ripple * F::HALF;
            Ok([
                LegPoint::new(vin, i_avg_a + half, vout)?,
                LegPoint::new(vin, i_avg_a - half, vout)?,
            ])
        }
        LegConverter::SyncBoost => {
            if vout <= vin {
                return Err(wrong(vin, F::from_f64(f64::INFINITY)));
            }
            let ripple = derived(Quantity::NodeCurrent, vin * (vout - vin) / (vout * l * fs))?;
            let half = ripple * F::HALF;
            Ok([
                LegPoint::new(vout, -(i_avg_a - half), vin)?,
                LegPoint::new(vout, -(i_avg_a + half), vin)?,
            ])
        }
    }
}

/// The ZVS window of an edge, second from the outgoing switch's gate
/// turn-off.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct EdgeWindow<F> {
    /// The node has reached the incoming switch's rail.
    pub open_s: F,
    /// The current through the incoming switch's body diode reverses, or
    /// the accepted body-diode conduction ends, whichever is first.
    pub close_s: F,
    /// Whether `close_s` is the current's reversal.
    pub reverses: bool,
}

/// An edge whose swing stops short of the rail.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct SwingShortfall<F> {
    /// The node's extremum (the current through zero), second from gate
    /// turn-off: the least-loss instant for a hard turn-on where the
    /// inductor rings; 0 where the node never left its rail.
    pub extremum_s: F,
    /// Voltage still across the incoming switch there, volt.
    pub remaining_v: F,
}

/// Where the incoming switch can be turned on.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub enum EdgeTurnOn<F> {
    /// The swing completes: zero-voltage turn-on inside the window.
    Zvs(EdgeWindow<F>),
    /// It does not.
    Short(SwingShortfall<F>),
}

impl<F: Real> EdgeTurnOn<F> {
    /// The ZVS window, `None` where the swing stops short.
    #[must_use]
    pub fn window(&self) -> Option<EdgeWindow<F>> {
        match *self {
            EdgeTurnOn::Zvs(w) => Some(w),
            EdgeTurnOn::Short(_) => None,
        }
    }
}

/// One edge of a [`Leg`].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct EdgeTransition<F> {
    /// The window, or where the swing stops.
    pub turn_on: EdgeTurnOn<F>,
    /// Current into the incoming switch's body diode when the window
    /// opens, ampere (0 where the swing stops short).
    pub clamp_start_current_a: F,
    /// Integration steps taken.
    pub steps: u32,
}

/// A validated leg: the transition inductance, the node capacitance, the
/// loop resistance and the body-diode conduction accepted.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Leg<'a, F> {
    l: F,
    inv_l: F,
    r: F,
    cap: NodeCapacitance<'a, F>,
    diode: F,
}

impl<'a, F: Real> Leg<'a, F> {
    /// A leg of `l_h` henry from the node to the inductor's far end, node
    /// capacitance `cap`, loop resistance `r_ohm` and at most
    /// `max_diode_s` second of body-diode conduction after the swing.
    ///
    /// ```
    /// # fn main() -> Result<(), timing_core::Error> {
    /// use timing_core::coss::CossPoint;
    /// use timing_core::leg::{Edge, Leg, LegPoint, NodeCapacitance};
    /// let coss = [
    ///     CossPoint { volts: 0.0_f64, farads: 1.2e-9 },
    ///     CossPoint { volts: 40.0, farads: 0.3e-9 },
    /// ];
    /// // A synchronous buck in triangular mode: 4.7 uH to a 12 V output.
    /// let leg = Leg::new(4.7e-6, NodeCapacitance::new(&coss, &coss, 0.0)?, 0.02, 50e-9)?;
    /// let rise = leg.edge(Edge::Rising, &LegPoint::new(48.0, -3.0, 12.0)?)?;
    /// let w = rise.turn_on.window().ok_or(timing_core::Error::Overflow {
    ///     quantity: timing_core::Quantity::Interval,
    /// })?;
    /// assert!(w.open_s > 5e-9 && w.close_s > w.open_s);
    /// # Ok(()) }
    /// ```
    ///
    /// # Errors
    /// [`Error::NotPositive`] and friends naming
    /// [`Quantity::TransitionInductance`] or [`Quantity::DiodeConduction`];
    /// [`Error::Negative`] or [`Error::NotFinite`] naming
    /// [`Quantity::TankResistance`], and [`Error::OutOfRange`] naming it
    /// above `20*sqrt(L/C_max)` (ten times critical damping at the node's
    /// largest capacitance).
    pub fn new(
        l_h: F,
        cap: NodeCapacitance<'a, F>,
        r_ohm: F,
        max_diode_s: F,
    ) -> Result<Self, Error> {
        let l = positive(Quantity::TransitionInductance, l_h)?;
        let r = non_negative(Quantity::TankResistance, r_ohm)?;
        // A loop damped more than ten times critically at the node's
        // largest capacitance: the node creeps like an RC circuit, there is
        // no swing to time, and the integrator's steps (set by L/R) would
        // run out long before the creep ends.
        let c_max = summed(
            &cap,
            cap.ext,
            SwitchCapacitance::max_f,
            SwitchCapacitance::max_f,
        );
        let r_max = F::from_u32(20) * (l / c_max).sqrt();
        if r > r_max {
            return Err(Error::OutOfRange {
                quantity: Quantity::TankResistance,
                value: r.to_f64(),
                min: 0.0,
                max: r_max.to_f64(),
            });
        }
        Ok(Self {
            l,
            inv_l: derived(Quantity::TransitionInductance, F::ONE / l)?,
            r,
            cap,
            diode: positive(Quantity::DiodeConduction, max_diode_s)?,
        })
    }

    /// The node capacitance.
    #[must_use]
    pub fn capacitance(&self) -> NodeCapacitance<'a, F> {
        self.cap
    }

    /// The transition of `edge` at `point`.
    ///
    /// # Errors
    /// [`Error::Overflow`] naming [`Quantity::Interval`] when a time does
    /// not fit the float type or the swing takes more than
    /// [`MAX_STEPS`] steps.
    pub fn edge(&self, edge: Edge, point: &LegPoint<F>) -> Result<EdgeTransition<F>, Error> {
        let falling = edge == Edge::Falling;
        let vbus = point.vbus;
        let (e, j0) = if falling {
            (vbus - point.far, point.current)
        } else {
            (point.far, -point.current)
        };
        let sw = Loop {
            l: self.l,
            inv_l: self.inv_l,
            r: self.r,
        };
        let cap = Along {
            node: &self.cap,
            vbus,
            falling,
        };
        let short = |at: F, u: F, steps: u32| {
            let remaining = vbus - u;
            EdgeTransition {
                turn_on: EdgeTurnOn::Short(SwingShortfall {
                    extremum_s: at,
                    remaining_v: if remaining > F::ZERO {
                        remaining
                    } else {
                        F::ZERO
                    },
                }),
                clamp_start_current_a: F::ZERO,
                steps,
            }
        };
        // A current of the wrong sign: the outgoing switch's body diode
        // holds the node at its rail until E has brought the current to
        // zero (never, for E <= 0).
        let mut t = F::ZERO;
        if j0 <= F::ZERO {
            if e <= F::ZERO {
                return Ok(short(F::ZERO, F::ZERO, 0));
            }
            t = clamp_time_s(self.l, self.r, e, j0, F::ZERO);
        }
        let mut y = State {
            v: F::ZERO,
            i: if j0 > F::ZERO { j0 } else { F::ZERO },
        };
        // The scale of the current for the overdamped stop: the start, or
        // (from rest) what E drives through the loop's impedance.
        let j_start = if y.i > F::ZERO {
            y.i
        } else {
            e * (self.cap.at(F::ZERO, vbus) * self.inv_l).sqrt()
        };
        // At zero current the node starts from rest: the first step rises.
        let mut piece = cap.piece(y.v, true);
        let mut k = sw.slope(e, &piece, y);
        let cap_step = vbus / F::from_u32(16);
        let mut steps = 0u32;
        while steps < MAX_STEPS {
            steps += 1;
            let c = cap.piece(y.v, true);
            if c != piece {
                piece = c;
                k = sw.slope(e, &piece, y);
            }
            let mut full = sw.full_step(&piece, y.v);
            // At most 1/16 of the bus per step (a large inductance would
            // otherwise cross the whole swing in one step), and at most a
            // 2 % change of the capacitance (a curve that halves within a
            // few volts).
            if k.v > F::ZERO {
                let mut du = cap_step;
                if piece.slope != F::ZERO {
                    let by_c = F::from_f64(0.02) * piece.at(y.v) / piece.slope.abs();
                    if by_c < du {
                        du = by_c;
                    }
                }
                if full * k.v > du {
                    full = du / k.v;
                }
            }
            let (h, next) = sw.advance(&cap, e, &piece, y, k, full);
            let kn = sw.slope(e, &piece, next);
            // The rail reached, or the current through zero: whichever
            // first. The node may pass the rail and come back inside one
            // step (a swing just reaching it): the interpolant at the
            // current's zero tells.
            let stop = (next.i <= F::ZERO).then(|| crossing(y.i, next.i, k.i, kn.i, h, F::ONE));
            let upto = match stop {
                Some(b) if hermite(y.v, next.v, k.v, kn.v, h, b) >= vbus => Some(b),
                _ => (next.v >= vbus).then_some(F::ONE),
            };
            let rail = upto.map(|up| crossing(vbus - y.v, vbus - next.v, -k.v, -kn.v, h, up));
            let done = first_event(rail, stop);
            if let Some((zvs, s)) = done {
                let at = derived(Quantity::Interval, t + s * h)?;
                if !zvs {
                    return Ok(short(at, hermite(y.v, next.v, k.v, kn.v, h, s), steps));
                }
                let jc = hermite(y.i, next.i, k.i, kn.i, h, s);
                let jc = if jc > F::ZERO { jc } else { F::ZERO };
                // The clamp: L*j' = E - Vbus - R*j from jc down to zero.
                let v_l = vbus - e;
                let reversal =
                    (v_l > F::ZERO).then(|| clamp_time_s(self.l, self.r, v_l, -jc, F::ZERO));
                let (close, reverses) = match reversal {
                    Some(d) if d <= self.diode => (at + d, true),
                    _ => (at + self.diode, false),
                };
                return Ok(EdgeTransition {
                    turn_on: EdgeTurnOn::Zvs(EdgeWindow {
                        open_s: at,
                        close_s: close,
                        reverses,
                    }),
                    clamp_start_current_a: jc,
                    steps,
                });
            }
            t = t + h;
            y = next;
            k = kn;
            // An overdamped loop (R above about 2*sqrt(L/C)) settles the
            // node at E short of the rail without the current ever
            // reversing: once it has decayed to a millionth of its start,
            // the node has stopped.
            if y.v < vbus && y.i < j_start * F::from_f64(1e-6) {
                return Ok(short(t, y.v, steps));
            }
            if !t.is_finite() {
                break;
            }
        }
        Err(Error::Overflow {
            quantity: Quantity::Interval,
        })
    }
}

/// What to command where an edge's swing stops short of the rail.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub enum ShortSwing {
    /// The swing's extremum, where the transition inductance rings: the
    /// least voltage across the incoming switch.
    Extremum,
    /// The minimum dead time (where the node barely moves, as with a large
    /// inductance and too little current, waiting gains nothing).
    Minimum,
}

/// A leg's dead-time generator: its step (which may be coarser than the
/// main timer's tick), its counter width, each switch's gate-driver
/// delays, and the least dead time it may command.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LegTimer<F> {
    /// The falling edge's timer: the high side turns off, the low side on.
    falling: Timer<F>,
    /// The rising edge's: the low side turns off, the high side on.
    rising: Timer<F>,
    /// The least count of each edge (falling, rising): the minimum dead
    /// time, and no turn-on of the incoming switch before the outgoing one
    /// is off, steps rounded up; within the counter (validated).
    least: [Ticks; 2],
}

/// The least count of `timer`: `min_dead_s`, and no turn-on of the
/// incoming switch before the outgoing one is off, steps rounded up (less a
/// millionth for the rounding of the product: a floor that is a whole
/// number of steps stays that number).
fn least_steps<F: Real>(timer: &Timer<F>, min_dead_s: F) -> Ticks {
    let clock = timer.clock_hz();
    let up = |x: F| (x - x.abs() * F::from_f64(1e-6)).ceil();
    let by_min = up(min_dead_s * clock);
    let by_skew = up(-timer.lead_s() * clock);
    let n = if by_min > by_skew { by_min } else { by_skew };
    Ticks::new(if n > F::ZERO {
        n.to_u32_saturating()
    } else {
        0
    })
}

/// One switch's gate-driver delays, second.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct DriverDelays<F> {
    /// From the turn-on command to the switch turning on.
    pub on_s: F,
    /// From the turn-off command to the switch turning off.
    pub off_s: F,
}

impl<F: Real> LegTimer<F> {
    /// A generator counting `step_s` second per step in a `counter_bits`
    /// counter, measured from the outgoing switch's turn-off command to the
    /// incoming switch's turn-on command, with the `high` and `low` side
    /// drivers' delays, commanding at least `min_dead_s` (the drivers' skew
    /// and a margin against shoot-through; the incoming switch also never
    /// turns on before the outgoing one is off).
    ///
    /// ```
    /// # fn main() -> Result<(), timing_core::Error> {
    /// use timing_core::coss::CossPoint;
    /// use timing_core::leg::{DriverDelays, Edge, Leg, LegPoint, LegTimer, NodeCapacitance, ShortSwing};
    /// use timing_core::WindowPosition;
    /// let coss = [CossPoint { volts: 0.0_f64, farads: 1.2e-9 }, CossPoint { volts: 40.0, farads: 0.3e-9 }];
    /// let leg = Leg::new(4.7e-6, NodeCapacitance::new(&coss, &coss, 0.0)?, 0.02, 50e-9)?;
    /// let drivers = DriverDelays { on_s: 30e-9, off_s: 25e-9 };
    /// // A dead-time unit of 2 ns steps, 8 bits.
    /// let timer = LegTimer::new(2e-9, 8, drivers, drivers, 10e-9)?;
    /// let rise = leg.edge(Edge::Rising, &LegPoint::new(48.0, -3.0, 12.0)?)?;
    /// let cmd = timer.command(Edge::Rising, &rise, WindowPosition::new(0.3)?, ShortSwing::Minimum)?;
    /// assert!(cmd.is_in_window());
    /// # Ok(()) }
    /// ```
    ///
    /// # Errors
    /// As [`Timer::new`] (the step's reciprocal is the clock);
    /// [`Error::Negative`] and friends naming [`Quantity::MinimumDeadTime`];
    /// [`Error::OutOfRange`] naming it when the floor (with the drivers'
    /// skew) does not fit the counter.
    pub fn new(
        step_s: F,
        counter_bits: u8,
        high: DriverDelays<F>,
        low: DriverDelays<F>,
        min_dead_s: F,
    ) -> Result<Self, Error> {
        let step = positive(Quantity::TimerClock, step_s)?;
        let clock = derived(Quantity::TimerClock, F::ONE / step)?;
        let falling = Timer::new(clock, counter_bits, low.on_s, high.off_s)?;
        let rising = Timer::new(clock, counter_bits, high.on_s, low.off_s)?;
        let min_dead = non_negative(Quantity::MinimumDeadTime, min_dead_s)?;
        // The floor must fit the counter (a clamped floor would undercut
        // the margin against shoot-through).
        let floor = |t: &Timer<F>| {
            let n = least_steps(t, min_dead);
            if n > t.max_ticks() {
                return Err(Error::OutOfRange {
                    quantity: Quantity::MinimumDeadTime,
                    value: min_dead.to_f64(),
                    min: 0.0,
                    max: (F::from_u32(t.max_ticks().get()) * step).to_f64(),
                });
            }
            Ok(n)
        };
        Ok(Self {
            least: [floor(&falling)?, floor(&rising)?],
            falling,
            rising,
        })
    }

    /// The timer of `edge`: the step's reciprocal as its clock, the
    /// incoming switch's turn-on delay and the outgoing one's turn-off
    /// delay.
    #[must_use]
    pub fn edge_timer(&self, edge: Edge) -> &Timer<F> {
        match edge {
            Edge::Falling => &self.falling,
            Edge::Rising => &self.rising,
        }
    }

    /// The least count of `edge`, steps: the minimum dead time, and no
    /// turn-on of the incoming switch before the outgoing one is off,
    /// rounded up.
    pub fn least(&self, edge: Edge) -> Ticks {
        match edge {
            Edge::Falling => self.least[0],
            Edge::Rising => self.least[1],
        }
    }

    /// The dead time to command for `edge` after `transition`, steps:
    /// `position` in the ZVS window (moved inside it when rounding would
    /// leave it, as the resonant cell's timer does), or per `short` where
    /// the swing stops short, and never below the least dead time (a
    /// window that opens earlier is entered later; where that is past its
    /// close, [`DelayCommand::is_in_window`] says so).
    ///
    /// # Errors
    /// As [`Timer::command_for`].
    pub fn command(
        &self,
        edge: Edge,
        transition: &EdgeTransition<F>,
        position: WindowPosition<F>,
        short: ShortSwing,
    ) -> Result<DelayCommand<F>, Error> {
        let timer = self.edge_timer(edge);
        let least = self.least(edge);
        let (turn_on, window) = match transition.turn_on {
            EdgeTurnOn::Zvs(w) => (
                TurnOn::Zvs(ZvsWindow {
                    open_s: w.open_s,
                    close_s: w.close_s,
                    ramp_end_s: w.close_s,
                }),
                Some((w.open_s, w.close_s)),
            ),
            EdgeTurnOn::Short(s) => {
                // The extremum, or the least dead time, whichever is later
                // (a node that never left its rail has its extremum at 0).
                let least_at = timer.turn_on_s(least);
                let at = match short {
                    ShortSwing::Extremum if s.extremum_s > least_at => s.extremum_s,
                    _ => least_at,
                };
                (
                    TurnOn::Valley(Valley {
                        valley_s: at,
                        valley_voltage_v: s.remaining_v,
                        ramp_end_s: at,
                    }),
                    None,
                )
            }
        };
        let placed = timer.command_for(&turn_on, position)?;
        Ok(timer.raised(placed, least, window))
    }
}
