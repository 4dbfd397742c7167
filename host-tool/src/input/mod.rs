//! What the user gives: design files as the TOML parser reads them
//! ([`design_file`]), validated into plain data ([`design`]) or refused
//! with the key and value at fault ([`invalid`]); Coss curves read from CSV
//! ([`coss_csv`]); scope captures of the switch node ([`capture`]).
//!
//! Imports: the leaves and [`crate::tank`].

pub mod capture;
pub mod coss_csv;
pub mod design;
pub mod design_file;
pub mod invalid;
pub mod leg_design;
pub mod trim_design;
