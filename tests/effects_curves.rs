//! Curves from joint models across arms (`--model ph|aft --arm LEVEL [--at ...]`) through
//! `tunnels` and `draws`, checked against the Weibull PH and AFT formulas evaluated here from
//! the fit JSON's parameters (Weibull PH: S_arm(t) = exp(−(t/scale)^k·HR); AFT:
//! S_arm(t) = exp(−(t/(scale·AF))^k); common practice), and the standardised curve against
//! the mean of the patients' curves computed by hand.

mod shell;

use serde_json::Value;
use shell::{listing, read_table, tunnelcast};
use std::path::Path;

fn va_lung() -> String {
    format!("{}/tests/reference/va_lung.csv", env!("CARGO_MANIFEST_DIR"))
}

/// A tiny invented design: two arms, a numeric covariate and a text one; arm B has the
/// pattern (dose 1, south) three times.
const TINY: &str = "time,event,arm,dose,site\n\
5,1,A,0,north\n8,1,A,1,south\n12,0,A,2,north\n3,1,A,0,south\n15,1,A,1,north\n9,1,A,2,south\n20,0,A,0,north\n7,1,A,1,south\n\
10,1,B,0,north\n14,1,B,1,south\n25,0,B,2,north\n6,1,B,0,south\n18,1,B,1,north\n30,0,B,2,south\n11,1,B,1,south\n16,1,B,1,south\n";

/// Arm B's patients of [`TINY`]: (dose, south).
const TINY_B: [(f64, f64); 8] = [
    (0.0, 0.0),
    (1.0, 1.0),
    (2.0, 0.0),
    (0.0, 1.0),
    (1.0, 0.0),
    (2.0, 1.0),
    (1.0, 1.0),
    (1.0, 1.0),
];

fn fit(dir: &Path, data: &str, unit: &str, covariates: Option<&str>) -> Value {
    let mut cmd = tunnelcast(dir);
    cmd.args(["fit", data, "--time-unit", unit, "--arm-col", "arm"])
        .args(["--families", "weibull", "--effects", "--json", "fit.json"]);
    if let Some(c) = covariates {
        cmd.args(["--covariates", c]);
    }
    cmd.assert().success();
    serde_json::from_slice(&std::fs::read(dir.join("fit.json")).unwrap()).unwrap()
}

fn joint<'a>(json: &'a Value, model: &str) -> &'a Value {
    json["effects"]
        .as_array()
        .unwrap()
        .iter()
        .find(|m| m["model"] == model && m["family"] == "weibull")
        .unwrap()
}

fn param(model: &Value, name: &str) -> f64 {
    model["params"][name].as_f64().unwrap()
}

/// (t_start, t_end, p_exit) of each row of a tunnels or draws JSON table.
fn rows(table: &shell::JsonTable) -> Vec<(f64, f64, f64)> {
    let col = |n: &str| table.columns.iter().position(|c| c == n).unwrap();
    let (a, b, p) = (col("t_start"), col("t_end"), col("p_exit"));
    table
        .rows
        .iter()
        .map(|r| {
            (
                r[a].as_f64().unwrap(),
                r[b].as_f64().unwrap(),
                r[p].as_f64().unwrap(),
            )
        })
        .collect()
}

fn tunnels(dir: &Path, curve: &[&str], out: &str) -> Vec<(f64, f64, f64)> {
    tunnelcast(dir)
        .args(["tunnels", "--fit", "fit.json", "--family", "weibull"])
        .args(curve)
        .args(["--cycle", "1 month", "--count", "12", "--out", out])
        .assert()
        .success();
    let doc = read_table(&dir.join(out));
    rows(&doc.tables[0])
}

