//! `fit --plots DIR`: the folder gets SVG and PNG of plots (a)–(c) per arm, all or nothing.

use assert_cmd::Command;
use std::path::Path;

fn demo_csv() -> &'static Path {
    Path::new(concat!(env!("CARGO_MANIFEST_DIR"), "/data/demo_trial.csv"))
}

#[test]
fn writes_three_plots_per_arm_in_both_formats() {
    let dir = tempfile::tempdir().unwrap();
    let plots = dir.path().join("plots");
    Command::cargo_bin("tunnelcast")
        .unwrap()
        .current_dir(dir.path())
        .args(["fit", demo_csv().to_str().unwrap(), "--time-unit", "months"])
        .args([
            "--arm-col",
            "arm",
            "--families",
            "weibull,lognormal",
            "--plots",
            "plots",
        ])
        .assert()
        .success();
    let mut names: Vec<String> = std::fs::read_dir(&plots)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    let mut expected = Vec::new();
    for plot in ["diagnostics", "hazard", "survival"] {
        for arm in ["standard-care", "veltranib"] {
            for ext in ["png", "svg"] {
                expected.push(format!("{plot}-{arm}.{ext}"));
            }
        }
    }
    expected.sort();
    assert_eq!(names, expected);
    // Nothing else (no temporary folder) is left beside the output.
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
}

#[test]
fn refuses_a_non_empty_folder_without_force() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::create_dir(dir.path().join("plots")).unwrap();
    std::fs::write(dir.path().join("plots/keep.txt"), "mine").unwrap();
    let out = Command::cargo_bin("tunnelcast")
        .unwrap()
        .current_dir(dir.path())
        .args(["fit", demo_csv().to_str().unwrap(), "--time-unit", "months"])
        .args(["--families", "weibull", "--plots", "plots"])
        .assert()
        .code(2)
        .get_output()
        .clone();
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert!(
        stderr.contains("--force") && stderr.lines().count() == 1,
        "{stderr}"
    );
    assert_eq!(
        std::fs::read_to_string(dir.path().join("plots/keep.txt")).unwrap(),
        "mine"
    );
}
