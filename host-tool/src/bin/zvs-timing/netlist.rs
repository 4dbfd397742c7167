//! `zvs-timing netlist`: a SPICE deck of the design's cell (or a half-bridge
//! leg's edge) at one point.

use clap::Args;

use crate::args::num;

#[derive(Args)]
pub(crate) struct NetlistArgs {
    /// Design file (TOML).
    design: std::path::PathBuf,
    /// Input voltage, volt (the resonant cell).
    #[arg(long, allow_hyphen_values = true)]
    vin: Option<String>,
    /// Output current, ampere (the resonant cell).
    #[arg(long, allow_hyphen_values = true)]
    io: Option<String>,
    /// Bus voltage, volt (a half-bridge leg's design).
    #[arg(long, allow_hyphen_values = true)]
    vbus: Option<String>,
    /// Current out of the switch node at the switching instant, ampere, signed (a leg).
    #[arg(long, allow_hyphen_values = true)]
    current: Option<String>,
    /// The leg's edge (default: falling for a positive current, rising otherwise).
    #[arg(long, value_enum)]
    edge: Option<crate::point::EdgeArg>,
    /// Write the deck here instead of standard output.
    #[arg(long)]
    out: Option<std::path::PathBuf>,
    /// Print the prediction as JSON (the deck goes to --out, which is then required).
    #[arg(long)]
    json: bool,
}

/// The value of `option`, required for this kind of design.
fn given<'a>(option: &str, v: Option<&'a String>, kind: &str) -> anyhow::Result<&'a String> {
    v.ok_or_else(|| anyhow::anyhow!("{option} is needed for {kind}"))
}

pub(crate) fn run_netlist(args: &NetlistArgs) -> anyhow::Result<()> {
    if crate::args::is_leg_file(&args.design)? {
        return run_leg_netlist(args);
    }
    let design = host_tool::model::design::Design::load(&args.design)?;
    let vin = num(
        "--vin",
        given("--vin", args.vin.as_ref(), "a resonant cell")?,
        "V",
    )?;
    let io = num(
        "--io",
        given("--io", args.io.as_ref(), "a resonant cell")?,
        "A",
    )?;
    for w in design.check_point(vin, io)? {
        eprintln!("zvs-timing: WARNING: {w}");
    }
    if let Some(path) = &args.out {
        crate::args::writable_file(path)?;
    }
    let (deck, prediction) = host_tool::sim::netlist::netlist(&design, vin, io)?;
    emit(args, &deck, serde_json::to_value(&prediction)?)
}

/// Write the deck to `--out` (or standard output), then the prediction as
/// JSON with the caution (`--json`), or the caution alone.
fn emit(args: &NetlistArgs, deck: &str, prediction: serde_json::Value) -> anyhow::Result<()> {
    match &args.out {
        Some(path) => std::fs::write(path, deck)
            .map_err(|e| anyhow::anyhow!("cannot write {}: {e}", path.display()))?,
        None if args.json => anyhow::bail!("--json prints the prediction; give --out for the deck"),
        None => out!("{deck}"),
    }
    if args.json {
        outln!(
            "{}",
            serde_json::to_string_pretty(&crate::args::with_caution(prediction))?
        );
    } else if args.out.is_some() {
        outln!("{}", host_tool::analysis::point::CAUTION);
    }
    Ok(())
}

/// `netlist` for a half-bridge leg's edge.
fn run_leg_netlist(args: &NetlistArgs) -> anyhow::Result<()> {
    use timing_core::leg::Edge;
    let spec = host_tool::input::leg_design::LegSpec::load(&args.design)?;
    let kind = "a half-bridge leg";
    let vbus = num("--vbus", given("--vbus", args.vbus.as_ref(), kind)?, "V")?;
    let current = num(
        "--current",
        given("--current", args.current.as_ref(), kind)?,
        "A",
    )?;
    if !(vbus.is_finite() && vbus > 0.0) {
        anyhow::bail!("--vbus = {vbus} V: must be a voltage above zero");
    }
    let edge = match args.edge {
        Some(crate::point::EdgeArg::Falling) => Edge::Falling,
        Some(crate::point::EdgeArg::Rising) => Edge::Rising,
        None if current > 0.0 => Edge::Falling,
        None => Edge::Rising,
    };
    if let Some(path) = &args.out {
        crate::args::writable_file(path)?;
    }
    let (deck, report) = host_tool::sim::leg_netlist::leg_netlist(&spec, edge, vbus, current)
        .map_err(|e| anyhow::anyhow!("--vbus {vbus} V, --current {current} A: {e}"))?;
    for w in &report.warnings {
        eprintln!("zvs-timing: WARNING: {w}");
    }
    emit(args, &deck, serde_json::to_value(&report)?)
}
