//! Files for firmware: a generated table as Rust source, a C header, a
//! checked blob and a CSV ([`export`]), and the closed-form methods'
//! coefficients as Rust source ([`closed_form_source`]) and, with the
//! trim, as C99 source ([`closed_form_c`]).
//!
//! Imports: every earlier stage.

pub mod c_header;
pub mod closed_form_c;
pub mod closed_form_source;
pub mod export;
pub mod fitted_design;
pub mod leg_export;
mod summary;
pub mod trim_source;
