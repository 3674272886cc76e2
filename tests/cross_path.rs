//! Cross-path consistency (issue 14): one curve, each adjustment (none, hazard ratio,
//! acceleration factor, waning, background added, background floor), every path that turns it
//! into numbers: `tunnels` (CSV, JSON and XLSX long layout, from published parameters and from a
//! fit file; the matrix layout in JSON and CSV), `horizon` (the unit-free columns of its
//! truncation table), `draws` (point estimate and mean of the draws) and `run` with an analysis
//! file. The paths must give the same numbers, and those numbers must equal the closed forms of
//! `tests/closed_form/mod.rs`, computed without the library.
//!
//! The curve is the invented Weibull of `tests/scenario/mod.rs` (shape 1.5, scale 60 months),
//! monthly cycles, 36 tunnels, a 10-year horizon; `run` fits the scenario's invented trial, and
//! its expectations are the closed forms at the parameters of the `fit.json` it wrote.

mod closed_form;
mod scenario;
mod shell;

use closed_form::{close, long_columns, long_table, Adjust, Row, Weibull};
use scenario::{
    adjust_args, adjust_toml, read_xlsx, write_fit, write_lifetable, JsonTables, ADJUSTMENTS,
    COVARIANCE, CURVE, FROM_FIT, PUBLISHED,
};
use shell::{read_csv_table, tunnelcast};
use std::path::Path;

/// Tunnel states of the tables.
const COUNT: usize = 36;
/// Cycles of the 10-year horizon.
const HORIZON: usize = 120;
/// Draws of the point-and-mean check.
const DRAWS: usize = 1000;
/// Relative tolerance against a closed form: the library's integrals (waning, the background
/// share, the floor's crossing) are asked for 1e-12 or better.
const REL: f64 = 1e-9;
/// Absolute tolerance on the truncation table's survival gaps and relative life-year errors,
/// which are differences of survival values (each within 1e-12 of its closed form).
const GAP: f64 = 1e-10;

/// Runs `command` with the curve options `curve`, the options of `adjust`, monthly cycles and
/// `extra`.
fn run_cli(dir: &Path, command: &str, curve: &[&str], adjust: Adjust, extra: &[&str]) {
    tunnelcast(dir)
        .arg(command)
        .args(curve)
        .args(adjust_args(adjust))
        .args(["--cycle", "1 month"])
        .args(extra)
        .assert()
        .success();
}

/// `tunnels` with COUNT tunnel states.
fn tunnels(dir: &Path, curve: &[&str], adjust: Adjust, extra: &[&str]) {
    let mut args = vec!["--count", "36"];
    args.extend(extra);
    run_cli(dir, "tunnels", curve, adjust, &args);
}

/// A long table (columns and numeric rows) against the closed-form rows, value by value.
fn check_long(what: &str, columns: &[String], rows: &[Vec<f64>], expected: &[Row], adjust: Adjust) {
    assert_eq!(columns, long_columns(adjust), "{what} {adjust:?}");
    assert_eq!(rows.len(), expected.len(), "{what} {adjust:?}");
    for (row, want) in rows.iter().zip(expected) {
        assert_eq!(row.len(), columns.len(), "{what} {adjust:?}: ragged row");
        for ((got, want), name) in row.iter().zip(want.values()).zip(columns) {
            assert!(
                close(*got, want, REL),
                "{what} {adjust:?} tunnel {} {name}: {got} vs closed form {want}",
                row[0]
            );
        }
    }
}

/// Rows of a matrix table (first column the state's name) as numbers, without that column.
fn matrix_values(rows: &[Vec<String>]) -> Vec<Vec<f64>> {
    rows.iter()
        .map(|r| r[1..].iter().map(|t| t.parse().unwrap()).collect())
        .collect()
}

/// Every tunnels output of the published curve and of the fit file with `adjust`.
fn check_tunnels(d: &Path, adjust: Adjust, expected: &[Row]) -> Vec<Vec<f64>> {
    for out in ["t.csv", "t.json", "t.xlsx"] {
        tunnels(d, &PUBLISHED, adjust, &["--out", out]);
    }
    tunnels(d, &FROM_FIT, adjust, &["--out", "f.json"]);
    let csv = read_csv_table(&d.join("t.csv"));
    let rows = csv.numbers();
    check_long("tunnels CSV", &csv.columns, &rows, expected, adjust);
    let json = JsonTables::read(&d.join("t.json"));
    let (xlsx_columns, xlsx_rows) = read_xlsx(&d.join("t.xlsx"), "tunnels");
    let fit = JsonTables::read(&d.join("f.json"));
    // The same numbers on every path, to the bit: each format writes f64s that read back exactly.
    for (what, columns, other) in [
        (
            "tunnels JSON",
            json.columns("tunnels"),
            json.rows("tunnels"),
        ),
        ("tunnels XLSX", xlsx_columns, xlsx_rows),
        (
            "tunnels --fit JSON",
            fit.columns("tunnels"),
            fit.rows("tunnels"),
        ),
    ] {
        assert_eq!(columns, csv.columns, "{what} {adjust:?}");
        assert_eq!(other, rows, "{what} {adjust:?} differs from the CSV");
    }

    // Matrix layout, JSON and CSV: tunnel k → k+1 with p_next and → exit with p_exit, the last
    // tunnel staying with its p_next (interface.md, matrix layout).
    tunnels(
        d,
        &PUBLISHED,
        adjust,
        &["--layout", "matrix", "--out", "m.json"],
    );
    tunnels(
        d,
        &PUBLISHED,
        adjust,
        &["--layout", "matrix", "--out", "m.csv"],
    );
    let m_json = JsonTables::read(&d.join("m.json"));
    let m_csv = read_csv_table(&d.join("m.csv"));
    let mut states: Vec<String> = (1..=COUNT).map(|k| format!("tunnel_{k}")).collect();
    states.push("exit".into());
    let mut header = vec!["from".to_string()];
    header.extend(states.iter().cloned());
    assert_eq!(m_json.columns("matrix"), header);
    assert_eq!(m_csv.columns, header);
    let from_csv = matrix_values(&m_csv.rows);
    let from_json: Vec<Vec<f64>> = m_json
        .rows("matrix")
        .iter()
        .map(|r| r[1..].to_vec())
        .collect();
    assert_eq!(from_csv, from_json, "matrix CSV and JSON {adjust:?}");
    let want = closed_form::matrix(expected);
    for (i, (row, want_row)) in from_json.iter().zip(&want).enumerate() {
        for (j, (got, want)) in row.iter().zip(want_row).enumerate() {
            assert!(
                close(*got, *want, REL),
                "matrix {adjust:?} {} → {}: {got} vs closed form {want}",
                states[i],
                states[j]
            );
        }
    }

    // With background mortality added, the matrix by cause: one exit state per cause.
    if let Adjust::Add { .. } = adjust {
        tunnels(
            d,
            &PUBLISHED,
            adjust,
            &["--layout", "matrix-by-cause", "--out", "c.json"],
        );
        let by_cause = JsonTables::read(&d.join("c.json"));
        let columns = by_cause.columns("matrix_by_cause");
        assert_eq!(columns[1..=COUNT], states[..COUNT]);
        assert_eq!(columns[COUNT + 1..], ["exit_disease", "exit_background"]);
        for (k, (row, e)) in by_cause
            .rows("matrix_by_cause")
            .iter()
            .zip(expected)
            .enumerate()
        {
            let cause = |name: &str| e.extra.iter().find(|(n, _)| *n == name).unwrap().1;
            let next = (k + 1).min(COUNT - 1);
            for (j, got) in row[1..].iter().enumerate() {
                let want = match j {
                    j if j == next => e.p_next,
                    j if j == COUNT => cause("p_exit_disease"),
                    j if j == COUNT + 1 => cause("p_exit_background"),
                    _ => 0.0,
                };
                assert!(
                    close(*got, want, REL),
                    "matrix by cause tunnel {} → {}: {got} vs closed form {want}",
                    k + 1,
                    columns[j + 1]
                );
            }
        }
    }
    rows
}

