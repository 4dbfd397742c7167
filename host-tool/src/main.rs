//! `zvs-timing`: turn-on timing for ZVS quasi-resonant converters.

#![cfg_attr(
    not(test),
    deny(clippy::unwrap_used, clippy::expect_used, clippy::panic)
)]

use std::process::ExitCode;

use clap::{Args, Parser, Subcommand, ValueEnum};
use host_tool::point::{self, InputError, PointInput, TimerInput};
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
    Point(PointArgs),
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
    /// Resonant capacitance Cr across the switch (external plus MOSFET Coss), farad.
    #[arg(long, allow_hyphen_values = true)]
    cr: String,
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
    /// Print one JSON object instead of the table.
    #[arg(long)]
    json: bool,
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
            topology: match self.topology {
                TopologyArg::Buck => timing_core::Topology::Buck,
                TopologyArg::Boost => timing_core::Topology::Boost,
                TopologyArg::BuckBoost => timing_core::Topology::BuckBoost,
            },
            lr_h: num("--lr", &self.lr, "H")?,
            cr_f: num("--cr", &self.cr, "F")?,
            vin_v: num("--vin", &self.vin, "V")?,
            vout_v: opt_num("--vout", self.vout.as_ref(), "V")?,
            io_a: num("--io", &self.io, "A")?,
            timer,
            position: num("--position", &self.position, "")?,
            fs_hz: opt_num("--fs", self.fs.as_ref(), "Hz")?,
            vds_rating_v: opt_num("--vds-rating", self.vds_rating.as_ref(), "V")?,
            derating: num("--derating", &self.derating, "")?,
        })
    }
}

fn run_point(args: &PointArgs) -> anyhow::Result<()> {
    let report = point::evaluate(&args.to_input()?)?;
    if args.json {
        println!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        print!("{}", host_tool::render::point_text(&report));
    }
    Ok(())
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match &cli.command {
        Cmd::Point(args) => run_point(args),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("zvs-timing: error: {e}");
            ExitCode::from(2)
        }
    }
}
