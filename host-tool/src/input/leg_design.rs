//! Design files of a half-bridge leg (`topology = "half-bridge-leg"`):
//! the keys as the TOML parser reads them, and their validation into a
//! [`LegSpec`], each refusal naming the key and the value.
//!
//! ```toml
//! name = "ferry_leg"
//! topology = "half-bridge-leg"
//! vbus = [40, 56]              # volts, the sensed bus range
//! l = "4.7u"                   # node to the inductor's far end
//! far_end = 12                 # volts, or "0.5 bus"
//! coss_low = "ferry_coss.csv"  # coss_high defaults to the same curve
//! c_ext = "100p"
//! r_loop = "30m"
//! max_diode = "40n"            # body-diode conduction accepted
//!
//! [falling_edge]               # high side off, low side on
//! current = [0.5, 8]           # amps out of the node at the instant
//! [rising_edge]                # low side off, high side on
//! current = [-5, -0.3]
//! ```
//! plus `[adc]`, `[dead_time]`, `[drivers]`, `[table]` and `[tolerance]`
//! (docs/design-file.md).

use serde::{Deserialize, Deserializer};
use timing_core::coss::CossPoint;
use timing_core::leg::{DriverDelays, Edge, LegTimer, ShortSwing};
use timing_core::{CodeRange, WindowPosition};

use crate::input::design::{parse_design, read_design, DesignError};
pub use crate::input::design_file::{is_leg, LEG_TOPOLOGY};
use crate::input::design_file::{Amp, Farad, Fraction, Henry, Ohm, Second, Volt};
use crate::input::invalid::{c_identifier, Invalid};
use crate::tank::leg_grid::{FarEnd, LegAsBuilt, LegSpread};
use crate::units::parse_quantity;

/// `far_end` as written: volts, or a fraction of the bus (`"0.5 bus"`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FarEndFile(pub FarEnd);

impl<'de> Deserialize<'de> for FarEndFile {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        #[derive(Deserialize)]
        #[serde(untagged)]
        enum Raw {
            N(f64),
            S(String),
        }
        match Raw::deserialize(d)? {
            Raw::N(v) => Ok(Self(FarEnd::Volts(v))),
            Raw::S(s) => match s.trim().strip_suffix("bus") {
                Some(f) => f
                    .trim()
                    .parse::<f64>()
                    .map(|f| Self(FarEnd::OfBus(f)))
                    .map_err(|_| {
                        serde::de::Error::custom(format!(
                            "`{s}` is not a fraction of the bus (write \"0.5 bus\")"
                        ))
                    }),
                None => parse_quantity(&s, "V")
                    .map(|v| Self(FarEnd::Volts(v)))
                    .map_err(serde::de::Error::custom),
            },
        }
    }
}

/// `[falling_edge]` or `[rising_edge]`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EdgeFile {
    /// Signed current out of the node at the switching instant, [min, max].
    pub current: Vec<Amp>,
}

/// `[adc]` of a leg.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LegAdcFile {
    /// Converter resolution, bits (8 to 16).
    pub bits: u8,
    /// Bus-voltage scale, volt per code (code 0 reads 0 V).
    pub vbus_volts_per_code: f64,
    /// Current scale, ampere per code.
    pub current_amps_per_code: f64,
    /// Code that reads 0 A.
    pub current_zero_code: u16,
}

/// What to command where the swing stops short.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum ShortSwingFile {
    /// The swing's extremum (default).
    #[default]
    Extremum,
    /// The minimum dead time.
    Minimum,
}

/// `[dead_time]`: the dead-time generator.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DeadTimeFile {
    /// Step of the generator.
    pub step: Second,
    /// Counter width, bits. Default 8.
    #[serde(default = "default_bits")]
    pub counter_bits: u8,
    /// Least dead time ever commanded (drivers' skew and margin against
    /// shoot-through). Default 0.
    #[serde(default)]
    pub min_dead: Option<Second>,
    /// Aim point in the window, 0 = earliest. Default 0.25.
    #[serde(default = "default_position")]
    pub position: f64,
    /// Where the swing stops short. Default `extremum`.
    #[serde(default)]
    pub short_swing: ShortSwingFile,
}

