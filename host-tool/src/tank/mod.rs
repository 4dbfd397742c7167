//! The tank as built, and its transition's events at interpolation speed:
//! Lr, the switch capacitance (a constant or a MOSFET's Coss curve beside a
//! fixed part) and the loop's resistance ([`real_tank`]); the ring's events
//! tabulated with their error counted ([`event_grid`]), the ideal tank's as
//! a function of the load alone ([`load_grid`]); and the windows a box of
//! tanks shares ([`robust_grid`]) or the minimax aim over it
//! ([`aim_grid`]). The cell's ranges over a box of operating points ([`cell_box`]).
//! Nothing here knows a design file.
//!
//! Imports: the leaves ([`crate::units`], [`crate::par`]) and timing-core.

pub mod aim_grid;
pub mod cell_box;
pub mod event_grid;
pub mod leg_grid;
pub mod load_grid;
pub mod real_tank;
pub mod robust_grid;
pub mod stand_in;
