//! Background life tables: a CSV of annual death probabilities by single year of age, read and
//! checked in one place into a [`LifeTable`] that later code trusts.
//!
//! Accepted layout: a header with `age` and either `qx` or both `qx_female` and `qx_male`; ages
//! are consecutive whole years; every qx lies in [0, 1], and qx = 1 (certain death) only at the
//! last age. Lines starting with `#` are comments (the bundled synthetic table labels itself so).
//! Rows are read through the shared discipline of [`crate::csv_read`].

use crate::csv_read::{CsvReader, Settings};
use crate::error::{Error, Result};
use crate::input::sha256_hex;
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
    let bytes = crate::csv_read::read_file(path)?;
    parse(&path.display().to_string(), &bytes, sex)
}

/// Validates the bytes of a life table CSV (see the module documentation for the layout).
pub fn parse(file: &str, bytes: &[u8], sex: Option<Sex>) -> Result<LifeTable> {
    let sha256 = sha256_hex(bytes);
    let mut reader = CsvReader::new(
        file,
        bytes,
        Settings {
            delimiter: None,
            comments: true,
        },
    )?;
    let age_idx = reader.column("age")?;
    let sex_columns = reader.has("qx_female") || reader.has("qx_male");
    let columns: Vec<(&str, usize)> = if sex_columns {
        vec![
            ("qx_female", reader.column("qx_female")?),
            ("qx_male", reader.column("qx_male")?),
        ]
    } else if reader.has("qx") {
        vec![("qx", reader.column("qx")?)]
    } else {
        return Err(reader.error_at(
            reader.header_line(),
            reader.headers().len().max(1) - 1,
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

    let mut first_age: Option<u32> = None;
    let mut values: Vec<Vec<f64>> = vec![Vec::new(); columns.len()];
    // Line and column of the row holding qx = 1, which must be the last row.
    let mut certain_death: Option<(u64, usize)> = None;
    while let Some(row) = reader.next_row()? {
        if let Some((line, column)) = certain_death {
            return Err(reader.error_at(
                line,
                column,
                "qx = 1 (certain death) is allowed only at the last age of the table",
            ));
        }
        let age = row.number(age_idx)?;
        if age < 0.0 || age.fract() != 0.0 || age > 200.0 {
            return Err(row.error(
                age_idx,
                format!("age {age} is not a whole number of years between 0 and 200"),
            ));
        }
        let age = age as u32;
        match first_age {
            None => first_age = Some(age),
            Some(first) => {
                let expected = first + values[0].len() as u32;
                if age != expected {
                    return Err(row.error(
                        age_idx,
                        format!(
                            "age {age} follows age {}; ages must be consecutive whole years",
                            expected - 1
                        ),
                    ));
                }
            }
        }
        for (slot, (name, idx)) in columns.iter().enumerate() {
            let q = row.number(*idx)?;
            if !(0.0..=1.0).contains(&q) {
                let hint = if q > 1.0 && q <= 1000.0 {
                    " (per 1,000 or per 100,000 people? write the probability, e.g. 0.004787)"
                } else {
                    ""
                };
                return Err(row.error(
                    *idx,
                    format!("{name} {q} is not a probability between 0 and 1{hint}"),
                ));
            }
            if q == 1.0 && certain_death.is_none() {
                certain_death = Some((row.line(), *idx));
            }
            values[slot].push(q);
        }
    }
    let Some(first_age) = first_age else {
        return Err(reader.no_rows());
    };
    Ok(LifeTable {
        file: file.to_string(),
        sha256,
        column: columns[chosen].0.to_string(),
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
            "life.csv line 4 column 2 (\"qx\"): qx 1.2 is not a probability between 0 and 1 (per 1,000 or per 100,000 people? write the probability, e.g. 0.004787)"
        );
        assert_eq!(
            err("age,qx\n50,0.01\n# a comment inside\n51,1.2\n"),
            "life.csv line 4 column 2 (\"qx\"): qx 1.2 is not a probability between 0 and 1 (per 1,000 or per 100,000 people? write the probability, e.g. 0.004787)"
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
        // Decimal commas through the shared reader (before it, "50,0,004787" under age,qx was
        // read as qx = 0 and the rest dropped).
        assert_eq!(
            err("age,qx\n50,0,004787\n51,0,0052\n"),
            "life.csv line 2 column 2 (\"qx\"): row has 3 fields but the header has 2: \"0,004787\" looks like a decimal comma: write 0.004787"
        );
        assert_eq!(
            err("age;qx\n50;0,004787\n"),
            "life.csv line 2 column 2 (\"qx\"): \"0,004787\" looks like a decimal comma: write 0.004787"
        );
        // Short and long rows.
        assert!(err("age,qx\n50,0.01\n51\n")
            .starts_with("life.csv line 3 column 2 (\"qx\"): row has 1 field(s)"));
        assert!(err("age,qx\n50,0.01,x\n").starts_with("life.csv line 2 column 3"));
        assert!(err("").contains("empty"));
        assert!(err("age,qx\n").contains("no data rows"));
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