#[test]
fn joint_weibull_without_covariates_gives_the_ph_and_aft_tunnel_probabilities() {
    let dir = tempfile::tempdir().unwrap();
    let json = fit(dir.path(), &va_lung(), "days", None);
    let ph = joint(&json, "ph");
    let (k, scale, hr) = (
        param(ph, "shape"),
        param(ph, "scale"),
        param(ph, "log_hr_test").exp(),
    );
    let got = tunnels(dir.path(), &["--model", "ph", "--arm", "test"], "ph.json");
    assert_eq!(got.len(), 12);
    for &(a, b, p) in &got {
        // Table times in the cycle's unit (months); parameters in days (a month is a twelfth
        // of 365.25 days, interface.md).
        let (a, b) = (a * 365.25 / 12.0, b * 365.25 / 12.0);
        let want = 1.0 - (-((b / scale).powf(k) - (a / scale).powf(k)) * hr).exp();
        assert!((p - want).abs() < 1e-10, "ph: {p} vs {want}");
    }
    let aft = joint(&json, "aft");
    let (k, scale, af) = (
        param(aft, "shape"),
        param(aft, "scale"),
        param(aft, "log_af_test").exp(),
    );
    let got = tunnels(dir.path(), &["--model", "aft", "--arm", "test"], "aft.json");
    for &(a, b, p) in &got {
        let (a, b) = (a * 365.25 / 12.0, b * 365.25 / 12.0);
        let s = scale * af;
        let want = 1.0 - (-((b / s).powf(k) - (a / s).powf(k))).exp();
        assert!((p - want).abs() < 1e-10, "aft: {p} vs {want}");
    }
    // The reference arm is the reference curve.
    let ph = joint(&json, "ph");
    let (k, scale) = (param(ph, "shape"), param(ph, "scale"));
    let got = tunnels(
        dir.path(),
        &["--model", "ph", "--arm", "standard"],
        "r.json",
    );
    for &(a, b, p) in &got {
        let (a, b) = (a * 365.25 / 12.0, b * 365.25 / 12.0);
        let want = 1.0 - (-((b / scale).powf(k) - (a / scale).powf(k))).exp();
        assert!((p - want).abs() < 1e-10, "reference: {p} vs {want}");
    }
}

#[test]
fn standardised_curve_is_the_mean_of_the_patients_curves() {
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().join("tiny.csv");
    std::fs::write(&data, TINY).unwrap();
    let json = fit(
        dir.path(),
        data.to_str().unwrap(),
        "months",
        Some("dose,site"),
    );
    // The fit file records the distinct patterns with counts: arm B's (1, south) three times.
    let patterns = json["effects_design"]["patterns"].as_array().unwrap();
    let b: Vec<&Value> = patterns.iter().filter(|p| p["arm"] == "B").collect();
    assert_eq!(
        b.iter().map(|p| p["count"].as_u64().unwrap()).sum::<u64>(),
        8
    );
    assert!(b
        .iter()
        .any(|p| p["values"] == serde_json::json!([1.0, 1.0]) && p["count"] == 3));
    for model in ["ph", "aft"] {
        let m = joint(&json, model);
        assert_eq!(m["converged"], true);
        let (k, scale) = (param(m, "shape"), param(m, "scale"));
        let arm = if model == "ph" {
            "log_hr_B"
        } else {
            "log_af_B"
        };
        let (b_arm, b_dose, b_south) =
            (param(m, arm), param(m, "b_dose"), param(m, "b_site_south"));
        // S_i(t) = exp(−H_i(t)): PH H_i = (t/scale)^k·e^(xβ); AFT H_i = (t/(scale·e^(xγ)))^k.
        let mean_survival = |t: f64| -> f64 {
            TINY_B
                .iter()
                .map(|&(dose, south)| {
                    let xb = b_arm + b_dose * dose + b_south * south;
                    let h = if model == "ph" {
                        (t / scale).powf(k) * xb.exp()
                    } else {
                        (t / (scale * xb.exp())).powf(k)
                    };
                    (-h).exp()
                })
                .sum::<f64>()
                / TINY_B.len() as f64
        };
        let got = tunnels(
            dir.path(),
            &["--model", model, "--arm", "B"],
            &format!("{model}.json"),
        );
        for &(a, b, p) in &got {
            let want = 1.0 - mean_survival(b) / mean_survival(a);
            assert!((p - want).abs() < 1e-10, "{model}: {p} vs {want}");
        }
        // The curve at the mean covariates is a different curve (the check above can tell).
        let (dose, south) = (7.0 / 8.0, 4.0 / 8.0);
        let xb = b_arm + b_dose * dose + b_south * south;
        let at_mean = |t: f64| {
            let h = if model == "ph" {
                (t / scale).powf(k) * xb.exp()
            } else {
                (t / (scale * xb.exp())).powf(k)
            };
            (-h).exp()
        };
        let largest = got
            .iter()
            .map(|&(a, b, p)| (p - (1.0 - at_mean(b) / at_mean(a))).abs())
            .fold(0.0, f64::max);
        assert!(largest > 1e-6, "{model}: {largest}");
        // At the reference arm, the first level and covariate 0: the reference curve.
        let got = tunnels(
            dir.path(),
            &["--model", model, "--arm", "A", "--at", "dose=0,site=north"],
            &format!("{model}_ref.json"),
        );
        for &(a, b, p) in &got {
            let want = 1.0 - (-((b / scale).powf(k) - (a / scale).powf(k))).exp();
            assert!(
                (p - want).abs() < 1e-10,
                "{model} at reference: {p} vs {want}"
            );
        }
        // At one patient's covariates: that patient's curve.
        let got = tunnels(
            dir.path(),
            &["--model", model, "--arm", "B", "--at", "site=south,dose=2"],
            &format!("{model}_at.json"),
        );
        let xb = b_arm + 2.0 * b_dose + b_south;
        let h = |t: f64| {
            if model == "ph" {
                (t / scale).powf(k) * xb.exp()
            } else {
                (t / (scale * xb.exp())).powf(k)
            }
        };
        for &(a, b, p) in &got {
            let want = 1.0 - (-(h(b) - h(a))).exp();
            assert!((p - want).abs() < 1e-10, "{model} at: {p} vs {want}");
        }
    }
}

