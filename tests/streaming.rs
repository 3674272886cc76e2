//! The streamed time-to-event loader (src/input.rs over `csv_read::stream`) against a naive
//! reference written here: the whole file parsed at once by the csv crate (its own reader, not
//! the project's), rows of empty fields skipped, values taken from the named columns. Files are
//! generated from a fixed seed with quoted fields, doubled quotes, line breaks inside quotes,
//! CRLF, a byte-order mark, blank lines and trailing blank lines; each is read with block sizes
//! from 1 byte to larger than the file, so block cuts fall everywhere. Expected error places are
//! counted here from the generated text (common practice for CSV: the header is line 1, an
//! editor's line numbers). The checksum is checked against the sha2 crate on the same bytes and
//! against coreutils `sha256sum data/demo_trial.csv` (run by hand, value below).

use sha2::{Digest, Sha256};
use tunnelcast::input::{self, InputOptions, Record, MAX_ARMS};

/// splitmix64 (Steele, Lea and Flood 2014): a small seeded generator for the test files.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }
    fn chance(&mut self, percent: u64) -> bool {
        self.below(100) < percent
    }
}

/// Block sizes tried: every cut position on small files, a few on large ones, and one block.
const BLOCKS: [usize; 7] = [1, 2, 3, 17, 256, 4096, 1 << 30];

/// A generated file: its bytes and, per data row, the physical line where it starts.
struct Generated {
    bytes: Vec<u8>,
    row_lines: Vec<u64>,
}

/// Writes a time-to-event file of `rows` rows: columns id, time, note, event, arm, `newline`
/// between lines. When `quoted`, the note has commas, doubled quotes and line breaks inside
/// quotes and some times are quoted; otherwise no field is quoted (the loader's fast path for
/// plain rows), with now and then a value it leaves to the full reader: spaces around a time,
/// an exponent, `1.0`/`0.0` events, an arm with a space inside or a non-ASCII letter.
fn generate(
    rng: &mut Rng,
    rows: usize,
    newline: &str,
    bom: bool,
    arms: usize,
    quoted: bool,
) -> Generated {
    let mut text = String::new();
    if bom {
        text.push('\u{feff}');
    }
    let mut line = 1u64;
    let mut row_lines = Vec::new();
    let push_line = |text: &mut String, line: &mut u64, content: &str| {
        text.push_str(content);
        text.push_str(newline);
        *line += content.matches('\n').count() as u64 + 1;
    };
    push_line(&mut text, &mut line, "id,time,\"note\",event,arm");
    for i in 0..rows {
        if rng.chance(5) {
            push_line(&mut text, &mut line, "");
        }
        if rng.chance(3) {
            push_line(&mut text, &mut line, ",,,,");
        }
        let time = format!("{}.{:02}", 1 + rng.below(900), rng.below(100));
        let time = match (quoted, rng.below(100)) {
            (true, 0..20) => format!("\"{time}\""),
            (false, 0..2) => format!(" {time}"),
            (false, 2..4) => format!("{time}e0"),
            _ => time,
        };
        let event = match (quoted, rng.chance(60), rng.chance(3)) {
            (false, true, true) => "1.0",
            (false, false, true) => "0.0",
            (_, true, _) => "1",
            (_, false, _) => "0",
        };
        let note = match (quoted, rng.below(6)) {
            (_, 0) => String::new(),
            (true, 2) => "\"a, b\"".to_string(),
            (true, 3) => "\"said \"\"fine\"\"\"".to_string(),
            // A line break inside quotes (in the file's own line ending).
            (true, 4) => format!("\"first{newline}second\""),
            (true, 5) => "\"\"".to_string(),
            _ => "plain".to_string(),
        };
        let arm = match (quoted, rng.below(100)) {
            (false, 0) => "arm 0".to_string(),
            (false, 1) => "armé".to_string(),
            _ => format!("arm{}", rng.below(arms as u64)),
        };
        row_lines.push(line);
        push_line(
            &mut text,
            &mut line,
            &format!("S{i},{time},{note},{event},{arm}"),
        );
    }
    for _ in 0..rng.below(3) {
        text.push_str(newline);
    }
    Generated {
        bytes: text.into_bytes(),
        row_lines,
    }
}

