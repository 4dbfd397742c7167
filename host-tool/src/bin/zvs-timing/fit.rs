//! `zvs-timing fit`: the board's tank from scope captures of the switch
//! node, as a design file the tables can be regenerated from.

use std::path::{Path, PathBuf};

use clap::Args;
use host_tool::analysis::fit_capture::span::SwingEnd;
use host_tool::analysis::fit_capture::{fit, model_trace, Param, Shot, TankFit};
use host_tool::emit::fitted_design::{fitted_design, FitSource, TOLERANCE_SIGMAS};
use host_tool::input::capture::{self, Column, Columns};
use host_tool::model::design::Design;
use host_tool::units::format_si;

use crate::args::num;

#[derive(Args)]
pub(crate) struct FitArgs {
    /// Design file (TOML) of the board the captures come from.
    design: PathBuf,
    /// A scope capture (CSV: time from the turn-off command, switch-node
    /// voltage; the gate left off after it). Repeat for several; each
    /// takes the --vin and --io given in the same place (or the only ones).
    #[arg(long = "capture", required = true, value_name = "FILE")]
    captures: Vec<PathBuf>,
    /// Input voltage of each capture, volt.
    #[arg(
        long = "vin",
        required = true,
        allow_hyphen_values = true,
        value_name = "V"
    )]
    vins: Vec<String>,
    /// Output current of each capture, ampere.
    #[arg(
        long = "io",
        required = true,
        allow_hyphen_values = true,
        value_name = "A"
    )]
    ios: Vec<String>,
    /// The captures' columns by header name or 0-based index: time,
    /// switch voltage, and optionally inductor current and gate command
    /// (`-` for none), e.g. `Time,CH1` or `0,1,-,3`.
    #[arg(long, default_value = "0,1", value_name = "LIST")]
    columns: String,
    /// Write the fitted design file here (and, unless --plots says
    /// otherwise, a picture per capture beside it).
    #[arg(long, value_name = "FITTED.toml")]
    out: Option<PathBuf>,
    /// Folder for the pictures: capture and fitted model overlaid, the
    /// residual below (SVG, one per capture).
    #[arg(long, value_name = "DIR")]
    plots: Option<PathBuf>,
    /// Print the fit as JSON.
    #[arg(long)]
    json: bool,
}

fn columns(text: &str) -> anyhow::Result<Columns> {
    let parts: Vec<&str> = text.split(',').map(str::trim).collect();
    let col = |k: usize| -> Option<Column> {
        parts
            .get(k)
            .filter(|p| !p.is_empty() && **p != "-")
            .map(|p| Column::parse(p))
    };
    match (parts.len(), col(0), col(1)) {
        (2..=4, Some(time), Some(switch_v)) => Ok(Columns {
            time,
            switch_v,
            inductor_a: col(2),
            gate: col(3),
        }),
        _ => anyhow::bail!(
            "--columns `{text}`: give time and switch voltage, and optionally inductor current and gate, by name or 0-based index (e.g. `Time,CH1` or `0,1,-,3`)"
        ),
    }
}

/// The n-th of `values` for capture `k`: the one given in its place, or
/// the only one.
fn nth<'a>(option: &str, values: &'a [String], k: usize, n: usize) -> anyhow::Result<&'a str> {
    match values.len() {
        1 => Ok(&values[0]),
        m if m == n => Ok(&values[k]),
        m => anyhow::bail!(
            "{option} is given {m} times for {n} captures: give one for every --capture, in the same order, or one for all"
        ),
    }
}