/// The truncation rows (count, max_surv_gap, ly_rel_error, p_exit_last) against the closed form.
fn check_truncation(what: &str, rows: &[[f64; 4]], w: Weibull, adjust: Adjust) {
    let expected = closed_form::truncation(w, adjust, 1.0, HORIZON);
    assert_eq!(rows.len(), HORIZON, "{what}");
    for (row, e) in rows.iter().zip(&expected) {
        assert_eq!(row[0], e.count as f64);
        assert!(
            close(row[3], e.p_exit_last, REL),
            "{what} {adjust:?} K {}: p_exit_last {} vs closed form {}",
            e.count,
            row[3],
            e.p_exit_last
        );
        assert!(
            (row[1] - e.max_surv_gap).abs() < GAP && (row[2] - e.ly_rel_error).abs() < GAP,
            "{what} {adjust:?} K {}: gaps {} {} vs closed form {} {}",
            e.count,
            row[1],
            row[2],
            e.max_surv_gap,
            e.ly_rel_error
        );
    }
}

/// The smallest K whose closed-form gaps are both within the tolerance 0.001 (interface.md,
/// `suggested_count`).
fn suggested(w: Weibull, adjust: Adjust) -> usize {
    closed_form::truncation(w, adjust, 1.0, HORIZON)
        .iter()
        .find(|r| r.max_surv_gap <= 0.001 && r.ly_rel_error <= 0.001)
        .map_or(HORIZON, |r| r.count)
}

/// `horizon --json` of the published curve: its truncation table against the closed form and
/// its p_exit_last equal to the tunnel table's p_exit.
fn check_horizon(d: &Path, adjust: Adjust, tunnel_rows: &[Vec<f64>]) {
    run_cli(
        d,
        "horizon",
        &PUBLISHED,
        adjust,
        &["--horizon", "10 years", "--json", "h.json"],
    );
    let h: serde_json::Value =
        serde_json::from_slice(&std::fs::read(d.join("h.json")).unwrap()).unwrap();
    let rows: Vec<[f64; 4]> = h["truncation"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            ["count", "max_surv_gap", "ly_rel_error", "p_exit_last"]
                .map(|k| r[k].as_f64().unwrap_or_else(|| panic!("no {k} in {r}")))
        })
        .collect();
    check_truncation("horizon", &rows, CURVE, adjust);
    let p_exit = long_columns(adjust)
        .iter()
        .position(|c| *c == "p_exit")
        .unwrap();
    for (row, tunnel) in rows.iter().zip(tunnel_rows) {
        assert_eq!(row[3], tunnel[p_exit], "horizon and tunnels {adjust:?}");
    }
    assert_eq!(
        h["suggested_count"].as_u64().unwrap() as usize,
        suggested(CURVE, adjust),
        "{adjust:?}"
    );
}

/// p_exit over the month [k, k + 1) of the Weibull whose estimation-scale parameters are
/// `theta` = (ln shape, ln scale).
fn p_exit_at(theta: [f64; 2], adjust: Adjust, k: usize) -> f64 {
    let w = Weibull {
        shape: theta[0].exp(),
        scale: theta[1].exp(),
    };
    closed_form::p_exit(w, adjust, k as f64, k as f64 + 1.0)
}

