//! `zvs-timing point`: one operating point in detail.

use clap::Args;
use host_tool::analysis::point::{self, InputError, PointInput, TimerInput};

use crate::args::{fraction, num, opt_num, topology, TopologyArg};

/// Numbers take SI (2e-6) or engineering prefixes (2u, 10n, 170M), optionally with the unit (2uH).
#[derive(Args)]
pub(crate) struct PointArgs {
    /// A design file. A half-bridge leg's (`topology = "half-bridge-leg"`): the point is then
    /// --vbus and --current on one edge. A resonant cell's: the point is --vin and --io, the
    /// tank, timer, aim and tolerances come from the file, and its `[trim]` is shown at the
    /// point. The cell's other options do not apply.
    #[arg(long)]
    design: Option<std::path::PathBuf>,
    /// Leg: bus voltage, volt.
    #[arg(long, allow_hyphen_values = true)]
    vbus: Option<String>,
    /// Leg: current out of the switch node at the switching instant, ampere (signed).
    #[arg(long, allow_hyphen_values = true)]
    current: Option<String>,
    /// Leg: the edge (default: falling for a positive current, rising otherwise).
    #[arg(long, value_enum)]
    edge: Option<EdgeArg>,
    /// Resonant inductance Lr, henry (the cell; required without --design).
    #[arg(long, allow_hyphen_values = true)]
    lr: Option<String>,
    /// Resonant capacitance Cr across the switch, farad: the whole of it (external plus the
    /// MOSFET's, taken as constant), or with --coss the external part in parallel with the curve.
    #[arg(long, allow_hyphen_values = true)]
    cr: Option<String>,
    /// CSV file of the MOSFET's output capacitance curve, `volts,farads` per line (a datasheet
    /// plot read off by hand): the timings come from the non-linear ring.
    #[arg(long)]
    coss: Option<std::path::PathBuf>,
    /// Series resistance of the resonant loop, ohm: the damped ring (design file: `r_tank`;
    /// formerly --tank-resistance).
    #[arg(long, alias = "tank-resistance", allow_hyphen_values = true)]
    r_tank: Option<String>,
    /// Input voltage, volt (the cell; required without --design).
    #[arg(long, allow_hyphen_values = true)]
    vin: Option<String>,
    /// Output current, ampere (the cell; required without --design).
    #[arg(long, allow_hyphen_values = true)]
    io: Option<String>,
    /// Converter the switch sits in.
    #[arg(long, value_enum, default_value = "buck")]
    topology: TopologyArg,
    /// Output voltage, volt: required for boost and buck-boost; for the buck, asks for the
    /// switching frequency that regulates to it.
    #[arg(long, allow_hyphen_values = true)]
    vout: Option<String>,
    /// Timer clock, hertz: gives the delay in ticks (design file: `[timer] clock_hz`; formerly
    /// --timer-hz).
    #[arg(long, alias = "timer-hz", allow_hyphen_values = true)]
    clock_hz: Option<String>,
    /// Timer counter width, bits.
    #[arg(long, default_value = "16", allow_hyphen_values = true)]
    counter_bits: String,
    /// Gate-driver turn-on propagation delay, second.
    #[arg(long, default_value = "0", allow_hyphen_values = true)]
    driver_delay: String,
    /// Gate-driver turn-off propagation delay, second (the timer counts from the turn-off command).
    #[arg(long, default_value = "0", allow_hyphen_values = true)]
    driver_delay_off: String,
    /// Where in the ZVS window to aim: 0 = earliest (switch at 0 V), 1 = latest (Lr current at 0).
    #[arg(long, default_value = "0.25", allow_hyphen_values = true)]
    position: String,
    /// Switching frequency, hertz: gives the buck conversion ratio.
    #[arg(long, allow_hyphen_values = true)]
    fs: Option<String>,
    /// MOSFET drain-source voltage rating, volt, for the stress warning.
    #[arg(long, allow_hyphen_values = true)]
    vds_rating: Option<String>,
    /// Fraction of the voltage rating allowed in use.
    #[arg(long, default_value = "0.8", allow_hyphen_values = true)]
    derating: String,
    /// Tolerance of Lr, a fraction or a percentage (10%): asks for the robust window.
    #[arg(long, allow_hyphen_values = true)]
    lr_tol: Option<String>,
    /// Tolerance of Cr, a fraction or a percentage.
    #[arg(long, allow_hyphen_values = true)]
    cr_tol: Option<String>,
    /// Relative (gain) error of the sensed input voltage, a fraction or a percentage (design
    /// file: `[tolerance] vin_gain`; formerly --vin-err).
    #[arg(long, alias = "vin-err", allow_hyphen_values = true)]
    vin_gain: Option<String>,
    /// Relative (gain) error of the sensed output current, a fraction or a percentage (design
    /// file: `[tolerance] io_gain`; formerly --io-err).
    #[arg(long, alias = "io-err", allow_hyphen_values = true)]
    io_gain: Option<String>,
    /// Absolute error of the sensed input voltage (offset plus peak noise), volt (the design
    /// file gives it in codes, `[tolerance] vin_offset_codes`; formerly --vin-offset).
    #[arg(long, alias = "vin-offset", allow_hyphen_values = true)]
    vin_offset_volts: Option<String>,
    /// Absolute error of the sensed output current (offset plus peak noise), ampere (the
    /// design file gives it in codes, `[tolerance] io_offset_codes`; formerly --io-offset).
    #[arg(long, alias = "io-offset", allow_hyphen_values = true)]
    io_offset_amps: Option<String>,
    /// Peak timer jitter, second.
    #[arg(long, allow_hyphen_values = true)]
    jitter: Option<String>,
    /// Print one JSON object instead of the table.
    #[arg(long)]
    json: bool,
}

