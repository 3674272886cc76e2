//! Command-line checks of the configured families: settings given on `fit`, recorded in the
//! fit JSON (read back with serde, unknown fields refused) and used again by `tunnels`.

mod shell;
use shell::tunnelcast;

use tunnelcast::fit::FitFile;

/// Invented data: hazard 0.05 per month before month 6 and 0.12 after, censored at month 20,
/// times by inversion of a low-discrepancy sequence.
fn write_piecewise_data(dir: &std::path::Path) -> std::path::PathBuf {
    let mut text = String::from("time,event\n");
    for i in 0..300 {
        let u = ((i as f64 + 0.5) * 0.618_033_988_749_895).fract();
        let h = -(1.0 - u).ln();
        let t = if h < 0.3 {
            h / 0.05
        } else {
            6.0 + (h - 0.3) / 0.12
        };
        text.push_str(&format!("{:.6},{}\n", t.min(20.0), u8::from(t < 20.0)));
    }
    let path = dir.join("trial.csv");
    std::fs::write(&path, text).unwrap();
    path
}

#[test]
fn piecewise_cuts_reach_the_fit_file_and_the_tunnel_table() {
    let dir = tempfile::tempdir().unwrap();
    write_piecewise_data(dir.path());
    tunnelcast(dir.path())
        .args(["fit", "trial.csv", "--time-unit", "months", "--families"])
        .args([
            "piecewise,weibull",
            "--cuts",
            "26 weeks,1 year",
            "--json",
            "fit.json",
        ])
        .assert()
        .success();
    let file: FitFile =
        serde_json::from_slice(&std::fs::read(dir.path().join("fit.json")).unwrap()).unwrap();
    let fit = file.fits.iter().find(|f| f.family == "piecewise").unwrap();
    // 26 weeks = 182 days = 182/(365.25/12) months (interface: a month is a twelfth of 365.25 days).
    let cuts = fit.settings.as_ref().unwrap().cuts.clone().unwrap();
    assert!((cuts[0] - 182.0 * 12.0 / 365.25).abs() < 1e-12, "{cuts:?}");
    assert!((cuts[1] - 12.0).abs() < 1e-12, "{cuts:?}");
    assert_eq!(fit.params.len(), 3);
    assert!(file
        .fits
        .iter()
        .find(|f| f.family == "weibull")
        .unwrap()
        .settings
        .is_none());
    // The rebuilt family gives the same per-cycle exit probability as the rates in the file:
    // in the first interval, 1 - exp(-rate·cycle) with a cycle of one month.
    // The rates are named by their interval at 10 significant digits (182·12/365.25 =
    // 5.97946611909650924…), not by the last bits of the conversion.
    let rate = fit.params["rate[0,5.979466119)"];
    assert!(fit.params.contains_key("rate[12,inf)"), "{:?}", fit.params);
    let out = tunnelcast(dir.path())
        .args(["tunnels", "--fit", "fit.json", "--family", "piecewise"])
        .args(["--cycle", "1 month", "--count", "3", "--out", "t.csv"])
        .assert()
        .success();
    drop(out);
    let (headers, records) = shell::read_csv_records(&dir.path().join("t.csv"));
    let column = headers.iter().position(|h| h == "p_exit").unwrap();
    let first = &records[0];
    let p_exit: f64 = first[column].parse().unwrap();
    assert!((p_exit - (1.0 - (-rate).exp())).abs() < 1e-12, "{p_exit}");
}

#[test]
fn option_errors_are_one_line_usage_errors() {
    let dir = tempfile::tempdir().unwrap();
    write_piecewise_data(dir.path());
    for (args, expected) in [
        (
            vec!["--families", "weibull", "--cuts", "6 months"],
            "add piecewise",
        ),
        (vec!["--families", "piecewise"], "needs cut points"),
        (
            vec!["--families", "piecewise", "--cuts", "6 parsecs"],
            "--cuts",
        ),
        (
            vec!["--families", "piecewise", "--cuts", "1 year,6 months"],
            "must increase",
        ),
    ] {
        let out = tunnelcast(dir.path())
            .args([
                "fit",
                "trial.csv",
                "--time-unit",
                "months",
                "--json",
                "fit.json",
            ])
            .args(&args)
            .assert()
            .code(2);
        let stderr = String::from_utf8(out.get_output().stderr.clone()).unwrap();
        assert!(stderr.contains(expected), "{args:?}: {stderr}");
        assert_eq!(stderr.trim_end().lines().count(), 1, "{stderr}");
        assert!(!dir.path().join("fit.json").exists());
    }
}

