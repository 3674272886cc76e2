//! CSV export: plain RFC 4180 (comma, CRLF line ends, double quotes where needed), the header
//! on the first line and no comment lines, then the rows of the document's first table.
//! Numbers are written in their shortest round-trip form with `.` as the decimal mark, so
//! reading the file back gives the same `f64`s. The metadata goes into a Frictionless
//! descriptor beside the file, `NAME.resource.json` for `NAME.csv` ([`super::descriptor`]).

use super::descriptor::{self, Resource};
use super::{push_number_bytes, push_number_text, Cell, Document, Exporter};
use crate::discretise::{TunnelRow, TunnelTable};
use crate::error::{Error, Result};
use std::ops::Range;
use std::path::{Path, PathBuf};

/// Line end of every record (RFC 4180).
const LINE_END: &[u8] = b"\r\n";

/// Where the descriptor of a CSV file at `path` goes: `NAME.resource.json` beside `NAME.csv`
/// (the file name without its last extension, then `.resource.json`).
pub fn descriptor_path(path: &Path) -> PathBuf {
    let stem = path
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "data".into());
    path.with_file_name(format!("{stem}.resource.json"))
}

/// A CSV writer laid out as every CSV file of the tool.
fn writer(out: Vec<u8>) -> csv::Writer<Vec<u8>> {
    csv::WriterBuilder::new()
        .terminator(csv::Terminator::CRLF)
        .from_writer(out)
}

/// The CSV format (`.csv`).
pub struct Csv;

impl Exporter for Csv {
    fn extension(&self) -> &'static str {
        "csv"
    }

    fn render(&self, document: &Document) -> Result<Vec<u8>> {
        let Some(table) = document.tables.first() else {
            return Ok(Vec::new());
        };
        let mut writer = writer(Vec::new());
        let fail = |e: csv::Error| Error::Computation(format!("cannot render CSV: {e}"));
        writer.write_record(&table.columns).map_err(fail)?;
        write_rows(&mut writer, &table.rows).map_err(fail)?;
        writer
            .into_inner()
            .map_err(|e| Error::Computation(format!("cannot render CSV: {e}")))
    }

    fn descriptor_path(&self, path: &Path) -> Option<PathBuf> {
        Some(descriptor_path(path))
    }

    fn describe(&self, document: &Document, file_name: &str, bytes: u64) -> Option<Resource> {
        Some(descriptor::resource(document, file_name, bytes))
    }

    fn render_more_rows(&self, rows: &[Vec<Cell>]) -> Option<Result<Vec<u8>>> {
        let mut writer = writer(Vec::new());
        let fail = |e: csv::Error| Error::Computation(format!("cannot render CSV: {e}"));
        let result = (|| {
            write_rows(&mut writer, rows).map_err(fail)?;
            writer
                .into_inner()
                .map_err(|e| Error::Computation(format!("cannot render CSV: {e}")))
        })();
        Some(result)
    }

    /// The long rows of draws written straight as bytes: no cells, no CSV writer (numbers
    /// never need quoting). Text is reused where the value repeats: `tunnel,t_start,t_end,` is
    /// formatted once for all the draws (the cycles are the same), and a value equal to the one
    /// just above it (`surv_start` is the previous `surv_end`; constant hazards repeat `p_exit`)
    /// is copied rather than formatted again.
    fn append_draw_rows(
        &self,
        first_draw: usize,
        tables: &[TunnelTable],
        out: &mut Vec<u8>,
    ) -> Option<Result<()>> {
        let Some(first) = tables.first() else {
            return Some(Ok(()));
        };
        let prefixes: Vec<Vec<u8>> = first.rows.iter().map(cycle_prefix).collect();
        let mut draw_digits = itoa::Buffer::new();
        for (d, table) in tables.iter().enumerate() {
            let draw_text = draw_digits.format(first_draw + d).as_bytes();
            // The last written surv_end, p_exit and p_next: bits and where the text sits in `out`.
            let mut surv_end_text: Option<(u64, Range<usize>)> = None;
            let mut p_exit_text: Option<(u64, Range<usize>)> = None;
            let mut p_next_text: Option<(u64, Range<usize>)> = None;
            for (i, row) in table.rows.iter().enumerate() {
                out.extend_from_slice(draw_text);
                out.push(b',');
                match (prefixes.get(i), first.rows.get(i)) {
                    (Some(prefix), Some(r)) if same_cycle(r, row) => out.extend_from_slice(prefix),
                    _ => out.extend_from_slice(&cycle_prefix(row)),
                }
                copy_or_write(out, row.surv_start, &surv_end_text);
                out.push(b',');
                surv_end_text = Some(copy_or_write(out, row.surv_end, &None));
                out.push(b',');
                p_exit_text = Some(copy_or_write(out, row.p_exit, &p_exit_text));
                out.push(b',');
                p_next_text = Some(copy_or_write(out, row.p_next, &p_next_text));
                for (_, values) in &table.extra {
                    out.push(b',');
                    if let Some(v) = values.get(i) {
                        push_number_bytes(out, *v);
                    }
                }
                out.extend_from_slice(LINE_END);
            }
        }
        Some(Ok(()))
    }
}

/// `tunnel,t_start,t_end,` of one row.
fn cycle_prefix(row: &TunnelRow) -> Vec<u8> {
    let mut out = itoa::Buffer::new().format(row.tunnel).as_bytes().to_vec();
    out.push(b',');
    push_number_bytes(&mut out, row.t_start);
    out.push(b',');
    push_number_bytes(&mut out, row.t_end);
    out.push(b',');
    out
}

