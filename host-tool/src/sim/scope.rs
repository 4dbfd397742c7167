//! A digital scope's record of a simulated trace ([`super::trace`]), for
//! bring-up dry runs and for checking the fit: the scope triggers on the
//! turn-off command, so the switch turns off the driver's delay after time
//! zero; it samples at its own rate with a trigger offset and a jittering
//! sample clock, adds white noise and quantises to its vertical range.
//! Written as a capture CSV with metadata lines before the header, as
//! scopes export them.

use std::fmt::Write as _;

use rand::rngs::StdRng;
use rand::{Rng, SeedableRng};

use super::trace::Trace;

/// How the scope records.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Scope {
    /// Sample rate, samples per second.
    pub rate_hz: f64,
    /// Samples recorded.
    pub samples: usize,
    /// Time recorded before the trigger (the turn-off command), second.
    pub pre_trigger_s: f64,
    /// Vertical resolution, bits (8 for most bench scopes).
    pub bits: u32,
    /// Vertical range (bottom, top), volt.
    pub range_v: (f64, f64),
    /// White noise, volt RMS.
    pub noise_v: f64,
    /// Sample-clock jitter, second RMS.
    pub jitter_s: f64,
    /// Seed of the noise, the jitter and the trigger offset (within half a
    /// sample).
    pub seed: u64,
}

/// A seeded standard normal (Box-Muller).
fn normal(rng: &mut StdRng) -> f64 {
    let u: f64 = rng.random_range(1e-12..1.0);
    let v: f64 = rng.random();
    (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
}

impl Scope {
    /// A bench scope set up for `trace`: 8 bits over the range a user
    /// sets for its ring (a tenth of its peak below zero to a fifth above
    /// the peak), `rate_hz` samples per second for `length_s` second from
    /// `pre_trigger_s` before the trigger, white noise of `noise_fraction`
    /// of the range (RMS) and 10 ps RMS of sample-clock jitter.
    #[must_use]
    pub fn eight_bit(
        trace: &Trace,
        (rate_hz, length_s, pre_trigger_s): (f64, f64, f64),
        noise_fraction: f64,
        seed: u64,
    ) -> Self {
        let peak = trace.switch_v.iter().copied().fold(0.0, f64::max);
        let range_v = (-0.1 * peak, 1.2 * peak);
        Self {
            rate_hz,
            samples: (length_s * rate_hz) as usize,
            pre_trigger_s,
            bits: 8,
            range_v,
            noise_v: noise_fraction * (range_v.1 - range_v.0),
            jitter_s: 10e-12,
            seed,
        }
    }

    /// The capture CSV of `trace` (time from the switch's turn-off) with
    /// the switch turning off `delay_off_s` after the trigger: before the
    /// trace starts, its first value; after it ends, its last.
    #[must_use]
    pub fn record(&self, trace: &Trace, delay_off_s: f64) -> String {
        let mut rng = StdRng::seed_from_u64(self.seed);
        let levels = f64::from((1u32 << self.bits.clamp(1, 16)) - 1);
        let (lo, hi) = self.range_v;
        let step = (hi - lo) / levels;
        let trigger = rng.random_range(-0.5..0.5) / self.rate_hz;
        let at = |t: f64| {
            let k = trace.time_s.partition_point(|&x| x <= t);
            match (k.checked_sub(1), trace.time_s.get(k)) {
                (None, _) => trace.switch_v.first().copied().unwrap_or(0.0),
                (Some(_), None) => trace.switch_v.last().copied().unwrap_or(0.0),
                (Some(j), Some(&t1)) => {
                    let (t0, v0, v1) = (trace.time_s[j], trace.switch_v[j], trace.switch_v[k]);
                    v0 + (v1 - v0) * (t - t0) / (t1 - t0)
                }
            }
        };
        let mut csv = String::new();
        let _ = writeln!(
            csv,
            "Source,simulated capture (ngspice deck, zvs-timing sim::scope)\n\
             Sample rate,{:e}\nVertical,{lo:.3},{hi:.3}\nBits,{}\nTIME,CH1",
            self.rate_hz, self.bits
        );
        for k in 0..self.samples {
            let t = -self.pre_trigger_s + k as f64 / self.rate_hz;
            let t_switch = t + trigger + self.jitter_s * normal(&mut rng) - delay_off_s;
            let v = at(t_switch) + self.noise_v * normal(&mut rng);
            let code = ((v - lo) / step).round().clamp(0.0, levels);
            let _ = writeln!(csv, "{t:.6e},{:.5}", lo + code * step);
        }
        csv
    }
}
