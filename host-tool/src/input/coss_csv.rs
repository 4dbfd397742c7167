//! Coss curves from CSV files: one `volts,farads` point per line, as read
//! off a MOSFET datasheet's capacitance plot. Numbers are plain SI or with
//! an engineering prefix (`2.4n`, `2.4nF`, `25V`); blank lines and lines
//! starting with `#` are skipped; a first line that is not two numbers is
//! taken as a header. Points must rise in voltage.

use timing_core::coss::{CossPoint, SwitchCapacitance};

use crate::units::parse_quantity;

/// A curve that could not be read, with the file and line at fault.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{path}{}: {message}", line_part(*.line))]
pub struct CossCsvError {
    /// File path.
    pub path: String,
    /// 1-based line number (0 for the file as a whole).
    pub line: usize,
    /// What is wrong, naming the value.
    pub message: String,
}

/// `:line` for an error at a line, nothing for the file as a whole (also
/// the captures' errors, [`crate::input::capture`]).
pub(crate) fn line_part(line: usize) -> String {
    if line == 0 {
        String::new()
    } else {
        format!(":{line}")
    }
}

/// Parse the text of a Coss CSV; `path` names it in errors.
///
/// ```
/// # fn main() -> Result<(), host_tool::input::coss_csv::CossCsvError> {
/// let pts = host_tool::input::coss_csv::parse("volts,farads\n0,2.4n\n25,700p\n", "demo.csv")?;
/// assert_eq!(pts.len(), 2);
/// assert_eq!(pts[1].farads, 700e-12);
/// # Ok(()) }
/// ```
///
/// # Errors
/// [`CossCsvError`]: a field that is not a number (with its text), a line
/// without exactly two fields, a voltage that does not rise, a capacitance
/// that is not positive, or no points at all.
pub fn parse(text: &str, path: &str) -> Result<Vec<CossPoint<f64>>, CossCsvError> {
    let err = |line: usize, message: String| CossCsvError {
        path: path.to_owned(),
        line,
        message,
    };
    let mut points = Vec::new();
    let mut lines_of = Vec::new();
    let mut first = true;
    for (k, raw) in text.lines().enumerate() {
        let line = k + 1;
        let s = raw.trim();
        if s.is_empty() || s.starts_with('#') {
            continue;
        }
        let fields: Vec<&str> = s.split([',', ';', '\t']).map(str::trim).collect();
        // The first line may be a header: two fields, neither a number.
        let header = first
            && fields.len() == 2
            && fields.iter().all(|f| {
                !f.starts_with(|c: char| c.is_ascii_digit() || c == '-' || c == '.' || c == '+')
            });
        first = false;
        if header {
            continue;
        }
        let (volts, farads) = match fields.as_slice() {
            [v, c] => (
                parse_quantity(v, "V").map_err(|e| err(line, format!("voltage `{v}`: {e}")))?,
                parse_quantity(c, "F").map_err(|e| err(line, format!("capacitance `{c}`: {e}")))?,
            ),
            _ => {
                return Err(err(
                    line,
                    format!(
                        "expected two fields `volts,farads`, found {} in `{s}`",
                        fields.len()
                    ),
                ))
            }
        };
        points.push(CossPoint { volts, farads });
        lines_of.push(line);
    }
    if points.is_empty() {
        return Err(err(0, "no `volts,farads` points in the file".into()));
    }
    if points.len() == 1 {
        return Err(err(
            lines_of.first().copied().unwrap_or(0),
            "one point is a constant capacitance, not a curve: give it as `cr` (or --cr), or add points"
                .into(),
        ));
    }
    // Voltages must rise from point to point (the curve is read off a
    // datasheet plot left to right).
    for (k, w) in points.windows(2).enumerate() {
        if let [a, b] = w {
            if b.volts.partial_cmp(&a.volts) != Some(std::cmp::Ordering::Greater) {
                let line = lines_of.get(k + 1).copied().unwrap_or(0);
                return Err(err(
                    line,
                    format!(
                        "volts must increase from point to point: {} V follows {} V",
                        b.volts, a.volts
                    ),
                ));
            }
        }
    }
    if let Err(e) = SwitchCapacitance::new(0.0, &points) {
        // Find the point at fault for the line number.
        let at = (1..=points.len())
            .find(|&n| SwitchCapacitance::new(0.0, points.get(..n).unwrap_or(&[])).is_err())
            .unwrap_or(1);
        let line = lines_of.get(at - 1).copied().unwrap_or(0);
        return Err(err(line, e.to_string()));
    }
    Ok(points)
}

/// Read and parse a Coss CSV file.
///
/// # Errors
/// [`CossCsvError`], also when the file cannot be read.
pub fn load(path: &std::path::Path) -> Result<(Vec<CossPoint<f64>>, String), CossCsvError> {
    let shown = path.display().to_string();
    let text = std::fs::read_to_string(path).map_err(|e| CossCsvError {
        path: shown.clone(),
        line: 0,
        message: format!("cannot read: {e}"),
    })?;
    Ok((parse(&text, &shown)?, text))
}
