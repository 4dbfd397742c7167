//! The exact model of a design at its ADC code pairs: the window, the aim
//! and the bound of each answer ([`exact`]), a chunk of a row of them for
//! the sweeps ([`exact_chunk`]), and what the design's tolerances leave of
//! each window ([`robust_aim`]). [`design::Design`] is a validated design
//! with what its model builds once (grids, robust windows).
//!
//! Imports: the leaves, [`crate::tank`] and [`crate::input`].

pub mod design;
pub mod exact;
pub mod exact_chunk;
pub mod leg_model;
pub mod robust_aim;
pub mod trim_margin;