#[test]
fn spline_knots_are_recorded_settable_and_reused() {
    let dir = tempfile::tempdir().unwrap();
    write_piecewise_data(dir.path());
    tunnelcast(dir.path())
        .args(["fit", "trial.csv", "--time-unit", "months", "--families"])
        .args(["spline-ph-2,spline-po-1", "--json", "fit.json"])
        .assert()
        .success();
    let file: FitFile =
        serde_json::from_slice(&std::fs::read(dir.path().join("fit.json")).unwrap()).unwrap();
    let fit = file
        .fits
        .iter()
        .find(|f| f.family == "spline-ph-2")
        .unwrap();
    let settings = fit.settings.as_ref().unwrap();
    assert_eq!(settings.scale.as_deref(), Some("ph"));
    let knots = settings.knots.clone().unwrap();
    assert_eq!(knots.len(), 4);
    assert_eq!(fit.params.len(), 4);
    // Internal knots set by hand (durations in another unit) replace the centiles.
    tunnelcast(dir.path())
        .args(["fit", "trial.csv", "--time-unit", "months", "--families"])
        .args([
            "spline-ph-2",
            "--knots",
            "4 months,1 year",
            "--json",
            "fixed.json",
        ])
        .assert()
        .success();
    let fixed: FitFile =
        serde_json::from_slice(&std::fs::read(dir.path().join("fixed.json")).unwrap()).unwrap();
    let set = fixed.fits[0]
        .settings
        .as_ref()
        .unwrap()
        .knots
        .clone()
        .unwrap();
    assert!(
        (set[1] - 4.0).abs() < 1e-12 && (set[2] - 12.0).abs() < 1e-12,
        "{set:?}"
    );
    assert_eq!((set[0], set[3]), (knots[0], knots[3]));
    tunnelcast(dir.path())
        .args(["tunnels", "--fit", "fit.json", "--family", "spline-ph-2"])
        .args(["--cycle", "1 month", "--count", "24", "--out", "t.csv"])
        .assert()
        .success();
    let out = tunnelcast(dir.path())
        .args([
            "fit",
            "trial.csv",
            "--time-unit",
            "months",
            "--families",
            "spline-ph-2",
            "--knots",
            "4 months",
        ])
        .assert()
        .code(2);
    let stderr = String::from_utf8(out.get_output().stderr.clone()).unwrap();
    assert!(stderr.contains("takes 2 internal knots"), "{stderr}");
}

#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct TableDoc {
    metadata: std::collections::BTreeMap<String, String>,
    tables: Vec<TableJson>,
}

#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct TableJson {
    #[allow(dead_code)]
    name: String,
    columns: Vec<String>,
    rows: Vec<Vec<serde_json::Value>>,
}

fn read_table(dir: &std::path::Path, name: &str) -> TableDoc {
    serde_json::from_slice(&std::fs::read(dir.join(name)).unwrap()).unwrap()
}

/// Runs `tunnels` from the fit file and from the same values given as published parameters
/// (`--param` plus `extra`, i.e. `--cuts` or `--knots`), and checks the two tables agree.
fn published_table_equals_fitted(dir: &std::path::Path, family: &str, extra: [&str; 2]) {
    let file: FitFile =
        serde_json::from_slice(&std::fs::read(dir.join("fit.json")).unwrap()).unwrap();
    let fit = file.fits.iter().find(|f| f.family == family).unwrap();
    let table = ["--cycle", "1 month", "--count", "30", "--force"];
    tunnelcast(dir)
        .args(["tunnels", "--fit", "fit.json", "--family", family])
        .args(table)
        .args(["--out", "from_fit.json"])
        .assert()
        .success();
    let mut published = tunnelcast(dir);
    published
        .args(["tunnels", "--family", family, "--time-unit", "months"])
        .args(extra)
        .args(table)
        .args(["--out", "from_param.json"]);
    // Rust prints the shortest text that reads back to the same f64, so the values are exact.
    for (name, value) in &fit.params {
        published.arg("--param").arg(format!("{name}={value}"));
    }
    published.assert().success();
    let (a, b) = (
        read_table(dir, "from_fit.json"),
        read_table(dir, "from_param.json"),
    );
    assert_eq!(b.metadata["source"], "published parameters");
    assert_eq!(a.metadata["family_settings"], b.metadata["family_settings"]);
    assert_eq!(a.tables[0].columns, b.tables[0].columns);
    assert_eq!(a.tables[0].rows.len(), 30);
    for (ra, rb) in a.tables[0].rows.iter().zip(&b.tables[0].rows) {
        for (x, y) in ra.iter().zip(rb) {
            let (x, y) = (x.as_f64().unwrap(), y.as_f64().unwrap());
            assert!(
                (x - y).abs() <= 1e-12 * x.abs().max(1.0),
                "{family}: {x} vs {y}"
            );
        }
    }
}

