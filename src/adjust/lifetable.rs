//! Background life tables: a CSV of annual death probabilities by single year of age, read and
//! checked in one place into a [`LifeTable`] that later code trusts.
//!
//! Accepted layout: a header with `age` and either `qx` or both `qx_female` and `qx_male`; ages
//! are consecutive whole years; every qx lies in [0, 1], and qx = 1 (certain death) only at the
//! last age. Lines starting with `#` are comments (the bundled synthetic table labels itself so).

use crate::error::{Error, Result};
use crate::input::{detect_delimiter, find_column, parse_number, sha256_hex, strip_bom};
use std::path::Path;

/// Which column of a two-sex life table to use.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Sex {
    Female,
    Male,
}

impl Sex {
    /// Name as written on the command line and in outputs.
    pub fn name(self) -> &'static str {
        match self {
            Sex::Female => "female",
            Sex::Male => "male",
        }
    }
}

/// A validated life table for one population: qx for consecutive ages from `first_age`.
#[derive(Debug, Clone, PartialEq)]
pub struct LifeTable {
    /// File name as given by the user.
    pub file: String,
    /// SHA-256 of the file's bytes (recorded in outputs).
    pub sha256: String,
    /// Column the probabilities came from (`qx`, `qx_female` or `qx_male`).
    pub column: String,
    /// Age (whole years) of the first row.
    pub first_age: u32,
    /// Annual probability of death between age x and x + 1, for x = first_age, first_age + 1, …
    pub qx: Vec<f64>,
}

impl LifeTable {
    /// One past the last age the table covers (e.g. 101 for a table ending at age 100).
    pub fn end_age(&self) -> f64 {
        f64::from(self.first_age) + self.qx.len() as f64
    }

    /// Whether the last age has qx = 1, so that nobody outlives the table.
    pub fn closes_with_certain_death(&self) -> bool {
        self.qx.last() == Some(&1.0)
    }

    /// Constant hazard per year within each year of age, -ln(1 - qx); +∞ where qx = 1.
    pub fn hazards(&self) -> Vec<f64> {
        self.qx.iter().map(|q| -(-q).ln_1p()).collect()
    }
}

/// Reads and validates a life table file, picking the column for `sex` when it has two.
pub fn load(path: &Path, sex: Option<Sex>) -> Result<LifeTable> {
    let name = path.display().to_string();
    let bytes =
        std::fs::read(path).map_err(|e| Error::input(&name, format!("cannot read: {e}")))?;
    parse(&name, &bytes, sex)
}

