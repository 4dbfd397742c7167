//! `zvs-timing netlist`: a SPICE deck of the design's cell at one point.

use clap::Args;

use crate::args::num;

#[derive(Args)]
pub(crate) struct NetlistArgs {
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

pub(crate) fn run_netlist(args: &NetlistArgs) -> anyhow::Result<()> {
    let design = host_tool::model::design::Design::load(&args.design)?;
    let vin = num("--vin", &args.vin, "V")?;
    let io = num("--io", &args.io, "A")?;
    for w in design.check_point(vin, io)? {
        eprintln!("zvs-timing: WARNING: {w}");
    }
    if let Some(path) = &args.out {
        crate::args::writable_file(path)?;
    }
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