/// Whether two rows cover the same cycle (same tunnel and the same times to the bit).
fn same_cycle(a: &TunnelRow, b: &TunnelRow) -> bool {
    a.tunnel == b.tunnel
        && a.t_start.to_bits() == b.t_start.to_bits()
        && a.t_end.to_bits() == b.t_end.to_bits()
}

/// Copies the text written earlier for the same value, or writes `x` afresh; returns the
/// value's bits and where its text now sits in `out`.
fn copy_or_write(
    out: &mut Vec<u8>,
    x: f64,
    earlier: &Option<(u64, Range<usize>)>,
) -> (u64, Range<usize>) {
    let start = out.len();
    match earlier {
        Some((bits, range)) if *bits == x.to_bits() => out.extend_from_within(range.clone()),
        _ => push_number_bytes(out, x),
    }
    (x.to_bits(), start..out.len())
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
    fn header_first_then_rows_and_no_metadata() {
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
                    vec![
                        Cell::Int(3),
                        Cell::Number(-2.5),
                        Cell::Text("x\"y\nz".into()),
                    ],
                ],
            }],
        };
        let bytes = Csv.render(&document).unwrap();
        // RFC 4180: CRLF after every record, the header first, quotes doubled.
        assert!(bytes.starts_with(b"tunnel,p_exit,label\r\n1,0.1,\"a,b\"\r\n"));
        assert!(bytes.ends_with(b"3,-2.5,\"x\"\"y\nz\"\r\n"));
        // Read back by the csv crate with no comment character and no flexibility.
        let mut reader = csv::ReaderBuilder::new()
            .comment(None)
            .flexible(false)
            .from_reader(bytes.as_slice());
        assert_eq!(reader.headers().unwrap(), vec!["tunnel", "p_exit", "label"]);
        let rows: Vec<csv::StringRecord> = reader.records().map(|r| r.unwrap()).collect();
        assert_eq!(rows[0].get(2), Some("a,b"));
        assert_eq!(rows[1].get(1).unwrap().parse::<f64>().unwrap(), 1e-310);
        assert_eq!(rows[1].get(2), Some(""));
        assert_eq!(rows[2].get(2), Some("x\"y\nz"));
        assert!(!String::from_utf8(bytes).unwrap().contains("0.1.0"));
    }

    #[test]
    fn descriptor_sits_beside_the_file() {
        assert_eq!(
            descriptor_path(Path::new("out/draws.csv")),
            Path::new("out/draws.resource.json")
        );
        assert_eq!(
            descriptor_path(Path::new("table")),
            Path::new("table.resource.json")
        );
        assert_eq!(
            descriptor_path(Path::new("a.b.txt")),
            Path::new("a.b.resource.json")
        );
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

    /// A table whose rows chain like a real one (or not, when `chained` is false), with
    /// values of every kind the writer must handle.
    fn awkward_table(values: &[f64], chained: bool) -> TunnelTable {
        use crate::discretise::TunnelRow;
        use crate::units::TimeUnit;
        let mut rows = Vec::new();
        let (mut t, mut s) = (0.0, 1.0);
        for (k, v) in values.iter().enumerate() {
            let t_end = t + 1.0 / 52.0;
            let surv_end = s * v.abs().fract();
            let p_exit = *v;
            rows.push(TunnelRow {
                tunnel: k + 1,
                t_start: if chained { t } else { t + 0.5 },
                t_end,
                surv_start: if chained { s } else { *v },
                surv_end,
                p_exit,
                p_next: 1.0 - p_exit,
            });
            (t, s) = (t_end, surv_end);
        }
        let n = values.len();
        TunnelTable {
            time_unit: TimeUnit::Years,
            cycle: 1.0 / 52.0,
            rows,
            extra: vec![
                (
                    "p_exit_background".into(),
                    values.iter().map(|v| v / 3.0).collect(),
                ),
                // Shorter than the table: the missing tail is written empty.
                ("short".into(), vec![f64::NAN; n / 2]),
            ],
            curve: "test".into(),
        }
    }

    proptest::proptest! {
        #[test]
        fn fast_draw_rows_equal_the_general_csv_rows(
            values in proptest::collection::vec(
                proptest::prop_oneof![
                    proptest::num::f64::ANY,
                    0.0..1.0f64,
                    proptest::strategy::Just(0.0),
                    proptest::strategy::Just(1.0),
                    proptest::strategy::Just(1e-300),
                ],
                1..40,
            ),
            chained: bool,
            draw in 1usize..100_000,
        ) {
            // Reference: the general path (cells through the `csv` crate writer), which the
            // read-back tests check against the in-memory table.
            let table = awkward_table(&values, chained);
            let general = Csv.render_more_rows(&crate::export::tunnel::draw_rows(draw, &table))
                .unwrap()
                .unwrap();
            let mut fast = b"earlier bytes\n".to_vec();
            Csv.append_draw_rows(draw, std::slice::from_ref(&table), &mut fast).unwrap().unwrap();
            proptest::prop_assert_eq!(
                String::from_utf8_lossy(&fast[14..]),
                String::from_utf8_lossy(&general)
            );
            // Several draws at once, the second on other cycles (its own times are written)
            // and the third shorter than the first.
            let other = awkward_table(&values, !chained);
            let short = awkward_table(&values[..values.len() / 2], chained);
            let several = [table.clone(), other.clone(), short.clone()];
            let mut general = Vec::new();
            for (i, t) in several.iter().enumerate() {
                let rows = crate::export::tunnel::draw_rows(draw + i, t);
                general.extend(Csv.render_more_rows(&rows).unwrap().unwrap());
            }
            let mut fast = Vec::new();
            Csv.append_draw_rows(draw, &several, &mut fast).unwrap().unwrap();
            proptest::prop_assert_eq!(
                String::from_utf8_lossy(&fast),
                String::from_utf8_lossy(&general)
            );
        }
    }
}