/// `draws` from the fit file: the summary's point estimate equals the tunnel table's p_exit,
/// its mean is the mean of the closed forms at the drawn parameters, and that mean sits near the
/// point. Returns the largest distance of the mean from its expectation in Monte-Carlo standard
/// errors, and the largest relative distance of the mean from the point.
fn check_draws(d: &Path, adjust: Adjust, tunnel_rows: &[Vec<f64>]) -> (f64, f64) {
    let n = DRAWS.to_string();
    let mut extra = vec!["--count", "36", "--draws", &n, "--seed", "3", "--quiet"];
    extra.extend(["--out", "d.json", "--summary-out", "s.csv"]);
    run_cli(d, "draws", &FROM_FIT, adjust, &extra);
    let json = JsonTables::read(&d.join("d.json"));
    let params: Vec<Weibull> = json
        .rows("parameters")
        .iter()
        .map(|r| Weibull {
            shape: r[1],
            scale: r[2],
        })
        .collect();
    assert_eq!(params.len(), DRAWS);
    let summary = read_csv_table(&d.join("s.csv"));
    let p_exit = long_columns(adjust)
        .iter()
        .position(|c| *c == "p_exit")
        .unwrap();
    let theta = [CURVE.shape.ln(), CURVE.scale.ln()];
    let (mut worst, mut relative): (f64, f64) = (0.0, 0.0);
    for (k, tunnel) in tunnel_rows.iter().enumerate() {
        let point = summary.number(k, "p_exit_point");
        let mean = summary.number(k, "p_exit_mean");
        assert_eq!(point, tunnel[p_exit], "draws point {adjust:?}");
        let values: Vec<f64> = params
            .iter()
            .map(|w| closed_form::p_exit(*w, adjust, k as f64, k as f64 + 1.0))
            .collect();
        let m = values.iter().sum::<f64>() / DRAWS as f64;
        assert!(
            close(mean, m, REL),
            "draws mean {adjust:?} tunnel {}",
            k + 1
        );
        // Near the point: the sample mean of n draws lies within 4 standard errors s/√n of
        // E p(θ) over the fit's multivariate normal (central limit theorem), here by
        // Gauss–Hermite quadrature in closed_form (not from the draws).
        let expectation =
            closed_form::normal_expectation(theta, COVARIANCE, |t| p_exit_at(t, adjust, k));
        let sd = (values.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (DRAWS - 1) as f64).sqrt();
        let se = sd / (DRAWS as f64).sqrt();
        // Plus 1e-6 of the point for what 1000 draws cannot see: where every draw gives the same
        // value (the floor binding the whole cycle, s = 0), the quadrature still reaches
        // parameter values beyond ±8 standard deviations at which it does not.
        let distance = (mean - expectation).abs();
        assert!(
            distance <= 4.0 * se + 1e-6 * point,
            "draws {adjust:?} tunnel {}: mean {mean}, point {point}, expectation {expectation}, standard error {se}",
            k + 1
        );
        relative = relative.max((mean - point).abs() / point);
        // Reported in standard errors, tunnels with (almost) no spread left out.
        let z = if se > 1e-6 * point {
            distance / se
        } else {
            0.0
        };
        worst = worst.max(z);
    }
    (worst, relative)
}

/// `run` with an analysis file: its tunnel table, truncation table and draws summary against
/// the closed forms at its fitted parameters, and against `tunnels` and `draws` run on its own
/// fit file with the same adjustments.
fn check_run(d: &Path, adjust: Adjust) {
    let analysis = format!(
        "title = \"cross-path check (invented)\"\n\n[data]\nfile = \"trial.csv\"\ntime_unit = \"months\"\n\n\
         [fit]\nfamilies = [\"weibull\"]\nchoose = \"weibull\"\n\n\
         [tunnels]\ncycle = \"1 month\"\ncount = 36\nhorizon = \"10 years\"\n\n\
         [draws]\ncount = 50\nseed = 9\n\n[output]\nformats = [\"csv\", \"json\"]\n\n{}",
        adjust_toml(adjust)
    );
    std::fs::write(d.join("analysis.toml"), analysis).unwrap();
    tunnelcast(d)
        .args(["run", "analysis.toml", "--out", "out"])
        .assert()
        .success();
    let out = d.join("out");
    let fit: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("fit.json")).unwrap()).unwrap();
    let params = &fit["fits"][0]["params"];
    assert_eq!(fit["fits"][0]["family"], "weibull");
    let w = Weibull {
        shape: params["shape"].as_f64().unwrap(),
        scale: params["scale"].as_f64().unwrap(),
    };
    let expected = long_table(w, adjust, 1.0, COUNT);
    let json = JsonTables::read(&out.join("tunnels.json"));
    let rows = json.rows("tunnels");
    check_long(
        "run JSON",
        &json.columns("tunnels"),
        &rows,
        &expected,
        adjust,
    );
    let csv = read_csv_table(&out.join("tunnels.csv"));
    assert_eq!(csv.numbers(), rows, "run CSV and JSON {adjust:?}");
    let truncation = JsonTables::read(&out.join("truncation.json"));
    let columns = truncation.columns("truncation");
    let at = |name: &str| columns.iter().position(|c| c == name).unwrap();
    let idx = [
        at("count"),
        at("max_surv_gap"),
        at("ly_rel_error"),
        at("p_exit_last"),
    ];
    let trows: Vec<[f64; 4]> = truncation
        .rows("truncation")
        .iter()
        .map(|r| idx.map(|i| r[i]))
        .collect();
    check_truncation("run", &trows, w, adjust);
    assert_eq!(
        truncation.metadata("suggested_count"),
        suggested(w, adjust).to_string()
    );
    let summary = JsonTables::read(&out.join("draws_summary.json"));
    let s_rows = summary.rows("draws_summary");
    for (row, want) in s_rows.iter().zip(&expected) {
        assert!(
            close(row[3], want.p_exit, REL),
            "run draws point {adjust:?}"
        );
    }

    // The same curve through the other commands: the same numbers, to the bit.
    tunnels(
        d,
        &["--fit", "out/fit.json", "--family", "weibull"],
        adjust,
        &["--out", "r.json"],
    );
    assert_eq!(
        JsonTables::read(&d.join("r.json")).rows("tunnels"),
        rows,
        "run and tunnels {adjust:?}"
    );
    let mut extra = vec!["--count", "36", "--draws", "50", "--seed", "9", "--quiet"];
    extra.extend(["--summary-out", "rs.json"]);
    run_cli(
        d,
        "draws",
        &["--fit", "out/fit.json", "--family", "weibull"],
        adjust,
        &extra,
    );
    assert_eq!(
        JsonTables::read(&d.join("rs.json")).rows("summary"),
        s_rows,
        "run and draws {adjust:?}"
    );
}

/// Every path for one adjustment.
fn check_paths(name: &str) {
    let adjust = ADJUSTMENTS.iter().find(|(n, _)| *n == name).unwrap().1;
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_fit(d);
    write_lifetable(d);
    let expected = long_table(CURVE, adjust, 1.0, COUNT);
    let rows = check_tunnels(d, adjust, &expected);
    check_horizon(d, adjust, &rows);
    let (z, relative) = check_draws(d, adjust, &rows);
    check_run(d, adjust);
    // Shown with --nocapture: how far the draws' mean sat from its expectation and the point.
    eprintln!(
        "{name}: draws mean within {z:.2} Monte-Carlo standard errors of its expectation, within {:.3}% of the point",
        100.0 * relative
    );
}

