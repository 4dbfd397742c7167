//! The one error type of timing-core.
//!
//! Errors are raised when a tank, an operating point or a timer is built
//! (validation), never on a per-cycle path that takes validated types.

use core::fmt;

/// Which physical quantity an [`Error`] is about, with its SI unit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[non_exhaustive]
pub enum Quantity {
    /// Resonant inductance Lr, henry.
    ResonantInductance,
    /// Resonant capacitance Cr, farad.
    ResonantCapacitance,
    /// Characteristic impedance Z0 = sqrt(Lr/Cr), ohm.
    CharacteristicImpedance,
    /// Resonant angular frequency w0 = 1/sqrt(Lr*Cr), rad/s.
    ResonantFrequency,
    /// Converter input voltage, volt.
    InputVoltage,
    /// Converter output voltage, volt.
    OutputVoltage,
    /// Converter output (load) current, ampere.
    OutputCurrent,
    /// Switch-cell voltage V, volt.
    CellVoltage,
    /// Switch-cell current I, ampere.
    CellCurrent,
    /// Normalised load J = I*Z0/V, dimensionless.
    NormalizedLoad,
    /// A time interval of the transition, second.
    Interval,
    /// Timer clock, hertz.
    TimerClock,
    /// Timer counter width, bits.
    CounterBits,
    /// Gate-driver turn-on propagation delay, second.
    TurnOnDelay,
    /// Gate-driver turn-off propagation delay, second.
    TurnOffDelay,
    /// Aim point inside the ZVS window, 0 = earliest, 1 = latest.
    WindowPosition,
    /// Commanded turn-on delay, timer ticks.
    DelayTicks,
    /// Switching frequency fs, hertz.
    SwitchingFrequency,
    /// Conversion ratio M = Vout/Vin, dimensionless.
    ConversionRatio,
    /// ADC scale of the input-voltage channel, volt per code.
    VoltsPerCode,
    /// ADC scale of the output-current channel, ampere per code.
    AmpsPerCode,
    /// A raw ADC code (a range bound or the current sensor's zero).
    AdcCode,
    /// A coefficient of a closed-form method (see `closed_form`).
    MethodCoefficient,
    /// A voltage point of an output-capacitance curve, volt.
    CossVoltage,
    /// A capacitance point of an output-capacitance curve, farad.
    CossCapacitance,
    /// Series resistance of the resonant loop, ohm.
    TankResistance,
    /// Bus voltage across a half-bridge leg, volt.
    BusVoltage,
    /// Current out of a leg's switch node into its inductor at the
    /// switching instant, ampere (signed).
    NodeCurrent,
    /// Inductance the leg's node swings against, henry.
    TransitionInductance,
    /// Capacitance added at a leg's switch node, farad.
    NodeCapacitance,
    /// Voltage at the far end of a leg's inductor, volt.
    FarEndVoltage,
    /// Body-diode conduction accepted after a leg's swing, second.
    DiodeConduction,
    /// Least dead time a leg's generator commands, second.
    MinimumDeadTime,
    /// Regions of an online trim's store.
    TrimRegions,
    /// An online trim's gain: each update moves the correction 2^-n of
    /// the way to the residual.
    TrimGain,
    /// The largest correction an online trim applies either way, ticks.
    TrimEnvelope,
    /// Delay from the switch voltage's zero to its captured edge, ticks.
    ComparatorDelay,
    /// A residual or a fault count at which an online trim rejects a
    /// capture or freezes.
    TrimThreshold,
}

