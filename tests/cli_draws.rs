//! Command-line tests of `draws` (and the XLSX output of `tunnels`): outputs read back with
//! independent readers (csv + serde with `deny_unknown_fields`, serde_json, the calamine
//! XLSX reader) and compared with closed forms at the drawn parameters and with the fit
//! file's distribution; reproducibility across thread counts; every bad-input case of the
//! draws issue; a clean stop on SIGINT/SIGTERM.

mod closed_form;
mod shell;
use shell::{listing, read_csv, read_csv_records, read_descriptor, tunnelcast};

use calamine::{Data, Reader, Xlsx};
use closed_form::{close, long_table, Adjust, Weibull};
use serde::Deserialize;
use std::path::Path;
use tunnelcast::fit::FitFile;

/// Invented trial (two arms, no external source): times from a fixed list, and its fit file.
fn write_fit(dir: &Path) {
    let mut csv = String::from("time,event,arm\n");
    for (i, arm) in ["north", "south"].iter().enumerate() {
        for k in 1..=60 {
            // Spread event times over 1–40 months; every fourth subject is censored.
            let t = (k as f64 * 0.65 + (k * 7 % 11) as f64 * 0.3) * (1.0 + 0.3 * i as f64);
            let event = if k % 4 == 0 { 0 } else { 1 };
            csv.push_str(&format!("{t:.2},{event},{arm}\n"));
        }
    }
    std::fs::write(dir.join("trial.csv"), csv).unwrap();
    tunnelcast(dir)
        .args([
            "fit",
            "trial.csv",
            "--time-unit",
            "months",
            "--arm-col",
            "arm",
        ])
        .args([
            "--families",
            "weibull,lognormal,exponential",
            "--json",
            "fit.json",
        ])
        .assert()
        .success();
}

const CURVE: [&str; 10] = [
    "draws", "--fit", "fit.json", "--family", "weibull", "--arm", "north", "--cycle", "1 month",
    "--quiet",
];

fn draws_args<'a>(extra: &[&'a str]) -> Vec<&'a str> {
    let mut a: Vec<&str> = CURVE.to_vec();
    a.extend(extra);
    a
}

