//! Numbers as engineers write them: plain SI (`2e-6`) or with an
//! engineering prefix (`2u`, `10n`, `170M`, `4.7k`), optionally followed by
//! the unit (`2uH`, `25ns`, `170MHz`); and back again for display.

/// Why a number could not be read.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum NumberError {
    /// Nothing given.
    #[error("empty value")]
    Empty,
    /// The text is not a number with an optional prefix and unit.
    #[error("`{text}` is not a number (write e.g. 2e-6, 2u or 2u{unit})")]
    Malformed {
        /// What was given.
        text: String,
        /// The unit the option expects.
        unit: &'static str,
    },
    /// A unit other than the one the option takes.
    #[error("`{text}`: unit `{found}` does not fit, this option takes {unit}")]
    WrongUnit {
        /// What was given.
        text: String,
        /// The unit found.
        found: String,
        /// The unit the option expects.
        unit: &'static str,
    },
    /// NaN or infinite.
    #[error("`{text}` is not a finite number")]
    NotFinite {
        /// What was given.
        text: String,
    },
}

/// SI prefixes accepted after a number. Case matters, as in SI: `m` is
/// milli, `M` mega. `u` and `µ` both mean micro.
/// Each with its power of ten.
const PREFIXES: &[(&str, i32)] = &[
    ("f", -15),
    ("p", -12),
    ("n", -9),
    ("u", -6),
    ("µ", -6),
    ("μ", -6),
    ("m", -3),
    ("k", 3),
    ("M", 6),
    ("G", 9),
];

/// Parse `text` as a quantity in `unit` (e.g. `"H"`, `"Hz"`, `"s"`; `""`
/// for a dimensionless number).
///
/// ```
/// # fn main() -> Result<(), host_tool::units::NumberError> {
/// use host_tool::units::parse_quantity;
/// assert_eq!(parse_quantity("2u", "H")?, 2e-6);
/// assert_eq!(parse_quantity("170MHz", "Hz")?, 170e6);
/// assert_eq!(parse_quantity("25ns", "s")?, 25e-9);
/// assert_eq!(parse_quantity("2e-6", "H")?, 2e-6);
/// # Ok(()) }
/// ```
///
/// # Errors
/// [`NumberError`] describing what is wrong with the text.
pub fn parse_quantity(text: &str, unit: &'static str) -> Result<f64, NumberError> {
    let t = text.trim();
    if t.is_empty() {
        return Err(NumberError::Empty);
    }
    let malformed = || NumberError::Malformed {
        text: text.to_owned(),
        unit,
    };
    // Longest leading part that is a float literal (digits, sign, '.', exponent).
    let split = numeric_prefix_len(t);
    if split == 0 {
        // Allow spelled-out non-finite values only to reject them clearly.
        if t.parse::<f64>().is_ok() {
            return Err(NumberError::NotFinite {
                text: text.to_owned(),
            });
        }
        return Err(malformed());
    }
    let (num, rest) = t.split_at(split);
    let mantissa: f64 = num.parse().map_err(|_| malformed())?;
    let rest = rest.trim_start();
    let (scale, rest) = PREFIXES
        .iter()
        .find_map(|&(p, s)| {
            let after = rest.strip_prefix(p)?;
            // A bare unit that starts like a prefix ("m" for metre is not ours;
            // but "F" vs "f" are distinct by case) stays a unit.
            (after.is_empty() || after == unit).then_some((s, after))
        })
        .unwrap_or((0, rest));
    if !rest.is_empty() && rest != unit && !(unit == "ohm" && (rest == "Ω" || rest == "R")) {
        return Err(NumberError::WrongUnit {
            text: text.to_owned(),
            found: rest.to_owned(),
            unit: if unit.is_empty() { "no unit" } else { unit },
        });
    }
    // Divide for sub-unit prefixes: 10^k is exact for |k| <= 22, so `25 / 1e9`
    // is the correctly rounded 25e-9, which `25 * 1e-9` is not.
    let value = if scale < 0 {
        mantissa / 10f64.powi(-scale)
    } else {
        mantissa * 10f64.powi(scale)
    };
    if !value.is_finite() {
        return Err(NumberError::NotFinite {
            text: text.to_owned(),
        });
    }
    Ok(value)
}

fn numeric_prefix_len(t: &str) -> usize {
    let b = t.as_bytes();
    let mut i = 0;
    let mut seen_digit = false;
    if matches!(b.first(), Some(b'+' | b'-')) {
        i += 1;
    }
    while let Some(&c) = b.get(i) {
        if c.is_ascii_digit() {
            seen_digit = true;
        } else if c != b'.' {
            break;
        }
        i += 1;
    }
    if !seen_digit {
        return 0;
    }
    // Exponent only if digits follow: "2e-6" yes, "2e" no.
    if matches!(b.get(i), Some(b'e' | b'E')) {
        let mut j = i + 1;
        if matches!(b.get(j), Some(b'+' | b'-')) {
            j += 1;
        }
        let start = j;
        while b.get(j).is_some_and(u8::is_ascii_digit) {
            j += 1;
        }
        if j > start {
            i = j;
        }
    }
    i
}