#[test]
fn bad_at_is_a_one_line_error_with_exit_2_and_no_output() {
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().join("tiny.csv");
    std::fs::write(&data, TINY).unwrap();
    fit(
        dir.path(),
        data.to_str().unwrap(),
        "months",
        Some("dose,site"),
    );
    let before = listing(dir.path());
    let cases: [(&[&str], &str); 6] = [
        (
            &["--model", "ph", "--arm", "B", "--at", "dose=1,colour=red"],
            "no covariate \"colour\"; the covariates: dose, site",
        ),
        (
            &["--model", "ph", "--arm", "B", "--at", "dose=1,site=east"],
            "the levels of site: north, south",
        ),
        (
            &["--model", "ph", "--arm", "B", "--at", "dose=1"],
            "missing: site",
        ),
        (
            &["--model", "ph", "--arm", "C"],
            "not an arm of the joint model (arms: A, B)",
        ),
        (&["--model", "cox", "--arm", "B"], "choose ph"),
        (&["--arm", "B", "--at", "dose=1,site=north"], "add --model"),
    ];
    for (extra, message) in cases {
        let out = tunnelcast(dir.path())
            .args(["tunnels", "--fit", "fit.json", "--family", "weibull"])
            .args(extra)
            .args(["--cycle", "1 month", "--count", "12", "--out", "t.csv"])
            .assert()
            .code(2)
            .get_output()
            .clone();
        let err = String::from_utf8(out.stderr).unwrap();
        assert_eq!(err.trim_end().lines().count(), 1, "{err}");
        assert!(err.contains(message), "{extra:?}: {err}");
        assert!(!err.contains("panicked"), "{err}");
        assert_eq!(listing(dir.path()), before);
    }
}

