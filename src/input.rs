//! Time-to-event CSV input: the one place where raw rows become a validated, sorted
//! [`Dataset`] that later code trusts without re-checking.
//!
//! Rows are read through the shared discipline of [`crate::csv_read`] (encoding, delimiter,
//! field counts, line numbers, number syntax); this module adds what a time-to-event file means.

use crate::csv_read::{CsvReader, Settings};
use crate::error::{Error, Result};
use crate::format::shown;
use rayon::prelude::*;
use sha2::{Digest, Sha256};
use std::path::Path;

/// How to read a time-to-event file.
#[derive(Debug, Clone)]
pub struct InputOptions {
    /// Column holding the time to event or censoring (data's time unit).
    pub time_col: String,
    /// Column holding 1 for an event and 0 for censoring.
    pub event_col: String,
    /// Optional column naming the arm; each arm is kept apart.
    pub arm_col: Option<String>,
    /// Field delimiter; detected from the header when `None`.
    pub delimiter: Option<u8>,
    /// Replacement for zero times (a stated small positive time); zero times are rejected when `None`.
    pub zero_time: Option<f64>,
}

impl Default for InputOptions {
    fn default() -> Self {
        InputOptions {
            time_col: "time".into(),
            event_col: "event".into(),
            arm_col: None,
            delimiter: None,
            zero_time: None,
        }
    }
}

/// One subject: time (in the data's unit, > 0) and whether the event was observed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Record {
    /// Time to event or censoring, strictly positive and finite.
    pub time: f64,
    /// `true` for an event, `false` for censoring.
    pub event: bool,
}

/// The records of one arm (or of the whole file without an arm column), sorted by time,
/// events before censorings at tied times.
#[derive(Debug, Clone)]
pub struct ArmData {
    /// Arm label; `None` without `--arm-col`.
    pub arm: Option<String>,
    /// Sorted, validated records.
    pub records: Vec<Record>,
}

impl ArmData {
    /// Number of events.
    pub fn events(&self) -> usize {
        self.records.iter().filter(|r| r.event).count()
    }

    /// Longest follow-up time.
    pub fn max_time(&self) -> f64 {
        self.records.last().map(|r| r.time).unwrap_or(0.0)
    }
}

/// A validated time-to-event data set.
#[derive(Debug, Clone)]
pub struct Dataset {
    /// File name as given by the user (for messages and outputs).
    pub file: String,
    /// SHA-256 of the file's bytes, lower-case hex.
    pub sha256: String,
    /// Arms in order of first appearance (one entry without an arm column).
    pub arms: Vec<ArmData>,
    /// Number of zero times replaced by `--zero-time`.
    pub zero_times_replaced: usize,
}

impl Dataset {
    /// Total number of subjects.
    pub fn n(&self) -> usize {
        self.arms.iter().map(|a| a.records.len()).sum()
    }

    /// Total number of events.
    pub fn events(&self) -> usize {
        self.arms.iter().map(|a| a.events()).sum()
    }
}

/// Number syntax shared by every reader and option value (kept here for older callers).
pub use crate::csv_read::parse_number;

/// Lower-case hex SHA-256 of some bytes.
pub fn sha256_hex(bytes: &[u8]) -> String {
    let digest = Sha256::digest(bytes);
    digest.iter().map(|b| format!("{b:02x}")).collect()
}

/// Reads and validates a time-to-event CSV file, streaming it (memory follows the number of
/// records, not the file's size).
pub fn load(path: &Path, options: &InputOptions) -> Result<Dataset> {
    let file = path.display().to_string();
    let source =
        std::fs::File::open(path).map_err(|e| Error::input(&file, format!("cannot read: {e}")))?;
    read(&file, source, options, crate::csv_read::BLOCK_BYTES)
}

/// Most distinct arms accepted; more means `--arm-col` probably names a subject identifier.
pub const MAX_ARMS: usize = 1000;

/// The words every "say the time unit" message uses: the units and, when known, the range of
/// the times (`"; they run from 0.3 to 40.2"`), so the user can tell days from months.
pub fn time_unit_needed(what: &str, file: &str, range: Option<(f64, f64)>) -> String {
    let units: Vec<&str> = crate::units::ALL_UNITS.iter().map(|u| u.name()).collect();
    // Four significant digits, no trailing zeros: "0.3", "40.25", "1.5e+06".
    let short = |x: f64| {
        if x == 0.0 || !x.is_finite() {
            return format!("{x}");
        }
        // Rounded by the formatter (correctly), then printed in its shortest form.
        let r: f64 = format!("{x:.3e}").parse().unwrap_or(x);
        if (1e-4..1e7).contains(&r.abs()) {
            format!("{r}")
        } else {
            format!("{r:e}")
        }
    };
    let range = range
        .map(|(lo, hi)| format!("; they run from {} to {}", short(lo), short(hi)))
        .unwrap_or_default();
    format!(
        "{what} is required: say what the times in {} are in ({}){range}",
        shown(file),
        units.join(", ")
    )
}

