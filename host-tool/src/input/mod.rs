//! What the user gives: design files (TOML) validated into plain data
//! ([`design`]), and Coss curves read from CSV ([`coss_csv`]).
//!
//! Imports: the leaves and [`crate::tank`].

pub mod coss_csv;
pub mod design;
