//! The design of a model across arms: one row per subject with its time, event, arm and the
//! terms of the model (arm indicators against the reference arm, numeric covariates per unit,
//! indicators of text covariates against their first level in sorted order).
//!
//! Read through the shared discipline of [`crate::csv_read`], so a missing or non-numeric
//! covariate value is a one-line error naming the file, line and column.

use crate::csv_read::{parse_number, CsvReader, Settings};
use crate::error::{Error, Result};
use crate::format::shown;
use std::collections::BTreeSet;

/// What to read: the columns of the data and of the covariates.
#[derive(Debug, Clone)]
pub struct DesignOptions {
    /// Column with the time to event or censoring.
    pub time_col: String,
    /// Column with 1 for an event, 0 for censoring.
    pub event_col: String,
    /// Column naming the arm.
    pub arm_col: String,
    /// Reference arm; the first arm in sorted order when `None`.
    pub reference: Option<String>,
    /// Covariate columns, in the order given.
    pub covariates: Vec<String>,
    /// Field delimiter; detected from the header when `None`.
    pub delimiter: Option<u8>,
    /// Replacement for zero times (as in [`crate::input::InputOptions`]).
    pub zero_time: Option<f64>,
}

/// What one term of the design is.
#[derive(Debug, Clone, PartialEq)]
pub enum TermKind {
    /// Indicator of a non-reference arm.
    Arm(String),
    /// A numeric covariate, per unit.
    Numeric(String),
    /// Indicator of a level of a text covariate against its first level.
    Level(String, String),
}

/// One term (column of the design matrix).
#[derive(Debug, Clone, PartialEq)]
pub struct Term {
    /// Name in outputs: `arm_LEVEL`, `b_NAME` or `b_NAME_LEVEL`.
    pub name: String,
    /// What the term is.
    pub kind: TermKind,
}

/// One subject of the design.
#[derive(Debug, Clone, PartialEq)]
pub struct Subject {
    /// Time to event or censoring (data's unit, > 0).
    pub time: f64,
    /// Whether the event was observed.
    pub event: bool,
    /// Index of the subject's arm in [`Design::arms`].
    pub arm: usize,
    /// Values of the terms, in the order of [`Design::terms`].
    pub x: Vec<f64>,
}

/// Subjects and terms of a model across arms.
#[derive(Debug, Clone)]
pub struct Design {
    /// Arm levels in sorted order.
    pub arms: Vec<String>,
    /// Index of the reference arm in `arms`.
    pub reference: usize,
    /// Terms: arm indicators first, then covariates in the order given.
    pub terms: Vec<Term>,
    /// Subjects in file order.
    pub subjects: Vec<Subject>,
}

impl Design {
    /// Number of terms.
    pub fn p(&self) -> usize {
        self.terms.len()
    }

    /// Whether the design has covariates besides the arm.
    pub fn has_covariates(&self) -> bool {
        self.terms
            .iter()
            .any(|t| !matches!(t.kind, TermKind::Arm(_)))
    }
}

/// A covariate as the user names it: a numeric column, or a text column with its levels in
/// sorted order (the first is the reference level, without a term of its own).
#[derive(Debug, Clone, PartialEq)]
pub struct Covariate {
    /// Column name.
    pub name: String,
    /// Levels of a text covariate; `None` for a numeric one.
    pub levels: Option<Vec<String>>,
}

/// A covariate column while reading: numeric values, or text values mapped to levels later.
enum Column {
    Numeric(Vec<f64>),
    Text(Vec<String>),
}

/// Reads the design from a time-to-event CSV's bytes.
pub fn parse(file: &str, bytes: &[u8], options: &DesignOptions) -> Result<Design> {
    parse_with_covariates(file, bytes, options).map(|(design, _)| design)
}