/// Smallest and largest value of the numeric column `column`, over the rows that read cleanly
/// (best effort, for messages: `None` when the file or the column cannot be read).
pub fn column_range(bytes: &[u8], column: &str) -> Option<(f64, f64)> {
    let mut reader = CsvReader::new("", bytes, Settings::default()).ok()?;
    let idx = reader.column(column).ok()?;
    let mut range: Option<(f64, f64)> = None;
    while let Ok(Some(row)) = reader.next_row() {
        if let Ok(v) = row.number(idx) {
            range = Some(range.map_or((v, v), |(lo, hi)| (lo.min(v), hi.max(v))));
        }
    }
    range
}

impl Dataset {
    /// Smallest and largest time over every arm.
    pub fn time_range(&self) -> Option<(f64, f64)> {
        let times = self
            .arms
            .iter()
            .flat_map(|a| a.records.iter().map(|r| r.time));
        times.fold(None, |acc, t| {
            Some(acc.map_or((t, t), |(lo, hi): (f64, f64)| (lo.min(t), hi.max(t))))
        })
    }
}

/// Validates the bytes of a time-to-event CSV into a sorted dataset.
pub fn parse(file: &str, bytes: &[u8], options: &InputOptions) -> Result<Dataset> {
    read(file, bytes, options, crate::csv_read::BLOCK_BYTES)
}

/// Columns of a time-to-event file, looked up in its header.
struct Columns {
    time: usize,
    event: usize,
    /// The arm column and its name as in the header.
    arm: Option<(usize, String)>,
}

/// The rows of one block: the block's arms in order of first appearance (with the line where
/// each first appears), the records of each, and the error that stopped the block, if any.
#[derive(Default)]
struct Block {
    records: Vec<Vec<Record>>,
    arms: Vec<(Option<String>, u64)>,
    zero_times_replaced: usize,
    error: Option<Error>,
}

impl Block {
    /// Adds `record` to `arm` (`None` without an arm column), an arm's first appearance kept
    /// with `line()`. `false`, the record left out, when its arm is the one that brings the
    /// block past [`MAX_ARMS`] (kept, so that [`read`] names its row).
    fn push(
        &mut self,
        slots: &mut std::collections::HashMap<String, u32>,
        arm: Option<&str>,
        line: impl FnOnce() -> u64,
        record: Record,
    ) -> bool {
        let slot = match arm {
            Some(value) => match slots.get(value) {
                Some(&slot) => slot,
                None => {
                    let slot = self.arms.len() as u32;
                    slots.insert(value.to_string(), slot);
                    self.arms.push((Some(value.to_string()), line()));
                    self.records.push(Vec::new());
                    if self.arms.len() > MAX_ARMS {
                        return false;
                    }
                    slot
                }
            },
            None => {
                if self.arms.is_empty() {
                    // The line is only for the too-many-arms error, which needs an arm column.
                    self.arms.push((None, 0));
                    self.records.push(Vec::new());
                }
                0
            }
        };
        self.records[slot as usize].push(record);
        true
    }
}

/// Reads the rows of one block (see [`Block`]): plain rows by the fast path, any block it
/// leaves by the full reader (same records; the errors and their lines).
fn read_block(columns: &Columns, options: &InputOptions, reader: &mut CsvReader<'_>) -> Block {
    if let Some(block) = plain_block(columns, reader) {
        return block;
    }
    let mut block = Block::default();
    let mut slots: std::collections::HashMap<String, u32> = std::collections::HashMap::new();
    if let Err(e) = read_rows(columns, options, reader, &mut block, &mut slots) {
        block.error = Some(e);
    }
    block
}

