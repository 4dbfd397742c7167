//! `zvs-timing table`: generate, verify and export a design's table.

use clap::Args;

#[derive(Args)]
pub(crate) struct TableArgs {
    /// Design file (TOML).
    design: std::path::PathBuf,
    /// Output folder for <name>.rs (Rust table), <name>.h (C header), <name>.bin (flash blob),
    /// <name>.csv (the nodes), <name>_closed_form.rs (the closed-form methods' coefficients) and
    /// <name>_closed_form.h (the closed-form methods and the trim in C99); created when missing.
    #[arg(long)]
    out: std::path::PathBuf,
    /// Print one JSON object instead of the summary.
    #[arg(long)]
    json: bool,
    /// List every candidate evaluated, not one line per layout family.
    #[arg(long)]
    verbose: bool,
    /// Run even when the work is estimated to take more than five minutes.
    #[arg(long)]
    allow_long: bool,
}

pub(crate) fn run_table(args: &TableArgs) -> anyhow::Result<()> {
    use host_tool::{emit::export, generate, model::design::Design};
    if crate::args::is_leg_file(&args.design)? {
        return run_leg_table(args);
    }
    let design = Design::load(&args.design)?;
    crate::args::writable_dir(&args.out)?;
    crate::args::check_cost(
        &format!(
            "generating and proving the table at {} code pairs",
            host_tool::check::cost::pairs(&design)
        ),
        host_tool::check::cost::table_s(&design),
        args.allow_long,
        "narrow the design range",
    )?;
    let mut bar = crate::args::Progress::new(args.json);
    let out = generate::generate_with_progress(&design, &mut |stage, f| bar.set(stage, f));
    bar.finish();
    let out = out?;
    let written = export::write_outcome(&args.out, &design, &out)
        .map_err(|e| anyhow::anyhow!("--out {}: {e}", args.out.display()))?;
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
        out!(
            "{}",
            host_tool::report::render::verification_text(
                &out.verification,
                design.timer.clock_hz()
            )
        );
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
        if let Some(t) = &design.trim {
            let plan = host_tool::model::trim_margin::TrimPlan::new(&design, t)?;
            out!("{}", host_tool::report::render::trim_text(t, &plan));
        }
        outln!("\n{}", host_tool::analysis::point::CAUTION);
    }
    Ok(())
}

/// `table` for a half-bridge leg: both edges' dead-time tables.
fn run_leg_table(args: &TableArgs) -> anyhow::Result<()> {
    use host_tool::generate::leg_tables::{edge_name, leg_tables};
    use host_tool::input::leg_design::LegSpec;
    let spec = LegSpec::load(&args.design)?;
    crate::args::writable_dir(&args.out)?;
    let out = leg_tables(&spec)?;
    let written = host_tool::emit::leg_export::write_leg(&args.out, &spec, &out)
        .map_err(|e| anyhow::anyhow!("--out {}: {e}", args.out.display()))?;
    if args.json {
        let edges: Vec<_> = out
            .iter()
            .map(|o| {
                serde_json::json!({
                    "edge": edge_name(o.edge),
                    "table_bytes": o.table.table_bytes(),
                    "frac_bits": o.table.frac_bits,
                    "layout": format!("{:?}", o.table.layout),
                    "figures": o.figures,
                    "robust_grid": o.grid,
                })
            })
            .collect();
        let j = serde_json::json!({
            "name": spec.name,
            "topology": host_tool::input::leg_design::LEG_TOPOLOGY,
            "design_hash": format!("{:#010x}", spec.hash),
            "max_error_budget_steps": spec.max_error_ticks,
            "edges": edges,
            "files": written,
            "caution": host_tool::analysis::point::CAUTION,
        });
        outln!("{}", serde_json::to_string_pretty(&j)?);
        return Ok(());
    }
    outln!(
        "{}: half-bridge leg, dead-time tables written to {}",
        spec.name,
        args.out.display()
    );
    for o in &out {
        let f = &o.figures;
        let shape = match o.table.layout {
            timing_core::table::Layout::Margin(m) => format!(
                "{} x {}{}",
                m.rows,
                m.cols,
                if m.vin_mul == 0 {
                    ""
                } else {
                    ", columns slanted along the swing's limit"
                }
            ),
            _ => String::new(),
        };
        outln!(
            "  {} edge: {} B ({shape}, {} fractional bits), checked at all {} code pairs:",
            edge_name(o.edge),
            o.table.table_bytes(),
            o.table.frac_bits,
            f.pairs
        );
        outln!(
            "    {} with a window a step wide: {} commanded outside it; {} with a robust window: {} outside it",
            f.windowed, f.outside_window, f.robust, f.outside_robust
        );
        outln!(
            "    worst {:.3} steps from the aim where the budget of {} applies; {} pairs stop short of the rail; {} below the least dead time",
            f.worst_budgeted_steps, spec.max_error_ticks, f.short, f.below_floor
        );
        if f.short > 0 {
            outln!(
                "    (worst {:.1} steps from the aim over all pairs: where the swing stops completing, the aim jumps from inside the window to the fallback)",
                f.worst_steps
            );
        }
        if f.floor_blocks > 0 {
            outln!(
                "    WARNING: at {} pairs the least dead time lies past the window's close: lower dead_time.min_dead or accept hard switching there",
                f.floor_blocks
            );
        }
    }
    outln!("\n{}", host_tool::analysis::point::CAUTION);
    Ok(())
}
