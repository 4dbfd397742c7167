//! `zvs-timing table`: generate, verify and export a design's table.

use clap::Args;

#[derive(Args)]
pub(crate) struct TableArgs {
    /// Design file (TOML).
    design: std::path::PathBuf,
    /// Output folder for <name>.rs (Rust table), <name>.h (C header), <name>.bin (flash blob),
    /// <name>.csv (the nodes) and <name>_closed_form.rs (the closed-form methods' coefficients);
    /// created when missing.
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
        outln!("\n{}", host_tool::analysis::point::CAUTION);
    }
    Ok(())
}
