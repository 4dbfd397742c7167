//! The turn-off transition of a real cell, solved numerically: the
//! capacitance across the switch depends on the voltage (a fixed capacitor
//! plus the MOSFET's Coss curve, [`SwitchCapacitance`]) and the resonant
//! loop has a series resistance R. No closed form exists; the ring is
//! integrated in time with events for its mode changes.
//!
//! The circuit equations (switch voltage vC, Lr current i; cell voltage V,
//! current I; t = 0 at gate turn-off):
//! - linear charge, freewheel diode off, i = I: C(vC)*vC' = I until the
//!   diode node reaches zero, at vC = V - R*I, so T1 = Q(V - R*I)/I exactly;
//! - ring, diode on: C(vC)*vC' = i, Lr*i' = V - vC - R*i; the current first
//!   falls through zero at the voltage peak, then either vC reaches 0 (ZVS:
//!   the window opens) or the current rises back through zero with vC > 0
//!   (no ZVS: that instant is the valley, the voltage minimum);
//! - body diode on, vC = 0: Lr*i' = V - R*i, from the current i0 < 0 at the
//!   window's opening to 0 at its close: T3a = (Lr/R)*ln(1 + R*|i0|/V)
//!   (Lr*|i0|/V for R = 0); after a turn-on, the same equation takes i from
//!   0 to I: T3b = -(Lr/R)*ln(1 - R*I/V).
//!
//! Integration (`swing.rs`, shared with the half-bridge leg):
//! classical fourth-order Runge-Kutta with a step of
//! [`STEP_ANGLE`] radian of the local resonance, h = 0.05*sqrt(Lr*C(vC))
//! (and at most 0.05*Lr/R), about 80 steps per transition; events are
//! located on the cubic Hermite interpolant of each step, and steps end on
//! the Coss curve's points (where its slope jumps). Measured in f64
//! (`cargo test -p timing-core --test ring -- --nocapture`): constant
//! capacitance without loss, every time within 7.7e-8 relative of the
//! closed forms; with loss, within 5.9e-8 of the damped RLC solution; on a
//! non-linear curve, the energy balance at the peak within 2.5e-7 and the
//! window width within 5e-5 of itself (10 ps of 200 ns, at J near 4).
//! Against an adaptive Dormand-Prince solver (`cargo test -p cross-checks
//! --test ring_ode -- --nocapture`): within 7 ps with a fixed capacitor
//! beside the curve; a bare curve whose capacitance changes fourfold within
//! a few volts of zero opens the window up to 47 ps (5.9e-4) early, as the
//! steps follow the local resonance rather than how fast C changes there.
//! Against ngspice see the netlist cross-check.

use crate::coss::SwitchCapacitance;
use crate::error::{derived, non_negative, positive, Error, Quantity};
use crate::swing::{crossing, first_event, hermite, Capacitance, Loop, State};
use crate::transition::{TurnOn, Valley, ZvsWindow};
use crate::{CellPoint, Real, Tank};

pub use crate::swing::STEP_ANGLE;

/// Most integration steps of one transition before it is refused as not
/// settling (a ring that loses almost nothing per cycle never returns to
/// zero current before this only at absurd quality factors).
pub const MAX_STEPS: u32 = 200_000;

/// Time for the Lr current of a cell with `lr_h` henry and loop resistance
/// `r_ohm` to go from `from` to `to` ampere (`from` < `to` <= 0 or
/// 0 <= `from` < `to`) with the switch voltage clamped at zero and the cell
/// voltage `v_cell` volt across the loop: `Lr*i' = V - R*i`, so
/// `(Lr/R)*ln((V - R*from)/(V - R*to))` (`Lr*(to - from)/V` lossless),
/// second. The body-diode interval and the current ramp after a turn-on.
#[must_use]
pub fn clamp_time_s<F: Real>(lr_h: F, r_ohm: F, v_cell: F, from: F, to: F) -> F {
    if r_ohm > F::ZERO {
        // (Lr/R)*ln((V - R*from)/(V - R*to)) = (Lr/R)*ln(1 + R*(to - from)/(V - R*to))
        lr_h / r_ohm * (r_ohm * (to - from) / (v_cell - r_ohm * to)).ln_1p()
    } else {
        lr_h * (to - from) / v_cell
    }
}