/// The rows of a block of plain rows ([`CsvReader::plain_rows`]) whose values need none of
/// the full reader's care: times written as plain numbers (digits, sign, point, exponent)
/// that are finite and positive, events `0`, `1`, `0.0` or `1.0`, arms in ASCII without
/// spaces around them. `None` for any other block, which [`read_rows`] then reads.
fn plain_block(columns: &Columns, reader: &CsvReader<'_>) -> Option<Block> {
    let mut block = Block::default();
    let mut slots: std::collections::HashMap<String, u32> = std::collections::HashMap::new();
    let plain = reader.plain_rows(|fields, line| {
        let Some(time) = plain_number(fields[columns.time]) else {
            return false;
        };
        let event = match fields[columns.event] {
            b"1" | b"1.0" => true,
            b"0" | b"0.0" => false,
            _ => return false,
        };
        let arm = match &columns.arm {
            Some((idx, _)) => {
                let value = fields[*idx];
                let spaced = |b: Option<&u8>| b.is_none_or(|&b| (b as char).is_whitespace());
                if !value.is_ascii() || spaced(value.first()) || spaced(value.last()) {
                    return false;
                }
                match std::str::from_utf8(value) {
                    Ok(text) => Some(text),
                    Err(_) => return false,
                }
            }
            None => None,
        };
        block.push(&mut slots, arm, || line, Record { time, event })
    });
    plain.then_some(block)
}

/// A field of digits, sign, point and exponent that parses as a finite positive number
/// (what [`crate::csv_read::parse_number`] gives for it); `None` for anything else.
fn plain_number(field: &[u8]) -> Option<f64> {
    if field.is_empty()
        || !field
            .iter()
            .all(|&b| b.is_ascii_digit() || matches!(b, b'.' | b'+' | b'-' | b'e' | b'E'))
    {
        return None;
    }
    let value: f64 = std::str::from_utf8(field).ok()?.parse().ok()?;
    (value.is_finite() && value > 0.0).then_some(value)
}

/// The loop of [`read_block`]; stops at the first bad row, or at the row bringing the block's
/// arms past [`MAX_ARMS`] (the file's arms are then past it too; [`read`] names the row).
fn read_rows(
    columns: &Columns,
    options: &InputOptions,
    reader: &mut CsvReader<'_>,
    block: &mut Block,
    slots: &mut std::collections::HashMap<String, u32>,
) -> Result<()> {
    let (time_idx, event_idx) = (columns.time, columns.event);
    while let Some(row) = reader.next_row()? {
        let mut time = row.number(time_idx)?;
        if time < 0.0 {
            return Err(row.error(time_idx, format!("time {time} is negative")));
        }
        if time == 0.0 {
            match options.zero_time {
                Some(replacement) => {
                    time = replacement;
                    block.zero_times_replaced += 1;
                }
                None => {
                    return Err(row.error(
                        time_idx,
                        "time is 0; survival times must be positive (add --zero-time VALUE to replace zero times by a stated small positive time, e.g. half a day)",
                    ))
                }
            }
        }
        let event = match row.text(event_idx)? {
            "1" | "1.0" => true,
            "0" | "0.0" => false,
            other => {
                return Err(row.error(
                    event_idx,
                    format!(
                        "event must be 1 (event) or 0 (censored), got \"{}\"",
                        shown(other)
                    ),
                ))
            }
        };
        let arm = match &columns.arm {
            Some((idx, _)) => {
                let value = row.text(*idx)?;
                if value.is_empty() {
                    return Err(row.error(*idx, "arm is empty"));
                }
                Some(value)
            }
            None => None,
        };
        if !block.push(slots, arm, || row.line(), Record { time, event }) {
            return Ok(());
        }
    }
    Ok(())
}

/// Sorts records by time, events before censorings at equal times. Records equal in this
/// order are identical, so an unstable sort gives the same result without a buffer (and in
/// parallel, whatever the number of threads). When every time has its sign bit clear (the
/// file's times are checked to be positive, so unless a negative `zero_time` replaced a 0),
/// the order is that of one integer per record, the time's bits with the event below them,
/// which sorts faster than comparing records.
fn sort_records(records: &mut Vec<Record>, zero_time: Option<f64>) {
    if zero_time.is_none_or(|z| z.is_sign_positive()) {
        let key = |r: &Record| (r.time.to_bits() << 1) | u64::from(!r.event);
        let mut keys: Vec<u64> = records.par_iter().map(key).collect();
        keys.par_sort_unstable();
        records.par_iter_mut().zip(keys).for_each(|(r, k)| {
            *r = Record {
                time: f64::from_bits(k >> 1),
                event: k & 1 == 0,
            }
        });
    } else {
        records.par_sort_unstable_by(|a, b| {
            a.time
                .total_cmp(&b.time)
                .then_with(|| b.event.cmp(&a.event))
        });
    }
}

