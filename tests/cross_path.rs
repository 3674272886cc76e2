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
