//! The one reading discipline shared by every CSV reader (time-to-event data, life tables,
//! digitised points, risk tables and any table added later): encoding, delimiter, header,
//! field counts, physical line numbers, number syntax (decimal commas and thousands
//! separators refused with a message that says so) and the one-line error form
//! `FILE line L column C ("NAME"): …`, implemented once.
//!
//! A reader opens the bytes with [`CsvReader::new`], looks its columns up with
//! [`CsvReader::column`] (or [`CsvReader::find`] for optional ones) and walks the rows with
//! [`CsvReader::next_row`]; each [`Row`] hands out checked values ([`Row::number`],
//! [`Row::text`], [`Row::parse`]) whose errors already name the file, line and column. The
//! rules and the reasons for them are in `docs/robustness.md`.

use crate::error::{Error, Result};
use crate::format::shown;
use std::cell::Cell;
use std::io::Read;
use std::path::Path;
use std::sync::Arc;

/// What differs between the formats read through [`CsvReader`].
#[derive(Debug, Clone, Copy, Default)]
pub struct Settings {
    /// Field delimiter; detected from the header line when `None`.
    pub delimiter: Option<u8>,
    /// Whether lines starting with `#` are comments. Only for formats that document it (life
    /// tables): elsewhere such a line could be data (an arm called `#1`) and must not vanish.
    pub comments: bool,
}

/// Reads a whole file, with a one-line error naming it.
pub fn read_file(path: &Path) -> Result<Vec<u8>> {
    std::fs::read(path)
        .map_err(|e| Error::input(&path.display().to_string(), format!("cannot read: {e}")))
}

/// Strips a UTF-8 byte-order mark.
pub fn strip_bom(bytes: &[u8]) -> &[u8] {
    bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes)
}

/// The delimiter of a header line: the most frequent of `,`, `;` and tab (comma on a tie).
pub fn detect_delimiter(header: &[u8]) -> u8 {
    let end = header
        .iter()
        .position(|&b| b == b'\n' || b == b'\r')
        .unwrap_or(header.len());
    let header = &header[..end];
    let count = |d: u8| header.iter().filter(|&&b| b == d).count();
    [b',', b';', b'\t']
        .into_iter()
        .max_by_key(|&d| (count(d), d == b','))
        .unwrap_or(b',')
}

/// A CSV file being read: header checked, rows handed out one at a time with their physical
/// line numbers (blank lines, comment lines, lone CRs and line breaks inside quoted fields
/// counted, so the line named is the line an editor shows).
pub struct CsvReader<'a> {
    file: String,
    body: &'a [u8],
    comments: bool,
    /// Where the header row starts in `body` (the csv reader's offsets count from here).
    first: usize,
    delimiter: u8,
    headers: Arc<[String]>,
    header_line: u64,
    /// Header length without trailing empty names (a trailing delimiter on the header line).
    width: usize,
    reader: csv::Reader<&'a [u8]>,
    record: csv::ByteRecord,
    /// Byte offset (in `body`) where the current record starts.
    offset: usize,
    /// Last (offset, line) pair worked out, so rows read in order cost one pass over the file.
    cursor: Cell<(usize, u64)>,
    /// Line of the first byte of `body` (1, or later for a block of a streamed file).
    base_line: u64,
}