#[test]
fn no_adjustment_gives_the_same_numbers_on_every_path() {
    check_paths("none");
}

#[test]
fn a_hazard_ratio_gives_the_same_numbers_on_every_path() {
    check_paths("hazard ratio");
}

#[test]
fn an_acceleration_factor_gives_the_same_numbers_on_every_path() {
    check_paths("acceleration factor");
}

#[test]
fn waning_gives_the_same_numbers_on_every_path() {
    check_paths("waning");
}

#[test]
fn added_background_mortality_gives_the_same_numbers_on_every_path() {
    check_paths("add");
}

#[test]
fn a_background_floor_gives_the_same_numbers_on_every_path() {
    check_paths("floor");
}

/// The same curve given in years, four-week cycles and tables in days: the unit conversions of
/// every adjustment (waning durations in months, background ages in years) on the tunnels and
/// draws paths, against the closed form in months (a four-week cycle is 28/30.4375 months: a
/// month is a twelfth of 365.25 days; interface.md, Time).
#[test]
fn every_adjustment_converts_units_alike_on_every_path() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_fit(d);
    write_lifetable(d);
    let in_years = [
        "--family",
        "weibull",
        "--param",
        "shape=1.5",
        "--param",
        "scale=5",
        "--time-unit",
        "years",
    ];
    let cycle = 28.0 / 30.4375;
    let count = 30;
    for (name, adjust) in ADJUSTMENTS {
        let expected = long_table(CURVE, adjust, cycle, count);
        let extra = ["--count", "30", "--table-unit", "days", "--force"];
        let mut tunnels_args = extra.to_vec();
        tunnels_args.extend(["--cycle", "4 weeks", "--out", "u.csv"]);
        tunnelcast(d)
            .arg("tunnels")
            .args(in_years)
            .args(adjust_args(adjust))
            .args(&tunnels_args)
            .assert()
            .success();
        let mut draws_args = extra.to_vec();
        draws_args.extend(["--cycle", "4 weeks", "--draws", "20", "--quiet"]);
        draws_args.extend(["--summary-out", "us.csv"]);
        tunnelcast(d)
            .arg("draws")
            .args(FROM_FIT)
            .args(adjust_args(adjust))
            .args(&draws_args)
            .assert()
            .success();
        let table = read_csv_table(&d.join("u.csv"));
        assert_eq!(table.columns, long_columns(adjust), "{name}");
        let summary = read_csv_table(&d.join("us.csv"));
        for (k, (row, e)) in table.numbers().iter().zip(&expected).enumerate() {
            // Times in days: tunnel k covers [28(k - 1), 28k).
            assert_eq!([row[1], row[2]], [28.0 * k as f64, 28.0 * (k + 1) as f64]);
            for (j, (got, want)) in row.iter().zip(e.values()).enumerate().skip(3) {
                assert!(
                    close(*got, want, REL),
                    "{name} tunnel {} {}: {got} vs closed form {want}",
                    k + 1,
                    table.columns[j]
                );
            }
            let point = summary.number(k, "p_exit_point");
            assert!(
                close(point, e.p_exit, REL),
                "{name} draws point {}: {point} vs closed form {}",
                k + 1,
                e.p_exit
            );
            assert_eq!(summary.number(k, "t_end"), 28.0 * (k + 1) as f64);
        }
    }
}

/// The reference tables of `tests/reference/cross_path.json`, written by
/// `tests/reference/cross_path_reference.py` (mpmath quadrature of each adjusted hazard at 40
/// digits, not the closed forms): they check the closed forms of `tests/closed_form` that the
/// other tests trust, and the tunnel tables of the published curve directly.
#[test]
fn mpmath_reference_tables_agree_with_the_closed_forms_and_the_tunnel_tables() {
    let reference: serde_json::Value =
        serde_json::from_str(include_str!("reference/cross_path.json")).unwrap();
    let crossing = reference["floor_crossing_months"].as_f64().unwrap();
    let level = closed_form::background_hazard(scenario::QX);
    assert!(close(closed_form::crossing(CURVE, level), crossing, 1e-12));
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_lifetable(d);
    for (name, adjust) in ADJUSTMENTS {
        let rows = reference["tables"][name].as_array().unwrap();
        assert_eq!(rows.len(), COUNT, "{name}");
        let expected = long_table(CURVE, adjust, 1.0, COUNT);
        tunnels(d, &PUBLISHED, adjust, &["--out", "t.csv", "--force"]);
        let table = read_csv_table(&d.join("t.csv"));
        for (k, (row, e)) in rows.iter().zip(&expected).enumerate() {
            let mut checks = vec![("surv_end", e.surv_end), ("p_exit", e.p_exit)];
            checks.extend(e.extra.iter().copied());
            // p_exit_disease is p_exit less p_exit_background (the reference has the two).
            for (column, closed) in checks {
                let want = match column {
                    "p_exit_disease" => {
                        row["p_exit"].as_f64().unwrap() - row["p_exit_background"].as_f64().unwrap()
                    }
                    _ => row[column].as_f64().unwrap(),
                };
                // The test's closed forms and Gauss–Legendre against mpmath.
                assert!(
                    close(closed, want, 1e-11),
                    "{name} tunnel {} {column}: closed form {closed} vs mpmath {want}",
                    k + 1
                );
                let got = table.number(k, column);
                assert!(
                    close(got, want, REL),
                    "{name} tunnel {} {column}: tunnels {got} vs mpmath {want}",
                    k + 1
                );
            }
        }
    }
}

// Horizon leg: the life-years of the within-cycle table (in years) and the truncation table,
// from `horizon --json` and from `run`'s within_cycle and truncation files (CSV and JSON), equal
// to each other and to values computed without the library.

/// Annual discount rate of the within-cycle tables: the default of `horizon --discount` and of
/// an analysis file's `[tunnels] discount` (docs/tunnels.md, docs/report.md).
const DISCOUNT: f64 = 0.035;

/// Columns of `run`'s within-cycle files (docs/outputs.md).
const WITHIN_COLUMNS: [&str; 9] = [
    "method",
    "life_years",
    "exact",
    "error",
    "rel_error",
    "discounted_life_years",
    "discounted_exact",
    "discounted_error",
    "discounted_rel_error",
];

