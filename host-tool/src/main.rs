//! `zvs-timing`: turn-on timing for ZVS quasi-resonant converters.

#![cfg_attr(
    not(test),
    deny(clippy::unwrap_used, clippy::expect_used, clippy::panic)
)]

use std::process::ExitCode;

/// `println!` that ends the program quietly when standard output is closed
/// (a reader such as `head` that has seen enough), instead of panicking.
macro_rules! outln {
    ($($t:tt)*) => {{
        use std::io::Write as _;
        if writeln!(std::io::stdout(), $($t)*).is_err() {
            std::process::exit(0);
        }
    }};
}

/// `print!` with the same behaviour as [`outln!`].
macro_rules! out {
    ($($t:tt)*) => {{
        use std::io::Write as _;
        if write!(std::io::stdout(), $($t)*).is_err() {
            std::process::exit(0);
        }
    }};
}

use clap::{Args, Parser, Subcommand, ValueEnum};
use host_tool::analysis::point::{self, InputError, PointInput, TimerInput};
use host_tool::units::parse_quantity;

#[derive(Parser)]
#[command(
    name = "zvs-timing",
    version,
    about = "Turn-on timing for zero-voltage-switching quasi-resonant converters",
    long_about = "Computes, from the resonant tank and the operating point, the window after gate \
turn-off in which the MOSFET turns on at zero voltage, the valley fallback below the ZVS boundary, \
and the timer delay that lands the turn-on inside the window.\n\n\
CAUTION: these converters run at lethal voltages. Verify every timing at reduced voltage with a \
scope, and follow local electrical codes and licensed practice."
)]
struct Cli {
    #[command(subcommand)]
    command: Cmd,
}

#[derive(Subcommand)]
enum Cmd {
    /// The transition, ZVS window and turn-on delay at one operating point.
    Point(Box<PointArgs>),
    /// Generate, verify and export the delay table of a design file.
    Table(TableArgs),
    /// Check a table blob or a closed-form method against its design at every ADC code pair.
    Verify(VerifyArgs),
    /// Size the resonant tank: the Z0 interval for ZVS within the voltage rating, Lr/Cr pairs.
    Size(SizeArgs),
    /// A SPICE deck of the design's switch cell at one point, with the commanded turn-on.
    Netlist(NetlistArgs),
    /// SVG pictures: delay, window and table-error maps, and one switching transition.
    Plot(PlotArgs),
    /// Monte Carlo over boards and cycles with the design's [tolerance]: how often the turn-on
    /// lands in the true window.
    Montecarlo(MonteCarloArgs),
}

#[derive(Args)]
struct MonteCarloArgs {
    /// Design file (TOML) with a [tolerance] table.
    design: std::path::PathBuf,
    /// Table blob written by `table` (<name>.bin); needed for `--method table`.
    #[arg(long)]
    table: Option<std::path::PathBuf>,
    /// The runtime method to check.
    #[arg(long, value_enum, default_value = "table")]
    method: MethodArg,
    /// Boards drawn (parts and sensing errors within the tolerances).
    #[arg(long, default_value_t = 200)]
    boards: u32,
    /// Switching cycles per board (operating point, noise and jitter drawn each time).
    #[arg(long, default_value_t = 500)]
    cycles: u32,
    /// Random seed (the same seed gives the same draws).
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Print one JSON object instead of the summary.
    #[arg(long)]
    json: bool,
}

#[derive(Args)]
struct PlotArgs {
    /// Design file (TOML).
    design: std::path::PathBuf,
    /// Output folder for delay_map.svg, window_map.svg, error_map.svg and cycle.svg.
    #[arg(long)]
    out: std::path::PathBuf,
    /// Input voltage of the cycle picture, volt (default: mid-range).
    #[arg(long, allow_hyphen_values = true)]
    vin: Option<String>,
    /// Output current of the cycle picture, ampere (default: J = 1.5 at that voltage).
    #[arg(long, allow_hyphen_values = true)]
    io: Option<String>,
}