/// `[drivers]`: both gate drivers' propagation delays (default 0).
#[derive(Debug, Clone, Copy, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DriversFile {
    /// High side, turn-on.
    #[serde(default)]
    pub high_on: Option<Second>,
    /// High side, turn-off.
    #[serde(default)]
    pub high_off: Option<Second>,
    /// Low side, turn-on.
    #[serde(default)]
    pub low_on: Option<Second>,
    /// Low side, turn-off.
    #[serde(default)]
    pub low_off: Option<Second>,
}

/// `[table]` of a leg.
#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LegTableFile {
    /// Largest error of the commanded dead time against the exact model,
    /// steps. Default 1.0.
    #[serde(default = "default_max_error")]
    pub max_error_ticks: f64,
}

/// `[tolerance]` of a leg (half-widths).
#[derive(Debug, Clone, Copy, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LegToleranceFile {
    /// Transition inductance, relative.
    #[serde(default)]
    pub l: Fraction,
    /// Whole node capacitance (curves and added capacitor), relative.
    #[serde(default)]
    pub c: Fraction,
    /// Far-end voltage, relative.
    #[serde(default)]
    pub far_end: Fraction,
    /// Gain error of the bus-voltage channel, relative.
    #[serde(default)]
    pub vbus_gain: Fraction,
    /// Gain error of the current channel, relative.
    #[serde(default)]
    pub current_gain: Fraction,
    /// Offset of the bus-voltage channel, codes.
    #[serde(default)]
    pub vbus_offset_codes: f64,
    /// Offset of the current channel, codes.
    #[serde(default)]
    pub current_offset_codes: f64,
    /// Peak sensing noise, codes.
    #[serde(default)]
    pub noise_codes: f64,
    /// Peak timer and driver jitter.
    #[serde(default)]
    pub jitter: Option<Second>,
}

/// A leg's design file as written.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LegDesignFile {
    /// File stem of the outputs and prefix of C symbols.
    pub name: String,
    /// `half-bridge-leg`.
    pub topology: String,
    /// Bus-voltage range [min, max].
    pub vbus: Vec<Volt>,
    /// Transition inductance.
    pub l: Henry,
    /// The inductor's far end.
    pub far_end: FarEndFile,
    /// Low switch's Coss curve (CSV, relative to the design file).
    #[serde(default)]
    pub coss_low: Option<String>,
    /// High switch's Coss curve; default: the low switch's.
    #[serde(default)]
    pub coss_high: Option<String>,
    /// Capacitance added at the node. Default 0.
    #[serde(default)]
    pub c_ext: Option<Farad>,
    /// Loop resistance. Default 0.
    #[serde(default)]
    pub r_loop: Option<Ohm>,
    /// Body-diode conduction accepted where the current does not reverse.
    /// Default [`DEFAULT_MAX_DIODE_S`].
    #[serde(default)]
    pub max_diode: Option<Second>,
    /// The falling edge.
    pub falling_edge: EdgeFile,
    /// The rising edge.
    pub rising_edge: EdgeFile,
    /// ADC.
    pub adc: LegAdcFile,
    /// Dead-time generator.
    pub dead_time: DeadTimeFile,
    /// Gate drivers.
    #[serde(default)]
    pub drivers: DriversFile,
    /// Table requirements.
    #[serde(default)]
    pub table: Option<LegTableFile>,
    /// Tolerances.
    #[serde(default)]
    pub tolerance: Option<LegToleranceFile>,
}

/// Default accepted body-diode conduction, second: long enough for a
/// filter inductor's current that never reverses, short enough to keep
/// the diode's conduction and recovery loss small (common practice, no
/// source).
pub const DEFAULT_MAX_DIODE_S: f64 = 40e-9;

fn default_bits() -> u8 {
    8
}
fn default_position() -> f64 {
    0.25
}
fn default_max_error() -> f64 {
    1.0
}

/// Validated tolerances of a leg.
#[derive(Debug, Clone, Copy, PartialEq, Default, serde::Serialize)]
pub struct LegTolerance {
    /// Inductance, relative.
    pub l_rel: f64,
    /// Node capacitance, relative.
    pub c_rel: f64,
    /// Far end, relative.
    pub far_rel: f64,
    /// Bus channel gain, relative.
    pub vbus_gain_rel: f64,
    /// Current channel gain, relative.
    pub current_gain_rel: f64,
    /// Bus channel offset, codes.
    pub vbus_offset_codes: f64,
    /// Current channel offset, codes.
    pub current_offset_codes: f64,
    /// Peak noise, codes.
    pub noise_codes: f64,
    /// Peak jitter, second.
    pub jitter_s: f64,
}

