//! `zvs-timing`: turn-on timing for ZVS quasi-resonant converters. One
//! file a command, with the arguments it takes; the work is host-tool's
//! library.

#![cfg_attr(
    not(test),
    deny(clippy::unwrap_used, clippy::expect_used, clippy::panic)
)]

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

mod args;
mod fit;
mod montecarlo;
mod netlist;
mod plot;
mod point;
mod size;
mod table;
mod verify;

use std::process::ExitCode;

use clap::{Parser, Subcommand};

#[derive(Parser)]
#[command(
    name = "zvs-timing",
    version,
    about = "Turn-on timing for zero-voltage-switching quasi-resonant converters",
    long_about = "Computes, from the resonant tank and the operating point, the window after gate \
turn-off in which the MOSFET turns on at zero voltage, the valley fallback below the ZVS boundary, \
and the timer delay that lands the turn-on inside the window."
)]
struct Cli {
    #[command(subcommand)]
    command: Cmd,
}

#[derive(Subcommand)]
enum Cmd {
    /// The transition, ZVS window and turn-on delay at one operating point.
    Point(Box<point::PointArgs>),
    /// Generate, verify and export the delay table of a design file.
    Table(table::TableArgs),
    /// Check a table blob or a closed-form method against its design at every ADC code pair.
    Verify(verify::VerifyArgs),
    /// Size the resonant tank: the Z0 interval for ZVS within the voltage rating, Lr/Cr pairs.
    Size(size::SizeArgs),
    /// A SPICE deck of the design's switch cell at one point, with the commanded turn-on.
    Netlist(netlist::NetlistArgs),
    /// SVG pictures: delay, window and table-error maps, and one switching transition.
    Plot(plot::PlotArgs),
    /// Bring-up: fit the tank (Lr, C, Coss scale, loop resistance, turn-off delay) to scope
    /// captures of the switch node, and write the fitted design file.
    Fit(fit::FitArgs),
    /// Monte Carlo over boards and cycles with the design's [tolerance]: how often the turn-on
    /// lands in the true window.
    Montecarlo(montecarlo::MonteCarloArgs),
}

/// Shown under every command's help, short (`-h`) and long (`--help`).
const HELP_CAUTION: &str =
    "CAUTION: these converters run at lethal voltages. Verify every timing at \
reduced voltage with a scope, and follow local electrical codes and licensed practice.";

fn main() -> ExitCode {
    use clap::{CommandFactory, FromArgMatches};
    let command = Cli::command()
        .after_help(HELP_CAUTION)
        .mut_subcommands(|c| c.after_help(HELP_CAUTION));
    let cli = match Cli::from_arg_matches(&command.get_matches()) {
        Ok(cli) => cli,
        Err(e) => e.exit(),
    };
    let result = match &cli.command {
        Cmd::Point(args) => point::run_point(args),
        Cmd::Table(args) => table::run_table(args),
        Cmd::Size(args) => size::run_size(args),
        Cmd::Netlist(args) => netlist::run_netlist(args),
        Cmd::Montecarlo(args) => montecarlo::run_montecarlo(args),
        Cmd::Plot(args) => plot::run_plot(args),
        Cmd::Fit(args) => fit::run_fit(args),
        Cmd::Verify(args) => match verify::run_verify(args) {
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
