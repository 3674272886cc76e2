//! Frictionless Data descriptors of the CSV files the tool writes. A CSV file holds only its
//! header and rows; `NAME.resource.json` beside it is a Tabular Data Resource saying what each
//! column is, its type and unit, and where the numbers came from (the document's metadata
//! under the custom property `tunnelcast`). `run` gathers its folder's resources into one
//! Data Package, `datapackage.json`.
//!
//! Specifications followed: Frictionless Data v1 (2017): Data Resource, Tabular Data Resource,
//! Data Package, Tabular Data Package, Table Schema and CSV Dialect (1.2). v1 allows properties
//! beyond the specified ones; ours all go under one property named `tunnelcast` (on the resource,
//! the package and a field), a name no version of the specifications uses.

use super::{unique_keys, Cell, Document, Table};
use crate::units::TimeUnit;
use serde::ser::SerializeMap;
use serde::{Serialize, Serializer};

/// The CSV layout every CSV file of the tool has (CSV Dialect 1.2): RFC 4180, comma, CRLF,
/// double quotes doubled inside quoted fields, a header row, no comment lines.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(rename_all = "camelCase")]
pub struct Dialect {
    /// Version of the CSV Dialect specification.
    pub csvddf_version: f64,
    /// Field delimiter.
    pub delimiter: &'static str,
    /// Record terminator.
    pub line_terminator: &'static str,
    /// Quote character.
    pub quote_char: &'static str,
    /// A quote inside a quoted field is written twice.
    pub double_quote: bool,
    /// Spaces after a delimiter belong to the field.
    pub skip_initial_space: bool,
    /// The first row is the header.
    pub header: bool,
}

/// [`Dialect`] of the tool's CSV files.
pub const CSV_DIALECT: Dialect = Dialect {
    csvddf_version: 1.2,
    delimiter: ",",
    line_terminator: "\r\n",
    quote_char: "\"",
    double_quote: true,
    skip_initial_space: false,
    header: true,
};

/// One column of a Table Schema.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Field {
    /// Column name, as in the header row.
    pub name: String,
    /// Table Schema type: `integer`, `number` or `string`.
    #[serde(rename = "type")]
    pub field_type: &'static str,
    /// What the column holds.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub description: Option<String>,
    /// Our property: the column's unit, when it has one.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub tunnelcast: Option<FieldUnit>,
}

/// The `tunnelcast` property of a field.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FieldUnit {
    /// Unit of the column's values (`days`, `weeks`, `months`, `years`).
    pub unit: String,
}

/// A Table Schema.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(rename_all = "camelCase")]
pub struct Schema {
    /// The columns, in file order.
    pub fields: Vec<Field>,
    /// Cell texts read as missing: the empty string only.
    pub missing_values: Vec<&'static str>,
}

/// Ordered key–value metadata written as a JSON object, repeated keys made unique.
#[derive(Debug, Clone, PartialEq)]
pub struct Provenance(pub Vec<(String, String)>);

impl Serialize for Provenance {
    fn serialize<S: Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        let mut map = s.serialize_map(Some(self.0.len()))?;
        for (k, v) in &self.0 {
            map.serialize_entry(k, v)?;
        }
        map.end()
    }
}

/// A Tabular Data Resource descriptor of one CSV file.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Resource {
    /// Always `tabular-data-resource`.
    pub profile: &'static str,
    /// Identifier: the file name without its extension, lower case, `[-a-z0-9._/]` only.
    pub name: String,
    /// The CSV file's name, relative to the descriptor (which sits beside it).
    pub path: String,
    /// What the table is.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub description: Option<String>,
    /// Always `csv`.
    pub format: &'static str,
    /// Always `text/csv`.
    pub mediatype: &'static str,
    /// Always `utf-8`.
    pub encoding: &'static str,
    /// Size of the CSV file in bytes.
    pub bytes: u64,
    /// How the file is laid out.
    pub dialect: Dialect,
    /// The columns.
    pub schema: Schema,
    /// Our property: the document's metadata (tool version, inputs and their SHA-256, family,
    /// parameters, units, cycle, adjustments, seed, warnings, caution), in order.
    pub tunnelcast: Provenance,
}

