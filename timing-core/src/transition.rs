//! The closed-form resonant transition of the ideal, lossless ZVS
//! quasi-resonant switch (half-wave: the body diode clamps the switch
//! voltage at zero). Times are measured from gate turn-off at the switch.

use crate::error::{derived, Error, Quantity};
use crate::normalized as n;
use crate::{CellPoint, Real, Tank};

/// The ZVS turn-on window: the switch may be turned on at any instant in
/// `[open_s, close_s]` with zero voltage across it.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct ZvsWindow<F> {
    /// Earliest ZVS turn-on, second from gate turn-off: the switch voltage has
    /// just swung to zero (T1 + T2).
    pub open_s: F,
    /// Latest ZVS turn-on, second from gate turn-off: the inductor current
    /// reaches zero; after it the body diode blocks and the tank rings again
    /// (T1 + T2 + T3a).
    pub close_s: F,
    /// End of the current ramp, second from gate turn-off: the inductor
    /// current is back at I and the freewheel diode turns off
    /// (T1 + T2 + T3a + T3b), wherever in the window the switch was turned on.
    pub ramp_end_s: F,
}

impl<F: Real> ZvsWindow<F> {
    /// Window width `close_s - open_s`, second (the body-diode interval T3a).
    #[must_use]
    pub fn width_s(&self) -> F {
        self.close_s - self.open_s
    }

    /// The instant at `position` in the window: `open + position*(close - open)`, second.
    #[must_use]
    pub fn at(&self, position: crate::WindowPosition<F>) -> F {
        position.between(self.open_s, self.close_s)
    }
}

/// Below the ZVS boundary (J < 1): the switch-voltage minimum of the ring,
/// the least-loss instant for a (hard) turn-on.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct Valley<F> {
    /// Time of the voltage minimum, second from gate turn-off:
    /// T1 + (3*pi/2)/w0.
    pub valley_s: F,
    /// Switch voltage at the minimum, volt: V*(1 - J).
    pub valley_voltage_v: F,
    /// End of the current ramp when turned on at the valley, second from gate
    /// turn-off: valley + J/w0 (the inductor current is zero at the valley
    /// and rises at V/Lr to I).
    pub ramp_end_s: F,
}

/// Where the switch can be turned on after this transition.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
#[cfg_attr(feature = "serde", serde(rename_all = "snake_case"))]
pub enum TurnOn<F> {
    /// J >= 1: zero-voltage turn-on inside the window.
    Zvs(ZvsWindow<F>),
    /// J < 1: ZVS impossible; the valley is the least-loss fallback.
    Valley(Valley<F>),
}

impl<F: Real> TurnOn<F> {
    /// Whether zero-voltage turn-on is possible.
    #[must_use]
    pub fn is_zvs(&self) -> bool {
        matches!(self, TurnOn::Zvs(_))
    }

    /// The ZVS window, `None` below the boundary.
    #[must_use]
    pub fn window(&self) -> Option<ZvsWindow<F>> {
        match *self {
            TurnOn::Zvs(w) => Some(w),
            TurnOn::Valley(_) => None,
        }
    }

    /// The valley, `None` when ZVS is possible.
    #[must_use]
    pub fn valley(&self) -> Option<Valley<F>> {
        match *self {
            TurnOn::Zvs(_) => None,
            TurnOn::Valley(v) => Some(v),
        }
    }

    /// End of the current ramp, second from gate turn-off, after a turn-on
    /// in the window or at the valley.
    #[must_use]
    pub fn ramp_end_s(&self) -> F {
        match *self {
            TurnOn::Zvs(w) => w.ramp_end_s,
            TurnOn::Valley(v) => v.ramp_end_s,
        }
    }

    /// The instant to aim the switch's turn-on at, second from gate
    /// turn-off: `position` in the ZVS window, or the valley below the
    /// boundary (the valley fallback policy).
    #[must_use]
    pub fn target_s(&self, position: crate::WindowPosition<F>) -> F {
        match *self {
            TurnOn::Zvs(w) => w.at(position),
            TurnOn::Valley(v) => v.valley_s,
        }
    }
}

/// One turn-off transition of the ideal cell, computed in closed form.
///
/// Accuracy: in `f64` every time is within a few ulp of the exact closed
/// form (libm `asin` and `sqrt` are within 1 ulp). In `f32` every time
/// (charge end, window open and close, valley, ramp end) is within
/// [`F32_MAX_RELATIVE_ERROR`] of the `f64` result, i.e. under 0.2 ps on a
/// 400 ns window; note that a window *width* taken as `close - open` in f32
/// loses that relative accuracy as J -> 1 (absolute error stays below
/// the bound times `close`).
///
/// ```
/// # fn main() -> Result<(), timing_core::Error> {
/// use timing_core::{CellPoint, Tank, Transition};
/// let tank = Tank::new(1.0e-6_f64, 6.8e-9)?; // 12.1 ohm, 1.93 MHz
/// let t = Transition::new(&tank, &CellPoint::new(48.0, 6.0)?)?;
/// let w = t.window().ok_or(timing_core::Error::ZvsLost { normalized_load: t.normalized_load() })?;
/// assert!(w.open_s > 370e-9 && w.open_s < 376e-9);
/// assert!(w.width_s() > 90e-9);
/// # Ok(()) }
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct Transition<F> {
    normalized_load: F,
    w0_rad_s: F,
    charge_end_s: F,
    peak_s: F,
    peak_switch_voltage_v: F,
    turn_on: TurnOn<F>,
}