#[derive(Debug, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
struct LongRow {
    draw: usize,
    tunnel: usize,
    t_start: f64,
    t_end: f64,
    surv_start: f64,
    surv_end: f64,
    p_exit: f64,
    p_next: f64,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct SummaryRow {
    tunnel: usize,
    t_start: f64,
    t_end: f64,
    p_exit_point: f64,
    p_exit_mean: f64,
    p_exit_pct2_5: f64,
    p_exit_pct97_5: f64,
}

#[test]
fn long_csv_follows_the_drawn_parameters_and_is_identical_across_thread_counts() {
    check_long_csv(18, 150, 77);
}

#[test]
fn long_csv_larger_than_a_write_chunk_lands_whole() {
    // About 11 MB: more than one 8 MB chunk of the direct writes in `output::Staged`, so the
    // file is assembled from whole chunks and a tail written through the page cache.
    let bytes = check_long_csv(480, 250, 78);
    assert!(bytes > 9 << 20, "only {bytes} bytes");
}

/// Runs `draws` with one and with two threads and checks that the two long CSV files are
/// identical; then checks every row against the Weibull closed form at its draw's parameters
/// (written by the JSON output of the same seed, whose rows equal the CSV's), and the drawn
/// parameters' sample mean and covariance on the estimation scale against the fit file's
/// estimates and covariance. Returns the CSV file's size.
fn check_long_csv(count: usize, draws: usize, seed: u64) -> usize {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_fit(d);
    let (count_text, draws_text, seed_text) =
        (count.to_string(), draws.to_string(), seed.to_string());
    let args = draws_args(&[
        "--count",
        &count_text,
        "--draws",
        &draws_text,
        "--seed",
        &seed_text,
    ]);
    for (threads, name) in [("1", "one.csv"), ("2", "two.csv"), ("2", "one.json")] {
        let mut a = args.clone();
        a.extend(["--out", name]);
        tunnelcast(d)
            .env("RAYON_NUM_THREADS", threads)
            .args(&a)
            .assert()
            .success();
    }
    let one = std::fs::read(d.join("one.csv")).unwrap();
    assert!(one == std::fs::read(d.join("two.csv")).unwrap());

    #[derive(Deserialize)]
    struct Doc {
        metadata: std::collections::BTreeMap<String, String>,
        tables: Vec<DocTable>,
    }
    #[derive(Deserialize)]
    struct DocTable {
        name: String,
        rows: Vec<Vec<f64>>,
    }
    let doc: Doc = serde_json::from_slice(&std::fs::read(d.join("one.json")).unwrap()).unwrap();
    assert_eq!(doc.metadata["seed"], seed_text);
    assert!(doc.metadata["caution"].contains("assumption"));
    let table = |name: &str| &doc.tables.iter().find(|t| t.name == name).unwrap().rows;
    let params: Vec<Weibull> = table("parameters")
        .iter()
        .map(|r| Weibull {
            shape: r[1],
            scale: r[2],
        })
        .collect();
    assert_eq!(params.len(), draws);

    let rows: Vec<LongRow> = read_csv(&d.join("one.csv"));
    assert_eq!(rows.len(), draws * count);
    for (row, json) in rows.iter().zip(table("draws")) {
        let csv = [
            row.draw as f64,
            row.tunnel as f64,
            row.t_start,
            row.t_end,
            row.surv_start,
            row.surv_end,
            row.p_exit,
            row.p_next,
        ];
        assert_eq!(&csv[..], &json[..], "CSV and JSON rows differ");
    }
    // Each row against S(t) = exp(-(t/scale)^shape) at its draw's parameters, monthly cycles
    // (closed form, interface.md).
    for (i, w) in params.iter().enumerate() {
        let expected = long_table(*w, Adjust::None, 1.0, count);
        for (back, e) in rows[i * count..(i + 1) * count].iter().zip(&expected) {
            assert_eq!((back.draw, back.tunnel), (i + 1, e.tunnel));
            let got = [
                back.t_start,
                back.t_end,
                back.surv_start,
                back.surv_end,
                back.p_exit,
                back.p_next,
            ];
            let want = [
                e.t_start,
                e.t_end,
                e.surv_start,
                e.surv_end,
                e.p_exit,
                e.p_next,
            ];
            for (g, w) in got.iter().zip(want) {
                assert!(
                    close(*g, w, 1e-10),
                    "draw {} tunnel {}: {g} vs {w}",
                    i + 1,
                    e.tunnel
                );
            }
        }
    }

    // The draws' distribution: ln shape and ln scale are normal with the fit file's estimates
    // and covariance. The sample mean of n draws has standard error sqrt(Σᵢᵢ/n), the sample
    // covariance sᵢⱼ variance (Σᵢⱼ² + ΣᵢᵢΣⱼⱼ)/n (Anderson, 2003, An Introduction to
    // Multivariate Statistical Analysis, section 3.4 — from memory); tolerance 4 standard errors.
    let file = FitFile::load(&d.join("fit.json")).unwrap();
    let fit = file.find("weibull", Some("north")).unwrap();
    let sigma = &fit.covariance.as_ref().unwrap().matrix;
    let logs: Vec<[f64; 2]> = params
        .iter()
        .map(|w| [w.shape.ln(), w.scale.ln()])
        .collect();
    let n = draws as f64;
    let m: Vec<f64> = (0..2)
        .map(|i| logs.iter().map(|l| l[i]).sum::<f64>() / n)
        .collect();
    for i in 0..2 {
        let se = (sigma[i][i] / n).sqrt();
        assert!(
            (m[i] - fit.estimates[i]).abs() < 4.0 * se,
            "mean {i}: {}",
            m[i]
        );
        for j in 0..2 {
            let s = logs
                .iter()
                .map(|l| (l[i] - m[i]) * (l[j] - m[j]))
                .sum::<f64>()
                / (n - 1.0);
            let se = ((sigma[i][j].powi(2) + sigma[i][i] * sigma[j][j]) / n).sqrt();
            assert!((s - sigma[i][j]).abs() < 4.0 * se, "cov {i}{j}: {s}");
        }
    }
    // The provenance is in the descriptor beside the file, not in the file.
    let descriptor = read_descriptor(&d.join("one.csv"));
    assert_eq!(descriptor["tunnelcast"]["seed"], seed.to_string());
    assert!(descriptor["tunnelcast"]["caution"]
        .as_str()
        .unwrap()
        .contains("assumption"));
    one.len()
}

#[test]
fn summary_wide_json_and_xlsx_agree_with_the_long_layout() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_fit(d);
    let base = draws_args(&["--count", "10", "--draws", "40", "--seed", "5"]);
    let run = |extra: &[&str]| {
        let mut a = base.clone();
        a.extend(extra);
        tunnelcast(d).args(&a).assert().success();
    };
    run(&["--out", "long.csv", "--summary-out", "summary.csv"]);
    run(&["--out", "wide.csv", "--layout", "wide"]);
    run(&["--out", "long.json"]);
    run(&["--out", "wide.xlsx", "--layout", "wide"]);
    let long: Vec<LongRow> = read_csv(&d.join("long.csv"));