impl<'a> CsvReader<'a> {
    /// Opens a file's bytes: refuses UTF-16 and empty files, detects the delimiter (unless
    /// `settings` fixes it) and reads the header row.
    pub fn new(file: &str, bytes: &'a [u8], settings: Settings) -> Result<CsvReader<'a>> {
        if bytes.starts_with(b"\xFF\xFE") || bytes.starts_with(b"\xFE\xFF") {
            return Err(Error::input(
                file,
                "the file is UTF-16 encoded; save it as UTF-8 CSV",
            ));
        }
        let body = strip_bom(bytes);
        let first = content_start(body, 0, settings.comments, true);
        if first >= body.len() {
            return Err(Error::input(
                file,
                "file is empty (expected a header row, then data rows)",
            ));
        }
        let delimiter = settings
            .delimiter
            .unwrap_or_else(|| detect_delimiter(&body[first..]));
        let mut builder = csv::ReaderBuilder::new();
        builder
            .delimiter(delimiter)
            .flexible(true)
            .has_headers(true);
        if settings.comments {
            builder.comment(Some(b'#'));
        }
        // The csv reader starts at the header, so blank and comment lines before it are not
        // mistaken for it; offsets it reports are then relative to `first`.
        let mut reader = builder.from_reader(&body[first..]);
        let header_line = 1 + line_ends(body, 0, first);
        let header = reader.byte_headers().map_err(|e| {
            Error::at(
                file,
                header_line,
                1,
                "",
                format!("cannot read the header row: {e}"),
            )
        })?;
        let headers: Arc<[String]> = header
            .iter()
            .map(|h| String::from_utf8_lossy(h).trim().to_string())
            .collect();
        let width = headers
            .iter()
            .rposition(|h| !h.is_empty())
            .map_or(0, |i| i + 1);
        Ok(CsvReader {
            file: file.to_string(),
            body,
            first,
            comments: settings.comments,
            delimiter,
            headers,
            header_line,
            width,
            reader,
            record: csv::ByteRecord::new(),
            offset: first,
            cursor: Cell::new((first, header_line)),
            base_line: 1,
        })
    }

    /// What readers of later blocks of the same file share with this one.
    fn layout(&self) -> Layout {
        Layout {
            file: self.file.clone(),
            comments: self.comments,
            delimiter: self.delimiter,
            headers: Arc::clone(&self.headers),
            header_line: self.header_line,
            width: self.width,
        }
    }

    /// File name as given by the user.
    pub fn file(&self) -> &str {
        &self.file
    }

    /// Column names of the header row, trimmed (invalid UTF-8 replaced).
    pub fn headers(&self) -> &[String] {
        &self.headers
    }

    /// Physical line of the header row.
    pub fn header_line(&self) -> u64 {
        self.header_line
    }

    /// The delimiter in use.
    pub fn delimiter(&self) -> u8 {
        self.delimiter
    }

    /// Whether the header has a column called `name`.
    pub fn has(&self, name: &str) -> bool {
        self.headers.iter().any(|h| h == name)
    }

    /// 0-based index of the column `name`; an error at the header line when it is missing
    /// (with the nearest name, the header's names and, for a one-column header, the
    /// delimiter it seems to use) or appears more than once.
    pub fn column(&self, name: &str) -> Result<usize> {
        match self.find(name)? {
            Some(i) => Ok(i),
            None => {
                let names: Vec<String> = self.headers.iter().take(12).map(|h| shown(h)).collect();
                let refs: Vec<&str> = names.iter().map(String::as_str).collect();
                let hint = crate::units::nearest(name, &refs)
                    .map(|n| format!(" (did you mean \"{n}\"?)"))
                    .unwrap_or_default();
                let lone = match &self.headers[..] {
                    [one] if one.starts_with('#') => {
                        "; a line starting with # is not a comment in this file: remove it".to_string()
                    }
                    [one] => ['|', ':']
                        .into_iter()
                        .find(|d| one.contains(*d))
                        .map(|d| {
                            format!(
                                "; the header reads as one column: is \"{d}\" the delimiter? write comma-, semicolon- or tab-separated values"
                            )
                        })
                        .unwrap_or_default(),
                    _ => String::new(),
                };
                Err(self.error_at(
                    self.header_line,
                    self.headers.len().max(1) - 1,
                    format!(
                        "no column named \"{}\"{hint}; the header has: {}{}{lone}",
                        shown(name),
                        names.join(", "),
                        if self.headers.len() > 12 { ", …" } else { "" }
                    ),
                ))
            }
        }
    }

    /// 0-based index of an optional column `name` (`None` when absent); an error when it
    /// appears more than once.
    pub fn find(&self, name: &str) -> Result<Option<usize>> {
        let mut found = self
            .headers
            .iter()
            .enumerate()
            .filter(|(_, h)| *h == name)
            .map(|(i, _)| i);
        let first = found.next();
        if let (Some(first), Some(second)) = (first, found.next()) {
            return Err(self.error_at(
                self.header_line,
                second,
                format!(
                    "column \"{}\" appears more than once (columns {} and {})",
                    shown(name),
                    first + 1,
                    second + 1
                ),
            ));
        }
        Ok(first)
    }

    /// An error at `line` and 0-based `column` of this file, the column named from the header.
    pub fn error_at(&self, line: u64, column: usize, message: impl Into<String>) -> Error {
        let name = self
            .headers
            .get(column)
            .map(String::as_str)
            .unwrap_or("beyond the header");
        Error::at(&self.file, line, column + 1, name, message)
    }

    /// An error about the whole file.
    pub fn error(&self, message: impl Into<String>) -> Error {
        Error::input(&self.file, message)
    }

    /// The error for a file whose header is followed by no data row.
    pub fn no_rows(&self) -> Error {
        no_rows(&self.file)
    }

    /// Fast path for blocks of plain rows: hands `row` each line's fields (split at the
    /// delimiter, a CRLF's CR removed) with its physical line, in order. Returns `false` as
    /// soon as a line needs the full rules of [`Self::next_row`] (a quote, a lone CR, a blank
    /// line, comment lines, a field count other than the header's) or `row` returns `false`;
    /// the caller then drops what it took and reads the block with `next_row`, which gives the
    /// same rows and the errors. For a reader not yet read from.
    pub fn plain_rows(&self, mut row: impl FnMut(&[&'a [u8]], u64) -> bool) -> bool {
        if self.comments || self.reader.position().byte() != 0 || self.body.contains(&b'"') {
            return false;
        }
        let body = &self.body[self.first..];
        let width = self.headers.len();
        let mut fields: Vec<&'a [u8]> = Vec::with_capacity(width);
        for (line, text) in (self.base_line..).zip(body.split_inclusive(|&b| b == b'\n')) {
            let text = text.strip_suffix(b"\n").unwrap_or(text);
            let text = text.strip_suffix(b"\r").unwrap_or(text);
            if text.is_empty() || text.contains(&b'\r') {
                return false;
            }
            fields.clear();
            fields.extend(text.split(|&b| b == self.delimiter));
            if fields.len() != width || !row(&fields, line) {
                return false;
            }
        }
        true
    }

    /// The next data row, skipping blank lines and rows whose fields are all empty (spreadsheets
    /// write `,,` for an empty row). Every row returned has at least as many fields as the
    /// header and no non-empty field beyond it: a row that does not is refused, since it means
    /// the columns are not where the header says (a decimal comma or a thousands separator in
    /// a comma-separated file, an unquoted delimiter in a value, a missing value).
    pub fn next_row(&mut self) -> Result<Option<Row<'_, 'a>>> {
        loop {
            let hint = self.reader.position().byte();
            match self.reader.read_byte_record(&mut self.record) {
                Ok(false) => return Ok(None),
                Ok(true) => {}
                Err(e) => {
                    let offset = self.first + e.position().map_or(hint, |p| p.byte()) as usize;
                    return Err(self.error_at(
                        self.line_of(offset),
                        0,
                        format!("malformed CSV: {e}"),
                    ));
                }
            }
            self.offset = self.first + self.record.position().map_or(hint, |p| p.byte()) as usize;
            if self.record.iter().all(|f| f.trim_ascii().is_empty()) {
                continue;
            }
            let filled = self
                .record
                .iter()
                .rposition(|f| !f.trim_ascii().is_empty())
                .map_or(0, |i| i + 1);
            if self.record.len() < self.width {
                let fields = self.record.len();
                let other = [b',', b';', b'\t']
                    .into_iter()
                    .find(|&d| d != self.delimiter && self.record.iter().any(|f| f.contains(&d)));
                let why = match other {
                    Some(d) => format!(
                        "the header is separated by {} but this row by {}",
                        delimiter_name(self.delimiter),
                        delimiter_name(d)
                    ),
                    None => "a value is missing".to_string(),
                };
                return Err(self.error_at(
                    self.line_of(self.offset),
                    fields,
                    format!(
                        "row has {fields} field(s) but the header has {}: {why}",
                        self.width
                    ),
                ));
            }
            if filled > self.headers.len() {
                return Err(self.too_many_fields(filled));
            }
            return Ok(Some(Row { reader: self }));
        }
    }

    /// The error for a row with non-empty fields beyond the header, saying which value looks
    /// split by a decimal comma or a thousands separator when one does.
    fn too_many_fields(&self, filled: usize) -> Error {
        let line = self.line_of(self.offset);
        let start = format!(
            "row has {filled} fields but the header has {}",
            self.headers.len()
        );
        if let Some((i, hint)) = split_number(&self.record, self.delimiter) {
            return self.error_at(line, i, format!("{start}: {hint}"));
        }
        self.error_at(
            line,
            self.headers.len(),
            format!("{start} (wrong delimiter, or an unquoted delimiter in a value?)"),
        )
    }

    /// Physical line of the record starting at or after byte `offset`.
    fn line_of(&self, offset: usize) -> u64 {
        let start = content_start(self.body, offset, self.comments, false);
        let (at, line) = match self.cursor.get() {
            (at, line) if at <= start => (at, line),
            _ => (0, self.base_line),
        };
        let line = line + line_ends(self.body, at, start);
        self.cursor.set((start, line));
        line
    }
}

/// A delimiter as named in messages.
fn delimiter_name(d: u8) -> String {
    match d {
        b'\t' => "tabs".into(),
        b',' => "commas".into(),
        b';' => "semicolons".into(),
        other => format!("\"{}\"", shown(&char::from(other).to_string())),
    }
}

/// Line ends (LF, CRLF or a lone CR) in `body[from..to]`.
fn line_ends(body: &[u8], from: usize, to: usize) -> u64 {
    let to = to.min(body.len());
    (from..to)
        .filter(|&i| body[i] == b'\n' || (body[i] == b'\r' && body.get(i + 1) != Some(&b'\n')))
        .count() as u64
}

/// First byte at or after `offset` that starts a line holding something: line ends are
/// skipped, comment lines when `comments` is set, and lines of spaces when `spaces` is (before
/// the header; later they are rows of empty fields, skipped as such).
fn content_start(body: &[u8], offset: usize, comments: bool, spaces: bool) -> usize {
    let mut i = offset.min(body.len());
    loop {
        while i < body.len() && (body[i] == b'\n' || body[i] == b'\r') {
            i += 1;
        }
        let end = body[i..]
            .iter()
            .position(|&b| b == b'\n' || b == b'\r')
            .map_or(body.len(), |p| i + p);
        let line = &body[i..end];
        let skip = (spaces && line.iter().all(u8::is_ascii_whitespace))
            || (comments && line.starts_with(b"#"));
        if i >= body.len() || !skip {
            return i;
        }
        i = end;
    }
}

/// The error for a file whose header is followed by no data row.
pub fn no_rows(file: &str) -> Error {
    Error::input(file, "no data rows after the header")
}

/// Default block of a streamed file: each block is parsed by one task.
pub const BLOCK_BYTES: usize = 1 << 18;

/// Blocks read ahead at once (parsed in parallel, then taken in file order).
const BLOCKS_PER_BATCH: usize = 8;

/// Whether byte `i` ends a line that can end a record: LF, or a CR not followed by LF. A CR
/// last in `bytes` is not one (its LF may be in the bytes not read yet).
fn line_end_at(bytes: &[u8], i: usize) -> bool {
    match bytes[i] {
        b'\n' => true,
        b'\r' => bytes.get(i + 1).is_some_and(|&b| b != b'\n'),
        _ => false,
    }
}

/// Where `bytes` (starting at the start of a record) can be cut between records: positions just
/// after a line end outside quotes, the first at or after `step`, each next one at least `step`
/// further, and the last such position in `bytes`. Quotes follow the csv reader's rules (a
/// quote opens a quoted field only at the start of a field; `""` inside one is a quote), so a
/// line break inside a quoted field is never a cut; without any quote the scan is a byte search.
fn record_ends(bytes: &[u8], delimiter: u8, step: usize) -> Vec<usize> {
    let step = step.max(1);
    let mut cuts = Vec::new();
    let mut target = step;
    let mut last = None;
    if !bytes.contains(&b'"') {
        let mut i = target - 1;
        while i < bytes.len() {
            match (i..bytes.len()).find(|&j| line_end_at(bytes, j)) {
                Some(j) => {
                    cuts.push(j + 1);
                    i = j.saturating_add(step);
                }
                None => break,
            }
        }
        if let Some(j) = (0..bytes.len()).rev().find(|&j| line_end_at(bytes, j)) {
            last = Some(j + 1);
        }
    } else {
        #[derive(PartialEq)]
        enum State {
            FieldStart,
            Unquoted,
            Quoted,
            QuoteInQuoted,
        }
        let mut state = State::FieldStart;
        for (i, &b) in bytes.iter().enumerate() {
            state = match state {
                State::Quoted if b == b'"' => State::QuoteInQuoted,
                State::Quoted => State::Quoted,
                State::FieldStart if b == b'"' => State::Quoted,
                State::QuoteInQuoted if b == b'"' => State::Quoted,
                _ if b == delimiter || b == b'\n' || b == b'\r' => State::FieldStart,
                _ => State::Unquoted,
            };
            if state == State::FieldStart && line_end_at(bytes, i) {
                last = Some(i + 1);
                if i + 1 >= target {
                    cuts.push(i + 1);
                    target = (i + 1).saturating_add(step);
                }
            }
        }
    }
    if let Some(last) = last {
        if cuts.last() != Some(&last) {
            cuts.push(last);
        }
    }
    cuts
}

/// Line ends (LF, CRLF or a lone CR) in a block that does not end between a CR and its LF.
fn count_line_ends(bytes: &[u8]) -> u64 {
    let lf = bytes.iter().filter(|&&b| b == b'\n').count();
    if !bytes.contains(&b'\r') {
        return lf as u64;
    }
    line_ends(bytes, 0, bytes.len())
}

/// Reads up to `want` bytes into `buf` in all; `true` at the end of the source.
fn fill(source: &mut impl Read, buf: &mut Vec<u8>, want: usize, file: &str) -> Result<bool> {
    while buf.len() < want {
        let missing = (want - buf.len()) as u64;
        let got = source
            .by_ref()
            .take(missing)
            .read_to_end(buf)
            .map_err(|e| Error::input(file, format!("cannot read: {e}")))?;
        if got == 0 {
            return Ok(true);
        }
    }
    Ok(false)
}

/// Reads a CSV file from `source` without holding it whole: bytes are read a batch of blocks at
/// a time (`block` bytes each, cut between records), each block's rows are handed to `parse`
/// (blocks of a batch in parallel, each with a [`CsvReader`] of the same header, delimiter and
/// rules, whose errors name the file's physical lines), and the results are given to `take` in
/// file order, so the first error in the file is the one reported. `columns` looks the columns
/// up in the header. Returns what `columns` made and the lower-case hex SHA-256 of every byte
/// read (hashed while the blocks are parsed). `settings.comments` must be false.
pub fn stream<C: Sync, T: Send>(
    file: &str,
    mut source: impl Read,
    settings: Settings,
    block: usize,
    columns: impl FnOnce(&CsvReader<'_>) -> Result<C>,
    parse: impl Fn(&C, &mut CsvReader<'_>) -> T + Sync,
    mut take: impl FnMut(&C, T) -> Result<()>,
) -> Result<(C, String)> {
    use rayon::prelude::*;
    use sha2::{Digest, Sha256};
    assert!(!settings.comments, "comment lines are not streamed");
    let block = block.max(1);
    let batch = block.saturating_mul(BLOCKS_PER_BATCH);
    let mut hasher = Sha256::new();
    let mut buf: Vec<u8> = Vec::new();
    // First batch: at least the header's first line (for the delimiter) and its whole record.
    let mut want = batch;
    let (mut eof, bom, delimiter, header_end) = loop {
        let eof = fill(&mut source, &mut buf, want, file)?;
        let bom = buf.len() - strip_bom(&buf).len();
        let body = &buf[bom..];
        let first = content_start(body, 0, false, true);
        let first_line_read = body[first..].iter().any(|&b| b == b'\n' || b == b'\r');
        if !eof && !first_line_read {
            want = want.saturating_mul(2);
            continue;
        }
        let delimiter = settings
            .delimiter
            .unwrap_or_else(|| detect_delimiter(&body[first..]));
        let header_end = record_ends(body, delimiter, first + 1).first().copied();
        if !eof && header_end.is_none() {
            want = want.saturating_mul(2);
            continue;
        }
        break (eof, bom, delimiter, header_end.unwrap_or(body.len()));
    };
    let mut line = 1;
    let mut start = bom;
    let mut hashed = 0;
    let mut layout: Option<(Layout, C)> = None;
    let mut columns = Some(columns);
    loop {
        let body = &buf[start..];
        let mut cuts = record_ends(body, delimiter, block);
        if layout.is_none() {
            // The first block holds the whole header record.
            cuts.retain(|&c| c >= header_end);
            if cuts.first() != Some(&header_end) {
                cuts.insert(0, header_end);
            }
        }
        if eof {
            cuts.retain(|&c| c < body.len());
            cuts.push(body.len());
        }
        let end = cuts.last().copied().unwrap_or(0);
        let mut blocks = Vec::with_capacity(cuts.len());
        let mut from = 0;
        for &cut in &cuts {
            if cut > from {
                blocks.push(&body[from..cut]);
            }
            from = cut;
        }
        let counts: Vec<u64> = blocks.par_iter().map(|b| count_line_ends(b)).collect();
        let mut starts = Vec::with_capacity(blocks.len());
        for n in &counts {
            starts.push(line);
            line += n;
        }
        let mut header = None;
        if layout.is_none() {
            let reader = CsvReader::new(file, &buf[..start + header_end], settings)?;
            let found = (columns.take().expect("columns looked up once"))(&reader)?;
            layout = Some((reader.layout(), found));
            header = Some(reader);
        }
        let (shape, found) = layout.as_ref().expect("header read");
        let new_bytes = &buf[hashed..start + end];
        let skip = usize::from(header.is_some());
        let (_, (first, rest)) = rayon::join(
            || hasher.update(new_bytes),
            || {
                let first = header.map(|mut r| parse(found, &mut r));
                let rest: Vec<T> = blocks[skip..]
                    .par_iter()
                    .zip(&starts[skip..])
                    .map(|(bytes, &at)| parse(found, &mut shape.reader(bytes, at)))
                    .collect();
                (first, rest)
            },
        );
        hashed = start + end;
        for result in first.into_iter().chain(rest) {
            take(found, result)?;
        }
        if eof {
            break;
        }
        // Keep the bytes after the last cut, then read the next batch (more when no record
        // ends in it).
        buf.drain(..start + end);
        hashed -= start + end;
        start = 0;
        let mut want = batch;
        loop {
            eof = fill(&mut source, &mut buf, want, file)?;
            if eof || !record_ends(&buf, delimiter, usize::MAX).is_empty() {
                break;
            }
            want = want.saturating_mul(2).max(buf.len() + batch);
        }
    }
    hasher.update(&buf[hashed..]);
    let hex = hasher
        .finalize()
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    let (_, found) = layout.expect("header read");
    Ok((found, hex))
}

/// What a block reader of a streamed file shares with the header's reader.
struct Layout {
    file: String,
    comments: bool,
    delimiter: u8,
    headers: Arc<[String]>,
    header_line: u64,
    width: usize,
}

impl Layout {
    /// A reader for a block of the file that starts at a record boundary on line `start_line`.
    fn reader<'b>(&self, body: &'b [u8], start_line: u64) -> CsvReader<'b> {
        let mut builder = csv::ReaderBuilder::new();
        builder
            .delimiter(self.delimiter)
            .flexible(true)
            .has_headers(false);
        if self.comments {
            builder.comment(Some(b'#'));
        }
        CsvReader {
            file: self.file.clone(),
            body,
            comments: self.comments,
            first: 0,
            delimiter: self.delimiter,
            headers: Arc::clone(&self.headers),
            header_line: self.header_line,
            width: self.width,
            reader: builder.from_reader(body),
            record: csv::ByteRecord::new(),
            offset: 0,
            cursor: Cell::new((0, start_line)),
            base_line: start_line,
        }
    }
}

/// One data row of a [`CsvReader`]: values checked on the way out, errors naming the file,
/// line and column.
pub struct Row<'r, 'a> {
    reader: &'r CsvReader<'a>,
}

impl Row<'_, '_> {
    /// Physical line where the row starts.
    pub fn line(&self) -> u64 {
        self.reader.line_of(self.reader.offset)
    }

    /// Number of fields (at least the header's, see [`CsvReader::next_row`]).
    pub fn field_count(&self) -> usize {
        self.reader.record.len()
    }

    /// Raw bytes of a field (empty beyond the row's end).
    pub fn raw(&self, column: usize) -> &[u8] {
        self.reader.record.get(column).unwrap_or_default()
    }

    /// Whether a field is empty or only spaces.
    pub fn is_blank(&self, column: usize) -> bool {
        self.raw(column).trim_ascii().is_empty()
    }

    /// A field as text, spaces around it removed; an error when it is not valid UTF-8.
    pub fn text(&self, column: usize) -> Result<&str> {
        std::str::from_utf8(self.raw(column))
            .map(str::trim)
            .map_err(|_| self.error(column, "value is not valid UTF-8 (save the file as UTF-8)"))
    }

    /// A field as a finite number written with a decimal point ([`parse_number`]).
    pub fn number(&self, column: usize) -> Result<f64> {
        self.parse(column, parse_number)
    }

    /// A field through a parser whose error message is placed at this row and column.
    pub fn parse<T>(
        &self,
        column: usize,
        parse: impl FnOnce(&str) -> std::result::Result<T, String>,
    ) -> Result<T> {
        parse(self.text(column)?).map_err(|m| self.error(column, m))
    }

    /// An error at this row and 0-based `column`.
    pub fn error(&self, column: usize, message: impl Into<String>) -> Error {
        self.reader.error_at(self.line(), column, message)
    }
}

/// Parses a number (spaces around it ignored): finite, decimal point, optional sign and
/// exponent. The error says what is wrong, and names a decimal comma or a thousands separator
/// when the text looks like one, with the number to write instead.
pub fn parse_number(raw: &str) -> std::result::Result<f64, String> {
    let text = raw.trim();
    if text.is_empty() {
        return Err("value is empty".into());
    }
    match text.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        Ok(v) => Err(format!("\"{}\" is not a finite number ({v})", shown(text))),
        Err(_) => Err(match separator_hint(text) {
            Some(hint) => format!("\"{}\" {hint}", shown(text)),
            None if text.ends_with('%') && text[..text.len() - 1].trim().parse::<f64>().is_ok() => {
                format!(
                    "\"{}\" is not a number (write it without the % sign)",
                    shown(text)
                )
            }
            None => format!("\"{}\" is not a number", shown(text)),
        }),
    }
}

/// Digits only (at least one).
fn digits(s: &str) -> bool {
    !s.is_empty() && s.bytes().all(|b| b.is_ascii_digit())
}

/// Splits a leading sign off.
fn sign(s: &str) -> (&str, &str) {
    match s.as_bytes().first() {
        Some(b'+' | b'-') => s.split_at(1),
        _ => ("", s),
    }
}

/// Groups of a number written with `sep` between thousands (`1,234,567`): the digits, when
/// every group after the first has three digits and the first one to three.
fn grouped(s: &str, sep: &[char]) -> Option<String> {
    let groups: Vec<&str> = s.split(|c| sep.contains(&c)).collect();
    (groups.len() >= 2
        && (1..=3).contains(&groups[0].len())
        && groups.iter().all(|g| digits(g))
        && groups[1..].iter().all(|g| g.len() == 3))
    .then(|| groups.concat())
}

/// What a number written with a decimal comma or thousands separators looks like, and the
/// plain number to write instead: `Some("looks like a decimal comma: write 0.004787")`.
pub fn separator_hint(text: &str) -> Option<String> {
    let (sign, rest) = sign(text.trim());
    // Decimal comma, possibly with dots (or spaces) between thousands: 1.234,5 or 0,004787.
    if let Some((whole, fraction)) = rest.split_once(',') {
        if digits(fraction) {
            let plain_whole = if digits(whole) {
                Some(whole.to_string())
            } else {
                grouped(whole, &['.', ' ', '\u{a0}', '\u{202f}', '\''])
            };
            if let Some(w) = plain_whole {
                let could_be_thousands = digits(whole)
                    && (1..=3).contains(&whole.len())
                    && !whole.starts_with('0')
                    && fraction.len() == 3;
                return Some(if could_be_thousands {
                    format!(
                        "looks like a thousands separator or a decimal comma: write {sign}{w}{fraction} or {sign}{w}.{fraction}"
                    )
                } else {
                    format!("looks like a decimal comma: write {sign}{w}.{fraction}")
                });
            }
        }
    }
    // Thousands separators with a decimal point or several groups: 1,234.5 or 1,234,567.
    let (whole, fraction) = match rest.split_once('.') {
        Some((w, f)) if f.is_empty() || digits(f) => (w, Some(f)),
        Some(_) => return None,
        None => (rest, None),
    };
    let plain = grouped(whole, &[',', ' ', '\u{a0}', '\u{202f}', '\'', '’', '_'])?;
    let fraction = fraction.map(|f| format!(".{f}")).unwrap_or_default();
    Some(format!(
        "looks like a thousands separator: write {sign}{plain}{fraction}"
    ))
}

/// In a row of a comma-separated file with too many fields, the neighbouring fields that read
/// as one number split at its comma (`0` and `004787`): the 0-based column of the first one and
/// what the value looks like. A fraction with a leading zero that cannot be a thousands group
/// (`0,004787`, `12,05`) settles it; otherwise a single candidate does, and two or more are
/// all named (the first two), since the file alone cannot say which was meant.
fn split_number(record: &csv::ByteRecord, delimiter: u8) -> Option<(usize, String)> {
    if delimiter != b',' {
        return None;
    }
    let field = |i: usize| std::str::from_utf8(record.get(i)?).ok().map(str::trim);
    // (column, joined text, plain number or hint, decisive)
    let mut candidates: Vec<(usize, String, String, bool)> = Vec::new();
    for i in 0..record.len().saturating_sub(1) {
        let (Some(a), Some(b)) = (field(i), field(i + 1)) else {
            continue;
        };
        let (_, whole) = sign(a);
        if !(digits(whole) || grouped(whole, &['.']).is_some()) || !digits(b) {
            continue;
        }
        let joined = format!("{a},{b}");
        let Some(hint) = separator_hint(&joined) else {
            continue;
        };
        let thousands = hint.contains("thousands");
        let decisive = b.len() >= 2 && b.starts_with('0') && !thousands;
        candidates.push((i, joined, hint, decisive));
    }
    if let Some((i, joined, hint, _)) = candidates.iter().find(|c| c.3) {
        return Some((*i, format!("\"{}\" {hint}", shown(joined))));
    }
    match candidates.as_slice() {
        [] => None,
        [(i, joined, hint, _)] => Some((*i, format!("\"{}\" {hint}", shown(joined)))),
        [(i, a, hint_a, _), (_, b, hint_b, _), ..] => {
            let write = |h: &str| {
                h.split_once(": ")
                    .map_or(String::new(), |w| w.1.to_string())
            };
            Some((
                *i,
                format!(
                    "a number split at a decimal comma or a thousands separator? \"{}\" ({}) or \"{}\" ({})",
                    shown(a),
                    write(hint_a),
                    shown(b),
                    write(hint_b)
                ),
            ))
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// All rows of a text, each as (line, fields), or the error message.
    fn rows(
        text: &str,
        settings: Settings,
    ) -> std::result::Result<Vec<(u64, Vec<String>)>, String> {
        let mut reader =
            CsvReader::new("t.csv", text.as_bytes(), settings).map_err(|e| e.to_string())?;
        let mut out = Vec::new();
        while let Some(row) = reader.next_row().map_err(|e| e.to_string())? {
            let fields = (0..row.field_count())
                .map(|i| row.text(i).unwrap().to_string())
                .collect();
            out.push((row.line(), fields));
        }
        Ok(out)
    }

    fn lines(text: &str, settings: Settings) -> Vec<u64> {
        rows(text, settings)
            .unwrap()
            .into_iter()
            .map(|r| r.0)
            .collect()
    }

    #[test]
    fn line_numbers_are_physical_lines() {
        let plain = Settings::default();
        // LF, CRLF, lone CR, blank lines, a quoted line break: the line an editor shows.
        assert_eq!(lines("a,b\n1,2\n3,4\n", plain), [2, 3]);
        assert_eq!(lines("a,b\r\n\r\n1,2\r\n3,4", plain), [3, 4]);
        assert_eq!(lines("a,b\r1,2\r\r3,4\r", plain), [2, 4]);
        assert_eq!(lines("a,b\n1,\"x\ny\"\n3,4\n", plain), [2, 4]);
        assert_eq!(lines("\n\na,b\n1,2\n", plain), [4]);
        // Comment lines only where the format allows them, counted either way.
        let comments = Settings {
            comments: true,
            ..Settings::default()
        };
        assert_eq!(
            lines("# made up\na,b\n# note\n1,2\n\n3,4\n", comments),
            [4, 6]
        );
        let reader = CsvReader::new("t.csv", b"# x\n\n# y\na,b\n1,2\n", comments).unwrap();
        assert_eq!(reader.header_line(), 4);
        assert_eq!(reader.headers(), ["a", "b"]);
        // Without comments a `#` line is the header (and the real header a row too long for it).
        assert!(rows("# x\na,b\n1,2\n", plain)
            .unwrap_err()
            .starts_with("t.csv line 2 column 2"));
    }

    #[test]
    fn field_counts_are_checked_against_the_header() {
        let plain = Settings::default();
        let err = rows("a,b,c\n1,2\n", plain).unwrap_err();
        assert!(
            err.starts_with("t.csv line 2 column 3 (\"c\"): row has 2 field(s)"),
            "{err}"
        );
        let err = rows("a,b\nx,y,z\n", plain).unwrap_err();
        assert!(
            err.starts_with("t.csv line 2 column 3 (\"beyond the header\"): row has 3 fields"),
            "{err}"
        );
        // Trailing delimiters, empty extra fields and a trailing delimiter on the header only.
        assert_eq!(rows("a,b\n1,2,\n3,4,,\n,,\n", plain).unwrap().len(), 2);
        assert_eq!(rows("a,b,\n1,2\n", plain).unwrap().len(), 1);
    }

    #[test]
    fn split_numbers_are_named() {
        let plain = Settings::default();
        let err = rows("age,qx\n52,0,004787\n", plain).unwrap_err();
        assert_eq!(
            err,
            "t.csv line 2 column 2 (\"qx\"): row has 3 fields but the header has 2: \"0,004787\" looks like a decimal comma: write 0.004787"
        );
        let err = rows("time,event\n1,234,1\n", plain).unwrap_err();
        assert!(err.contains("column 1 (\"time\")"), "{err}");
        assert!(err.contains("write 1234 or 1.234"), "{err}");
        // The first row of a risk table with 1,234 patients: two readings, both named.
        let err = rows("time,at_risk\n0,1,234\n", plain).unwrap_err();
        assert!(
            err.contains("\"0,1\" (write 0.1) or \"1,234\" (write 1234 or 1.234)"),
            "{err}"
        );
        let err = rows("age,qx_female,qx_male\n50,0,004,0,006\n", plain).unwrap_err();
        assert!(err.contains("column 2 (\"qx_female\")"), "{err}");
        assert!(
            err.ends_with("\"0,004\" looks like a decimal comma: write 0.004"),
            "{err}"
        );
        let err = rows("time;event\n5,1\n", plain).unwrap_err();
        assert!(
            err.ends_with("separated by semicolons but this row by commas"),
            "{err}"
        );
        // Not a split number: the plain message.
        let err = rows("arm,time\nA, low dose,5\n", plain).unwrap_err();
        assert!(err.contains("unquoted delimiter"), "{err}");
    }

    #[test]
    fn numbers_with_separators_say_what_to_write() {
        let hint = |s: &str| parse_number(s).unwrap_err();
        assert_eq!(
            hint("0,004787"),
            "\"0,004787\" looks like a decimal comma: write 0.004787"
        );
        assert_eq!(
            hint("-12,5"),
            "\"-12,5\" looks like a decimal comma: write -12.5"
        );
        assert_eq!(
            hint("1.234,5"),
            "\"1.234,5\" looks like a decimal comma: write 1234.5"
        );
        assert!(hint("1,234").contains("write 1234 or 1.234"));
        assert!(hint("0,250").ends_with("decimal comma: write 0.250"));
        assert!(hint("1,234,567").ends_with("thousands separator: write 1234567"));
        assert!(hint("1,234.5").ends_with("thousands separator: write 1234.5"));
        assert!(hint("12 345").ends_with("thousands separator: write 12345"));
        assert!(hint("5%").contains("without the % sign"));
        assert_eq!(hint("abc"), "\"abc\" is not a number");
        assert_eq!(hint(" "), "value is empty");
        assert!(hint("inf").contains("not a finite number"));
        assert_eq!(parse_number(" +.5 ").unwrap(), 0.5);
        assert_eq!(parse_number("1e2").unwrap(), 100.0);
    }

    #[test]
    fn encodings_and_empty_files_are_whole_file_errors() {
        let err = |b: &[u8]| {
            CsvReader::new("t.csv", b, Settings::default())
                .err()
                .unwrap()
                .to_string()
        };
        assert!(err(b"\xFF\xFEa\0,\0").contains("UTF-16"));
        assert!(err(b"").contains("empty"));
        assert!(err(b"\xEF\xBB\xBF \n\n").contains("empty"));
        let comments = Settings {
            comments: true,
            ..Settings::default()
        };
        assert!(CsvReader::new("t.csv", b"# only\n", comments).is_err());
        let reader =
            CsvReader::new("t.csv", b"\xEF\xBB\xBFa;b\n1;2\n", Settings::default()).unwrap();
        assert_eq!(
            (reader.delimiter(), reader.headers()),
            (b';', &["a".to_string(), "b".to_string()][..])
        );
    }

    #[test]
    fn columns_are_found_once_or_explained() {
        let reader =
            CsvReader::new("t.csv", b"\n\nTime,event,event\n", Settings::default()).unwrap();
        let err = reader.column("time").unwrap_err().to_string();
        assert!(err.starts_with("t.csv line 3 column"), "{err}");
        assert!(err.contains("did you mean \"Time\""), "{err}");
        let err = reader.column("event").unwrap_err().to_string();
        assert!(err.contains("line 3 column 3"), "{err}");
        let reader = CsvReader::new("t.csv", b"time|event\n", Settings::default()).unwrap();
        let err = reader.column("time").unwrap_err().to_string();
        assert!(err.contains("is \"|\" the delimiter"), "{err}");
        assert_eq!(reader.find("event").unwrap(), None);
    }
}
