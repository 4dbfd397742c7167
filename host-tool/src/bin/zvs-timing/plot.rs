//! `zvs-timing plot`: SVG pictures of a design.

use clap::Args;

use crate::args::opt_num;

#[derive(Args)]
pub(crate) struct PlotArgs {
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
    /// Table blob written by `table` (<name>.bin) for the error map; without it the table is
    /// generated again. For a half-bridge leg, an edge's blob (<name>_falling.bin,
    /// <name>_rising.bin), once per edge.
    #[arg(long)]
    table: Vec<std::path::PathBuf>,
    /// A half-bridge leg's window pictures: the bus voltage, volt (default: mid-range).
    #[arg(long, allow_hyphen_values = true)]
    vbus: Option<String>,
    /// Run even when the work is estimated to take more than five minutes.
    #[arg(long)]
    allow_long: bool,
}

pub(crate) fn run_plot(args: &PlotArgs) -> anyhow::Result<()> {
    if crate::args::is_leg_file(&args.design)? {
        return run_leg_plot(args);
    }
    let design = host_tool::model::design::Design::load(&args.design)?;
    let vin = opt_num("--vin", args.vin.as_ref(), "V")?;
    let io = opt_num("--io", args.io.as_ref(), "A")?;
    let point = match (vin, io) {
        (Some(v), Some(i)) => Some((v, i)),
        (None, None) => None,
        _ => anyhow::bail!("give both --vin and --io for the cycle picture, or neither"),
    };
    if let Some((v, i)) = point {
        for w in design.check_point(v, i)? {
            eprintln!("zvs-timing: WARNING: {w}");
        }
    }
    crate::args::writable_dir(&args.out)?;
    let table = match args.table.as_slice() {
        [path] => crate::verify::read_table(&design, Some(path), crate::verify::MethodArg::Table)?,
        [_, second, ..] => anyhow::bail!(
            "--table {}: a resonant cell has one table; give --table once",
            second.display()
        ),
        [] => {
            crate::args::check_cost(
                "generating the table for the error map",
                host_tool::check::cost::table_s(&design),
                args.allow_long,
                "give the table written by `zvs-timing table` as --table",
            )?;
            let mut bar = crate::args::Progress::new(false);
            let out = host_tool::generate::generate_with_progress(&design, &mut |stage, f| {
                bar.set(stage, f);
            });
            bar.finish();
            Some(out?.table)
        }
    };
    for f in host_tool::report::plot::write_all_with(&design, &args.out, point, table.as_ref())? {
        outln!("wrote {}", f.display());
    }
    outln!("{}", host_tool::analysis::point::CAUTION);
    Ok(())
}

/// `plot` for a half-bridge leg: per edge the dead-time map and the
/// windows along the current.
fn run_leg_plot(args: &PlotArgs) -> anyhow::Result<()> {
    use host_tool::generate::leg_tables::leg_tables;
    let spec = host_tool::input::leg_design::LegSpec::load(&args.design)?;
    let vbus = opt_num("--vbus", args.vbus.as_ref(), "V")?;
    crate::args::writable_dir(&args.out)?;
    let generated: Vec<(timing_core::leg::Edge, host_tool::generate::Generated)> =
        if args.table.is_empty() {
            outln!("no --table given: generating both edge tables (about a minute)");
            leg_tables(&spec)?
                .into_iter()
                .map(|o| (o.edge, o.table))
                .collect()
        } else {
            args.table
                .iter()
                .map(|p| {
                    Ok((
                        crate::verify::leg_blob_edge(p)?,
                        crate::verify::read_blob(p, spec.hash)?,
                    ))
                })
                .collect::<anyhow::Result<_>>()?
        };
    let tables = generated
        .iter()
        .map(|(e, g)| Ok((*e, g.table()?)))
        .collect::<anyhow::Result<Vec<_>>>()?;
    for f in host_tool::report::leg_plot::write_leg_plots(&spec, &args.out, &tables, vbus)? {
        outln!("wrote {}", f.display());
    }
    outln!("{}", host_tool::analysis::point::CAUTION);
    Ok(())
}
