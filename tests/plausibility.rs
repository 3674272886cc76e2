//! Implausible and impossible settings on every path (`tunnels`, `horizon`, `draws`, `run`):
//! an implausible value is used, with a `warning:` line on stderr and a `warning` entry in the
//! output's metadata; an impossible one is refused with one line, exit status 2 and nothing
//! written. The ranges are the project's own, stated in docs/adjustments.md ("Plausible
//! ranges"); the checks below restate them, they do not take them from the library.

mod shell;
use shell::{listing, tunnelcast};

use std::path::Path;

const DATA: &str = include_str!("../data/demo_trial.csv");
const ANALYSIS: &str = include_str!("../data/demo_analysis.toml");
const LIFETABLE: &str = include_str!("../data/demo_lifetable.csv");
const PAYOFFS: &str = include_str!("../data/demo_payoffs.csv");

/// A published Weibull curve in months (invented parameters).
const CURVE: [&str; 10] = [
    "--family",
    "weibull",
    "--param",
    "shape=1.2",
    "--param",
    "scale=30",
    "--time-unit",
    "months",
    "--cycle",
    "1 month",
];

/// Runs `tunnelcast ARGS` in `dir`; returns (exit status, stderr).
fn run(dir: &Path, args: &[&str]) -> (i32, String) {
    let out = tunnelcast(dir).args(args).output().unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// The `warning` entries of a JSON output's metadata, read from the text (a JSON object may
/// repeat the key, which a map would collapse).
fn warnings_in(path: &Path) -> Vec<String> {
    let text = std::fs::read_to_string(path).unwrap();
    text.match_indices("\"warning\":")
        .map(|(i, key)| {
            let rest = text[i + key.len()..].trim_start();
            let value: String = serde_json::Deserializer::from_str(rest)
                .into_iter::<String>()
                .next()
                .unwrap()
                .unwrap();
            value
        })
        .collect()
}

/// Asserts a successful run warned on stderr and in the file's metadata about `needle`.
fn assert_warned(code: i32, stderr: &str, file: &Path, needle: &str) {
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stderr
            .lines()
            .any(|l| l.starts_with("warning:") && l.contains(needle)),
        "no warning about {needle:?} on stderr: {stderr}"
    );
    let recorded = warnings_in(file);
    assert!(
        recorded.iter().any(|w| w.contains(needle)),
        "no warning about {needle:?} in {}: {recorded:?}",
        file.display()
    );
}

/// Asserts a refusal: exit 2, one line naming `needle`, and the folder as it was.
fn assert_refused(dir: &Path, before: &[String], code: i32, stderr: &str, needle: &str) {
    assert_eq!(code, 2, "{stderr}");
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    assert!(
        stderr.starts_with("error: ") && stderr.contains(needle),
        "{stderr}"
    );
    assert!(!stderr.contains("panicked at"));
    assert_eq!(listing(dir), before, "something was written");
}

/// A small fit file (`fit.json`, Weibull, months) for `draws`.
fn write_fit(dir: &Path) {
    std::fs::write(dir.join("demo_trial.csv"), DATA).unwrap();
    tunnelcast(dir)
        .args([
            "fit",
            "demo_trial.csv",
            "--time-unit",
            "months",
            "--arm-col",
            "arm",
            "--families",
            "weibull",
            "--json",
            "fit.json",
        ])
        .assert()
        .success();
}

#[test]
fn a_hazard_ratio_of_75_is_used_with_a_warning_on_every_path() {
    // 75 is outside 0.1–10 and reads like a percentage: the warning suggests 0.75.
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let mut args = vec!["tunnels"];
    args.extend(CURVE);
    args.extend(["--count", "3", "--hazard-ratio", "75", "--out", "t.json"]);
    let (code, err) = run(d, &args);
    assert_warned(code, &err, &d.join("t.json"), "write 0.75");

    let mut args = vec!["horizon"];
    args.extend(CURVE);
    args.extend(["--hazard-ratio", "75", "--json", "h.json"]);
    let (code, err) = run(d, &args);
    assert_warned(code, &err, &d.join("h.json"), "hazard ratio 75");

    write_fit(d);
    let (code, err) = run(
        d,
        &[
            "draws",
            "--fit",
            "fit.json",
            "--family",
            "weibull",
            "--arm",
            "veltranib",
            "--cycle",
            "1 month",
            "--count",
            "3",
            "--draws",
            "5",
            "--seed",
            "1",
            "--quiet",
            "--hazard-ratio",
            "75",
            "--out",
            "d.json",
        ],
    );
    assert_warned(code, &err, &d.join("d.json"), "hazard ratio 75");
}

