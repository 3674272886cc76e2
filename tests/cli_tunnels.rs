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
    life_years_unit: String,
    cycle: f64,
    horizon_cycles: usize,
    horizon: f64,
    tolerance: f64,
    discount: f64,
    suggested_count: usize,
    stable_count: Option<usize>,
    stable_window: usize,
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
    // A Weibull with shape 1.2 has a hazard that keeps rising: p_exit never holds still
    // within 0.1% over two years (it grows by (t+1)^0.2/t^0.2 - 1 ≥ 0.14% a month to t = 120).
    assert_eq!(h.stable_count, None);
    assert_eq!(h.stable_window, 24);
    assert_eq!(h.life_years_unit, "years");
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

/// A printed number of `horizon` as a float, from the row of the within-cycle table.
fn printed_row(text: &str, method: &str) -> Vec<f64> {
    text.lines()
        .find(|l| l.split_whitespace().next() == Some(method))
        .unwrap_or_else(|| panic!("no {method} row in\n{text}"))
        .split_whitespace()
        .skip(1)
        .map(|x| x.parse().unwrap())
        .collect()
}

#[test]
fn horizon_life_years_are_in_years_for_monthly_and_weekly_cycles() {
    // A monthly exponential curve with rate 0.05: its restricted mean to T months is
    // (1 - e^(-0.05·T))/0.05 months (calculus), and a month is a twelfth of a year
    // (interface). 10 years is T = 120 months in monthly cycles; in weekly cycles it is
    // rounded up to 522 weeks = 522·7·12/365.25 months (interface: week 7 days, year 365.25).
    let years = |t: f64| (1.0 - (-0.05 * t).exp()) / 0.05 / 12.0;
    let dir = tempfile::tempdir().unwrap();
    for (cycle, file, t_months) in [
        ("1 month", "m.json", 120.0),
        ("1 week", "w.json", 522.0 * 7.0 * 12.0 / 365.25),
    ] {
        let expected = years(t_months);
        let out = tunnelcast(dir.path())
            .args([
                "horizon",
                "--family",
                "exponential",
                "--param",
                "rate=0.05",
                "--time-unit",
                "months",
                "--cycle",
                cycle,
                "--horizon",
                "10 years",
                "--json",
                file,
            ])
            .output()
            .unwrap();
        assert!(out.status.success());
        let text = String::from_utf8(out.stdout).unwrap();
        assert!(text.contains("life-years in years"), "{text}");
        assert!(!text.contains("life-years in months"), "{text}");
        let h: HorizonJson =
            serde_json::from_slice(&std::fs::read(dir.path().join(file)).unwrap()).unwrap();
        assert_eq!(h.life_years_unit, "years");
        for w in &h.within_cycle {
            assert!(
                (w.exact - expected).abs() < 1e-9 * expected,
                "{cycle}: exact {} years, expected {expected}",
                w.exact
            );
            assert!((w.life_years - w.exact).abs() < 0.05 * expected);
        }
        // The printed table shows the same years at 6 significant digits.
        let trapezoid = printed_row(&text, "trapezoid");
        assert!((trapezoid[1] - expected).abs() < 1e-5 * expected, "{text}");
        // A constant hazard is stable from the first tunnel (every p_exit is the same).
        assert_eq!(h.stable_count, Some(1));
        // 10 years = 521.78... weeks, rounded up to 522 whole cycles.
        let cycles = if cycle == "1 month" { 120 } else { 522 };
        assert_eq!(h.horizon_cycles, cycles);
    }
}

/// The `parameters` sheet of an XLSX file as (item, value, unit) rows, read with calamine.
fn parameter_sheet(path: &Path) -> Vec<(String, calamine::Data, String)> {
    use calamine::Reader;
    let mut book: calamine::Xlsx<_> = calamine::open_workbook(path).unwrap();
    let range = book.worksheet_range("parameters").unwrap();
    range
        .rows()
        .skip(1)
        .map(|r| (r[0].to_string(), r[1].clone(), r[2].to_string()))
        .collect()
}

#[test]
fn parameter_units_follow_what_each_parameter_measures() {
    // Dimensional analysis (common practice): the log-normal mu is the mean of ln T, so its
    // unit is ln(months); sigma is a pure number; the Gompertz hazard rate·e^(shape·t) makes
    // both its parameters per unit time; spline coefficients are pure numbers (c0 an
    // intercept on ln t) and knots are times.
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // (curve options, expected (row, unit) pairs)
    type Case<'a> = (&'a [&'a str], &'a [(&'a str, &'a str)]);
    let cases: [Case; 3] = [
        (
            &[
                "--family",
                "lognormal",
                "--param",
                "mu=2.5",
                "--param",
                "sigma=0.9",
            ],
            &[("mu", "ln(months)"), ("sigma", "unitless")],
        ),
        (
            &[
                "--family",
                "gompertz",
                "--param",
                "shape=0.02",
                "--param",
                "rate=0.05",
            ],
            &[("shape", "per month"), ("rate", "per month")],
        ),
        (
            &[
                "--family",
                "spline-ph-1",
                "--param",
                "c0=-3",
                "--param",
                "c1=1.2",
                "--param",
                "c2=0.01",
                "--knots",
                "1 month,1 year,5 years",
            ],
            &[
                ("c0", "unitless (intercept on ln t, t in months)"),
                ("c1", "unitless"),
                ("c2", "unitless"),
                ("spline_scale", ""),
                ("knot_1", "months"),
                ("knot_2", "months"),
                ("knot_3", "months"),
            ],
        ),
    ];
    for (curve, expected) in cases {
        let _ = std::fs::remove_file(d.join("t.xlsx"));
        tunnelcast(d)
            .arg("tunnels")
            .args(curve)
            .args([
                "--time-unit",
                "months",
                "--cycle",
                "1 month",
                "--count",
                "3",
            ])
            .args(["--out", "t.xlsx"])
            .assert()
            .success();
        let rows = parameter_sheet(&d.join("t.xlsx"));
        for (item, unit) in expected.iter() {
            let row = rows
                .iter()
                .find(|r| r.0 == *item)
                .unwrap_or_else(|| panic!("no row {item}: {rows:?}"));
            assert_eq!(row.2, *unit, "{item}: {rows:?}");
        }
        // The same units in the metadata of every format (here JSON).
        tunnelcast(d)
            .arg("tunnels")
            .args(curve)
            .args([
                "--time-unit",
                "months",
                "--cycle",
                "1 month",
                "--count",
                "3",
            ])
            .args(["--out", "t.json", "--force"])
            .assert()
            .success();
        let doc: TableFile =
            serde_json::from_slice(&std::fs::read(d.join("t.json")).unwrap()).unwrap();
        let units = &doc.metadata["parameter_units"];
        // Parameters only: settings rows (knots, spline scale) are not parameters.
        let parameters = expected
            .iter()
            .filter(|(i, _)| !i.starts_with("knot_") && *i != "spline_scale");
        for (item, unit) in parameters {
            assert!(units.contains(&format!("{item}: {unit}")), "{units}");
        }
    }
    // Knots given in years and months land in months at full precision: 12 and 60.
    let rows = parameter_sheet(&d.join("t.xlsx"));
    let knot = |i: usize| match &rows.iter().find(|r| r.0 == format!("knot_{i}")).unwrap().1 {
        calamine::Data::Float(x) => *x,
        other => panic!("{other:?}"),
    };
    assert_eq!((knot(1), knot(2), knot(3)), (1.0, 12.0, 60.0));
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