/// A validated real cell: Lr, the switch capacitance and the loop resistance.
///
/// ```
/// # fn main() -> Result<(), timing_core::Error> {
/// use timing_core::coss::{CossPoint, SwitchCapacitance};
/// use timing_core::ring::RingCell;
/// use timing_core::CellPoint;
/// let curve = [
///     CossPoint { volts: 0.0_f64, farads: 2.4e-9 },
///     CossPoint { volts: 25.0, farads: 0.7e-9 },
///     CossPoint { volts: 100.0, farads: 0.4e-9 },
/// ];
/// let cell = RingCell::new(1.0e-6, SwitchCapacitance::new(5.6e-9, &curve)?, 0.05)?;
/// let t = cell.transition(&CellPoint::new(48.0, 6.0)?)?;
/// let w = t.turn_on().window().ok_or(timing_core::Error::Overflow {
///     quantity: timing_core::Quantity::Interval,
/// })?;
/// assert!(w.open_s > 300e-9 && w.close_s > w.open_s);
/// # Ok(()) }
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RingCell<'a, F> {
    lr: F,
    inv_lr: F,
    cap: SwitchCapacitance<'a, F>,
    r: F,
}

/// One turn-off transition of a [`RingCell`].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct RingTransition<F> {
    /// End of the linear charge, second from gate turn-off.
    pub charge_end_s: F,
    /// Time of the peak switch voltage, second from gate turn-off.
    pub peak_s: F,
    /// Peak switch voltage, volt.
    pub peak_switch_voltage_v: F,
    /// The ZVS window (times in the same sense as the ideal cell's), or the
    /// valley: the instant of the voltage minimum and that voltage.
    pub turn_on: TurnOn<F>,
    /// Lr current when the window opens, ampere (negative; 0 below the
    /// boundary): where the body-diode clamp starts.
    pub clamp_start_current_a: F,
    /// Integration steps taken.
    pub steps: u32,
}

impl<F: Real> RingTransition<F> {
    /// The ZVS window or the valley.
    #[must_use]
    pub fn turn_on(&self) -> TurnOn<F> {
        self.turn_on
    }
}

/// Switch voltage at the end of the linear charge: V - R*I, volt.
fn v1_of<F: Real>(v: F, r: F, i: F) -> F {
    v - r * i
}

impl<'a, F: Real> RingCell<'a, F> {
    /// A cell of `lr_h` henry, capacitance `cap` and loop resistance
    /// `r_tank_ohm` (0 for lossless).
    ///
    /// # Errors
    /// [`Error::NotPositive`] and friends naming
    /// [`Quantity::ResonantInductance`]; [`Error::Negative`] or
    /// [`Error::NotFinite`] naming [`Quantity::TankResistance`].
    pub fn new(lr_h: F, cap: SwitchCapacitance<'a, F>, r_tank_ohm: F) -> Result<Self, Error> {
        let lr = positive(Quantity::ResonantInductance, lr_h)?;
        Ok(Self {
            lr,
            inv_lr: derived(Quantity::ResonantInductance, F::ONE / lr)?,
            cap,
            r: non_negative(Quantity::TankResistance, r_tank_ohm)?,
        })
    }

    /// Resonant inductance, henry.
    #[must_use]
    pub fn lr_h(&self) -> F {
        self.lr
    }

