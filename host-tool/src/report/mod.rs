//! Reports for people: text ([`render`]) and pictures ([`plot`], a
//! half-bridge leg's [`leg_plot`] and a bring-up fit's [`overlay`],
//! feature `plot`).
//!
//! Imports: every earlier stage.

#[cfg(feature = "plot")]
pub mod leg_plot;
#[cfg(feature = "plot")]
pub mod overlay;
#[cfg(feature = "plot")]
pub mod plot;
pub mod render;
