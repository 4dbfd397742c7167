//! Bring-up: fit the tank to scope captures of the switch node.
//!
//! At bring-up the board runs at reduced voltage and a scope captures the
//! switch node over one turn-off with the gate left off (a single-pulse
//! test, common practice, no source). Those captures pin the tank down
//! better than the datasheets and the inductor's tolerance do:
//! - [`model`]: the trace a tank predicts for a capture;
//! - [`span`]: where in a capture that model follows the circuit, and the
//!   checks that refuse a capture holding no usable ring;
//! - [`solve`]: the least-squares fit of Lr, the fixed capacitance, a scale
//!   on the Coss curve, the loop resistance and the turn-off driver delay,
//!   with each one's uncertainty.

pub mod error;
pub mod model;
pub mod solve;
pub mod span;

pub use error::FitError;
pub use model::{model_trace, residual_rms, TankGuess};
pub use solve::{fit, Param, Shot, TankFit};