    /// The capacitance across the switch.
    #[must_use]
    pub fn capacitance(&self) -> SwitchCapacitance<'a, F> {
        self.cap
    }

    /// Series resistance of the resonant loop, ohm.
    #[must_use]
    pub fn r_tank_ohm(&self) -> F {
        self.r
    }

    /// The ideal tank with the boundary-equivalent capacitance at cell
    /// voltage `v` (volt): the constant-capacitance cell with the same
    /// lossless ZVS boundary at that voltage.
    ///
    /// # Errors
    /// As [`Tank::new`].
    pub fn boundary_tank(&self, v: F) -> Result<Tank<F>, Error> {
        Tank::new(self.lr, self.cap.boundary_equivalent(v))
    }

    /// The ring's loop for the shared integrator.
    fn swing(&self) -> Loop<F> {
        Loop {
            l: self.lr,
            inv_l: self.inv_lr,
            r: self.r,
        }
    }

    /// Time for the Lr current to go from `from` to `to` (A, `from` < `to`
    /// <= 0 or 0 <= `from` < `to`) with the switch voltage clamped at zero:
    /// Lr*i' = V - R*i, second.
    fn clamp_time(&self, v_cell: F, from: F, to: F) -> F {
        clamp_time_s(self.lr, self.r, v_cell, from, to)
    }

    /// The transition at `cell`.
    ///
    /// Accuracy: see the module documentation (about 1e-7 relative in f64;
    /// the f32 target within 1e-6 of the f64 one).
    ///
    /// # Errors
    /// [`Error::OutOfRange`] naming [`Quantity::TankResistance`] when
    /// R*I >= V (the loop drops the whole cell voltage: the freewheel diode
    /// never turns on); [`Error::Overflow`] naming [`Quantity::Interval`]
    /// when a time does not fit the float type or the ring does not settle
    /// within [`MAX_STEPS`].
    pub fn transition(&self, cell: &CellPoint<F>) -> Result<RingTransition<F>, Error> {
        self.run(cell, None)
    }

    /// [`RingCell::transition`], calling `visit(t, switch voltage, Lr
    /// current)` at the start of the ring and after every integration step
    /// up to the window's opening or the valley (for plots of the waveform;
    /// steps are 1/20 of a radian of the ring, so straight lines between the
    /// points draw it smoothly).
    ///
    /// # Errors
    /// As [`RingCell::transition`].
    pub fn trace(
        &self,
        cell: &CellPoint<F>,
        visit: &mut dyn FnMut(F, F, F),
    ) -> Result<RingTransition<F>, Error> {
        self.run(cell, Some(visit))
    }

    /// [`RingCell::transition`] and the instant the switch voltage first
    /// falls to `threshold_v` volt or below on its way down to the opening,
    /// second from gate turn-off: what a comparator on the switch node
    /// sees (its own delay not included). Straight lines between the
    /// ring's steps (1/20 of a radian apart), and from the last whole step
    /// straight to zero at the opening; `None` where the voltage does not
    /// fall that far before the opening or the valley. Accuracy: within
    /// 0.21 ns of an adaptive ODE solver's crossing of 2 V on a Coss curve
    /// that changes fourfold within a few volts of zero (1.5 uH, ring
    /// periods near 0.5 us; tests/ring_ode.rs).
    ///
    /// ```
    /// # fn main() -> Result<(), timing_core::Error> {
    /// use timing_core::coss::SwitchCapacitance;
    /// use timing_core::ring::RingCell;
    /// use timing_core::CellPoint;
    /// let ring = RingCell::new(1.0e-6, SwitchCapacitance::new(6.8e-9, &[])?, 0.05)?;
    /// let cell = CellPoint::new(48.0, 6.0)?;
    /// let (t, at_2v) = ring.threshold_crossing(&cell, 2.0)?;
    /// let open = t.turn_on.window().map(|w| w.open_s);
    /// // A 2 V comparator trips shortly before the switch reaches zero.
    /// assert!(matches!((at_2v, open), (Some(c), Some(o)) if c < o && o - c < 10.0e-9));
    /// # Ok(()) }
    /// ```
    ///
    /// # Errors
    /// As [`RingCell::transition`].
    pub fn threshold_crossing(
        &self,
        cell: &CellPoint<F>,
        threshold_v: F,
    ) -> Result<(RingTransition<F>, Option<F>), Error> {
        let mut last: Option<(F, F)> = None;
        let mut crossing = None;
        let t = self.trace(cell, &mut |t, v, _| {
            if crossing.is_none() {
                if let Some((t0, v0)) = last {
                    if v0 > threshold_v && v <= threshold_v {
                        crossing = Some(t0 + (v0 - threshold_v) / (v0 - v) * (t - t0));
                    }
                }
            }
            last = Some((t, v));
        })?;
        // The trace stops at its last whole step before the opening: a
        // crossing in the final part lies between it and the zero (with a
        // threshold of 0, the opening itself).
        if let (None, Some(w), Some((t0, v0))) = (crossing, t.turn_on.window(), last) {
            if v0 >= threshold_v && v0 > F::ZERO {
                crossing = Some(t0 + (v0 - threshold_v) / v0 * (w.open_s - t0));
            }
        }
        Ok((t, crossing))
    }

    fn run(
        &self,
        cell: &CellPoint<F>,
        mut visit: Option<&mut dyn FnMut(F, F, F)>,
    ) -> Result<RingTransition<F>, Error> {
        let (vc, ic) = (cell.v_volt(), cell.i_amp());
        let v1 = v1_of(vc, self.r, ic);
        if v1 <= F::ZERO {
            return Err(Error::OutOfRange {
                quantity: Quantity::TankResistance,
                value: self.r.to_f64(),
                min: 0.0,
                max: (vc / ic).to_f64(),
            });
        }
        let charge_end_s = derived(Quantity::Interval, self.cap.charge(v1) / ic)?;
        let ramp = self.clamp_time(vc, F::ZERO, ic);
        let mut t = charge_end_s;
        let mut y = State { v: v1, i: ic };
        // The piece of C(v) the step runs on (the voltage rises while the
        // current is positive); steps end on the curve's points, so a step
        // stays on one piece up to a rounding-size overshoot.
        let sw = self.swing();
        let mut piece = self.cap.piece(y.v, true);
        let mut k = sw.slope(vc, &piece, y);
        let mut peak: Option<(F, F)> = None;
        let mut steps = 0u32;
        if let Some(f) = visit.as_mut() {
            f(t, y.v, y.i);
        }
        while steps < MAX_STEPS {
            steps += 1;
            let c = self.cap.piece(y.v, y.i > F::ZERO);
            if c != piece {
                piece = c;
                k = sw.slope(vc, &piece, y);
            }
            let full = sw.full_step(&piece, y.v);
            let (h, next) = sw.advance(&self.cap, vc, &piece, y, k, full);
            let kn = sw.slope(vc, &piece, next);
            match peak {
                None => {
                    if next.i <= F::ZERO {
                        let s = crossing(y.i, next.i, k.i, kn.i, h, F::ONE);
                        let pv = hermite(y.v, next.v, k.v, kn.v, h, s);
                        peak = Some((t + s * h, pv));
                    }
                }
                Some((peak_s, peak_v)) => {
                    // Falling: the voltage reaching zero (ZVS) or the current
                    // rising back through zero (the valley), whichever first.
                    let valley = (next.i >= F::ZERO)
                        .then(|| crossing(-y.i, -next.i, -k.i, -kn.i, h, F::ONE));
                    // The voltage may dip below zero and come back inside one
                    // step (a ring just above the boundary): the interpolant
                    // at the current's zero tells.
                    let upto = match valley {
                        Some(b) if hermite(y.v, next.v, k.v, kn.v, h, b) <= F::ZERO => Some(b),
                        _ => (next.v <= F::ZERO).then_some(F::ONE),
                    };
                    let zvs = upto.map(|u| crossing(y.v, next.v, k.v, kn.v, h, u));
                    let done = first_event(zvs, valley);
                    if let Some((is_zvs, s)) = done {
                        let at = t + s * h;
                        let mut clamp_start = F::ZERO;
                        let turn_on = if is_zvs {
                            let i0 = hermite(y.i, next.i, k.i, kn.i, h, s);
                            let i0 = if i0 < F::ZERO { i0 } else { F::ZERO };
                            clamp_start = i0;
                            let close_s = at + self.clamp_time(vc, i0, F::ZERO);
                            TurnOn::Zvs(ZvsWindow {
                                open_s: derived(Quantity::Interval, at)?,
                                close_s,
                                ramp_end_s: close_s + ramp,
                            })
                        } else {
                            let vm = hermite(y.v, next.v, k.v, kn.v, h, s);
                            TurnOn::Valley(Valley {
                                valley_s: derived(Quantity::Interval, at)?,
                                valley_voltage_v: if vm > F::ZERO { vm } else { F::ZERO },
                                ramp_end_s: at + ramp,
                            })
                        };
                        return Ok(RingTransition {
                            charge_end_s,
                            peak_s,
                            peak_switch_voltage_v: peak_v,
                            turn_on,
                            clamp_start_current_a: clamp_start,
                            steps,
                        });
                    }
                }
            }
            t = t + h;
            y = next;
            k = kn;
            if let Some(f) = visit.as_mut() {
                f(t, y.v, y.i);
            }
            if !t.is_finite() {
                break;
            }
        }
        Err(Error::Overflow {
            quantity: Quantity::Interval,
        })
    }

    /// The waveform of one transition with the switch turned on at
    /// `turn_on_s` (second from gate turn-off), sampled at `times` (second,
    /// rising) into `out` (as many as both hold): the linear charge (the
    /// voltage from the charge, Q(v) = I*t), the ring (straight lines
    /// between integration steps, 1/20 radian apart), the body-diode clamp,
    /// and after the turn-on the current ramp to I at zero volts (a turn-on
    /// before the window drops the voltage to zero at once: hard switching).
    /// Where the model does not follow the circuit (the switch still off
    /// after the window closed or the valley passed: the tank rings again),
    /// voltage and current are NaN.
    ///
    /// # Errors
    /// As [`RingCell::transition`].
    pub fn waveform(
        &self,
        cell: &CellPoint<F>,
        turn_on_s: F,
        times: &[F],
        out: &mut [crate::waveform::WaveSample<F>],
    ) -> Result<RingTransition<F>, Error> {
        use crate::waveform::WaveSample;
        let (vc, ic) = (cell.v_volt(), cell.i_amp());
        let nan = F::from_f64(f64::NAN);
        // The ring from the trace: samples inside it, and the state at the
        // turn-on if it falls inside it.
        let mut ring: Option<(F, F)> = None;
        let mut at_on: Option<F> = None;
        let mut last: Option<(F, F, F)> = None;
        let mut k = 0usize;
        let rt = {
            let mut visit = |t: F, v: F, i: F| {
                if let Some((t0, v0, i0)) = last {
                    let lerp = |tq: F| {
                        let f = if t > t0 { (tq - t0) / (t - t0) } else { F::ONE };
                        (v0 + (v - v0) * f, i0 + (i - i0) * f)
                    };
                    while let (Some(&tq), Some(slot)) = (times.get(k), out.get_mut(k)) {
                        if tq > t {
                            break;
                        }
                        if tq >= t0 {
                            let (vq, iq) = lerp(tq);
                            *slot = WaveSample {
                                switch_voltage_v: vq,
                                inductor_current_a: iq,
                                gate_on: false,
                            };
                        }
                        k += 1;
                    }
                    if turn_on_s > t0 && turn_on_s <= t {
                        at_on = Some(lerp(turn_on_s).1);
                    }
                } else {
                    // Samples before the ring are filled below.
                    while let Some(&tq) = times.get(k) {
                        if tq >= t {
                            break;
                        }
                        k += 1;
                    }
                }
                ring = Some(ring.map_or((t, t), |(a, _)| (a, t)));
                last = Some((t, v, i));
            };
            self.trace(cell, &mut visit)?
        };
        let (ring_start, ring_end) = ring.unwrap_or((rt.charge_end_s, rt.charge_end_s));
        // Lr*i' = V - R*i at zero switch voltage, from i0 for dt.
        let clamp = |i0: F, dt: F| {
            if self.r > F::ZERO {
                let a = vc / self.r;
                a - (a - i0) * (-(self.r * dt / self.lr)).exp()
            } else {
                i0 + vc * dt / self.lr
            }
        };
        let window = rt.turn_on.window();
        // The switch-off state after the last ring step: straight on to the
        // event (the window's opening or the valley), then the clamp.
        let (t_last, v_last, i_last) = last.unwrap_or((ring_end, v1_of(vc, self.r, ic), ic));
        let toward = |t: F, te: F, ve: F, ie: F| {
            let f = if te > t_last {
                (t - t_last) / (te - t_last)
            } else {
                F::ONE
            };
            (v_last + (ve - v_last) * f, i_last + (ie - i_last) * f)
        };
        let after_ring = |t: F| -> (F, F) {
            match rt.turn_on {
                TurnOn::Zvs(w) if t < w.open_s => {
                    toward(t, w.open_s, F::ZERO, rt.clamp_start_current_a)
                }
                TurnOn::Zvs(w) if t <= w.close_s => {
                    (F::ZERO, clamp(rt.clamp_start_current_a, t - w.open_s))
                }
                TurnOn::Valley(vl) if t <= vl.valley_s => {
                    toward(t, vl.valley_s, vl.valley_voltage_v, F::ZERO)
                }
                _ => (nan, nan),
            }
        };
        let i_on = if turn_on_s < ring_start {
            Some(ic)
        } else if turn_on_s <= ring_end {
            at_on
        } else {
            Some(after_ring(turn_on_s).1).filter(|i| i.is_finite())
        };
        let v1 = v1_of(vc, self.r, ic);
        let n = if times.len() < out.len() {
            times.len()
        } else {
            out.len()
        };
        let _ = window;
        for (q, slot) in times.iter().zip(out.iter_mut()).take(n) {
            let t = *q;
            let gate_on = t < F::ZERO || t >= turn_on_s;
            let (v, i) = if t < F::ZERO {
                (F::ZERO, ic)
            } else if gate_on {
                match i_on {
                    Some(i0) => {
                        let i = clamp(i0, t - turn_on_s);
                        (F::ZERO, if i < ic { i } else { ic })
                    }
                    None => (nan, nan),
                }
            } else if t < ring_start {
                // Linear charge: Q(v) = I*t, by bisection.
                let q = ic * t;
                let (mut lo, mut hi) = (F::ZERO, v1);
                for _ in 0..48 {
                    let m = (lo + hi) * F::HALF;
                    if self.cap.charge(m) < q {
                        lo = m;
                    } else {
                        hi = m;
                    }
                }
                ((lo + hi) * F::HALF, ic)
            } else if t <= ring_end {
                (slot.switch_voltage_v, slot.inductor_current_a)
            } else {
                after_ring(t)
            };
            *slot = WaveSample {
                switch_voltage_v: v,
                inductor_current_a: i,
                gate_on,
            };
        }
        Ok(rt)
    }

    /// The ring left to itself after the transition's event, the gate kept
    /// off (a single-pulse test): from switch voltage `v0` (volt) and Lr
    /// current `i0` (ampere) at `t0_s` (second from gate turn-off), the
    /// same equations as the ring, C(vC)*vC' = i, Lr*i' = V - vC - R*i,
    /// integrated with the same steps, calling `visit(t, vC, i)` after
    /// each step until `t_end_s`. After the window closes the ring starts
    /// from (0 V, 0 A); after the valley from (valley voltage, 0 A).
    ///
    /// Returns the time it stopped: `t_end_s`, or earlier where the ring
    /// leaves the circuit state these equations hold for (the voltage
    /// below zero: the body diode would clamp; the current above the cell
    /// current: the freewheel diode would turn off). Accuracy: as the ring
    /// of [`RingCell::transition`] (steps of [`STEP_ANGLE`], ending on the
    /// curve's points to first order).
    ///
    /// # Errors
    /// [`Error::Overflow`] naming [`Quantity::Interval`] when more than
    /// [`MAX_STEPS`] steps would be needed.
    pub fn free_ring(
        &self,
        cell: &CellPoint<F>,
        (t0_s, v0, i0): (F, F, F),
        t_end_s: F,
        visit: &mut dyn FnMut(F, F, F),
    ) -> Result<F, Error> {
        let (vc, ic) = (cell.v_volt(), cell.i_amp());
        let sw = self.swing();
        let mut t = t0_s;
        let mut y = State { v: v0, i: i0 };
        visit(t, y.v, y.i);
        let mut steps = 0u32;
        while t < t_end_s {
            if steps >= MAX_STEPS {
                return Err(Error::Overflow {
                    quantity: Quantity::Interval,
                });
            }
            steps += 1;
            // Rising on the current's sign; at zero current, on where the
            // voltage heads (below the centre it rises).
            let rising = y.i > F::ZERO || (y.i == F::ZERO && y.v < vc);
            let piece = Capacitance::piece(&self.cap, y.v, rising);
            let k = sw.slope(vc, &piece, y);
            let full = sw.full_step(&piece, y.v);
            let (h, _) = sw.step_to_point(&self.cap, y, k, full);
            let h = if h > F::ZERO { h } else { full };
            let next = sw.rk4(vc, &piece, y, k, h);
            t = t + h;
            y = next;
            if !(y.v >= F::ZERO && y.i <= ic && t.is_finite()) {
                return Ok(t - h);
            }
            visit(t, y.v, y.i);
        }
        Ok(t)
    }

    /// Smallest cell current with ZVS at cell voltage `v` (volt), ampere.
    /// Lossless: the energy balance 1/2*Lr*I^2 = V*Q(V) - E(V), exact. With
    /// R > 0: bisection on [`RingCell::transition`] to 1e-6 relative (each
    /// step integrates one transition).
    ///
    /// # Errors
    /// [`Error::NotPositive`] naming [`Quantity::CellVoltage`];
    /// [`Error::Overflow`] naming [`Quantity::CellCurrent`] when no current
    /// below V/R reaches ZVS (the loop loses more than the ring can give).
    pub fn boundary_current_a(&self, v: F) -> Result<F, Error> {
        let v = positive(Quantity::CellVoltage, v)?;
        let (q, e) = (self.cap.charge(v), self.cap.energy(v));
        let lossless = derived(
            Quantity::CellCurrent,
            (F::TWO * (v * q - e) / self.lr).sqrt(),
        )?;
        if self.r == F::ZERO {
            return Ok(lossless);
        }
        let zvs = |i: F| {
            CellPoint::new(v, i)
                .and_then(|c| self.transition(&c))
                .map(|t| t.turn_on.is_zvs())
        };
        let limit = v / self.r;
        // The lossless current is the start; the resistance in the linear
        // charge gives the ring a small head start, so look below it too.
        let mut lo = lossless;
        let mut halvings = 0;
        while zvs(lo)? {
            lo = lo * F::HALF;
            halvings += 1;
            if halvings > 60 {
                return Ok(lo);
            }
        }
        let mut hi = lo;
        loop {
            hi = hi * F::TWO;
            if hi >= limit {
                hi = limit * F::from_f64(0.999_999);
                if !zvs(hi)? {
                    return Err(Error::Overflow {
                        quantity: Quantity::CellCurrent,
                    });
                }
                break;
            }
            if zvs(hi)? {
                break;
            }
            lo = hi;
        }
        let tol = F::from_f64(1e-6);
        while hi - lo > tol * hi {
            let mid = (lo + hi) * F::HALF;
            if zvs(mid)? {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        Ok(hi)
    }
}