impl LegTolerance {
    /// The spread of the parts.
    #[must_use]
    pub fn spread(&self) -> LegSpread {
        LegSpread::new(self.l_rel, self.c_rel, self.far_rel)
    }
}

/// A validated leg design.
#[derive(Debug, Clone)]
pub struct LegSpec {
    /// Name (a C identifier).
    pub name: String,
    /// The leg as built.
    pub built: LegAsBuilt,
    /// The Coss files as named (low, high).
    pub coss_files: (Option<String>, Option<String>),
    /// Bus range, volt.
    pub vbus_v: (f64, f64),
    /// Signed current ranges at the switching instant, ampere: falling, rising.
    pub current_a: [(f64, f64); 2],
    /// ADC bits.
    pub adc_bits: u8,
    /// Volt per bus code.
    pub vbus_volts_per_code: f64,
    /// Ampere per current code.
    pub current_amps_per_code: f64,
    /// Current code at 0 A.
    pub current_zero_code: u16,
    /// Bus codes of the range.
    pub bus_codes: CodeRange,
    /// Current codes of each edge's range: falling, rising.
    pub current_codes: [CodeRange; 2],
    /// The dead-time generator.
    pub timer: LegTimer<f64>,
    /// Its step, second.
    pub step_s: f64,
    /// Aim point.
    pub position: WindowPosition<f64>,
    /// Where the swing stops short.
    pub short_swing: ShortSwing,
    /// Error budget, steps.
    pub max_error_ticks: f64,
    /// Tolerances (`None`: no `[tolerance]`).
    pub tolerance: Option<LegTolerance>,
    /// CRC-32 of the design file and its curves.
    pub hash: u32,
}

/// Index of an edge in the per-edge arrays.
#[must_use]
pub fn edge_index(edge: Edge) -> usize {
    match edge {
        Edge::Falling => 0,
        Edge::Rising => 1,
    }
}

/// Name of an edge in messages and files: `falling` or `rising`.
#[must_use]
pub fn edge_name(edge: Edge) -> &'static str {
    match edge {
        Edge::Falling => "falling",
        Edge::Rising => "rising",
    }
}

/// Both edges, falling first.
pub const EDGES: [Edge; 2] = [Edge::Falling, Edge::Rising];

impl LegSpec {
    /// Read and validate a leg's design file.
    ///
    /// # Errors
    /// [`DesignError`].
    pub fn load(path: &std::path::Path) -> Result<Self, DesignError> {
        Self::parse(&read_design(path)?, &path.display().to_string())
    }

    /// Parse and validate; `origin` names the text in errors.
    ///
    /// # Errors
    /// [`DesignError::Malformed`] or [`DesignError::Invalid`].
    pub fn parse(text: &str, origin: &str) -> Result<Self, DesignError> {
        parse_design(text, origin, LegDesignFile::validate)
    }

    /// Bus voltage of code `c`, volt.
    #[must_use]
    pub fn vbus_of(&self, c: u16) -> f64 {
        f64::from(c) * self.vbus_volts_per_code
    }

    /// Signed current of code `c`, ampere.
    #[must_use]
    pub fn current_of(&self, c: u16) -> f64 {
        (f64::from(c) - f64::from(self.current_zero_code)) * self.current_amps_per_code
    }

    /// The true bus voltage and signed current behind the readings
    /// `vbus_v` and `current_a` under the design's tolerances (the reading
    /// itself without them).
    #[must_use]
    pub fn true_box(&self, vbus_v: f64, current_a: f64) -> ((f64, f64), (f64, f64)) {
        use crate::tank::leg_grid::true_range_signed;
        let Some(t) = self.tolerance else {
            return ((vbus_v, vbus_v), (current_a, current_a));
        };
        let v_abs = (0.5 + t.vbus_offset_codes + t.noise_codes) * self.vbus_volts_per_code;
        let i_abs = (0.5 + t.current_offset_codes + t.noise_codes) * self.current_amps_per_code;
        (
            true_range_signed(vbus_v, t.vbus_gain_rel, v_abs),
            true_range_signed(current_a, t.current_gain_rel, i_abs),
        )
    }
}

