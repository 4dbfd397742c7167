//! Design files (TOML): the tank, operating range, sensing, timer and table
//! requirements of one converter. Parsing reports malformed files with line,
//! column and key (from the TOML parser); validation then refuses
//! physically impossible or inconsistent designs in plain sentences.
//!
//! Over 500 lines because validation is one pass through the file's keys
//! in order, each refusal beside the key it checks.

use timing_core::{CellPoint, CodeRange, Tank, Timer, Topology, WindowPosition};

use crate::input::design_file::TopologyFile;
pub use crate::input::design_file::{
    AdcFile, DesignFile, FallbackChoice, LayoutChoice, TableFile, TimerFile, ToleranceFile,
};
pub use crate::input::invalid::{BadPoint, Invalid};
use crate::tank::real_tank::RealTank;
use crate::tank::stand_in::fitted_tank;

/// Validated tolerances (fractions, codes, second).
#[derive(Debug, Clone, Copy, PartialEq, Default, serde::Serialize)]
pub struct Tolerance {
    /// Relative tolerance of Lr.
    pub lr_rel: f64,
    /// Relative tolerance of the switch capacitance.
    pub cr_rel: f64,
    /// Gain error of the voltage channel, relative.
    pub vin_gain_rel: f64,
    /// Gain error of the current channel, relative.
    pub io_gain_rel: f64,
    /// Offset of the voltage channel, codes.
    pub vin_offset_codes: f64,
    /// Offset of the current channel, codes.
    pub io_offset_codes: f64,
    /// Peak sensing noise, codes.
    pub noise_codes: f64,
    /// Peak jitter, second.
    pub jitter_s: f64,
}

impl ToleranceFile {
    fn validate(&self) -> Result<Tolerance, Invalid> {
        for (key, v, max) in [
            ("tolerance.lr", self.lr.0, 0.5),
            ("tolerance.cr", self.cr.0, 0.5),
            ("tolerance.vin_gain", self.vin_gain.0, 0.5),
            ("tolerance.io_gain", self.io_gain.0, 0.5),
            ("tolerance.vin_offset_codes", self.vin_offset_codes, 4096.0),
            ("tolerance.io_offset_codes", self.io_offset_codes, 4096.0),
            ("tolerance.noise_codes", self.noise_codes, 4096.0),
            ("tolerance.jitter", self.jitter.0, 1e-6),
        ] {
            if !(v.is_finite() && (0.0..=max).contains(&v)) {
                return Err(Invalid::Tolerance { key, value: v, max });
            }
        }
        Ok(Tolerance {
            lr_rel: self.lr.0,
            cr_rel: self.cr.0,
            vin_gain_rel: self.vin_gain.0,
            io_gain_rel: self.io_gain.0,
            vin_offset_codes: self.vin_offset_codes,
            io_offset_codes: self.io_offset_codes,
            noise_codes: self.noise_codes,
            jitter_s: self.jitter.0,
        })
    }
}