/// A within-cycle table: per method, the numbers of [`WITHIN_COLUMNS`] after `method`.
type WithinRows = Vec<(String, [f64; 8])>;

/// The `within_cycle` objects of `horizon --json`.
fn horizon_within(h: &serde_json::Value) -> WithinRows {
    h["within_cycle"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            let values = std::array::from_fn(|i| {
                let key = WITHIN_COLUMNS[i + 1];
                r[key].as_f64().unwrap_or_else(|| panic!("no {key} in {r}"))
            });
            (r["method"].as_str().unwrap().to_string(), values)
        })
        .collect()
}

/// The `truncation` objects of `horizon --json` as (count, max_surv_gap, ly_rel_error,
/// p_exit_last).
fn horizon_truncation(h: &serde_json::Value) -> Vec<[f64; 4]> {
    h["truncation"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            ["count", "max_surv_gap", "ly_rel_error", "p_exit_last"]
                .map(|k| r[k].as_f64().unwrap_or_else(|| panic!("no {k} in {r}")))
        })
        .collect()
}

/// `horizon --json FILE` over the 10-year horizon of the curve `curve` with `adjust`.
fn horizon_json(d: &Path, curve: &[&str], adjust: Adjust, file: &str) -> serde_json::Value {
    run_cli(
        d,
        "horizon",
        curve,
        adjust,
        &["--horizon", "10 years", "--json", file],
    );
    let h: serde_json::Value =
        serde_json::from_slice(&std::fs::read(d.join(file)).unwrap()).unwrap();
    // Life-years in years, times in the cycle's unit (interface.md, horizon; docs/tunnels.md).
    assert_eq!(h["life_years_unit"], "years");
    assert_eq!(h["time_unit"], "months");
    assert_eq!(h["horizon_cycles"], HORIZON);
    assert_eq!(h["discount"], DISCOUNT);
    h
}

/// A within-cycle table against the boundary sums of the closed-form survival (`expected`) and
/// the exact integrals `exact` (plain, discounted; years) computed without the library: each
/// method's life-years, the exact integral beside it, and the error and relative error between
/// them. Returns the largest relative distance of the table's exact integrals from `exact`.
fn check_within(
    what: &str,
    rows: &WithinRows,
    expected: &[closed_form::WithinCycle],
    exact: (f64, f64),
    adjust: Adjust,
) -> f64 {
    let methods: Vec<&str> = rows.iter().map(|(m, _)| m.as_str()).collect();
    assert_eq!(methods, closed_form::METHODS, "{what} {adjust:?}");
    let mut worst: f64 = 0.0;
    for ((method, got), want) in rows.iter().zip(expected) {
        for (offset, life_years, exact) in [
            (0, want.life_years, exact.0),
            (4, want.discounted_life_years, exact.1),
        ] {
            let [ly, ex, error, rel_error] = [0, 1, 2, 3].map(|i| got[offset + i]);
            let column = |i: usize| WITHIN_COLUMNS[offset + i + 1];
            assert!(
                close(ly, life_years, REL),
                "{what} {adjust:?} {method} {}: {ly} vs closed-form boundary sum {life_years}",
                column(0)
            );
            // The library's adaptive quadrature is asked for 1e-10 relative (Curve::restricted_mean
            // and horizon's 64 discounted pieces); measured distances are printed by the callers.
            assert!(
                close(ex, exact, REL),
                "{what} {adjust:?} {method} {}: {ex} vs {exact}",
                column(1)
            );
            worst = worst.max((ex - exact).abs() / exact);
            // The error is a difference of two values near 4 years: within REL of them.
            let want_error = life_years - exact;
            assert!(
                (error - want_error).abs() <= REL * exact,
                "{what} {adjust:?} {method} {}: {error} vs {want_error}",
                column(2)
            );
            assert!(
                (rel_error - want_error / exact).abs() <= REL,
                "{what} {adjust:?} {method} {}: {rel_error} vs {}",
                column(3),
                want_error / exact
            );
        }
    }
    worst
}

/// `run` of the scenario's invented trial with `adjust`, no draws, CSV and JSON: the fitted
/// Weibull, the within-cycle table from JSON and from CSV, and the truncation table from JSON
/// and from CSV. Both formats must hold the same numbers to the bit and say that life-years are
/// in years.
fn run_tables(d: &Path, adjust: Adjust) -> (Weibull, WithinRows, Vec<[f64; 4]>) {
    let analysis = format!(
        "title = \"cross-path life-years (invented)\"\n\n[data]\nfile = \"trial.csv\"\ntime_unit = \"months\"\n\n\
         [fit]\nfamilies = [\"weibull\"]\nchoose = \"weibull\"\n\n\
         [tunnels]\ncycle = \"1 month\"\ncount = 36\nhorizon = \"10 years\"\ndiscount = {DISCOUNT}\n\n\
         [output]\nformats = [\"csv\", \"json\"]\n\n{}",
        adjust_toml(adjust)
    );
    std::fs::write(d.join("ly.toml"), analysis).unwrap();
    tunnelcast(d)
        .args(["run", "ly.toml", "--out", "ly"])
        .assert()
        .success();
    let out = d.join("ly");
    let fit: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("fit.json")).unwrap()).unwrap();
    let params = &fit["fits"][0]["params"];
    let w = Weibull {
        shape: params["shape"].as_f64().unwrap(),
        scale: params["scale"].as_f64().unwrap(),
    };

    let json = JsonTables::read(&out.join("within_cycle.json"));
    assert_eq!(json.columns("within_cycle"), WITHIN_COLUMNS);
    assert_eq!(json.metadata("life_years_unit"), "years");
    let methods: Vec<String> = json.value["tables"][0]["rows"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r[0].as_str().unwrap().to_string())
        .collect();
    let from_json: WithinRows = methods
        .into_iter()
        .zip(json.rows("within_cycle"))
        .map(|(m, r)| (m, std::array::from_fn(|i| r[i + 1])))
        .collect();
    let csv = read_csv_table(&out.join("within_cycle.csv"));
    assert_eq!(csv.columns, WITHIN_COLUMNS);
    let descriptor = shell::read_descriptor(&out.join("within_cycle.csv"));
    assert_eq!(descriptor["tunnelcast"]["life_years_unit"], "years");
    let from_csv: WithinRows = csv
        .rows
        .iter()
        .map(|r| {
            let values = std::array::from_fn(|i| r[i + 1].parse().unwrap());
            (r[0].clone(), values)
        })
        .collect();
    assert_eq!(
        from_csv, from_json,
        "run within_cycle CSV and JSON {adjust:?}"
    );

    let json = JsonTables::read(&out.join("truncation.json"));
    let csv = read_csv_table(&out.join("truncation.csv"));
    let columns = ["count", "max_surv_gap", "ly_rel_error", "p_exit_last"];
    assert_eq!(json.columns("truncation"), columns);
    assert_eq!(csv.columns, columns);
    let truncation: Vec<[f64; 4]> = json
        .rows("truncation")
        .iter()
        .map(|r| std::array::from_fn(|i| r[i]))
        .collect();
    let from_csv: Vec<[f64; 4]> = csv
        .numbers()
        .iter()
        .map(|r| std::array::from_fn(|i| r[i]))
        .collect();
    assert_eq!(
        from_csv, truncation,
        "run truncation CSV and JSON {adjust:?}"
    );
    (w, from_json, truncation)
}

