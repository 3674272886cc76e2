//! `draws` with adjustments (issue 14): every draw, from the multivariate normal or from the
//! bootstrap, gets the hazard ratio, acceleration factor, waning and background mortality of
//! the curve options, in the long layout (CSV and JSON), the wide layout and the summary; and
//! every row of a long CSV carries the columns of its header.
//!
//! Expectations are independent of the library: each drawn row against the closed form of the
//! adjusted Weibull at that draw's parameters (written by the JSON output's `parameters`
//! table), from `tests/closed_form/mod.rs`.

mod closed_form;
mod scenario;
mod shell;

use closed_form::{close, long_columns, long_table, Adjust, Weibull};
use scenario::{adjust_args, read_xlsx, write_fit, write_lifetable, JsonTables, FROM_FIT};
use shell::{read_csv_table, tunnelcast};
use std::path::Path;

/// Tunnels per draw, draws and seed of these tests.
const COUNT: usize = 24;
const DRAWS: usize = 200;

/// Relative tolerance of a drawn value against its closed form: the library's integrals
/// (waning, background share, the floor's crossing) are asked for 1e-12 or better.
const REL: f64 = 1e-9;

/// Runs `draws` on the scenario's fit file with `adjust` and `extra` options.
fn draws(dir: &Path, adjust: Adjust, extra: &[&str]) {
    let count = COUNT.to_string();
    tunnelcast(dir)
        .arg("draws")
        .args(FROM_FIT)
        .args(adjust_args(adjust))
        .args(["--cycle", "1 month", "--count", &count, "--seed", "11"])
        .arg("--quiet")
        .args(extra)
        .assert()
        .success();
}

/// The drawn natural parameters of a JSON draws file, in draw order.
fn drawn(json: &JsonTables) -> Vec<Weibull> {
    assert_eq!(json.columns("parameters"), ["draw", "shape", "scale"]);
    json.rows("parameters")
        .iter()
        .enumerate()
        .map(|(i, r)| {
            assert_eq!(r[0], (i + 1) as f64);
            Weibull {
                shape: r[1],
                scale: r[2],
            }
        })
        .collect()
}

/// Every row of a long draws table (`draw`, then the long columns) against the closed form of
/// the adjusted curve at its draw's parameters, and the header against the contract's columns;
/// the first difference, if any.
fn check_long(
    columns: &[String],
    rows: &[Vec<f64>],
    params: &[Weibull],
    adjust: Adjust,
) -> Result<(), String> {
    let mut expected_columns = vec!["draw"];
    expected_columns.extend(long_columns(adjust));
    if columns != expected_columns {
        return Err(format!(
            "columns {columns:?}, expected {expected_columns:?}"
        ));
    }
    assert_eq!(rows.len(), params.len() * COUNT);
    for (d, w) in params.iter().enumerate() {
        let table = long_table(*w, adjust, 1.0, COUNT);
        for (row, want) in rows[d * COUNT..(d + 1) * COUNT].iter().zip(&table) {
            if row.len() != columns.len() {
                return Err(format!(
                    "draw {}: a row of {} fields under a header of {}",
                    d + 1,
                    row.len(),
                    columns.len()
                ));
            }
            assert_eq!(row[0], (d + 1) as f64);
            for ((got, want), name) in row[1..].iter().zip(want.values()).zip(&columns[1..]) {
                if !close(*got, want, REL) {
                    return Err(format!(
                        "draw {} tunnel {} {name}: {got} vs closed form {want}",
                        d + 1,
                        row[1]
                    ));
                }
            }
        }
    }
    Ok(())
}

/// Runs `check` for every adjustment of the scenario (each in its own folder with the fit
/// file and life table) and fails listing every adjustment whose check failed.
fn for_each_adjustment(check: impl Fn(&Path, Adjust) -> Result<(), String>) {
    let failures: Vec<String> = ADJUSTED
        .iter()
        .filter_map(|&adjust| {
            let dir = tempfile::tempdir().unwrap();
            write_fit(dir.path());
            write_lifetable(dir.path());
            check(dir.path(), adjust)
                .err()
                .map(|e| format!("{adjust:?}: {e}"))
        })
        .collect();
    assert!(failures.is_empty(), "\n{}", failures.join("\n"));
}

/// The adjustments of the scenario (all but "none").
const ADJUSTED: [Adjust; 5] = [
    Adjust::HazardRatio(0.5),
    Adjust::Acceleration(1.4),
    Adjust::Waning {
        ratio: 0.5,
        start: 12.0,
        end: 24.0,
    },
    Adjust::Add { qx: scenario::QX },
    Adjust::Floor { qx: scenario::QX },
];

/// The drawn parameters of `DRAWS` draws with `adjust` (from a JSON long file, `params.json`).
fn parameters(d: &Path, adjust: Adjust) -> Vec<Weibull> {
    let n = DRAWS.to_string();
    draws(d, adjust, &["--draws", &n, "--out", "params.json"]);
    let params = drawn(&JsonTables::read(&d.join("params.json")));
    assert_eq!(params.len(), DRAWS);
    params
}

/// The drawn parameters of an XLSX draws file's `parameters` sheet.
fn xlsx_parameters(path: &Path) -> Vec<Weibull> {
    let (columns, rows) = read_xlsx(path, "parameters");
    assert_eq!(columns, ["draw", "shape", "scale"]);
    rows.iter()
        .map(|r| Weibull {
            shape: r[1],
            scale: r[2],
        })
        .collect()
}