#[test]
fn draws_of_a_joint_model_carry_the_effect_and_its_correlation() {
    let dir = tempfile::tempdir().unwrap();
    let json = fit(dir.path(), &va_lung(), "days", None);
    let ph = joint(&json, "ph");
    let n = 2000;
    tunnelcast(dir.path())
        .args(["draws", "--fit", "fit.json", "--family", "weibull"])
        .args(["--model", "ph", "--arm", "test"])
        .args(["--cycle", "1 month", "--count", "12", "--draws", "2000"])
        .args(["--seed", "7", "--out", "d.json"])
        .assert()
        .success();
    let doc = read_table(&dir.path().join("d.json"));
    let table = |name: &str| doc.tables.iter().find(|t| t.name == name).unwrap();
    // Every draw's table is the Weibull PH formula at that draw's parameters (all three drawn).
    let params = table("parameters");
    assert_eq!(
        params.columns,
        ["draw", "ln_shape", "ln_scale", "log_hr_test"]
    );
    let theta: Vec<Vec<f64>> = params
        .rows
        .iter()
        .map(|r| r[1..].iter().map(|v| v.as_f64().unwrap()).collect())
        .collect();
    let long = rows(table("draws"));
    assert_eq!(long.len(), n * 12);
    for (i, &(a, b, p)) in long.iter().enumerate() {
        let th = &theta[i / 12];
        let (k, scale, hr) = (th[0].exp(), th[1].exp(), th[2].exp());
        let (a, b) = (a * 365.25 / 12.0, b * 365.25 / 12.0);
        let want = 1.0 - (-((b / scale).powf(k) - (a / scale).powf(k)) * hr).exp();
        assert!(
            (p - want).abs() < 1e-10,
            "draw {}: {p} vs {want}",
            i / 12 + 1
        );
    }
    // The draws' covariance is the fit file's (sample covariance of 2000 normal draws: each
    // correlation within 4/√2000 ≈ 0.09 of the target, about 4 standard errors).
    let cov = &ph["covariance"]["matrix"];
    let c = |i: usize, j: usize| cov[i][j].as_f64().unwrap();
    let mean: Vec<f64> = (0..3)
        .map(|j| theta.iter().map(|t| t[j]).sum::<f64>() / n as f64)
        .collect();
    let sample = |i: usize, j: usize| {
        theta
            .iter()
            .map(|t| (t[i] - mean[i]) * (t[j] - mean[j]))
            .sum::<f64>()
            / (n - 1) as f64
    };
    for i in 0..3 {
        for j in 0..i {
            let want = c(i, j) / (c(i, i) * c(j, j)).sqrt();
            let got = sample(i, j) / (sample(i, i) * sample(j, j)).sqrt();
            assert!((got - want).abs() < 0.09, "corr {i},{j}: {got} vs {want}");
        }
        let ratio = sample(i, i) / c(i, i);
        // Sample variance of 2000 normals: relative standard error √(2/1999) ≈ 0.032.
        assert!((ratio - 1.0).abs() < 0.13, "var {i}: ratio {ratio}");
    }
    assert!(c(2, 2) > 0.0 && sample(2, 2) > 0.0);
    // The summary: the draws' mean p_exit sits near the point estimate, within a quarter of
    // the draws' spread (sd ≈ width of the 95% interval / 3.92): the Monte Carlo error is
    // sd/√2000 ≈ 0.02·sd and the bias of p_exit as a smooth function of normal draws with a
    // few per cent relative error is a small fraction of sd.
    let summary = table("summary");
    let col = |name: &str| summary.columns.iter().position(|c| c == name).unwrap();
    let points = tunnels(dir.path(), &["--model", "ph", "--arm", "test"], "t.json");
    for (row, &(_, _, p_tunnels)) in summary.rows.iter().zip(&points) {
        let get = |name: &str| row[col(name)].as_f64().unwrap();
        let (point, mean, lo, hi) = (
            get("p_exit_point"),
            get("p_exit_mean"),
            get("p_exit_pct2_5"),
            get("p_exit_pct97_5"),
        );
        // draws' point estimate is the tunnels table of the same curve.
        assert!((point - p_tunnels).abs() < 1e-14, "{point} vs {p_tunnels}");
        let sd = (hi - lo) / 3.92;
        assert!(sd > 0.0);
        assert!(
            (mean - point).abs() < 0.25 * sd,
            "{mean} vs {point} (sd {sd})"
        );
        assert!(lo < point && point < hi);
    }
}

#[test]
fn draws_with_covariates_standardise_every_draw() {
    let dir = tempfile::tempdir().unwrap();
    let json = fit(dir.path(), &va_lung(), "days", Some("karnofsky"));
    assert!(!json["effects_design"]["patterns"]
        .as_array()
        .unwrap()
        .is_empty());
    tunnelcast(dir.path())
        .args(["draws", "--fit", "fit.json", "--family", "weibull"])
        .args(["--model", "aft", "--arm", "test"])
        .args(["--cycle", "1 month", "--count", "6", "--draws", "300"])
        .args(["--seed", "3", "--out", "d.json"])
        .assert()
        .success();
    let doc = read_table(&dir.path().join("d.json"));
    assert!(doc.metadata["method"].contains("joint model"));
    assert!(doc.metadata["covariates"].contains("standardised over the arm's"));
    let params = doc.tables.iter().find(|t| t.name == "parameters").unwrap();
    assert_eq!(
        params.columns,
        ["draw", "ln_shape", "ln_scale", "log_af_test", "b_karnofsky"]
    );
    // Bootstrap refits one family to one arm: refused with a joint model.
    let out = tunnelcast(dir.path())
        .args(["draws", "--fit", "fit.json", "--family", "weibull"])
        .args(["--model", "aft", "--arm", "test", "--bootstrap"])
        .args(["--cycle", "1 month", "--count", "6", "--draws", "30"])
        .args(["--out", "b.json"])
        .assert()
        .code(2)
        .get_output()
        .clone();
    assert!(!dir.path().join("b.json").exists());
    assert!(String::from_utf8(out.stderr)
        .unwrap()
        .contains("--bootstrap"));
}