/// The horizon leg for one adjustment: `horizon --json` of the published curve against the
/// closed-form boundary sums and the mpmath restricted means of `cross_path.json`; `run`'s
/// within-cycle and truncation files (CSV, JSON) against `horizon --json` on the fit file `run`
/// wrote (the same curve: equal to the bit) and against the closed forms at its parameters.
fn check_life_years(name: &str) {
    let adjust = ADJUSTMENTS.iter().find(|(n, _)| *n == name).unwrap().1;
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    scenario::write_trial(d);
    write_lifetable(d);
    let reference: serde_json::Value =
        serde_json::from_str(include_str!("reference/cross_path.json")).unwrap();
    let means = &reference["restricted_mean"];
    assert_eq!(means["horizon_months"], HORIZON);
    assert_eq!(means["discount"], DISCOUNT);
    let mpmath = (
        means["by_adjustment"][name]["life_years"].as_f64().unwrap(),
        means["by_adjustment"][name]["discounted_life_years"]
            .as_f64()
            .unwrap(),
    );
    let end = HORIZON as f64;
    // The test's own quadrature of the closed-form survival, which the run check below relies
    // on, against mpmath at 20 digits (tests/reference/cross_path_reference.py).
    let closed = (
        closed_form::restricted_mean(CURVE, adjust, end, 0.0),
        closed_form::restricted_mean(CURVE, adjust, end, DISCOUNT),
    );
    assert!(
        close(closed.0, mpmath.0, 1e-12) && close(closed.1, mpmath.1, 1e-12),
        "{name}: closed-form quadrature {closed:?} vs mpmath {mpmath:?}"
    );

    let h = horizon_json(d, &PUBLISHED, adjust, "h.json");
    let expected = closed_form::within_cycle(CURVE, adjust, 1.0, HORIZON, DISCOUNT);
    let published = check_within("horizon", &horizon_within(&h), &expected, mpmath, adjust);
    check_truncation("horizon", &horizon_truncation(&h), CURVE, adjust);

    let (w, within, truncation) = run_tables(d, adjust);
    let h = horizon_json(
        d,
        &["--fit", "ly/fit.json", "--family", "weibull"],
        adjust,
        "hf.json",
    );
    assert_eq!(horizon_within(&h), within, "run and horizon {adjust:?}");
    assert_eq!(
        horizon_truncation(&h),
        truncation,
        "run and horizon {adjust:?}"
    );
    let exact = (
        closed_form::restricted_mean(w, adjust, end, 0.0),
        closed_form::restricted_mean(w, adjust, end, DISCOUNT),
    );
    let expected = closed_form::within_cycle(w, adjust, 1.0, HORIZON, DISCOUNT);
    let fitted = check_within("run", &within, &expected, exact, adjust);
    check_truncation("run", &truncation, w, adjust);
    // Shown with --nocapture: how far the library's exact integrals sat from the independent ones.
    eprintln!(
        "{name}: exact life-years within {published:.1e} (relative) of mpmath for the published curve, {fitted:.1e} of the closed-form quadrature for run's fit"
    );
}

#[test]
fn no_adjustment_gives_the_same_life_years_on_every_path() {
    check_life_years("none");
}

#[test]
fn a_hazard_ratio_gives_the_same_life_years_on_every_path() {
    check_life_years("hazard ratio");
}

#[test]
fn an_acceleration_factor_gives_the_same_life_years_on_every_path() {
    check_life_years("acceleration factor");
}

#[test]
fn waning_gives_the_same_life_years_on_every_path() {
    check_life_years("waning");
}

#[test]
fn added_background_mortality_gives_the_same_life_years_on_every_path() {
    check_life_years("add");
}

#[test]
fn a_background_floor_gives_the_same_life_years_on_every_path() {
    check_life_years("floor");
}

// Metadata of the same curve alike on every path: where the background floor binds, and the
// life table's name.

/// The metadata lines of the floor mode (docs/adjustments.md).
const FLOOR_KEYS: [&str; 4] = [
    "floor_binds_in_tunnels",
    "floor_largest_change",
    "floor_materiality",
    "floor_first_binds_at_age",
];

/// The provenance of an output file as (key, value) lines: the descriptor's `tunnelcast`
/// property beside a CSV file, `metadata` in JSON, the `notes` sheet (item, value) in XLSX.
fn provenance(path: &Path) -> Vec<(String, String)> {
    let object = |v: &serde_json::Value| -> Vec<(String, String)> {
        v.as_object()
            .unwrap_or_else(|| panic!("{}: no provenance", path.display()))
            .iter()
            .map(|(k, v)| (k.clone(), v.as_str().unwrap_or_default().to_string()))
            .collect()
    };
    match path.extension().unwrap().to_str().unwrap() {
        "csv" => object(&shell::read_descriptor(path)["tunnelcast"]),
        "json" => {
            let v: serde_json::Value =
                serde_json::from_slice(&std::fs::read(path).unwrap()).unwrap();
            object(&v["metadata"])
        }
        "xlsx" => {
            use calamine::Reader;
            let mut book: calamine::Xlsx<_> = calamine::open_workbook(path).unwrap();
            let range = book.worksheet_range("notes").unwrap();
            range
                .rows()
                .skip(1)
                .map(|r| (r[0].to_string(), r[1].to_string()))
                .collect()
        }
        other => panic!("no provenance in a .{other} file"),
    }
}

