//! `zvs-timing verify`: a table blob or a closed-form method against its
//! design at every code pair; the table file and method readers the
//! other commands share.

use std::process::ExitCode;

use clap::{Args, ValueEnum};

#[derive(Args)]
pub(crate) struct VerifyArgs {
    /// Design file (TOML).
    design: std::path::PathBuf,
    /// Table blob written by `table` (<name>.bin); needed for `--method table`. For a half-bridge
    /// leg, an edge's blob (<name>_falling.bin, <name>_rising.bin): give --table once per edge.
    #[arg(long)]
    table: Vec<std::path::PathBuf>,
    /// The runtime method to check: the table lookup or one of timing-core's
    /// closed forms (evaluated exactly as the firmware does).
    #[arg(long, value_enum, default_value = "table")]
    method: MethodArg,
    /// Print one JSON object instead of the summary.
    #[arg(long)]
    json: bool,
    /// Run even when the work is estimated to take more than five minutes.
    #[arg(long)]
    allow_long: bool,
}

#[derive(Clone, Copy, PartialEq, Eq, ValueEnum)]
pub(crate) enum MethodArg {
    /// The flash table (`--table`).
    Table,
    /// Closed form in f32 with timing-core's fast approximations.
    ClosedFormF32,
    /// Closed form in 32-bit integers (no FPU, no divider).
    FixedPoint,
    /// Closed form in f32 with libm (baseline).
    LibmF32,
    /// The libm-f32 formula with micromath's fast, small f32 approximations.
    MicromathF32,
}

impl MethodArg {
    /// The name as given to `--method`.
    pub(crate) fn name(self) -> &'static str {
        match self {
            Self::Table => "table",
            Self::ClosedFormF32 => "closed-form-f32",
            Self::FixedPoint => "fixed-point",
            Self::LibmF32 => "libm-f32",
            Self::MicromathF32 => "micromath-f32",
        }
    }
}

/// A table blob read from its file and opened (its integrity and the
/// design's hash checked), its entries decoded into a `u16` array: the
/// lookup checked is the one over the entries as firmware holds them in a
/// Rust or C array, the same code as over the blob's bytes but for the
/// read of an entry (`timing_core::table::LeBytes`, which
/// `tests/blob_lookup.rs` checks against the array at every code pair).
pub(crate) type TableFile = host_tool::generate::Generated;

/// The table file `table` for the method `which` (`None` for a closed
/// form).
pub(crate) fn read_table(
    design: &host_tool::model::design::Design,
    table: Option<&std::path::Path>,
    which: MethodArg,
) -> anyhow::Result<Option<TableFile>> {
    let path = match (table, which) {
        (Some(path), MethodArg::Table) => path,
        (None, MethodArg::Table) => {
            anyhow::bail!("--method table needs --table <name>.bin (written by `zvs-timing table`)")
        }
        (Some(path), m) => anyhow::bail!(
            "--table {} is for --method table; --method {} computes the delay without one: drop one of the two",
            path.display(),
            m.name()
        ),
        (None, _) => return Ok(None),
    };
    read_blob(path, design.hash).map(Some)
}

/// The blob at `path`, opened with its integrity and the design hash `hash`
/// checked, its entries decoded.
pub(crate) fn read_blob(path: &std::path::Path, hash: u32) -> anyhow::Result<TableFile> {
    use timing_core::table::Entries;
    let name = path.display();
    let blob = std::fs::read(path).map_err(|e| anyhow::anyhow!("cannot read {name}: {e}"))?;
    let (_, t) = timing_core::blob::open(&blob, Some(hash))
        .map_err(|e| anyhow::anyhow!("{name}: integrity check failed: {e}"))?;
    Ok(TableFile {
        sensing: *t.sensing(),
        layout: *t.layout(),
        frac_bits: t.frac_bits(),
        fallback: t.fallback(),
        entries: (0..t.entries().count())
            .map(|k| t.entries().at(k))
            .collect(),
    })
}

/// The runtime method `which`: the table of `file` or one of the closed
/// forms `cf`.
pub(crate) fn open_method<'a>(
    cf: &timing_core::closed_form::ClosedForm,
    file: Option<&'a TableFile>,
    pieces: Option<&'a host_tool::generate::pieces::PieceSet>,
    which: MethodArg,
) -> anyhow::Result<Box<dyn host_tool::check::verify::DelayMethod + 'a>> {
    Ok(match (which, file) {
        (MethodArg::Table, Some(f)) => Box::new(f.table()?),
        (MethodArg::Table, None) => anyhow::bail!("--method table needs --table <name>.bin"),
        (MethodArg::ClosedFormF32, _) => match pieces {
            Some(p) => Box::new(p.fast_f32()?),
            None => anyhow::bail!("--method closed-form-f32 needs the design's fitted pieces"),
        },
        (MethodArg::FixedPoint, _) => match pieces {
            Some(p) => Box::new(p.fixed_point()?),
            None => anyhow::bail!("--method fixed-point needs the design's fitted pieces"),
        },
        (MethodArg::LibmF32, _) => Box::new(cf.libm_f32()?),
        (MethodArg::MicromathF32, _) => Box::new(cf.micromath_f32()?),
    })
}

/// The fast closed form's pieces, fitted to the design's exact model, when
/// `which` is that method.
pub(crate) fn method_pieces(
    design: &host_tool::model::design::Design,
    which: MethodArg,
) -> anyhow::Result<Option<host_tool::generate::pieces::PieceSet>> {
    Ok(match which {
        MethodArg::ClosedFormF32 | MethodArg::FixedPoint => {
            Some(host_tool::generate::pieces::fit_design_pieces(design)?)
        }
        _ => None,
    })
}