impl Quantity {
    /// Human name with symbol and unit, e.g. `"resonant inductance Lr (H)"`.
    #[must_use]
    pub const fn describe(self) -> &'static str {
        match self {
            Quantity::ResonantInductance => "resonant inductance Lr (H)",
            Quantity::ResonantCapacitance => "resonant capacitance Cr (F)",
            Quantity::CharacteristicImpedance => "characteristic impedance Z0 (ohm)",
            Quantity::ResonantFrequency => "resonant angular frequency w0 (rad/s)",
            Quantity::InputVoltage => "input voltage Vin (V)",
            Quantity::OutputVoltage => "output voltage Vout (V)",
            Quantity::OutputCurrent => "output current Io (A)",
            Quantity::CellVoltage => "switch-cell voltage V (V)",
            Quantity::CellCurrent => "switch-cell current I (A)",
            Quantity::NormalizedLoad => "normalised load J = I*Z0/V",
            Quantity::Interval => "transition interval (s)",
            Quantity::TimerClock => "timer clock (Hz)",
            Quantity::CounterBits => "timer counter width (bits)",
            Quantity::TurnOnDelay => "gate-driver turn-on delay (s)",
            Quantity::TurnOffDelay => "gate-driver turn-off delay (s)",
            Quantity::WindowPosition => "position in the ZVS window (0..1)",
            Quantity::DelayTicks => "turn-on delay (timer ticks)",
            Quantity::SwitchingFrequency => "switching frequency fs (Hz)",
            Quantity::ConversionRatio => "conversion ratio M = Vout/Vin",
            Quantity::VoltsPerCode => "input-voltage ADC scale (V per code)",
            Quantity::AmpsPerCode => "output-current ADC scale (A per code)",
            Quantity::AdcCode => "ADC code",
            Quantity::MethodCoefficient => "closed-form method coefficient",
            Quantity::CossVoltage => "Coss curve voltage (V)",
            Quantity::CossCapacitance => "Coss curve capacitance (F)",
            Quantity::TankResistance => "tank series resistance (ohm)",
            Quantity::BusVoltage => "bus voltage Vbus (V)",
            Quantity::NodeCurrent => "switch-node current at the switching instant (A)",
            Quantity::TransitionInductance => "transition inductance (H)",
            Quantity::NodeCapacitance => "capacitance added at the switch node (F)",
            Quantity::FarEndVoltage => "voltage at the inductor's far end (V)",
            Quantity::DiodeConduction => "accepted body-diode conduction (s)",
            Quantity::MinimumDeadTime => "minimum dead time (s)",
            Quantity::TrimRegions => "trim regions",
            Quantity::TrimGain => "trim gain (shift)",
            Quantity::TrimEnvelope => "trim envelope (ticks)",
            Quantity::ComparatorDelay => "comparator delay (ticks)",
            Quantity::TrimThreshold => "trim fault threshold",
        }
    }
}

impl fmt::Display for Quantity {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.describe())
    }
}

/// Everything that can go wrong in timing-core. Values are reported in SI
/// units as `f64`, whatever precision the computation used.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[non_exhaustive]
pub enum Error {
    /// The value is NaN or infinite.
    NotFinite {
        /// What was given.
        quantity: Quantity,
        /// The value given.
        value: f64,
    },
    /// The value must be strictly positive (it was zero or negative).
    NotPositive {
        /// What was given.
        quantity: Quantity,
        /// The value given.
        value: f64,
    },
    /// The value must not be negative.
    Negative {
        /// What was given.
        quantity: Quantity,
        /// The value given.
        value: f64,
    },
    /// The value is subnormal: too small to compute with reliably.
    Subnormal {
        /// What was given.
        quantity: Quantity,
        /// The value given.
        value: f64,
    },
    /// The value lies outside the range `[min, max]` it must be in.
    OutOfRange {
        /// What was given.
        quantity: Quantity,
        /// The value given.
        value: f64,
        /// Smallest allowed value.
        min: f64,
        /// Largest allowed value.
        max: f64,
    },
    /// Valid inputs whose result does not fit the float type (overflow to
    /// infinity or underflow to zero), e.g. a 1e300 H inductor.
    Overflow {
        /// The derived quantity that did not fit.
        quantity: Quantity,
    },
    /// The commanded delay needs more ticks than the timer counter holds.
    TickOverflow {
        /// Ticks needed (rounded).
        ticks: f64,
        /// Largest count the timer holds.
        max_ticks: u32,
    },
    /// The driver's net turn-on lead is longer than the time to the target:
    /// no non-negative delay from the turn-off command reaches it.
    DelayNegative {
        /// The delay that would be needed, second (negative).
        delay_s: f64,
    },
    /// ZVS is impossible at this point (J < 1) and the request needs it.
    ZvsLost {
        /// The normalised load J = I*Z0/V at the point.
        normalized_load: f64,
    },
    /// The switching frequency leaves no on-time: the resonant transition
    /// alone lasts longer than one switching period.
    FrequencyTooHigh {
        /// Frequency asked for, hertz.
        fs_hz: f64,
        /// Highest frequency with a non-negative on-time, hertz.
        max_hz: f64,
    },
}

/// A value as people read it: plain for 1e-3 <= |v| < 1e6 (and 0), else
/// with an exponent.
struct Value(f64);

