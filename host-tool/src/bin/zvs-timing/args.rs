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
pub(crate) fn writable_dir(dir: &std::path::Path) -> anyhow::Result<()> {
    std::fs::create_dir_all(dir)
        .map_err(|e| anyhow::anyhow!("--out {}: cannot create the folder: {e}", dir.display()))?;
    let probe = dir.join(format!(".zvs-timing-probe-{}", std::process::id()));
    std::fs::write(&probe, b"").map_err(|e| {
        anyhow::anyhow!("--out {}: cannot write into the folder: {e}", dir.display())
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
