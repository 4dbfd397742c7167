//! Why a design file's values cannot be used: one variant a fault, each
//! naming the key and the value at fault.

/// What makes a design file's values impossible or inconsistent: each
/// names the key and the value at fault (its text is the sentence
/// `zvs-timing` prints).
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum Invalid {
    /// The name is not a C identifier.
    #[error("name `{0}` must be a C identifier (letters, digits, _; not starting with a digit): it prefixes the C symbols")]
    Name(String),
    /// The Coss curve file could not be used.
    #[error("coss: {0}")]
    Coss(#[from] crate::input::coss_csv::CossCsvError),
    /// `coss_scale` that is not a positive number, or without a curve.
    #[error("coss_scale = {0}: {1}")]
    CossScale(f64, &'static str),
    /// Neither `cr` nor a Coss curve.
    #[error("cr is missing: give the resonant capacitance, or a Coss curve (coss = \"FILE.csv\") with cr as the external part")]
    MissingCr,
    /// timing-core refused the value of `key`.
    #[error("{key}: {source}")]
    Refused {
        /// The design-file key (or keys) at fault.
        key: &'static str,
        /// timing-core's error, which names the quantity and the value.
        source: timing_core::Error,
    },
    /// The lossy tank cannot reach ZVS at a cell voltage of the range.
    #[error("r_tank: no ZVS at {cell_v} V cell voltage: {source}")]
    NoZvs {
        /// Cell voltage, volt.
        cell_v: f64,
        /// timing-core's error.
        source: timing_core::Error,
    },
    /// An operating point of the range is no valid point of the cell.
    #[error("at {vin_v} V, {io_a} A: {source}")]
    Point {
        /// Input voltage, volt.
        vin_v: f64,
        /// Output current, ampere (NaN where only the voltage matters).
        io_a: f64,
        /// timing-core's error.
        source: timing_core::Error,
    },
    /// A range given with other than two values.
    #[error("{key} = {given}: a range is two values, `[low, high]`")]
    RangeLength {
        /// `vin` or `io`.
        key: &'static str,
        /// The values given, as written.
        given: String,
    },
    /// A range end that is not a positive number.
    #[error("{key} = {value}: the range must be positive (at zero current the valley delay is unbounded; start the range at the lightest load the table must serve)")]
    RangeNotPositive {
        /// `vin` or `io`.
        key: &'static str,
        /// The value given.
        value: f64,
    },
    /// A range whose first value is not below its second.
    #[error("{key} = [{lo}, {hi}] is an empty range: the first value must be below the second")]
    EmptyRange {
        /// `vin` or `io`.
        key: &'static str,
        /// First value.
        lo: f64,
        /// Second value.
        hi: f64,
    },
    /// A boost or buck-boost without `vout`.
    #[error("a {topology} design needs `vout`")]
    NeedsVout {
        /// Topology name.
        topology: &'static str,
    },
    /// `vout` not a positive voltage.
    #[error("vout = {0} must be a positive voltage")]
    VoutNotPositive(f64),
    /// `vout` on the wrong side of the input range for the topology.
    #[error("vout = {vout} V must {rule} ({limit} V) for a {topology}")]
    VoutOutside {
        /// The value given, volt.
        vout: f64,
        /// What it must be, e.g. "exceed the highest input voltage".
        rule: &'static str,
        /// The input voltage it must clear, volt.
        limit: f64,
        /// Topology name.
        topology: &'static str,
    },
    /// ADC resolution out of range.
    #[error("adc.bits = {0} must be 8 to 16")]
    AdcBits(u8),
    /// An ADC scale that is not a positive number.
    #[error("{key} = {value} must be a positive scale")]
    Scale {
        /// The key.
        key: &'static str,
        /// The value given.
        value: f64,
    },
    /// The current sensor's zero beyond the ADC's codes.
    #[error("adc.io_zero_code = {code} is beyond the {bits}-bit ADC's {max_code}")]
    ZeroCode {
        /// The value given.
        code: u16,
        /// ADC bits.
        bits: u8,
        /// Largest code.
        max_code: u32,
    },
    /// A range that reaches beyond the ADC's full scale.
    #[error("{key} reaches {hi} {unit}, code {code:.0}, beyond the {bits}-bit ADC's full scale of {full_scale:.4} {unit} (code {max_code})")]
    BeyondFullScale {
        /// `vin` or `io`.
        key: &'static str,
        /// The range's top, in `unit`.
        hi: f64,
        /// `V` or `A`.
        unit: &'static str,
        /// The code it would need.
        code: f64,
        /// ADC bits.
        bits: u8,
        /// Full scale, in `unit`.
        full_scale: f64,
        /// Largest code.
        max_code: u32,
    },
    /// A range that holds no ADC code.
    #[error("{key} = [{lo}, {hi}] {unit} holds no usable ADC code at {scale} {unit}/code")]
    NoCodes {
        /// `vin` or `io`.
        key: &'static str,
        /// Range start.
        lo: f64,
        /// Range end.
        hi: f64,
        /// `V` or `A`.
        unit: &'static str,
        /// Scale, `unit` per code.
        scale: f64,
    },
    /// The current range starts at or below the sensor's zero code.
    #[error(
        "io range starts at the sensor zero: the lightest load must read above adc.io_zero_code"
    )]
    RangeAtZero,
    /// An error budget below what rounding alone costs.
    #[error("table.max_error_ticks = {0} must be at least 0.5: rounding to whole ticks alone costs half a tick")]
    MaxError(f64),
    /// A fixed fallback beyond the counter.
    #[error("table.fallback_ticks = {ticks} exceeds the {bits}-bit counter's {max}")]
    FallbackTicks {
        /// The value given.
        ticks: u32,
        /// Counter bits.
        bits: u8,
        /// Largest count.
        max: u32,
    },
    /// A fixed fallback without its delay.
    #[error("table.fallback = \"fixed\" needs table.fallback_ticks")]
    FallbackNeedsTicks,
    /// A half-bridge leg's design file given where only the resonant cell
    /// is served.
    #[error("topology = \"half-bridge-leg\": this command serves the resonant cell; a half-bridge leg's design is served by `point --design`, `table`, `verify`, `plot`, `netlist` and `montecarlo` (not by `size` or `fit`)")]
    LegNotServed,
    /// A value that must be above zero.
    #[error("{key} = {value} must be above zero")]
    NotPositive {
        /// The key.
        key: &'static str,
        /// The value given.
        value: f64,
    },
    /// A leg's far end off the bus.
    #[error("far_end = {value}: {why}")]
    FarEnd {
        /// The value given (volt, or the fraction of the bus).
        value: f64,
        /// What is valid.
        why: String,
    },
    /// A tolerance half-width out of range.
    #[error("{key} = {value} must lie in [0, {max}] (a half-width)")]
    Tolerance {
        /// The key.
        key: &'static str,
        /// The value given.
        value: f64,
        /// Largest allowed.
        max: f64,
    },
}

