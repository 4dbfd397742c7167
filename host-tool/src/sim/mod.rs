//! SPICE: decks of the switch cell and a runner for ngspice ([`spice`]),
//! and a design's deck at one operating point with its commanded turn-on
//! ([`netlist`]), and a half-bridge leg's edge ([`leg_deck`]) with its
//! commanded dead time ([`leg_netlist`]).
//!
//! Imports: every earlier stage.

pub mod leg_deck;
pub mod leg_netlist;
pub mod netlist;
pub mod scope;
pub mod spice;
pub mod trace;
