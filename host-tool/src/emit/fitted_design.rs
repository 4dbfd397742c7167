//! The design file a bring-up fit writes: the user's file with the fitted
//! values in place (its comments and layout kept, `toml_edit`), each
//! marked with its uncertainty and the design's value it replaces, a
//! `[tolerance]` suggestion from the fit's uncertainty, and a header
//! saying what was fitted from which captures. What the fit cannot see
//! (drift with temperature, ageing, board-to-board spread) stays the
//! user's to add, and the file says so.

use std::fmt::Write as _;
use std::path::Path;

use toml_edit::{DocumentMut, Item, Table};

use crate::analysis::fit_capture::{Param, TankFit};
use crate::units::{design_number, format_si};

/// Where a fit came from.
#[derive(Debug, Clone, Copy)]
pub struct FitSource<'a> {
    /// The design file fitted.
    pub design_path: &'a Path,
    /// Its text.
    pub design_text: &'a str,
    /// The captures: path, Vin (volt), Io (ampere).
    pub captures: &'a [(String, f64, f64)],
}

/// Why the fitted file could not be written.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum FittedDesignError {
    /// The design file's text is not TOML (it parsed before, so this is
    /// only for text changed in between).
    #[error("{path}: {message}")]
    Parse {
        /// The design file.
        path: String,
        /// The TOML parser's message.
        message: String,
    },
}

/// How many standard deviations the suggested tolerance spans.
pub const TOLERANCE_SIGMAS: f64 = 3.0;