#[test]
fn run_effects_table_fits_the_joint_models_and_lists_them_in_the_report() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::copy(va_lung(), dir.path().join("va.csv")).unwrap();
    std::fs::write(
        dir.path().join("analysis.toml"),
        "[data]\nfile = \"va.csv\"\ntime_unit = \"days\"\narm_column = \"arm\"\n\n[fit]\nfamilies = [\"weibull\"]\nchoose = \"weibull\"\narm = \"test\"\n\n[tunnels]\ncycle = \"30 days\"\ncount = 6\nhorizon = \"3 years\"\n\n[effects]\ncovariates = [\"karnofsky\"]\n",
    )
    .unwrap();
    let printed = tunnelcast(dir.path())
        .args(["run", "analysis.toml", "--out", "out"])
        .output()
        .unwrap();
    assert!(
        printed.status.success(),
        "{}",
        String::from_utf8_lossy(&printed.stderr)
    );
    let from_run: Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("out/fit.json")).unwrap()).unwrap();
    // The same models as `fit --effects` on the same data (one code path, same numbers).
    let from_fit = fit(dir.path(), "va.csv", "days", Some("karnofsky"));
    for key in ["effects", "cox", "effects_design"] {
        assert!(!from_run[key].is_null(), "{key}");
        assert_eq!(from_run[key], from_fit[key], "{key}");
    }
    let html = std::fs::read_to_string(dir.path().join("out/report.html")).unwrap();
    assert!(
        html.contains("<section id=\"effects\">"),
        "no effects section"
    );
    assert!(html.contains("Joint models across arms"));
    assert!(html.contains("Test of proportional hazards"));
    // Without an arm column, [effects] is a one-line error.
    std::fs::write(
        dir.path().join("bad.toml"),
        "[data]\nfile = \"va.csv\"\ntime_unit = \"days\"\n\n[tunnels]\ncycle = \"30 days\"\ncount = 6\n\n[effects]\n",
    )
    .unwrap();
    let out = tunnelcast(dir.path())
        .args(["run", "bad.toml", "--out", "bad"])
        .assert()
        .code(2)
        .get_output()
        .clone();
    let err = String::from_utf8(out.stderr).unwrap();
    assert!(err.contains("[effects] needs [data] arm_column"), "{err}");
    assert!(!dir.path().join("bad").exists());
}

#[test]
fn adjustments_apply_on_top_of_a_joint_curve_in_tunnels_and_horizon() {
    // A further hazard ratio X on the arm's curve of a joint PH model multiplies its cumulative
    // hazard: S(t) = exp(−(t/scale)^k·HR·X) (definition of a hazard ratio, common practice).
    let dir = tempfile::tempdir().unwrap();
    let json = fit(dir.path(), &va_lung(), "days", None);
    let ph = joint(&json, "ph");
    let (k, scale, hr) = (
        param(ph, "shape"),
        param(ph, "scale"),
        param(ph, "log_hr_test").exp() * 0.8,
    );
    let h = |months: f64| (months * 365.25 / 12.0 / scale).powf(k) * hr;
    let curve = ["--model", "ph", "--arm", "test", "--hazard-ratio", "0.8"];
    for &(a, b, p) in &tunnels(dir.path(), &curve, "t.json") {
        let want = 1.0 - (-(h(b) - h(a))).exp();
        assert!((p - want).abs() < 1e-10, "tunnels: {p} vs {want}");
    }
    tunnelcast(dir.path())
        .args(["horizon", "--fit", "fit.json", "--family", "weibull"])
        .args(curve)
        .args([
            "--cycle",
            "1 month",
            "--horizon",
            "2 years",
            "--json",
            "h.json",
        ])
        .assert()
        .success();
    let doc: Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("h.json")).unwrap()).unwrap();
    let rows = doc["truncation"].as_array().unwrap();
    assert_eq!(rows.len(), 24);
    for r in rows {
        // p_exit_last of a table of K tunnels: the exit probability of tunnel K.
        let kk = r["count"].as_f64().unwrap();
        let want = 1.0 - (-(h(kk) - h(kk - 1.0))).exp();
        let got = r["p_exit_last"].as_f64().unwrap();
        assert!(
            (got - want).abs() < 1e-10,
            "horizon K {kk}: {got} vs {want}"
        );
    }
}
