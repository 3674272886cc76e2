//! No silent time unit: `fit` without `--time-unit`, and an analysis file without
//! `[data] time_unit`, are refused with one line listing the units (days, weeks, months, years:
//! the contract's units) and the range of the times in the file, counted here from the rows
//! written below; nothing is written. Before, both assumed days, which makes tables from
//! monthly data about 30 times too long.

mod shell;
use shell::{listing, tunnelcast};

/// Invented monthly data: times from 0.3 to 40.2.
const DATA: &str = "time,event\n12.5,1\n0.3,1\n40.2,0\n7,1\n";

fn refused(dir: &std::path::Path, args: &[&str]) -> String {
    let before = listing(dir);
    let out = tunnelcast(dir).args(args).output().unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    assert_eq!(listing(dir), before, "something was written");
    stderr.trim_end().to_string()
}

#[test]
fn fit_needs_the_time_unit_and_says_what_the_times_run_over() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("data.csv"), DATA).unwrap();
    let stderr = refused(dir.path(), &["fit", "data.csv", "--json", "fit.json"]);
    assert_eq!(
        stderr,
        "error: --time-unit is required: say what the times in data.csv are in (days, weeks, months, years); they run from 0.3 to 40.2"
    );
    // A bad file is reported first, at its line and column.
    std::fs::write(dir.path().join("bad.csv"), "time,event\n1,0,5\n").unwrap();
    let stderr = refused(dir.path(), &["fit", "bad.csv"]);
    assert!(
        stderr.starts_with("error: bad.csv line 2 column 1"),
        "{stderr}"
    );
    // With the unit, the same file is fitted.
    tunnelcast(dir.path())
        .args([
            "fit",
            "data.csv",
            "--time-unit",
            "months",
            "--families",
            "exponential",
        ])
        .assert()
        .success();
}

#[test]
fn an_analysis_file_needs_the_time_unit_too() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("data.csv"), DATA).unwrap();
    std::fs::write(
        dir.path().join("analysis.toml"),
        "[data]\nfile = \"data.csv\"\n\n[tunnels]\ncycle = \"1 month\"\n",
    )
    .unwrap();
    let stderr = refused(dir.path(), &["run", "analysis.toml", "--out", "out"]);
    assert_eq!(
        stderr,
        "error: analysis.toml line 1 column 1: [data] time_unit is required: say what the times in data.csv are in (days, weeks, months, years); they run from 0.3 to 40.2"
    );
    // From a digitised curve the unit is the figure's time axis, needed all the same.
    std::fs::write(
        dir.path().join("curve.csv"),
        "time,survival\n0,1\n6,0.8\n18.5,0.5\n",
    )
    .unwrap();
    std::fs::write(
        dir.path().join("analysis.toml"),
        "[data]\ncurve = \"curve.csv\"\npatients = 40\n\n[tunnels]\ncycle = \"1 month\"\n",
    )
    .unwrap();
    let stderr = refused(dir.path(), &["run", "analysis.toml", "--out", "out"]);
    assert!(
        stderr.ends_with(
            "times in curve.csv are in (days, weeks, months, years); they run from 0 to 18.5"
        ),
        "{stderr}"
    );
}