pub(crate) fn run_fit(args: &FitArgs) -> anyhow::Result<()> {
    let design = Design::load(&args.design)?;
    let cols = columns(&args.columns)?;
    let n = args.captures.len();
    let mut points = Vec::with_capacity(n);
    for k in 0..n {
        let vin = num("--vin", nth("--vin", &args.vins, k, n)?, "V")?;
        let io = num("--io", nth("--io", &args.ios, k, n)?, "A")?;
        points.push((vin, io));
    }
    if let Some(path) = &args.out {
        crate::args::writable_file(path)?;
    }
    let plots: Option<PathBuf> = args.plots.clone().or_else(|| {
        args.out.as_ref().map(|o| {
            o.parent()
                .map_or_else(|| PathBuf::from("."), Path::to_path_buf)
        })
    });
    if let Some(dir) = &plots {
        crate::args::writable_dir_for("--plots", dir)?;
    }
    let caps = args
        .captures
        .iter()
        .map(|p| capture::load(p, &cols))
        .collect::<Result<Vec<_>, _>>()?;
    let shots: Vec<Shot<'_>> = caps
        .iter()
        .zip(&points)
        .map(|(c, &(vin_v, io_a))| Shot {
            capture: c,
            vin_v,
            io_a,
        })
        .collect();
    let f = fit(&design, &shots)?;
    let listed: Vec<(String, f64, f64)> = caps
        .iter()
        .zip(&points)
        .map(|(c, &(v, i))| (c.path.clone(), v, i))
        .collect();
    if let Some(path) = &args.out {
        let text = std::fs::read_to_string(&args.design)
            .map_err(|e| anyhow::anyhow!("{}: {e}", args.design.display()))?;
        let src = FitSource {
            design_path: &args.design,
            design_text: &text,
            captures: &listed,
        };
        let fitted = fitted_design(&src, &f, path)?;
        std::fs::write(path, fitted)
            .map_err(|e| anyhow::anyhow!("cannot write {}: {e}", path.display()))?;
        // What was written must be a design `table` takes.
        Design::load(path).map_err(|e| {
            anyhow::anyhow!("the fitted design {} does not load: {e}", path.display())
        })?;
    }
    let mut pictures = Vec::new();
    if let Some(dir) = &plots {
        for (((c, &(vin, io)), sp), (rms, _, _)) in
            caps.iter().zip(&points).zip(&f.spans).zip(&f.residuals)
        {
            let model = model_trace(&design, &f.tank, vin, io, &c.time_s)?;
            let stem = Path::new(&c.path)
                .file_stem()
                .map_or_else(|| "capture".into(), |s| s.to_string_lossy().into_owned());
            let title = format!(
                "{}: {stem} at Vin = {vin} V, Io = {io} A; fitted model, residual {} RMS",
                design.name,
                format_si(*rms, "V")
            );
            let svg = host_tool::report::overlay::overlay(c, &model, sp, &title)?;
            let path = dir.join(format!("{stem}_fit.svg"));
            std::fs::write(&path, svg)
                .map_err(|e| anyhow::anyhow!("cannot write {}: {e}", path.display()))?;
            pictures.push(path);
        }
    }
    if args.json {
        outln!(
            "{}",
            serde_json::to_string_pretty(&json(
                &design,
                &f,
                &listed,
                args.out.as_deref(),
                &pictures
            ))?
        );
    } else {
        print_text(&design, &f, &listed, args.out.as_deref(), &pictures);
    }
    Ok(())
}

/// The fitted value of `p` and its standard deviation as the design file
/// writes them: the Coss scale on the curve in its CSV (times the design's
/// own `coss_scale`).
fn reported(design: &Design, f: &TankFit, p: Param) -> (f64, f64) {
    let k = if p == Param::CossScale {
        design.coss_scale
    } else {
        1.0
    };
    (k * f.value(p), k * f.sigma_of(p))
}

fn json(
    design: &Design,
    f: &TankFit,
    captures: &[(String, f64, f64)],
    out: Option<&Path>,
    pictures: &[PathBuf],
) -> serde_json::Value {
    let mut o = serde_json::Map::new();
    for p in Param::ALL {
        let (v, s) = reported(design, f, p);
        o.insert(p.key().to_owned(), v.into());
        o.insert(format!("{}_sigma", p.key()), s.into());
    }
    o.insert("c_total_f".into(), f.c_total_f.0.into());
    o.insert("c_total_f_sigma".into(), f.c_total_f.1.into());
    o.insert("c_total_at_v".into(), f.c_total_at_v.into());
    o.insert(
        "held".into(),
        f.held
            .iter()
            .map(|(p, why)| serde_json::json!({ "quantity": p.key(), "reason": why }))
            .collect(),
    );
    o.insert(
        "captures".into(),
        captures
            .iter()
            .zip(&f.residuals)
            .zip(&f.spans)
            .map(|(((path, vin, io), (rms, n, noise)), sp)| {
                serde_json::json!({
                    "path": path,
                    "vin_v": vin,
                    "io_a": io,
                    "residual_rms_v": rms,
                    "samples_fitted": n,
                    "noise_v": noise,
                    "swing": match sp.swing_end {
                        SwingEnd::Zero { .. } => "reaches zero (ZVS)",
                        SwingEnd::Valley { .. } => "stops at a valley (no ZVS)",
                    },
                    "free_ring_fitted": sp.ring_end > sp.end,
                })
            })
            .collect(),
    );
    o.insert("evaluations".into(), f.evaluations.into());
    o.insert(
        "fitted_design".into(),
        out.map_or(serde_json::Value::Null, |p| p.display().to_string().into()),
    );
    o.insert(
        "pictures".into(),
        pictures
            .iter()
            .map(|p| serde_json::Value::from(p.display().to_string()))
            .collect(),
    );
    o.insert("caution".into(), host_tool::analysis::point::CAUTION.into());
    serde_json::Value::Object(o)
}