/// Reference: arms in order of first appearance, each with its records sorted by time, events
/// first at ties; read by the csv crate from the whole text.
fn reference(bytes: &[u8], arm: bool) -> Vec<(Option<String>, Vec<Record>)> {
    let text = std::str::from_utf8(bytes).unwrap();
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let mut reader = csv::ReaderBuilder::new()
        .flexible(true)
        .from_reader(text.as_bytes());
    let header: Vec<String> = reader
        .headers()
        .unwrap()
        .iter()
        .map(|h| h.trim().to_string())
        .collect();
    let col = |name: &str| header.iter().position(|h| h == name).unwrap();
    let (t, e, a) = (col("time"), col("event"), col("arm"));
    let mut out: Vec<(Option<String>, Vec<Record>)> = Vec::new();
    for record in reader.records() {
        let record = record.unwrap();
        if record.iter().all(|f| f.trim().is_empty()) {
            continue;
        }
        let time: f64 = record[t].trim().parse().unwrap();
        let event = matches!(record[e].trim(), "1" | "1.0");
        let key = arm.then(|| record[a].trim().to_string());
        match out.iter_mut().find(|(k, _)| *k == key) {
            Some((_, records)) => records.push(Record { time, event }),
            None => out.push((key, vec![Record { time, event }])),
        }
    }
    for (_, records) in &mut out {
        records.sort_by(|x, y| {
            x.time
                .partial_cmp(&y.time)
                .unwrap()
                .then(y.event.cmp(&x.event))
        });
    }
    out
}

fn options(arm: bool) -> InputOptions {
    InputOptions {
        arm_col: arm.then(|| "arm".to_string()),
        ..InputOptions::default()
    }
}

