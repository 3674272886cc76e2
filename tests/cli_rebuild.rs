//! Command-line tests of `tunnelcast rebuild`: the bundled invented figure rebuilt into data
//! that `fit` accepts, and every bad input of the issue refused with one line naming the row,
//! exit status 2 and nothing written.

mod shell;
use shell::{listing, read_csv, read_descriptor};

use assert_cmd::Command;
use serde::Deserialize;
use std::path::Path;

/// One row of the rebuilt file, read back strictly.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct Row {
    time: f64,
    event: u8,
    arm: String,
}

fn tunnelcast() -> Command {
    Command::cargo_bin("tunnelcast").unwrap()
}

fn repo(path: &str) -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(path)
}

#[test]
fn the_bundled_figure_rebuilds_into_data_that_fit_accepts() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("rebuilt.csv");
    tunnelcast()
        .args(["rebuild", "--curve"])
        .arg(repo("data/demo_digitised.csv"))
        .arg("--at-risk")
        .arg(repo("data/demo_at_risk.csv"))
        .args([
            "--arm-col",
            "arm",
            "--events",
            "veltranib=137,standard=155",
            "--out",
        ])
        .arg(&out)
        .assert()
        .success();
    let rows: Vec<Row> = read_csv(&out);
    // The descriptor records the inputs and their SHA-256 (FIPS 180-4, by the sha2 crate).
    let provenance = &read_descriptor(&out)["tunnelcast"];
    use sha2::Digest;
    let digitised = std::fs::read(repo("data/demo_digitised.csv")).unwrap();
    let sha: String = sha2::Sha256::digest(&digitised)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    assert_eq!(provenance["curve_sha256"], sha.as_str());
    assert_eq!(provenance["events"], "veltranib=137,standard=155");
    // Patients and events of the invented trial, as printed by scripts/make_digitised.py.
    let count = |arm: &str, events: bool| {
        rows.iter()
            .filter(|r| r.arm == arm && (!events || r.event == 1))
            .count()
    };
    assert_eq!(
        (count("veltranib", false), count("veltranib", true)),
        (180, 137)
    );
    assert_eq!(
        (count("standard", false), count("standard", true)),
        (175, 155)
    );
    assert!(rows.iter().all(|r| r.time > 0.0 && r.event <= 1));
    tunnelcast()
        .arg("fit")
        .arg(&out)
        .args(["--arm-col", "arm", "--time-unit", "months"])
        .assert()
        .success();
}

#[test]
fn without_a_risk_table_the_number_of_patients_is_needed_and_the_caveat_printed() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("rebuilt.csv");
    let base = || {
        let mut cmd = tunnelcast();
        cmd.args(["rebuild", "--curve"])
            .arg(repo("data/demo_digitised.csv"))
            .args(["--arm-col", "arm", "--out"])
            .arg(&out);
        cmd
    };
    let missing = base().assert().code(2);
    let stderr = String::from_utf8_lossy(&missing.get_output().stderr).to_string();
    assert!(stderr.contains("--patients"), "{stderr}");
    assert!(!out.exists());
    let ok = base()
        .args(["--patients", "veltranib=180,standard=175"])
        .assert()
        .success();
    let stdout = String::from_utf8_lossy(&ok.get_output().stdout).to_string();
    assert!(stdout.contains("no risk table"), "{stdout}");
    assert!(out.exists());
}

/// Runs `rebuild` on the given files in a fresh folder and checks the refusal: exit 2, one
/// line naming `expect`, nothing new written.
fn refused(curve: &str, risk: Option<&str>, extra: &[&str], expect: &str) {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("curve.csv"), curve).unwrap();
    let mut cmd = tunnelcast();
    cmd.current_dir(dir.path())
        .args(["rebuild", "--curve", "curve.csv", "--out", "ipd.csv"]);
    if let Some(risk) = risk {
        std::fs::write(dir.path().join("risk.csv"), risk).unwrap();
        cmd.args(["--at-risk", "risk.csv"]);
    } else if !extra.contains(&"--patients") {
        cmd.args(["--patients", "100"]);
    }
    let before = listing(dir.path());
    let assert = cmd.args(extra).assert().code(2);
    let stderr = String::from_utf8_lossy(&assert.get_output().stderr).to_string();
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert_eq!(stderr.trim_end().lines().count(), 1, "{stderr}");
    assert!(stderr.starts_with("error: "), "{stderr}");
    assert!(stderr.contains(expect), "expected {expect:?} in {stderr}");
    assert_eq!(listing(dir.path()), before, "something was written");
}

const RISK: &str = "time,at_risk\n0,100\n10,60\n20,30\n";
const CURVE: &str = "time,survival\n0,1\n5,0.8\n12,0.6\n25,0.4\n";

#[test]
fn survival_outside_the_range_after_cleaning_names_the_row() {
    refused(
        "time,survival\n0,1\n5,0.8\n12,-0.1\n25,0.4\n",
        Some(RISK),
        &[],
        "curve.csv line 4 column 2 (\"survival\")",
    );
    refused(
        "time,survival\n0,100\n5,80\n12,130\n",
        Some(RISK),
        &[],
        "curve.csv line 4 column 2",
    );
    // A rise beyond digitising noise.
    refused(
        "time,survival\n0,1\n5,0.6\n12,0.7\n25,0.4\n",
        Some(RISK),
        &[],
        "curve.csv line 4 column 2",
    );
}

#[test]
fn increasing_numbers_at_risk_name_the_row() {
    refused(
        CURVE,
        Some("time,at_risk\n0,100\n10,60\n20,65\n"),
        &[],
        "risk.csv line 4 column 2 (\"at_risk\")",
    );
}

