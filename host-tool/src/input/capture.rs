//! Scope captures of the switch node, for fitting the tank at bring-up: a
//! CSV of time and switch-node voltage (optionally the inductor current and
//! the gate command), as a scope exports it. Comment and metadata lines
//! before the header are skipped; columns are picked by name or index.
//! Time zero is the turn-off command (the scope triggered on the PWM
//! output).
//!
//! A capture that holds no usable ring is refused with the reason: time
//! that does not increase, too few samples, a trace clipped by the scope's
//! vertical range, noise above the signal, or a flat trace. Whether the
//! swing reaches the cell voltage is the fit's to judge (it knows Vin).

use crate::units::parse_quantity;

/// A column of the CSV: by its header name (case ignored) or its 0-based
/// index.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Column {
    /// Header name.
    Name(String),
    /// 0-based index.
    Index(usize),
}

impl Column {
    /// `"2"` is index 2; anything else a header name.
    #[must_use]
    pub fn parse(text: &str) -> Self {
        text.trim()
            .parse()
            .map_or_else(|_| Self::Name(text.trim().to_owned()), Self::Index)
    }
}

/// Which columns hold what.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Columns {
    /// Time, second.
    pub time: Column,
    /// Switch-node (drain-source) voltage, volt.
    pub switch_v: Column,
    /// Resonant-inductor current, ampere, if captured.
    pub inductor_a: Option<Column>,
    /// Gate command (any units; high is on), if captured.
    pub gate: Option<Column>,
}

impl Default for Columns {
    /// Time in the first column, the switch voltage in the second.
    fn default() -> Self {
        Self {
            time: Column::Index(0),
            switch_v: Column::Index(1),
            inductor_a: None,
            gate: None,
        }
    }
}

/// A capture read and checked.
#[derive(Debug, Clone, PartialEq)]
pub struct Capture {
    /// The file, as named.
    pub path: String,
    /// Sample times from the turn-off command, second (increasing).
    pub time_s: Vec<f64>,
    /// Switch-node voltage, volt.
    pub switch_v: Vec<f64>,
    /// Inductor current, ampere.
    pub inductor_a: Option<Vec<f64>>,
    /// Gate command.
    pub gate: Option<Vec<f64>>,
    /// Noise of the voltage trace, volt (RMS, from sample-to-sample
    /// differences where the trace is flat).
    pub noise_v: f64,
}

/// Why a capture cannot be used.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{path}{}: {reason}", crate::input::coss_csv::line_part(*.line))]
pub struct CaptureError {
    /// The file.
    pub path: String,
    /// 1-based line at fault (0: the capture as a whole).
    pub line: usize,
    /// What is wrong, and what would make it usable.
    pub reason: String,
}

/// Fewest samples a ring can be fitted on.
pub const MIN_SAMPLES: usize = 50;

/// A number as a scope writes it (plain, scientific) or with a prefix.
fn number(field: &str) -> Option<f64> {
    let f = field.trim().trim_matches('"');
    f.parse::<f64>()
        .ok()
        .or_else(|| parse_quantity(f, "").ok())
        .filter(|x| x.is_finite())
}

fn fields(line: &str) -> Vec<&str> {
    line.split([',', ';', '\t']).map(str::trim).collect()
}

/// Parse the text of a capture; `path` names it in errors.
///
/// # Errors
/// [`CaptureError`]: a column that is not there, a field that is not a
/// number, time that does not increase, too few samples, a clipped trace,
/// noise above the signal, no swing.
pub fn parse(text: &str, path: &str, columns: &Columns) -> Result<Capture, CaptureError> {
    let err = |line: usize, reason: String| CaptureError {
        path: path.to_owned(),
        line,
        reason,
    };
    let lines: Vec<(usize, &str)> = text
        .lines()
        .enumerate()
        .map(|(k, l)| (k + 1, l.trim()))
        .filter(|(_, l)| !l.is_empty() && !l.starts_with('#'))
        .collect();
    // The data start at the first line of two or more numbers followed by
    // another such line; the header, if any, is the line just before.
    let numeric = |l: &str| {
        let f = fields(l);
        f.len() >= 2 && f.iter().all(|x| number(x).is_some())
    };
    let start = (0..lines.len())
        .find(|&k| numeric(lines[k].1) && lines.get(k + 1).is_some_and(|(_, l)| numeric(l)))
        .ok_or_else(|| {
            err(
                0,
                "no rows of numbers (time, voltage, ...) in the file".into(),
            )
        })?;
    let header: Option<Vec<String>> = start.checked_sub(1).map(|k| {
        fields(lines[k].1)
            .iter()
            .map(|h| h.trim_matches('"').to_lowercase())
            .collect()
    });
    let index = |c: &Column, what: &str| -> Result<usize, CaptureError> {
        match c {
            Column::Index(i) => Ok(*i),
            Column::Name(n) => header
                .as_ref()
                .and_then(|h| h.iter().position(|x| *x == n.to_lowercase()))
                .ok_or_else(|| {
                    err(
                        0,
                        format!(
                            "no column named `{n}` for the {what}{}",
                            header.as_ref().map_or_else(
                                || " (the file has no header line)".to_owned(),
                                |h| format!(" (the header has {})", h.join(", "))
                            )
                        ),
                    )
                }),
        }
    };
    let it = index(&columns.time, "time")?;
    let iv = index(&columns.switch_v, "switch voltage")?;
    let ii = columns
        .inductor_a
        .as_ref()
        .map(|c| index(c, "inductor current"))
        .transpose()?;
    let ig = columns
        .gate
        .as_ref()
        .map(|c| index(c, "gate command"))
        .transpose()?;
    let (mut time_s, mut switch_v) = (Vec::new(), Vec::new());
    let (mut inductor_a, mut gate) = (Vec::new(), Vec::new());
    for &(line, l) in &lines[start..] {
        let f = fields(l);
        let get = |i: usize, what: &str| -> Result<f64, CaptureError> {
            let field = f.get(i).ok_or_else(|| {
                err(
                    line,
                    format!("no column {i} for the {what} (the row has {})", f.len()),
                )
            })?;
            number(field).ok_or_else(|| err(line, format!("{what} `{field}` is not a number")))
        };
        let t = get(it, "time")?;
        if let Some(&prev) = time_s.last() {
            if t <= prev {
                return Err(err(
                    line,
                    format!(
                        "time must increase from sample to sample: {} follows {}",
                        crate::units::format_si(t, "s"),
                        crate::units::format_si(prev, "s")
                    ),
                ));
            }
        }
        time_s.push(t);
        switch_v.push(get(iv, "switch voltage")?);
        if let Some(i) = ii {
            inductor_a.push(get(i, "inductor current")?);
        }
        if let Some(i) = ig {
            gate.push(get(i, "gate command")?);
        }
    }
    let noise_v = check_ring(&switch_v).map_err(|reason| err(0, reason))?;
    Ok(Capture {
        path: path.to_owned(),
        time_s,
        switch_v,
        inductor_a: ii.map(|_| inductor_a),
        gate: ig.map(|_| gate),
        noise_v,
    })
}

