//! Option parsers the commands share: numbers with engineering prefixes,
//! fractions, ranges and the converter topology.

use clap::ValueEnum;
use host_tool::analysis::point::InputError;
use host_tool::units::parse_quantity;

#[derive(Clone, Copy, ValueEnum)]
pub(crate) enum TopologyArg {
    Buck,
    Boost,
    BuckBoost,
}

pub(crate) fn topology(t: TopologyArg) -> timing_core::Topology {
    match t {
        TopologyArg::Buck => timing_core::Topology::Buck,
        TopologyArg::Boost => timing_core::Topology::Boost,
        TopologyArg::BuckBoost => timing_core::Topology::BuckBoost,
    }
}

pub(crate) fn range(
    option: &'static str,
    text: &str,
    unit: &'static str,
) -> Result<(f64, f64), InputError> {
    // `36:60`, or as in a design file, `[36, 60]` (brackets optional).
    let inner = text.trim().trim_start_matches('[').trim_end_matches(']');
    let Some((a, b)) = inner.split_once(':').or_else(|| inner.split_once(',')) else {
        return Err(InputError::new(
            option,
            format!("expected LOW:HIGH or [LOW, HIGH], e.g. 36:60, got `{text}`"),
        ));
    };
    Ok((num(option, a.trim(), unit)?, num(option, b.trim(), unit)?))
}

/// A fraction given as `0.1` or `10%`.
pub(crate) fn fraction(
    option: &'static str,
    text: Option<&String>,
) -> Result<Option<f64>, InputError> {
    let Some(t) = text else { return Ok(None) };
    host_tool::units::parse_fraction(t)
        .map(Some)
        .ok_or_else(|| {
            InputError::new(
                option,
                format!("expected a fraction or a percentage such as 0.05 or 5%, got `{t}`"),
            )
        })
}

pub(crate) fn num(option: &'static str, text: &str, unit: &'static str) -> Result<f64, InputError> {
    parse_quantity(text, unit).map_err(|e| InputError::new(option, e.to_string()))
}

pub(crate) fn opt_num(
    option: &'static str,
    text: Option<&String>,
    unit: &'static str,
) -> Result<Option<f64>, InputError> {
    text.map(|t| num(option, t, unit)).transpose()
}

/// Make sure `dir` is a folder the results can be written to, before any
/// work: created when missing; an error naming the path otherwise.
/// A JSON report with the safety note added (as `"caution"`).
pub(crate) fn with_caution(mut v: serde_json::Value) -> serde_json::Value {
    if let Some(o) = v.as_object_mut() {
        o.insert(
            "caution".to_owned(),
            serde_json::Value::String(host_tool::analysis::point::CAUTION.to_owned()),
        );
    }
    v
}

/// Whether `path` is a half-bridge leg's design file (false where it cannot
/// be read: the cell's loader then says why).
pub(crate) fn is_leg_file(path: &std::path::Path) -> anyhow::Result<bool> {
    Ok(std::fs::read_to_string(path).is_ok_and(|t| host_tool::input::leg_design::is_leg(&t)))
}

pub(crate) fn writable_dir(dir: &std::path::Path) -> anyhow::Result<()> {
    writable_dir_for("--out", dir)
}

/// [`writable_dir`] for the folder given with `option`.
pub(crate) fn writable_dir_for(option: &str, dir: &std::path::Path) -> anyhow::Result<()> {
    std::fs::create_dir_all(dir).map_err(|e| {
        anyhow::anyhow!("{option} {}: cannot create the folder: {e}", dir.display())
    })?;
    let probe = dir.join(format!(".zvs-timing-probe-{}", std::process::id()));
    std::fs::write(&probe, b"").map_err(|e| {
        anyhow::anyhow!(
            "{option} {}: cannot write into the folder: {e}",
            dir.display()
        )
    })?;
    let _ = std::fs::remove_file(&probe);
    Ok(())
}

/// Make sure `file` can be written, before any work: its folder exists and
/// it is not a folder itself; an error naming the path otherwise.
pub(crate) fn writable_file(file: &std::path::Path) -> anyhow::Result<()> {
    if file.is_dir() {
        anyhow::bail!("--out {}: is a folder; give a file name", file.display());
    }
    if let Some(dir) = file.parent().filter(|d| !d.as_os_str().is_empty()) {
        if !dir.is_dir() {
            anyhow::bail!(
                "--out {}: the folder {} does not exist",
                file.display(),
                dir.display()
            );
        }
    }
    std::fs::OpenOptions::new()
        .append(true)
        .create(true)
        .open(file)
        .map_err(|e| anyhow::anyhow!("--out {}: cannot write the file: {e}", file.display()))?;
    Ok(())
}

/// Refuse work estimated beyond [`host_tool::check::cost::LIMIT_S`] unless
/// `allow_long` (`--allow-long`), naming the estimate and `advice` (what
/// would make it shorter); say the estimate
/// before work of more than ten seconds.
pub(crate) fn check_cost(
    what: &str,
    estimate_s: f64,
    allow_long: bool,
    advice: &str,
) -> anyhow::Result<()> {
    use host_tool::check::cost::{spoken, LIMIT_S};
    if estimate_s > LIMIT_S && !allow_long {
        anyhow::bail!(
            "{what} would take about {} on a 2-core machine (estimated); pass --allow-long to run it, or {advice}",
            spoken(estimate_s)
        );
    }
    if estimate_s > 10.0 {
        eprintln!(
            "zvs-timing: {what}: about {} (estimated)",
            spoken(estimate_s)
        );
    }
    Ok(())
}

/// A progress bar on standard error for a long step: its stage and how far
/// along, with an estimate of the time left; drawn only once the work has
/// run a second, and never with `quiet` (JSON output).
pub(crate) struct Progress {
    bar: indicatif::ProgressBar,
    start: std::time::Instant,
    shown: bool,
    quiet: bool,
}

impl Progress {
    pub(crate) fn new(quiet: bool) -> Self {
        let bar = indicatif::ProgressBar::new(1000);
        bar.set_style(
            indicatif::ProgressStyle::with_template("{msg} {bar:30} {percent}% ({eta} left)")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        bar.set_draw_target(indicatif::ProgressDrawTarget::hidden());
        Self {
            bar,
            start: std::time::Instant::now(),
            shown: false,
            quiet,
        }
    }

    /// At `done` (0 to 1) of the stage `stage`.
    pub(crate) fn set(&mut self, stage: &str, done: f64) {
        if !self.shown && !self.quiet && self.start.elapsed().as_secs_f64() > 1.0 {
            self.bar
                .set_draw_target(indicatif::ProgressDrawTarget::stderr());
            self.shown = true;
        }
        if self.bar.message() != stage {
            self.bar.set_message(stage.to_owned());
            self.bar.reset_eta();
        }
        self.bar
            .set_position((done.clamp(0.0, 1.0) * 1000.0) as u64);
    }

    pub(crate) fn finish(self) {
        self.bar.finish_and_clear();
    }
}