/// The floor lines of an output file, in [`FLOOR_KEYS`] order (panics naming a missing one).
fn floor_lines(path: &Path) -> Vec<String> {
    let lines = provenance(path);
    FLOOR_KEYS
        .iter()
        .map(|key| {
            lines
                .iter()
                .find(|(k, _)| k == key)
                .unwrap_or_else(|| panic!("{} has no {key}", path.display()))
                .1
                .clone()
        })
        .collect()
}

/// The floor lines printed by a command ("floor binds in tunnels: …"), in [`FLOOR_KEYS`] order.
fn printed_floor_lines(text: &str) -> Vec<String> {
    FLOOR_KEYS
        .iter()
        .map(|key| {
            let label = format!("{}: ", key.replace('_', " "));
            text.lines()
                .find_map(|l| l.strip_prefix(label.as_str()))
                .unwrap_or_else(|| panic!("no \"{label}\" line in:\n{text}"))
                .to_string()
        })
        .collect()
}

/// The floor lines of `count` monthly tunnels of `w` floored at the scenario's background
/// hazard, computed from the closed forms: the tunnels whose p_exit the floor raises by at
/// least 0.1% relative to the curve alone, as ranges `a–b` (docs/adjustments.md), and the
/// tunnel with the largest rise with that rise in percent. The first binding age is the age at
/// entry, as a Weibull hazard with shape > 1 starts at 0, below any background hazard.
fn expected_floor(w: Weibull, count: usize) -> (String, usize, f64) {
    let rise: Vec<f64> = (0..count)
        .map(|k| {
            let (a, b) = (k as f64, k as f64 + 1.0);
            closed_form::p_exit(w, Adjust::Floor { qx: scenario::QX }, a, b)
                / closed_form::p_exit(w, Adjust::None, a, b)
                - 1.0
        })
        .collect();
    let material: Vec<usize> = (1..=count).filter(|k| rise[k - 1] >= 1e-3).collect();
    // Here the binding tunnels are one run from tunnel 1 (the hazard rises through the
    // background's once, at `closed_form::crossing`).
    assert!(material.windows(2).all(|p| p[1] == p[0] + 1));
    let binds = format!("{}–{}", material[0], material.last().unwrap());
    let largest = (0..count)
        .max_by(|i, j| rise[*i].total_cmp(&rise[*j]))
        .unwrap();
    (binds, largest + 1, 100.0 * rise[largest])
}

/// Checks floor lines against [`expected_floor`].
fn check_floor_lines(what: &str, lines: &[String], w: Weibull, count: usize) {
    let (binds, tunnel, percent) = expected_floor(w, count);
    assert_eq!(lines[0], binds, "{what}");
    let (shown, rest) = lines[1]
        .strip_prefix('+')
        .and_then(|l| l.split_once("% in tunnel "))
        .unwrap_or_else(|| panic!("{what}: {}", lines[1]));
    let shown: f64 = shown.parse().unwrap();
    // Shown at 3 significant digits.
    assert!(
        (shown - percent).abs() <= 0.005 * percent,
        "{what}: {} vs closed form {percent}%",
        lines[1]
    );
    assert!(
        rest.starts_with(&format!("{tunnel} (")),
        "{what}: {}",
        lines[1]
    );
    assert!(lines[2].contains("at least 0.1% relative"), "{what}");
    assert_eq!(lines[3], scenario::START_AGE, "{what}");
}

/// Every output of one floored curve says where the floor binds, alike: `tunnels` (CSV, JSON,
/// XLSX, printed), `horizon` over as many cycles (JSON, printed), `draws` for the point
/// estimate (CSV and JSON draws files, summary, printed), and `run` (every table file, the
/// report) beside `tunnels` and `horizon` on the fit file it wrote. The lines are checked
/// against the closed forms.
#[test]
fn the_floor_is_reported_alike_on_every_path() {
    let adjust = Adjust::Floor { qx: scenario::QX };
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_fit(d);
    write_lifetable(d);
    let text = |command: &str, curve: &[&str], extra: &[&str]| -> String {
        let out = tunnelcast(d)
            .arg(command)
            .args(curve)
            .args(adjust_args(adjust))
            .args(["--cycle", "1 month"])
            .args(extra)
            .output()
            .unwrap();
        assert!(out.status.success(), "{command}: {:?}", out.stderr);
        String::from_utf8(out.stdout).unwrap()
    };
    for out in ["t.csv", "t.json", "t.xlsx"] {
        tunnels(d, &FROM_FIT, adjust, &["--out", out]);
    }
    let mut files: Vec<(String, Vec<String>)> = ["t.csv", "t.json", "t.xlsx"]
        .iter()
        .map(|f| (format!("tunnels {f}"), floor_lines(&d.join(f))))
        .collect();
    let printed = text("tunnels", &FROM_FIT, &["--count", "36"]);
    files.push(("tunnels printed".into(), printed_floor_lines(&printed)));
    // The same count of cycles to the horizon.
    let printed = text(
        "horizon",
        &FROM_FIT,
        &["--horizon", "3 years", "--json", "h.json"],
    );
    files.push(("horizon printed".into(), printed_floor_lines(&printed)));
    files.push(("horizon JSON".into(), floor_lines(&d.join("h.json"))));
    let draws = ["--count", "36", "--draws", "5", "--quiet"];
    let printed = text(
        "draws",
        &FROM_FIT,
        &[&draws[..], &["--out", "d.csv", "--summary-out", "s.json"]].concat(),
    );
    files.push(("draws printed".into(), printed_floor_lines(&printed)));
    text(
        "draws",
        &FROM_FIT,
        &[&draws[..], &["--out", "d.json", "--summary-out", "s.csv"]].concat(),
    );
    for f in ["d.csv", "s.json", "d.json", "s.csv"] {
        files.push((format!("draws {f}"), floor_lines(&d.join(f))));
    }
    for (what, lines) in &files {
        assert_eq!(lines, &files[0].1, "{what} and tunnels CSV");
    }
    check_floor_lines("tunnels", &files[0].1, CURVE, COUNT);

    // run: 36 tunnels and a 3-year horizon, so every file covers the same 36 cycles.
    let analysis = format!(
        "[data]\nfile = \"trial.csv\"\ntime_unit = \"months\"\n\n[fit]\nfamilies = [\"weibull\"]\nchoose = \"weibull\"\n\n\
         [tunnels]\ncycle = \"1 month\"\ncount = 36\nhorizon = \"3 years\"\n\n[draws]\ncount = 5\nseed = 2\n\n\
         [output]\nformats = [\"csv\", \"json\", \"xlsx\"]\n\n{}",
        adjust_toml(adjust)
    );
    std::fs::write(d.join("floor.toml"), analysis).unwrap();
    tunnelcast(d)
        .args(["run", "floor.toml", "--out", "out"])
        .assert()
        .success();
    let fitted = ["--fit", "out/fit.json", "--family", "weibull"];
    tunnels(d, &fitted, adjust, &["--out", "r.json"]);
    let want = floor_lines(&d.join("r.json"));
    let run_fit: serde_json::Value =
        serde_json::from_slice(&std::fs::read(d.join("out/fit.json")).unwrap()).unwrap();
    let w = Weibull {
        shape: run_fit["fits"][0]["params"]["shape"].as_f64().unwrap(),
        scale: run_fit["fits"][0]["params"]["scale"].as_f64().unwrap(),
    };
    check_floor_lines("tunnels on run's fit", &want, w, COUNT);
    let printed = text("horizon", &fitted, &["--horizon", "3 years"]);
    assert_eq!(printed_floor_lines(&printed), want, "horizon on run's fit");
    for stem in ["tunnels", "truncation", "within_cycle", "draws_summary"] {
        for ext in ["csv", "json", "xlsx"] {
            let file = format!("out/{stem}.{ext}");
            assert_eq!(floor_lines(&d.join(&file)), want, "run {file}");
        }
    }
    let report = std::fs::read_to_string(d.join("out/report.html")).unwrap();
    for (key, value) in FLOOR_KEYS.iter().zip(&want) {
        let line = format!("<dt>{key}</dt><dd><code>{value}</code></dd>");
        assert!(report.contains(&line), "report: no {line}");
    }
}

