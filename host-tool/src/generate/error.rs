//! Why no table: generation's error.

/// Why generation failed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum GenerateError {
    /// A delay in the design range exceeds the timer counter.
    #[error("the delay reaches {ticks:.0} ticks at Vin = {vin_v:.3} V, Io = {io_a:.4} A, beyond the {bits}-bit timer counter's limit of {max} ticks; use a wider counter, a slower timer clock, raise the lightest load in `io`, or `fallback = \"fixed\"`")]
    CounterOverflow {
        /// Ticks needed.
        ticks: f64,
        /// Where.
        vin_v: f64,
        /// Where.
        io_a: f64,
        /// Counter width.
        bits: u8,
        /// Counter limit.
        max: u32,
    },
    /// A delay would be negative: the driver lead is longer than the target.
    #[error("the gate driver's net lead exceeds the turn-on target at Vin = {vin_v:.3} V, Io = {io_a:.4} A: no non-negative delay reaches it")]
    NegativeDelay {
        /// Where.
        vin_v: f64,
        /// Where.
        io_a: f64,
    },
    /// The model refused a point of the design range.
    #[error("at Vin = {vin_v:.3} V, Io = {io_a:.4} A: {message}")]
    Model {
        /// Where.
        vin_v: f64,
        /// Where.
        io_a: f64,
        /// timing-core's message.
        message: String,
    },
    /// No candidate layout meets the error budget.
    #[error("no table layout of up to 16 KiB meets max_error_ticks = {budget}: the best ({layout}) reached {best:.3} ticks on {on}, with {misses} code pairs outside their window; widen max_error_ticks, narrow the design range, or allow another layout")]
    NoLayout {
        /// Budget.
        budget: f64,
        /// Best error found, ticks.
        best: f64,
        /// Code pairs of that candidate commanded outside their interval.
        misses: usize,
        /// Its layout.
        layout: &'static str,
        /// Where the figure was found: every code pair, or a sample (then
        /// a lower bound).
        on: &'static str,
    },
    /// The leg's model refused a point of its design range.
    #[error("{edge} edge at Vbus = {vbus_v:.3} V, I = {current_a:.4} A: {message}")]
    LegModel {
        /// `falling` or `rising`.
        edge: &'static str,
        /// Where.
        vbus_v: f64,
        /// Where.
        current_a: f64,
        /// timing-core's message.
        message: String,
    },
    /// No edge-table layout meets the leg's error budget.
    #[error("{edge} edge: no table of up to {max_kib} KiB meets max_error_ticks = {budget}: the best ({shape}) reached {best:.3} steps with {misses} code pairs outside their window; widen max_error_ticks, narrow the bus or current range, or use a finer dead-time step")]
    LegNoLayout {
        /// `falling` or `rising`.
        edge: &'static str,
        /// Size limit, KiB.
        max_kib: usize,
        /// Budget, steps.
        budget: f64,
        /// Best error found, steps.
        best: f64,
        /// Pairs outside their window there.
        misses: usize,
        /// Its rows and columns.
        shape: String,
    },
}
