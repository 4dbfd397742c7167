//! From a turn-on target to an integer timer delay: gate-driver propagation
//! delays and timer quantisation.
//!
//! Timing convention: the timer counts from the turn-off *command*. The gate
//! actually turns off `turn_off_delay` later (t = 0 of the transition), and a
//! turn-on command takes effect at the switch `turn_on_delay` after it is
//! issued. A delay of `n` ticks therefore turns the switch on at
//! `n/clock - turn_off_delay + turn_on_delay` after gate turn-off.

use crate::error::{non_negative, positive, Error, Quantity};
use crate::{Real, Transition};

/// A count of timer ticks (the unit of a compare register).
#[repr(transparent)]
#[must_use]
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(transparent))]
pub struct Ticks(u32);

impl Ticks {
    /// Zero ticks.
    pub const ZERO: Self = Self(0);

    /// Wrap a raw count.
    pub const fn new(ticks: u32) -> Self {
        Self(ticks)
    }

    /// The raw count.
    #[must_use]
    pub const fn get(self) -> u32 {
        self.0
    }

    /// Add, saturating at `u32::MAX`, never wrapping.
    pub const fn saturating_add(self, other: Ticks) -> Self {
        Self(self.0.saturating_add(other.0))
    }

    /// Subtract, saturating at zero, never wrapping.
    pub const fn saturating_sub(self, other: Ticks) -> Self {
        Self(self.0.saturating_sub(other.0))
    }
}

/// A position inside the ZVS window: 0 aims at the earliest instant (switch
/// voltage just at zero), 1 at the latest (inductor current at zero).
///
/// Aiming early leaves margin for the window closing (load falling, Lr or Cr
/// larger than nominal); aiming at 0 exactly leaves no margin for a window
/// that opens later than computed. 0.25 to 0.5 is a usual start (common
/// practice, no source).
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(
    feature = "serde",
    serde(
        try_from = "crate::serde_types::Scalar<F>",
        bound(deserialize = "F: Real + serde::Deserialize<'de>")
    )
)]
pub struct WindowPosition<F>(F);

impl<F: Real> WindowPosition<F> {
    /// The window's opening (position 0).
    pub const EARLIEST: Self = Self(F::ZERO);

    /// A position in `[0, 1]`.
    ///
    /// # Errors
    /// [`Error::NotFinite`] or [`Error::OutOfRange`] on [`Quantity::WindowPosition`].
    pub fn new(position: F) -> Result<Self, Error> {
        if !position.is_finite() {
            return Err(Error::NotFinite {
                quantity: Quantity::WindowPosition,
                value: position.to_f64(),
            });
        }
        if position < F::ZERO || position > F::ONE {
            return Err(Error::OutOfRange {
                quantity: Quantity::WindowPosition,
                value: position.to_f64(),
                min: 0.0,
                max: 1.0,
            });
        }
        Ok(Self(position))
    }

    /// The position, 0..=1.
    #[must_use]
    pub fn get(self) -> F {
        self.0
    }

    /// The instant at this position between `open` and `close` (any
    /// unit, second for a window): `open + position*(close - open)`,
    /// exact up to two roundings of `F`.
    #[must_use]
    pub fn between(self, open: F, close: F) -> F {
        open + self.0 * (close - open)
    }
}

/// A validated PWM timer and gate driver: clock, counter width and the
/// driver's propagation delays.
///
/// ```
/// # fn main() -> Result<(), timing_core::Error> {
/// use timing_core::{CellPoint, Tank, Timer, Transition, WindowPosition};
/// let tank = Tank::new(1.0e-6_f64, 6.8e-9)?;
/// let t = Transition::new(&tank, &CellPoint::new(48.0, 6.0)?)?;
/// let timer = Timer::new(170.0e6, 16, 25.0e-9, 0.0)?; // 170 MHz, 16 bit, 25 ns driver
/// let cmd = timer.command(&t, WindowPosition::new(0.25)?)?;
/// assert!(cmd.is_in_window());
/// assert!(cmd.ticks().get() > 55 && cmd.ticks().get() < 65); // ~372 ns + a quarter of ~94 ns, less 25 ns
/// # Ok(()) }
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(
    feature = "serde",
    serde(
        try_from = "crate::serde_types::TimerParams<F>",
        bound(deserialize = "F: Real + serde::Deserialize<'de>")
    )
)]
pub struct Timer<F> {
    clock_hz: F,
    counter_bits: u8,
    max_ticks: u32,
    turn_on_delay_s: F,
    turn_off_delay_s: F,
}