fn sha256(bytes: &[u8]) -> String {
    Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

#[test]
fn streamed_reading_equals_a_whole_file_reference_at_every_block_size() {
    let mut rng = Rng(20261204);
    for case in 0..24 {
        let newline = ["\n", "\r\n", "\r"][case % 3];
        let bom = case % 2 == 1;
        let rows = if case % 12 < 9 { 40 } else { 3000 };
        let file = generate(&mut rng, rows, newline, bom, 1 + case % 4, case < 12);
        for arm in [false, true] {
            let expected = reference(&file.bytes, arm);
            for block in BLOCKS {
                if rows > 100 && block < 17 {
                    continue;
                }
                let data = input::read("g.csv", &file.bytes[..], &options(arm), block)
                    .unwrap_or_else(|e| panic!("case {case} block {block}: {e}"));
                let got: Vec<(Option<String>, Vec<Record>)> = data
                    .arms
                    .iter()
                    .map(|a| (a.arm.clone(), a.records.clone()))
                    .collect();
                assert_eq!(got, expected, "case {case} arm {arm} block {block}");
                assert_eq!(
                    data.sha256,
                    sha256(&file.bytes),
                    "case {case} block {block}"
                );
            }
        }
    }
}

#[test]
fn an_error_in_a_late_block_names_the_line_counted_in_the_file() {
    let mut rng = Rng(7);
    for (newline, bad, column, expect) in [
        ("\n", "-4", 2, "time -4 is negative"),
        (
            "\r\n",
            "2",
            4,
            "event must be 1 (event) or 0 (censored), got \"2\"",
        ),
        ("\r", "3,5", 2, "row has 6 fields but the header has 5"),
    ] {
        for quoted in [true, false] {
            let file = generate(&mut rng, 2000, newline, true, 2, quoted);
            let text = String::from_utf8(file.bytes.clone()).unwrap();
            // Replace one late row (row 1900) by a bad one, keeping its place and line count.
            let target = 1900;
            let line = file.row_lines[target];
            let bad_row = match column {
                2 => format!("S{target},{bad},,1,arm0"),
                _ => format!("S{target},5.5,,{bad},arm0"),
            };
            let lines: Vec<&str> = text.split(newline).collect();
            // The physical line `line` is item line-1 of the split (quoted breaks are lines too).
            let mut replaced: Vec<String> = lines.iter().map(|l| l.to_string()).collect();
            let old = &replaced[(line - 1) as usize];
            let old_breaks = if old.ends_with("\"first") { 1 } else { 0 };
            replaced[(line - 1) as usize] = bad_row;
            if old_breaks == 1 {
                // The old row went on to the next line (a quoted break): drop that part.
                replaced.remove(line as usize);
            }
            let bytes = replaced.join(newline).into_bytes();
            for block in [64, 1000, 1 << 20, 1 << 30] {
                let err = input::read("late.csv", &bytes[..], &options(true), block)
                    .unwrap_err()
                    .to_string();
                assert!(
                    err.starts_with(&format!("late.csv line {line} column {column} ")),
                    "block {block}: {err}"
                );
                assert!(err.contains(expect), "block {block}: {err}");
            }
        }
    }
}

#[test]
fn decimal_commas_are_refused_saying_so_in_any_block() {
    let mut text = String::from("time;event\n");
    for i in 0..5000 {
        text.push_str(&format!("{}.5;{}\n", i % 90 + 1, i % 2));
    }
    let line = 5000 - 10 + 2;
    let mut rows: Vec<String> = text.lines().map(str::to_string).collect();
    rows[line - 1] = "12,25;1".into();
    let bytes = (rows.join("\n") + "\n").into_bytes();
    for block in [1, 100, 4096, 1 << 30] {
        let err = input::read("dc.csv", &bytes[..], &InputOptions::default(), block)
            .unwrap_err()
            .to_string();
        assert_eq!(
            err,
            format!(
                "dc.csv line {line} column 1 (\"time\"): \"12,25\" looks like a decimal comma: write 12.25"
            ),
            "block {block}"
        );
    }
    // In a comma-separated file the split value is named from the row's field count.
    let mut text = String::from("time,event\n");
    for i in 0..3000 {
        text.push_str(&format!("{}.5,1\n", i % 90 + 1));
    }
    text.push_str("0,004787,1\n");
    for block in [1, 100, 1 << 30] {
        let err = input::read("dc.csv", text.as_bytes(), &InputOptions::default(), block)
            .unwrap_err()
            .to_string();
        assert!(
            err.starts_with("dc.csv line 3002 column 1 (\"time\"): row has 3 fields"),
            "{err}"
        );
        assert!(err.ends_with("write 0.004787"), "{err}");
    }
}

#[test]
fn too_many_arms_are_named_at_the_row_where_they_pass_the_limit() {
    let mut text = String::from("time,event,id\n\n");
    for i in 0..MAX_ARMS + 50 {
        text.push_str(&format!("{},1,S{}\n", i % 30 + 1, i));
    }
    // Header line 1, a blank line 2, arm S0 on line 3: arm number MAX_ARMS + 1 is on line
    // MAX_ARMS + 3.
    for block in [1, 50, 4096, 1 << 30] {
        let options = InputOptions {
            arm_col: Some("id".into()),
            ..InputOptions::default()
        };
        let err = input::read("ids.csv", text.as_bytes(), &options, block)
            .unwrap_err()
            .to_string();
        assert!(
            err.starts_with(&format!(
                "ids.csv line {} column 3 (\"id\"): more than {MAX_ARMS} distinct arms",
                MAX_ARMS + 3
            )),
            "block {block}: {err}"
        );
    }
}

#[test]
fn the_checksum_of_a_file_is_unchanged_by_streaming() {
    // `sha256sum data/demo_trial.csv` (GNU coreutils), run by hand on the committed file.
    const DEMO_SHA256: &str = "2bb9f51a25c04f22990a44d7f66a18091a29b9fff9e84574c64fa6291439808a";
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("data/demo_trial.csv");
    let data = input::load(&path, &InputOptions::default()).unwrap();
    assert_eq!(data.sha256, DEMO_SHA256);
    let bytes = std::fs::read(&path).unwrap();
    for block in [1, 333, 1 << 30] {
        let again = input::read(
            "demo_trial.csv",
            &bytes[..],
            &InputOptions::default(),
            block,
        )
        .unwrap();
        assert_eq!(again.sha256, DEMO_SHA256, "block {block}");
        assert_eq!(again.arms[0].records, data.arms[0].records);
    }
}

#[test]
fn whole_file_errors_are_the_same_in_every_block_size() {
    for (bytes, expect) in [
        (
            &b""[..],
            "dg.csv: file is empty (expected a header row, then data rows)",
        ),
        (
            &b"\xEF\xBB\xBF\n \n"[..],
            "dg.csv: file is empty (expected a header row, then data rows)",
        ),
        (
            &b"\n\ntime,event\n\n\n"[..],
            "dg.csv: no data rows after the header",
        ),
        (&b"time,event\r\n4,0\r\n\r\n"[..], "no events"),
        (&b"\xFF\xFEt\0i\0"[..], "UTF-16"),
    ] {
        for block in [1, 2, 5, 1 << 30] {
            let err = input::read("dg.csv", bytes, &InputOptions::default(), block)
                .unwrap_err()
                .to_string();
            assert!(err.contains(expect), "block {block}: {err}");
        }
    }
    // A header whose quoted name holds a line break, cut at every byte.
    let text = b"\"ti\nme\",time,event\nx,3,1\ny,4,0\n";
    for block in 1..text.len() + 2 {
        let data = input::read("q.csv", &text[..], &InputOptions::default(), block).unwrap();
        assert_eq!(data.n(), 2, "block {block}");
        let err = input::read(
            "q.csv",
            &b"\"ti\nme\",time,event\nx,3,1\ny,4,z\n"[..],
            &InputOptions::default(),
            block,
        )
        .unwrap_err()
        .to_string();
        assert!(
            err.starts_with("q.csv line 4 column 3 "),
            "block {block}: {err}"
        );
    }
}
