//! Exports: results are first built into a format-neutral [`Document`] (metadata plus named
//! tables); one file per format turns a document into bytes behind the [`Exporter`] trait
//! (no file I/O inside exporters). Writing goes through [`crate::output::write_atomic`].

use crate::error::Result;

/// One cell of an exported table; numbers stay numbers in every format.
#[derive(Debug, Clone, PartialEq)]
pub enum Cell {
    /// A whole number (tunnel index, draw number, count).
    Int(i64),
    /// A real number, written with full precision (shortest round-trip form).
    Number(f64),
    /// Text.
    Text(String),
    /// A missing value (written empty in CSV, `null` in JSON, a blank cell in XLSX).
    Missing,
}

/// A named table with a header row.
#[derive(Debug, Clone, PartialEq)]
pub struct Table {
    /// Name (sheet name in XLSX, key in JSON).
    pub name: String,
    /// Column names.
    pub columns: Vec<String>,
    /// Rows, each as long as `columns`.
    pub rows: Vec<Vec<Cell>>,
}

/// Everything one output file holds: ordered metadata (tool version, input hash, family,
/// parameters, cycle, unit, adjustments, seed, cautions) and one or more tables.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Document {
    /// Metadata as ordered key–value pairs.
    pub metadata: Vec<(String, String)>,
    /// Tables; the first is the main one (the only one in a CSV file).
    pub tables: Vec<Table>,
}

/// Turns a document into the bytes of one file format.
pub trait Exporter {
    /// File extension this exporter writes, without the dot.
    fn extension(&self) -> &'static str;
    /// The file's bytes.
    fn render(&self, document: &Document) -> Result<Vec<u8>>;
}

pub mod xlsx;