fn print_text(
    design: &Design,
    f: &TankFit,
    captures: &[(String, f64, f64)],
    out: Option<&Path>,
    pictures: &[PathBuf],
) {
    outln!(
        "Fit of `{}` to {} capture{} ({} model evaluations)",
        design.name,
        captures.len(),
        if captures.len() == 1 { "" } else { "s" },
        f.evaluations
    );
    outln!();
    outln!("  quantity                 fitted        ± 1 sigma      design");
    let held = |p: Param| f.held.iter().any(|(h, _)| *h == p);
    // Sigma relative for the tank's values, absolute for the delay.
    let row = |name: &str, p: Option<Param>, unit: &str, v: f64, s: f64, d: f64| {
        let (fv, fd) = if unit.is_empty() {
            (format!("{v:.4}"), format!("{d:.4}"))
        } else {
            (format_si(v, unit), format_si(d, unit))
        };
        let fs = if p == Some(Param::DelayOff) {
            format!("± {}", format_si(s, unit))
        } else if v != 0.0 {
            format!("± {:.2} %", 100.0 * s / v.abs())
        } else {
            format!("± {}", format_si(s, unit))
        };
        let mark = if p.is_some_and(held) { "  (held)" } else { "" };
        outln!("  {name:<24} {fv:<13} {fs:<14} {fd}{mark}");
    };
    let d = &design.real;
    for (name, p, unit, was) in [
        ("Lr", Param::Lr, "H", d.lr_h),
        ("Cr (fixed part)", Param::Cr, "F", d.cr_fixed_f),
        ("Coss scale", Param::CossScale, "", design.coss_scale),
        ("loop resistance", Param::RTank, "ohm", d.r_tank_ohm),
        (
            "turn-off driver delay",
            Param::DelayOff,
            "s",
            design.timer.turn_off_delay_s(),
        ),
        ("diode drop (ring centre)", Param::DiodeDrop, "V", 0.0),
    ] {
        let (v, s) = reported(design, f, p);
        row(name, Some(p), unit, v, s, was);
    }
    let c_design = d
        .capacitance()
        .map_or(f64::NAN, |c| c.charge_equivalent(f.c_total_at_v));
    row(
        &format!("total C at {}", format_si(f.c_total_at_v, "V")),
        None,
        "F",
        f.c_total_f.0,
        f.c_total_f.1,
        c_design,
    );
    for (p, why) in &f.held {
        outln!("  {} held: {why}", p.key());
    }
    outln!();
    for (((path, vin, io), (rms, n, noise)), sp) in captures.iter().zip(&f.residuals).zip(&f.spans)
    {
        let flag = if *rms > 2.0 * noise {
            "  WARNING: well above the noise: the model misses part of this capture (look at its picture)"
        } else if sp.ring_end <= sp.end {
            "  (the swing only: the switch turns on after it; single-pulse captures pin the loss down far better)"
        } else {
            ""
        };
        outln!(
            "  {path} (Vin {vin} V, Io {io} A): residual {} RMS over {n} samples, noise {}{flag}",
            format_si(*rms, "V"),
            format_si(*noise, "V")
        );
    }
    outln!();
    if let Some(o) = out {
        outln!(
            "Fitted design written to {} ([tolerance] lr and cr set to the fit's {TOLERANCE_SIGMAS} sigma: widen them for drift and board-to-board spread).",
            o.display()
        );
        outln!("Next: zvs-timing table {} --out DIR, then verify the new timing at reduced voltage with a scope.", o.display());
    } else {
        outln!("Give --out FITTED.toml to write the fitted design file.");
    }
    for p in pictures {
        outln!("Picture: {}", p.display());
    }
    outln!("{}", host_tool::analysis::point::CAUTION);
}
