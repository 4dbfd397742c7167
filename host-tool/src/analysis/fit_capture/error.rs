//! Why a fit cannot be made.

/// Why a fit cannot be made, naming the capture and the value at fault.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum FitError {
    /// No captures were given.
    #[error("no captures to fit: give at least one --capture with its --vin and --io")]
    NoCaptures,
    /// The operating point of a capture is not one the cell can have.
    #[error("{path}: the operating point (--vin {vin_v} V, --io {io_a} A) is refused: {source}")]
    Point {
        /// The capture.
        path: String,
        /// Its input voltage, volt.
        vin_v: f64,
        /// Its output current, ampere.
        io_a: f64,
        /// timing-core's reason.
        source: timing_core::Error,
    },
    /// A capture holds no ring the model can be fitted to.
    #[error("{path}: {reason}")]
    Capture {
        /// The capture.
        path: String,
        /// What is wrong with it, and what to do.
        reason: String,
    },
    /// The model could not be evaluated at the fit's start.
    #[error("the design's tank cannot be evaluated at the captures' points: {0}")]
    Model(timing_core::Error),
    /// The solver stopped without a fit.
    #[error("the fit did not converge ({0}): check that --vin and --io match each capture and that time zero is the turn-off command")]
    NotConverged(String),
}
