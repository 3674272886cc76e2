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

pub mod csv;
pub mod json;
pub mod tunnel;
pub mod xlsx;

use crate::error::Error;
use std::path::Path;

/// Every export format, looked up by extension or `--format`; adding a format is one line here.
pub fn exporters() -> Vec<Box<dyn Exporter>> {
    vec![
        Box::new(csv::Csv),
        Box::new(json::Json),
        Box::new(xlsx::Xlsx),
    ]
}

/// The exporter for `path`: from `format` when given, else from the file's extension.
/// Errors name the known formats and suggest the nearest one.
pub fn exporter_for(path: &Path, format: Option<&str>) -> Result<Box<dyn Exporter>> {
    let wanted = match format {
        Some(f) => f.trim().trim_start_matches('.').to_ascii_lowercase(),
        None => match path.extension() {
            Some(ext) => ext.to_string_lossy().to_ascii_lowercase(),
            None => {
                return Err(Error::output(
                    path,
                    format!(
                        "has no extension to choose the format from (use --format {})",
                        known_formats().join("|")
                    ),
                ))
            }
        },
    };
    let all = exporters();
    let names = known_formats();
    match all.into_iter().find(|e| e.extension() == wanted) {
        Some(e) => Ok(e),
        None => {
            let hint = crate::units::nearest(&wanted, &names)
                .map(|n| format!(" (did you mean \"{n}\"?)"))
                .unwrap_or_default();
            Err(Error::Usage(format!(
                "{}: unknown output format \"{wanted}\"{hint}; formats: {}",
                path.display(),
                names.join(", ")
            )))
        }
    }
}

/// Extensions of the available formats.
pub fn known_formats() -> Vec<&'static str> {
    exporters().iter().map(|e| e.extension()).collect()
}

/// A real number in its shortest form that reads back to the same `f64` (plain notation for
/// ordinary magnitudes, exponent notation for very small or large ones); empty when not finite.
pub fn number_text(x: f64) -> String {
    if !x.is_finite() {
        return String::new();
    }
    let a = x.abs();
    if a == 0.0 || (1e-5..1e16).contains(&a) {
        format!("{x}")
    } else {
        format!("{x:e}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_round_trip_exactly() {
        for x in [
            0.1,
            1.0 / 3.0,
            1e-300,
            5e-324,
            2.5e-7,
            123456.789,
            1e20,
            -0.000123,
        ] {
            let text = number_text(x);
            assert_eq!(text.parse::<f64>().unwrap(), x, "{text}");
        }
        assert_eq!(number_text(0.25), "0.25");
        assert_eq!(number_text(f64::NAN), "");
    }

    #[test]
    fn format_by_extension_or_override() {
        assert_eq!(
            exporter_for(Path::new("a.CSV"), None).unwrap().extension(),
            "csv"
        );
        assert_eq!(
            exporter_for(Path::new("a.txt"), Some("json"))
                .unwrap()
                .extension(),
            "json"
        );
        let err = exporter_for(Path::new("a.jsn"), None).err().unwrap();
        assert!(err.to_string().contains("did you mean \"json\""), "{err}");
        assert!(exporter_for(Path::new("noext"), None).is_err());
    }
}
