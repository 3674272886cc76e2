//! The payoff options shared by `tunnels` and `draws` (`--payoffs FILE`, `--discount R`; `horizon`
//! and `run` read the same file with their own discount settings), and what every output says
//! about the payoffs: metadata lines, the schedule in words, the matrix layouts' payoff table.

use crate::discretise::TunnelTable;
use crate::error::{Error, Result};
use crate::export::{Cell, Table};
use crate::format::readable;
use crate::payoff::{Discount, Exactness, Payoff, PayoffFile, TunnelPayoffs};

/// Parses an annual discount rate option: a number from 0 to below 1 (e.g. 0.035).
pub fn parse_discount(option: &str, text: &str) -> Result<Discount> {
    match text.trim().parse::<f64>() {
        Ok(x) if x.is_finite() && (0.0..1.0).contains(&x) => {
            Discount::annual(x).map_err(|e| Error::Usage(format!("{option} {}: {e}", text.trim())))
        }
        _ => Err(Error::Usage(format!(
            "{option} {}: must be an annual rate from 0 to below 1 (e.g. 0.035)",
            text.trim()
        ))),
    }
}

/// One payoff's schedule in words: `rate 500 per 1 month from 0, 50 per 1 month from 1 year;
/// at_entry 1500; at_exit 3000`.
pub fn describe_payoff(payoff: &Payoff) -> String {
    let mut parts = Vec::new();
    if !payoff.rate.is_empty() {
        let pieces: Vec<String> = payoff
            .rate
            .iter()
            .map(|p| format!("{} per {} from {}", readable(p.amount), p.per, p.from))
            .collect();
        parts.push(format!("rate {}", pieces.join(", ")));
    }
    if let Some(a) = payoff.at_entry {
        parts.push(format!("at_entry {}", readable(a)));
    }
    if let Some(a) = payoff.at_exit {
        parts.push(format!("at_exit {}", readable(a)));
    }
    parts.join("; ")
}

/// What the payoff columns mean, one line for headers and reports.
pub const PAYOFF_COLUMNS_MEANING: &str = "payoff_NAME: expected amount accrued during the tunnel's cycle by one person present at its start (rate integrated exactly against the curve, at_entry in tunnel 1, at_exit times the exit probability), discounted within the cycle from its start; multiply by the membership at the start of the cycle, no within-cycle correction";

/// Metadata lines for outputs carrying payoff columns: the file and its hash, the discount, how
/// the integrals were computed, the meaning of the columns and each payoff's schedule.
pub fn payoff_metadata(
    file: &PayoffFile,
    discount: Discount,
    exactness: Exactness,
) -> Vec<(String, String)> {
    let mut lines = vec![
        ("payoffs".to_string(), file.file.clone()),
        ("payoffs_sha256".to_string(), file.sha256.clone()),
        (
            "payoff_discount".to_string(),
            format!(
                "{} a year, as (1 + r)^(-t) within each cycle from its start",
                discount.rate()
            ),
        ),
        (
            "payoff_integration".to_string(),
            exactness.describe().to_string(),
        ),
        (
            "payoff_columns".to_string(),
            PAYOFF_COLUMNS_MEANING.to_string(),
        ),
    ];
    lines.extend(
        file.schedule
            .payoffs
            .iter()
            .map(|p| (p.column(), describe_payoff(p))),
    );
    lines
}

/// The payoff table beside a matrix layout: `tunnel`, then one `payoff_NAME` column per payoff.
pub fn payoff_table(table: &TunnelTable, payoffs: &TunnelPayoffs) -> Table {
    let mut columns = vec!["tunnel".to_string()];
    columns.extend(payoffs.columns.iter().cloned());
    let rows = table
        .rows
        .iter()
        .enumerate()
        .map(|(i, r)| {
            let mut row = vec![Cell::Int(r.tunnel as i64)];
            row.extend(
                payoffs
                    .values
                    .iter()
                    .map(|v| v.get(i).map_or(Cell::Missing, |x| Cell::Number(*x))),
            );
            row
        })
        .collect();
    Table {
        name: "payoffs".into(),
        columns,
        rows,
    }
}

/// The companion file of a matrix-layout CSV: `NAME.payoffs.csv` beside `NAME.csv`.
pub fn companion_path(path: &std::path::Path) -> std::path::PathBuf {
    let stem = path
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "tunnels".into());
    let ext = path
        .extension()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "csv".into());
    path.with_file_name(format!("{stem}.payoffs.{ext}"))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn discount_is_checked() {
        assert!(parse_discount("--discount", "0.035").is_ok());
        assert!(parse_discount("--discount", "0").is_ok());
        assert!(parse_discount("--discount", "1").is_err());
        assert!(parse_discount("--discount", "-0.01").is_err());
        assert!(parse_discount("--discount", "3,5").is_err());
    }

    #[test]
    fn companion_sits_beside_the_table() {
        assert_eq!(
            companion_path(std::path::Path::new("out/t.csv")),
            std::path::PathBuf::from("out/t.payoffs.csv")
        );
    }
}
