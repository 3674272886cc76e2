//! Command-line tests of `tunnels` and `horizon`: outputs read back with serde, and every
//! bad-input case of the tunnels issue (exit 2, one line, no output file).

mod closed_form;
mod shell;
use shell::{listing, read_csv, read_descriptor, tunnelcast, TableFile};

use closed_form::{close, long_table, Adjust, Weibull};
use serde::Deserialize;
use std::collections::BTreeMap;
use std::path::Path;

const WEIBULL: [&str; 8] = [
    "--family",
    "weibull",
    "--param",
    "shape=1.2",
    "--param",
    "scale=30",
    "--time-unit",
    "months",
];

/// Invented trial data (no external source) and its fit file, written with `fit --json`.
fn write_fit(dir: &Path, families: &str) {
    let rows = [
        (2.0, 1),
        (3.5, 1),
        (4.0, 0),
        (5.5, 1),
        (6.0, 1),
        (7.5, 0),
        (8.0, 1),
        (9.5, 1),
        (11.0, 1),
        (12.0, 0),
        (14.5, 1),
        (16.0, 1),
        (18.0, 0),
        (21.0, 1),
        (24.0, 0),
        (30.0, 0),
    ];
    let mut csv = String::from("time,event\n");
    for (t, e) in rows {
        csv.push_str(&format!("{t},{e}\n"));
    }
    std::fs::write(dir.join("trial.csv"), csv).unwrap();
    tunnelcast(dir)
        .args([
            "fit",
            "trial.csv",
            "--time-unit",
            "months",
            "--families",
            families,
        ])
        .args(["--json", "fit.json"])
        .assert()
        .success();
}

