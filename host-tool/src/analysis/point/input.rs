//! What `point` takes: the operating point, the tank, the timer and the
//! tolerances, and the error that names the option at fault.

use timing_core::{Error as CoreError, Quantity, Timer, Topology};

/// The timer and gate driver of a [`PointInput`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TimerInput {
    /// Timer clock, hertz.
    pub clock_hz: f64,
    /// Counter width, bits.
    pub counter_bits: u8,
    /// Gate-driver turn-on propagation delay, second.
    pub turn_on_delay_s: f64,
    /// Gate-driver turn-off propagation delay, second.
    pub turn_off_delay_s: f64,
}

impl TimerInput {
    /// timing-core's validated timer for these values.
    ///
    /// # Errors
    /// timing-core's error naming the value (a clock of zero, a counter
    /// width beyond 32 bits, a negative delay).
    pub fn timer(&self) -> Result<Timer<f64>, CoreError> {
        Timer::new(
            self.clock_hz,
            self.counter_bits,
            self.turn_on_delay_s,
            self.turn_off_delay_s,
        )
    }
}

/// Everything the `point` command takes, in SI units.
#[derive(Debug, Clone, PartialEq)]
pub struct PointInput {
    /// Converter topology.
    pub topology: Topology,
    /// Resonant inductance, henry.
    pub lr_h: f64,
    /// Resonant capacitance, farad (with `coss`, the fixed part in parallel
    /// with the curve; may then be 0).
    pub cr_f: f64,
    /// The MOSFET's Coss curve (empty: none, `cr_f` is the whole Cr).
    pub coss: Vec<timing_core::coss::CossPoint<f64>>,
    /// Series resistance of the resonant loop, ohm (0: lossless).
    pub r_tank_ohm: f64,
    /// Input voltage, volt.
    pub vin_v: f64,
    /// Output voltage, volt (needed for boost and buck-boost; for the buck it
    /// asks for the regulating switching frequency).
    pub vout_v: Option<f64>,
    /// Output current, ampere.
    pub io_a: f64,
    /// Timer and driver, if a delay in ticks is wanted.
    pub timer: Option<TimerInput>,
    /// Aim point in the ZVS window, 0..=1.
    pub position: f64,
    /// Switching frequency for the buck conversion ratio, hertz.
    pub fs_hz: Option<f64>,
    /// Switch drain-source voltage rating, volt, for the stress warning.
    pub vds_rating_v: Option<f64>,
    /// Fraction of the rating allowed in use.
    pub derating: f64,
    /// Tolerances and sensing errors for the robust window (`None`: not asked).
    pub uncertainty: Option<UncertaintyInput>,
}

/// Tolerances and sensing errors of `point` (fractions, second).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct UncertaintyInput {
    /// Relative tolerance of Lr (0.1 for 10 %).
    pub lr_rel: f64,
    /// Relative tolerance of Cr.
    pub cr_rel: f64,
    /// Relative error of the sensed Vin.
    pub vin_rel: f64,
    /// Relative error of the sensed Io.
    pub io_rel: f64,
    /// Peak timer jitter, second.
    pub jitter_s: f64,
    /// Absolute error of the sensed Vin (offset plus peak noise), volt.
    pub vin_abs_v: f64,
    /// Absolute error of the sensed Io (offset plus peak noise), ampere.
    pub io_abs_a: f64,
}

/// A rejected input: which option and why, in one line.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{option}: {message}")]
pub struct InputError {
    /// The command-line option (or design-file key) at fault, e.g. `--lr`.
    pub option: &'static str,
    /// What is wrong, naming the value.
    pub message: String,
}

impl InputError {
    /// An error on `option`.
    pub fn new(option: &'static str, message: impl Into<String>) -> Self {
        Self {
            option,
            message: message.into(),
        }
    }
}

/// The command-line option that sets `q` (for error messages).
#[must_use]
pub fn option_for(q: Quantity) -> &'static str {
    match q {
        Quantity::ResonantInductance => "--lr",
        Quantity::ResonantCapacitance => "--cr",
        Quantity::InputVoltage => "--vin",
        Quantity::OutputVoltage => "--vout",
        Quantity::OutputCurrent => "--io",
        Quantity::TimerClock => "--clock-hz",
        Quantity::CounterBits => "--counter-bits",
        Quantity::TurnOnDelay => "--driver-delay",
        Quantity::TurnOffDelay => "--driver-delay-off",
        Quantity::WindowPosition => "--position",
        Quantity::SwitchingFrequency => "--fs",
        Quantity::ConversionRatio => "--vout",
        Quantity::DelayTicks => "--clock-hz",
        _ => "operating point",
    }
}

fn quantity_of(e: &CoreError) -> Option<Quantity> {
    match *e {
        CoreError::NotFinite { quantity, .. }
        | CoreError::NotPositive { quantity, .. }
        | CoreError::Negative { quantity, .. }
        | CoreError::Subnormal { quantity, .. }
        | CoreError::OutOfRange { quantity, .. }
        | CoreError::Overflow { quantity } => Some(quantity),
        CoreError::TickOverflow { .. } => Some(Quantity::DelayTicks),
        CoreError::DelayNegative { .. } => Some(Quantity::TurnOnDelay),
        CoreError::FrequencyTooHigh { .. } => Some(Quantity::SwitchingFrequency),
        _ => None,
    }
}

impl From<CoreError> for InputError {
    fn from(e: CoreError) -> Self {
        let option = quantity_of(&e).map_or("operating point", option_for);
        InputError::new(option, e.to_string())
    }
}

/// Ranges outside which an input is taken for a typing error (a wrong unit
/// prefix, most often) rather than a real part: option, unit, lowest, highest.
/// The model itself has no such limits; these only keep nonsense out of reports.
pub const PLAUSIBLE: &[(&str, &str, f64, f64)] = &[
    ("--lr", "H", 1e-12, 1.0),
    ("--cr", "F", 1e-15, 1.0),
    ("--vin", "V", 1e-3, 1e6),
    ("--vout", "V", 1e-3, 1e6),
    ("--io", "A", 1e-6, 1e6),
    ("--clock-hz", "Hz", 1e3, 1e11),
    ("--driver-delay", "s", 0.0, 1e-3),
    ("--driver-delay-off", "s", 0.0, 1e-3),
    ("--fs", "Hz", 1.0, 1e9),
];

/// Refuse a finite, positive `value` of `option` outside [`PLAUSIBLE`].
/// Non-finite and non-positive values pass through, for timing-core to name.
pub(super) fn plausible(option: &'static str, value: f64) -> Result<(), InputError> {
    let Some(&(_, unit, lo, hi)) = PLAUSIBLE.iter().find(|p| p.0 == option) else {
        return Ok(());
    };
    if value.is_finite() && value > 0.0 && !(lo..=hi).contains(&value) {
        return Err(InputError::new(
            option,
            format!(
                "{value:e} {unit} is outside what zvs-timing accepts ({} to {}); is the unit prefix right?",
                crate::units::format_si(lo, unit),
                crate::units::format_si(hi, unit)
            ),
        ));
    }
    Ok(())
}