impl LegDesignFile {
    #[allow(clippy::too_many_lines)]
    fn validate(&self, text: &str, base: &std::path::Path) -> Result<LegSpec, Invalid> {
        if !c_identifier(&self.name) {
            return Err(Invalid::Name(self.name.clone()));
        }
        let mut texts = Vec::new();
        let mut curve = |file: &Option<String>| -> Result<Vec<CossPoint<f64>>, Invalid> {
            match file {
                Some(f) => {
                    let (points, t) = crate::input::coss_csv::load(&base.join(f))?;
                    texts.push(t);
                    Ok(points)
                }
                None => Ok(Vec::new()),
            }
        };
        let low = curve(&self.coss_low)?;
        let high = match &self.coss_high {
            Some(_) => curve(&self.coss_high)?,
            None => low.clone(),
        };
        let pair = |key: &'static str, values: &[f64]| match values {
            [lo, hi] => Ok((*lo, *hi)),
            _ => Err(Invalid::RangeLength {
                key,
                given: format!("{values:?}"),
            }),
        };
        let vbus = pair("vbus", &self.vbus.iter().map(|v| v.0).collect::<Vec<_>>())?;
        for v in [vbus.0, vbus.1] {
            if !(v.is_finite() && v > 0.0) {
                return Err(Invalid::NotPositive {
                    key: "vbus",
                    value: v,
                });
            }
        }
        if vbus.0 >= vbus.1 {
            return Err(Invalid::EmptyRange {
                key: "vbus",
                lo: vbus.0,
                hi: vbus.1,
            });
        }
        let far_end = self.far_end.0;
        match far_end {
            FarEnd::Volts(v) if !(v.is_finite() && (0.0..=vbus.0).contains(&v)) => {
                return Err(Invalid::FarEnd {
                    value: v,
                    why: format!("must lie on the bus, 0 to the lowest vbus ({} V)", vbus.0),
                })
            }
            FarEnd::OfBus(f) if !(f.is_finite() && (0.0..=1.0).contains(&f)) => {
                return Err(Invalid::FarEnd {
                    value: f,
                    why: "a fraction of the bus must lie in [0, 1]".into(),
                })
            }
            _ => {}
        }
        let built = LegAsBuilt {
            l_h: self.l.0,
            low,
            high,
            c_ext_f: self.c_ext.map_or(0.0, |c| c.0),
            r_ohm: self.r_loop.map_or(0.0, |r| r.0),
            max_diode_s: self.max_diode.map_or(DEFAULT_MAX_DIODE_S, |d| d.0),
            far_end,
        };
        built.leg().map_err(|source| {
            use timing_core::Quantity as Q;
            let key = match source.quantity() {
                Some(Q::TransitionInductance) => "l",
                Some(Q::TankResistance) => "r_loop",
                Some(Q::DiodeConduction) => "max_diode",
                Some(Q::NodeCapacitance) => "c_ext",
                _ => "coss_low/coss_high",
            };
            Invalid::Refused { key, source }
        })?;
        let mut current_a = [(0.0, 0.0); 2];
        for (slot, key, e) in [
            (0, "falling_edge.current", &self.falling_edge),
            (1, "rising_edge.current", &self.rising_edge),
        ] {
            let (lo, hi) = pair(key, &e.current.iter().map(|v| v.0).collect::<Vec<_>>())?;
            if !(lo.is_finite() && hi.is_finite()) || lo >= hi {
                return Err(Invalid::EmptyRange { key, lo, hi });
            }
            current_a[slot] = (lo, hi);
        }
        let a = &self.adc;
        if !(8..=16).contains(&a.bits) {
            return Err(Invalid::AdcBits(a.bits));
        }
        for (key, v) in [
            ("adc.vbus_volts_per_code", a.vbus_volts_per_code),
            ("adc.current_amps_per_code", a.current_amps_per_code),
        ] {
            if !(v.is_finite() && v > 0.0) {
                return Err(Invalid::Scale { key, value: v });
            }
        }
        let max_code = (1u32 << a.bits) - 1;
        if u32::from(a.current_zero_code) > max_code {
            return Err(Invalid::ZeroCode {
                code: a.current_zero_code,
                bits: a.bits,
                max_code,
            });
        }
        let codes = |key: &'static str, (lo, hi): (f64, f64), scale: f64, zero: f64, unit| {
            crate::input::invalid::code_range(key, lo, hi, scale, zero, unit, a.bits)
        };
        let bus_codes = codes("vbus", vbus, a.vbus_volts_per_code, 0.0, "V")?;
        let zero = f64::from(a.current_zero_code);
        let current_codes = [
            codes(
                "falling_edge.current",
                current_a[0],
                a.current_amps_per_code,
                zero,
                "A",
            )?,
            codes(
                "rising_edge.current",
                current_a[1],
                a.current_amps_per_code,
                zero,
                "A",
            )?,
        ];
        let d = &self.dead_time;
        let dr = &self.drivers;
        let s = |x: Option<Second>| x.map_or(0.0, |x| x.0);
        let timer = LegTimer::new(
            d.step.0,
            d.counter_bits,
            DriverDelays {
                on_s: s(dr.high_on),
                off_s: s(dr.high_off),
            },
            DriverDelays {
                on_s: s(dr.low_on),
                off_s: s(dr.low_off),
            },
            s(d.min_dead),
        )
        .map_err(|source| Invalid::Refused {
            key: "dead_time",
            source,
        })?;
        let position = WindowPosition::new(d.position).map_err(|source| Invalid::Refused {
            key: "dead_time.position",
            source,
        })?;
        let max_error_ticks = self.table.map_or(1.0, |t| t.max_error_ticks);
        if !(max_error_ticks.is_finite() && max_error_ticks >= 0.5) {
            return Err(Invalid::MaxError(max_error_ticks));
        }
        let tolerance = match self.tolerance {
            None => None,
            Some(t) => {
                for (key, v, max) in [
                    ("tolerance.l", t.l.0, 0.5),
                    ("tolerance.c", t.c.0, 0.5),
                    ("tolerance.far_end", t.far_end.0, 0.5),
                    ("tolerance.vbus_gain", t.vbus_gain.0, 0.5),
                    ("tolerance.current_gain", t.current_gain.0, 0.5),
                    ("tolerance.vbus_offset_codes", t.vbus_offset_codes, 4096.0),
                    (
                        "tolerance.current_offset_codes",
                        t.current_offset_codes,
                        4096.0,
                    ),
                    ("tolerance.noise_codes", t.noise_codes, 4096.0),
                    ("tolerance.jitter", s(t.jitter), 1e-6),
                ] {
                    if !(v.is_finite() && (0.0..=max).contains(&v)) {
                        return Err(Invalid::Tolerance { key, value: v, max });
                    }
                }
                Some(LegTolerance {
                    l_rel: t.l.0,
                    c_rel: t.c.0,
                    far_rel: t.far_end.0,
                    vbus_gain_rel: t.vbus_gain.0,
                    current_gain_rel: t.current_gain.0,
                    vbus_offset_codes: t.vbus_offset_codes,
                    current_offset_codes: t.current_offset_codes,
                    noise_codes: t.noise_codes,
                    jitter_s: s(t.jitter),
                })
            }
        };
        let mut digest = timing_core::blob::CRC32.digest();
        digest.update(text.as_bytes());
        for t in &texts {
            digest.update(b"\0");
            digest.update(t.as_bytes());
        }
        Ok(LegSpec {
            name: self.name.clone(),
            built,
            coss_files: (
                self.coss_low.clone(),
                self.coss_high.clone().or_else(|| self.coss_low.clone()),
            ),
            vbus_v: vbus,
            current_a,
            adc_bits: a.bits,
            vbus_volts_per_code: a.vbus_volts_per_code,
            current_amps_per_code: a.current_amps_per_code,
            current_zero_code: a.current_zero_code,
            bus_codes,
            current_codes,
            timer,
            step_s: d.step.0,
            position,
            short_swing: match d.short_swing {
                ShortSwingFile::Extremum => ShortSwing::Extremum,
                ShortSwingFile::Minimum => ShortSwing::Minimum,
            },
            max_error_ticks,
            tolerance,
            hash: digest.finalize(),
        })
    }
}