/// A Tabular Data Package descriptor: the CSV resources of one output folder.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Package {
    /// Always `tabular-data-package`.
    pub profile: &'static str,
    /// Identifier, lower case, `[-a-z0-9._/]` only.
    pub name: String,
    /// Human title.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub title: Option<String>,
    /// When the package was made: only from `SOURCE_DATE_EPOCH` (RFC 3339), never the clock.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub created: Option<String>,
    /// What the package is.
    pub description: String,
    /// The resources, each as its own `NAME.resource.json`.
    pub resources: Vec<Resource>,
    /// Our property: the metadata the package's tables share.
    pub tunnelcast: Provenance,
}

/// A Data Package or Data Resource `name`: lower case, characters outside `[-a-z0-9._/]`
/// replaced by `-` (the v1 pattern), `data` when nothing is left.
pub fn identifier(text: &str) -> String {
    let name: String = text
        .chars()
        .map(|c| {
            let c = c.to_ascii_lowercase();
            if c.is_ascii_lowercase() || c.is_ascii_digit() || "-._/".contains(c) {
                c
            } else {
                '-'
            }
        })
        .collect();
    if name.is_empty() {
        "data".into()
    } else {
        name
    }
}

/// The resource descriptor of `document`'s main table written as CSV to `file_name` (a bare
/// file name) of `bytes` bytes.
pub fn resource(document: &Document, file_name: &str, bytes: u64) -> Resource {
    let stem = std::path::Path::new(file_name)
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    let empty = Table {
        name: String::new(),
        columns: Vec::new(),
        rows: Vec::new(),
    };
    let table = document.tables.first().unwrap_or(&empty);
    let units = Units::of(&document.metadata);
    let fields = table
        .columns
        .iter()
        .enumerate()
        .map(|(j, column)| field(table, j, column, &units))
        .collect();
    Resource {
        profile: "tabular-data-resource",
        name: identifier(&stem),
        path: file_name.to_string(),
        description: table_description(&table.name).map(str::to_string),
        format: "csv",
        mediatype: "text/csv",
        encoding: "utf-8",
        bytes,
        dialect: CSV_DIALECT,
        schema: Schema {
            fields,
            missing_values: vec![""],
        },
        tunnelcast: Provenance(unique_keys(&document.metadata)),
    }
}

/// Pretty JSON of a descriptor, ending in a line break.
pub fn to_json(descriptor: &impl Serialize) -> crate::Result<Vec<u8>> {
    let mut bytes = serde_json::to_vec_pretty(descriptor)
        .map_err(|e| crate::Error::Computation(format!("cannot render a descriptor: {e}")))?;
    bytes.push(b'\n');
    Ok(bytes)
}

/// The units a document's columns are in, from its metadata.
struct Units {
    /// `time_unit`: times since entry, cycle bounds, rebuilt times.
    time: Option<TimeUnit>,
    /// `life_years_unit` (else `time_unit`): life-year figures of the within-cycle table.
    life_years: Option<TimeUnit>,
}

impl Units {
    fn of(metadata: &[(String, String)]) -> Units {
        let unit = |key: &str| {
            metadata
                .iter()
                .find(|(k, _)| k == key)
                .and_then(|(_, v)| v.parse::<TimeUnit>().ok())
        };
        let time = unit("time_unit");
        Units {
            time,
            life_years: unit("life_years_unit").or(time),
        }
    }
}

/// The unit a column is measured in, where it has one.
#[derive(Clone, Copy)]
enum Measure {
    /// A dimensionless number, a count or a label.
    None,
    /// Time since entry (or the data's time axis).
    Time,
    /// Life-years (the area under a survival curve).
    LifeYears,
}