    // Summary: mean and percentiles (Hyndman and Fan, 1996, definition 7) recomputed here.
    let summary: Vec<SummaryRow> = read_csv(&d.join("summary.csv"));
    assert_eq!(summary.len(), 10);
    for s in &summary {
        let mut p: Vec<f64> = long
            .iter()
            .filter(|r| r.tunnel == s.tunnel)
            .map(|r| r.p_exit)
            .collect();
        p.sort_by(f64::total_cmp);
        let mean = p.iter().sum::<f64>() / p.len() as f64;
        let at = |q: f64| {
            let h = (p.len() - 1) as f64 * q;
            let lo = h.floor() as usize;
            p[lo] + (h - lo as f64) * (p[(lo + 1).min(p.len() - 1)] - p[lo])
        };
        assert!((s.p_exit_mean - mean).abs() < 1e-15);
        assert_eq!(s.p_exit_pct2_5, at(0.025));
        assert_eq!(s.p_exit_pct97_5, at(0.975));
        assert!(s.p_exit_pct2_5 <= s.p_exit_point && s.p_exit_point <= s.p_exit_pct97_5);
        assert_eq!(s.t_end - s.t_start, 1.0);
    }

    // Wide CSV: column draw_d holds p_exit of draw d.
    let (header, records) = read_csv_records(&d.join("wide.csv"));
    assert_eq!(header.len(), 3 + 40);
    assert_eq!(&header[3], "draw_1");
    for record in records {
        let tunnel: usize = record[0].parse().unwrap();
        for draw in 1..=40 {
            let v: f64 = record[2 + draw].parse().unwrap();
            let r = &long[(draw - 1) * 10 + tunnel - 1];
            assert_eq!((r.draw, r.tunnel, r.p_exit), (draw, tunnel, v));
        }
    }