/// [`parse`] from any source, in blocks of `block` bytes (parsed in parallel; the result and
/// the first error reported do not depend on `block`). The checksum is of every byte read.
pub fn read(
    file: &str,
    source: impl std::io::Read,
    options: &InputOptions,
    block: usize,
) -> Result<Dataset> {
    let mut arms: Vec<ArmData> = Vec::new();
    let mut arm_slots: std::collections::HashMap<Option<String>, usize> =
        std::collections::HashMap::new();
    let mut zero_times_replaced = 0;
    let settings = Settings {
        delimiter: options.delimiter,
        comments: false,
    };
    let look_up = |reader: &CsvReader<'_>| -> Result<Columns> {
        let time = reader.column(&options.time_col)?;
        let event = reader.column(&options.event_col)?;
        let arm = match &options.arm_col {
            Some(name) => Some((reader.column(name)?, name.clone())),
            None => None,
        };
        Ok(Columns { time, event, arm })
    };
    let take = |columns: &Columns, block: Block| -> Result<()> {
        for ((arm, line), records) in block.arms.into_iter().zip(block.records) {
            let slot = match arm_slots.get(&arm) {
                Some(&i) => i,
                None => {
                    if arms.len() == MAX_ARMS {
                        let (idx, name) = columns.arm.clone().unwrap_or((0, String::new()));
                        return Err(Error::at(
                            file,
                            line,
                            idx + 1,
                            &name,
                            format!(
                                "more than {MAX_ARMS} distinct arms; does --arm-col name the treatment arm rather than a subject identifier?"
                            ),
                        ));
                    }
                    arm_slots.insert(arm.clone(), arms.len());
                    arms.push(ArmData {
                        arm,
                        records: Vec::new(),
                    });
                    arms.len() - 1
                }
            };
            arms[slot].records.extend(records);
        }
        zero_times_replaced += block.zero_times_replaced;
        match block.error {
            Some(e) => Err(e),
            None => Ok(()),
        }
    };
    let (_, sha256) = crate::csv_read::stream(
        file,
        source,
        settings,
        block,
        look_up,
        |columns, reader| read_block(columns, options, reader),
        take,
    )?;
    if arms.is_empty() {
        return Err(crate::csv_read::no_rows(file));
    }
    for arm in &mut arms {
        sort_records(&mut arm.records, options.zero_time);
        if arm.events() == 0 {
            let which = arm
                .arm
                .as_ref()
                .map(|a| format!("arm \"{}\" has ", shown(a)))
                .unwrap_or_default();
            return Err(Error::input(
                file,
                format!(
                    "{which}no events (every row is censored): no family can be fitted, since every family needs at least one event to estimate its rate"
                ),
            ));
        }
    }
    Ok(Dataset {
        file: file.to_string(),
        sha256,
        arms,
        zero_times_replaced,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse_str(text: &str) -> Result<Dataset> {
        parse("test.csv", text.as_bytes(), &InputOptions::default())
    }

    #[test]
    fn reads_semicolons_bom_crlf_and_quotes() {
        let data = parse_str("\u{feff}time;event\r\n\"3.5\";1\r\n2;0\r\n2;1\r\n").unwrap();
        let r = &data.arms[0].records;
        assert_eq!(r.len(), 3);
        // Sorted by time, events before censorings at a tie.
        assert_eq!(
            r[0],
            Record {
                time: 2.0,
                event: true
            }
        );
        assert_eq!(
            r[1],
            Record {
                time: 2.0,
                event: false
            }
        );
        assert_eq!(r[2].time, 3.5);
    }

    #[test]
    fn errors_name_line_and_column() {
        let err = parse_str("id,time,event\n1,5,1\n2,-3,0\n")
            .unwrap_err()
            .to_string();
        assert_eq!(
            err,
            "test.csv line 3 column 2 (\"time\"): time -3 is negative"
        );
        let err = parse_str("time,event\n5,2\n").unwrap_err().to_string();
        assert!(err.contains("line 2 column 2"), "{err}");
        let err = parse_str("time,event\n0,1\n").unwrap_err().to_string();
        assert!(err.contains("--zero-time"), "{err}");
        let err = parse_str("time,event\nNaN,1\n").unwrap_err().to_string();
        assert!(err.contains("not a finite number"), "{err}");
        let err = parse_str("tme,event\n1,1\n").unwrap_err().to_string();
        assert!(err.contains("did you mean \"tme\""), "{err}");
        let err = parse_str("time,event\n4,0\n").unwrap_err().to_string();
        assert!(err.contains("no events"), "{err}");
        assert!(parse_str("").is_err());
        assert!(parse_str("time,event\n")
            .unwrap_err()
            .to_string()
            .contains("no data rows"));
    }

    #[test]
    fn the_time_unit_message_lists_the_units_and_the_range() {
        assert_eq!(
            time_unit_needed("--time-unit", "data.csv", Some((0.3, 40.249))),
            "--time-unit is required: say what the times in data.csv are in (days, weeks, months, years); they run from 0.3 to 40.25"
        );
        assert!(
            time_unit_needed("x", "d.csv", Some((0.01, 1.5e6))).ends_with("from 0.01 to 1500000")
        );
        assert!(time_unit_needed("x", "d.csv", Some((1e-5, 2.5e8))).ends_with("from 1e-5 to 2.5e8"));
        assert!(time_unit_needed("x", "d.csv", None).ends_with("years)"));
        let data = parse_str("time,event\n3,1\n0.5,0\n12,1\n").unwrap();
        assert_eq!(data.time_range(), Some((0.5, 12.0)));
        assert_eq!(
            column_range(b"a,time\nx,4\ny,-2\nz,q\n", "time"),
            Some((-2.0, 4.0))
        );
        assert_eq!(column_range(b"a,b\n1,2\n", "time"), None);
    }

    #[test]
    fn zero_time_replacement_is_counted() {
        let options = InputOptions {
            zero_time: Some(0.5),
            ..InputOptions::default()
        };
        let data = parse("z.csv", b"time,event\n0,1\n3,0\n", &options).unwrap();
        assert_eq!(data.zero_times_replaced, 1);
        assert_eq!(data.arms[0].records[0].time, 0.5);
    }

    #[test]
    fn arms_are_kept_apart_in_order_of_appearance() {
        let options = InputOptions {
            arm_col: Some("arm".into()),
            ..InputOptions::default()
        };
        let data = parse("a.csv", b"time,event,arm\n1,1,B\n2,1,A\n3,0,B\n", &options).unwrap();
        assert_eq!(data.arms.len(), 2);
        assert_eq!(data.arms[0].arm.as_deref(), Some("B"));
        assert_eq!(data.arms[0].records.len(), 2);
    }

    #[test]
    fn extra_non_empty_field_is_rejected_not_ignored() {
        // Before: "2,0,1" under a two-column header was read as time 2, censored, dropping the 1.
        let err = parse_str("time,event\n2,0,1\n3,1\n")
            .unwrap_err()
            .to_string();
        // Now also named as a possible decimal comma, at the first field of the split value.
        assert!(err.contains("line 2 column 1"), "{err}");
        assert!(
            err.contains("\"2,0\" (write 2.0) or \"0,1\" (write 0.1)"),
            "{err}"
        );
        let err = parse_str("time,event,note\n2,1\n").unwrap_err().to_string();
        assert!(err.contains("line 2 column 3"), "{err}");
        // Trailing delimiters (empty extra fields) and all-empty rows are harmless.
        let data = parse_str("time,event\n2,1,\n3,0,,\n,,\n").unwrap();
        assert_eq!(data.n(), 2);
    }

    #[test]
    fn line_numbers_count_blank_lines_and_lone_carriage_returns() {
        let err = parse_str("time,event\n\n\n1,1\n\n2,x\n")
            .unwrap_err()
            .to_string();
        assert!(err.contains("line 6 "), "{err}");
        let err = parse_str("time,event\r1,1\r2,x\r").unwrap_err().to_string();
        assert!(err.contains("line 3 "), "{err}");
        let err = parse_str("time,event\r\n\r\n1,1\r\n2,x\r\n")
            .unwrap_err()
            .to_string();
        assert!(err.contains("line 4 "), "{err}");
    }

    #[test]
    fn messages_stay_short_and_on_one_line() {
        let long = "9".repeat(100_000);
        let err = parse_str(&format!("time,event\n{long}\u{1b}\n"))
            .unwrap_err()
            .to_string();
        assert!(err.len() < 300, "{} bytes", err.len());
        let err = parse_str("ti\rme\0,event\n1,1\n").unwrap_err().to_string();
        assert!(!err.chars().any(|c| c.is_control()), "{err:?}");
        let err = parse("u.csv", b"\xFF\xFEt\0i\0", &InputOptions::default())
            .unwrap_err()
            .to_string();
        assert!(err.contains("UTF-16"), "{err}");
    }

    #[test]
    fn subject_identifiers_as_arms_are_refused() {
        let options = InputOptions {
            arm_col: Some("id".into()),
            ..InputOptions::default()
        };
        let mut text = String::from("time,event,id\n");
        for i in 0..=MAX_ARMS {
            text.push_str(&format!("{},1,S{i}\n", i + 1));
        }
        let err = parse("ids.csv", text.as_bytes(), &options)
            .unwrap_err()
            .to_string();
        assert!(
            err.contains(&format!("line {} column 3", MAX_ARMS + 2)),
            "{err}"
        );
    }
}
