//! Fast approximations for the closed-form delay on the interrupt path:
//! one operation per file, each with its error bound as a constant that a
//! test checks (exhaustively where the input space allows it).
//!
//! f32 versions use only add, multiply and divide (IEEE single precision,
//! identical on the host and on a Cortex-M4F FPU, so host proofs hold on
//! the target bit for bit); fixed-point versions use only 32-bit integer
//! add, shift and multiply (no division, no leading-zero count), for cores
//! without an FPU or a divide instruction.

pub mod asin_f32;
pub mod asin_q;
pub mod mul_shr;
pub mod recip_q;
pub mod rsqrt_f32;
pub mod sqrt1p_f32;
pub mod sqrt1p_q;
pub mod sqrt_q;