/// The outcome of placing a turn-on: the commanded delay and where it lands.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct DelayCommand<F> {
    ticks: Ticks,
    target_s: F,
    turn_on_s: F,
    in_window: bool,
}

impl<F: Real> DelayCommand<F> {
    /// Delay to write to the compare register, ticks from the turn-off command.
    pub fn ticks(&self) -> Ticks {
        self.ticks
    }

    /// The instant aimed at, second from gate turn-off (before quantisation).
    #[must_use]
    pub fn target_s(&self) -> F {
        self.target_s
    }

    /// The instant the switch actually turns on with this delay, second from
    /// gate turn-off: `ticks/clock - turn_off_delay + turn_on_delay`.
    #[must_use]
    pub fn turn_on_s(&self) -> F {
        self.turn_on_s
    }

    /// Whether the turn-on lands inside the ZVS window (always `false` below
    /// the ZVS boundary, where the target is the valley). `false` at a ZVS
    /// point means the window is narrower than one tick and no tick hits it.
    #[must_use]
    pub fn is_in_window(&self) -> bool {
        self.in_window
    }
}

impl<F: Real> Timer<F> {
    /// A timer of `clock_hz` (positive) with a `counter_bits`-bit counter
    /// (1..=32) driving a gate driver with the given turn-on and turn-off
    /// propagation delays (second, non-negative).
    ///
    /// # Errors
    /// [`Error::NotFinite`], [`Error::NotPositive`], [`Error::Subnormal`] on
    /// the clock; [`Error::Negative`] on a delay; [`Error::OutOfRange`] on the
    /// counter width.
    pub fn new(
        clock_hz: F,
        counter_bits: u8,
        turn_on_delay_s: F,
        turn_off_delay_s: F,
    ) -> Result<Self, Error> {
        let clock_hz = positive(Quantity::TimerClock, clock_hz)?;
        if counter_bits == 0 || counter_bits > 32 {
            return Err(Error::OutOfRange {
                quantity: Quantity::CounterBits,
                value: f64::from(counter_bits),
                min: 1.0,
                max: 32.0,
            });
        }
        let max_ticks = u32::MAX >> (32 - u32::from(counter_bits));
        Ok(Self {
            clock_hz,
            counter_bits,
            max_ticks,
            turn_on_delay_s: non_negative(Quantity::TurnOnDelay, turn_on_delay_s)?,
            turn_off_delay_s: non_negative(Quantity::TurnOffDelay, turn_off_delay_s)?,
        })
    }

    /// Timer clock, hertz (one tick is `1/clock_hz` second).
    #[must_use]
    pub fn clock_hz(&self) -> F {
        self.clock_hz
    }

    /// Counter width, bits.
    #[must_use]
    pub fn counter_bits(&self) -> u8 {
        self.counter_bits
    }

    /// Largest delay the counter holds, ticks (`2^bits - 1`).
    pub fn max_ticks(&self) -> Ticks {
        Ticks(self.max_ticks)
    }

    /// Gate driver's turn-on propagation delay, second.
    #[must_use]
    pub fn turn_on_delay_s(&self) -> F {
        self.turn_on_delay_s
    }

    /// Gate driver's turn-off propagation delay, second: from the timer's
    /// turn-off edge to the switch turning off.
    #[must_use]
    pub fn turn_off_delay_s(&self) -> F {
        self.turn_off_delay_s
    }

    /// Net lead of the gate driver, second: turn-on delay minus turn-off
    /// delay. The command is issued this much before the desired turn-on
    /// (measured from gate turn-off).
    #[must_use]
    pub fn lead_s(&self) -> F {
        self.turn_on_delay_s - self.turn_off_delay_s
    }

