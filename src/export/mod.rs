//! Exports: results are first built into a format-neutral [`Document`] (metadata plus named
//! tables); one file per format turns a document into bytes behind the [`Exporter`] trait
//! (no file I/O inside exporters). A format that cannot hold the metadata (CSV) describes each
//! file in a Frictionless descriptor beside it ([`descriptor`]). Commands write through a
//! [`Target`], which checks the paths first and puts a file and its descriptor in place together.

use crate::discretise::TunnelTable;
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
pub trait Exporter: Send + Sync {
    /// File extension this exporter writes, without the dot.
    fn extension(&self) -> &'static str;
    /// The file's bytes.
    fn render(&self, document: &Document) -> Result<Vec<u8>>;

    /// For formats that can be written in pieces (CSV): the bytes of more rows of the main
    /// table, to append after [`Exporter::render`] of a document holding the first rows. Lets
    /// very long tables (uncertainty draws) stream to disk. `None` for formats rendered whole.
    fn render_more_rows(&self, _rows: &[Vec<Cell>]) -> Option<Result<Vec<u8>>> {
        None
    }

    /// For streaming formats: appends to `out` the rows of consecutive draws in the long layout
    /// of draws ([`tunnel::draw_rows`]; `tables[i]` is draw `first_draw + i`), the same bytes
    /// as [`Exporter::render_more_rows`] of those rows. A format may override it with a writer
    /// that skips the cells (the draws benchmark writes 24 million rows). `None` for formats
    /// rendered whole.
    fn append_draw_rows(
        &self,
        first_draw: usize,
        tables: &[TunnelTable],
        out: &mut Vec<u8>,
    ) -> Option<Result<()>> {
        for (i, table) in tables.iter().enumerate() {
            match self.render_more_rows(&tunnel::draw_rows(first_draw + i, table))? {
                Ok(bytes) => out.extend_from_slice(&bytes),
                Err(e) => return Some(Err(e)),
            }
        }
        Some(Ok(()))
    }

    /// Whether the format holds several tables (XLSX sheets); single-table formats get only
    /// the main table, so commands add extra tables (matrix, parameters) only where they fit.
    fn holds_several_tables(&self) -> bool {
        false
    }

    /// For formats that cannot hold the document's metadata (CSV): where the descriptor of a
    /// file written at `path` goes. `None` for formats that hold it themselves (JSON
    /// `metadata`, the XLSX `notes` sheet).
    fn descriptor_path(&self, _path: &Path) -> Option<PathBuf> {
        None
    }

    /// The descriptor of `document` rendered by this format into `file_name` (a bare file
    /// name) of `bytes` bytes, for formats with a [`Exporter::descriptor_path`].
    fn describe(
        &self,
        _document: &Document,
        _file_name: &str,
        _bytes: u64,
    ) -> Option<descriptor::Resource> {
        None
    }
}

/// Metadata with repeated keys told apart (`warning`, `warning_2`, …), in order: the form every
/// format records, so that a JSON object or a descriptor never holds a key twice.
pub fn unique_keys(metadata: &[(String, String)]) -> Vec<(String, String)> {
    let mut out: Vec<(String, String)> = Vec::with_capacity(metadata.len());
    for (key, value) in metadata {
        let mut name = key.clone();
        let mut k = 2;
        while out.iter().any(|(n, _)| *n == name) {
            name = format!("{key}_{k}");
            k += 1;
        }
        out.push((name, value.clone()));
    }
    out
}

/// An output file of a table-writing command with its format, checked before any computation;
/// for a format with descriptors, the descriptor's path is checked too (neither is replaced
/// without `--force`).
pub struct Target {
    /// The file.
    pub path: PathBuf,
    /// Its format.
    pub exporter: Box<dyn Exporter>,
}

impl Target {
    /// The target for `path`, in `format` or the format of its extension; errors when the
    /// file or its descriptor exists (without `force`) or the folder does not.
    pub fn new(path: &Path, format: Option<&str>, force: bool) -> Result<Target> {
        let exporter = exporter_for(path, format)?;
        output::check_writable(path, force)?;
        if let Some(descriptor) = exporter.descriptor_path(path) {
            output::check_writable(&descriptor, force)?;
        }
        Ok(Target {
            path: path.to_path_buf(),
            exporter,
        })
    }

