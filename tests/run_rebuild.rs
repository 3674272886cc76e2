//! `tunnelcast run` on an analysis file that starts from a digitised Kaplan–Meier curve
//! (`[data] curve`): the rebuilt data are exactly what `tunnelcast rebuild` writes for the
//! same inputs, the quality tables and the overlay plot are written, the report has a section
//! saying the data are reconstructed, a re-run is byte-identical, and bad `[data]` tables are
//! refused with one line naming the key.

mod shell;
use shell::{listing, read_csv, read_package, read_table, tunnelcast};

use serde::Deserialize;
use std::path::Path;

const ANALYSIS: &str = include_str!("../data/demo_rebuild_analysis.toml");
const CURVE: &str = include_str!("../data/demo_digitised.csv");
const AT_RISK: &str = include_str!("../data/demo_at_risk.csv");

/// Writes the example analysis (with `edit` applied) and its two inputs into `dir`.
fn setup(dir: &Path, edit: impl Fn(&str) -> String) {
    std::fs::write(dir.join("demo_digitised.csv"), CURVE).unwrap();
    std::fs::write(dir.join("demo_at_risk.csv"), AT_RISK).unwrap();
    std::fs::write(dir.join("analysis.toml"), edit(ANALYSIS)).unwrap();
}

/// One rebuilt record, read back strictly.
#[derive(Debug, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
struct Row {
    time: f64,
    event: u8,
    arm: String,
}

/// Rebuilt records, read strictly, their descriptor checked.
fn rows(path: &Path) -> Vec<Row> {
    read_csv(path)
}