#[test]
fn long_json_and_xlsx_draws_follow_each_adjustment() {
    // With a hazard ratio of 0.5 the drawn p_exit were those of the unadjusted curve, about
    // twice the adjusted point estimate's; with a floor, many fell below the background's.
    for_each_adjustment(|d, adjust| {
        let params = parameters(d, adjust);
        let json = JsonTables::read(&d.join("params.json"));
        check_long(&json.columns("draws"), &json.rows("draws"), &params, adjust)?;
        let n = DRAWS.to_string();
        draws(d, adjust, &["--draws", &n, "--out", "long.xlsx"]);
        let xlsx = d.join("long.xlsx");
        assert_eq!(xlsx_parameters(&xlsx), params);
        let (columns, rows) = read_xlsx(&xlsx, "draws");
        check_long(&columns, &rows, &params, adjust)
    });
}

#[test]
fn long_csv_draws_follow_each_adjustment_and_fill_their_header() {
    // With background mortality the header named p_exit_disease and p_exit_background (add)
    // or floor_share (floor) but the rows stopped at p_next: a strict reader refuses such a
    // file, and so does `read_csv_table`.
    for_each_adjustment(|d, adjust| {
        let params = parameters(d, adjust);
        let n = DRAWS.to_string();
        draws(d, adjust, &["--draws", &n, "--out", "long.csv"]);
        let text = std::fs::read(d.join("long.csv")).unwrap();
        let mut reader = csv::Reader::from_reader(text.as_slice());
        let width = reader.headers().unwrap().len();
        if let Some(Err(e)) = reader.records().find(|r| r.is_err()) {
            return Err(format!("ragged CSV under a header of {width} fields: {e}"));
        }
        let csv = read_csv_table(&d.join("long.csv"));
        check_long(&csv.columns, &csv.numbers(), &params, adjust)
    });
}

#[test]
fn wide_draws_follow_each_adjustment_in_csv_and_xlsx() {
    for_each_adjustment(|d, adjust| {
        let params = parameters(d, adjust);
        let n = DRAWS.to_string();
        draws(
            d,
            adjust,
            &["--draws", &n, "--layout", "wide", "--out", "w.csv"],
        );
        draws(
            d,
            adjust,
            &["--draws", &n, "--layout", "wide", "--out", "w.xlsx"],
        );
        // Column draw_d holds p_exit of draw d, in CSV and in XLSX.
        let wide = read_csv_table(&d.join("w.csv"));
        assert_eq!(wide.columns.len(), 3 + DRAWS);
        let (xlsx_columns, xlsx_rows) = read_xlsx(&d.join("w.xlsx"), "draws_wide");
        assert_eq!(xlsx_columns, wide.columns);
        assert_eq!(xlsx_rows, wide.numbers(), "wide XLSX and CSV differ");
        for (k, row) in wide.numbers().iter().enumerate() {
            for (i, w) in params.iter().enumerate() {
                let want = closed_form::p_exit(*w, adjust, k as f64, k as f64 + 1.0);
                if !close(row[3 + i], want, REL) {
                    return Err(format!(
                        "wide tunnel {} draw {}: {} vs closed form {want}",
                        k + 1,
                        i + 1,
                        row[3 + i]
                    ));
                }
            }
        }
        Ok(())
    });
}

#[test]
fn summary_follows_each_adjustment() {
    for_each_adjustment(|d, adjust| {
        let params = parameters(d, adjust);
        let n = DRAWS.to_string();
        draws(d, adjust, &["--draws", &n, "--summary-out", "s.csv"]);
        // The point estimate is the closed form of the scenario's curve, the mean the mean over
        // the draws of the closed form at each draw's parameters.
        let summary = read_csv_table(&d.join("s.csv"));
        assert_eq!(summary.rows.len(), COUNT);
        for k in 0..COUNT {
            let (a, b) = (k as f64, k as f64 + 1.0);
            let point = closed_form::p_exit(scenario::CURVE, adjust, a, b);
            let mean = params
                .iter()
                .map(|w| closed_form::p_exit(*w, adjust, a, b))
                .sum::<f64>()
                / DRAWS as f64;
            let (got_point, got_mean) = (
                summary.number(k, "p_exit_point"),
                summary.number(k, "p_exit_mean"),
            );
            if !close(got_point, point, REL) || !close(got_mean, mean, REL) {
                return Err(format!(
                    "tunnel {}: point {got_point} and mean {got_mean}, closed forms {point} and {mean}",
                    k + 1
                ));
            }
        }
        Ok(())
    });
}

#[test]
fn bootstrap_refits_get_the_adjustments_too() {
    // The bootstrap refits the trial behind the fit file; each refit's parameters are written
    // in the JSON output's parameters table, and its rows follow the adjusted closed form.
    for_each_adjustment(|d, adjust| {
        let boot = ["--draws", "12", "--bootstrap"];
        let mut json = boot.to_vec();
        json.extend(["--out", "b.json"]);
        draws(d, adjust, &json);
        let mut csv = boot.to_vec();
        csv.extend(["--out", "b.csv"]);
        draws(d, adjust, &csv);
        let json = JsonTables::read(&d.join("b.json"));
        assert!(json.metadata("method").contains("bootstrap"));
        let params = drawn(&json);
        assert!(!params.is_empty());
        check_long(&json.columns("draws"), &json.rows("draws"), &params, adjust)?;
        let csv = read_csv_table(&d.join("b.csv"));
        check_long(&csv.columns, &csv.numbers(), &params, adjust)
    });
}
