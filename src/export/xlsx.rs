//! XLSX export (via `rust_xlsxwriter`): one sheet per table of the document, then a `notes`
//! sheet holding the metadata and the caution. Numbers are stored as numbers (full double
//! precision), header rows are bold and frozen, and column widths follow the content so the
//! workbook reads well when opened. Rendering happens in memory; no file I/O here.
//!
//! The workbook's created and modified properties are the time of `SOURCE_DATE_EPOCH` when the
//! environment sets it, else the fixed [`UNDATED`], never the clock: the same document gives
//! the same bytes (the zip members carry a fixed date of their own).

use super::{unique_keys, Cell, Document, Exporter, Table};
use crate::error::{Error, Result};
use rust_xlsxwriter::{DocProperties, ExcelDateTime, Format, Workbook, Worksheet, XlsxError};

/// Created and modified time of a workbook when `SOURCE_DATE_EPOCH` is not set:
/// 1980-01-01 00:00 UTC (seconds since 1970), the date the zip members carry too.
pub const UNDATED: u64 = 315_532_800;

/// Rows an XLSX sheet holds, header included (the file format's limit).
pub const MAX_ROWS: usize = 1_048_576;
/// Columns an XLSX sheet holds (the file format's limit).
pub const MAX_COLUMNS: usize = 16_384;
/// Longest sheet name the file format allows.
const MAX_SHEET_NAME: usize = 31;
/// Widest column set automatically, in character widths; longer text wraps past the edge.
const MAX_WIDTH: usize = 60;

/// Writes a [`Document`] as an Excel workbook.
#[derive(Debug, Clone, Copy, Default)]
pub struct Xlsx;

/// Checks that a table of `rows` data rows and `columns` columns fits on one sheet; the error
/// names the table, its size and what to do instead. Commands call this before computing.
pub fn check_fits(table_name: &str, rows: usize, columns: usize) -> Result<()> {
    if rows + 1 > MAX_ROWS || columns > MAX_COLUMNS {
        return Err(Error::Usage(format!(
            "table \"{table_name}\" would have {rows} rows and {columns} columns, more than an \
             XLSX sheet holds ({} rows including the header, {MAX_COLUMNS} columns); write CSV \
             or JSON instead, or choose the other layout",
            MAX_ROWS - 1
        )));
    }
    Ok(())
}

/// A sheet name the format accepts: no `[]:*?/\`, at most 31 characters, unique in the workbook.
fn sheet_name(wanted: &str, taken: &[String]) -> String {
    let cleaned: String = wanted
        .chars()
        .map(|c| if "[]:*?/\\".contains(c) { '_' } else { c })
        .collect();
    let cleaned = cleaned.trim_matches('\'').trim();
    let base: String = if cleaned.is_empty() {
        "table".into()
    } else {
        cleaned.chars().take(MAX_SHEET_NAME).collect()
    };
    let mut name = base.clone();
    let mut k = 2;
    // Sheet names are compared without regard to case.
    while taken.iter().any(|t| t.eq_ignore_ascii_case(&name)) {
        let suffix = format!(" ({k})");
        let keep = MAX_SHEET_NAME - suffix.chars().count();
        name = format!("{}{suffix}", base.chars().take(keep).collect::<String>());
        k += 1;
    }
    name
}

/// Text shown for a cell, used only to size columns.
fn shown_width(cell: &Cell) -> usize {
    match cell {
        Cell::Int(i) => i.to_string().len(),
        // General format shows about 11 significant digits.
        Cell::Number(x) => format!("{x:.6e}").len().min(12),
        Cell::Text(s) => s.chars().count(),
        Cell::Missing => 0,
    }
}

fn xlsx_error(context: &str, e: XlsxError) -> Error {
    Error::Computation(format!("cannot build the XLSX {context}: {e}"))
}

/// Writes one cell; non-finite numbers (which the format cannot store) become text.
fn write_cell(sheet: &mut Worksheet, row: u32, col: u16, cell: &Cell) -> Result<()> {
    let result = match cell {
        // Whole numbers up to 2^53 are exact as doubles, far beyond any tunnel or draw count.
        Cell::Int(i) => sheet.write_number(row, col, *i as f64).map(|_| ()),
        // Adding +0 turns a negative zero into 0 (IEEE 754) and leaves every other value as is.
        Cell::Number(x) if x.is_finite() => sheet.write_number(row, col, *x + 0.0).map(|_| ()),
        Cell::Number(x) => sheet.write_string(row, col, x.to_string()).map(|_| ()),
        Cell::Text(s) => sheet.write_string(row, col, s.as_str()).map(|_| ()),
        Cell::Missing => Ok(()),
    };
    result.map_err(|e| xlsx_error("cell", e))
}