/// A validated design file: plain data, as the file gives it and as
/// validation derives it (code ranges, the ideal stand-in tank, the hash).
/// [`crate::model::design::Design`] adds what the model builds from it.
#[derive(Debug, Clone)]
pub struct DesignSpec {
    /// Name (a C identifier).
    pub name: String,
    /// Converter.
    pub topology: Topology,
    /// The ideal tank: Lr and Cr as given, or for a real tank (Coss curve,
    /// losses) the constant-capacitance stand-in fitted to it: Z0 from the
    /// real ZVS boundary at the middle of the voltage range, w0 the
    /// least-squares fit of the turn-on targets. It sets the normalised-load
    /// axis of the 1-D layouts and is what the closed-form methods assume.
    pub tank: Tank<f64>,
    /// The tank as built (Coss curve, loop resistance): the exact model.
    pub real: RealTank,
    /// The Coss file as named in the design file.
    pub coss_file: Option<String>,
    /// The design file's `coss_scale` (1 without it); `real.coss` holds
    /// the curve already scaled by it.
    pub coss_scale: f64,
    /// Characteristic impedance whose boundary line I*Z0 = V lies on or
    /// above the exact model's ZVS boundary over the whole voltage range
    /// (the tables' ZVS test with a fixed fallback), ohm; `tank`'s Z0 for
    /// an ideal tank.
    pub zvs_z0_ohm: f64,
    /// Input-voltage range, volt.
    pub vin_v: (f64, f64),
    /// Output-current range, ampere.
    pub io_a: (f64, f64),
    /// Output voltage, volt (None for a buck without one).
    pub vout_v: Option<f64>,
    /// ADC bits.
    pub adc_bits: u8,
    /// Volt per voltage code.
    pub vin_volts_per_code: f64,
    /// Ampere per current code.
    pub io_amps_per_code: f64,
    /// Current code at 0 A.
    pub io_zero_code: u16,
    /// Timer and driver.
    pub timer: Timer<f64>,
    /// Aim point.
    pub position: WindowPosition<f64>,
    /// Error budget, ticks.
    pub max_error_ticks: f64,
    /// Fallback below the ZVS boundary.
    pub fallback: timing_core::table::Fallback,
    /// Layouts to consider.
    pub layout: LayoutChoice,
    /// Voltage codes of the design range.
    pub vin_codes: CodeRange,
    /// Current codes of the design range.
    pub io_codes: CodeRange,
    /// CRC-32 of the design file's text: the design hash in table headers.
    pub hash: u32,
    /// Board-to-board and cycle-to-cycle variation (`None`: the design
    /// file has no `[tolerance]`).
    pub tolerance: Option<Tolerance>,
    /// The online trim's settings, in ticks, when the file has `[trim]`.
    pub trim: Option<crate::input::trim_design::TrimSpec>,
}

/// A design that cannot be used.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum DesignError {
    /// The file could not be read.
    #[error("cannot read {path}: {message}")]
    Read {
        /// File path.
        path: String,
        /// OS message.
        message: String,
    },
    /// The TOML is malformed or a key has a wrong type or value; the message
    /// carries line, column and key.
    #[error("{path}: {message}")]
    Malformed {
        /// File path.
        path: String,
        /// Parser message with line and column.
        message: String,
    },
    /// The design is physically impossible or inconsistent.
    #[error("{path}: {problem}")]
    Invalid {
        /// File path.
        path: String,
        /// What is wrong, naming the key and the value.
        problem: Invalid,
    },
}

/// The text of the design file at `path`.
///
/// # Errors
/// [`DesignError::Read`].
pub fn read_design(path: &std::path::Path) -> Result<String, DesignError> {
    std::fs::read_to_string(path).map_err(|e| DesignError::Read {
        path: path.display().to_string(),
        message: e.to_string(),
    })
}

/// Design-file text parsed as `F` (the TOML parser's message, with line
/// and column, where it does not parse) and validated by `validate` with
/// the text and the folder files are named relative to; `origin` names the
/// text in errors.
///
/// # Errors
/// [`DesignError::Malformed`] or [`DesignError::Invalid`].
pub fn parse_design<F: serde::de::DeserializeOwned, S>(
    text: &str,
    origin: &str,
    validate: impl FnOnce(&F, &str, &std::path::Path) -> Result<S, Invalid>,
) -> Result<S, DesignError> {
    let file: F = toml::from_str(text).map_err(|e| DesignError::Malformed {
        path: origin.to_owned(),
        message: e.to_string().trim_end().replace('\n', "\n  "),
    })?;
    let base = std::path::Path::new(origin)
        .parent()
        .map(std::path::Path::to_path_buf)
        .unwrap_or_default();
    validate(&file, text, &base).map_err(|problem| DesignError::Invalid {
        path: origin.to_owned(),
        problem,
    })
}