/// Validates the bytes of a life table CSV (see the module documentation for the layout).
pub fn parse(file: &str, bytes: &[u8], sex: Option<Sex>) -> Result<LifeTable> {
    let sha256 = sha256_hex(bytes);
    let body = strip_bom(bytes);
    // Each line is parsed on its own (life tables have no multi-line fields), so that line
    // numbers in messages are those of the file whatever comments and blank lines it holds.
    let mut lines = body
        .split(|&b| b == b'\n')
        .enumerate()
        .map(|(i, l)| (i as u64 + 1, l.strip_suffix(b"\r").unwrap_or(l)))
        .filter(|(_, l)| !l.trim_ascii().is_empty() && !l.starts_with(b"#"));
    let Some((header_line, header_bytes)) = lines.next() else {
        return Err(Error::input(
            file,
            "file is empty (expected a header row with age and qx, then one row per age)",
        ));
    };
    let delimiter = detect_delimiter(header_bytes);
    let read_line = |line: u64, bytes: &[u8]| -> Result<csv::ByteRecord> {
        let mut record = csv::ByteRecord::new();
        csv::ReaderBuilder::new()
            .delimiter(delimiter)
            .has_headers(false)
            .from_reader(bytes)
            .read_byte_record(&mut record)
            .map_err(|e| Error::input(file, format!("line {line}: malformed CSV: {e}")))?;
        Ok(record)
    };
    let headers = read_line(header_line, header_bytes)?;
    // `find_column` reports the header as line 1; comments may have pushed it further down.
    let at_header = |e: Error| match e {
        Error::InputAt {
            file,
            column,
            message,
            ..
        } => Error::InputAt {
            file,
            line: header_line,
            column,
            message,
        },
        other => other,
    };
    let age_idx = find_column(file, &headers, "age").map_err(at_header)?;
    let has = |name: &str| {
        headers
            .iter()
            .any(|h| String::from_utf8_lossy(h).trim() == name)
    };
    let sex_columns = has("qx_female") || has("qx_male");
    let columns: Vec<(String, usize)> = if sex_columns {
        let female = find_column(file, &headers, "qx_female").map_err(at_header)?;
        let male = find_column(file, &headers, "qx_male").map_err(at_header)?;
        vec![("qx_female".into(), female), ("qx_male".into(), male)]
    } else if has("qx") {
        vec![(
            "qx".into(),
            find_column(file, &headers, "qx").map_err(at_header)?,
        )]
    } else {
        return Err(Error::at(
            file,
            header_line,
            headers.len().max(1),
            "qx",
            "a life table needs a column \"qx\", or both \"qx_female\" and \"qx_male\"",
        ));
    };
    let chosen = match (sex, sex_columns) {
        (Some(Sex::Female), true) => 0,
        (Some(Sex::Male), true) => 1,
        (None, false) => 0,
        (None, true) => {
            return Err(Error::Usage(format!(
                "{file} has qx_female and qx_male columns: choose one with --sex female or --sex male"
            )))
        }
        (Some(s), false) => {
            return Err(Error::Usage(format!(
                "--sex {} was given but {file} has a single qx column (no qx_female/qx_male); drop --sex or supply a table by sex",
                s.name()
            )))
        }
    };
    let needed = columns.iter().map(|c| c.1).max().unwrap_or(0).max(age_idx);

    let mut first_age: Option<u32> = None;
    let mut values: Vec<Vec<f64>> = vec![Vec::new(); columns.len()];
    // Line and column of the row holding qx = 1 in each column, which must be the last row.
    let mut certain_death: Vec<Option<(u64, usize)>> = vec![None; columns.len()];
    for (line, bytes) in lines {
        let record = read_line(line, bytes)?;
        if record.len() <= needed {
            let name = headers
                .get(needed)
                .map(|h| String::from_utf8_lossy(h).trim().to_string())
                .unwrap_or_default();
            return Err(Error::at(
                file,
                line,
                record.len() + 1,
                &name,
                format!(
                    "row has {} field(s) but the header has {}",
                    record.len(),
                    headers.len()
                ),
            ));
        }
        if let Some((dead_line, column)) = certain_death.iter().flatten().next() {
            return Err(Error::at(
                file,
                *dead_line,
                column + 1,
                &columns.iter().find(|c| c.1 == *column).unwrap().0,
                "qx = 1 (certain death) is allowed only at the last age of the table",
            ));
        }
        let text = |idx: usize| String::from_utf8_lossy(&record[idx]).into_owned();
        let age = parse_number(&text(age_idx))
            .map_err(|m| Error::at(file, line, age_idx + 1, "age", m))?;
        if age < 0.0 || age.fract() != 0.0 || age > 200.0 {
            return Err(Error::at(
                file,
                line,
                age_idx + 1,
                "age",
                format!("age {age} is not a whole number of years between 0 and 200"),
            ));
        }
        let age = age as u32;
        match first_age {
            None => first_age = Some(age),
            Some(first) => {
                let expected = first + values[0].len() as u32;
                if age != expected {
                    return Err(Error::at(
                        file,
                        line,
                        age_idx + 1,
                        "age",
                        format!(
                            "age {age} follows age {}; ages must be consecutive whole years",
                            expected - 1
                        ),
                    ));
                }
            }
        }
        for (slot, (name, idx)) in columns.iter().enumerate() {
            let q =
                parse_number(&text(*idx)).map_err(|m| Error::at(file, line, idx + 1, name, m))?;
            if !(0.0..=1.0).contains(&q) {
                return Err(Error::at(
                    file,
                    line,
                    idx + 1,
                    name,
                    format!("{name} {q} is not a probability between 0 and 1"),
                ));
            }
            if q == 1.0 {
                certain_death[slot] = Some((line, *idx));
            }
            values[slot].push(q);
        }
    }
    let Some(first_age) = first_age else {
        return Err(Error::input(file, "no rows after the header"));
    };
    let (column, _) = columns[chosen].clone();
    Ok(LifeTable {
        file: file.to_string(),
        sha256,
        column,
        first_age,
        qx: values.swap_remove(chosen),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse_str(text: &str, sex: Option<Sex>) -> Result<LifeTable> {
        parse("life.csv", text.as_bytes(), sex)
    }

    #[test]
    fn reads_sex_columns_comments_and_closing_certain_death() {
        let text = "# synthetic\nage,qx_female,qx_male\n60,0.01,0.02\n61,0.011,0.022\n62,1,1\n";
        let female = parse_str(text, Some(Sex::Female)).unwrap();
        assert_eq!(female.first_age, 60);
        assert_eq!(female.qx, vec![0.01, 0.011, 1.0]);
        assert_eq!(female.column, "qx_female");
        assert_eq!(female.end_age(), 63.0);
        assert!(female.closes_with_certain_death());
        let male = parse_str(text, Some(Sex::Male)).unwrap();
        assert_eq!(male.qx, vec![0.02, 0.022, 1.0]);
        // Hazard within a year of age: -ln(1 - qx) (common practice); qx = 1 gives +∞.
        let h = male.hazards();
        assert!((h[0] - 0.020_202_707_317_519_466).abs() < 1e-15);
        assert_eq!(h[2], f64::INFINITY);
    }

    #[test]
    fn errors_name_line_and_column() {
        let err = |text: &str| parse_str(text, None).unwrap_err().to_string();
        assert_eq!(
            err("age,qx\n50,0.01\n52,0.02\n"),
            "life.csv line 3 column 1 (\"age\"): age 52 follows age 50; ages must be consecutive whole years"
        );
        assert_eq!(
            err("# note\nage,qx\n50,0.01\n51,1.2\n"),
            "life.csv line 4 column 2 (\"qx\"): qx 1.2 is not a probability between 0 and 1"
        );
        assert_eq!(
            err("age,qx\n50,0.01\n# a comment inside\n51,1.2\n"),
            "life.csv line 4 column 2 (\"qx\"): qx 1.2 is not a probability between 0 and 1"
        );
        assert_eq!(
            err("age,qx\n50,1\n51,0.5\n"),
            "life.csv line 2 column 2 (\"qx\"): qx = 1 (certain death) is allowed only at the last age of the table"
        );
        assert!(err("age,qx\n50.5,0.1\n").contains("line 2 column 1"));
        assert!(err("age,qx\n50,-0.1\n").contains("line 2 column 2"));
        assert!(err("age,px\n50,0.1\n").contains("needs a column \"qx\""));
        assert!(err("years,qx\n50,0.1\n").starts_with("life.csv line 1"));
        assert!(err("# about\n\nyears,qx\n50,0.1\n").starts_with("life.csv line 3 column"));
        assert!(err("age,qx_female\n50,0.1\n").contains("qx_male"));
        assert!(err("").contains("empty"));
        assert!(err("age,qx\n").contains("no rows"));
    }

    #[test]
    fn bundled_synthetic_table_loads() {
        // data/demo_lifetable.csv, written by scripts/make_lifetable.py: ages 0–110 closing with
        // qx = 1, and by construction of its invented parameters men die more at every age.
        let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("data/demo_lifetable.csv");
        let female = load(&path, Some(Sex::Female)).unwrap();
        let male = load(&path, Some(Sex::Male)).unwrap();
        assert_eq!((female.first_age, female.qx.len()), (0, 111));
        assert!(female.closes_with_certain_death());
        for (f, m) in female.qx.iter().zip(&male.qx).take(110) {
            assert!(0.0 < *f && f < m && *m < 1.0);
        }
    }

    #[test]
    fn sex_must_match_the_table() {
        let two = "age,qx_female,qx_male\n60,0.01,0.02\n";
        assert!(parse_str(two, None)
            .unwrap_err()
            .to_string()
            .contains("--sex"));
        let one = "age,qx\n60,0.01\n";
        assert!(parse_str(one, Some(Sex::Male)).is_err());
    }
}