/// The fitted design file's text, to be written at `out_path` (the Coss
/// curve's path is rewritten when the file moves to another folder).
///
/// # Errors
/// [`FittedDesignError`] when the design text does not parse.
pub fn fitted_design(
    src: &FitSource<'_>,
    fit: &TankFit,
    out_path: &Path,
) -> Result<String, FittedDesignError> {
    let mut doc: DocumentMut =
        src.design_text
            .parse()
            .map_err(|e: toml_edit::TomlError| FittedDesignError::Parse {
                path: src.design_path.display().to_string(),
                message: e.to_string(),
            })?;
    let rel = |p: Param| {
        let v = fit.value(p);
        if p == Param::DelayOff || v == 0.0 {
            format!(" ± {}", format_si(fit.sigma_of(p), "s"))
        } else {
            format!(" ± {:.2} %", 100.0 * fit.sigma_of(p) / v.abs())
        }
    };
    let held = |p: Param| fit.held.iter().find(|(h, _)| *h == p).map(|(_, why)| *why);
    let note = |p: Param, old: Option<String>| {
        let was = old.map_or_else(
            || " (not in the design)".to_owned(),
            |o| format!(" (design: {o})"),
        );
        match held(p) {
            Some(why) => format!("  # not fitted: {why}{was}"),
            None => format!("  # fitted{}, 1 sigma{was}", rel(p)),
        }
    };
    // A value as written, without its comment.
    let old = |t: &Table, key: &str| {
        t.get(key).and_then(Item::as_value).map(|v| {
            let mut bare = v.clone();
            bare.decor_mut().clear();
            bare.to_string()
        })
    };
    let root = doc.as_table_mut();
    let put = |t: &mut Table, key: &str, text: toml_edit::Value, comment: String| {
        let mut v = text;
        v.decor_mut().set_suffix(comment);
        t.insert(key, Item::Value(v));
    };
    for (p, key) in [
        (Param::Lr, "lr"),
        (Param::Cr, "cr"),
        (Param::RTank, "r_tank"),
    ] {
        let was = old(root, key);
        let v = fit.value(p);
        put(root, key, design_number(v, 5).into(), note(p, was));
    }
    if held(Param::CossScale).is_none() || root.contains_key("coss_scale") {
        let before = root
            .get("coss_scale")
            .and_then(Item::as_float)
            .unwrap_or(1.0);
        let was = old(root, "coss_scale");
        let scale = (before * fit.value(Param::CossScale) * 1e4).round() / 1e4;
        put(
            root,
            "coss_scale",
            scale.into(),
            note(Param::CossScale, was),
        );
    }
    if let Some(c) = root.get("coss").and_then(Item::as_str).map(str::to_owned) {
        let from = src.design_path.parent().unwrap_or(Path::new("."));
        let to = out_path.parent().unwrap_or(Path::new("."));
        let same = |a: &Path, b: &Path| match (a.canonicalize(), b.canonicalize()) {
            (Ok(x), Ok(y)) => x == y,
            _ => a == b,
        };
        if !same(from, to) {
            let moved = from.join(&c);
            let moved = moved.canonicalize().unwrap_or(moved);
            put(
                root,
                "coss",
                moved.display().to_string().into(),
                format!("  # the design's {c}, from where this file sits"),
            );
        }
    }
    let delay = fit.value(Param::DelayOff);
    if !root.contains_key("timer") {
        root.insert("timer", Item::Table(Table::new()));
    }
    if let Some(timer) = root.get_mut("timer").and_then(Item::as_table_mut) {
        let was = old(timer, "driver_delay_off");
        let (v, c) = if delay >= 0.0 {
            (design_number(delay, 4), note(Param::DelayOff, was))
        } else {
            (
                "0".to_owned(),
                format!(
                    "  # the fit found {} (the switch turning off before the command?): check the scope's trigger",
                    format_si(delay, "s")
                ),
            )
        };
        put(timer, "driver_delay_off", v.into(), c);
    }
    // Tolerance: the fit's 3 sigma of Lr and of the whole capacitance.
    if !root.contains_key("tolerance") {
        root.insert("tolerance", Item::Table(Table::new()));
    }
    let c_rel = fit.c_total_f.1 / fit.c_total_f.0;
    let l_rel = fit.sigma_of(Param::Lr) / fit.value(Param::Lr);
    if let Some(tol) = root.get_mut("tolerance").and_then(Item::as_table_mut) {
        for (key, r) in [("lr", l_rel), ("cr", c_rel)] {
            let was = old(tol, key);
            let pct = format!("{}%", round_up_2(100.0 * TOLERANCE_SIGMAS * r));
            let why = format!("the fit's {TOLERANCE_SIGMAS} sigma");
            put(
                tol,
                key,
                pct.into(),
                format!(
                    "  # {why}{}: add drift and spread yourself",
                    was.map_or_else(String::new, |w| format!(" (design: {w})"))
                ),
            );
        }
    }
    let mut head = String::new();
    let _ = writeln!(
        head,
        "# Fitted by `zvs-timing fit` from {} ({}) to {} scope capture{}:",
        src.design_path.display(),
        doc.get("name")
            .and_then(Item::as_str)
            .map_or_else(|| "the design".to_owned(), |n| format!("design `{n}`")),
        src.captures.len(),
        if src.captures.len() == 1 { "" } else { "s" }
    );
    for ((path, vin, io), (rms, n, noise)) in src.captures.iter().zip(&fit.residuals) {
        let _ = writeln!(
            head,
            "#   {path} at Vin {vin} V, Io {io} A: residual {} RMS over {n} samples (its noise {})",
            format_si(*rms, "V"),
            format_si(*noise, "V")
        );
    }
    let _ = writeln!(
        head,
        "# The converter diode's forward drop seen by the ring came out {} (fitted so that it\n\
         # does not bend the rest; the tables' model has ideal diodes).",
        format_si(fit.value(Param::DiodeDrop), "V")
    );
    let _ = writeln!(
        head,
        "# Fitted: lr, cr, coss_scale, r_tank and [timer] driver_delay_off; total switch\n\
         # capacitance {} ± {:.2} % at {} (charge-equivalent).\n\
         # The [tolerance] lr and cr below are the fit's {TOLERANCE_SIGMAS} sigma only: the fit sees one\n\
         # board at one temperature. Drift with temperature and ageing, and the spread\n\
         # between boards, are not in the captures: widen lr and cr for them yourself.\n\
         # CAUTION: these converters run at lethal voltages. Check the regenerated\n\
         # timing at reduced voltage with a scope before raising it, and follow local\n\
         # electrical codes and licensed practice.\n",
        format_si(fit.c_total_f.0, "F"),
        100.0 * c_rel,
        format_si(fit.c_total_at_v, "V"),
    );
    Ok(format!("{head}{doc}"))
}

/// `x` rounded up to two significant digits.
fn round_up_2(x: f64) -> f64 {
    if !(x.is_finite() && x > 0.0) {
        return 0.0;
    }
    let e = 10f64.powf(x.log10().floor() - 1.0);
    (x / e).ceil() * e
}
