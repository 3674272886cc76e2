//! One reading discipline for every CSV reader (src/csv_read.rs): the same hostile shapes give
//! the same one-line error, at the same physical line and column, from the time-to-event,
//! life-table, digitised-curve and risk-table readers, through the binary, and on the `run`
//! path too. Expected places are counted by hand from the file texts below (common practice
//! for CSV: the header is line 1, an editor's line numbers).

mod shell;
use shell::{listing, tunnelcast};

use std::path::Path;

const DATA: &str = include_str!("../data/demo_trial.csv");
const ANALYSIS: &str = include_str!("../data/demo_analysis.toml");
const LIFETABLE: &str = include_str!("../data/demo_lifetable.csv");

/// Each reader: the command line reading `file`, a header and a good first row, and the
/// (0-based) column where a split value lands in the third line.
struct Reader {
    name: &'static str,
    args: fn(&str) -> Vec<String>,
    header_and_first_row: &'static str,
}

fn words(list: &[&str]) -> Vec<String> {
    list.iter().map(|s| s.to_string()).collect()
}

fn readers() -> Vec<Reader> {
    vec![
        Reader {
            name: "time-to-event",
            args: |f| words(&["fit", f, "--time-unit", "months", "--json", "out.json"]),
            header_and_first_row: "time,event\n5,1\n",
        },
        Reader {
            name: "life table",
            args: |f| {
                words(&[
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
                    "2",
                    "--background",
                    f,
                    "--start-age",
                    "50",
                    "--out",
                    "out.csv",
                ])
            },
            header_and_first_row: "age,qx\n50,0.004\n",
        },
        Reader {
            name: "digitised curve",
            args: |f| {
                words(&[
                    "rebuild",
                    "--curve",
                    f,
                    "--patients",
                    "40",
                    "--out",
                    "out.csv",
                ])
            },
            header_and_first_row: "time,survival\n0,1\n",
        },
        Reader {
            name: "risk table",
            args: |f| {
                words(&[
                    "rebuild",
                    "--curve",
                    "curve.csv",
                    "--at-risk",
                    f,
                    "--out",
                    "out.csv",
                ])
            },
            header_and_first_row: "time,at_risk\n0,40\n",
        },
    ]
}

/// Runs a reader on `text` (as `bad.csv`) in a fresh folder; returns the stderr of a refusal,
/// after checking exit status 2, one clean line and nothing written.
fn refusal(reader: &Reader, text: &[u8]) -> String {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    std::fs::write(d.join("bad.csv"), text).unwrap();
    std::fs::write(d.join("curve.csv"), "time,survival\n0,1\n5,0.9\n10,0.8\n").unwrap();
    let before = listing(d);
    let out = tunnelcast(d)
        .args((reader.args)("bad.csv"))
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
    assert_eq!(out.status.code(), Some(2), "{}: {stderr}", reader.name);
    assert_eq!(stderr.lines().count(), 1, "{}: {stderr}", reader.name);
    assert!(!stderr.chars().any(|c| c.is_control() && c != '\n'));
    assert_eq!(listing(d), before, "{}: something was written", reader.name);
    stderr.trim_end().to_string()
}

#[test]
fn a_value_split_by_a_decimal_comma_is_named_alike_by_every_reader() {
    // Third line "0,05" where the second column's value should be: the comma splits it into
    // "0" and "05", one field too many; a leading-zero fraction cannot be a thousands group.
    for reader in readers() {
        let first_column = match reader.name {
            "time-to-event" => "5,0,05\n", // time 5, event "0,05"
            "life table" => "51,0,05\n",
            "digitised curve" => "2,0,05\n",
            _ => "5,0,05\n",
        };
        let text = format!("{}{first_column}", reader.header_and_first_row);
        let stderr = refusal(&reader, text.as_bytes());
        let header: Vec<&str> = reader
            .header_and_first_row
            .lines()
            .next()
            .unwrap()
            .split(',')
            .collect();
        assert_eq!(
            stderr,
            format!(
                "error: bad.csv line 3 column 2 (\"{}\"): row has 3 fields but the header has 2: \"0,05\" looks like a decimal comma: write 0.05",
                header[1]
            ),
            "{}",
            reader.name
        );
    }
}

