//! CSV export: a `#`-comment header block with the document's metadata (one `# key: value`
//! line each), then the document's first table with a header row. Numbers are written in
//! their shortest round-trip form, so reading the file back gives the same `f64`s.

use super::{number_text, Cell, Document, Exporter};
use crate::error::{Error, Result};

/// The CSV format (`.csv`).
pub struct Csv;

impl Exporter for Csv {
    fn extension(&self) -> &'static str {
        "csv"
    }

    fn render(&self, document: &Document) -> Result<Vec<u8>> {
        let mut out = Vec::new();
        for (key, value) in &document.metadata {
            // A comment line must stay one line whatever the value holds.
            let value = value.replace(['\r', '\n'], " ");
            out.extend_from_slice(format!("# {key}: {value}\n").as_bytes());
        }
        let Some(table) = document.tables.first() else {
            return Ok(out);
        };
        let mut writer = csv::WriterBuilder::new()
            .terminator(csv::Terminator::Any(b'\n'))
            .from_writer(out);
        let fail = |e: csv::Error| Error::Computation(format!("cannot render CSV: {e}"));
        writer.write_record(&table.columns).map_err(fail)?;
        for row in &table.rows {
            writer
                .write_record(row.iter().map(cell_text))
                .map_err(fail)?;
        }
        writer
            .into_inner()
            .map_err(|e| Error::Computation(format!("cannot render CSV: {e}")))
    }
}

/// Text of one cell: numbers at full precision, missing and non-finite values empty.
fn cell_text(cell: &Cell) -> String {
    match cell {
        Cell::Int(i) => i.to_string(),
        Cell::Number(x) => number_text(*x),
        Cell::Text(s) => s.clone(),
        Cell::Missing => String::new(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::export::Table;

    #[test]
    fn header_block_then_first_table() {
        let document = Document {
            metadata: vec![
                ("tool_version".into(), "0.1.0".into()),
                ("note".into(), "two\nlines".into()),
            ],
            tables: vec![Table {
                name: "t".into(),
                columns: vec!["tunnel".into(), "p_exit".into(), "label".into()],
                rows: vec![
                    vec![Cell::Int(1), Cell::Number(0.1), Cell::Text("a,b".into())],
                    vec![Cell::Int(2), Cell::Number(1e-310), Cell::Missing],
                ],
            }],
        };
        let text = String::from_utf8(Csv.render(&document).unwrap()).unwrap();
        let mut lines = text.lines();
        assert_eq!(lines.next(), Some("# tool_version: 0.1.0"));
        assert_eq!(lines.next(), Some("# note: two lines"));
        let body: String = lines.map(|l| format!("{l}\n")).collect();
        let mut reader = csv::Reader::from_reader(body.as_bytes());
        let rows: Vec<csv::StringRecord> = reader.records().map(|r| r.unwrap()).collect();
        assert_eq!(rows[0].get(2), Some("a,b"));
        assert_eq!(rows[1].get(1).unwrap().parse::<f64>().unwrap(), 1e-310);
        assert_eq!(rows[1].get(2), Some(""));
    }
}
