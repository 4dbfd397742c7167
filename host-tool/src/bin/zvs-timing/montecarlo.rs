//! `zvs-timing montecarlo`: boards and cycles drawn within the design's
//! tolerances.

use clap::Args;

use crate::verify::{method_pieces, open_method, read_table, MethodArg};

#[derive(Args)]
pub(crate) struct MonteCarloArgs {
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
    /// Run even when the work is estimated to take more than five minutes.
    #[arg(long)]
    allow_long: bool,
}

pub(crate) fn run_montecarlo(args: &MonteCarloArgs) -> anyhow::Result<()> {
    let design = host_tool::model::design::Design::load(&args.design)?;
    let cf = design.closed_form()?;
    let file = read_table(&design, args.table.as_deref(), args.method)?;
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
        let mut v = serde_json::to_value(&r)?;
        if let Some(o) = v.as_object_mut() {
            o.insert(
                "caution".into(),
                serde_json::Value::String(host_tool::analysis::point::CAUTION.to_owned()),
            );
        }
        outln!("{}", serde_json::to_string_pretty(&v)?);
    } else {
        out!("{}", host_tool::report::render::montecarlo_text(&r));
        outln!("\n{}", host_tool::analysis::point::CAUTION);
    }
    Ok(())
}