impl DesignSpec {
    /// Read and validate a design file.
    ///
    /// # Errors
    /// [`DesignError`].
    pub fn load(path: &std::path::Path) -> Result<Self, DesignError> {
        Self::parse(&read_design(path)?, &path.display().to_string())
    }

    /// Parse and validate design-file text; `origin` names it in errors.
    ///
    /// # Errors
    /// [`DesignError::Malformed`] or [`DesignError::Invalid`].
    pub fn parse(text: &str, origin: &str) -> Result<Self, DesignError> {
        if crate::input::design_file::is_leg(text) {
            return Err(DesignError::Invalid {
                path: origin.to_owned(),
                problem: Invalid::LegNotServed,
            });
        }
        parse_design(text, origin, DesignFile::validate)
    }

    /// Check an operating point given as `--vin` (volt) and `--io`
    /// (ampere) against the design: an error naming the option where the
    /// cell cannot run it (a value not above zero; a boost's input at or
    /// above its output), and warnings where it lies outside the design
    /// range (no table was proven there) or beyond the ADC's full scale (the
    /// converter would read a clamped code).
    ///
    /// # Errors
    /// [`BadPoint`] naming `--vin` or `--io`.
    pub fn check_point(&self, vin_v: f64, io_a: f64) -> Result<Vec<String>, BadPoint> {
        let bad = |option, value, unit, why: String| BadPoint {
            option,
            value,
            unit,
            why,
        };
        for (option, value, unit) in [("--vin", vin_v, "V"), ("--io", io_a, "A")] {
            if !(value.is_finite() && value > 0.0) {
                return Err(bad(
                    option,
                    value,
                    unit,
                    "must be a number above zero".into(),
                ));
            }
        }
        if let Some(vout) = self.vout_v {
            if self.topology == Topology::Boost && vin_v >= vout {
                return Err(bad(
                    "--vin",
                    vin_v,
                    "V",
                    format!("a boost's input must stay below its output, vout = {vout} V"),
                ));
            }
            if self.topology == Topology::Buck && vin_v <= vout {
                return Err(bad(
                    "--vin",
                    vin_v,
                    "V",
                    format!("a buck's input must stay above its output, vout = {vout} V"),
                ));
            }
        }
        self.cell(vin_v, io_a)
            .map_err(|e| bad("--vin", vin_v, "V", e.to_string()))?;
        let mut warnings = Vec::new();
        let full_scale =
            |per_code: f64, zero: f64| (f64::from((1u32 << self.adc_bits) - 1) - zero) * per_code;
        for (option, value, unit, (lo, hi), fs) in [
            (
                "--vin",
                vin_v,
                "V",
                self.vin_v,
                full_scale(self.vin_volts_per_code, 0.0),
            ),
            (
                "--io",
                io_a,
                "A",
                self.io_a,
                full_scale(self.io_amps_per_code, f64::from(self.io_zero_code)),
            ),
        ] {
            if value > fs {
                warnings.push(format!(
                    "{option} = {value} {unit} is beyond the ADC's full scale of {fs:.4} {unit}: the converter would read a clamped code there"
                ));
            } else if !(lo..=hi).contains(&value) {
                warnings.push(format!(
                    "{option} = {value} {unit} lies outside the design range {lo} to {hi} {unit}: no table was proven there"
                ));
            }
        }
        Ok(warnings)
    }

    /// The cell quantities at converter input voltage `vin` and output current `io`.
    ///
    /// # Errors
    /// The timing-core error for an impossible point.
    pub fn cell(&self, vin: f64, io: f64) -> Result<CellPoint<f64>, timing_core::Error> {
        CellPoint::from_converter(self.topology, vin, self.vout_v.unwrap_or(f64::NAN), io)
    }