fn run_plot(args: &PlotArgs) -> anyhow::Result<()> {
    let design = host_tool::model::design::Design::load(&args.design)?;
    let vin = opt_num("--vin", args.vin.as_ref(), "V")?;
    let io = opt_num("--io", args.io.as_ref(), "A")?;
    let point = match (vin, io) {
        (Some(v), Some(i)) => Some((v, i)),
        (None, None) => None,
        _ => anyhow::bail!("give both --vin and --io for the cycle picture, or neither"),
    };
    for f in host_tool::report::plot::write_all(&design, &args.out, point)? {
        outln!("wrote {}", f.display());
    }
    outln!("{}", host_tool::analysis::point::CAUTION);
    Ok(())
}

#[derive(Args)]
struct NetlistArgs {
    /// Design file (TOML).
    design: std::path::PathBuf,
    /// Input voltage, volt.
    #[arg(long, allow_hyphen_values = true)]
    vin: String,
    /// Output current, ampere.
    #[arg(long, allow_hyphen_values = true)]
    io: String,
    /// Write the deck here instead of standard output.
    #[arg(long)]
    out: Option<std::path::PathBuf>,
    /// Print the prediction as JSON (the deck goes to --out, which is then required).
    #[arg(long)]
    json: bool,
}

fn run_netlist(args: &NetlistArgs) -> anyhow::Result<()> {
    let design = host_tool::model::design::Design::load(&args.design)?;
    let vin = num("--vin", &args.vin, "V")?;
    let io = num("--io", &args.io, "A")?;
    let (deck, prediction) = host_tool::sim::netlist::netlist(&design, vin, io)?;
    match &args.out {
        Some(path) => std::fs::write(path, &deck)
            .map_err(|e| anyhow::anyhow!("cannot write {}: {e}", path.display()))?,
        None if args.json => anyhow::bail!("--json prints the prediction; give --out for the deck"),
        None => out!("{deck}"),
    }
    if args.json {
        let mut j = serde_json::to_value(&prediction)?;
        if let Some(o) = j.as_object_mut() {
            o.insert(
                "caution".to_owned(),
                serde_json::Value::String(host_tool::analysis::point::CAUTION.to_owned()),
            );
        }
        outln!("{}", serde_json::to_string_pretty(&j)?);
    } else if args.out.is_some() {
        outln!("{}", host_tool::analysis::point::CAUTION);
    }
    Ok(())
}

/// Ranges are `LOW:HIGH`; numbers take SI or engineering prefixes as in `point`.
#[derive(Args)]
struct SizeArgs {
    /// Input-voltage range, volt, e.g. 36:60.
    #[arg(long, allow_hyphen_values = true)]
    vin: String,
    /// Output-current range that must switch softly, ampere, e.g. 1:8.
    #[arg(long, allow_hyphen_values = true)]
    io: String,
    /// MOSFET drain-source voltage rating, volt.
    #[arg(long, allow_hyphen_values = true)]
    vds_rating: String,
    /// Fraction of the rating the peak switch voltage may use.
    #[arg(long, default_value = "0.8", allow_hyphen_values = true)]
    derating: String,
    /// Converter the switch sits in.
    #[arg(long, value_enum, default_value = "buck")]
    topology: TopologyArg,
    /// Output voltage, volt (boost and buck-boost need it; for the buck it gives the
    /// switching-frequency range that regulates).
    #[arg(long, allow_hyphen_values = true)]
    vout: Option<String>,
    /// Resonant frequency f0 for the Lr/Cr pairs, hertz.
    #[arg(long, allow_hyphen_values = true)]
    f0: Option<String>,
    /// Highest switching frequency allowed, hertz: picks f0 when --f0 is not given (buck
    /// with --vout), else is checked.
    #[arg(long, allow_hyphen_values = true)]
    fs_max: Option<String>,
    /// Print one JSON object instead of the summary.
    #[arg(long)]
    json: bool,
}

fn range(option: &'static str, text: &str, unit: &'static str) -> Result<(f64, f64), InputError> {
    let Some((a, b)) = text.split_once(':') else {
        return Err(InputError::new(
            option,
            format!("expected LOW:HIGH, e.g. 36:60, got `{text}`"),
        ));
    };
    Ok((num(option, a.trim(), unit)?, num(option, b.trim(), unit)?))
}

