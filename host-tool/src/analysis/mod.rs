//! Questions about one design or one point, beside the tables: one
//! operating point in detail ([`point`]; a half-bridge leg's edge:
//! [`leg_point`]), sizing the tank ([`size`]) and
//! the trace a tank predicts for a bring-up capture ([`fit_capture`]).
//!
//! Imports: every earlier stage (leaves, tank, input, model, check,
//! generate).

pub mod fit_capture;
pub mod leg_point;
pub mod point;
pub mod size;
