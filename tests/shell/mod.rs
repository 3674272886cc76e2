//! Helpers shared by the command-line tests: the built binary run in a given folder, and the
//! names of what a folder holds (to check that exactly the expected files, or none, were
//! written).
#![allow(dead_code)]

use assert_cmd::Command;
use std::path::Path;

/// The `tunnelcast` binary, run with `dir` as its working folder.
pub fn tunnelcast(dir: &Path) -> Command {
    let mut cmd = Command::cargo_bin("tunnelcast").unwrap();
    cmd.current_dir(dir);
    cmd
}

/// Names of the files and folders in `dir`, sorted.
pub fn listing(dir: &Path) -> Vec<String> {
    let mut names: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    names
}

/// A JSON output of a table-writing command (`tunnels`, `run`), read back strictly.
#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TableFile {
    pub metadata: std::collections::BTreeMap<String, String>,
    pub tables: Vec<JsonTable>,
}

/// One table of a [`TableFile`].
#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct JsonTable {
    pub name: String,
    pub columns: Vec<String>,
    pub rows: Vec<Vec<serde_json::Value>>,
}

/// Reads a JSON table file written by the tool.
pub fn read_table(path: &Path) -> TableFile {
    serde_json::from_slice(&std::fs::read(path).unwrap()).unwrap()
}

/// The text of a CSV output from its header row on: leading lines starting with `#` (a comment
/// block, in formats that have one) are skipped, so the tests read plain RFC 4180 files too.
pub fn csv_body(text: &str) -> &str {
    let mut rest = text;
    while rest.starts_with('#') {
        rest = rest.split_once('\n').map_or("", |(_, after)| after);
    }
    rest
}

/// A CSV output read back by the `csv` crate's strict reader: every row must have as many
/// fields as the header (a ragged file is an error, not a shorter row).
pub struct CsvFile {
    /// Header row.
    pub columns: Vec<String>,
    /// Data rows, as text.
    pub rows: Vec<Vec<String>>,
}

impl CsvFile {
    /// Index of column `name` (panics if the file has none).
    pub fn column(&self, name: &str) -> usize {
        self.columns
            .iter()
            .position(|c| c == name)
            .unwrap_or_else(|| panic!("no column {name} in {:?}", self.columns))
    }

    /// The value of column `name` in row `row`, as a number (NaN if empty).
    pub fn number(&self, row: usize, name: &str) -> f64 {
        let text = &self.rows[row][self.column(name)];
        if text.is_empty() {
            f64::NAN
        } else {
            text.parse()
                .unwrap_or_else(|_| panic!("{name} row {row}: {text:?} is not a number"))
        }
    }

    /// Every row as numbers (NaN for empty cells).
    pub fn numbers(&self) -> Vec<Vec<f64>> {
        self.rows
            .iter()
            .map(|r| {
                r.iter()
                    .map(|t| {
                        if t.is_empty() {
                            f64::NAN
                        } else {
                            t.parse().unwrap()
                        }
                    })
                    .collect()
            })
            .collect()
    }
}

/// Reads a CSV output strictly (see [`CsvFile`]), skipping a leading `#` block.
pub fn read_csv(path: &Path) -> CsvFile {
    let text = std::fs::read_to_string(path).unwrap();
    let mut reader = csv::Reader::from_reader(csv_body(&text).as_bytes());
    let columns = reader
        .headers()
        .unwrap()
        .iter()
        .map(str::to_string)
        .collect();
    let rows = reader
        .records()
        .map(|r| {
            r.unwrap_or_else(|e| panic!("{}: {e}", path.display()))
                .iter()
                .map(str::to_string)
                .collect()
        })
        .collect();
    CsvFile { columns, rows }
}

/// Reads a CSV output's rows into `T` (serde), skipping a leading `#` block.
pub fn read_csv_rows<T: serde::de::DeserializeOwned>(path: &Path) -> Vec<T> {
    let text = std::fs::read_to_string(path).unwrap();
    csv::Reader::from_reader(csv_body(&text).as_bytes())
        .deserialize()
        .map(|r| r.unwrap_or_else(|e| panic!("{}: {e}", path.display())))
        .collect()
}
