//! SPICE: decks of the switch cell and a runner for ngspice ([`spice`]),
//! and a design's deck at one operating point with its commanded turn-on
//! ([`netlist`]).
//!
//! Imports: every earlier stage.

pub mod netlist;
pub mod scope;
pub mod spice;
pub mod trace;