fn write_table(sheet: &mut Worksheet, table: &Table, header: &Format) -> Result<()> {
    check_fits(&table.name, table.rows.len(), table.columns.len())?;
    let mut width: Vec<usize> = table.columns.iter().map(|c| c.chars().count()).collect();
    for (j, name) in table.columns.iter().enumerate() {
        sheet
            .write_string_with_format(0, j as u16, name.as_str(), header)
            .map_err(|e| xlsx_error("header", e))?;
    }
    for (i, row) in table.rows.iter().enumerate() {
        for (j, cell) in row.iter().enumerate().take(table.columns.len()) {
            write_cell(sheet, (i + 1) as u32, j as u16, cell)?;
            width[j] = width[j].max(shown_width(cell));
        }
    }
    for (j, w) in width.iter().enumerate() {
        sheet
            .set_column_width(j as u16, (*w + 2).min(MAX_WIDTH) as f64)
            .map_err(|e| xlsx_error("column width", e))?;
    }
    sheet
        .set_freeze_panes(1, 0)
        .map_err(|e| xlsx_error("frozen header", e))?;
    Ok(())
}

/// The `notes` sheet: every metadata pair, then the caution unless the metadata already holds it.
fn notes_table(document: &Document) -> Table {
    let mut rows: Vec<Vec<Cell>> = unique_keys(&document.metadata)
        .into_iter()
        .map(|(k, v)| vec![Cell::Text(k), Cell::Text(v)])
        .collect();
    if !document.metadata.iter().any(|(_, v)| v == crate::CAUTION) {
        rows.push(vec![
            Cell::Text("caution".into()),
            Cell::Text(crate::CAUTION.into()),
        ]);
    }
    Table {
        name: "notes".into(),
        columns: vec!["item".into(), "value".into()],
        rows,
    }
}