    /// The instant the switch turns on, second from gate turn-off, for a
    /// delay of `ticks`.
    #[must_use]
    pub fn turn_on_s(&self, ticks: Ticks) -> F {
        F::from_u32(ticks.0) / self.clock_hz + self.lead_s()
    }

    /// Ticks for a delay of `seconds` from the turn-off command, rounded to
    /// nearest; saturating (negative and NaN give 0, more than the counter
    /// holds gives its maximum), never wrapping. For per-cycle use where a
    /// clamped delay is the wanted behaviour.
    pub fn ticks_saturating(&self, seconds: F) -> Ticks {
        Ticks(
            (seconds * self.clock_hz)
                .round()
                .to_u32_saturating()
                .min(self.max_ticks),
        )
    }

    /// The delay that turns the switch on at `position` in the ZVS window of
    /// `transition`, or at the valley below the ZVS boundary.
    ///
    /// The delay is the tick nearest to the target, moved to the nearest
    /// tick inside the window when rounding would leave it. Where no tick
    /// lands in the window (window narrower than a tick), the nearest tick
    /// to the target is returned with [`DelayCommand::is_in_window`] false.
    ///
    /// # Errors
    /// [`Error::DelayNegative`] when the driver's net lead is longer than the
    /// time to the window's close (or to the valley); [`Error::TickOverflow`]
    /// when the delay exceeds the counter.
    pub fn command(
        &self,
        transition: &Transition<F>,
        position: WindowPosition<F>,
    ) -> Result<DelayCommand<F>, Error> {
        self.command_for(&transition.turn_on(), position)
    }

    /// [`Timer::command`] for a window or valley from any model (the
    /// closed forms or [`crate::ring`]).
    ///
    /// # Errors
    /// As [`Timer::command`].
    pub fn command_for(
        &self,
        turn_on: &crate::TurnOn<F>,
        position: WindowPosition<F>,
    ) -> Result<DelayCommand<F>, Error> {
        let lead = self.lead_s();
        let target_s = turn_on.target_s(position);
        let ticks_at = |t: F| (t - lead) * self.clock_hz;
        let (last_s, nearest) = match turn_on.window() {
            Some(w) => {
                let nearest = ticks_at(target_s).round();
                let lo = ticks_at(w.open_s).ceil();
                let hi = ticks_at(w.close_s).floor();
                let lo = if lo < F::ZERO { F::ZERO } else { lo };
                let placed = if lo > hi {
                    nearest
                } else if nearest < lo {
                    lo
                } else if nearest > hi {
                    hi
                } else {
                    nearest
                };
                (w.close_s, placed)
            }
            None => (target_s, ticks_at(target_s).round()),
        };
        if last_s - lead < F::ZERO {
            return Err(Error::DelayNegative {
                delay_s: (last_s - lead).to_f64(),
            });
        }
        let nearest = if nearest < F::ZERO { F::ZERO } else { nearest };
        if nearest > F::from_u32(self.max_ticks) {
            return Err(Error::TickOverflow {
                ticks: nearest.to_f64(),
                max_ticks: self.max_ticks,
            });
        }
        let ticks = Ticks(nearest.to_u32_saturating());
        let turn_on_s = self.turn_on_s(ticks);
        let in_window = turn_on
            .window()
            .is_some_and(|w| turn_on_s >= w.open_s && turn_on_s <= w.close_s);
        Ok(DelayCommand {
            ticks,
            target_s,
            turn_on_s,
            in_window,
        })
    }

    /// `command` moved up to at least `least` ticks (a floor such as a
    /// minimum dead time, within the counter: the caller's validation),
    /// where it lands then and whether that is still inside `window`
    /// (`open_s`, `close_s`, second from gate turn-off).
    pub(crate) fn raised(
        &self,
        command: DelayCommand<F>,
        least: Ticks,
        window: Option<(F, F)>,
    ) -> DelayCommand<F> {
        if command.ticks >= least {
            return command;
        }
        let ticks = least;
        let turn_on_s = self.turn_on_s(ticks);
        DelayCommand {
            ticks,
            target_s: command.target_s,
            turn_on_s,
            in_window: window.is_some_and(|(o, c)| turn_on_s >= o && turn_on_s <= c),
        }
    }
}
