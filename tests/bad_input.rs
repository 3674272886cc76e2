//! Hostile and malformed inputs for every CSV reader, run through the real binary in a fresh
//! folder: time-to-event files through `fit` (`tests/bad_input/`, plus large ones generated here
//! at run time), life tables through `tunnels --background` (`tests/bad_input/life_table/`),
//! digitised points and risk tables through `rebuild` (`tests/bad_input/digitised/`,
//! `tests/bad_input/at_risk/`). Each outcome is checked against the folder's `manifest.tsv`
//! (written by `scripts/make_bad_input.py`; expected outcomes are the project's input rules
//! from the interface contract and docs/robustness.md, common practice for CSV files).

mod shell;
use shell::listing;

use assert_cmd::Command;
use std::path::{Path, PathBuf};
use tunnelcast::fit::FitFile;

/// Which reader a corpus is for, and how its files are run.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Reader {
    TimeToEvent,
    LifeTable,
    Digitised,
    AtRisk,
}

/// The digitised curve every risk table of the corpus is read against (see make_bad_input.py).
const RISK_CURVE: &str = "time,survival\n0,1\n5,0.9\n10,0.8\n20,0.7\n";

impl Reader {
    fn folder(self) -> PathBuf {
        let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/bad_input");
        match self {
            Reader::TimeToEvent => root,
            Reader::LifeTable => root.join("life_table"),
            Reader::Digitised => root.join("digitised"),
            Reader::AtRisk => root.join("at_risk"),
        }
    }

    /// The command line for `file`, before the case's own arguments.
    fn command(self, file: &str) -> Vec<String> {
        let words: Vec<&str> = match self {
            Reader::TimeToEvent => vec!["fit", file, "--time-unit", "days", "--json", "out.json"],
            Reader::LifeTable => vec![
                "tunnels",
                "--family",
                "exponential",
                "--param",
                "rate=0.01",
                "--time-unit",
                "years",
                "--cycle",
                "1 year",
                "--count",
                "3",
                "--background",
                file,
                "--start-age",
                "50",
                "--background-mode",
                "add",
                "--out",
                "out.csv",
            ],
            Reader::Digitised => vec![
                "rebuild",
                "--curve",
                file,
                "--patients",
                "50",
                "--out",
                "out.csv",
            ],
            Reader::AtRisk => vec![
                "rebuild",
                "--curve",
                "curve.csv",
                "--at-risk",
                file,
                "--out",
                "out.csv",
            ],
        };
        words.into_iter().map(str::to_string).collect()
    }

    /// Files a successful run leaves beside the input (a CSV output with its descriptor).
    fn outputs(self) -> Vec<&'static str> {
        match self {
            Reader::TimeToEvent => vec!["out.json"],
            Reader::AtRisk => vec!["curve.csv", "out.csv", "out.resource.json"],
            _ => vec!["out.csv", "out.resource.json"],
        }
    }

    /// Items an accepted file was read as: records (from the fit file), ages, cleaned points or
    /// risk-table rows (from the library's reader on the same bytes).
    fn count(self, dir: &Path, file: &str, args: &[String]) -> std::result::Result<usize, String> {
        let bytes = std::fs::read(dir.join(file)).unwrap();
        match self {
            Reader::TimeToEvent => {
                let text = std::fs::read_to_string(dir.join("out.json")).unwrap();
                let fit: FitFile = serde_json::from_str(&text)
                    .map_err(|e| format!("fit file does not read back: {e}"))?;
                Ok(fit.data.n)
            }
            Reader::LifeTable => {
                use tunnelcast::adjust::lifetable::{parse, Sex};
                let sex = match args
                    .iter()
                    .position(|a| a == "--sex")
                    .map(|i| args[i + 1].as_str())
                {
                    Some("female") => Some(Sex::Female),
                    Some("male") => Some(Sex::Male),
                    _ => None,
                };
                parse(file, &bytes, sex)
                    .map(|t| t.qx.len())
                    .map_err(|e| e.to_string())
            }
            Reader::Digitised => tunnelcast::rebuild::read_curves(file, &bytes, None)
                .map(|c| c[0].points.len())
                .map_err(|e| e.to_string()),
            Reader::AtRisk => tunnelcast::rebuild::read_risk_tables(file, &bytes, None)
                .map(|t| t[0].rows.len())
                .map_err(|e| e.to_string()),
        }
    }
}

