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
    let Some((a, b)) = text.split_once(':') else {
        return Err(InputError::new(
            option,
            format!("expected LOW:HIGH, e.g. 36:60, got `{text}`"),
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
