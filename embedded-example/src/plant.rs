//! The converter outside the interrupt: a scenario of true Vin and Io over
//! the run, sensor noise and ADC quantisation (invented for the demo).
//!
//! Scenario: the winch's auxiliary rail idles at light load (1.5 A, below
//! the ZVS boundary: valley turn-on), the brake solenoids pull in (step to
//! 8 A), and the battery bus charges slowly from 40 V to 56 V meanwhile.

/// One switching cycle's true operating point and what the ADC reads.
#[derive(Clone, Copy)]
pub struct Sample {
    /// True input voltage, volt.
    pub vin_v: f32,
    /// True output current, ampere.
    pub io_a: f32,
    /// Vin as converted, code.
    pub vin_code: u16,
    /// Io as converted, code.
    pub io_code: u16,
}

/// The plant: deterministic, with a small linear-congruential noise source.
pub struct Plant {
    noise: Noise,
    /// Cycles in the run.
    pub cycles: u32,
}

/// A small linear-congruential noise source (deterministic runs).
pub struct Noise(u32);

impl Noise {
    /// A source started at `seed`.
    pub const fn new(seed: u32) -> Self {
        Self(seed)
    }

    /// The next draw, uniform in [-1, 1).
    pub fn next(&mut self) -> f32 {
        self.0 = self.0.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
        ((self.0 >> 8) as f32 / 8_388_608.0) - 1.0
    }
}

/// A conversion result: `c` (codes, noise included) rounded half up and
/// kept within the 12-bit ADC.
pub fn to_code(c: f32) -> u16 {
    let c = c + 0.5;
    if c < 0.0 {
        0
    } else if c > MAX_CODE {
        MAX_CODE as u16
    } else {
        c as u16
    }
}

/// ADC scales of the demo design (tables/winch_aux.toml).
pub const VIN_VOLTS_PER_CODE: f32 = 0.0161;
/// See [`VIN_VOLTS_PER_CODE`].
pub const IO_AMPS_PER_CODE: f32 = 0.00488;
const MAX_CODE: f32 = 4095.0;
/// Peak sensor noise, codes.
const NOISE_CODES: f32 = 3.0;

impl Plant {
    /// The scenario over `cycles` switching cycles.
    pub const fn new(cycles: u32) -> Self {
        Self {
            noise: Noise::new(0x2545_f491),
            cycles,
        }
    }

    fn convert(x: f32, per_code: f32, noise: f32) -> u16 {
        to_code(x / per_code + noise * NOISE_CODES)
    }

    /// What the ADC reads of `vin_v` and `io_a` with the next two draws of
    /// `noise`: (Vin code, Io code).
    pub fn sense(noise: &mut Noise, vin_v: f32, io_a: f32) -> (u16, u16) {
        let (a, b) = (noise.next(), noise.next());
        (
            Self::convert(vin_v, VIN_VOLTS_PER_CODE, a),
            Self::convert(io_a, IO_AMPS_PER_CODE, b),
        )
    }

    /// The operating point of cycle `n`.
    pub fn sample(&mut self, n: u32) -> Sample {
        let f = n as f32 / self.cycles as f32;
        let vin_v = 40.0 + 16.0 * f;
        // Load step at 40 % of the run, with a short exponential settle.
        let io_a = if f < 0.4 {
            1.5
        } else {
            let k = ((f - 0.4) * 200.0).min(8.0);
            8.0 - 6.5 * libm::expf(-k)
        };
        let (vin_code, io_code) = Self::sense(&mut self.noise, vin_v, io_a);
        Sample {
            vin_v,
            io_a,
            vin_code,
            io_code,
        }
    }
}