/// What the manifest says should happen to one input.
#[derive(Debug)]
enum Expect {
    /// Read as this many items; the command exits with this status (0, or 1 when no family
    /// converged); `warn`: stderr carries a `warning:` line (and otherwise must not).
    Accept {
        records: usize,
        exit: i32,
        warn: bool,
    },
    /// Exit 2 with a one-line error naming this line (and column, when given).
    RejectAt { line: u64, column: Option<usize> },
    /// Exit 2 with a one-line error about the file as a whole.
    RejectFile,
}

struct Case {
    reader: Reader,
    name: String,
    expect: Expect,
    args: Vec<String>,
    what: String,
}

fn parse_expect(text: &str) -> Expect {
    let mut words: Vec<&str> = text.split_whitespace().collect();
    let warn = words.last() == Some(&"warn");
    if warn {
        words.pop();
    }
    match words.as_slice() {
        ["accept", n] => Expect::Accept {
            records: n.parse().unwrap(),
            exit: 0,
            warn,
        },
        ["accept", n, "exit", e] => Expect::Accept {
            records: n.parse().unwrap(),
            exit: e.parse().unwrap(),
            warn,
        },
        ["reject", "file"] => Expect::RejectFile,
        ["reject", at] => {
            let (line, column) = match at.split_once(':') {
                Some((l, c)) => (l.parse().unwrap(), Some(c.parse().unwrap())),
                None => (at.parse().unwrap(), None),
            };
            Expect::RejectAt { line, column }
        }
        _ => panic!("bad manifest outcome {text:?}"),
    }
}

fn manifest(reader: Reader) -> Vec<Case> {
    let text = std::fs::read_to_string(reader.folder().join("manifest.tsv")).unwrap();
    text.lines()
        .filter(|l| !l.starts_with('#') && !l.trim().is_empty())
        .map(|l| {
            let parts: Vec<&str> = l.split('\t').collect();
            assert_eq!(parts.len(), 4, "manifest line {l:?}");
            Case {
                reader,
                name: parts[0].to_string(),
                expect: parse_expect(parts[1]),
                args: parts[2].split_whitespace().map(str::to_string).collect(),
                what: parts[3].to_string(),
            }
        })
        .collect()
}

/// Inputs too large to commit, made in `dir`; returns the file name used.
fn generate(name: &str, dir: &Path) -> String {
    const MILLION: usize = 1_000_000;
    let file = format!("{}.csv", name.trim_start_matches('@'));
    let bytes: Vec<u8> = match name {
        "@million_columns" => {
            let mut text: String = (0..MILLION - 2).map(|i| format!("c{i},")).collect();
            text.push_str("time,event\n");
            for t in [5, 7, 9] {
                text.push_str(&"0,".repeat(MILLION - 2));
                text.push_str(&format!("{t},1\n"));
            }
            text.into_bytes()
        }
        "@million_columns_no_time" => {
            let mut text: String = (0..MILLION).map(|i| format!("c{i},")).collect();
            text.push_str("event\n");
            text.push_str(&"0,".repeat(MILLION));
            text.push_str("1\n");
            text.into_bytes()
        }
        "@line_50mb_header" => {
            let mut text = b"time,event,".to_vec();
            text.resize(50_000_000, b'x');
            text
        }
        "@line_50mb_value" => {
            let mut text = b"time,event\n".to_vec();
            text.resize(50_000_000, b'1');
            text.extend_from_slice(b",1\n");
            text
        }
        "@arm_per_subject" => {
            let mut text = String::from("time,event,id\n");
            for i in 0..=tunnelcast::input::MAX_ARMS {
                text.push_str(&format!("{},1,S{i}\n", i + 1));
            }
            text.into_bytes()
        }
        other => panic!("no generator for {other}"),
    };
    std::fs::write(dir.join(&file), bytes).unwrap();
    file
}