    /// Every file this target writes: the file, then its descriptor if it has one.
    pub fn paths(&self) -> Vec<PathBuf> {
        let mut paths = vec![self.path.clone()];
        paths.extend(self.exporter.descriptor_path(&self.path));
        paths
    }

    /// Renders `document` and puts it in place with its descriptor.
    pub fn write(&self, document: &Document) -> Result<()> {
        let bytes = self.exporter.render(document)?;
        self.write_rendered(document, &bytes)
    }

    /// Puts `bytes`, the rendering of `document`, in place with its descriptor.
    pub fn write_rendered(&self, document: &Document, bytes: &[u8]) -> Result<()> {
        let data = output::stage(&self.path, bytes)?;
        self.commit(document, data)
    }

    /// Streams the file (`fill` writes all of it, see [`output::stage_with`]), then puts it in
    /// place with the descriptor of `document` (its metadata and columns; rows may be left out).
    pub fn write_streamed(
        &self,
        document: &Document,
        fill: impl FnOnce(&mut output::Staged) -> Result<()>,
    ) -> Result<()> {
        let data = output::stage_with(&self.path, fill)?;
        self.commit(document, data)
    }

    /// Stages the descriptor of the staged `data` file and puts both in place, the
    /// descriptor first.
    fn commit(&self, document: &Document, data: output::Pending) -> Result<()> {
        output::commit(self.staged_with_descriptor(document, data)?)
    }

    /// The staged `data` file preceded by its staged descriptor (if the format has one).
    fn staged_with_descriptor(
        &self,
        document: &Document,
        data: output::Pending,
    ) -> Result<Vec<output::Pending>> {
        let mut files = Vec::new();
        if let Some(path) = self.exporter.descriptor_path(&self.path) {
            let name = file_name(&self.path);
            if let Some(resource) = self.exporter.describe(document, &name, data.bytes()) {
                files.push(output::stage(&path, &descriptor::to_json(&resource)?)?);
            }
        }
        files.push(data);
        Ok(files)
    }

    /// Renders and stages every (target, document) pair, then puts all the files in place
    /// together: a table and a companion table (a matrix layout's payoff table in CSV) appear
    /// both or neither.
    pub fn write_together(pairs: &[(&Target, &Document)]) -> Result<()> {
        let mut files = Vec::new();
        for (target, document) in pairs {
            let bytes = target.exporter.render(document)?;
            let data = output::stage(&target.path, &bytes)?;
            files.extend(target.staged_with_descriptor(document, data)?);
        }
        output::commit(files)
    }
}

/// The last component of `path` as text.
pub fn file_name(path: &Path) -> String {
    path.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default()
}

pub mod csv;
pub mod descriptor;
pub mod json;
pub mod tunnel;
pub mod xlsx;

use crate::error::Error;
use crate::output;
use std::path::{Path, PathBuf};

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
/// ordinary magnitudes, exponent notation for very small or large ones); "0" for either zero;
/// empty when not finite. For files and metadata a machine reads back; text for reading uses
/// [`crate::format`].
pub fn number_text(x: f64) -> String {
    let mut out = String::new();
    push_number_text(&mut out, x);
    out
}

/// Appends [`number_text`] of `x` to `out` without allocating; the digits come from `zmij`
/// (shortest round-trip, several times faster than `format!`, which matters for millions of
/// draws), laid out as `format!("{x}")` / `format!("{x:e}")` would lay them out (where two
/// shortest forms exist, the last digit may differ from `format!`'s; both read back exactly).
pub fn push_number_text(out: &mut String, x: f64) {
    with_number_text(x, |text| out.push_str(text));
}

/// [`push_number_text`] for byte buffers (the streaming CSV writer of draws).
pub fn push_number_bytes(out: &mut Vec<u8>, x: f64) {
    with_number_text(x, |text| out.extend_from_slice(text.as_bytes()));
}