#[test]
fn line_numbers_are_physical_lines_in_every_reader() {
    for reader in readers() {
        // CR-only line ends (the digitised reader used to say "line 1" here).
        let cr = format!("{}x,1\n", reader.header_and_first_row).replace('\n', "\r");
        let stderr = refusal(&reader, cr.as_bytes());
        assert!(
            stderr.starts_with("error: bad.csv line 3 column 1 "),
            "{}: {stderr}",
            reader.name
        );
        // Blank lines before the bad row, and a quoted line break in a spare column.
        let (header, first) = reader.header_and_first_row.split_once('\n').unwrap();
        let text = format!("{header},note\n{},\"a\nb\"\n\n\nx,1,c\n", first.trim_end());
        let stderr = refusal(&reader, text.as_bytes());
        assert!(
            stderr.starts_with("error: bad.csv line 6 column 1 "),
            "{}: {stderr}",
            reader.name
        );
        // A short row and a long one.
        let short = format!("{}7\n", reader.header_and_first_row);
        let stderr = refusal(&reader, short.as_bytes());
        assert!(
            stderr.starts_with("error: bad.csv line 3 column 2 ")
                && stderr.contains("row has 1 field(s) but the header has 2"),
            "{}: {stderr}",
            reader.name
        );
        let long = format!("{}7,x,y\n", reader.header_and_first_row);
        let stderr = refusal(&reader, long.as_bytes());
        assert!(
            stderr.starts_with(
                "error: bad.csv line 3 column 3 (\"beyond the header\"): row has 3 fields"
            ),
            "{}: {stderr}",
            reader.name
        );
        // UTF-16 is a whole-file error.
        let utf16: Vec<u8> = [0xFF, 0xFE]
            .into_iter()
            .chain(
                reader
                    .header_and_first_row
                    .encode_utf16()
                    .flat_map(|u| u.to_le_bytes()),
            )
            .collect();
        let stderr = refusal(&reader, &utf16);
        assert_eq!(
            stderr,
            "error: bad.csv: the file is UTF-16 encoded; save it as UTF-8 CSV"
        );
    }
}

/// The demo analysis in `dir` with its life table replaced by `lifetable`.
fn run_with_lifetable(dir: &Path, lifetable: &str) -> (i32, String) {
    std::fs::write(dir.join("demo_trial.csv"), DATA).unwrap();
    std::fs::write(dir.join("demo_lifetable.csv"), lifetable).unwrap();
    std::fs::write(dir.join("analysis.toml"), ANALYSIS).unwrap();
    let out = tunnelcast(dir)
        .args(["run", "analysis.toml", "--out", "out"])
        .output()
        .unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn a_decimal_comma_life_table_is_refused_by_run_too() {
    // The demo table written with decimal commas, as a spreadsheet in a comma-decimal locale
    // exports it: before the shared reader, each row read as qx_female = 0 (its whole part).
    let comma = LIFETABLE
        .lines()
        .map(|l| {
            if l.starts_with('#') || l.starts_with("age") {
                l.to_string()
            } else {
                l.replace('.', ",")
            }
        })
        .collect::<Vec<_>>()
        .join("\n");
    // The first data row and its line, counted from the text.
    let (index, row) = comma
        .lines()
        .enumerate()
        .find(|(_, l)| !l.starts_with('#') && !l.starts_with("age"))
        .unwrap();
    let fields: Vec<&str> = row.split(',').collect();
    let dir = tempfile::tempdir().unwrap();
    let (code, stderr) = run_with_lifetable(dir.path(), &comma);
    assert_eq!(code, 2, "{stderr}");
    let expected = format!(
        "demo_lifetable.csv line {} column 2 (\"qx_female\"): row has {} fields but the header has 3: \"{},{}\" looks like a decimal comma: write {}.{}",
        index + 1,
        fields.len(),
        fields[1],
        fields[2],
        fields[1],
        fields[2]
    );
    assert!(stderr.ends_with(&format!("{expected}\n")), "{stderr}");
    assert!(!dir.path().join("out").exists());

    // A semicolon table with decimal commas: refused at the same place, one field per column.
    let semicolon = comma
        .lines()
        .map(|l| {
            if l.starts_with('#') {
                l.to_string()
            } else {
                let f: Vec<&str> = l.split(',').collect();
                if f.len() == 3 {
                    f.join(";")
                } else {
                    format!("{};{},{};{},{}", f[0], f[1], f[2], f[3], f[4])
                }
            }
        })
        .collect::<Vec<_>>()
        .join("\n");
    let dir = tempfile::tempdir().unwrap();
    let (code, stderr) = run_with_lifetable(dir.path(), &semicolon);
    assert_eq!(code, 2, "{stderr}");
    assert!(
        stderr.ends_with(&format!(
            "demo_lifetable.csv line {} column 2 (\"qx_female\"): \"{},{}\" looks like a decimal comma: write {}.{}\n",
            index + 1,
            fields[1],
            fields[2],
            fields[1],
            fields[2]
        )),
        "{stderr}"
    );
    assert!(!dir.path().join("out").exists());
}