/// Runs one case; returns a description of what went wrong, if anything.
fn run_case(case: &Case) -> Option<String> {
    let dir = tempfile::tempdir().unwrap();
    let file = if case.name.starts_with('@') {
        generate(&case.name, dir.path())
    } else {
        std::fs::copy(
            case.reader.folder().join(&case.name),
            dir.path().join(&case.name),
        )
        .unwrap();
        case.name.clone()
    };
    if case.reader == Reader::AtRisk {
        std::fs::write(dir.path().join("curve.csv"), RISK_CURVE).unwrap();
    }
    let before = listing(dir.path());
    let output = Command::cargo_bin("tunnelcast")
        .unwrap()
        .current_dir(dir.path())
        .args(case.reader.command(&file))
        .args(&case.args)
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&output.stderr).into_owned();
    let code = output.status.code();
    let fail = |why: String| {
        Some(format!(
            "{} ({}): {why}; stderr: {stderr:?}",
            case.name, case.what
        ))
    };
    if stderr.contains("panicked at") {
        return fail("panicked".into());
    }
    let files = listing(dir.path());
    match case.expect {
        Expect::Accept {
            records,
            exit,
            warn,
        } => {
            if code != Some(exit) {
                return fail(format!("exit {code:?}, expected {exit}"));
            }
            let mut expected: Vec<String> = case
                .reader
                .outputs()
                .into_iter()
                .map(str::to_string)
                .chain([file.clone()])
                .collect();
            expected.sort();
            if files != expected {
                return fail(format!("folder holds {files:?}"));
            }
            if stderr.contains("warning:") != warn {
                return fail(format!(
                    "a warning was {}expected",
                    if warn { "" } else { "not " }
                ));
            }
            match case.reader.count(dir.path(), &file, &case.args) {
                Ok(n) if n == records => {}
                Ok(n) => return fail(format!("{n} items, expected {records}")),
                Err(e) => return fail(e),
            }
        }
        Expect::RejectAt { .. } | Expect::RejectFile => {
            if code != Some(2) {
                return fail(format!("exit {code:?}, expected 2"));
            }
            if files != before {
                return fail(format!("output left behind: {files:?}"));
            }
            let message = stderr.strip_suffix('\n').unwrap_or(&stderr);
            if message.contains('\n') || message.chars().any(char::is_control) {
                return fail("message is not a single clean line".into());
            }
            if !message.starts_with(&format!("error: {file}")) {
                return fail("message does not start with \"error: FILE\"".into());
            }
            if message.len() > 400 {
                return fail(format!("message is {} bytes long", message.len()));
            }
            match case.expect {
                Expect::RejectAt { line, column } => {
                    let place = match column {
                        Some(c) => format!("{file} line {line} column {c} "),
                        None => format!("{file} line {line} column "),
                    };
                    if !message.contains(&place) {
                        return fail(format!("message does not name {place:?}"));
                    }
                }
                _ => {
                    if message.contains(" line ") {
                        return fail("whole-file error names a line".into());
                    }
                }
            }
        }
    }
    None
}

/// Every case of one corpus run; the failures, one line each.
fn failures(reader: Reader, generated: bool) -> Vec<String> {
    manifest(reader)
        .iter()
        .filter(|c| c.name.starts_with('@') == generated)
        .filter_map(run_case)
        .collect()
}

/// The corpus of `reader` has at least `least` cases, and every file in its folder is listed.
fn check_listing(reader: Reader, least: usize) {
    let cases = manifest(reader);
    assert!(cases.len() >= least, "{} cases", cases.len());
    let listed: Vec<&str> = cases.iter().map(|c| c.name.as_str()).collect();
    let folder = reader.folder();
    for name in listing(&folder) {
        if folder.join(&name).is_dir() {
            continue;
        }
        assert!(
            name == "manifest.tsv" || listed.contains(&name.as_str()),
            "{name} is not in the manifest"
        );
    }
}

#[test]
fn every_corpus_has_its_cases_and_every_file_is_listed() {
    check_listing(Reader::TimeToEvent, 40);
    check_listing(Reader::LifeTable, 30);
    check_listing(Reader::Digitised, 20);
    check_listing(Reader::AtRisk, 15);
}

#[test]
fn every_corpus_file_meets_its_stated_outcome() {
    let failures = failures(Reader::TimeToEvent, false);
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn generated_large_inputs_meet_their_stated_outcome() {
    let failures = failures(Reader::TimeToEvent, true);
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn every_life_table_file_meets_its_stated_outcome() {
    let failures = failures(Reader::LifeTable, false);
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn every_digitised_and_risk_table_file_meets_its_stated_outcome() {
    let mut found = failures(Reader::Digitised, false);
    found.extend(failures(Reader::AtRisk, false));
    assert!(found.is_empty(), "{}", found.join("\n"));
}