/// Hands the text of [`number_text`] to `emit` (nothing for a non-finite `x`).
fn with_number_text(x: f64, emit: impl FnOnce(&str)) {
    let a = x.abs();
    // Most numbers written (probabilities, survival) lie here, where zmij lays out plainly as
    // `{x}` does and no value is whole: checked first, it saves a fifth of the time per number.
    if (1e-4..1.0).contains(&a) {
        emit(zmij::Buffer::new().format_finite(x));
        return;
    }
    if !x.is_finite() {
        return;
    }
    // A zero is written "0" whatever its sign: "-0" (from -expm1(0), say) means nothing to a
    // reader or a spreadsheet, and reads back equal to 0.
    if x == 0.0 {
        emit("0");
        return;
    }
    // Whole numbers (cycle boundaries, counts) skip the shortest-digit search: their digits
    // are the integer's, as `{x}` writes them.
    // (`as i64` then back is exact for whole numbers below 1e15 and cheaper than `trunc`.)
    if a < 1e15 && (x as i64) as f64 == x {
        let mut buffer = itoa::Buffer::new();
        emit(buffer.format(x as i64));
        return;
    }
    let mut buffer = zmij::Buffer::new();
    let digits = buffer.format_finite(x);
    let plain = (1e-5..1e16).contains(&a);
    // zmij lays out plainly exactly when the shortest digits lie in [1e-5, 1e16); only values
    // near those limits can round across them, so only there is the text searched for 'e'.
    // (An exponent takes at most the last five bytes, "e-324", so only they are searched.)
    let tail = &digits.as_bytes()[digits.len().saturating_sub(5)..];
    let exponent = !(1e-4..1e15).contains(&a) && tail.contains(&b'e');
    match (plain, exponent) {
        // zmij writes whole numbers with a trailing ".0"; `{x}` does not.
        (true, false) => emit(digits.strip_suffix(".0").unwrap_or(digits)),
        // `{x:e}` writes no '+' in a positive exponent.
        (false, true) if a < 1.0 => emit(digits),
        (false, true) => match digits.split_once("e+") {
            Some((mantissa, power)) => emit(&format!("{mantissa}e{power}")),
            None => emit(digits),
        },
        // Layouts the two disagree on fall back to the standard library.
        (true, true) => emit(&format!("{x}")),
        (false, false) => emit(&format!("{x:e}")),
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
        assert_eq!(number_text(1.0), "1");
        assert_eq!(number_text(-0.0), "0");
        assert_eq!(number_text(0.0), "0");
        assert_eq!(number_text(f64::NAN), "");
    }

    #[test]
    fn whole_numbers_are_written_as_the_standard_library_writes_them() {
        // Reference: `format!("{x}")` (whole numbers have one shortest form, so the texts must
        // be identical), on both sides of the 1e15 limit of the integer path and at 2^53.
        for x in [
            1.0,
            -1.0,
            12.0,
            480.0,
            -7.0e6,
            999_999_999_999_999.0,
            1e15,
            -1e15,
            9_007_199_254_740_992.0,
        ] {
            assert_eq!(number_text(x), format!("{x}"), "{x}");
        }
        // From 1e16 on, exponent notation (as `{x:e}`).
        assert_eq!(number_text(1e16), format!("{:e}", 1e16));
        let mut bytes = Vec::new();
        push_number_bytes(&mut bytes, 2.5);
        push_number_bytes(&mut bytes, 3.0);
        push_number_bytes(&mut bytes, f64::INFINITY);
        assert_eq!(bytes, b"2.53");
    }

    proptest::proptest! {
        #[test]
        fn fast_number_text_lays_out_like_the_standard_library(bits in proptest::num::u64::ANY, scale in -320i32..320) {
            // Reference: the standard library's shortest round-trip formatting (`{}` and `{:e}`).
            // Both give the shortest digits that read back exactly; where two such strings
            // exist (a tie in the last digit) they may pick different ones, so the check is:
            // exact read-back, the same length and the same notation. Zero is "0" either way.
            for x in [f64::from_bits(bits), (bits as f64 / u64::MAX as f64) * 10f64.powi(scale)] {
                let got = number_text(x);
                if !x.is_finite() {
                    proptest::prop_assert_eq!(got, "");
                    continue;
                }
                if x == 0.0 {
                    // Either zero is written "0" (no "-0" in any output).
                    proptest::prop_assert_eq!(got, "0");
                    continue;
                }
                let expected = if (1e-5..1e16).contains(&x.abs()) {
                    format!("{x}")
                } else {
                    format!("{x:e}")
                };
                proptest::prop_assert_eq!(got.parse::<f64>().unwrap().to_bits(), x.to_bits());
                proptest::prop_assert_eq!(got.len(), expected.len(), "{} vs {}", got, expected);
                proptest::prop_assert_eq!(got.contains('e'), expected.contains('e'));
            }
        }
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