impl PointArgs {
    fn to_input(&self) -> Result<PointInput, InputError> {
        let timer = match opt_num("--clock-hz", self.clock_hz.as_ref(), "Hz")? {
            Some(clock_hz) => {
                let bits = num("--counter-bits", &self.counter_bits, "")?;
                if !(1.0..=32.0).contains(&bits) || bits.fract() != 0.0 {
                    return Err(InputError::new(
                        "--counter-bits",
                        format!(
                            "must be a whole number from 1 to 32, got {}",
                            self.counter_bits
                        ),
                    ));
                }
                Some(TimerInput {
                    clock_hz,
                    counter_bits: bits as u8,
                    turn_on_delay_s: num("--driver-delay", &self.driver_delay, "s")?,
                    turn_off_delay_s: num("--driver-delay-off", &self.driver_delay_off, "s")?,
                })
            }
            None => None,
        };
        Ok(PointInput {
            topology: topology(self.topology),
            lr_h: num("--lr", required("--lr", self.lr.as_ref())?, "H")?,
            cr_f: match (&self.cr, &self.coss) {
                (Some(c), _) => num("--cr", c, "F")?,
                (None, Some(_)) => 0.0,
                (None, None) => {
                    return Err(InputError::new(
                        "--cr",
                        "is needed (the resonant capacitance), or --coss with a Coss curve",
                    ))
                }
            },
            coss: match &self.coss {
                Some(path) => {
                    host_tool::input::coss_csv::load(path)
                        .map_err(|e| InputError::new("--coss", e.to_string()))?
                        .0
                }
                None => Vec::new(),
            },
            r_tank_ohm: opt_num("--r-tank", self.r_tank.as_ref(), "ohm")?.unwrap_or(0.0),
            vin_v: num("--vin", required("--vin", self.vin.as_ref())?, "V")?,
            vout_v: opt_num("--vout", self.vout.as_ref(), "V")?,
            io_a: num("--io", required("--io", self.io.as_ref())?, "A")?,
            timer,
            position: num("--position", &self.position, "")?,
            fs_hz: opt_num("--fs", self.fs.as_ref(), "Hz")?,
            vds_rating_v: opt_num("--vds-rating", self.vds_rating.as_ref(), "V")?,
            derating: num("--derating", &self.derating, "")?,
            uncertainty: self.uncertainty()?,
        })
    }

    fn uncertainty(&self) -> Result<Option<point::UncertaintyInput>, InputError> {
        let parts = [
            fraction("--lr-tol", self.lr_tol.as_ref())?,
            fraction("--cr-tol", self.cr_tol.as_ref())?,
            fraction("--vin-gain", self.vin_gain.as_ref())?,
            fraction("--io-gain", self.io_gain.as_ref())?,
            opt_num("--jitter", self.jitter.as_ref(), "s")?,
            opt_num("--vin-offset-volts", self.vin_offset_volts.as_ref(), "V")?,
            opt_num("--io-offset-amps", self.io_offset_amps.as_ref(), "A")?,
        ];
        if parts.iter().all(Option::is_none) {
            return Ok(None);
        }
        let [lr, cr, v, i, j, va, ia] = parts.map(|p| p.unwrap_or(0.0));
        Ok(Some(point::UncertaintyInput {
            lr_rel: lr,
            cr_rel: cr,
            vin_rel: v,
            io_rel: i,
            jitter_s: j,
            vin_abs_v: va,
            io_abs_a: ia,
        }))
    }
}

/// A leg's edge, as `--edge` names it.
#[derive(Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub(crate) enum EdgeArg {
    /// The high side turns off, the low side on.
    Falling,
    /// The low side turns off, the high side on.
    Rising,
}

/// The value of a cell option that is required without `--design`.
fn required<'a>(option: &'static str, v: Option<&'a String>) -> Result<&'a String, InputError> {
    v.ok_or_else(|| {
        InputError::new(
            option,
            "is needed for the resonant cell (or give a half-bridge leg's design with --design)",
        )
    })
}

