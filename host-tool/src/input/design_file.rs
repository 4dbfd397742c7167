//! What a design file may say, as the TOML parser reads it (serde): keys,
//! their types and defaults, numbers with engineering prefixes. Nothing is
//! checked here beyond the types; [`crate::input::design`] validates.

use serde::{Deserialize, Deserializer};

use crate::units::parse_quantity;

macro_rules! si_number {
    ($name:ident, $unit:literal, $what:literal) => {
        #[doc = concat!("A number in ", $what, " (`", $unit, "`): a TOML number or a string with an engineering prefix.")]
        #[derive(Debug, Clone, Copy, PartialEq)]
        pub struct $name(pub f64);

        impl<'de> Deserialize<'de> for $name {
            fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
                #[derive(Deserialize)]
                #[serde(untagged)]
                enum Raw {
                    N(f64),
                    S(String),
                }
                match Raw::deserialize(d)? {
                    Raw::N(v) => Ok($name(v)),
                    Raw::S(s) => parse_quantity(&s, $unit).map($name).map_err(serde::de::Error::custom),
                }
            }
        }
    };
}

si_number!(Henry, "H", "henry");
si_number!(Farad, "F", "farad");
si_number!(Volt, "V", "volt");
si_number!(Amp, "A", "ampere");
si_number!(Hertz, "Hz", "hertz");
si_number!(Second, "s", "second");
si_number!(Ohm, "ohm", "ohm");

/// Which table layouts generation may choose from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum LayoutChoice {
    /// The smallest that meets `max_error_ticks` (default).
    #[default]
    Auto,
    /// Only the 1-D code-ratio layout, uniform.
    Ratio,
    /// Only the 1-D code-ratio layout, log-spaced.
    LogRatio,
    /// Only the division-free 1-D layout uniform in log(ratio).
    LogUniform,
    /// Only the 2-D code grid.
    Grid,
    /// Only the 1-D code-ratio layout with a reciprocal table instead of
    /// the division (fastest on cores without a divide instruction).
    RecipRatio,
    /// Only the 2-D layout of log(code ratio) by voltage code (division-free;
    /// follows the voltage dependence a Coss curve adds).
    LogVolt,
    /// Only the 2-D layout of the current's margin over the ZVS boundary by
    /// voltage code (no division, no logarithm; the boundary on a column).
    Margin,
    /// Only the 2-D layout of the code ratio by voltage code (one division,
    /// a single instruction on cores with a divide instruction).
    RatioVolt,
}

/// What to command below the ZVS boundary.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum FallbackChoice {
    /// Turn on at the valley of the ring (default).
    #[default]
    Valley,
    /// A fixed delay, `fallback_ticks`.
    Fixed,
}

/// The `[adc]` table.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AdcFile {
    /// Converter resolution, bits (8 to 16).
    pub bits: u8,
    /// Input-voltage scale, volt per code (code 0 reads 0 V).
    pub vin_volts_per_code: f64,
    /// Output-current scale, ampere per code.
    pub io_amps_per_code: f64,
    /// Code that reads 0 A. Default 0.
    #[serde(default)]
    pub io_zero_code: u16,
}

/// The `[timer]` table.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TimerFile {
    /// Timer clock.
    pub clock_hz: Hertz,
    /// Counter width, bits. Default 16.
    #[serde(default = "default_counter_bits")]
    pub counter_bits: u8,
    /// Gate-driver turn-on propagation delay. Default 0.
    #[serde(default = "zero_s")]
    pub driver_delay: Second,
    /// Gate-driver turn-off propagation delay. Default 0.
    #[serde(default = "zero_s")]
    pub driver_delay_off: Second,
    /// Aim point in the ZVS window, 0 = earliest. Default 0.25.
    #[serde(default = "default_position")]
    pub position: f64,
}

/// A fraction written as a number (`0.05`) or a percentage (`"5%"`).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Fraction(pub f64);

