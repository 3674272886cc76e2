//! External targets: ranges of survival at given times, from registries or clinical opinion,
//! read from a CSV file (`time`, `lower`, `upper`, optional `arm`, optional `source`) through
//! the shared reading discipline, and checked against every fit.

use crate::csv_read::{self, CsvReader};
use crate::error::{Error, Result};
use crate::units::{Duration, TimeUnit};
use serde::{Deserialize, Serialize};
use std::path::Path;

/// One target range, as read (and recorded in the fit file).
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Target {
    /// Time since entry, years.
    pub time_years: f64,
    /// The time as written in the file (e.g. `5 years`).
    pub time: String,
    /// Lowest plausible survival.
    pub lower: f64,
    /// Highest plausible survival.
    pub upper: f64,
    /// Arm it applies to (`null`: every arm).
    pub arm: Option<String>,
    /// Where the range comes from, as written.
    pub source: Option<String>,
    /// Line of the targets file it was read from.
    pub line: u64,
    /// 1-based column of `arm` in the file, for errors (not written).
    #[serde(skip)]
    pub arm_column: Option<usize>,
}

/// One target checked against one fit (the fit JSON's `targets` entries).
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct TargetCheck {
    /// Time since entry, years.
    pub time_years: f64,
    /// Lowest plausible survival.
    pub lower: f64,
    /// Highest plausible survival.
    pub upper: f64,
    /// The fit's survival at that time.
    pub survival: f64,
    /// Whether `lower` ≤ `survival` ≤ `upper`.
    pub within: bool,
    /// Where the range comes from (extension: the file's `source` text).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub source: Option<String>,
}

/// Reads a targets file.
pub fn load(path: &Path) -> Result<Vec<Target>> {
    let bytes = csv_read::read_file(path)?;
    parse(&path.display().to_string(), &bytes)
}

/// Parses a targets file's bytes; `name` is how errors name it.
pub fn parse(name: &str, bytes: &[u8]) -> Result<Vec<Target>> {
    let mut reader = CsvReader::new(
        name,
        bytes,
        csv_read::Settings {
            delimiter: None,
            comments: false,
        },
    )?;
    let time = reader.column("time")?;
    let lower = reader.column("lower")?;
    let upper = reader.column("upper")?;
    let arm = reader.find("arm")?;
    let source = reader.find("source")?;
    let mut out = Vec::new();
    while let Some(row) = reader.next_row()? {
        let text = row.text(time)?.to_string();
        let duration = row.parse(time, |t| {
            t.parse::<Duration>()
                .map_err(|e| format!("{e} (a time is a number and a unit, e.g. \"5 years\")"))
        })?;
        let low = row.number(lower)?;
        let high = row.number(upper)?;
        for (column, value) in [(lower, low), (upper, high)] {
            if !(0.0..=1.0).contains(&value) {
                let hint = if (1.0..=100.0).contains(&value) {
                    " (survival is a proportion from 0 to 1; a percentage? write it divided by 100)"
                } else {
                    " (survival is a proportion from 0 to 1)"
                };
                return Err(row.error(column, format!("survival {value} is outside 0 to 1{hint}")));
            }
        }
        if low > high {
            return Err(row.error(
                upper,
                format!("upper {high} is below lower {low}: the range is empty"),
            ));
        }
        let optional = |column: Option<usize>| -> Result<Option<String>> {
            match column {
                Some(c) if !row.is_blank(c) => Ok(Some(row.text(c)?.to_string())),
                _ => Ok(None),
            }
        };
        out.push(Target {
            time_years: duration.in_unit(TimeUnit::Years),
            time: text,
            lower: low,
            upper: high,
            arm: optional(arm)?,
            source: optional(source)?,
            line: row.line(),
            arm_column: arm.map(|c| c + 1),
        });
    }
    if out.is_empty() {
        return Err(reader.no_rows());
    }
    Ok(out)
}

/// Checks the targets that apply to `arm` (those without an arm apply to all) against the
/// survival function `survival(years)`.
pub fn check(
    targets: &[Target],
    arm: Option<&str>,
    survival: impl Fn(f64) -> f64,
) -> Vec<TargetCheck> {
    targets
        .iter()
        .filter(|t| t.arm.is_none() || t.arm.as_deref() == arm)
        .map(|t| {
            let s = survival(t.time_years);
            TargetCheck {
                time_years: t.time_years,
                lower: t.lower,
                upper: t.upper,
                survival: s,
                within: s >= t.lower && s <= t.upper,
                source: t.source.clone(),
            }
        })
        .collect()
}

/// Refuses a target for an arm the data do not have (a misspelt arm would silently check
/// nothing); `file` names the targets file in the error.
pub fn check_arms(targets: &[Target], arms: &[Option<String>], file: &str) -> Result<()> {
    for t in targets {
        let Some(arm) = &t.arm else { continue };
        if arms.iter().any(|b| b.as_deref() == Some(arm.as_str())) {
            continue;
        }
        let known: Vec<&str> = arms.iter().flatten().map(String::as_str).collect();
        let message = if known.is_empty() {
            format!("the data have no arms (no --arm-col), so a target cannot name arm \"{arm}\"")
        } else {
            format!(
                "the data have no arm \"{arm}\" (arms: {})",
                known.join(", ")
            )
        };
        return Err(Error::at(
            file,
            t.line,
            t.arm_column.unwrap_or(1),
            "arm",
            message,
        ));
    }
    Ok(())
}
