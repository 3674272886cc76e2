//! Hostile and malformed inputs for `tunnelcast fit`: every file in `tests/bad_input/` (and the
//! large ones generated here at run time) is run through the real binary in a fresh folder with
//! `--json out.json`, and the outcome is checked against `tests/bad_input/manifest.tsv`
//! (written by `scripts/make_bad_input.py`; expected outcomes are the project's input rules
//! from the interface contract, common practice for CSV files).

mod shell;
use shell::listing;

use assert_cmd::Command;
use std::path::{Path, PathBuf};
use tunnelcast::fit::FitFile;

/// What the manifest says should happen to one input.
#[derive(Debug)]
enum Expect {
    /// Read as this many records; the command exits with this status (0, or 1 when no family converged).
    Accept { records: usize, exit: i32 },
    /// Exit 2 with a one-line error naming this line (and column, when given).
    RejectAt { line: u64, column: Option<usize> },
    /// Exit 2 with a one-line error about the file as a whole.
    RejectFile,
}

struct Case {
    name: String,
    expect: Expect,
    args: Vec<String>,
    what: String,
}

fn corpus_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/bad_input")
}

fn parse_expect(text: &str) -> Expect {
    let words: Vec<&str> = text.split_whitespace().collect();
    match words.as_slice() {
        ["accept", n] => Expect::Accept {
            records: n.parse().unwrap(),
            exit: 0,
        },
        ["accept", n, "exit", e] => Expect::Accept {
            records: n.parse().unwrap(),
            exit: e.parse().unwrap(),
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

fn manifest() -> Vec<Case> {
    let text = std::fs::read_to_string(corpus_dir().join("manifest.tsv")).unwrap();
    text.lines()
        .filter(|l| !l.starts_with('#') && !l.trim().is_empty())
        .map(|l| {
            let parts: Vec<&str> = l.split('\t').collect();
            assert_eq!(parts.len(), 4, "manifest line {l:?}");
            Case {
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
        std::fs::copy(corpus_dir().join(&case.name), dir.path().join(&case.name)).unwrap();
        case.name.clone()
    };
    let output = Command::cargo_bin("tunnelcast")
        .unwrap()
        .current_dir(dir.path())
        .arg("fit")
        .arg(&file)
        .args(["--json", "out.json"])
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
        Expect::Accept { records, exit } => {
            if code != Some(exit) {
                return fail(format!("exit {code:?}, expected {exit}"));
            }
            let mut expected = vec![file.clone(), "out.json".to_string()];
            expected.sort();
            if files != expected {
                return fail(format!("folder holds {files:?}"));
            }
            let text = std::fs::read_to_string(dir.path().join("out.json")).unwrap();
            let fit: FitFile = match serde_json::from_str(&text) {
                Ok(f) => f,
                Err(e) => return fail(format!("fit file does not read back: {e}")),
            };
            if fit.data.n != records {
                return fail(format!("{} records, expected {records}", fit.data.n));
            }
        }
        Expect::RejectAt { .. } | Expect::RejectFile => {
            if code != Some(2) {
                return fail(format!("exit {code:?}, expected 2"));
            }
            if files != [file.clone()] {
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

#[test]
fn corpus_has_at_least_forty_cases_and_every_file_is_listed() {
    let cases = manifest();
    assert!(cases.len() >= 40, "{} cases", cases.len());
    let listed: Vec<&str> = cases.iter().map(|c| c.name.as_str()).collect();
    for name in listing(&corpus_dir()) {
        assert!(
            name == "manifest.tsv" || listed.contains(&name.as_str()),
            "{name} is not in the manifest"
        );
    }
}

#[test]
fn every_corpus_file_meets_its_stated_outcome() {
    let failures: Vec<String> = manifest()
        .iter()
        .filter(|c| !c.name.starts_with('@'))
        .filter_map(run_case)
        .collect();
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn generated_large_inputs_meet_their_stated_outcome() {
    let failures: Vec<String> = manifest()
        .iter()
        .filter(|c| c.name.starts_with('@'))
        .filter_map(run_case)
        .collect();
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}