impl<'de> Deserialize<'de> for Fraction {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        #[derive(Deserialize)]
        #[serde(untagged)]
        enum Raw {
            N(f64),
            S(String),
        }
        match Raw::deserialize(d)? {
            Raw::N(v) => Ok(Fraction(v)),
            Raw::S(s) => crate::units::parse_fraction(&s)
                .map(Fraction)
                .ok_or_else(|| {
                    serde::de::Error::custom(format!(
                        "`{s}` is not a fraction (write 0.05 or \"5%\")"
                    ))
                }),
        }
    }
}

/// The `[tolerance]` table: what varies from board to board and cycle to
/// cycle. Tables aim inside the window every board within it shares
/// ([`crate::model::robust_aim`]), verification measures the margins to that
/// window, and `zvs-timing montecarlo` draws boards and cycles from it.
/// Each bound is a half-width (a value
/// lies within nominal plus or minus it).
#[derive(Debug, Clone, Copy, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ToleranceFile {
    /// Relative tolerance of Lr.
    #[serde(default)]
    pub lr: Fraction,
    /// Relative tolerance of the whole switch capacitance (the external
    /// capacitor and the Coss curve scale together).
    #[serde(default)]
    pub cr: Fraction,
    /// Gain error of the input-voltage channel, relative.
    #[serde(default)]
    pub vin_gain: Fraction,
    /// Gain error of the output-current channel, relative.
    #[serde(default)]
    pub io_gain: Fraction,
    /// Offset error of the input-voltage channel, codes.
    #[serde(default)]
    pub vin_offset_codes: f64,
    /// Offset error of the output-current channel, codes.
    #[serde(default)]
    pub io_offset_codes: f64,
    /// Sensing noise, codes (peak, each channel, each conversion).
    #[serde(default)]
    pub noise_codes: f64,
    /// Timer and driver jitter, second (peak).
    #[serde(default = "zero_s")]
    pub jitter: Second,
}

/// The `[trim]` table as written.
#[derive(Debug, Clone, Copy, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TrimFile {
    /// Each update moves a region's correction `2^-gain` of the way to the
    /// residual (1 to 12). Default 4 (within 1/e in 16 updates).
    #[serde(default = "default_gain")]
    pub gain: u8,
    /// Largest correction either way, second. Default 4 ticks.
    #[serde(default)]
    pub envelope: Option<Second>,
    /// From the switch voltage's crossing of the comparator's threshold to
    /// the captured edge (comparator and capture), second. Required: it is
    /// the board's.
    pub comparator_delay: Second,
    /// The switch voltage at which the comparator trips, volt (0 to 50):
    /// the model predicts the crossing of it, which comes before the zero
    /// (long before, next to the ZVS boundary, where the swing ends
    /// slowly). Default 0.
    #[serde(default)]
    pub comparator_threshold: Option<Volt>,
    /// A residual beyond this is no capture of the opening, second.
    /// Default 4 envelopes.
    #[serde(default)]
    pub plausible: Option<Second>,
    /// A residual this far from its region's recent mean is noise, second.
    /// Default 3 ticks.
    #[serde(default)]
    pub noise: Option<Second>,
    /// Cycles of fault history (a power of two up to 128). Default 64.
    #[serde(default = "default_window")]
    pub window: u16,
    /// Cycles without a capture in the window that freeze the trim.
    /// Default 8.
    #[serde(default = "default_limit")]
    pub missing_limit: u16,
    /// Implausible captures in the window that freeze it. Default 8.
    #[serde(default = "default_limit")]
    pub implausible_limit: u16,
    /// Noisy captures in the window that freeze it. Default 8.
    #[serde(default = "default_limit")]
    pub noisy_limit: u16,
    /// At most this many bins of the input voltage by this many of the
    /// output current, each a power of two codes wide. Default [8, 16].
    #[serde(default = "default_regions")]
    pub regions: [u16; 2],
}