impl Exporter for Xlsx {
    fn extension(&self) -> &'static str {
        "xlsx"
    }

    fn holds_several_tables(&self) -> bool {
        true
    }

    fn render(&self, document: &Document) -> Result<Vec<u8>> {
        let mut workbook = Workbook::new();
        let created = crate::output::source_date_epoch()?.unwrap_or(UNDATED);
        let created = ExcelDateTime::from_timestamp(created as i64)
            .map_err(|e| xlsx_error("creation time", e))?;
        workbook.set_properties(&DocProperties::new().set_creation_datetime(&created));
        let header = Format::new().set_bold();
        let mut taken: Vec<String> = Vec::new();
        let notes = notes_table(document);
        for table in document.tables.iter().chain(std::iter::once(&notes)) {
            let name = sheet_name(&table.name, &taken);
            let sheet = workbook.add_worksheet();
            sheet
                .set_name(name.as_str())
                .map_err(|e| xlsx_error("sheet name", e))?;
            taken.push(name);
            write_table(sheet, table, &header)?;
        }
        workbook
            .save_to_buffer()
            .map_err(|e| xlsx_error("workbook", e))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use calamine::{Data, Reader, Xlsx};

    fn read_back(bytes: Vec<u8>) -> Xlsx<std::io::Cursor<Vec<u8>>> {
        Xlsx::new(std::io::Cursor::new(bytes)).expect("calamine opens the workbook")
    }

    fn awkward_numbers() -> Vec<f64> {
        // Values whose shortest decimal forms need all 17 digits, and extremes of the double range.
        vec![
            0.1 + 0.2,
            1.0 / 3.0,
            std::f64::consts::PI * 1e-300,
            f64::MIN_POSITIVE,
            5e-324,
            -1.797_693_134_862_315_7e308,
            0.999_999_999_999_999_9,
            1.0 - 1e-16,
            123_456_789.123_456_78,
        ]
    }

    #[test]
    fn numbers_read_back_bit_for_bit_with_an_independent_reader() {
        // Independent reader: the calamine crate parses the workbook XML itself.
        let numbers = awkward_numbers();
        let document = Document {
            metadata: vec![("tool_version".into(), crate::VERSION.into())],
            tables: vec![Table {
                name: "tunnels".into(),
                columns: vec!["tunnel".into(), "value".into(), "label".into()],
                rows: numbers
                    .iter()
                    .enumerate()
                    .map(|(i, x)| {
                        vec![
                            Cell::Int(i as i64 + 1),
                            Cell::Number(*x),
                            Cell::Text(format!("row {i}")),
                        ]
                    })
                    .collect(),
            }],
        };
        let mut book = read_back(Xlsx.render(&document).unwrap());
        assert_eq!(book.sheet_names(), vec!["tunnels", "notes"]);
        let range = book.worksheet_range("tunnels").unwrap();
        assert_eq!(range.get_size(), (numbers.len() + 1, 3));
        assert_eq!(range.get((0, 1)), Some(&Data::String("value".into())));
        for (i, x) in numbers.iter().enumerate() {
            assert_eq!(range.get((i + 1, 0)), Some(&Data::Float((i + 1) as f64)));
            match range.get((i + 1, 1)) {
                Some(Data::Float(y)) => assert_eq!(y.to_bits(), x.to_bits(), "row {i}"),
                other => panic!("row {i}: expected a number, got {other:?}"),
            }
            assert_eq!(
                range.get((i + 1, 2)),
                Some(&Data::String(format!("row {i}")))
            );
        }
        let notes = book.worksheet_range("notes").unwrap();
        let texts: Vec<String> = notes.rows().map(|r| r[1].to_string()).collect();
        assert!(texts.iter().any(|t| t == crate::CAUTION));
        assert!(texts.iter().any(|t| t == crate::VERSION));
    }

    #[test]
    fn missing_cells_are_blank_and_non_finite_numbers_are_text() {
        let document = Document {
            metadata: vec![],
            tables: vec![Table {
                name: "t".into(),
                columns: vec!["a".into(), "b".into(), "c".into()],
                rows: vec![vec![
                    Cell::Missing,
                    Cell::Number(f64::INFINITY),
                    Cell::Number(2.5),
                ]],
            }],
        };
        let mut book = read_back(Xlsx.render(&document).unwrap());
        let range = book.worksheet_range("t").unwrap();
        assert!(matches!(range.get((1, 0)), None | Some(Data::Empty)));
        assert_eq!(range.get((1, 1)), Some(&Data::String("inf".into())));
        assert_eq!(range.get((1, 2)), Some(&Data::Float(2.5)));
    }

    #[test]
    fn workbook_properties_carry_a_fixed_date_not_the_clock() {
        // Without SOURCE_DATE_EPOCH (the unit tests do not set it), docProps/core.xml, read
        // with an independent zip reader and XML parser, holds 1980-01-01 as created and
        // modified time; two renders are byte-identical.
        if crate::output::source_date_epoch().ok().flatten().is_some() {
            return; // the environment sets a date: the command-line tests cover that case
        }
        let document = Document {
            metadata: vec![("tool_version".into(), crate::VERSION.into())],
            tables: vec![],
        };
        let bytes = Xlsx.render(&document).unwrap();
        assert_eq!(bytes, Xlsx.render(&document).unwrap());
        let mut archive = zip::ZipArchive::new(std::io::Cursor::new(bytes)).unwrap();
        let mut core = String::new();
        std::io::Read::read_to_string(
            &mut archive.by_name("docProps/core.xml").unwrap(),
            &mut core,
        )
        .unwrap();
        let xml = roxmltree::Document::parse(&core).unwrap();
        for tag in ["created", "modified"] {
            let node = xml
                .descendants()
                .find(|n| n.tag_name().name() == tag)
                .unwrap();
            assert_eq!(node.text(), Some("1980-01-01T00:00:00Z"), "{tag}");
        }
    }

    #[test]
    fn negative_zero_is_stored_as_zero() {
        // Read back with calamine: the sign bit of the stored zero must be clear.
        let document = Document {
            metadata: vec![],
            tables: vec![Table {
                name: "t".into(),
                columns: vec!["p_exit".into(), "x".into()],
                rows: vec![vec![Cell::Number(-0.0), Cell::Number(-2.5)]],
            }],
        };
        let bytes = Xlsx.render(&document).unwrap();
        let mut book = read_back(bytes);
        let range = book.worksheet_range("t").unwrap();
        match range.get((1, 0)) {
            Some(Data::Float(y)) => assert_eq!(y.to_bits(), 0.0f64.to_bits()),
            Some(Data::Int(0)) => {}
            other => panic!("expected 0, got {other:?}"),
        }
        assert_eq!(range.get((1, 1)), Some(&Data::Float(-2.5)));
    }

    #[test]
    fn sheet_names_are_cleaned_shortened_and_unique() {
        let taken = vec!["parameters".to_string()];
        assert_eq!(sheet_name("a/b:c", &[]), "a_b_c");
        assert_eq!(sheet_name("Parameters", &taken), "Parameters (2)");
        let long = "x".repeat(40);
        assert_eq!(sheet_name(&long, &[]).chars().count(), 31);
        let clash = vec!["x".repeat(31)];
        let second = sheet_name(&long, &clash);
        assert_eq!(second.chars().count(), 31);
        assert!(second.ends_with(" (2)"));
    }

    #[test]
    fn refuses_tables_larger_than_a_sheet() {
        // Sheet limits of the Office Open XML spreadsheet format: 1,048,576 rows, 16,384 columns (from memory).
        assert!(check_fits("long", MAX_ROWS - 1, 8).is_ok());
        assert!(check_fits("long", MAX_ROWS, 8).is_err());
        assert!(check_fits("wide", 10, MAX_COLUMNS + 1).is_err());
    }
}