    /// The design as timing-core's closed-form methods take it.
    ///
    /// # Errors
    /// timing-core's error (not expected for a validated design).
    pub fn closed_form(&self) -> Result<timing_core::closed_form::ClosedForm, timing_core::Error> {
        timing_core::closed_form::ClosedForm::new(
            &self.tank,
            &self.timer,
            self.position,
            timing_core::closed_form::CodeScaling {
                vin: self.vin_codes,
                io: self.io_codes,
                io_zero: self.io_zero_code,
                vin_volts_per_code: self.vin_volts_per_code,
                io_amps_per_code: self.io_amps_per_code,
            },
            self.fallback,
        )
    }

    /// One line on the model behind the design's timings, e.g. `ideal tank,
    /// Lr 1 uH, Cr 6.8 nF (closed forms)`.
    #[must_use]
    pub fn model_summary(&self) -> String {
        use crate::units::format_si as q;
        let r = &self.real;
        if r.is_ideal() {
            return format!(
                "ideal tank, Lr {}, Cr {} (closed forms)",
                q(r.lr_h, "H"),
                q(r.cr_fixed_f, "F")
            );
        }
        let mut s = format!("Lr {}", q(r.lr_h, "H"));
        if let Some(f) = &self.coss_file {
            s += &format!(
                ", Coss curve {f} ({} points) in parallel with {}",
                r.coss.len(),
                q(r.cr_fixed_f, "F")
            );
        } else {
            s += &format!(", Cr {}", q(r.cr_fixed_f, "F"));
        }
        if r.r_tank_ohm > 0.0 {
            s += &format!(", loop resistance {}", q(r.r_tank_ohm, "ohm"));
        }
        s + " (numerical ring)"
    }

    /// Input voltage of code `c`, volt.
    #[must_use]
    pub fn vin_of(&self, c: u16) -> f64 {
        f64::from(c) * self.vin_volts_per_code
    }

    /// Output current of code `c`, ampere.
    #[must_use]
    pub fn io_of(&self, c: u16) -> f64 {
        (f64::from(c) - f64::from(self.io_zero_code)) * self.io_amps_per_code
    }
}

fn t_position(t: &TimerFile) -> f64 {
    t.position
}