/// What the catalogue knows about a column: type, description, unit.
type Known = (&'static str, String, Measure);

const INT: &str = "integer";
const NUM: &str = "number";
const TEXT: &str = "string";

/// The catalogue of the columns the tool writes, by table and column name.
fn known(table: &str, column: &str) -> Option<Known> {
    let k = |t: &'static str, d: &str, m: Measure| Some((t, d.to_string(), m));
    use Measure::{LifeYears, None as Plain, Time};
    let rebuild = table.starts_with("rebuild");
    match (table, column) {
        ("rebuilt", "time") => {
            return k(NUM, "time of the event or censoring", Time);
        }
        ("rebuilt", "event") => return k(INT, "1 = event, 0 = censored", Plain),
        // The third column of rebuilt data is named after the digitised file's arm column.
        ("rebuilt", _) => {
            return k(
                TEXT,
                "arm, as named in the digitised points file's arm column",
                Plain,
            )
        }
        ("rebuild_quality", "events") => return k(INT, "events in the rebuilt data", Plain),
        ("rebuild_quality", "censored") => {
            return k(INT, "censorings in the rebuilt data", Plain)
        }
        ("rebuild_intervals", "events") => {
            return k(INT, "events placed within the interval", Plain)
        }
        ("rebuild_intervals", "censored") => {
            return k(
                INT,
                "censorings placed within the interval (not those still at risk at the end of the curve)",
                Plain,
            )
        }
        ("rebuild_at_risk", "time") => {
            return k(NUM, "time of the published number at risk", Time)
        }
        _ => {}
    }
    if rebuild {
        return match column {
            "arm" => k(TEXT, "arm (empty when the figure has one curve)", Plain),
            "digitised_rows" => k(INT, "digitised points read (before cleaning)", Plain),
            "survival_read_as" => k(
                TEXT,
                "how the digitised survival was read: proportion or percentage",
                Plain,
            ),
            "cleaning" => k(TEXT, "what cleaning the digitised points changed", Plain),
            "patients" => k(INT, "patients in the rebuilt data", Plain),
            "events_published" => k(INT, "published total events (empty if not given)", Plain),
            "max_abs_diff" => k(
                NUM,
                "largest absolute difference in survival between a digitised point and the rebuilt Kaplan–Meier curve",
                Plain,
            ),
            "max_abs_diff_time" => k(NUM, "time of that largest difference", Time),
            "mean_abs_diff" => k(
                NUM,
                "mean absolute difference in survival over the digitised points",
                Plain,
            ),
            "at_risk_max_abs_diff" => k(
                INT,
                "largest absolute difference between published and rebuilt numbers at risk (empty without a risk table)",
                Plain,
            ),
            "published" => k(INT, "published number at risk", Plain),
            "rebuilt" => k(INT, "number at risk in the rebuilt data", Plain),
            "difference" => k(INT, "rebuilt minus published number at risk", Plain),
            "start" => k(NUM, "interval start (a risk-table time)", Time),
            "end" => k(
                NUM,
                "interval end (the next risk-table time, or the last digitised time)",
                Time,
            ),
            "at_risk_start" => k(INT, "rebuilt number at risk at the interval start", Plain),
            "published_end" => k(
                INT,
                "published number at risk at the interval end (empty for the last interval)",
                Plain,
            ),
            "rebuilt_end" => k(INT, "rebuilt number at risk at the interval end", Plain),
            "censoring_rule" => k(TEXT, "how the censoring count was settled", Plain),
            _ => None,
        };
    }
    if table == "payoff_methods" {
        return match column {
            "payoff" => k(TEXT, "payoff name, as in the payoff file", Plain),
            "method" => k(
                TEXT,
                "within-cycle method: start, end, half-cycle, trapezoid, simpson or cycle-integrated",
                Plain,
            ),
            "total" => k(
                NUM,
                "undiscounted total to the horizon for one person entering at time 0, by this method",
                Plain,
            ),
            "exact" => k(
                NUM,
                "exact undiscounted total: the rate integrated against the curve plus the one-offs",
                Plain,
            ),
            "error" => k(NUM, "total - exact", Plain),
            "rel_error" => k(NUM, "error / |exact| (empty when exact is 0)", Plain),
            "disc_total" => k(NUM, "discounted total to the horizon, by this method", Plain),
            "disc_exact" => k(NUM, "exact discounted total", Plain),
            "disc_error" => k(NUM, "disc_total - disc_exact", Plain),
            "disc_rel_error" => k(
                NUM,
                "disc_error / |disc_exact| (empty when disc_exact is 0)",
                Plain,
            ),
            _ => None,
        };
    }
    if let Some(name) = column.strip_prefix("payoff_rel_error_") {
        return k(
            NUM,
            &format!("relative error of the discounted cycle-integrated total of payoff {name} to the horizon, K-tunnel chain (the last tunnel repeating its probability and payoff) against the untruncated chain"),
            Plain,
        );
    }
    if let Some(name) = column.strip_prefix("payoff_") {
        return k(
            NUM,
            &format!("payoff {name}: expected amount accrued during the tunnel's cycle by one person present at its start (discounted within the cycle from its start); multiply by the membership at the start of the cycle, no within-cycle correction"),
            Plain,
        );
    }
    if table == "matrix" || table == "matrix_by_cause" {
        return match column {
            "from" => k(
                TEXT,
                "state a person is in at the start of the cycle",
                Plain,
            ),
            _ => k(
                NUM,
                &format!("probability of being in state {column} one cycle later"),
                Plain,
            ),
        };
    }
    if let Some(draw) = column.strip_prefix("draw_") {
        return k(NUM, &format!("p_exit of draw {draw}"), Plain);
    }
    if let Some(cause) = column.strip_prefix("p_exit_") {
        let known = match cause {
            "point" => Some("p_exit of the point estimate (the fitted parameters)"),
            "mean" => Some("mean of p_exit over the draws"),
            "pct2_5" => Some(
                "2.5th percentile of p_exit over the draws (Hyndman and Fan, 1996, definition 7)",
            ),
            "pct97_5" => Some(
                "97.5th percentile of p_exit over the draws (Hyndman and Fan, 1996, definition 7)",
            ),
            "last" => {
                Some("p_exit of the last of the K tunnel states (repeated for every later cycle)")
            }
            _ => None,
        };
        return match known {
            Some(text) => k(NUM, text, Plain),
            None => k(
                NUM,
                &format!("part of p_exit due to {cause} (the causes add up to p_exit)"),
                Plain,
            ),
        };
    }
    match column {
        "draw" => k(
            INT,
            "uncertainty draw, from 1 (the rows of one draw share one parameter set)",
            Plain,
        ),
        "entry_cycle" => k(
            INT,
            "model cycle at whose start the cohort enters tunnel 1 (0-based)",
            Plain,
        ),
        "entry_age" => k(
            NUM,
            "age at entry in years: the start age plus entry_cycle cycles",
            Plain,
        ),
        "tunnel" => k(
            INT,
            "tunnel state: cycles since entry, from 1 (the cycle of entry)",
            Plain,
        ),
        "t_start" => k(NUM, "start of the tunnel's cycle, as time since entry", Time),
        "t_end" => k(NUM, "end of the tunnel's cycle, as time since entry", Time),
        "surv_start" => k(
            NUM,
            "share of an entering cohort still in the chain at t_start",
            Plain,
        ),
        "surv_end" => k(
            NUM,
            "share of an entering cohort still in the chain at t_end",
            Plain,
        ),
        "p_exit" => k(
            NUM,
            "probability of leaving the chain during the cycle, for a person in this tunnel at its start: 1 - S(t_end)/S(t_start)",
            Plain,
        ),
        "p_next" => k(
            NUM,
            "probability of moving on to the next tunnel (1 - p_exit); in the last tunnel, of staying in it",
            Plain,
        ),
        "floor_share" => k(
            NUM,
            "share of the cycle in which the background hazard is the one used (floor mode)",
            Plain,
        ),
        "count" => k(
            INT,
            "number of tunnel states K of the truncated chain",
            Plain,
        ),
        "max_surv_gap" => k(
            NUM,
            "largest absolute survival difference at cycle boundaries up to the horizon, K-tunnel chain against the untruncated chain",
            Plain,
        ),
        "ly_rel_error" => k(
            NUM,
            "relative difference in life-years to the horizon (trapezoid rule), K-tunnel chain against the untruncated chain",
            Plain,
        ),
        "method" => k(
            TEXT,
            "within-cycle method: start, end, half-cycle, trapezoid or simpson",
            Plain,
        ),
        "life_years" => k(
            NUM,
            "life-years to the horizon from the cycle-boundary survival, by this method",
            LifeYears,
        ),
        "exact" => k(NUM, "exact integral of survival to the horizon", LifeYears),
        "error" => k(NUM, "life_years - exact", LifeYears),
        "rel_error" => k(NUM, "error / exact", Plain),
        "discounted_life_years" => k(
            NUM,
            "discounted life-years to the horizon from the cycle-boundary survival, by this method",
            LifeYears,
        ),
        "discounted_exact" => k(
            NUM,
            "exact integral of discounted survival to the horizon",
            LifeYears,
        ),
        "discounted_error" => k(
            NUM,
            "discounted_life_years - discounted_exact",
            LifeYears,
        ),
        "discounted_rel_error" => k(NUM, "discounted_error / discounted_exact", Plain),
        _ => None,
    }
}

/// What a table is, by its name.
fn table_description(table: &str) -> Option<&'static str> {
    Some(match table {
        "tunnels" => "Tunnel table, long layout: one row per tunnel state (tunnel k covers cycle k since entry; the last tunnel repeats its own probability for every later cycle).",
        "matrix" => "Transition matrix over the tunnel states and exit: one row per state a person is in at the start of a cycle, one column per state one cycle later; rows sum to 1.",
        "matrix_by_cause" => "Transition matrix over the tunnel states and one exit state per cause: one row per state a person is in at the start of a cycle, one column per state one cycle later; rows sum to 1.",
        "draws" => "Uncertainty draws of the tunnel table, long layout: one row per draw and tunnel state.",
        "draws_wide" => "Uncertainty draws of the tunnel table, wide layout: one row per tunnel state, p_exit of draw d in column draw_d.",
        "summary" | "draws_summary" => "Summary of the uncertainty draws: per tunnel state, p_exit of the point estimate and its mean and 2.5% and 97.5% percentiles over the draws.",
        "payoffs" => "Payoffs per tunnel state (beside a matrix layout): one row per tunnel state, one payoff_NAME column per payoff.",
        "payoff_methods" => "Payoff totals to the horizon by within-cycle method, beside the exact integral, undiscounted and discounted: one row per payoff and method.",
        "truncation" => "Truncation table: for each number K of tunnel states, how far the K-tunnel chain is from the untruncated chain up to the horizon.",
        "within_cycle" => "Within-cycle table: life-years to the horizon from cycle-boundary survival by each method, beside the exact integral of the curve.",
        "rebuild_quality" => "How closely the rebuilt data reproduce the digitised figure, one row per arm.",
        "rebuild_at_risk" => "Published numbers at risk against the rebuilt data's, one row per arm and risk-table time.",
        "rebuild_intervals" => "The intervals of the reconstruction (between risk-table times), one row per arm and interval.",
        "rebuilt" => "Patient-level data rebuilt from a digitised Kaplan–Meier figure (Guyot et al., 2012): one row per patient, an approximation of the trial's data.",
        _ => return None,
    })
}

