//! `zvs-timing montecarlo`: boards and cycles drawn within the design's
//! tolerances.

use clap::Args;

use crate::verify::{method_pieces, open_method, read_table, MethodArg};

#[derive(Args)]
pub(crate) struct MonteCarloArgs {
    /// Design file (TOML) with a [tolerance] table.
    design: std::path::PathBuf,
    /// Table blob written by `table` (<name>.bin); needed for `--method table`. For a half-bridge
    /// leg, an edge's blob (<name>_falling.bin, <name>_rising.bin): give --table once per edge.
    #[arg(long)]
    table: Vec<std::path::PathBuf>,
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
    /// Run even when the work is estimated to take more than five minutes.
    #[arg(long)]
    allow_long: bool,
}

pub(crate) fn run_montecarlo(args: &MonteCarloArgs) -> anyhow::Result<()> {
    if crate::args::is_leg_file(&args.design)? {
        return run_leg_montecarlo(args);
    }
    let design = host_tool::model::design::Design::load(&args.design)?;
    let cf = design.closed_form()?;
    let table = match args.table.as_slice() {
        [] => None,
        [one] => Some(one.as_path()),
        [_, second, ..] => anyhow::bail!(
            "--table {}: a resonant cell has one table; give --table once",
            second.display()
        ),
    };
    let file = read_table(&design, table, args.method)?;
    crate::args::check_cost(
        &format!("{} boards x {} cycles", args.boards, args.cycles),
        host_tool::check::cost::montecarlo_s(u64::from(args.boards), u64::from(args.cycles)),
        args.allow_long,
        "draw fewer boards or cycles",
    )?;
    let pieces = method_pieces(&design, args.method)?;
    let method = open_method(&cf, file.as_ref(), pieces.as_ref(), args.method)?;
    let mut bar = crate::args::Progress::new(args.json);
    let mut tick = |f: f64| bar.set("boards", f);
    let r = host_tool::check::montecarlo::run(
        &design,
        method.as_ref(),
        args.boards,
        args.cycles,
        args.seed,
        Some(&mut tick),
    );
    bar.finish();
    let r = r?;
    if args.json {
        outln!(
            "{}",
            serde_json::to_string_pretty(&crate::args::with_caution(serde_json::to_value(&r)?))?
        );
    } else {
        out!("{}", host_tool::report::render::montecarlo_text(&r));
        outln!("\n{}", host_tool::analysis::point::CAUTION);
    }
    Ok(())
}

/// `montecarlo` for a half-bridge leg: each edge blob given, on boards and
/// cycles drawn within the leg's tolerances.
fn run_leg_montecarlo(args: &MonteCarloArgs) -> anyhow::Result<()> {
    use host_tool::check::leg_montecarlo::{run_edge, LegMonteCarloError, LegMonteCarloReport};
    let spec = host_tool::input::leg_design::LegSpec::load(&args.design)?;
    crate::verify::leg_tables_given(&spec, args.method, &args.table)?;
    let tolerance = spec.tolerance.ok_or(LegMonteCarloError::NoTolerance)?;
    let mut edges = Vec::new();
    for path in &args.table {
        let edge = crate::verify::leg_blob_edge(path)?;
        let g = crate::verify::read_blob(path, spec.hash)?;
        edges.push(run_edge(
            &spec,
            edge,
            &g.table()?,
            args.boards,
            args.cycles,
            args.seed,
        )?);
    }
    let r = LegMonteCarloReport {
        seed: args.seed,
        tolerance,
        edges,
    };
    if args.json {
        outln!(
            "{}",
            serde_json::to_string_pretty(&crate::args::with_caution(serde_json::to_value(&r)?))?
        );
        return Ok(());
    }
    for e in &r.edges {
        outln!(
            "{} edge: {} boards x {} cycles; {} cycles with a true window a step wide: {} inside ({:.4} %), {} early, {} late",
            e.edge,
            e.boards,
            e.cycles_per_board,
            e.zvs_cycles,
            e.inside,
            100.0 * e.inside_fraction,
            e.early,
            e.late
        );
        outln!(
            "  {} of them read where a robust window a step wide exists: {} inside the board's true window; {} windows narrower than a step, {} swings short of the rail",
            e.robust_cycles, e.robust_cycles_inside, e.narrow_cycles, e.short_cycles
        );
        if e.model_errors > 0 {
            outln!("  WARNING: {} cycles the model refused", e.model_errors);
        }
    }
    outln!("\n{}", host_tool::analysis::point::CAUTION);
    Ok(())
}