impl SizeArgs {
    fn to_input(&self) -> Result<host_tool::analysis::size::SizeInput, InputError> {
        Ok(host_tool::analysis::size::SizeInput {
            topology: topology(self.topology),
            vin_v: range("--vin", &self.vin, "V")?,
            io_a: range("--io", &self.io, "A")?,
            vout_v: opt_num("--vout", self.vout.as_ref(), "V")?,
            vds_rating_v: num("--vds-rating", &self.vds_rating, "V")?,
            derating: num("--derating", &self.derating, "")?,
            f0_hz: opt_num("--f0", self.f0.as_ref(), "Hz")?,
            fs_max_hz: opt_num("--fs-max", self.fs_max.as_ref(), "Hz")?,
        })
    }
}

fn topology(t: TopologyArg) -> timing_core::Topology {
    match t {
        TopologyArg::Buck => timing_core::Topology::Buck,
        TopologyArg::Boost => timing_core::Topology::Boost,
        TopologyArg::BuckBoost => timing_core::Topology::BuckBoost,
    }
}

fn run_size(args: &SizeArgs) -> anyhow::Result<()> {
    let input = args.to_input()?;
    let report = host_tool::analysis::size::size(&input)?;
    if args.json {
        let mut j = serde_json::to_value(&report)?;
        if let Some(o) = j.as_object_mut() {
            o.insert(
                "caution".to_owned(),
                serde_json::Value::String(host_tool::analysis::point::CAUTION.to_owned()),
            );
        }
        outln!("{}", serde_json::to_string_pretty(&j)?);
    } else {
        out!("{}", host_tool::report::render::size_text(&report));
    }
    Ok(())
}

#[derive(Args)]
struct TableArgs {
    /// Design file (TOML).
    design: std::path::PathBuf,
    /// Output folder for <name>.rs, .h, .bin and .csv.
    #[arg(long)]
    out: std::path::PathBuf,
    /// Print one JSON object instead of the summary.
    #[arg(long)]
    json: bool,
    /// List every candidate evaluated, not one line per layout family.
    #[arg(long)]
    verbose: bool,
}

#[derive(Args)]
struct VerifyArgs {
    /// Design file (TOML).
    design: std::path::PathBuf,
    /// Table blob written by `table` (<name>.bin); needed for `--method table`.
    #[arg(long)]
    table: Option<std::path::PathBuf>,
    /// The runtime method to check: the table lookup or one of timing-core's
    /// closed forms (evaluated exactly as the firmware does).
    #[arg(long, value_enum, default_value = "table")]
    method: MethodArg,
    /// Print one JSON object instead of the summary.
    #[arg(long)]
    json: bool,
}

#[derive(Clone, Copy, PartialEq, Eq, ValueEnum)]
enum MethodArg {
    /// The flash table (`--table`).
    Table,
    /// Closed form in f32 with timing-core's fast approximations.
    ClosedFormF32,
    /// Closed form in 32-bit integers (no FPU, no divider).
    FixedPoint,
    /// Closed form in f32 with libm (baseline).
    LibmF32,
}

#[derive(Clone, Copy, ValueEnum)]
enum TopologyArg {
    Buck,
    Boost,
    BuckBoost,
}

/// Numbers take SI (2e-6) or engineering prefixes (2u, 10n, 170M), optionally with the unit (2uH).
#[derive(Args)]
struct PointArgs {
    /// Resonant inductance Lr, henry.
    #[arg(long, allow_hyphen_values = true)]
    lr: String,
    /// Resonant capacitance Cr across the switch, farad: the whole of it (external plus the
    /// MOSFET's, taken as constant), or with --coss the external part in parallel with the curve.
    #[arg(long, allow_hyphen_values = true)]
    cr: Option<String>,
    /// CSV file of the MOSFET's output capacitance curve, `volts,farads` per line (a datasheet
    /// plot read off by hand): the timings come from the non-linear ring.
    #[arg(long)]
    coss: Option<std::path::PathBuf>,
    /// Series resistance of the resonant loop, ohm: the damped ring.
    #[arg(long, allow_hyphen_values = true)]
    tank_resistance: Option<String>,
    /// Input voltage, volt.
    #[arg(long, allow_hyphen_values = true)]
    vin: String,
    /// Output current, ampere.
    #[arg(long, allow_hyphen_values = true)]
    io: String,
    /// Converter the switch sits in.
    #[arg(long, value_enum, default_value = "buck")]
    topology: TopologyArg,
    /// Output voltage, volt: required for boost and buck-boost; for the buck, asks for the
    /// switching frequency that regulates to it.
    #[arg(long, allow_hyphen_values = true)]
    vout: Option<String>,
    /// Timer clock, hertz: gives the delay in ticks.
    #[arg(long, allow_hyphen_values = true)]
    timer_hz: Option<String>,
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
    /// Relative error of the sensed input voltage (gain), a fraction or a percentage.
    #[arg(long, allow_hyphen_values = true)]
    vin_err: Option<String>,
    /// Relative error of the sensed output current (gain), a fraction or a percentage.
    #[arg(long, allow_hyphen_values = true)]
    io_err: Option<String>,
    /// Absolute error of the sensed input voltage (offset plus peak noise), volt.
    #[arg(long, allow_hyphen_values = true)]
    vin_offset: Option<String>,
    /// Absolute error of the sensed output current (offset plus peak noise), ampere.
    #[arg(long, allow_hyphen_values = true)]
    io_offset: Option<String>,
    /// Peak timer jitter, second.
    #[arg(long, allow_hyphen_values = true)]
    jitter: Option<String>,
    /// Print one JSON object instead of the table.
    #[arg(long)]
    json: bool,
}