pub(crate) fn run_verify(args: &VerifyArgs) -> anyhow::Result<ExitCode> {
    use host_tool::model::design::Design;
    if crate::args::is_leg_file(&args.design)? {
        return run_leg_verify(args);
    }
    let design = Design::load(&args.design)?;
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
        &format!(
            "verifying {} at {} code pairs",
            args.method.name(),
            host_tool::check::cost::pairs(&design)
        ),
        host_tool::check::cost::verify_s(&design),
        args.allow_long,
        "narrow the design range",
    )?;
    let fit_start = std::time::Instant::now();
    let pieces = method_pieces(&design, args.method)?;
    let fit_s = fit_start.elapsed().as_secs_f64();
    let method = open_method(&cf, file.as_ref(), pieces.as_ref(), args.method)?;
    let start = std::time::Instant::now();
    let mut bar = crate::args::Progress::new(args.json);
    let mut tick = |f: f64| bar.set("verifying", f);
    let v = host_tool::check::verify::verify(&design, method.as_ref(), Some(&mut tick));
    bar.finish();
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
            "pieces": pieces.as_ref().map(|p| serde_json::json!({
                "pieces": p.len(),
                "bands": p.bands(),
                "fit_seconds": fit_s,
            })),
        });
        outln!("{}", serde_json::to_string_pretty(&j)?);
    } else {
        if let Some(p) = &pieces {
            outln!(
                "{}: {} pieces in {} voltage band{}, fitted to the exact model in {fit_s:.1} s",
                args.method.name(),
                p.len(),
                p.bands(),
                if p.bands() == 1 { "" } else { "s" }
            );
        }
        out!(
            "{}",
            host_tool::report::render::verification_text(&v, design.timer.clock_hz())
        );
    }
    if ok {
        if !args.json {
            outln!(
                "PASS: {} within max_error_ticks = {} (worst {:.3} ticks) at all {} code pairs",
                v.method,
                design.max_error_ticks,
                v.max_error_ticks,
                v.points_checked
            );
        }
        Ok(ExitCode::SUCCESS)
    } else {
        eprintln!(
            "zvs-timing: error: {} error {:.3} ticks exceeds max_error_ticks = {}",
            v.method, v.max_error_ticks, design.max_error_ticks
        );
        Ok(ExitCode::from(1))
    }
}

/// `verify` for a half-bridge leg: each edge blob given against the leg's
/// exact model at every code pair of its edge.
fn run_leg_verify(args: &VerifyArgs) -> anyhow::Result<ExitCode> {
    use host_tool::generate::leg_tables::{edge_name, EdgePairs};
    use host_tool::input::leg_design::LegSpec;
    use host_tool::model::leg_model::LegModel;
    let spec = LegSpec::load(&args.design)?;
    leg_tables_given(&spec, args.method, &args.table)?;
    let mut ok = true;
    let mut reports = Vec::new();
    for path in &args.table {
        let edge = leg_blob_edge(path)?;
        let g = read_blob(path, spec.hash)?;
        let model = LegModel::new(&spec, edge)?;
        let pairs = EdgePairs::new(&spec, &model)?;
        let f = pairs.figures(&spec, &g);
        let pass = f.outside_window == 0
            && f.below_floor == 0
            && f.worst_budgeted_steps <= spec.max_error_ticks;
        ok &= pass;
        if !args.json {
            outln!(
                "{} edge ({}): {} code pairs; {} with a window a step wide, {} commanded outside it; {} with a robust window, {} outside it; {} below the least dead time; worst {:.3} steps from the aim where the budget of {} applies: {}",
                edge_name(edge),
                path.display(),
                f.pairs,
                f.windowed,
                f.outside_window,
                f.robust,
                f.outside_robust,
                f.below_floor,
                f.worst_budgeted_steps,
                spec.max_error_ticks,
                if pass { "PASS" } else { "FAIL" }
            );
        }
        reports.push(serde_json::json!({
            "edge": edge_name(edge),
            "table": path.display().to_string(),
            "ok": pass,
            "figures": f,
        }));
    }
    if args.json {
        outln!(
            "{}",
            serde_json::to_string_pretty(&serde_json::json!({ "ok": ok, "edges": reports }))?
        );
    }
    Ok(if ok {
        ExitCode::SUCCESS
    } else {
        eprintln!("zvs-timing: error: an edge table misses its windows or its budget (see above)");
        ExitCode::from(1)
    })
}

/// The edge of a leg's table blob, from its file name (`<name>_falling.bin`
/// or `<name>_rising.bin`, as `table` writes them).
pub(crate) fn leg_blob_edge(path: &std::path::Path) -> anyhow::Result<timing_core::leg::Edge> {
    use host_tool::input::leg_design::{edge_name, EDGES};
    let file = path.file_name().and_then(|f| f.to_str()).unwrap_or("");
    EDGES
        .into_iter()
        .find(|&e| file.ends_with(&format!("_{}.bin", edge_name(e))))
        .ok_or_else(|| {
            anyhow::anyhow!(
                "--table {}: the edge is read from the file name, which must end in _falling.bin or _rising.bin",
                path.display()
            )
        })
}

/// A leg is checked through its tables: `--method table` and at least one
/// `--table`.
pub(crate) fn leg_tables_given(
    spec: &host_tool::input::leg_design::LegSpec,
    method: MethodArg,
    tables: &[std::path::PathBuf],
) -> anyhow::Result<()> {
    if method != MethodArg::Table {
        anyhow::bail!(
            "--method {}: a half-bridge leg is served by its dead-time tables (--method table)",
            method.name()
        );
    }
    if tables.is_empty() {
        anyhow::bail!(
            "--table {}_falling.bin and/or --table {}_rising.bin (written by `zvs-timing table`) are needed",
            spec.name,
            spec.name
        );
    }
    Ok(())
}
