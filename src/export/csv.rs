//! CSV export: a `#`-comment header block with the document's metadata (one `# key: value`
//! line each), then the document's first table with a header row. Numbers are written in
//! their shortest round-trip form, so reading the file back gives the same `f64`s.

use super::{push_number_text, Cell, Document, Exporter};
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
        write_rows(&mut writer, &table.rows).map_err(fail)?;
        writer
            .into_inner()
            .map_err(|e| Error::Computation(format!("cannot render CSV: {e}")))
    }

    fn render_more_rows(&self, rows: &[Vec<Cell>]) -> Option<Result<Vec<u8>>> {
        let mut writer = csv::WriterBuilder::new()
            .terminator(csv::Terminator::Any(b'\n'))
            .from_writer(Vec::new());
        let fail = |e: csv::Error| Error::Computation(format!("cannot render CSV: {e}"));
        let result = (|| {
            write_rows(&mut writer, rows).map_err(fail)?;
            writer
                .into_inner()
                .map_err(|e| Error::Computation(format!("cannot render CSV: {e}")))
        })();
        Some(result)
    }
}

/// Writes rows field by field through one reused buffer (no allocation per cell).
fn write_rows(writer: &mut csv::Writer<Vec<u8>>, rows: &[Vec<Cell>]) -> csv::Result<()> {
    let mut text = String::with_capacity(32);
    for row in rows {
        for cell in row {
            text.clear();
            cell_text(&mut text, cell);
            writer.write_field(&text)?;
        }
        writer.write_record(std::iter::empty::<&[u8]>())?;
    }
    Ok(())
}

/// Appends the text of one cell: numbers at full precision, missing and non-finite values empty.
fn cell_text(out: &mut String, cell: &Cell) {
    use std::fmt::Write as _;
    match cell {
        Cell::Int(i) => {
            let _ = write!(out, "{i}");
        }
        Cell::Number(x) => push_number_text(out, *x),
        Cell::Text(s) => out.push_str(s),
        Cell::Missing => {}
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

    #[test]
    fn rows_rendered_in_pieces_equal_rows_rendered_whole() {
        let row = |i: i64| vec![Cell::Int(i), Cell::Number(i as f64 / 7.0)];
        let whole = Document {
            metadata: vec![("k".into(), "v".into())],
            tables: vec![Table {
                name: "t".into(),
                columns: vec!["a".into(), "b".into()],
                rows: (0..5).map(row).collect(),
            }],
        };
        let mut first = whole.clone();
        first.tables[0].rows.truncate(2);
        let mut pieces = Csv.render(&first).unwrap();
        let more: Vec<Vec<Cell>> = (2..5).map(row).collect();
        pieces.extend(Csv.render_more_rows(&more).unwrap().unwrap());
        assert_eq!(pieces, Csv.render(&whole).unwrap());
    }
}