/// The Table Schema field of column `j` of `table`: from the catalogue, else typed by the
/// column's cells (a column the catalogue does not know gets no description).
fn field(table: &Table, j: usize, column: &str, units: &Units) -> Field {
    let (field_type, description, measure) = match known(&table.name, column) {
        Some((t, d, m)) => (t, Some(d), m),
        None => (cell_type(table, j), None, Measure::None),
    };
    let unit = match measure {
        Measure::None => None,
        Measure::Time => Some(units.time),
        Measure::LifeYears => Some(units.life_years),
    };
    let description = match (description, unit) {
        (Some(d), Some(Some(u))) => Some(format!("{d}, in {u}")),
        (Some(d), Some(None)) if table.name == "rebuilt" || table.name.starts_with("rebuild") => {
            Some(format!("{d}, in the digitised figure's time unit"))
        }
        (d, _) => d,
    };
    Field {
        name: column.to_string(),
        field_type,
        description,
        tunnelcast: unit.flatten().map(|u| FieldUnit {
            unit: u.name().to_string(),
        }),
    }
}

/// The Table Schema type the cells of column `j` need: `string` if any is text, else
/// `integer` if every one is whole, else `number` (also for a column without cells).
fn cell_type(table: &Table, j: usize) -> &'static str {
    let mut kind = None;
    for cell in table.rows.iter().filter_map(|r| r.get(j)) {
        kind = match (kind, cell) {
            (_, Cell::Text(_)) => return TEXT,
            (None | Some(INT), Cell::Int(_)) => Some(INT),
            (_, Cell::Number(_)) | (Some(NUM), Cell::Int(_)) => Some(NUM),
            (k, _) => k,
        };
    }
    kind.unwrap_or(NUM)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn document(table: &str, columns: &[&str], rows: Vec<Vec<Cell>>) -> Document {
        Document {
            metadata: vec![
                ("tool_version".into(), "0.1.0".into()),
                ("time_unit".into(), "months".into()),
                ("warning".into(), "first".into()),
                ("warning".into(), "second".into()),
            ],
            tables: vec![Table {
                name: table.into(),
                columns: columns.iter().map(|c| c.to_string()).collect(),
                rows,
            }],
        }
    }

    #[test]
    fn fields_follow_the_header_with_types_and_units() {
        let doc = document(
            "tunnels",
            &[
                "tunnel",
                "t_start",
                "p_exit",
                "p_exit_background",
                "mystery",
                "label",
            ],
            vec![vec![
                Cell::Int(1),
                Cell::Number(0.0),
                Cell::Number(0.1),
                Cell::Number(0.01),
                Cell::Int(3),
                Cell::Text("a".into()),
            ]],
        );
        let r = resource(&doc, "My Tunnels.csv", 120);
        assert_eq!(r.name, "my-tunnels");
        assert_eq!(r.path, "My Tunnels.csv");
        let names: Vec<&str> = r.schema.fields.iter().map(|f| f.name.as_str()).collect();
        assert_eq!(names, doc.tables[0].columns);
        let types: Vec<&str> = r.schema.fields.iter().map(|f| f.field_type).collect();
        assert_eq!(
            types,
            ["integer", "number", "number", "number", "integer", "string"]
        );
        let t_start = &r.schema.fields[1];
        assert_eq!(t_start.tunnelcast.as_ref().unwrap().unit, "months");
        assert!(t_start.description.as_ref().unwrap().ends_with("in months"));
        assert!(r.schema.fields[2].tunnelcast.is_none());
        assert!(r.schema.fields[4].description.is_none());
        // Repeated metadata keys stay apart.
        let keys: Vec<&str> = r.tunnelcast.0.iter().map(|(k, _)| k.as_str()).collect();
        assert_eq!(keys, ["tool_version", "time_unit", "warning", "warning_2"]);
        let json: serde_json::Value = serde_json::from_slice(&to_json(&r).unwrap()).unwrap();
        assert_eq!(json["profile"], "tabular-data-resource");
        assert_eq!(json["dialect"]["lineTerminator"], "\r\n");
        assert_eq!(json["tunnelcast"]["warning_2"], "second");
    }

    #[test]
    fn identifiers_keep_to_the_v1_pattern() {
        // Data Resource v1: name matches ^([-a-z0-9._/])+$ (Frictionless Data, 2017, from memory).
        assert_eq!(identifier("draws_Summary.v2"), "draws_summary.v2");
        assert_eq!(identifier("résumé 1"), "r-sum--1");
        assert_eq!(identifier(""), "data");
    }

    #[test]
    fn every_column_the_tool_writes_is_in_the_catalogue() {
        for (table, columns) in [
            (
                "tunnels",
                &[
                    "tunnel",
                    "t_start",
                    "t_end",
                    "surv_start",
                    "surv_end",
                    "p_exit",
                    "p_next",
                    "p_exit_disease",
                    "floor_share",
                    "payoff_cost",
                    "entry_cycle",
                    "entry_age",
                ][..],
            ),
            ("payoffs", &["tunnel", "payoff_cost"][..]),
            (
                "payoff_methods",
                &[
                    "payoff",
                    "method",
                    "total",
                    "exact",
                    "error",
                    "rel_error",
                    "disc_total",
                    "disc_exact",
                    "disc_error",
                    "disc_rel_error",
                ][..],
            ),
            ("draws", &["draw", "tunnel", "p_exit"][..]),
            ("draws_wide", &["tunnel", "draw_1", "draw_200"][..]),
            (
                "summary",
                &[
                    "p_exit_point",
                    "p_exit_mean",
                    "p_exit_pct2_5",
                    "p_exit_pct97_5",
                ][..],
            ),
            ("matrix", &["from", "tunnel_1", "exit"][..]),
            (
                "truncation",
                &[
                    "count",
                    "max_surv_gap",
                    "ly_rel_error",
                    "p_exit_last",
                    "payoff_rel_error_cost",
                ][..],
            ),
            (
                "within_cycle",
                &[
                    "method",
                    "life_years",
                    "exact",
                    "error",
                    "rel_error",
                    "discounted_life_years",
                    "discounted_exact",
                    "discounted_error",
                    "discounted_rel_error",
                ][..],
            ),
            (
                "rebuild_quality",
                &[
                    "arm",
                    "digitised_rows",
                    "survival_read_as",
                    "cleaning",
                    "patients",
                    "events",
                    "events_published",
                    "censored",
                    "max_abs_diff",
                    "max_abs_diff_time",
                    "mean_abs_diff",
                    "at_risk_max_abs_diff",
                ][..],
            ),
            (
                "rebuild_at_risk",
                &["arm", "time", "published", "rebuilt", "difference"][..],
            ),
            (
                "rebuild_intervals",
                &[
                    "arm",
                    "start",
                    "end",
                    "at_risk_start",
                    "events",
                    "censored",
                    "published_end",
                    "rebuilt_end",
                    "censoring_rule",
                ][..],
            ),
            ("rebuilt", &["time", "event", "group"][..]),
        ] {
            assert!(table_description(table).is_some(), "{table}");
            for column in columns {
                assert!(known(table, column).is_some(), "{table}.{column}");
            }
        }
    }
}