#[test]
fn run_from_a_digitised_curve_rebuilds_as_the_rebuild_command_does() {
    let dir = tempfile::tempdir().unwrap();
    setup(dir.path(), |a| a.to_string());
    tunnelcast(dir.path())
        .args(["run", "analysis.toml", "--out", "out"])
        .assert()
        .success();
    let out = dir.path().join("out");
    let names = listing(&out);
    for expected in [
        "rebuilt.csv",
        "rebuild.txt",
        "rebuild_quality.csv",
        "rebuild_quality.json",
        "rebuild_at_risk.json",
        "rebuild_intervals.csv",
        "rebuild.svg",
        "rebuild.png",
        "fit.json",
        "tunnels.csv",
        "report.html",
        "survival-standard.svg",
    ] {
        assert!(
            names.contains(&expected.to_string()),
            "{expected} missing: {names:?}"
        );
    }

    // The rebuild command on the same inputs writes the same records.
    tunnelcast(dir.path())
        .args([
            "rebuild",
            "--curve",
            "demo_digitised.csv",
            "--at-risk",
            "demo_at_risk.csv",
            "--arm-col",
            "arm",
            "--events",
            "veltranib=137,standard=155",
            "--out",
            "by-command.csv",
        ])
        .assert()
        .success();
    let from_run = rows(&out.join("rebuilt.csv"));
    assert_eq!(from_run, rows(&dir.path().join("by-command.csv")));
    // Patients and events of the invented trial, as printed by scripts/make_digitised.py.
    let count = |arm: &str| from_run.iter().filter(|r| r.arm == arm).count();
    assert_eq!((count("veltranib"), count("standard")), (180, 175));
    // The folder's package lists rebuilt.csv with the digitised file's SHA-256 (FIPS 180-4,
    // by the sha2 crate here) and its time unit.
    let package = read_package(&out);
    let rebuilt = package["resources"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["path"] == "rebuilt.csv")
        .expect("rebuilt.csv in datapackage.json");
    use sha2::Digest;
    let sha: String = sha2::Sha256::digest(CURVE.as_bytes())
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    assert_eq!(rebuilt["tunnelcast"]["curve_sha256"], sha.as_str());
    assert_eq!(
        rebuilt["schema"]["fields"][0]["tunnelcast"]["unit"],
        "months"
    );

    // The fit saw the rebuilt data: its counts and hash are those of rebuilt.csv.
    let fit: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("fit.json")).unwrap()).unwrap();
    assert_eq!(fit["data"]["n"], 355);
    assert_eq!(fit["data"]["events"], 137 + 155);
    let tunnels = read_table(&out.join("tunnels.json"));
    assert_eq!(tunnels.metadata["data_file"], "rebuilt.csv");
    assert_eq!(tunnels.metadata["rebuilt_from_curve"], "demo_digitised.csv");

    // Quality table: one row per arm, events equal to the published totals (the last
    // interval is settled on them), the curve within the digitising tolerance of 0.02 plus
    // a step (docs/rebuild.md), numbers at risk within 1 of the table.
    let quality = read_table(&out.join("rebuild_quality.json"));
    let table = &quality.tables[0];
    assert_eq!(table.name, "rebuild_quality");
    let col = |name: &str| table.columns.iter().position(|c| c == name).unwrap();
    assert_eq!(table.rows.len(), 2);
    for row in &table.rows {
        assert_eq!(row[col("events")], row[col("events_published")]);
        let max = row[col("max_abs_diff")].as_f64().unwrap();
        let mean = row[col("mean_abs_diff")].as_f64().unwrap();
        assert!(mean <= max && max < 0.05, "{max} {mean}");
        assert!(row[col("at_risk_max_abs_diff")].as_i64().unwrap() <= 1);
    }
    let at_risk = read_table(&out.join("rebuild_at_risk.json"));
    // Seven table times per arm in data/demo_at_risk.csv.
    assert_eq!(at_risk.tables[0].rows.len(), 14);

    // The plot files parse: SVG as XML, PNG by its signature.
    let svg = std::fs::read_to_string(out.join("rebuild.svg")).unwrap();
    roxmltree::Document::parse(&svg).expect("rebuild.svg is well-formed XML");
    let png = std::fs::read(out.join("rebuild.png")).unwrap();
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");

    // The report's rebuild section: says the data are reconstructed, shows the quality
    // tables and the overlay plot.
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    let doc = shell::parse_report(&html);
    let section = doc
        .descendants()
        .find(|n| n.has_tag_name("section") && n.attribute("id") == Some("rebuild"))
        .expect("rebuild section");
    let text: String = section
        .descendants()
        .filter(|n| n.is_text())
        .filter_map(|n| n.text())
        .collect();
    assert!(text.contains("reconstructed"), "{text}");
    assert!(text.contains("not the trial's own"), "{text}");
    assert!(text.contains("demo_digitised.csv") && text.contains("demo_at_risk.csv"));
    let first_paragraph = section.children().find(|n| n.has_tag_name("p")).unwrap();
    assert_eq!(first_paragraph.attribute("class"), Some("guide"));
    // Listed in the contents, after the question and the data.
    let links: Vec<&str> = doc
        .descendants()
        .find(|n| n.attribute("id") == Some("contents"))
        .expect("contents")
        .descendants()
        .filter_map(|n| n.attribute("href"))
        .collect();
    assert_eq!(&links[..3], ["#question", "#data", "#rebuild"]);
    for id in [
        "table-rebuild-quality",
        "table-rebuild-at-risk",
        "fig-rebuild",
    ] {
        assert!(
            section.descendants().any(|n| n.attribute("id") == Some(id)),
            "{id} missing from the section"
        );
    }
}

#[test]
fn rerun_from_a_curve_is_byte_identical() {
    let dir = tempfile::tempdir().unwrap();
    setup(dir.path(), |a| a.replace("\"20 years\"", "\"5 years\""));
    tunnelcast(dir.path())
        .args(["run", "analysis.toml", "--out", "a"])
        .assert()
        .success();
    let sub = dir.path().join("sub");
    std::fs::create_dir(&sub).unwrap();
    tunnelcast(&sub)
        .args(["run", "../analysis.toml", "--out", "../b"])
        .assert()
        .success();
    for name in [
        "rebuilt.csv",
        "rebuild.txt",
        "rebuild_quality.csv",
        "rebuild_intervals.json",
        "rebuild.svg",
        "rebuild.png",
        "fit.json",
        "tunnels.csv",
    ] {
        assert_eq!(
            std::fs::read(dir.path().join("a").join(name)).unwrap(),
            std::fs::read(dir.path().join("b").join(name)).unwrap(),
            "{name} differs between runs"
        );
    }
}

