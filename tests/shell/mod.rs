//! Helpers shared by the command-line tests: the built binary run in a given folder, and the
//! names of what a folder holds (to check that exactly the expected files, or none, were
//! written).
#![allow(dead_code)]

use assert_cmd::Command;
use std::path::Path;

/// The `tunnelcast` binary, run with `dir` as its working folder and without
/// `SOURCE_DATE_EPOCH` (a build environment may set it; a test that wants it sets it again).
pub fn tunnelcast(dir: &Path) -> Command {
    let mut cmd = Command::cargo_bin("tunnelcast").unwrap();
    cmd.current_dir(dir).env_remove("SOURCE_DATE_EPOCH");
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

/// A CSV file written by the tool, read strictly: the `csv` crate with no comment character
/// and every row as long as the header (RFC 4180, RFC Editor 2005: header first, CRLF after
/// each record), and its descriptor beside it checked against the file ([`read_descriptor`]).
/// Returns the header and the records.
pub fn read_csv_records(path: &Path) -> (Vec<String>, Vec<csv::StringRecord>) {
    let bytes = std::fs::read(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let (header, records) = parse_csv_strictly(path, &bytes);
    read_descriptor(path);
    (header, records)
}

/// Rows of a CSV file written by the tool, read as [`read_csv_records`] does and deserialised.
pub fn read_csv<T: serde::de::DeserializeOwned>(path: &Path) -> Vec<T> {
    let (header, records) = read_csv_records(path);
    let header = csv::StringRecord::from(header);
    records
        .iter()
        .map(|r| {
            r.deserialize(Some(&header))
                .unwrap_or_else(|e| panic!("{}: {e}", path.display()))
        })
        .collect()
}

/// The header and records of CSV bytes, refusing comment lines, ragged rows and LF-only line ends.
fn parse_csv_strictly(path: &Path, bytes: &[u8]) -> (Vec<String>, Vec<csv::StringRecord>) {
    let shown = path.display();
    assert!(
        !bytes.starts_with(b"#"),
        "{shown} starts with a comment line"
    );
    // RFC 4180: every record ends in CRLF (the last one may not; ours does).
    assert!(bytes.ends_with(b"\r\n"), "{shown} does not end in CRLF");
    let lone_lf = bytes
        .iter()
        .enumerate()
        .filter(|(i, b)| **b == b'\n' && (*i == 0 || bytes[i - 1] != b'\r'))
        .count();
    // A line feed without a carriage return may only sit inside a quoted field.
    let quoted_lf = bytes
        .split(|b| *b == b'"')
        .skip(1)
        .step_by(2)
        .flatten()
        .filter(|b| **b == b'\n')
        .count();
    assert_eq!(lone_lf, quoted_lf, "{shown} has line ends other than CRLF");
    let mut reader = csv::ReaderBuilder::new()
        .comment(None)
        .flexible(false)
        .has_headers(true)
        .from_reader(bytes);
    let header: Vec<String> = reader
        .headers()
        .unwrap_or_else(|e| panic!("{shown}: {e}"))
        .iter()
        .map(str::to_string)
        .collect();
    let records = reader
        .records()
        .map(|r| r.unwrap_or_else(|e| panic!("{shown}: {e}")))
        .collect();
    (header, records)
}

/// The descriptor `NAME.resource.json` of the CSV file at `csv_path`, checked with
/// [`check_resource`] against the file.
pub fn read_descriptor(csv_path: &Path) -> serde_json::Value {
    let stem = csv_path.file_stem().unwrap().to_string_lossy().into_owned();
    let path = csv_path.with_file_name(format!("{stem}.resource.json"));
    let text = std::fs::read(&path).unwrap_or_else(|e| {
        panic!(
            "{} has no descriptor {}: {e}",
            csv_path.display(),
            path.display()
        )
    });
    let resource: serde_json::Value = serde_json::from_slice(&text).unwrap();
    check_resource(&resource, csv_path.parent().unwrap());
    resource
}

/// Whether `name` matches the v1 name pattern `^([-a-z0-9._/])+$`.
fn v1_name(name: &str) -> bool {
    !name.is_empty()
        && name
            .chars()
            .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || "-._/".contains(c))
}

/// Checks a Tabular Data Resource descriptor against the required and typed properties of the
/// Frictionless Data specifications v1 (Data Resource, Tabular Data Resource, Table Schema,
/// CSV Dialect 1.2; Frictionless Data, 2017, from memory), then against the CSV file it names
/// in `folder`: `bytes` is the file's size, the fields are the header in order, and every cell
/// reads as its field's type (`integer`, `number` with `.` as the decimal mark, `string`;
/// the empty string is the only missing value).
pub fn check_resource(resource: &serde_json::Value, folder: &Path) {
    use serde_json::Value;
    let obj = resource.as_object().expect("a descriptor is a JSON object");
    // Data Resource: `name` (pattern) and `path` required; `path` a relative POSIX path.
    let name = obj["name"].as_str().expect("name is a string");
    assert!(v1_name(name), "name {name:?} breaks the v1 pattern");
    let path = obj["path"].as_str().expect("path is a string");
    assert!(
        !path.is_empty()
            && !path.starts_with(['/', '.', '~'])
            && !path.contains("..")
            && !path.contains('\\'),
        "path {path:?} is not a relative POSIX path"
    );
    assert!(!obj.contains_key("data"), "path and data are exclusive");
    // Tabular Data Resource: this profile, a schema.
    assert_eq!(obj["profile"], "tabular-data-resource");
    assert_eq!(obj["format"], "csv");
    assert_eq!(obj["mediatype"], "text/csv");
    assert_eq!(obj["encoding"], "utf-8");
    for key in ["title", "description"] {
        assert!(
            obj.get(key).is_none_or(Value::is_string),
            "{key} must be a string"
        );
    }
    // CSV Dialect 1.2: only its own properties, each of its type.
    let dialect = obj["dialect"].as_object().expect("dialect is an object");
    for (key, value) in dialect {
        let ok = match key.as_str() {
            "delimiter" | "quoteChar" | "escapeChar" | "commentChar" => {
                value.as_str().is_some_and(|s| s.chars().count() == 1)
            }
            "lineTerminator" | "nullSequence" => value.is_string(),
            "doubleQuote" | "skipInitialSpace" | "header" | "caseSensitiveHeader" => {
                value.is_boolean()
            }
            "csvddfVersion" => value.is_number(),
            _ => false,
        };
        assert!(ok, "dialect property {key}: {value}");
    }
    assert!(
        dialect.get("commentChar").is_none(),
        "CSV files have no comments"
    );
    assert_eq!(dialect["delimiter"], ",");
    assert_eq!(dialect["lineTerminator"], "\r\n");
    assert_eq!(dialect["header"], true);
    // Table Schema: fields with unique names and v1 types; missingValues strings.
    let schema = obj["schema"].as_object().expect("schema is an object");
    let fields = schema["fields"].as_array().expect("fields is an array");
    let types = [
        "string",
        "number",
        "integer",
        "boolean",
        "object",
        "array",
        "date",
        "time",
        "datetime",
        "year",
        "yearmonth",
        "duration",
        "geopoint",
        "geojson",
        "any",
    ];
    let mut names: Vec<String> = Vec::new();
    let mut kinds: Vec<String> = Vec::new();
    for field in fields {
        let f = field.as_object().expect("a field is an object");
        let n = f["name"]
            .as_str()
            .expect("field name is a string")
            .to_string();
        assert!(!names.contains(&n), "field {n} twice");
        let t = f.get("type").and_then(Value::as_str).unwrap_or("string");
        assert!(types.contains(&t), "field {n}: type {t}");
        assert!(f.get("description").is_none_or(Value::is_string));
        names.push(n);
        kinds.push(t.to_string());
    }
    let missing = schema["missingValues"]
        .as_array()
        .expect("missingValues is an array");
    assert_eq!(missing, &vec![Value::from("")]);
    assert!(obj["tunnelcast"].is_object(), "provenance missing");

    // Against the file.
    let csv_path = folder.join(path);
    let bytes = std::fs::read(&csv_path).unwrap_or_else(|e| panic!("{path}: {e}"));
    assert_eq!(
        obj["bytes"].as_u64(),
        Some(bytes.len() as u64),
        "{path}: bytes"
    );
    let (header, records) = parse_csv_strictly(&csv_path, &bytes);
    assert_eq!(names, header, "{path}: fields against the header");
    for (i, record) in records.iter().enumerate() {
        for (cell, kind) in record.iter().zip(&kinds) {
            let ok = cell.is_empty()
                || match kind.as_str() {
                    "integer" => cell.parse::<i64>().is_ok(),
                    "number" => plain_number(cell),
                    _ => true,
                };
            assert!(ok, "{path} row {}: {cell:?} is not a {kind}", i + 1);
        }
    }
}

/// A number as Table Schema v1 reads it by default: optional sign, digits with `.` as the
/// decimal mark, an optional exponent; no group separators.
fn plain_number(text: &str) -> bool {
    let body = text.strip_prefix('-').unwrap_or(text);
    let (mantissa, exponent) = match body.split_once(['e', 'E']) {
        Some((m, e)) => (m, Some(e.strip_prefix('-').unwrap_or(e))),
        None => (body, None),
    };
    let digits = |s: &str| !s.is_empty() && s.bytes().all(|b| b.is_ascii_digit());
    let mantissa_ok = match mantissa.split_once('.') {
        Some((a, b)) => digits(a) && digits(b),
        None => digits(mantissa),
    };
    mantissa_ok && exponent.is_none_or(digits) && text.parse::<f64>().is_ok()
}

/// Checks `datapackage.json` in `folder` (Tabular Data Package v1: a `resources` array of at
/// least one Tabular Data Resource, unique names, the v1 name pattern) and each resource
/// against its file and its own `NAME.resource.json`; returns the package.
pub fn read_package(folder: &Path) -> serde_json::Value {
    let text = std::fs::read(folder.join("datapackage.json")).unwrap();
    let package: serde_json::Value = serde_json::from_slice(&text).unwrap();
    assert_eq!(package["profile"], "tabular-data-package");
    let name = package["name"].as_str().expect("package name");
    assert!(v1_name(name), "package name {name:?}");
    if let Some(created) = package.get("created") {
        let c = created.as_str().expect("created is text");
        assert!(
            c.len() == 20 && c.ends_with('Z') && &c[10..11] == "T",
            "{c}"
        );
    }
    assert!(package["tunnelcast"].is_object());
    let resources = package["resources"].as_array().expect("resources");
    assert!(!resources.is_empty(), "a package has at least one resource");
    let mut names = Vec::new();
    for resource in resources {
        check_resource(resource, folder);
        let name = resource["name"].as_str().unwrap().to_string();
        assert!(!names.contains(&name), "resource {name} twice");
        let csv = folder.join(resource["path"].as_str().unwrap());
        assert_eq!(
            &read_descriptor(&csv),
            resource,
            "{name}: package and descriptor differ"
        );
        names.push(name);
    }
    package
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

/// Reads a CSV output strictly, as [`read_csv_records`] does, into a [`CsvFile`] of text cells.
pub fn read_csv_table(path: &Path) -> CsvFile {
    let (columns, records) = read_csv_records(path);
    let rows = records
        .iter()
        .map(|r| r.iter().map(str::to_string).collect())
        .collect();
    CsvFile { columns, rows }
}

/// Parses `report.html` as XML (it is written as well-formed XHTML with a doctype), panicking
/// with a message when it is not.
#[allow(dead_code)]
pub fn parse_report(html: &str) -> roxmltree::Document<'_> {
    roxmltree::Document::parse_with_options(
        html,
        roxmltree::ParsingOptions {
            allow_dtd: true,
            ..Default::default()
        },
    )
    .expect("report.html is well-formed")
}
