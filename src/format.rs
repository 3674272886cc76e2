//! Number formatting for text meant for reading: printed tables, messages, report and plot
//! labels. Files meant for machines (CSV cells, JSON values, XLSX numbers, and the metadata
//! lines that rebuild a curve: `parameters`, `family_settings`) keep the shortest round-trip
//! text of [`crate::export::number_text`] instead. No function here writes a negative zero.

/// Longest piece of a user's value quoted back in a message; a 50 MB field must not become a
/// 50 MB error line.
const SHOWN_CHARS: usize = 40;

/// A value as quoted in a one-line message: control characters escaped (no line breaks, NULs
/// or terminal escapes reach the terminal) and long values cut with an ellipsis.
pub fn shown(text: &str) -> String {
    let mut out = String::new();
    let mut length = 0;
    for c in text.chars() {
        // Escapes count at their written length, so a value of NULs stays as short as any other.
        let piece: String = if c.is_control() {
            c.escape_default().collect()
        } else {
            c.to_string()
        };
        length += piece.chars().count();
        if length > SHOWN_CHARS {
            out.push('…');
            break;
        }
        out.push_str(&piece);
    }
    out
}

/// Significant digits of [`readable`]: enough for any time or setting a person types, few
/// enough to hide the last-bit noise of a unit conversion or a log-and-back (62.99999999999999).
pub const READABLE_DIGITS: usize = 10;

/// A time, duration or setting for reading: rounded to [`READABLE_DIGITS`] significant digits,
/// then written in its shortest form (`63`, `13.6`, `0.2299794661`); "0" for either zero.
pub fn readable(x: f64) -> String {
    if !x.is_finite() || x == 0.0 {
        return sig(x, 1);
    }
    let rounded: f64 = format!("{:.*e}", READABLE_DIGITS - 1, x)
        .parse()
        .unwrap_or(x);
    crate::export::number_text(rounded)
}

/// [`readable`] texts of several values, or their full-precision texts when rounding would make
/// two of them look the same (so a list of distinct cut points never prints two equal ones).
pub fn readable_all(values: &[f64]) -> Vec<String> {
    let texts: Vec<String> = values.iter().map(|x| readable(*x)).collect();
    let distinct = values
        .windows(2)
        .zip(texts.windows(2))
        .all(|(v, t)| v[0] == v[1] || t[0] != t[1]);
    if distinct {
        texts
    } else {
        values
            .iter()
            .map(|x| crate::export::number_text(*x))
            .collect()
    }
}

/// A count with its noun, singular for one: `counted(1, "tunnel state")` is "1 tunnel state",
/// `counted(4, "tunnel state")` "4 tunnel states".
pub fn counted(n: usize, noun: &str) -> String {
    if n == 1 {
        format!("1 {noun}")
    } else {
        format!("{n} {noun}s")
    }
}

/// Text of a number without the sign of a rounded-away negative value ("-0.00" becomes "0.00").
fn unsigned_zero(text: String) -> String {
    match text.strip_prefix('-') {
        Some(rest) if rest.bytes().all(|b| b == b'0' || b == b'.') => rest.to_string(),
        _ => text,
    }
}

/// `x` with `digits` significant digits, without exponent for ordinary magnitudes; "NA" when not finite.
pub fn sig(x: f64, digits: usize) -> String {
    if !x.is_finite() {
        return if x.is_nan() {
            "NA".into()
        } else if x > 0.0 {
            "inf".into()
        } else {
            "-inf".into()
        };
    }
    if x == 0.0 {
        return "0".into();
    }
    let magnitude = x.abs().log10().floor() as i32;
    if !(-4..=9).contains(&magnitude) {
        return format!("{:.*e}", digits.saturating_sub(1), x);
    }
    let decimals = (digits as i32 - 1 - magnitude).max(0) as usize;
    unsigned_zero(format!("{x:.decimals$}"))
}

/// Fixed decimals; "NA" when not finite.
pub fn fixed(x: f64, decimals: usize) -> String {
    if x.is_finite() {
        unsigned_zero(format!("{x:.decimals$}"))
    } else {
        "NA".into()
    }
}

/// Renders rows as an aligned text table: first column left-aligned, the rest right-aligned.
pub fn table(header: &[&str], rows: &[Vec<String>]) -> String {
    table_aligned(header, rows, 1)
}

/// Renders rows as an aligned text table with the first `left` columns left-aligned.
pub fn table_aligned(header: &[&str], rows: &[Vec<String>], left: usize) -> String {
    let cols = header.len();
    let mut width: Vec<usize> = header.iter().map(|h| h.chars().count()).collect();
    for row in rows {
        for (i, cell) in row.iter().enumerate().take(cols) {
            width[i] = width[i].max(cell.chars().count());
        }
    }
    let mut out = String::new();
    let mut line = |cells: Vec<&str>| {
        let mut parts = Vec::new();
        for (i, cell) in cells.iter().enumerate() {
            let pad = width[i].saturating_sub(cell.chars().count());
            if i < left {
                parts.push(format!("{cell}{}", " ".repeat(pad)));
            } else {
                parts.push(format!("{}{cell}", " ".repeat(pad)));
            }
        }
        out.push_str(parts.join("  ").trim_end());
        out.push('\n');
    };
    line(header.to_vec());
    for row in rows {
        line(row.iter().map(String::as_str).collect());
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn significant_digits() {
        assert_eq!(sig(1234.5678, 4), "1235");
        assert_eq!(sig(0.012345, 3), "0.0123");
        assert_eq!(sig(1.5e-7, 3), "1.50e-7");
        assert_eq!(sig(f64::NAN, 3), "NA");
    }

    #[test]
    fn counts_are_singular_for_one() {
        assert_eq!(counted(1, "tunnel state"), "1 tunnel state");
        assert_eq!(counted(0, "cycle"), "0 cycles");
        assert_eq!(counted(12, "cycle"), "12 cycles");
    }

    #[test]
    fn no_negative_zero_is_printed() {
        // A zero has no sign worth showing to a reader (common practice in printed tables).
        assert_eq!(sig(-0.0, 3), "0");
        assert_eq!(fixed(-0.0, 2), "0.00");
        assert_eq!(fixed(-0.001, 2), "0.00");
        assert_eq!(fixed(-0.006, 2), "-0.01");
        assert_eq!(readable(-0.0), "0");
        assert_eq!(sig(-0.5, 3), "-0.500");
    }

    #[test]
    fn readable_hides_conversion_noise_and_keeps_typed_values() {
        // Decimal values as a person types them, reached through binary round-off: 0.1 + 0.2,
        // a log-and-back, 6.4 + 7.2 (IEEE 754 doubles; common practice).
        assert_eq!(readable(0.1 + 0.2), "0.3");
        assert_eq!(readable(63f64.ln().exp()), "63");
        assert_eq!(readable(6.4 + 7.2), "13.6");
        assert_eq!(readable(62.999_999_999_999_99), "63");
        // A week in months: 7 / (365.25 / 12) = 0.22997946611909651… (exact arithmetic).
        assert_eq!(readable(7.0 / (365.25 / 12.0)), "0.2299794661");
        assert_eq!(readable(30.4375), "30.4375");
        assert_eq!(readable(1.5e-7), "1.5e-7");
        assert_eq!(readable(2.5e20), "2.5e20");
        // Values equal to 10 digits keep their full texts, so they do not read as equal.
        assert_eq!(readable_all(&[0.28, 6.4 + 7.2]), ["0.28", "13.6"]);
        assert_eq!(
            readable_all(&[1.0, 1.000_000_000_01]),
            ["1", "1.00000000001"]
        );
    }
}
