//! serde integration: inputs deserialise through their validating
//! constructors, so a deserialised `Tank`, `CellPoint`, `Timer` or
//! `WindowPosition` is as valid as a constructed one.

use serde::Deserialize;

use crate::{CellPoint, Error, Real, Tank, Timer, WindowPosition};

/// Raw fields of a [`Tank`] before validation.
#[derive(Deserialize)]
pub struct TankParams<F> {
    lr: F,
    cr: F,
}

impl<F: Real> TryFrom<TankParams<F>> for Tank<F> {
    type Error = Error;
    fn try_from(p: TankParams<F>) -> Result<Self, Error> {
        Tank::new(p.lr, p.cr)
    }
}

/// Raw fields of a [`CellPoint`] before validation.
#[derive(Deserialize)]
pub struct CellParams<F> {
    v: F,
    i: F,
}

impl<F: Real> TryFrom<CellParams<F>> for CellPoint<F> {
    type Error = Error;
    fn try_from(p: CellParams<F>) -> Result<Self, Error> {
        CellPoint::new(p.v, p.i)
    }
}

/// Raw fields of a [`Timer`] before validation.
#[derive(Deserialize)]
pub struct TimerParams<F> {
    clock_hz: F,
    counter_bits: u8,
    turn_on_delay_s: F,
    turn_off_delay_s: F,
}

impl<F: Real> TryFrom<TimerParams<F>> for Timer<F> {
    type Error = Error;
    fn try_from(p: TimerParams<F>) -> Result<Self, Error> {
        Timer::new(
            p.clock_hz,
            p.counter_bits,
            p.turn_on_delay_s,
            p.turn_off_delay_s,
        )
    }
}

/// A bare number before validation (for [`WindowPosition`]).
#[derive(Deserialize)]
#[serde(transparent)]
pub struct Scalar<F>(F);

impl<F: Real> TryFrom<Scalar<F>> for WindowPosition<F> {
    type Error = Error;
    fn try_from(p: Scalar<F>) -> Result<Self, Error> {
        WindowPosition::new(p.0)
    }
}
