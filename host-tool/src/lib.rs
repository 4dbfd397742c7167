//! # host-tool
//!
//! The host side of zvs-timing: the `zvs-timing` command and the library
//! behind it. All physics comes from `timing-core`; this crate reads design
//! files, tabulates the exact model, generates and proves tables, writes
//! them for firmware, and talks to outside programs (ngspice) for
//! cross-checks.
//!
//! The folders are the stages, and data flows one way. A module imports
//! only from its own folder and the folders listed before it here (a test,
//! `the_folders_import_only_earlier_stages`, keeps the rule):
//!
//! 1. leaves: [`units`] (engineers' numbers), [`par`] (the data-parallel
//!    loops);
//! 2. [`tank`]: the tank as built and its events at interpolation speed
//!    (no design file involved);
//! 3. [`input`]: design files and Coss curves, validated;
//! 4. [`model`]: the exact model of a design at its code pairs, with what
//!    its tolerances leave of each window;
//! 5. [`check`]: exhaustive verification and Monte Carlo of a runtime
//!    method against the model;
//! 6. [`generate`]: table layouts, fitting and the choice of a table;
//! 7. [`analysis`]: one operating point, tank sizing;
//! 8. [`emit`] (firmware sources and blobs), [`sim`] (SPICE decks and
//!    ngspice), [`report`] (text and pictures);
//! 9. the `zvs-timing` binary (`bin/zvs-timing/`, a file a command with
//!    the arguments it takes).
//!
//! **Caution:** resonant converters run at lethal voltages. See
//! [`analysis::point::CAUTION`].

#![cfg_attr(
    not(test),
    deny(clippy::unwrap_used, clippy::expect_used, clippy::panic)
)]
#![warn(missing_docs)]

pub mod analysis;
pub mod check;
pub mod emit;
pub mod generate;
pub mod input;
pub mod model;
pub mod par;
pub mod report;
pub mod sim;
pub mod tank;
pub mod units;