impl fmt::Display for Value {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let v = self.0;
        let a = libm::fabs(v);
        if v.is_nan() {
            f.write_str("NaN")
        } else if v == 0.0 || (1e-3..1e6).contains(&a) || a.is_infinite() {
            write!(f, "{v}")
        } else {
            write!(f, "{v:e}")
        }
    }
}

fn write_value(f: &mut fmt::Formatter<'_>, v: f64) -> fmt::Result {
    write!(f, "{}", Value(v))
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            Error::NotFinite { quantity, value } => {
                write!(f, "{quantity} must be a finite number, got ")?;
                write_value(f, value)
            }
            Error::NotPositive { quantity, value } => {
                write!(f, "{quantity} must be greater than zero, got ")?;
                write_value(f, value)
            }
            Error::Negative { quantity, value } => {
                write!(f, "{quantity} must not be negative, got ")?;
                write_value(f, value)
            }
            Error::Subnormal { quantity, value } => {
                write!(f, "{quantity} is too small to compute with (subnormal), got ")?;
                write_value(f, value)
            }
            Error::OutOfRange {
                quantity,
                value,
                min,
                max,
            } => {
                write!(f, "{quantity} must lie in [{}, {}], got ", Value(min), Value(max))?;
                write_value(f, value)
            }
            Error::Overflow { quantity } => write!(
                f,
                "{quantity} does not fit the number type: the inputs are far outside any real converter"
            ),
            Error::TickOverflow { ticks, max_ticks } => write!(
                f,
                "the turn-on delay needs {ticks:.0} ticks, more than the timer counter's limit of {max_ticks}"
            ),
            Error::DelayNegative { delay_s } => write!(
                f,
                "the gate driver's turn-on lead is longer than the time to the target: the delay would be {} s",
                Value(delay_s)
            ),
            Error::ZvsLost { normalized_load } => write!(
                f,
                "ZVS is impossible at this point: normalised load J = {normalized_load:.4} is below 1"
            ),
            Error::FrequencyTooHigh { fs_hz, max_hz } => write!(
                f,
                "switching frequency {} Hz leaves no on-time; the resonant transition allows at most {} Hz",
                Value(fs_hz),
                Value(max_hz)
            ),
        }
    }
}

impl core::error::Error for Error {}

impl Error {
    /// The quantity the error names, where it names one.
    #[must_use]
    pub const fn quantity(&self) -> Option<Quantity> {
        match *self {
            Error::NotFinite { quantity, .. }
            | Error::NotPositive { quantity, .. }
            | Error::Negative { quantity, .. }
            | Error::Subnormal { quantity, .. }
            | Error::OutOfRange { quantity, .. }
            | Error::Overflow { quantity } => Some(quantity),
            Error::TickOverflow { .. } => Some(Quantity::DelayTicks),
            Error::DelayNegative { .. } => Some(Quantity::TurnOnDelay),
            Error::ZvsLost { .. } => Some(Quantity::NormalizedLoad),
            Error::FrequencyTooHigh { .. } => Some(Quantity::SwitchingFrequency),
        }
    }
}

/// Validate a strictly positive, normal input value.
pub(crate) fn positive<F: crate::Real>(quantity: Quantity, value: F) -> Result<F, Error> {
    let v = value.to_f64();
    if !value.is_finite() {
        Err(Error::NotFinite { quantity, value: v })
    } else if value <= F::ZERO {
        Err(Error::NotPositive { quantity, value: v })
    } else if !value.is_normal() {
        Err(Error::Subnormal { quantity, value: v })
    } else {
        Ok(value)
    }
}

/// Validate a finite, non-negative input value (zero allowed, subnormals refused).
pub(crate) fn non_negative<F: crate::Real>(quantity: Quantity, value: F) -> Result<F, Error> {
    let v = value.to_f64();
    if !value.is_finite() {
        Err(Error::NotFinite { quantity, value: v })
    } else if value < F::ZERO {
        Err(Error::Negative { quantity, value: v })
    } else if value > F::ZERO && !value.is_normal() {
        Err(Error::Subnormal { quantity, value: v })
    } else {
        Ok(value)
    }
}

/// Check a derived result: finite and normal, else [`Error::Overflow`].
pub(crate) fn derived<F: crate::Real>(quantity: Quantity, value: F) -> Result<F, Error> {
    if value.is_normal() {
        Ok(value)
    } else {
        Err(Error::Overflow { quantity })
    }
}
