//! The `[trim]` table of a cell's design file (as written:
//! [`TrimFile`]) validated into timing-core's types
//! ([`timing_core::trim`]) in the design's timer ticks.
//!
//! Every key but `comparator_delay` has a default chosen to be safe: a
//! small envelope (the trim can move a command by at most 4 ticks), a slow
//! gain, and fault limits that freeze the trim after 8 bad cycles in 64.
//! The comparator's delay is the board's own and has no safe default.

use timing_core::trim::{Regions, TrimConfig, MAX_WINDOW};
use timing_core::{CodeRange, Timer};

use crate::input::design_file::TrimFile;
use crate::input::invalid::Invalid;

/// Default envelope, ticks: small, so a wrong capture moves a command
/// little.
pub const DEFAULT_ENVELOPE_TICKS: f64 = 4.0;
/// Default plausible residual, in envelopes.
pub const DEFAULT_PLAUSIBLE_ENVELOPES: f64 = 4.0;
/// Default noise limit, ticks.
pub const DEFAULT_NOISE_TICKS: f64 = 3.0;

/// The validated trim of a design.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TrimSpec {
    /// timing-core's settings, in the design's ticks.
    pub config: TrimConfig,
    /// The regions over the design's code ranges.
    pub regions: Regions,
    /// The bounds on the bins given (voltage, current).
    pub bins: [u16; 2],
    /// Cycles of fault history.
    pub window: u16,
    /// The comparator's delay as given, second.
    pub comparator_delay_s: f64,
    /// The comparator's threshold, volt.
    pub comparator_threshold_v: f64,
}

impl TrimFile {
    /// Validate against the design's timer (times to ticks; the offset the
    /// trim takes off a capture is the comparator's delay plus the timer's
    /// lead) and code ranges.
    ///
    /// # Errors
    /// [`Invalid::Refused`] naming the key at fault.
    pub fn validate(
        &self,
        timer: &Timer<f64>,
        vin_codes: CodeRange,
        io_codes: CodeRange,
    ) -> Result<TrimSpec, Invalid> {
        let clock = timer.clock_hz();
        let ticks = |key: &'static str, s: f64| -> Result<f32, Invalid> {
            let t = s * clock;
            if t.is_finite() && t >= 0.0 {
                Ok(t as f32)
            } else {
                Err(Invalid::Refused {
                    key,
                    source: timing_core::Error::OutOfRange {
                        quantity: timing_core::Quantity::TrimThreshold,
                        value: s,
                        min: 0.0,
                        max: f64::INFINITY,
                    },
                })
            }
        };
        let envelope = match self.envelope {
            Some(s) => ticks("trim.envelope", s.0)?,
            None => DEFAULT_ENVELOPE_TICKS as f32,
        };
        // A capture latches the count the timer has reached: on average
        // half a tick before the edge (common practice, no source).
        let comparator = ticks(
            "trim.comparator_delay",
            self.comparator_delay.0 + timer.lead_s() - 0.5 / clock,
        )?;
        let threshold = self.comparator_threshold.map_or(0.0, |v| v.0);
        if !(0.0..=50.0).contains(&threshold) {
            return Err(Invalid::Refused {
                key: "trim.comparator_threshold",
                source: timing_core::Error::OutOfRange {
                    quantity: timing_core::Quantity::TrimThreshold,
                    value: threshold,
                    min: 0.0,
                    max: 50.0,
                },
            });
        }
        let plausible = match self.plausible {
            Some(s) => ticks("trim.plausible", s.0)?,
            None => envelope * DEFAULT_PLAUSIBLE_ENVELOPES as f32,
        };
        let noise = match self.noise {
            Some(s) => ticks("trim.noise", s.0)?,
            None => DEFAULT_NOISE_TICKS as f32,
        };
        let window_ok = self.window.is_power_of_two() && usize::from(self.window) <= MAX_WINDOW;
        if !window_ok {
            return Err(Invalid::Refused {
                key: "trim.window",
                source: timing_core::Error::OutOfRange {
                    quantity: timing_core::Quantity::TrimThreshold,
                    value: f64::from(self.window),
                    min: 1.0,
                    max: MAX_WINDOW as f64,
                },
            });
        }
        let limits = [self.missing_limit, self.implausible_limit, self.noisy_limit];
        let names = [
            "trim.missing_limit",
            "trim.implausible_limit",
            "trim.noisy_limit",
        ];
        for (&n, key) in limits.iter().zip(names) {
            if n == 0 || n > self.window {
                return Err(Invalid::Refused {
                    key,
                    source: timing_core::Error::OutOfRange {
                        quantity: timing_core::Quantity::TrimThreshold,
                        value: f64::from(n),
                        min: 1.0,
                        max: f64::from(self.window),
                    },
                });
            }
        }
        let config = TrimConfig::new(self.gain, envelope, comparator, plausible, noise, limits)
            .map_err(|source| {
                use timing_core::Quantity as Q;
                let key = match source.quantity() {
                    Some(Q::TrimGain) => "trim.gain",
                    Some(Q::TrimEnvelope) => "trim.envelope",
                    Some(Q::ComparatorDelay) => "trim.comparator_delay",
                    _ => match source {
                        timing_core::Error::OutOfRange { value, .. }
                        | timing_core::Error::NotFinite { value, .. }
                            if value == f64::from(plausible) =>
                        {
                            "trim.plausible"
                        }
                        _ => "trim.noise",
                    },
                };
                Invalid::Refused { key, source }
            })?;
        let regions = Regions::new(
            (vin_codes.lo, vin_codes.hi),
            (io_codes.lo, io_codes.hi),
            self.regions[0],
            self.regions[1],
        )
        .map_err(|source| Invalid::Refused {
            key: "trim.regions",
            source,
        })?;
        Ok(TrimSpec {
            config,
            regions,
            bins: self.regions,
            window: self.window,
            comparator_delay_s: self.comparator_delay.0,
            comparator_threshold_v: threshold,
        })
    }
}