    // JSON: same rows, read back with deny_unknown_fields.
    #[derive(Deserialize)]
    #[serde(deny_unknown_fields)]
    struct Doc {
        metadata: std::collections::BTreeMap<String, String>,
        tables: Vec<DocTable>,
    }
    #[derive(Deserialize)]
    #[serde(deny_unknown_fields)]
    struct DocTable {
        name: String,
        columns: Vec<String>,
        rows: Vec<Vec<f64>>,
    }
    let doc: Doc = serde_json::from_slice(&std::fs::read(d.join("long.json")).unwrap()).unwrap();
    assert_eq!(doc.metadata["seed"], "5");
    assert_eq!(doc.tables[0].name, "draws");
    assert_eq!(doc.tables[0].columns[0], "draw");
    for (row, r) in doc.tables[0].rows.iter().zip(&long) {
        assert_eq!(
            row,
            &vec![
                r.draw as f64,
                r.tunnel as f64,
                r.t_start,
                r.t_end,
                r.surv_start,
                r.surv_end,
                r.p_exit,
                r.p_next
            ]
        );
    }
    let names: Vec<&str> = doc.tables.iter().map(|t| t.name.as_str()).collect();
    assert_eq!(names, ["draws", "summary", "parameters"]);

    // XLSX through the independent calamine reader: the same numbers to full precision.
    let mut book: Xlsx<_> = calamine::open_workbook(d.join("wide.xlsx")).unwrap();
    assert_eq!(
        book.sheet_names(),
        ["draws_wide", "summary", "parameters", "notes"]
    );
    let sheet = book.worksheet_range("draws_wide").unwrap();
    for r in &long {
        let cell = sheet.get((r.tunnel, 2 + r.draw)).unwrap();
        assert_eq!(cell, &Data::Float(r.p_exit));
    }
}

#[test]
fn tunnels_xlsx_matrix_pushes_the_cohort_to_the_long_layout_survival() {
    // Identity of the Markov chain: starting with everyone in tunnel 1, the share still in the
    // tunnel states after k cycles is S(k·cycle) (common practice; the tunnel definition).
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let published = [
        "tunnels",
        "--family",
        "lognormal",
        "--param",
        "mu=2.1",
        "--param",
        "sigma=0.9",
        "--time-unit",
        "months",
        "--cycle",
        "1 month",
        "--count",
        "30",
    ];
    for (layout, name) in [("long", "long.xlsx"), ("matrix", "matrix.xlsx")] {
        let mut a = published.to_vec();
        a.extend(["--layout", layout, "--out", name]);
        tunnelcast(d).args(&a).assert().success();
    }
    let number = |c: &Data| match c {
        Data::Float(x) => *x,
        other => panic!("expected a number, got {other:?}"),
    };
    let mut long: Xlsx<_> = calamine::open_workbook(d.join("long.xlsx")).unwrap();
    let long = long.worksheet_range("tunnels").unwrap();
    let surv_end: Vec<f64> = long.rows().skip(1).map(|r| number(&r[4])).collect();
    let mut matrix: Xlsx<_> = calamine::open_workbook(d.join("matrix.xlsx")).unwrap();
    assert_eq!(
        matrix.sheet_names(),
        ["matrix", "tunnels", "parameters", "notes"]
    );
    let matrix = matrix.worksheet_range("matrix").unwrap();
    let m: Vec<Vec<f64>> = matrix
        .rows()
        .skip(1)
        .map(|r| r[1..].iter().map(number).collect())
        .collect();
    assert_eq!(m.len(), 31);
    for row in &m {
        assert!((row.iter().sum::<f64>() - 1.0).abs() < 1e-12);
    }
    let mut cohort = vec![0.0; 31];
    cohort[0] = 1.0;
    for (k, expected) in surv_end.iter().enumerate() {
        let mut next = vec![0.0; 31];
        for (i, share) in cohort.iter().enumerate() {
            for (j, p) in m[i].iter().enumerate() {
                next[j] += share * p;
            }
        }
        cohort = next;
        let alive: f64 = cohort[..30].iter().sum();
        assert!((alive - expected).abs() < 1e-12, "cycle {}", k + 1);
    }
}