#[test]
fn a_hazard_ratio_of_75_in_an_analysis_file_is_warned_about_in_its_outputs() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    std::fs::write(d.join("demo_trial.csv"), DATA).unwrap();
    std::fs::write(d.join("demo_lifetable.csv"), LIFETABLE).unwrap();
    std::fs::write(d.join("demo_payoffs.csv"), PAYOFFS).unwrap();
    let analysis = ANALYSIS
        .replace("hazard_ratio = 0.6", "hazard_ratio = 75")
        .replace("[draws]\ncount = 200", "[draws]\ncount = 5");
    assert_ne!(analysis, ANALYSIS);
    std::fs::write(d.join("analysis.toml"), analysis).unwrap();
    let (code, err) = run(d, &["run", "analysis.toml", "--out", "out"]);
    assert_warned(code, &err, &d.join("out/tunnels.json"), "write 0.75");
}

#[test]
fn an_acceleration_factor_of_a_billion_is_used_with_a_warning() {
    let dir = tempfile::tempdir().unwrap();
    let mut args = vec!["tunnels"];
    args.extend(CURVE);
    args.extend([
        "--count",
        "3",
        "--acceleration-factor",
        "1e9",
        "--out",
        "t.json",
    ]);
    let (code, err) = run(dir.path(), &args);
    assert_warned(
        code,
        &err,
        &dir.path().join("t.json"),
        "acceleration factor 1000000000 is outside the plausible range 0.1 to 10",
    );
    // A factor inside the range is quiet.
    std::fs::remove_file(dir.path().join("t.json")).unwrap();
    let mut args = vec!["tunnels"];
    args.extend(CURVE);
    args.extend([
        "--count",
        "3",
        "--acceleration-factor",
        "1.4",
        "--out",
        "t.json",
    ]);
    let (code, err) = run(dir.path(), &args);
    assert_eq!(code, 0);
    assert!(!err.contains("warning:"), "{err}");
    assert!(warnings_in(&dir.path().join("t.json")).is_empty());
}

#[test]
fn start_ages_beyond_a_human_life_are_refused_and_above_100_warned_about() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    std::fs::write(d.join("life.csv"), LIFETABLE).unwrap();
    let before = listing(d);
    // 620 (a slip for 62): nobody lives that long, whatever the table says.
    let mut args = vec!["tunnels"];
    args.extend(CURVE);
    args.extend([
        "--count",
        "3",
        "--background",
        "life.csv",
        "--sex",
        "male",
        "--start-age",
        "620",
        "--out",
        "t.json",
    ]);
    let (code, err) = run(d, &args);
    assert_refused(d, &before, code, &err, "--start-age 620 is impossible");
    // 105 is possible and inside the demo table (ages 0–110), but implausible at entry.
    let mut args = vec!["tunnels"];
    args.extend(CURVE);
    args.extend([
        "--count",
        "3",
        "--background",
        "life.csv",
        "--sex",
        "male",
        "--start-age",
        "105",
        "--out",
        "t.json",
    ]);
    let (code, err) = run(d, &args);
    assert_warned(code, &err, &d.join("t.json"), "start age 105 is above 100");

    // The same refusal from an analysis file.
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    std::fs::write(d.join("demo_trial.csv"), DATA).unwrap();
    std::fs::write(d.join("demo_lifetable.csv"), LIFETABLE).unwrap();
    std::fs::write(d.join("demo_payoffs.csv"), PAYOFFS).unwrap();
    std::fs::write(
        d.join("analysis.toml"),
        ANALYSIS.replace("start_age = 62", "start_age = 620"),
    )
    .unwrap();
    let before = listing(d);
    let (code, err) = run(d, &["run", "analysis.toml", "--out", "out"]);
    assert_refused(d, &before, code, &err, "620 is impossible");
}

