//! Reports for people: text ([`render`]) and pictures ([`plot`], feature
//! `plot`).
//!
//! Imports: every earlier stage.

#[cfg(feature = "plot")]
pub mod plot;
pub mod render;