/// `point` on a half-bridge leg's edge.
fn run_leg_point(args: &PointArgs, design: &std::path::Path) -> anyhow::Result<()> {
    use host_tool::input::leg_design::LegSpec;
    use timing_core::leg::Edge;
    if !crate::args::is_leg_file(design)? {
        anyhow::bail!(
            "--design {}: not a half-bridge leg's design (topology = \"half-bridge-leg\"); for the resonant cell give the tank with --lr, --cr, --vin and --io",
            design.display()
        );
    }
    let spec = LegSpec::load(design)?;
    let vbus = num("--vbus", required_leg("--vbus", args.vbus.as_ref())?, "V")?;
    let current = num(
        "--current",
        required_leg("--current", args.current.as_ref())?,
        "A",
    )?;
    if !(vbus.is_finite() && vbus > 0.0) {
        return Err(InputError::new(
            "--vbus",
            format!("must be a voltage above zero, got {vbus}"),
        )
        .into());
    }
    let edge = match args.edge {
        Some(EdgeArg::Falling) => Edge::Falling,
        Some(EdgeArg::Rising) => Edge::Rising,
        None if current > 0.0 => Edge::Falling,
        None => Edge::Rising,
    };
    let report = host_tool::analysis::leg_point::evaluate_leg(&spec, edge, vbus, current)
        .map_err(|e| anyhow::anyhow!("--vbus {vbus} V, --current {current} A: {e}"))?;
    if args.json {
        outln!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        out!("{}", host_tool::report::render::leg_point_text(&report));
    }
    Ok(())
}

/// The value of a leg option, required with `--design`.
fn required_leg<'a>(option: &'static str, v: Option<&'a String>) -> Result<&'a String, InputError> {
    v.ok_or_else(|| {
        InputError::new(
            option,
            "is needed with --design (a half-bridge leg's point)",
        )
    })
}

/// `point` on a resonant cell's design file: the point from --vin and --io,
/// everything else from the file; with `[trim]`, what the firmware's trim
/// predicts there.
fn run_cell_design_point(args: &PointArgs, path: &std::path::Path) -> anyhow::Result<()> {
    let d = host_tool::input::design::DesignSpec::load(path)?;
    let vin = num("--vin", required("--vin", args.vin.as_ref())?, "V")?;
    let io = num("--io", required("--io", args.io.as_ref())?, "A")?;
    let warnings = d.check_point(vin, io)?;
    let uncertainty = d.tolerance.map(|t| point::UncertaintyInput {
        lr_rel: t.lr_rel,
        cr_rel: t.cr_rel,
        vin_rel: t.vin_gain_rel,
        io_rel: t.io_gain_rel,
        jitter_s: t.jitter_s,
        vin_abs_v: (t.vin_offset_codes + t.noise_codes) * d.vin_volts_per_code,
        io_abs_a: (t.io_offset_codes + t.noise_codes) * d.io_amps_per_code,
    });
    let input = PointInput {
        topology: d.topology,
        lr_h: d.real.lr_h,
        cr_f: d.real.cr_fixed_f,
        coss: d.real.coss.clone(),
        r_tank_ohm: d.real.r_tank_ohm,
        vin_v: vin,
        vout_v: d.vout_v,
        io_a: io,
        timer: Some(TimerInput {
            clock_hz: d.timer.clock_hz(),
            counter_bits: d.timer.counter_bits(),
            turn_on_delay_s: d.timer.turn_on_delay_s(),
            turn_off_delay_s: d.timer.turn_off_delay_s(),
        }),
        position: d.position.get(),
        fs_hz: None,
        vds_rating_v: None,
        derating: num("--derating", &args.derating, "")?,
        uncertainty,
    };
    let report = point::evaluate(&input)?;
    if args.json {
        outln!("{}", serde_json::to_string_pretty(&report)?);
        return Ok(());
    }
    for w in warnings {
        outln!("WARNING: {w}");
    }
    out!("{}", host_tool::report::render::point_text(&report));
    if let Some(t) = &d.trim {
        let plan = host_tool::model::trim_margin::TrimPlan::new(&d, t)?;
        // The codes the converter reads at this point (no sensing error).
        let code = |x: f64| timing_core::AdcCode::new((x + 0.5).clamp(0.0, 65535.0) as u16);
        let (cv, ci) = (
            code(vin / d.vin_volts_per_code),
            code(io / d.io_amps_per_code + f64::from(d.io_zero_code)),
        );
        let region = t.regions.index(cv, ci);
        if let (Some(((v0, v1), (i0, i1))), Some(m)) =
            (t.regions.codes(region), plan.margin_ticks.get(region))
        {
            outln!(
                "\ntrim at this point: region {region} (voltage codes {v0}..={v1}, current codes \
                 {i0}..={i1}); the firmware predicts the comparator's edge {} whole ticks before \
                 the table's command (the region's mean margin {m:.2} ticks)",
                (m + 0.5).floor()
            );
        }
        out!("{}", host_tool::report::render::trim_text(t, &plan));
    }
    Ok(())
}

pub(crate) fn run_point(args: &PointArgs) -> anyhow::Result<()> {
    if let Some(design) = &args.design {
        if crate::args::is_leg_file(design)? {
            return run_leg_point(args, design);
        }
        return run_cell_design_point(args, design);
    }
    let report = point::evaluate(&args.to_input()?)?;
    if args.json {
        outln!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        out!("{}", host_tool::report::render::point_text(&report));
    }
    Ok(())
}