#[test]
fn a_life_table_with_zero_or_per_cent_probabilities_is_warned_about() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // A decimal comma shifted into an unused third column: every qx reads as 0.
    std::fs::write(
        d.join("zero.csv"),
        "age,qx,source\n50,0,004787\n51,0,0052\n52,0,0057\n53,0,0063\n",
    )
    .unwrap();
    // The same table written in per cent (0.4787 for 0.004787).
    std::fs::write(
        d.join("percent.csv"),
        "age,qx\n50,0.4787\n51,0.52\n52,0.57\n53,0.63\n",
    )
    .unwrap();
    for (file, needle) in [
        ("zero.csv", "qx is 0 at 4 ages from 50 to 53"),
        ("percent.csv", "qx is above 0.5 at 3 ages from 51 to 53"),
    ] {
        let _ = std::fs::remove_file(d.join("t.json"));
        let mut args = vec!["tunnels"];
        args.extend(CURVE);
        args.extend([
            "--count",
            "3",
            "--background",
            file,
            "--start-age",
            "50",
            "--out",
            "t.json",
        ]);
        let (code, err) = run(d, &args);
        assert_warned(code, &err, &d.join("t.json"), needle);
    }
    // A qx above 1 is impossible and refused (also in tests/bad_input/life_table/).
    std::fs::write(d.join("above.csv"), "age,qx\n50,0.004\n51,1.2\n").unwrap();
    std::fs::remove_file(d.join("t.json")).unwrap();
    let before = listing(d);
    let mut args = vec!["tunnels"];
    args.extend(CURVE);
    args.extend([
        "--count",
        "3",
        "--background",
        "above.csv",
        "--start-age",
        "50",
        "--out",
        "t.json",
    ]);
    let (code, err) = run(d, &args);
    assert_refused(d, &before, code, &err, "above.csv line 3 column 2 (\"qx\")");
}

#[test]
fn a_cycle_longer_than_the_horizon_is_refused_on_every_path() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_fit(d);
    std::fs::write(d.join("demo_lifetable.csv"), LIFETABLE).unwrap();
    std::fs::write(d.join("demo_payoffs.csv"), PAYOFFS).unwrap();
    let before = listing(d);
    let published = [
        "--family",
        "weibull",
        "--param",
        "shape=1.2",
        "--param",
        "scale=30",
        "--time-unit",
        "months",
        "--cycle",
        "2 years",
    ];
    let mut args = vec!["tunnels"];
    args.extend(published);
    args.extend(["--until", "1 year", "--out", "t.json"]);
    let (code, err) = run(d, &args);
    assert_refused(d, &before, code, &err, "shorter than one cycle");
    let mut args = vec!["horizon"];
    args.extend(published);
    args.extend(["--horizon", "1 year", "--json", "h.json"]);
    let (code, err) = run(d, &args);
    assert_refused(d, &before, code, &err, "shorter than one cycle");
    let (code, err) = run(
        d,
        &[
            "draws",
            "--fit",
            "fit.json",
            "--family",
            "weibull",
            "--arm",
            "veltranib",
            "--cycle",
            "2 years",
            "--until",
            "1 year",
            "--draws",
            "5",
            "--out",
            "d.json",
        ],
    );
    assert_refused(d, &before, code, &err, "shorter than one cycle");
    std::fs::write(
        d.join("analysis.toml"),
        ANALYSIS
            .replace("cycle = \"1 month\"", "cycle = \"2 years\"")
            .replace("horizon = \"20 years\"", "horizon = \"1 year\""),
    )
    .unwrap();
    let before = listing(d);
    let (code, err) = run(d, &["run", "analysis.toml", "--out", "out"]);
    assert_refused(d, &before, code, &err, "cycle");
}