/// Runs a broken analysis: exit 2, one line naming `expect`, nothing written.
fn fails(edit: impl Fn(&str) -> String, expect: &str) {
    let dir = tempfile::tempdir().unwrap();
    setup(dir.path(), edit);
    let before = listing(dir.path());
    let out = tunnelcast(dir.path())
        .args(["run", "analysis.toml", "--out", "out"])
        .assert()
        .code(2)
        .get_output()
        .clone();
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    assert!(stderr.starts_with("error: "), "{stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert!(stderr.contains(expect), "expected {expect:?} in {stderr}");
    assert_eq!(listing(dir.path()), before, "something was written");
}

#[test]
fn a_patient_file_and_a_curve_together_are_refused() {
    fails(
        |a| a.replace("[data]\n", "[data]\nfile = \"trial.csv\"\n"),
        "analysis.toml line 9 column 9: [data] file and curve are both given",
    );
}

#[test]
fn bad_data_tables_name_the_key() {
    // Nearest-key suggestions keep working.
    fails(
        |a| a.replace("at_risk = ", "at_rsk = "),
        "did you mean \"at_risk\"",
    );
    fails(
        |a| a.replace("curve = ", "curv = "),
        "did you mean \"curve\"",
    );
    // Neither a file nor a curve.
    fails(
        |a| a.replace("curve = \"demo_digitised.csv\"", ""),
        "[data] needs file = ",
    );
    // A curve's inputs with a patient-level file.
    fails(
        |a| a.replace("curve = ", "file = "),
        "[data] at_risk belongs to a digitised curve",
    );
    // Errors of the rebuild name the analysis file and the key.
    fails(
        |a| a.replace("veltranib = 137", "veltranib = 179"),
        "analysis.toml line 10 column 10: [data] events 179 for arm \"veltranib\" is more than the curve allows",
    );
    fails(
        |a| a.replace("veltranib = 137", "veltranib = -3"),
        "[data] events: -3 is not a whole number",
    );
    fails(
        |a| a.replace("demo_at_risk.csv\"", "missing.csv\""),
        "[data] at_risk",
    );
    fails(
        |a| {
            a.replace(
                "arm_column = \"arm\"\n",
                "arm_column = \"arm\"\ntime_column = \"t\"\n",
            )
        },
        "[data] time_column applies to a patient-level file",
    );
}

#[test]
fn an_error_in_the_digitised_points_names_the_curve_file_row() {
    let dir = tempfile::tempdir().unwrap();
    setup(dir.path(), |a| a.to_string());
    // A point far above the curve before it: a mistyped value, not digitising noise.
    let broken = CURVE.replacen("veltranib,0.482,98.62", "veltranib,0.482,40", 1);
    assert_ne!(broken, CURVE);
    std::fs::write(dir.path().join("demo_digitised.csv"), broken).unwrap();
    let out = tunnelcast(dir.path())
        .args(["run", "analysis.toml", "--out", "out"])
        .assert()
        .code(2)
        .get_output()
        .clone();
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert!(
        stderr.starts_with("error: demo_digitised.csv line "),
        "{stderr}"
    );
    assert!(!dir.path().join("out").exists());
}

#[test]
fn events_by_arm_without_an_arm_column_name_the_keys() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("curve.csv"),
        "time,survival\n0,1\n5,0.8\n12,0.6\n25,0.4\n",
    )
    .unwrap();
    std::fs::write(
        dir.path().join("risk.csv"),
        "time,at_risk\n0,100\n10,60\n20,30\n",
    )
    .unwrap();
    std::fs::write(
        dir.path().join("analysis.toml"),
        "[data]\ncurve = \"curve.csv\"\nat_risk = \"risk.csv\"\nevents = { a = 50 }\ntime_unit = \"months\"\n[tunnels]\ncycle = \"1 month\"\n",
    )
    .unwrap();
    let out = tunnelcast(dir.path())
        .args(["run", "analysis.toml", "--out", "out"])
        .assert()
        .code(2)
        .get_output()
        .clone();
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    assert!(
        stderr.starts_with("error: analysis.toml line 4 column 10: [data] events a=50"),
        "{stderr}"
    );
    assert!(stderr.contains("[data] arm_column not given"), "{stderr}");
    assert!(!dir.path().join("out").exists());
}
