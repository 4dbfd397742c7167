//! Reports for people: text ([`render`]) and pictures ([`plot`] and a
//! bring-up fit's [`overlay`], feature `plot`).
//!
//! Imports: every earlier stage.

#[cfg(feature = "plot")]
pub mod overlay;
#[cfg(feature = "plot")]
pub mod plot;
pub mod render;