/// Bound on the relative difference between any `f32` transition time and
/// the `f64` one, over J in [1e-3, 1e3] and tanks from 100 nH/220 pF to
/// 22 uH/47 nF. Measured worst case 3.3e-7 (about 3 f32 ulp), at J = 130
/// (`cargo test -p timing-core --test f32_accuracy -- --nocapture`); the test
/// fails if the bound is exceeded.
pub const F32_MAX_RELATIVE_ERROR: f64 = 5.0e-7;

impl<F: Real> Transition<F> {
    /// Compute the transition of `cell` in `tank`.
    ///
    /// # Errors
    /// [`Error::Overflow`] when a time or J does not fit the float type; the
    /// inputs are already validated by their constructors.
    pub fn new(tank: &Tank<F>, cell: &CellPoint<F>) -> Result<Self, Error> {
        let (v, i) = (cell.v_volt(), cell.i_amp());
        let w0 = tank.w0_rad_s();
        let j = derived(Quantity::NormalizedLoad, tank.normalized_load(cell))?;
        let time = |angle: F| derived(Quantity::Interval, angle / w0);
        let charge_end_s = derived(Quantity::Interval, tank.cr_f() * v / i)?;
        let peak_s = charge_end_s + time(F::FRAC_PI_2)?;
        let peak_switch_voltage_v = derived(Quantity::CellVoltage, v * n::peak_voltage_ratio(j))?;
        let turn_on = if j >= F::ONE {
            let open_s = charge_end_s + time(n::ring_angle(j))?;
            // sqrt(J^2 - 1) is exactly 0 at J = 1: the window closes to a point.
            let close_s = open_s + angle_to_time(n::clamp_angle(j), w0)?;
            let ramp_end_s = close_s + time(n::ramp_angle(j))?;
            TurnOn::Zvs(ZvsWindow {
                open_s,
                close_s,
                ramp_end_s,
            })
        } else {
            let valley_s = charge_end_s + time(n::valley_ring_angle())?;
            TurnOn::Valley(Valley {
                valley_s,
                valley_voltage_v: v * (F::ONE - j),
                ramp_end_s: valley_s + time(n::ramp_angle(j))?,
            })
        };
        Ok(Self {
            normalized_load: j,
            w0_rad_s: w0,
            charge_end_s,
            peak_s,
            peak_switch_voltage_v,
            turn_on,
        })
    }

    /// Normalised load J = I*Z0/V (dimensionless); ZVS needs J >= 1.
    #[must_use]
    pub fn normalized_load(&self) -> F {
        self.normalized_load
    }

    /// Resonant angular frequency w0 of the tank, rad/s.
    #[must_use]
    pub fn w0_rad_s(&self) -> F {
        self.w0_rad_s
    }

    /// Whether zero-voltage turn-on is possible (J >= 1).
    #[must_use]
    pub fn is_zvs(&self) -> bool {
        self.turn_on.is_zvs()
    }

    /// End of the linear charge T1 = Cr*V/I, second from gate turn-off: the
    /// switch voltage reaches V and the freewheel diode starts to conduct.
    #[must_use]
    pub fn charge_end_s(&self) -> F {
        self.charge_end_s
    }

    /// Time of the peak switch voltage, second from gate turn-off: T1 + (pi/2)/w0.
    #[must_use]
    pub fn peak_s(&self) -> F {
        self.peak_s
    }

    /// Peak switch voltage V*(1 + J), volt: the voltage stress of the switch.
    #[must_use]
    pub fn peak_switch_voltage_v(&self) -> F {
        self.peak_switch_voltage_v
    }

    /// The ZVS window or, below the boundary, the valley.
    #[must_use]
    pub fn turn_on(&self) -> TurnOn<F> {
        self.turn_on
    }

    /// The ZVS window, `None` when J < 1.
    #[must_use]
    pub fn window(&self) -> Option<ZvsWindow<F>> {
        self.turn_on.window()
    }

    /// The valley, `None` when ZVS is possible.
    #[must_use]
    pub fn valley(&self) -> Option<Valley<F>> {
        self.turn_on.valley()
    }

    /// End of the current ramp (freewheel diode turns off), second from gate
    /// turn-off, for a turn-on inside the window or, below the boundary, at
    /// the valley.
    #[must_use]
    pub fn ramp_end_s(&self) -> F {
        self.turn_on.ramp_end_s()
    }

    /// The instant to aim the switch's turn-on at, second from gate turn-off:
    /// `position` in the ZVS window, or the valley below the boundary (the
    /// valley fallback policy).
    #[must_use]
    pub fn turn_on_target_s(&self, position: crate::WindowPosition<F>) -> F {
        self.turn_on.target_s(position)
    }
}

/// An angle that may be exactly zero (the window width at J = 1) as a time.
fn angle_to_time<F: Real>(angle: F, w0: F) -> Result<F, Error> {
    if angle == F::ZERO {
        Ok(F::ZERO)
    } else {
        derived(Quantity::Interval, angle / w0)
    }
}
