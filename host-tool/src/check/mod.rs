//! Checking a runtime method (a table lookup or a closed form, the code the
//! firmware runs) against the exact model: at every code pair of the design
//! range ([`verify`], with [`doubling`] sharing verdicts where the physics
//! makes pairs equal), and over boards and cycles drawn within the
//! tolerances ([`montecarlo`]; a half-bridge leg's edge tables:
//! [`leg_montecarlo`]).
//!
//! Imports: the leaves, [`crate::tank`], [`crate::input`], [`crate::model`].

pub mod cost;
pub mod doubling;
pub mod leg_montecarlo;
pub mod montecarlo;
pub mod verify;
