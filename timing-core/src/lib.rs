//! # timing-core
//!
//! The turn-on timing of a zero-voltage-switching (ZVS) quasi-resonant
//! switch cell, for firmware and for the host: from the resonant tank
//! (Lr, Cr) and the measured operating point, the window after gate turn-off
//! in which the MOSFET can be turned on at zero voltage, the valley to fall
//! back to where ZVS is impossible, the peak switch voltage, the buck
//! conversion ratio, and the timer delay that lands the turn-on in the
//! window after the gate driver's propagation delays.
//!
//! `no_std`, no allocation, no panic: every input is validated once, when a
//! [`Tank`], [`CellPoint`], [`Timer`] or [`WindowPosition`] is built, and
//! reported as a typed [`Error`] naming the offending quantity. The
//! arithmetic is generic over [`Real`] (`f64` on the host, `f32` in
//! firmware) through `libm`.
//!
//! The model is the ideal, lossless cell with constant capacitance
//! (DESIGN.md section 2); [`normalized`] holds the same equations as
//! functions of the normalised load J alone.
//! [`ring`] solves the real cell numerically (a Coss curve, a lossy
//! loop), and [`leg`] the two switching edges of a half-bridge leg (both
//! switches' curves, the transition inductance, the current at the
//! switching instant), on the same integrator. [`trim`] learns a board's
//! offset from the model online, from the captured instant the switch
//! voltage reaches zero.
//!
//! ```
//! # fn main() -> Result<(), timing_core::Error> {
//! use timing_core::{CellPoint, Tank, Timer, Topology, Transition, WindowPosition};
//! let tank = Tank::new(1.0e-6_f64, 6.8e-9)?;                      // 1 uH, 6.8 nF
//! let cell = CellPoint::from_converter(Topology::Buck, 48.0, 12.0, 6.0)?; // 48 V in, 6 A
//! let t = Transition::new(&tank, &cell)?;
//! let w = t.window().ok_or(timing_core::Error::ZvsLost { normalized_load: t.normalized_load() })?;
//! let timer = Timer::new(170.0e6, 16, 25.0e-9, 0.0)?;
//! let cmd = timer.command(&t, WindowPosition::new(0.25)?)?;
//! assert!(cmd.turn_on_s() >= w.open_s && cmd.turn_on_s() <= w.close_s);
//! # Ok(()) }
//! ```
//!
//! **Safety of people:** these converters run at lethal voltages. Numbers
//! from this crate are a starting point: bring a board up at reduced
//! voltage, verify the switching node with a scope, and follow local
//! electrical codes and licensed practice.
//!
//! ## Features
//! - `defmt`: `defmt::Format` for every public type.
//! - `serde`: `Serialize` for every public type; `Deserialize` for the input
//!   types, through their validating constructors.
//! - `blob`: [`blob::open`] checks and opens `.bin` table blobs (postcard,
//!   CRC-32) without allocating.
//! - `micromath`: the `micromath-f32` closed form
//!   (`closed_form::MicromathF32`, on `micromath`'s approximations).

#![cfg_attr(not(test), no_std)]
#![cfg_attr(
    not(test),
    deny(
        clippy::unwrap_used,
        clippy::expect_used,
        clippy::panic,
        clippy::indexing_slicing,
        clippy::unreachable,
        clippy::todo,
        clippy::unimplemented,
        clippy::modulo_arithmetic
    )
)]
#![warn(missing_docs)]

mod adc;
pub mod approx;
#[cfg(feature = "blob")]
pub mod blob;
mod cell;
pub mod closed_form;
mod conversion;
pub mod coss;
mod error;
pub mod leg;
pub mod leg_table;
pub mod normalized;
mod real;
pub mod ring;
pub mod robust;
#[cfg(feature = "serde")]
mod serde_types;
mod swing;
pub mod table;
mod tank;
mod timer;
mod transition;
pub mod trim;
pub mod waveform;

pub use adc::{AdcCode, CodeRange};
pub use cell::{CellPoint, Topology};
pub use conversion::Regulation;
pub use error::{Error, Quantity};
pub use real::Real;
pub use tank::Tank;
pub use timer::{DelayCommand, Ticks, Timer, WindowPosition};
pub use transition::{Transition, TurnOn, Valley, ZvsWindow, F32_MAX_RELATIVE_ERROR};
