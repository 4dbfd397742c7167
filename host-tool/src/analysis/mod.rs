//! Questions about one design or one point, beside the tables: one
//! operating point in detail ([`point`]) and sizing the tank ([`size`]).
//!
//! Imports: every earlier stage (leaves, tank, input, model, check,
//! generate).

pub mod point;
pub mod size;