#[test]
fn risk_table_times_beyond_the_curve_name_the_row() {
    refused(
        CURVE,
        Some("time,at_risk\n0,100\n10,60\n30,10\n"),
        &[],
        "risk.csv line 4 column 1",
    );
}

#[test]
fn fewer_than_two_points_name_the_row() {
    refused("time,survival\n0,1\n", Some(RISK), &[], "curve.csv line 2");
}

#[test]
fn a_total_inconsistent_with_the_curve_is_refused() {
    // 100 patients falling to 0.4 can have at most about 100 · (0.6 + 0.02) = 62 events.
    refused(CURVE, Some(RISK), &["--events", "90"], "--events 90");
    refused(CURVE, Some(RISK), &["--events", "0"], "--events 0");
}

#[test]
fn other_bad_input_is_refused_the_same_way() {
    refused(
        CURVE,
        Some("time,at_risk\n1,100\n10,60\n"),
        &[],
        "risk.csv line 2 column 1",
    );
    refused(
        CURVE,
        Some("time,at_risk\n0,100\n10,60.5\n"),
        &[],
        "risk.csv line 3 column 2",
    );
    refused(
        "time,surv\n0,1\n5,0.5\n",
        Some(RISK),
        &[],
        "curve.csv line 1",
    );
    refused(CURVE, None, &["--patients", "a=3"], "--patients a=3");
}

#[test]
fn an_existing_output_is_kept_without_force() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("curve.csv"), CURVE).unwrap();
    std::fs::write(dir.path().join("risk.csv"), RISK).unwrap();
    std::fs::write(dir.path().join("ipd.csv"), "keep").unwrap();
    let run = |force: bool| {
        let mut cmd = tunnelcast();
        cmd.current_dir(dir.path()).args([
            "rebuild",
            "--curve",
            "curve.csv",
            "--at-risk",
            "risk.csv",
            "--out",
            "ipd.csv",
        ]);
        if force {
            cmd.arg("--force");
        }
        cmd.assert()
    };
    run(false).code(2);
    assert_eq!(
        std::fs::read_to_string(dir.path().join("ipd.csv")).unwrap(),
        "keep"
    );
    run(true).success();
    let rows: Vec<(f64, u8)> = read_csv(&dir.path().join("ipd.csv"));
    assert_eq!(rows.len(), 100);
}

#[test]
fn the_overlay_plot_is_written_as_svg_or_png() {
    let dir = tempfile::tempdir().unwrap();
    let rebuild = |plot: &str| {
        tunnelcast()
            .current_dir(dir.path())
            .args(["rebuild", "--curve"])
            .arg(repo("data/demo_digitised.csv"))
            .arg("--at-risk")
            .arg(repo("data/demo_at_risk.csv"))
            .args(["--arm-col", "arm", "--out", &format!("{plot}.csv")])
            .args(["--plot", plot])
            .assert()
            .success();
    };
    rebuild("overlay.svg");
    let svg = std::fs::read_to_string(dir.path().join("overlay.svg")).unwrap();
    let doc = roxmltree::Document::parse(&svg).expect("well-formed XML");
    assert_eq!(doc.root_element().tag_name().name(), "svg");
    // One step line per arm: a polyline of many points that moves only across or down.
    let steps: Vec<Vec<(f64, f64)>> = doc
        .descendants()
        .filter(|n| n.has_tag_name("polyline"))
        .map(|n| {
            n.attribute("points")
                .unwrap_or("")
                .split_whitespace()
                .map(|p| {
                    let (x, y) = p.split_once(',').unwrap();
                    (x.parse().unwrap(), y.parse().unwrap())
                })
                .collect::<Vec<(f64, f64)>>()
        })
        .filter(|p| p.len() > 20)
        .collect();
    assert_eq!(steps.len(), 2, "two arms, two step lines");
    for path in &steps {
        for w in path.windows(2) {
            assert!(w[0].0 == w[1].0 || w[0].1 == w[1].1, "{w:?}");
            assert!(w[1].1 >= w[0].1, "survival never rises");
        }
    }
    // One hollow marker per digitised row (the file has a row at time 0 for each arm, so
    // cleaning adds no point).
    let rows = std::fs::read_to_string(repo("data/demo_digitised.csv"))
        .unwrap()
        .lines()
        .skip(1)
        .filter(|l| !l.trim().is_empty())
        .count();
    let markers = doc
        .descendants()
        .filter(|n| n.has_tag_name("circle") && n.attribute("fill") == Some("none"))
        .count();
    assert_eq!(markers, rows);

    rebuild("overlay.png");
    let bytes = std::fs::read(dir.path().join("overlay.png")).unwrap();
    assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n", "PNG signature");
    let reader = png::Decoder::new(std::io::Cursor::new(bytes))
        .read_info()
        .unwrap();
    // 960 wide; 535 for the plot plus room for four rows of numbers at risk and a heading.
    assert_eq!(
        (reader.info().width, reader.info().height),
        (960, 535 + 14 + 5 * 18)
    );
}

#[test]
fn a_plot_file_of_another_format_is_refused_before_anything_is_written() {
    refused(CURVE, Some(RISK), &["--plot", "out.pdf"], "--plot out.pdf");
    refused(CURVE, Some(RISK), &["--plot", "out"], "no extension");
    refused(
        CURVE,
        Some(RISK),
        &["--plot", "out.sgv"],
        "did you mean \".svg\"",
    );
}