/// Parse a fraction written as a number (`0.05`) or a percentage (`5%`).
///
/// ```
/// assert_eq!(host_tool::units::parse_fraction("5%"), Some(0.05));
/// assert_eq!(host_tool::units::parse_fraction("0.1"), Some(0.1));
/// assert_eq!(host_tool::units::parse_fraction("lots"), None);
/// ```
#[must_use]
pub fn parse_fraction(text: &str) -> Option<f64> {
    let (body, scale) = match text.trim().strip_suffix('%') {
        Some(b) => (b.trim(), 0.01),
        None => (text.trim(), 1.0),
    };
    body.parse::<f64>()
        .ok()
        .filter(|v| v.is_finite())
        .map(|v| v * scale)
}

/// `value` (finite, not zero) as a mantissa and its engineering prefix
/// (femto to giga; `micro` spelled as given).
fn engineering(value: f64, micro: &'static str) -> (f64, &'static str) {
    let exp3 = (value.abs().log10() / 3.0).floor().clamp(-5.0, 3.0);
    let prefix = match exp3 as i32 {
        -5 => "f",
        -4 => "p",
        -3 => "n",
        -2 => micro,
        -1 => "m",
        1 => "k",
        2 => "M",
        3 => "G",
        _ => "",
    };
    (value / 10f64.powf(exp3 * 3.0), prefix)
}

/// `value` as the design file writes numbers: `digits` significant
/// digits and an ASCII engineering prefix, no unit (`1.1201e-6, 5` gives
/// `"1.1201u"`), which [`parse_quantity`] reads back.
///
/// ```
/// use host_tool::units::{design_number, parse_quantity};
/// assert_eq!(design_number(1.12013e-6, 5), "1.1201u");
/// assert_eq!(design_number(0.1684, 4), "168.4m");
/// assert_eq!(design_number(42.1e-9, 3), "42.1n");
/// assert!((parse_quantity("5.092n", "F").unwrap() - 5.092e-9).abs() < 1e-21);
/// ```
#[must_use]
pub fn design_number(value: f64, digits: usize) -> String {
    if value == 0.0 || !value.is_finite() {
        return format!("{value}");
    }
    let (scaled, prefix) = engineering(value, "u");
    let whole = (scaled.abs().log10().floor() as i64 + 1).max(1) as usize;
    let decimals = digits.saturating_sub(whole);
    let text = format!("{scaled:.decimals$}");
    // No trailing zeros after the point.
    let text = if text.contains('.') {
        text.trim_end_matches('0').trim_end_matches('.').to_owned()
    } else {
        text
    };
    format!("{text}{prefix}")
}

/// Format `value` with an engineering prefix and `unit`, 4 significant
/// digits: `3.729e-7, "s"` gives `"372.9 ns"`.
#[must_use]
pub fn format_si(value: f64, unit: &str) -> String {
    // One spelling of the ohm in every output.
    let unit = if unit == "ohm" { "Ω" } else { unit };
    if !value.is_finite() {
        return format!("{value} {unit}");
    }
    if value == 0.0 {
        return format!("0 {unit}");
    }
    let (scaled, prefix) = engineering(value, "µ");
    let decimals = if scaled.abs() >= 100.0 {
        1
    } else if scaled.abs() >= 10.0 {
        2
    } else {
        3
    };
    format!("{scaled:.decimals$} {prefix}{unit}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn prefixes_and_units() {
        let ok = [
            ("2u", "H", 2e-6),
            ("2µH", "H", 2e-6),
            ("10n", "F", 10e-9),
            ("10nF", "F", 10e-9),
            ("170M", "Hz", 170e6),
            ("4.7k", "ohm", 4.7e3),
            ("48", "V", 48.0),
            ("48V", "V", 48.0),
            ("-3e-9", "s", -3e-9),
            ("1.5e3m", "s", 1.5),
            ("0.25", "", 0.25),
            ("12 Ω", "ohm", 12.0),
            ("1mF", "F", 1e-3),
            ("1F", "F", 1.0),
        ];
        for (t, u, v) in ok {
            let got = parse_quantity(t, u).unwrap();
            assert!((got - v).abs() <= 1e-12 * v.abs(), "{t}: {got} != {v}");
        }
    }

    #[test]
    fn bad_numbers_are_explained() {
        assert_eq!(parse_quantity("", "H"), Err(NumberError::Empty));
        assert!(matches!(
            parse_quantity("abc", "H"),
            Err(NumberError::Malformed { .. })
        ));
        assert!(matches!(
            parse_quantity("nan", "H"),
            Err(NumberError::NotFinite { .. })
        ));
        assert!(matches!(
            parse_quantity("inf", "H"),
            Err(NumberError::NotFinite { .. })
        ));
        assert!(matches!(
            parse_quantity("1e999", "H"),
            Err(NumberError::NotFinite { .. })
        ));
        assert!(matches!(
            parse_quantity("2uF", "H"),
            Err(NumberError::WrongUnit { .. })
        ));
        assert!(matches!(
            parse_quantity("2x", "H"),
            Err(NumberError::WrongUnit { .. })
        ));
        assert!(matches!(
            parse_quantity("1.2meg", "H"),
            Err(NumberError::WrongUnit { .. })
        ));
    }

    #[test]
    fn formatting() {
        assert_eq!(format_si(3.729e-7, "s"), "372.9 ns");
        assert_eq!(format_si(170e6, "Hz"), "170.0 MHz");
        assert_eq!(format_si(12.127, "Ω"), "12.13 Ω");
        assert_eq!(format_si(0.0, "V"), "0 V");
        assert_eq!(format_si(-2.5e-9, "s"), "-2.500 ns");
    }
}
