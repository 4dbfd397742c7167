//! # host-tool
//!
//! The host side of zvs-timing: the `zvs-timing` command and the library
//! behind it. All physics comes from `timing-core`; this crate parses
//! engineers' numbers, builds reports, and talks to outside programs
//! (ngspice) for cross-checks.
//!
//! **Caution:** resonant converters run at lethal voltages. See
//! [`point::CAUTION`].

#![cfg_attr(
    not(test),
    deny(clippy::unwrap_used, clippy::expect_used, clippy::panic)
)]
#![warn(missing_docs)]

pub mod aim_grid;
pub mod closed_form_source;
pub mod coss_csv;
pub mod design;
pub mod doubling;
pub mod event_grid;
pub mod exact_chunk;
pub mod export;
pub mod fit;
pub mod generate;
pub mod load_grid;
pub mod montecarlo;
pub mod netlist;
pub mod par;
#[cfg(feature = "plot")]
pub mod plot;
pub mod point;
pub mod real_tank;
pub mod render;
pub mod robust_aim;
pub mod robust_grid;
pub mod size;
pub mod spice;
pub mod units;
pub mod verify;