#[test]
fn tunnels_xlsx_from_a_fit_file_holds_the_fit_comparison() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_fit(d);
    tunnelcast(d)
        .args([
            "tunnels",
            "--fit",
            "fit.json",
            "--family",
            "lognormal",
            "--arm",
            "south",
        ])
        .args(["--cycle", "1 month", "--count", "12", "--out", "t.xlsx"])
        .assert()
        .success();
    let mut book: Xlsx<_> = calamine::open_workbook(d.join("t.xlsx")).unwrap();
    assert_eq!(
        book.sheet_names(),
        ["tunnels", "matrix", "parameters", "fit_comparison", "notes"]
    );
    let file = FitFile::load(&d.join("fit.json")).unwrap();
    let sheet = book.worksheet_range("fit_comparison").unwrap();
    let south: Vec<_> = file
        .fits
        .iter()
        .filter(|f| f.arm.as_deref() == Some("south"))
        .collect();
    assert_eq!(sheet.height(), south.len() + 1);
    for (row, fit) in sheet.rows().skip(1).zip(south) {
        assert_eq!(row[0], Data::String(fit.family.clone()));
        assert_eq!(row[4], Data::Float(fit.aic.unwrap()));
    }
    let params = book.worksheet_range("parameters").unwrap();
    let fit = file.find("lognormal", Some("south")).unwrap();
    assert_eq!(params.get((2, 1)), Some(&Data::Float(fit.params["mu"])));
}

#[test]
fn bootstrap_finds_the_data_beside_the_fit_file_and_reports_failures() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_fit(d);
    let a = draws_args(&[
        "--count",
        "6",
        "--draws",
        "30",
        "--bootstrap",
        "--arm-col",
        "arm",
        "--out",
        "b.csv",
    ]);
    tunnelcast(d).args(&a).assert().success();
    let provenance = &read_descriptor(&d.join("b.csv"))["tunnelcast"];
    assert!(provenance["method"]
        .as_str()
        .unwrap()
        .starts_with("nonparametric bootstrap"));
    assert!(provenance["bootstrap_failed"].is_string());
    let rows: Vec<LongRow> = read_csv(&d.join("b.csv"));
    assert_eq!(rows.len() % 6, 0);
    // A data file other than the fitted one is refused.
    std::fs::write(
        d.join("other.csv"),
        "time,event,arm\n1,1,north\n2,0,north\n",
    )
    .unwrap();
    let a = draws_args(&[
        "--count",
        "6",
        "--draws",
        "30",
        "--bootstrap",
        "--arm-col",
        "arm",
        "--data",
        "other.csv",
        "--out",
        "c.csv",
    ]);
    refuses(d, &a, "SHA-256");
}

/// Runs a command expected to fail on bad input: exit 2, one `error:` line naming `needle`,
/// no panic, and no file created or changed.
fn refuses(dir: &Path, args: &[&str], needle: &str) {
    let before: Vec<(String, Vec<u8>)> = listing(dir)
        .into_iter()
        .map(|f| {
            let bytes = std::fs::read(dir.join(&f)).unwrap();
            (f, bytes)
        })
        .collect();
    let out = tunnelcast(dir).args(args).output().unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{args:?}: {stderr}");
    assert_eq!(stderr.lines().count(), 1, "{args:?}: {stderr}");
    assert!(stderr.starts_with("error: "), "{stderr}");
    assert!(
        stderr.contains(needle),
        "{args:?}: wanted {needle:?} in {stderr}"
    );
    let after: Vec<(String, Vec<u8>)> = listing(dir)
        .into_iter()
        .map(|f| {
            let bytes = std::fs::read(dir.join(&f)).unwrap();
            (f, bytes)
        })
        .collect();
    assert_eq!(after, before, "{args:?} changed the folder");
}