/// Whether `name` is a C identifier (letters, digits, `_`; not starting
/// with a digit): names prefix the C symbols of the exports.
#[must_use]
pub fn c_identifier(name: &str) -> bool {
    name.chars()
        .next()
        .is_some_and(|c| c.is_ascii_alphabetic() || c == '_')
        && name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_')
}

/// The ADC codes that read inside `[lo, hi]` (`unit`) at `scale` per code
/// with `zero` the code of 0 on a `bits`-bit converter; refused naming
/// `key` where the range reaches beyond full scale or holds no code above 0.
///
/// # Errors
/// [`Invalid::BeyondFullScale`] or [`Invalid::NoCodes`].
pub fn code_range(
    key: &'static str,
    lo: f64,
    hi: f64,
    scale: f64,
    zero: f64,
    unit: &'static str,
    bits: u8,
) -> Result<timing_core::CodeRange, Invalid> {
    let max_code = (1u32 << bits) - 1;
    let c_lo = (lo / scale + zero - 1e-9).ceil();
    let c_hi = (hi / scale + zero + 1e-9).floor();
    if c_hi > f64::from(max_code) {
        return Err(Invalid::BeyondFullScale {
            key,
            hi,
            unit,
            code: c_hi,
            bits,
            full_scale: (f64::from(max_code) - zero) * scale,
            max_code,
        });
    }
    if c_lo > c_hi || c_lo < 1.0 {
        return Err(Invalid::NoCodes {
            key,
            lo,
            hi,
            unit,
            scale,
        });
    }
    Ok(timing_core::CodeRange {
        lo: c_lo as u16,
        hi: c_hi as u16,
    })
}

impl From<crate::tank::stand_in::StandInError> for Invalid {
    fn from(e: crate::tank::stand_in::StandInError) -> Self {
        use crate::tank::stand_in::StandInError as E;
        match e {
            E::Tank(source) => Self::Refused {
                key: "lr/cr",
                source,
            },
            E::Position(source) => Self::Refused {
                key: "timer.position",
                source,
            },
            E::Point {
                vin_v,
                io_a,
                source,
            } => Self::Point {
                vin_v,
                io_a,
                source,
            },
            E::NoZvs { cell_v, source } => Self::NoZvs { cell_v, source },
        }
    }
}

/// An operating point given on the command line (`--vin`, `--io`) that the
/// design's cell cannot run, naming the option, the value and what is
/// valid.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{option} = {value} {unit}: {why}")]
pub struct BadPoint {
    /// The option at fault.
    pub option: &'static str,
    /// Its value.
    pub value: f64,
    /// Its unit.
    pub unit: &'static str,
    /// What would be valid.
    pub why: String,
}