/// Reads the design and describes its covariates (the levels of text covariates, which the
/// terms alone do not name in full), for curves that fix covariates by name and level.
pub fn parse_with_covariates(
    file: &str,
    bytes: &[u8],
    options: &DesignOptions,
) -> Result<(Design, Vec<Covariate>)> {
    let mut reader = CsvReader::new(
        file,
        bytes,
        Settings {
            delimiter: options.delimiter,
            comments: false,
        },
    )?;
    let time_idx = reader.column(&options.time_col)?;
    let event_idx = reader.column(&options.event_col)?;
    let arm_idx = reader.column(&options.arm_col)?;
    let mut cov_idx = Vec::new();
    for name in &options.covariates {
        if name == &options.arm_col || name == &options.time_col || name == &options.event_col {
            return Err(Error::Usage(format!(
                "--covariates names \"{}\", which is already the time, event or arm column",
                shown(name)
            )));
        }
        if options.covariates.iter().filter(|c| *c == name).count() > 1 {
            return Err(Error::Usage(format!(
                "--covariates names \"{}\" twice",
                shown(name)
            )));
        }
        cov_idx.push(reader.column(name)?);
    }
    let mut times = Vec::new();
    let mut events = Vec::new();
    let mut arm_text = Vec::new();
    let mut columns: Vec<Option<Column>> = cov_idx.iter().map(|_| None).collect();
    // Line where each covariate's type was decided, for the error message.
    let mut typed_at = vec![0u64; cov_idx.len()];
    while let Some(row) = reader.next_row()? {
        let mut time = row.number(time_idx)?;
        if time < 0.0 {
            return Err(row.error(time_idx, format!("time {time} is negative")));
        }
        if time == 0.0 {
            match options.zero_time {
                Some(z) => time = z,
                None => {
                    return Err(row.error(
                        time_idx,
                        "time is 0; survival times must be positive (add --zero-time VALUE)",
                    ))
                }
            }
        }
        let event = match row.text(event_idx)? {
            "1" | "1.0" => true,
            "0" | "0.0" => false,
            other => {
                return Err(row.error(
                    event_idx,
                    format!(
                        "event must be 1 (event) or 0 (censored), got \"{}\"",
                        shown(other)
                    ),
                ))
            }
        };
        let arm = row.text(arm_idx)?;
        if arm.is_empty() {
            return Err(row.error(arm_idx, "arm is empty"));
        }
        times.push(time);
        events.push(event);
        arm_text.push(arm.to_string());
        for (k, &idx) in cov_idx.iter().enumerate() {
            let text = row.text(idx)?;
            if text.is_empty() {
                return Err(row.error(
                    idx,
                    format!(
                        "covariate \"{}\" is missing; a model with covariates needs a value in every row (drop or impute the row)",
                        shown(&options.covariates[k])
                    ),
                ));
            }
            match &mut columns[k] {
                None => {
                    typed_at[k] = row.line();
                    columns[k] = Some(match parse_number(text) {
                        Ok(v) => Column::Numeric(vec![v]),
                        Err(_) => Column::Text(vec![text.to_string()]),
                    });
                }
                Some(Column::Numeric(values)) => match parse_number(text) {
                    Ok(v) => values.push(v),
                    Err(why) => {
                        return Err(row.error(
                            idx,
                            format!(
                                "covariate \"{}\" is numeric (from line {}), but {why}",
                                shown(&options.covariates[k]),
                                typed_at[k]
                            ),
                        ))
                    }
                },
                Some(Column::Text(values)) => values.push(text.to_string()),
            }
        }
    }
    if times.is_empty() {
        return Err(reader.no_rows());
    }
    let arms: Vec<String> = arm_text
        .iter()
        .cloned()
        .collect::<BTreeSet<_>>()
        .into_iter()
        .collect();
    if arms.len() < 2 {
        return Err(Error::input(
            file,
            format!(
                "--effects needs at least two arms in column \"{}\", found one",
                shown(&options.arm_col)
            ),
        ));
    }
    let reference = match &options.reference {
        Some(level) => arms.iter().position(|a| a == level).ok_or_else(|| {
            Error::Usage(format!(
                "--reference \"{}\" is not an arm of the data (arms: {})",
                shown(level),
                arms.join(", ")
            ))
        })?,
        None => 0,
    };
    let mut terms = Vec::new();
    for (i, arm) in arms.iter().enumerate() {
        if i != reference {
            terms.push(Term {
                name: format!("arm_{arm}"),
                kind: TermKind::Arm(arm.clone()),
            });
        }
    }
    // Per covariate: the levels (text) or nothing (numeric).
    let mut levels: Vec<Option<Vec<String>>> = Vec::new();
    for (k, column) in columns.iter().enumerate() {
        let name = &options.covariates[k];
        match column {
            Some(Column::Numeric(_)) | None => {
                terms.push(Term {
                    name: format!("b_{name}"),
                    kind: TermKind::Numeric(name.clone()),
                });
                levels.push(None);
            }
            Some(Column::Text(values)) => {
                let lv: Vec<String> = values
                    .iter()
                    .cloned()
                    .collect::<BTreeSet<_>>()
                    .into_iter()
                    .collect();
                if lv.len() < 2 {
                    return Err(Error::input(
                        file,
                        format!(
                            "covariate \"{}\" has a single value (\"{}\") and cannot be estimated",
                            shown(name),
                            shown(&lv[0])
                        ),
                    ));
                }
                for level in &lv[1..] {
                    terms.push(Term {
                        name: format!("b_{name}_{level}"),
                        kind: TermKind::Level(name.clone(), level.clone()),
                    });
                }
                levels.push(Some(lv));
            }
        }
    }
    let mut subjects = Vec::with_capacity(times.len());
    for i in 0..times.len() {
        let arm = arms.binary_search(&arm_text[i]).unwrap_or(0);
        let mut x = Vec::with_capacity(terms.len());
        for a in 0..arms.len() {
            if a != reference {
                x.push(if a == arm { 1.0 } else { 0.0 });
            }
        }
        for (k, column) in columns.iter().enumerate() {
            match (column, &levels[k]) {
                (Some(Column::Numeric(v)), _) => x.push(v[i]),
                (Some(Column::Text(v)), Some(lv)) => {
                    for level in &lv[1..] {
                        x.push(if &v[i] == level { 1.0 } else { 0.0 });
                    }
                }
                _ => {}
            }
        }
        subjects.push(Subject {
            time: times[i],
            event: events[i],
            arm,
            x,
        });
    }
    let covariates = options
        .covariates
        .iter()
        .zip(levels)
        .map(|(name, levels)| Covariate {
            name: name.clone(),
            levels,
        })
        .collect();
    Ok((
        Design {
            arms,
            reference,
            terms,
            subjects,
        },
        covariates,
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn options(covariates: &[&str]) -> DesignOptions {
        DesignOptions {
            time_col: "time".into(),
            event_col: "event".into(),
            arm_col: "arm".into(),
            reference: None,
            covariates: covariates.iter().map(|s| s.to_string()).collect(),
            delimiter: None,
            zero_time: None,
        }
    }

    #[test]
    fn builds_indicators_and_numeric_terms() {
        let text = "time,event,arm,age,stage\n1,1,B,50,II\n2,0,A,61.5,I\n3,1,C,40,III\n";
        let d = parse("t.csv", text.as_bytes(), &options(&["age", "stage"])).unwrap();
        assert_eq!(d.arms, vec!["A", "B", "C"]);
        let names: Vec<&str> = d.terms.iter().map(|t| t.name.as_str()).collect();
        assert_eq!(
            names,
            vec!["arm_B", "arm_C", "b_age", "b_stage_II", "b_stage_III"]
        );
        assert_eq!(d.subjects[0].x, vec![1.0, 0.0, 50.0, 1.0, 0.0]);
        assert_eq!(d.subjects[1].x, vec![0.0, 0.0, 61.5, 0.0, 0.0]);
        assert_eq!(d.subjects[2].x, vec![0.0, 1.0, 40.0, 0.0, 1.0]);
    }

    #[test]
    fn reference_level_moves_the_indicators() {
        let text = "time,event,arm\n1,1,B\n2,0,A\n";
        let mut o = options(&[]);
        o.reference = Some("B".into());
        let d = parse("t.csv", text.as_bytes(), &o).unwrap();
        assert_eq!(d.terms[0].name, "arm_A");
        assert_eq!(d.subjects[1].x, vec![1.0]);
        o.reference = Some("Z".into());
        let err = parse("t.csv", text.as_bytes(), &o).unwrap_err().to_string();
        assert!(err.contains("--reference \"Z\""), "{err}");
    }

    #[test]
    fn bad_covariate_values_name_line_and_column() {
        let text = "time,event,arm,age\n1,1,B,50\n2,0,A,sixty\n";
        let err = parse("t.csv", text.as_bytes(), &options(&["age"]))
            .unwrap_err()
            .to_string();
        assert!(
            err.starts_with("t.csv line 3 column 4 (\"age\"): covariate \"age\" is numeric"),
            "{err}"
        );
        let text = "time,event,arm,age\n1,1,B,50\n2,0,A,\n";
        let err = parse("t.csv", text.as_bytes(), &options(&["age"]))
            .unwrap_err()
            .to_string();
        assert!(
            err.starts_with("t.csv line 3 column 4 (\"age\"): covariate \"age\" is missing"),
            "{err}"
        );
        let text = "time,event,arm,age\n1,1,B,50\n2,0,A,1,5\n";
        let err = parse("t.csv", text.as_bytes(), &options(&["age"]));
        assert!(err.is_err());
    }
}