/// Runs a command expected to fail on bad input: exit 2, one `error:` line naming `needle`,
/// no panic, and no file created.
fn refuses(dir: &Path, args: &[&str], needle: &str) {
    let before = listing(dir);
    let out = tunnelcast(dir).args(args).output().unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{args:?}: {stderr}");
    assert_eq!(stderr.lines().count(), 1, "{args:?}: {stderr}");
    assert!(stderr.starts_with("error: "), "{stderr}");
    assert!(
        stderr.contains(needle),
        "{args:?}: wanted {needle:?} in {stderr}"
    );
    assert!(!stderr.contains("panicked"));
    assert_eq!(listing(dir), before, "{args:?} left a file");
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct LongRow {
    tunnel: usize,
    t_start: f64,
    t_end: f64,
    surv_start: f64,
    surv_end: f64,
    p_exit: f64,
    p_next: f64,
}

/// The provenance recorded in the descriptor of a CSV file (checked on the way).
fn provenance(csv: &Path) -> BTreeMap<String, String> {
    serde_json::from_value(read_descriptor(csv)["tunnelcast"].clone()).unwrap()
}

#[test]
fn long_csv_reads_back_equal_to_the_closed_form() {
    let dir = tempfile::tempdir().unwrap();
    let mut args = vec!["tunnels"];
    args.extend(WEIBULL);
    args.extend(["--cycle", "4 weeks", "--until", "2 years"]);
    for out in ["t.csv", "t.json"] {
        tunnelcast(dir.path())
            .args(&args)
            .args(["--out", out])
            .assert()
            .success();
    }
    let doc: TableFile =
        serde_json::from_slice(&std::fs::read(dir.path().join("t.json")).unwrap()).unwrap();
    assert_eq!(doc.metadata["time_unit"], "weeks");
    assert_eq!(doc.metadata["family"], "weibull");
    assert!(doc.metadata["caution"].contains("assumption"));
    // The CSV's descriptor carries the same provenance as the JSON's metadata.
    let meta = provenance(&dir.path().join("t.csv"));
    assert_eq!(meta["time_unit"], "weeks");
    assert_eq!(meta["family"], "weibull");
    let rows: Vec<LongRow> = read_csv(&dir.path().join("t.csv"));
    // 2 years = 730.5 days = 26.09 four-week cycles: 27 tunnels.
    assert_eq!(rows.len(), 27);
    // S(t) = exp(-(t/30)^1.2), t in months; a four-week cycle is 28/30.4375 months (a month is
    // a twelfth of 365.25 days; interface.md); times in the table in weeks.
    let weibull = Weibull {
        shape: 1.2,
        scale: 30.0,
    };
    let expected = long_table(weibull, Adjust::None, 28.0 / 30.4375, 27);
    for (got, want) in rows.iter().zip(&expected) {
        assert_eq!(got.tunnel, want.tunnel);
        let k = got.tunnel as f64;
        assert_eq!([got.t_start, got.t_end], [4.0 * (k - 1.0), 4.0 * k]);
        for (g, w) in [
            (got.surv_start, want.surv_start),
            (got.surv_end, want.surv_end),
            (got.p_exit, want.p_exit),
            (got.p_next, want.p_next),
        ] {
            assert!(close(g, w, 1e-12), "tunnel {k}: {g} vs closed form {w}");
        }
    }
    // The JSON holds the same numbers, to the bit.
    for (row, got) in doc.tables[0].rows.iter().zip(&rows) {
        let json: Vec<f64> = row.iter().map(|v| v.as_f64().unwrap()).collect();
        let csv = [
            got.tunnel as f64,
            got.t_start,
            got.t_end,
            got.surv_start,
            got.surv_end,
            got.p_exit,
            got.p_next,
        ];
        assert_eq!(json, csv);
    }
}

#[test]
fn json_matrix_rows_sum_to_one_and_table_unit_is_stated() {
    let dir = tempfile::tempdir().unwrap();
    let mut args = vec!["tunnels"];
    args.extend(WEIBULL);
    args.extend(["--cycle", "1 month", "--count", "6", "--layout", "matrix"]);
    args.extend(["--table-unit", "days", "--out", "m.json"]);
    tunnelcast(dir.path()).args(&args).assert().success();
    let doc: TableFile =
        serde_json::from_slice(&std::fs::read(dir.path().join("m.json")).unwrap()).unwrap();
    assert_eq!(doc.metadata["time_unit"], "days");
    assert_eq!(doc.metadata["cycle"], "30.4375 days");
    let table = &doc.tables[0];
    assert_eq!(table.name, "matrix");
    assert_eq!(table.columns.len(), 1 + 6 + 1);
    assert_eq!(table.rows.len(), 7);
    for row in &table.rows {
        let sum: f64 = row[1..].iter().map(|v| v.as_f64().unwrap()).sum();
        assert!((sum - 1.0).abs() < 1e-12);
    }
    // The last tunnel loops on itself; exit is absorbing.
    assert!(table.rows[5][6].as_f64().unwrap() > 0.9);
    assert_eq!(table.rows[6][7].as_f64(), Some(1.0));
}

#[test]
fn stdout_table_states_the_time_unit() {
    let dir = tempfile::tempdir().unwrap();
    let mut args = vec!["tunnels"];
    args.extend(WEIBULL);
    args.extend(["--cycle", "1 month", "--count", "3"]);
    let out = tunnelcast(dir.path()).args(&args).output().unwrap();
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(out.status.success());
    assert!(text.contains("t_start (months)"), "{text}");
    assert_eq!(
        text.lines()
            .filter(|l| l.trim_start().starts_with(char::is_numeric))
            .count(),
        3
    );
}

#[test]
fn from_a_fit_file_records_its_hash() {
    let dir = tempfile::tempdir().unwrap();
    write_fit(dir.path(), "weibull,lognormal");
    tunnelcast(dir.path())
        .args(["tunnels", "--fit", "fit.json", "--family", "lognormal"])
        .args(["--cycle", "1 month", "--count", "12", "--out", "t.csv"])
        .assert()
        .success();
    let meta = provenance(&dir.path().join("t.csv"));
    // Reference: SHA-256 (FIPS 180-4) by the sha2 crate, on the fit file's bytes.
    use sha2::Digest;
    let bytes = std::fs::read(dir.path().join("fit.json")).unwrap();
    let expected: String = sha2::Sha256::digest(&bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    assert_eq!(meta["fit_file_sha256"], expected);
    assert_eq!(meta["source"], "fit file");
    assert_eq!(meta["parameter_time_unit"], "months");
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct HorizonJson {
    metadata: BTreeMap<String, String>,
    time_unit: String,
    cycle: f64,
    horizon_cycles: usize,
    horizon: f64,
    tolerance: f64,
    discount: f64,
    suggested_count: usize,
    stable_count: usize,
    truncation: Vec<TruncationJson>,
    within_cycle: Vec<WithinJson>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct TruncationJson {
    count: usize,
    max_surv_gap: f64,
    ly_rel_error: f64,
    #[allow(dead_code)]
    p_exit_last: f64,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct WithinJson {
    method: String,
    life_years: f64,
    exact: f64,
    error: f64,
    rel_error: f64,
    discounted_life_years: f64,
    discounted_exact: f64,
    discounted_error: f64,
    discounted_rel_error: f64,
}

#[test]
fn horizon_json_reads_back_with_consistent_answers() {
    let dir = tempfile::tempdir().unwrap();
    let mut args = vec!["horizon"];
    args.extend(WEIBULL);
    args.extend([
        "--cycle",
        "1 month",
        "--horizon",
        "10 years",
        "--json",
        "h.json",
    ]);
    tunnelcast(dir.path()).args(&args).assert().success();
    let h: HorizonJson =
        serde_json::from_slice(&std::fs::read(dir.path().join("h.json")).unwrap()).unwrap();
    assert_eq!(
        (h.time_unit.as_str(), h.cycle, h.horizon_cycles, h.horizon),
        ("months", 1.0, 120, 120.0)
    );
    assert_eq!((h.tolerance, h.discount), (0.001, 0.035));
    assert!(h.metadata["caution"].contains("assumption"));
    assert_eq!(h.truncation.len(), 120);
    let s = &h.truncation[h.suggested_count - 1];
    assert!(s.max_surv_gap <= 0.001 && s.ly_rel_error <= 0.001);
    if h.suggested_count > 1 {
        let before = &h.truncation[h.suggested_count - 2];
        assert!(before.max_surv_gap > 0.001 || before.ly_rel_error > 0.001);
    }
    assert!(h.stable_count >= 1 && h.stable_count <= 120);
    assert_eq!(h.truncation[0].count, 1);
    let methods: Vec<&str> = h.within_cycle.iter().map(|w| w.method.as_str()).collect();
    assert_eq!(
        methods,
        ["start", "end", "half-cycle", "trapezoid", "simpson"]
    );
    for w in &h.within_cycle {
        assert!((w.life_years - w.exact - w.error).abs() < 1e-12);
        assert!((w.error / w.exact - w.rel_error).abs() < 1e-12);
        assert!((w.discounted_life_years - w.discounted_exact - w.discounted_error).abs() < 1e-12);
        assert!(w.discounted_rel_error.abs() < 0.03);
        assert!(w.discounted_exact < w.exact);
    }
}

#[test]
fn bad_cycle_count_and_horizon_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    for (cycle, needle) in [
        ("0 months", "--cycle"),
        ("-1 months", "--cycle"),
        ("1 monht", "did you mean \"months\""),
    ] {
        let mut a = vec!["tunnels"];
        a.extend(WEIBULL);
        a.extend(["--cycle", cycle, "--count", "5", "--out", "t.csv"]);
        refuses(d, &a, needle);
    }
    let mut a = vec!["tunnels"];
    a.extend(WEIBULL);
    a.extend(["--cycle", "1 month", "--count", "0", "--out", "t.csv"]);
    refuses(d, &a, "--count 0");
    let mut a = vec!["tunnels"];
    a.extend(WEIBULL);
    a.extend(["--cycle", "1 month", "--until", "2 weeks", "--out", "t.csv"]);
    refuses(d, &a, "shorter than one cycle");
    let mut a = vec!["horizon"];
    a.extend(WEIBULL);
    a.extend([
        "--cycle",
        "1 year",
        "--horizon",
        "6 months",
        "--json",
        "h.json",
    ]);
    refuses(d, &a, "shorter than one cycle");
}

#[test]
fn bad_curve_options_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let tail = ["--cycle", "1 month", "--count", "5", "--out", "t.csv"];
    let run = |curve: &[&str], needle: &str| {
        let mut a = vec!["tunnels"];
        a.extend_from_slice(curve);
        a.extend(tail);
        refuses(d, &a, needle);
    };
    run(
        &[
            "--family",
            "weibul",
            "--param",
            "shape=1",
            "--param",
            "scale=2",
            "--time-unit",
            "months",
        ],
        "did you mean \"weibull\"",
    );
    run(
        &[
            "--family",
            "weibull",
            "--param",
            "shap=1",
            "--param",
            "scale=2",
            "--time-unit",
            "months",
        ],
        "did you mean \"shape\"",
    );
    run(
        &[
            "--family",
            "weibull",
            "--param",
            "shape=1",
            "--time-unit",
            "months",
        ],
        "missing: scale",
    );
    run(
        &[
            "--family",
            "weibull",
            "--param",
            "shape=1",
            "--param",
            "scale=-4",
            "--time-unit",
            "months",
        ],
        "scale must be a positive",
    );
    run(
        &[
            "--family",
            "weibull",
            "--param",
            "shape=1",
            "--param",
            "scale=4",
            "--time-unit",
            "monhts",
        ],
        "did you mean \"months\"",
    );
    write_fit(d, "weibull");
    run(
        &["--fit", "fit.json", "--family", "lognormal"],
        "lognormal is not in the fit file",
    );
    // A fit the fitter marked as not converged is refused unless asked for.
    let text = std::fs::read_to_string(d.join("fit.json")).unwrap();
    std::fs::write(
        d.join("fit.json"),
        text.replace("\"converged\": true", "\"converged\": false"),
    )
    .unwrap();
    run(
        &["--fit", "fit.json", "--family", "weibull"],
        "did not converge",
    );
}

#[test]
fn output_problems_are_refused_before_computing() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let mut a = vec!["tunnels"];
    a.extend(WEIBULL);
    a.extend(["--cycle", "1 month", "--count", "5", "--out", "t.tsv"]);
    refuses(d, &a, "unknown output format");
    std::fs::write(d.join("t.csv"), "mine").unwrap();
    let mut a = vec!["tunnels"];
    a.extend(WEIBULL);
    a.extend(["--cycle", "1 month", "--count", "5", "--out", "t.csv"]);
    refuses(d, &a, "already exists");
    assert_eq!(std::fs::read_to_string(d.join("t.csv")).unwrap(), "mine");
    // An existing descriptor is not replaced without --force either, even without its CSV.
    std::fs::remove_file(d.join("t.csv")).unwrap();
    std::fs::write(d.join("t.resource.json"), "{}").unwrap();
    refuses(d, &a, "t.resource.json: already exists");
    a.push("--force");
    tunnelcast(d).args(&a).assert().success();
    assert_eq!(read_csv::<LongRow>(&d.join("t.csv")).len(), 5);
}