#[test]
fn published_piecewise_and_spline_parameters_give_the_fitted_tables() {
    let dir = tempfile::tempdir().unwrap();
    write_piecewise_data(dir.path());
    tunnelcast(dir.path())
        .args(["fit", "trial.csv", "--time-unit", "months", "--families"])
        .args(["piecewise,spline-ph-2", "--cuts", "6 months,1 year"])
        .args(["--json", "fit.json"])
        .assert()
        .success();
    published_table_equals_fitted(dir.path(), "piecewise", ["--cuts", "6 months,12 months"]);
    let file: FitFile =
        serde_json::from_slice(&std::fs::read(dir.path().join("fit.json")).unwrap()).unwrap();
    let fit = file
        .fits
        .iter()
        .find(|f| f.family == "spline-ph-2")
        .unwrap();
    let knots: Vec<String> = fit
        .settings
        .as_ref()
        .unwrap()
        .knots
        .as_ref()
        .unwrap()
        .iter()
        .map(|k| format!("{k} months"))
        .collect();
    published_table_equals_fitted(dir.path(), "spline-ph-2", ["--knots", &knots.join(",")]);
}

#[test]
fn published_settings_errors_are_one_line_and_leave_no_file() {
    let dir = tempfile::tempdir().unwrap();
    write_piecewise_data(dir.path());
    tunnelcast(dir.path())
        .args(["fit", "trial.csv", "--time-unit", "months", "--families"])
        .args(["weibull", "--json", "fit.json"])
        .assert()
        .success();
    let rates = [
        "--param",
        "rate[0,6)=0.05",
        "--param",
        "rate[6,inf)=0.1",
        "--time-unit",
        "months",
    ];
    let spline = [
        "--param",
        "c0=-3",
        "--param",
        "c1=1",
        "--param",
        "c2=0",
        "--param",
        "c3=0",
        "--time-unit",
        "months",
    ];
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (
            [&["--family", "piecewise"][..], &rates].concat(),
            "piecewise needs the cut points",
        ),
        (
            [
                &["--family", "piecewise", "--cuts", "6 months,3 months"][..],
                &rates,
            ]
            .concat(),
            "cut points must increase",
        ),
        (
            [
                &["--family", "piecewise", "--cuts", "6 months,12 months"][..],
                &rates,
            ]
            .concat(),
            "its parameters: rate[0,6), rate[6,12), rate[12,inf)",
        ),
        (
            vec![
                "--family",
                "piecewise",
                "--cuts",
                "6 months",
                "--param",
                "rate[0,6)=0.05",
                "--time-unit",
                "months",
            ],
            "missing: rate[6,inf)",
        ),
        (
            vec![
                "--family",
                "piecewise",
                "--cuts",
                "6 months",
                "--param",
                "rate[0,6]=0.05",
                "--param",
                "rate[6,inf)=0.1",
                "--time-unit",
                "months",
            ],
            "did you mean \"rate[0,6)\"",
        ),
        (
            [
                &["--family", "piecewise", "--cuts", "6 months"][..],
                &spline,
            ]
            .concat(),
            "piecewise has no parameter \"c0\"",
        ),
        (
            [&["--family", "spline-ph-2"][..], &spline].concat(),
            "needs all 4 knots",
        ),
        (
            [
                &["--family", "spline-ph-2", "--knots", "4 months,1 year"][..],
                &spline,
            ]
            .concat(),
            "needs all 4 knots",
        ),
        (
            [
                &[
                    "--family",
                    "spline-ph-2",
                    "--knots",
                    "1 month,1 year,4 months,2 years",
                ][..],
                &spline,
            ]
            .concat(),
            "knots must increase",
        ),
        (
            [&["--family", "weibull", "--cuts", "6 months"][..], &rates].concat(),
            "weibull takes none",
        ),
        (
            [
                &["--family", "piecewise", "--knots", "6 months"][..],
                &rates,
            ]
            .concat(),
            "piecewise takes none",
        ),
        (
            vec![
                "--fit",
                "fit.json",
                "--family",
                "weibull",
                "--knots",
                "1 month,2 months",
            ],
            "fit file already records",
        ),
    ];
    for (args, expected) in cases {
        let out = tunnelcast(dir.path())
            .arg("tunnels")
            .args(&args)
            .args(["--cycle", "1 month", "--count", "5", "--out", "t.csv"])
            .assert()
            .code(2);
        let stderr = String::from_utf8(out.get_output().stderr.clone()).unwrap();
        assert!(stderr.contains(expected), "{args:?}: {stderr}");
        assert_eq!(stderr.trim_end().lines().count(), 1, "{stderr}");
        assert!(!stderr.contains("panicked"), "{stderr}");
        assert!(!dir.path().join("t.csv").exists(), "{args:?}");
    }
}
