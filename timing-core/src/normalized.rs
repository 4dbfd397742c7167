//! The transition in normalised form: every interval, multiplied by the
//! resonant angular frequency w0, is a function of the normalised load
//! J = I*Z0/V alone (DESIGN.md section 2). One curve per boundary serves
//! every tank and operating point; tables are built on these.
//!
//! All functions return angles in radians (w0 times a time). They take
//! `j` as given and do not validate it: callers pass J > 0 (and J >= 1 where
//! noted), as [`Transition`](crate::Transition) does.

use crate::Real;

/// w0*T1 = 1/J: linear charge of Cr by the constant cell current, from gate
/// turn-off until the switch voltage reaches V.
#[inline]
#[must_use]
pub fn charge_angle<F: Real>(j: F) -> F {
    F::ONE / j
}

/// w0*T2 = pi + asin(1/J), J >= 1: the Lr-Cr ring from the end of the
/// linear charge until the switch voltage swings back to zero.
#[inline]
#[must_use]
pub fn ring_angle<F: Real>(j: F) -> F {
    F::PI + (F::ONE / j).asin()
}

/// w0*T3a = sqrt(J^2 - 1), J >= 1: body-diode conduction, from the switch
/// voltage reaching zero until the inductor current reaches zero. This is the
/// width of the ZVS window. Written as sqrt((J-1)(J+1)) so it stays accurate
/// as J -> 1+ (no cancellation in J^2 - 1).
#[inline]
#[must_use]
pub fn clamp_angle<F: Real>(j: F) -> F {
    ((j - F::ONE) * (j + F::ONE)).sqrt()
}

/// w0*T3b = J: the inductor current ramps from zero to I at V/Lr with the
/// switch on, then the freewheel diode turns off.
#[inline]
#[must_use]
pub fn ramp_angle<F: Real>(j: F) -> F {
    j
}

/// w0*(window open) = 1/J + pi + asin(1/J), J >= 1: gate turn-off to the
/// switch voltage reaching zero.
#[inline]
#[must_use]
pub fn window_open_angle<F: Real>(j: F) -> F {
    charge_angle(j) + ring_angle(j)
}

/// w0*(window close) = 1/J + pi + asin(1/J) + sqrt(J^2 - 1), J >= 1: gate
/// turn-off to the inductor current reaching zero.
#[inline]
#[must_use]
pub fn window_close_angle<F: Real>(j: F) -> F {
    window_open_angle(j) + clamp_angle(j)
}

/// w0*(t - T1) = 3*pi/2 at the valley of the switch voltage when J < 1
/// (the ring never reaches zero; its minimum is V*(1 - J)).
#[inline]
#[must_use]
pub fn valley_ring_angle<F: Real>() -> F {
    F::PI + F::FRAC_PI_2
}

/// Peak switch voltage over the cell voltage: 1 + J, reached when the
/// inductor current crosses zero, w0*(t - T1) = pi/2.
#[inline]
#[must_use]
pub fn peak_voltage_ratio<F: Real>(j: F) -> F {
    F::ONE + j
}

/// w0 times the turn-on target from gate turn-off, for the valley fallback
/// policy: `position` (0..=1) in the ZVS window when J >= 1, else the
/// valley. The same instant as
/// [`Transition::turn_on_target_s`](crate::Transition::turn_on_target_s)
/// times w0.
#[inline]
#[must_use]
pub fn turn_on_angle<F: Real>(j: F, position: F) -> F {
    if j >= F::ONE {
        window_open_angle(j) + position * clamp_angle(j)
    } else {
        charge_angle(j) + valley_ring_angle()
    }
}