impl DesignFile {
    fn validate(&self, text: &str, base: &std::path::Path) -> Result<DesignSpec, Invalid> {
        if !crate::input::invalid::c_identifier(&self.name) {
            return Err(Invalid::Name(self.name.clone()));
        }
        let (mut coss, coss_text) = match &self.coss {
            Some(f) => {
                let (points, text) = crate::input::coss_csv::load(&base.join(f))?;
                (points, Some(text))
            }
            None => (Vec::new(), None),
        };
        if let Some(k) = self.coss_scale {
            if !(k.is_finite() && k > 0.0) {
                return Err(Invalid::CossScale(k, "must be a positive number"));
            }
            if coss.is_empty() {
                return Err(Invalid::CossScale(
                    k,
                    "scales the Coss curve, and the design has none (coss = \"FILE.csv\")",
                ));
            }
            coss = crate::tank::real_tank::scaled_curve(&coss, k);
        }
        let cr_fixed = match (self.cr, coss.is_empty()) {
            (Some(c), _) => c.0,
            (None, false) => 0.0,
            (None, true) => return Err(Invalid::MissingCr),
        };
        let r_tank = self.r_tank.map_or(0.0, |r| r.0);
        let real = RealTank {
            lr_h: self.lr.0,
            cr_fixed_f: cr_fixed,
            coss,
            r_tank_ohm: r_tank,
        };
        real.solver().map_err(|source| {
            let key = match source {
                timing_core::Error::NotPositive {
                    quantity: timing_core::Quantity::ResonantInductance,
                    ..
                }
                | timing_core::Error::NotFinite {
                    quantity: timing_core::Quantity::ResonantInductance,
                    ..
                } => "lr",
                _ if self.r_tank.is_some()
                    && matches!(
                        source,
                        timing_core::Error::Negative {
                            quantity: timing_core::Quantity::TankResistance,
                            ..
                        } | timing_core::Error::NotFinite {
                            quantity: timing_core::Quantity::TankResistance,
                            ..
                        }
                    ) =>
                {
                    "r_tank"
                }
                _ => "cr",
            };
            Invalid::Refused { key, source }
        })?;
        let topology = match self.topology {
            TopologyFile::Buck => Topology::Buck,
            TopologyFile::Boost => Topology::Boost,
            TopologyFile::BuckBoost => Topology::BuckBoost,
        };
        let pair = |key: &'static str, values: &[f64]| match values {
            [lo, hi] => Ok((*lo, *hi)),
            _ => Err(Invalid::RangeLength {
                key,
                given: format!("{values:?}"),
            }),
        };
        let (vlo, vhi) = pair("vin", &self.vin.iter().map(|v| v.0).collect::<Vec<_>>())?;
        let (ilo, ihi) = pair("io", &self.io.iter().map(|v| v.0).collect::<Vec<_>>())?;
        for (what, v) in [("vin", vlo), ("vin", vhi), ("io", ilo), ("io", ihi)] {
            if !(v.is_finite() && v > 0.0) {
                return Err(Invalid::RangeNotPositive {
                    key: what,
                    value: v,
                });
            }
        }
        if vlo >= vhi {
            return Err(Invalid::EmptyRange {
                key: "vin",
                lo: vlo,
                hi: vhi,
            });
        }
        if ilo >= ihi {
            return Err(Invalid::EmptyRange {
                key: "io",
                lo: ilo,
                hi: ihi,
            });
        }
        let vout = self.vout.map(|v| v.0);
        if topology.needs_vout() && vout.is_none() {
            return Err(Invalid::NeedsVout {
                topology: topology.name(),
            });
        }
        if let Some(v) = vout {
            if !(v.is_finite() && v > 0.0) {
                return Err(Invalid::VoutNotPositive(v));
            }
            if topology == Topology::Boost && v <= vhi {
                return Err(Invalid::VoutOutside {
                    vout: v,
                    rule: "exceed the highest input voltage",
                    limit: vhi,
                    topology: topology.name(),
                });
            }
            if topology == Topology::Buck && v >= vlo {
                return Err(Invalid::VoutOutside {
                    vout: v,
                    rule: "be below the lowest input voltage",
                    limit: vlo,
                    topology: topology.name(),
                });
            }
        }
        // Cell voltages over the range (the boost's is Vout, the others vary).
        let cell_v = |vin: f64| {
            CellPoint::from_converter(topology, vin, vout.unwrap_or(f64::NAN), 1.0)
                .map(|c| c.v_volt())
                .map_err(|source| Invalid::Point {
                    vin_v: vin,
                    io_a: 1.0,
                    source,
                })
        };
        let tank = if real.is_ideal() {
            real.equivalent_tank(cell_v(0.5 * (vlo + vhi))?)
                .map_err(|source| Invalid::Refused {
                    key: "lr/cr",
                    source,
                })?
        } else {
            fitted_tank(
                &real,
                topology,
                vout,
                (vlo, vhi),
                (ilo, ihi),
                t_position(&self.timer),
            )?
        };
        let zvs_z0_ohm = if real.is_ideal() {
            tank.z0_ohm()
        } else {
            let solver = real
                .solver()
                .map_err(|source| Invalid::Refused { key: "cr", source })?;
            let mut z = f64::INFINITY;
            for k in 0..=16 {
                let v = cell_v(vlo + (vhi - vlo) * f64::from(k) / 16.0)?;
                let ib = solver
                    .boundary_current_a(v)
                    .map_err(|source| Invalid::NoZvs { cell_v: v, source })?;
                z = z.min(v / ib);
            }
            z
        };
        let a = &self.adc;
        if !(8..=16).contains(&a.bits) {
            return Err(Invalid::AdcBits(a.bits));
        }
        for (key, v) in [
            ("adc.vin_volts_per_code", a.vin_volts_per_code),
            ("adc.io_amps_per_code", a.io_amps_per_code),
        ] {
            if !(v.is_finite() && v > 0.0) {
                return Err(Invalid::Scale { key, value: v });
            }
        }
        let max_code = (1u32 << a.bits) - 1;
        if u32::from(a.io_zero_code) > max_code {
            return Err(Invalid::ZeroCode {
                code: a.io_zero_code,
                bits: a.bits,
                max_code,
            });
        }
        // Codes inside the design range: those that read within it.
        let code_range = |lo: f64, hi: f64, scale: f64, zero: f64, key, unit| {
            crate::input::invalid::code_range(key, lo, hi, scale, zero, unit, a.bits)
        };
        let vin_codes = code_range(vlo, vhi, a.vin_volts_per_code, 0.0, "vin", "V")?;
        let io_codes = code_range(
            ilo,
            ihi,
            a.io_amps_per_code,
            f64::from(a.io_zero_code),
            "io",
            "A",
        )?;
        if io_codes.lo <= a.io_zero_code {
            return Err(Invalid::RangeAtZero);
        }
        let t = &self.timer;
        let timer = Timer::new(
            t.clock_hz.0,
            t.counter_bits,
            t.driver_delay.0,
            t.driver_delay_off.0,
        )
        .map_err(|source| Invalid::Refused {
            key: "timer",
            source,
        })?;
        let position = WindowPosition::new(t.position).map_err(|source| Invalid::Refused {
            key: "timer.position",
            source,
        })?;
        let tb = &self.table;
        if !(tb.max_error_ticks.is_finite() && tb.max_error_ticks >= 0.5) {
            return Err(Invalid::MaxError(tb.max_error_ticks));
        }
        let fallback = match (tb.fallback, tb.fallback_ticks) {
            (FallbackChoice::Valley, _) => timing_core::table::Fallback::Valley,
            (FallbackChoice::Fixed, Some(n)) if n <= timer.max_ticks().get() => {
                timing_core::table::Fallback::Fixed(timing_core::Ticks::new(n))
            }
            (FallbackChoice::Fixed, Some(n)) => {
                return Err(Invalid::FallbackTicks {
                    ticks: n,
                    bits: t.counter_bits,
                    max: timer.max_ticks().get(),
                })
            }
            (FallbackChoice::Fixed, None) => return Err(Invalid::FallbackNeedsTicks),
        };
        Ok(DesignSpec {
            name: self.name.clone(),
            topology,
            tank,
            real,
            coss_file: self.coss.clone(),
            coss_scale: self.coss_scale.unwrap_or(1.0),
            zvs_z0_ohm,
            vin_v: (vlo, vhi),
            io_a: (ilo, ihi),
            vout_v: vout,
            adc_bits: a.bits,
            vin_volts_per_code: a.vin_volts_per_code,
            io_amps_per_code: a.io_amps_per_code,
            io_zero_code: a.io_zero_code,
            timer,
            position,
            max_error_ticks: tb.max_error_ticks,
            fallback,
            layout: tb.layout,
            vin_codes,
            io_codes,
            tolerance: self.tolerance.map(|t| t.validate()).transpose()?,
            trim: self
                .trim
                .map(|t| t.validate(&timer, vin_codes, io_codes))
                .transpose()?,
            // The Coss curve is part of the design: its text joins the hash.
            hash: match &coss_text {
                None => timing_core::blob::CRC32.checksum(text.as_bytes()),
                Some(c) => {
                    let mut d = timing_core::blob::CRC32.digest();
                    d.update(text.as_bytes());
                    d.update(b"\0");
                    d.update(c.as_bytes());
                    d.finalize()
                }
            },
        })
    }
}
