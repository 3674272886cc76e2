//! Number formatting for printed tables: significant digits for humans (files keep full precision).

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
    format!("{x:.decimals$}")
}

/// Fixed decimals; "NA" when not finite.
pub fn fixed(x: f64, decimals: usize) -> String {
    if x.is_finite() {
        format!("{x:.decimals$}")
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
}