/// A fraction given as `0.1` or `10%`.
fn fraction(option: &'static str, text: Option<&String>) -> Result<Option<f64>, InputError> {
    let Some(t) = text else { return Ok(None) };
    host_tool::units::parse_fraction(t)
        .map(Some)
        .ok_or_else(|| {
            InputError::new(
                option,
                format!("expected a fraction or a percentage such as 0.05 or 5%, got `{t}`"),
            )
        })
}

fn num(option: &'static str, text: &str, unit: &'static str) -> Result<f64, InputError> {
    parse_quantity(text, unit).map_err(|e| InputError::new(option, e.to_string()))
}

fn opt_num(
    option: &'static str,
    text: Option<&String>,
    unit: &'static str,
) -> Result<Option<f64>, InputError> {
    text.map(|t| num(option, t, unit)).transpose()
}

impl PointArgs {
    fn to_input(&self) -> Result<PointInput, InputError> {
        let timer = match opt_num("--timer-hz", self.timer_hz.as_ref(), "Hz")? {
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
            lr_h: num("--lr", &self.lr, "H")?,
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
            r_tank_ohm: opt_num("--tank-resistance", self.tank_resistance.as_ref(), "ohm")?
                .unwrap_or(0.0),
            vin_v: num("--vin", &self.vin, "V")?,
            vout_v: opt_num("--vout", self.vout.as_ref(), "V")?,
            io_a: num("--io", &self.io, "A")?,
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
            fraction("--vin-err", self.vin_err.as_ref())?,
            fraction("--io-err", self.io_err.as_ref())?,
            opt_num("--jitter", self.jitter.as_ref(), "s")?,
            opt_num("--vin-offset", self.vin_offset.as_ref(), "V")?,
            opt_num("--io-offset", self.io_offset.as_ref(), "A")?,
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

fn run_point(args: &PointArgs) -> anyhow::Result<()> {
    let report = point::evaluate(&args.to_input()?)?;
    if args.json {
        outln!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        out!("{}", host_tool::report::render::point_text(&report));
    }
    Ok(())
}

fn print_verification(v: &host_tool::check::verify::VerifyReport, clock_hz: f64) {
    outln!(
        "method {}: verified {} of {} code pairs: max error {:.3} ticks at vin code {} ({:.3} V), io code {} ({:.4} A); RMS {:.3} ticks",
        v.method, v.points_checked, v.pairs_in_range, v.max_error_ticks, v.worst_vin_code, v.worst_vin_v, v.worst_io_code, v.worst_io_a, v.rms_error_ticks
    );
    if v.pairs_evaluated < v.points_checked {
        outln!(
            "{} pairs evaluated; the other {} double both codes of one of them (ideal tank, table indexed by the code ratio: the same load, window and command), so share its verdict",
            v.pairs_evaluated,
            v.points_checked - v.pairs_evaluated
        );
    }
    if let (Some(e), Some((cv, ci))) = (
        v.max_approximation_error_ticks,
        v.max_approximation_error_at,
    ) {
        outln!(
            "approximation error before rounding to whole ticks: at most {e:.4} ticks (vin code {cv}, io code {ci})"
        );
    }
    outln!(
        "ZVS pairs: {}; commanded turn-ons outside the true window: {} ({} early, {} late), {} of them where the window is a tick wide or more; windows narrower than a tick: {}",
        v.zvs_points, v.outside_window, v.early, v.late, v.outside_window_wide, v.narrower_than_a_tick
    );
    if let (Some(j), Some(width)) = (v.outside_window_max_load, v.outside_window_max_width_ticks) {
        outln!(
            "every miss is at J <= {j:.4}, where the ZVS window is at most {width:.2} ticks wide"
        );
    }
    if let Some(m) = v.min_margin_s {
        outln!(
            "smallest margin to a window edge: {} ({:.2} ticks)",
            host_tool::units::format_si(m, "s"),
            m * clock_hz
        );
    }
    if v.robust_points + v.zvs_unreliable > 0 {
        outln!(
            "tolerances: {} ZVS pairs have a robust window a tick wide or more, {} outside it; {} are treated as ZVS-impossible (no window every board shares, a tick wide)",
            v.robust_points, v.outside_robust_window, v.zvs_unreliable
        );
        if let Some(m) = v.min_robust_margin_s {
            outln!(
                "worst margin to a robust-window edge: {} ({:.2} ticks{})",
                host_tool::units::format_si(m, "s"),
                m * clock_hz,
                if m < 0.0 { ", outside" } else { "" }
            );
        }
    }
}

fn run_table(args: &TableArgs) -> anyhow::Result<()> {
    use host_tool::{emit::export, generate, model::design::Design};
    let design = Design::load(&args.design)?;
    let out = generate::generate(&design)?;
    let written = export::write_outcome(&args.out, &design, &out)?;
    if args.json {
        let j = serde_json::json!({
            "name": design.name,
            "layout": out.table.layout_name(),
            "table_bytes": out.table.table_bytes(),
            "max_error_ticks": out.verification.max_error_ticks,
            "max_error_budget_ticks": design.max_error_ticks,
            "frac_bits": out.table.frac_bits,
            "design_hash": format!("{:#010x}", design.hash),
            "verification": out.verification,
            "alternatives": out.candidates,
            "files": written,
            "caution": host_tool::analysis::point::CAUTION,
        });
        outln!("{}", serde_json::to_string_pretty(&j)?);
    } else {
        outln!(
            "{}: {} layout, {} bytes ({} fractional bits); written to {}",
            design.name,
            out.table.layout_name(),
            out.table.table_bytes(),
            out.table.frac_bits,
            args.out.display()
        );
        print_verification(&out.verification, design.timer.clock_hz());
        let v = &out.verification;
        if v.outside_window_wide + v.outside_robust_window > 0 {
            outln!(
                "WARNING: no layout up to 16 KiB put every command inside its window; this is the smallest within max_error_ticks, with {} commands outside a window a tick wide and {} outside a robust window (typically where the window opens from zero width at the ZVS boundary): check them on the board, or narrow the range",
                v.outside_window_wide, v.outside_robust_window
            );
        }
        // One line per layout family: its largest candidate evaluated
        // (the whole list is in --json's "alternatives").
        let mut families: Vec<&host_tool::generate::Candidate> = Vec::new();
        for c in out
            .candidates
            .iter()
            .filter(|c| c.screened_error_ticks.is_some())
        {
            match families.iter_mut().find(|f| f.layout == c.layout) {
                Some(f) if !args.verbose => *f = c,
                _ => families.push(c),
            }
        }
        let evaluated = out
            .candidates
            .iter()
            .filter(|c| c.screened_error_ticks.is_some())
            .count();
        if args.verbose {
            outln!("{evaluated} candidates evaluated:");
        } else {
            outln!("{evaluated} candidates evaluated (all with --verbose or --json); the largest of each layout:");
        }
        let total = u64::from(design.vin_codes.len()) * u64::from(design.io_codes.len());
        for c in families {
            let pairs = c.screened_pairs.unwrap_or(0);
            outln!(
                "  {} {} B ({}): {:.3} ticks, {} code pairs outside their window{}{}",
                c.layout,
                c.table_bytes,
                c.shape,
                c.screened_error_ticks.unwrap_or(f64::NAN),
                c.misses.unwrap_or(0),
                if pairs < total {
                    format!(" (of the {pairs} screened: already over the budget there)")
                } else {
                    String::new()
                },
                if c.layout == out.table.layout_name() && c.table_bytes == out.table.table_bytes() {
                    " (chosen)"
                } else {
                    ""
                }
            );
        }
        outln!("\n{}", host_tool::analysis::point::CAUTION);
    }
    Ok(())
}

/// A table blob read from its file and opened (its integrity and the
/// design's hash checked), its entries decoded into a `u16` array: the
/// lookup checked is the one over the entries as firmware holds them in a
/// Rust or C array, the same code as over the blob's bytes but for the
/// read of an entry (`timing_core::table::LeBytes`, which
/// `tests/blob_lookup.rs` checks against the array at every code pair).
struct TableFile {
    sensing: timing_core::table::Sensing,
    layout: timing_core::table::Layout,
    frac_bits: u8,
    fallback: timing_core::table::Fallback,
    entries: Vec<u16>,
}

/// The table file `table` for the method `which` (`None` for a closed
/// form).
fn read_table(
    design: &host_tool::model::design::Design,
    table: Option<&std::path::Path>,
    which: MethodArg,
) -> anyhow::Result<Option<TableFile>> {
    use timing_core::table::Entries;
    let path = match (table, which) {
        (Some(path), MethodArg::Table) => path,
        (None, MethodArg::Table) => {
            anyhow::bail!("--method table needs --table <name>.bin (written by `zvs-timing table`)")
        }
        _ => return Ok(None),
    };
    let name = path.display();
    let blob = std::fs::read(path).map_err(|e| anyhow::anyhow!("cannot read {name}: {e}"))?;
    let (_, t) = timing_core::blob::open(&blob, Some(design.hash))
        .map_err(|e| anyhow::anyhow!("{name}: integrity check failed: {e}"))?;
    Ok(Some(TableFile {
        sensing: *t.sensing(),
        layout: *t.layout(),
        frac_bits: t.frac_bits(),
        fallback: t.fallback(),
        entries: (0..t.entries().count())
            .map(|k| t.entries().at(k))
            .collect(),
    }))
}

/// The runtime method `which`: the table of `file` or one of the closed
/// forms `cf`.
fn open_method<'a>(
    cf: &timing_core::closed_form::ClosedForm,
    file: Option<&'a TableFile>,
    which: MethodArg,
) -> anyhow::Result<Box<dyn host_tool::check::verify::DelayMethod + 'a>> {
    Ok(match (which, file) {
        (MethodArg::Table, Some(f)) => Box::new(timing_core::table::DelayTable::new(
            f.sensing,
            f.layout,
            f.frac_bits,
            f.fallback,
            f.entries.as_slice(),
        )?),
        (MethodArg::Table, None) => anyhow::bail!("--method table needs --table <name>.bin"),
        (MethodArg::ClosedFormF32, _) => Box::new(cf.fast_f32()?),
        (MethodArg::FixedPoint, _) => Box::new(cf.fixed_point()?),
        (MethodArg::LibmF32, _) => Box::new(cf.libm_f32()?),
    })
}

fn run_montecarlo(args: &MonteCarloArgs) -> anyhow::Result<()> {
    let design = host_tool::model::design::Design::load(&args.design)?;
    let cf = design.closed_form()?;
    let file = read_table(&design, args.table.as_deref(), args.method)?;
    let method = open_method(&cf, file.as_ref(), args.method)?;
    let bar = indicatif::ProgressBar::new(u64::from(args.boards));
    bar.set_style(
        indicatif::ProgressStyle::with_template("boards {bar:40} {pos}/{len} ({eta} left)")
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
    );
    if args.json {
        bar.set_draw_target(indicatif::ProgressDrawTarget::hidden());
    }
    let boards = u64::from(args.boards);
    let mut tick = |f: f64| bar.set_position((f * boards as f64).round() as u64);
    let r = host_tool::check::montecarlo::run(
        &design,
        method.as_ref(),
        args.boards,
        args.cycles,
        args.seed,
        Some(&mut tick),
    )?;
    bar.finish_and_clear();
    if args.json {
        let mut v = serde_json::to_value(&r)?;
        if let Some(o) = v.as_object_mut() {
            o.insert(
                "caution".into(),
                serde_json::Value::String(host_tool::analysis::point::CAUTION.to_owned()),
            );
        }
        outln!("{}", serde_json::to_string_pretty(&v)?);
    } else {
        outln!(
            "method {}: {} boards x {} cycles (seed {}): {} of {} ZVS turn-ons inside the true window ({:.3} %), {} early, {} late; worst board {:.3} %; {} cycles below the boundary",
            r.method,
            r.boards,
            r.cycles_per_board,
            r.seed,
            r.inside,
            r.zvs_cycles,
            100.0 * r.inside_fraction,
            r.early,
            r.late,
            100.0 * r.worst_board_inside_fraction,
            r.valley_cycles
        );
        outln!(
            "readings with a robust window a tick wide: {} cycles, {} of them inside the true window{}",
            r.robust_cycles,
            r.robust_cycles_inside,
            if r.robust_cycles_inside == r.robust_cycles { "" } else { " (WARNING: the method misses where the tolerances promise a window)" }
        );
        let t = r.tolerance;
        outln!(
            "tolerances: Lr ±{:.1} %, C ±{:.1} %, gain ±{:.1} % / ±{:.1} %, offset ±{} / ±{} codes, noise ±{} codes, jitter ±{}",
            100.0 * t.lr_rel,
            100.0 * t.cr_rel,
            100.0 * t.vin_gain_rel,
            100.0 * t.io_gain_rel,
            t.vin_offset_codes,
            t.io_offset_codes,
            t.noise_codes,
            host_tool::units::format_si(t.jitter_s, "s")
        );
        outln!("\n{}", host_tool::analysis::point::CAUTION);
    }
    Ok(())
}

fn run_verify(args: &VerifyArgs) -> anyhow::Result<ExitCode> {
    use host_tool::model::design::Design;
    let design = Design::load(&args.design)?;
    let cf = design.closed_form()?;
    let file = read_table(&design, args.table.as_deref(), args.method)?;
    let method = open_method(&cf, file.as_ref(), args.method)?;
    let total = u64::from(design.vin_codes.len());
    let bar = indicatif::ProgressBar::new(total);
    bar.set_style(
        indicatif::ProgressStyle::with_template("verifying {bar:40} {percent}% ({eta} left)")
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
    );
    // Shown only when the run takes longer than a second.
    bar.set_draw_target(indicatif::ProgressDrawTarget::hidden());
    let start = std::time::Instant::now();
    let mut shown = false;
    let mut tick = |f: f64| {
        if !shown && start.elapsed().as_secs_f64() > 1.0 && !args.json {
            bar.set_draw_target(indicatif::ProgressDrawTarget::stderr());
            shown = true;
        }
        bar.set_position((f * total as f64) as u64);
    };
    let v = host_tool::check::verify::verify(&design, method.as_ref(), Some(&mut tick));
    bar.finish_and_clear();
    let ok = v.max_error_ticks <= design.max_error_ticks
        && v.model_errors == 0
        && v.points_checked == v.pairs_in_range;
    if args.json {
        let j = serde_json::json!({
            "ok": ok,
            "max_error_ticks": v.max_error_ticks,
            "max_error_budget_ticks": design.max_error_ticks,
            "points_checked": v.points_checked,
            "report": v,
            "seconds": start.elapsed().as_secs_f64(),
        });
        outln!("{}", serde_json::to_string_pretty(&j)?);
    } else {
        print_verification(&v, design.timer.clock_hz());
    }
    if ok {
        Ok(ExitCode::SUCCESS)
    } else {
        eprintln!(
            "zvs-timing: error: {} error {:.3} ticks exceeds max_error_ticks = {}",
            v.method, v.max_error_ticks, design.max_error_ticks
        );
        Ok(ExitCode::from(1))
    }
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match &cli.command {
        Cmd::Point(args) => run_point(args),
        Cmd::Table(args) => run_table(args),
        Cmd::Size(args) => run_size(args),
        Cmd::Netlist(args) => run_netlist(args),
        Cmd::Montecarlo(args) => run_montecarlo(args),
        Cmd::Plot(args) => run_plot(args),
        Cmd::Verify(args) => match run_verify(args) {
            Ok(code) => return code,
            Err(e) => Err(e),
        },
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("zvs-timing: error: {e}");
            ExitCode::from(2)
        }
    }
}