/// The life table is named as given, the same on every path: on the command line as typed, in
/// an analysis file as written there (relative to that file), whatever the working folder.
/// Before, `run` recorded only the file name in its files and the path joined to the analysis
/// file's folder in its printed summary.
#[test]
fn the_life_table_is_named_as_given_on_every_path() {
    let adjust = Adjust::Add { qx: scenario::QX };
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let study = d.join("study");
    std::fs::create_dir_all(study.join("tables")).unwrap();
    scenario::write_trial(&study);
    write_lifetable(&study.join("tables"));
    let toml = adjust_toml(adjust).replace("\"life.csv\"", "\"tables/life.csv\"");
    assert!(toml.contains("background = \"tables/life.csv\""));
    let analysis = format!(
        "[data]\nfile = \"trial.csv\"\ntime_unit = \"months\"\n\n[fit]\nfamilies = [\"weibull\"]\nchoose = \"weibull\"\n\n\
         [tunnels]\ncycle = \"1 month\"\ncount = 12\nhorizon = \"1 year\"\n\n[output]\nformats = [\"csv\", \"json\"]\n\n{toml}"
    );
    std::fs::write(study.join("analysis.toml"), analysis).unwrap();
    let name = "tables/life.csv";
    let described = format!("background mortality added from {name} (qx) from age 60");
    // From the parent folder and from the analysis file's own folder: the same names.
    for (cwd, file, out) in [
        (d, "study/analysis.toml", "out"),
        (study.as_path(), "analysis.toml", "out"),
    ] {
        let printed = tunnelcast(cwd)
            .args(["run", file, "--out", out])
            .output()
            .unwrap();
        assert!(printed.status.success());
        let printed = String::from_utf8(printed.stdout).unwrap();
        assert!(printed.contains(&described), "run printed:\n{printed}");
        let out = cwd.join(out);
        for file in ["tunnels.csv", "tunnels.json", "within_cycle.json"] {
            let lines = provenance(&out.join(file));
            let table = lines.iter().find(|(k, _)| k == "background_table");
            assert_eq!(table.map(|(_, v)| v.as_str()), Some(name), "run {file}");
        }
        let package = shell::read_package(&out);
        assert_eq!(package["tunnelcast"]["background_table"], name);
        let report = std::fs::read_to_string(out.join("report.html")).unwrap();
        assert!(report.contains(&format!(
            "<dt>background_table</dt><dd><code>{name}</code></dd>"
        )));
    }
    // The other commands, run in the analysis file's folder with the table given as there.
    let curve = ["--fit", "out/fit.json", "--family", "weibull"];
    let args: Vec<String> = adjust_args(adjust)
        .into_iter()
        .map(|a| if a == "life.csv" { name.to_string() } else { a })
        .collect();
    let printed = tunnelcast(&study)
        .arg("tunnels")
        .args(curve)
        .args(&args)
        .args(["--cycle", "1 month", "--count", "12"])
        .output()
        .unwrap();
    let printed = String::from_utf8(printed.stdout).unwrap();
    assert!(printed.contains(&described), "tunnels printed:\n{printed}");
    for (command, extra) in [
        ("tunnels", ["--count", "12", "--out", "t.json"]),
        ("horizon", ["--horizon", "1 year", "--json", "h.json"]),
        ("draws", ["--count", "12", "--out", "d.json"]),
    ] {
        tunnelcast(&study)
            .arg(command)
            .args(curve)
            .args(&args)
            .args(["--cycle", "1 month"])
            .args(extra)
            .args(
                ["--draws", "2", "--quiet"]
                    .iter()
                    .filter(|_| command == "draws"),
            )
            .assert()
            .success();
        let file = extra[3];
        let lines = provenance(&study.join(file));
        let table = lines.iter().find(|(k, _)| k == "background_table");
        assert_eq!(table.map(|(_, v)| v.as_str()), Some(name), "{command}");
    }
}