fn default_gain() -> u8 {
    4
}
fn default_window() -> u16 {
    64
}
fn default_limit() -> u16 {
    8
}
fn default_regions() -> [u16; 2] {
    [8, 16]
}

/// The `[table]` table.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TableFile {
    /// Largest allowed error of the commanded delay against the exact model,
    /// ticks (including the final rounding). Default 1.0.
    #[serde(default = "default_max_error")]
    pub max_error_ticks: f64,
    /// Policy below the ZVS boundary. Default `valley`.
    #[serde(default)]
    pub fallback: FallbackChoice,
    /// Delay for `fallback = "fixed"`, ticks.
    #[serde(default)]
    pub fallback_ticks: Option<u32>,
    /// Layouts to consider. Default `auto`.
    #[serde(default)]
    pub layout: LayoutChoice,
}

impl Default for TableFile {
    fn default() -> Self {
        Self {
            max_error_ticks: default_max_error(),
            fallback: FallbackChoice::Valley,
            fallback_ticks: None,
            layout: LayoutChoice::Auto,
        }
    }
}

fn default_counter_bits() -> u8 {
    16
}
fn zero_s() -> Second {
    Second(0.0)
}
fn default_position() -> f64 {
    0.25
}
fn default_max_error() -> f64 {
    1.0
}

/// The `topology` a half-bridge leg's design file names
/// ([`crate::input::leg_design`]).
pub const LEG_TOPOLOGY: &str = "half-bridge-leg";

/// Whether design-file text declares a half-bridge leg (`topology =
/// "half-bridge-leg"`); false for text that is no TOML table.
#[must_use]
pub fn is_leg(text: &str) -> bool {
    text.parse::<toml::Table>()
        .ok()
        .and_then(|t| {
            t.get("topology")
                .and_then(|v| v.as_str().map(str::to_owned))
        })
        .is_some_and(|t| t == LEG_TOPOLOGY)
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub(crate) enum TopologyFile {
    Buck,
    Boost,
    BuckBoost,
}

/// A design file as written.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DesignFile {
    /// File stem of the outputs and prefix of C symbols.
    pub name: String,
    #[serde(default = "default_topology")]
    pub(crate) topology: TopologyFile,
    /// Resonant inductance.
    pub lr: Henry,
    /// Resonant capacitance across the switch: with no `coss`, the whole of
    /// it (external plus the MOSFET's, taken as constant); with `coss`, the
    /// fixed part in parallel with the curve (optional).
    #[serde(default)]
    pub cr: Option<Farad>,
    /// CSV file of the MOSFET's Coss curve (`volts,farads`), relative to the
    /// design file.
    #[serde(default)]
    pub coss: Option<String>,
    /// Scale on the Coss curve's capacitances (1: as in the file): what a
    /// bring-up fit (`zvs-timing fit`) finds the board's MOSFET to have.
    #[serde(default)]
    pub coss_scale: Option<f64>,
    /// Series resistance of the resonant loop (inductor, capacitor ESR,
    /// switch and traces), ohm.
    #[serde(default)]
    pub r_tank: Option<Ohm>,
    /// Input-voltage range [min, max].
    pub vin: Vec<Volt>,
    /// Output-current range [min, max].
    pub io: Vec<Amp>,
    /// Output voltage (boost and buck-boost need it; it sets the stress).
    #[serde(default)]
    pub vout: Option<Volt>,
    /// ADC description.
    pub adc: AdcFile,
    /// Timer and gate driver.
    pub timer: TimerFile,
    /// Table requirements.
    #[serde(default)]
    pub table: TableFile,
    /// Board-to-board and cycle-to-cycle variation (for `montecarlo`).
    #[serde(default)]
    pub tolerance: Option<ToleranceFile>,
    /// The online trim's settings (optional).
    #[serde(default)]
    pub trim: Option<TrimFile>,
}

fn default_topology() -> TopologyFile {
    TopologyFile::Buck
}