/// Read and parse a capture file.
///
/// # Errors
/// [`CaptureError`], also when the file cannot be read.
pub fn load(path: &std::path::Path, columns: &Columns) -> Result<Capture, CaptureError> {
    let shown = path.display().to_string();
    let text = std::fs::read_to_string(path).map_err(|e| CaptureError {
        path: shown.clone(),
        line: 0,
        reason: format!("cannot read: {e}"),
    })?;
    parse(&text, &shown, columns)
}

/// Whether the voltage trace holds a usable ring; its noise (volt, RMS)
/// if so, else the reason.
fn check_ring(v: &[f64]) -> Result<f64, String> {
    if v.len() < MIN_SAMPLES {
        return Err(format!(
            "{} samples are too few to fit a ring: capture at least {MIN_SAMPLES} over the transition",
            v.len()
        ));
    }
    let (lo, hi) = v
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
            (a.min(x), b.max(x))
        });
    let swing = hi - lo;
    if swing.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
        return Err(
            "the trace is flat: no ring in the capture (was the switch turned off?)".into(),
        );
    }
    // Noise: from the second differences, which a smooth trace sampled
    // finely leaves near zero and white noise of RMS s spreads with RMS
    // s*sqrt(6); their median absolute value (robust to the turn-off edge
    // and the ring's bends) times 1.4826 estimates that RMS (the normal
    // distribution's median absolute deviation).
    let mut d2: Vec<f64> = v
        .windows(3)
        .map(|w| (w[2] - 2.0 * w[1] + w[0]).abs())
        .collect();
    d2.sort_by(f64::total_cmp);
    let median = d2.get(d2.len() / 2).copied().unwrap_or(0.0);
    let noise = 1.4826 * median / 6f64.sqrt();
    // Clipping: a long run of samples at the very top value, where the
    // ring peaks (a smooth peak stays within one step of an 8-bit scope
    // for a few per cent of a capture; the bottom is the switch at zero
    // before the turn-off and after the window opens, flat by nature).
    let at_top = |x: f64| (x - hi).abs() <= 1e-12 * swing.max(1e-300);
    let (mut run, mut longest) = (0usize, 0usize);
    for &x in v {
        run = if at_top(x) { run + 1 } else { 0 };
        longest = longest.max(run);
    }
    if longest * 10 > v.len() {
        return Err(format!(
            "the trace sits at its top value {hi} V for {longest} samples in a row: the scope's vertical range clipped the ring; widen the range and capture again"
        ));
    }
    // The ring's own swing: the range between the 1st and 99th
    // percentiles, less what the noise alone spreads (about 4 RMS).
    let mut sorted = v.to_vec();
    sorted.sort_by(f64::total_cmp);
    let pct = |p: f64| sorted[((sorted.len() - 1) as f64 * p) as usize];
    let signal = (pct(0.99) - pct(0.01) - 4.0 * noise).max(0.0);
    if noise * 5.0 > signal {
        return Err(format!(
            "noise of {noise:.3} V RMS is above a fifth of the ring's {signal:.3} V swing: average more captures or narrow the vertical range"
        ));
    }
    Ok(noise)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn columns_are_picked_by_index_or_name() {
        assert_eq!(Column::parse("2"), Column::Index(2));
        assert_eq!(Column::parse(" Vds "), Column::Name("Vds".into()));
    }
}