#[test]
fn bad_input_is_refused_with_one_line_and_nothing_written() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_fit(d);
    let fit: serde_json::Value =
        serde_json::from_slice(&std::fs::read(d.join("fit.json")).unwrap()).unwrap();

    // A fit file from another version.
    let mut old = fit.clone();
    old["tool_version"] = "0.0.9".into();
    std::fs::write(d.join("old.json"), old.to_string()).unwrap();
    let mut a = draws_args(&["--count", "5", "--out", "x.csv"]);
    a[2] = "old.json";
    refuses(d, &a, "0.0.9");

    // A fit without covariance: the error names the family.
    let mut bare = fit.clone();
    for f in bare["fits"].as_array_mut().unwrap() {
        f["covariance"] = serde_json::Value::Null;
    }
    std::fs::write(d.join("bare.json"), bare.to_string()).unwrap();
    let mut a = draws_args(&["--count", "5", "--out", "x.csv"]);
    a[2] = "bare.json";
    refuses(d, &a, "family weibull has no covariance");

    // A covariance that is not positive definite.
    let mut indefinite = fit.clone();
    for f in indefinite["fits"].as_array_mut().unwrap() {
        if f["family"] == "weibull" {
            f["covariance"]["matrix"] = serde_json::json!([[1.0, 2.0], [2.0, 1.0]]);
        }
    }
    std::fs::write(d.join("indefinite.json"), indefinite.to_string()).unwrap();
    let mut a = draws_args(&["--count", "5", "--out", "x.csv"]);
    a[2] = "indefinite.json";
    refuses(d, &a, "not symmetric positive definite");

    refuses(
        d,
        &draws_args(&["--count", "5", "--out", "x.ods"]),
        "unknown output format",
    );
    refuses(
        d,
        &draws_args(&["--count", "5", "--out", "no/such/folder/x.csv"]),
        "does not exist",
    );
    refuses(
        d,
        &draws_args(&["--count", "5", "--draws", "0"]),
        "--draws 0",
    );
    std::fs::write(d.join("mine.csv"), "keep me").unwrap();
    refuses(
        d,
        &draws_args(&["--count", "5", "--out", "mine.csv"]),
        "already exists",
    );
    refuses(
        d,
        &draws_args(&["--count", "5", "--summary-out", "mine.csv"]),
        "already exists",
    );
    // Published parameters carry no covariance.
    refuses(
        d,
        &[
            "draws",
            "--family",
            "weibull",
            "--param",
            "shape=1",
            "--param",
            "scale=3",
            "--time-unit",
            "months",
            "--cycle",
            "1 month",
            "--count",
            "5",
        ],
        "--fit",
    );
    // An XLSX sheet cannot hold 2,000 draws × 600 tunnels in the long layout.
    refuses(
        d,
        &draws_args(&["--count", "600", "--draws", "2000", "--out", "big.xlsx"]),
        "XLSX sheet",
    );
}

#[cfg(unix)]
#[test]
fn interruption_leaves_no_file_and_exits_with_the_signal_code() {
    for (signal, code) in [("-INT", 130), ("-TERM", 143), ("-HUP", 129)] {
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        write_fit(d);
        let before = listing(d);
        let bin = env!("CARGO_BIN_EXE_tunnelcast");
        // Far more work than can finish before the signal arrives.
        let child = std::process::Command::new(bin)
            .current_dir(d)
            .args(draws_args(&[
                "--count", "1200", "--draws", "200000", "--out", "big.csv",
            ]))
            .stdout(std::process::Stdio::null())
            .stderr(std::process::Stdio::piped())
            .spawn()
            .unwrap();
        // Wait until the temporary output file exists: the run is then streaming and its
        // signal flag is installed.
        let start = std::time::Instant::now();
        while listing(d).len() == before.len() {
            assert!(start.elapsed().as_secs() < 15, "no temporary file appeared");
            std::thread::sleep(std::time::Duration::from_millis(20));
        }
        let status = std::process::Command::new("kill")
            .args([signal, &child.id().to_string()])
            .status()
            .unwrap();
        assert!(status.success());
        let out = child.wait_with_output().unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(code), "{stderr}");
        assert!(stderr.starts_with("error: interrupted"), "{stderr}");
        assert_eq!(listing(d), before, "a file was left behind");
    }
}
