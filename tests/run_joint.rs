//! `run` with a joint model's curve chosen in `[choice]` (`model`, `arm`, `at`): every path of
//! the run (tunnel table, horizon checks, draws, metadata, report) uses the arm's curve of the
//! joint model, as the standalone commands do with `--model --arm --at`.
//!
//! Data: the Veterans' Administration lung cancer trial (Kalbfleisch and Prentice, 1980; two
//! arms `standard`/`test`, Karnofsky score), the copy in `tests/reference/va_lung.csv`.
//! Expectations: the standalone `tunnels`, `horizon` and `draws` commands on the run's own
//! `fit.json` (cross-path), and closed forms evaluated here from the fit JSON's parameters:
//! exponential PH S_arm(t) = exp(−λ·HR·t), Weibull AFT S(t | x) = exp(−(t/(scale·e^η))^shape)
//! with η = log_af_arm + b·x (definitions of the models, docs/effects.md; common practice).

mod shell;

use serde_json::Value;
use shell::{listing, read_csv_table, read_table, tunnelcast, TableFile};
use std::path::Path;

/// Tunnel states of every table here.
const COUNT: usize = 6;

/// Writes the VA lung data and an analysis file (30-day cycles, six tunnels, a three-year
/// horizon) with `fit` as its `[fit]` table body and `extra` appended.
fn setup(dir: &Path, fit: &str, extra: &str) {
    let data = format!("{}/tests/reference/va_lung.csv", env!("CARGO_MANIFEST_DIR"));
    std::fs::copy(data, dir.join("va.csv")).unwrap();
    std::fs::write(
        dir.join("analysis.toml"),
        format!(
            "[data]\nfile = \"va.csv\"\ntime_unit = \"days\"\narm_column = \"arm\"\n\n[fit]\n{fit}\n\n\
             [tunnels]\ncycle = \"30 days\"\ncount = {COUNT}\nhorizon = \"3 years\"\n\n\
             [output]\nformats = [\"csv\", \"json\", \"xlsx\"]\n\n{extra}"
        ),
    )
    .unwrap();
}

/// Runs the analysis into `out`; panics with stderr on failure.
fn run(dir: &Path) {
    let out = tunnelcast(dir)
        .args(["run", "analysis.toml", "--out", "out"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

/// The run's `fit.json`.
fn fit_json(dir: &Path) -> Value {
    serde_json::from_slice(&std::fs::read(dir.join("out/fit.json")).unwrap()).unwrap()
}

/// The joint model `family`/`model` of a fit JSON.
fn joint<'a>(json: &'a Value, family: &str, model: &str) -> &'a Value {
    json["effects"]
        .as_array()
        .unwrap()
        .iter()
        .find(|m| m["model"] == model && m["family"] == family)
        .unwrap_or_else(|| panic!("no joint {family} {model} model"))
}

fn param(model: &Value, name: &str) -> f64 {
    model["params"][name]
        .as_f64()
        .unwrap_or_else(|| panic!("no {name}"))
}

/// Every row of the first table as numbers (text cells, e.g. a method name, as NaN).
fn numbers(doc: &TableFile) -> Vec<Vec<f64>> {
    doc.tables[0]
        .rows
        .iter()
        .map(|r| r.iter().map(|v| v.as_f64().unwrap_or(f64::NAN)).collect())
        .collect()
}

/// The rows of the JSON array `h[key]` in the order of `columns`, a cell that is not a number
/// (a method name, null) NaN as [`numbers`] reads the files; [`same`] then wants NaN on both
/// sides. For comparing `horizon --json` with a run's table.
fn json_rows(h: &Value, key: &str, columns: &[String]) -> Vec<Vec<f64>> {
    h[key]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            columns
                .iter()
                .map(|k| r[k.as_str()].as_f64().unwrap_or(f64::NAN))
                .collect()
        })
        .collect()
}

/// Two tables of numbers equal to 1e-12 (relative, absolute near 0), NaN cells alike.
fn same(what: &str, a: &[Vec<f64>], b: &[Vec<f64>]) {
    assert_eq!(a.len(), b.len(), "{what}: rows");
    for (i, (ra, rb)) in a.iter().zip(b).enumerate() {
        assert_eq!(ra.len(), rb.len(), "{what} row {i}");
        for (x, y) in ra.iter().zip(rb) {
            let ok = (x.is_nan() && y.is_nan()) || (x - y).abs() <= 1e-12 * x.abs().max(1.0);
            assert!(ok, "{what} row {i}: {x} vs {y}\n{ra:?}\n{rb:?}");
        }
    }
}

/// A sheet of an XLSX file read by calamine: header and numbers (empty or text cells NaN).
fn xlsx_sheet(path: &Path, sheet: &str) -> (Vec<String>, Vec<Vec<f64>>) {
    use calamine::{Data, Reader, Xlsx};
    let mut book: Xlsx<_> = calamine::open_workbook(path).unwrap();
    let range = book.worksheet_range(sheet).unwrap();
    let mut rows = range.rows();
    let columns = rows.next().unwrap().iter().map(|c| c.to_string()).collect();
    let values = rows
        .map(|r| {
            r.iter()
                .map(|c| match c {
                    Data::Float(x) => *x,
                    Data::Int(i) => *i as f64,
                    _ => f64::NAN,
                })
                .collect()
        })
        .collect();
    (columns, values)
}

/// A sheet of an XLSX file as text cells, row by row.
fn xlsx_text(path: &Path, sheet: &str) -> Vec<Vec<String>> {
    use calamine::{Reader, Xlsx};
    let mut book: Xlsx<_> = calamine::open_workbook(path).unwrap();
    let range = book.worksheet_range(sheet).unwrap();
    range
        .rows()
        .map(|r| r.iter().map(|c| c.to_string()).collect())
        .collect()
}

/// The metadata lines that describe the curve (model, arm, covariates, estimates, adjustments).
fn curve_lines(doc: &TableFile) -> Vec<(String, String)> {
    doc.metadata
        .iter()
        .filter(|(k, _)| {
            [
                "joint_model",
                "arm",
                "covariates",
                "covariates_at",
                "joint_estimates",
                "family",
                "parameter_time_unit",
                "hazard_ratio",
            ]
            .contains(&k.as_str())
        })
        .map(|(k, v)| (k.clone(), v.clone()))
        .collect()
}

#[test]
fn a_joint_choice_writes_what_the_standalone_commands_write_from_its_fit_file() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // Weibull PH with the Karnofsky score, standardised over arm test's patients, a further
    // hazard ratio on top, and draws of all the joint parameters.
    setup(
        d,
        "families = [\"weibull\"]\nchoose = \"weibull\"",
        "[adjust]\nhazard_ratio = 0.8\n\n[draws]\ncount = 40\nseed = 11\n\n\
         [effects]\ncovariates = [\"karnofsky\"]\n\n\
         [choice]\nmodel = \"ph\"\narm = \"test\"\nreason = \"proportional hazards across arms, as the trial was analysed\"\n",
    );
    run(d);
    let out = d.join("out");
    let curve = [
        "--fit",
        "out/fit.json",
        "--family",
        "weibull",
        "--model",
        "ph",
        "--arm",
        "test",
        "--hazard-ratio",
        "0.8",
    ];
    tunnelcast(d)
        .arg("tunnels")
        .args(curve)
        .args(["--cycle", "30 days", "--count", "6", "--out", "t.json"])
        .assert()
        .success();
    tunnelcast(d)
        .arg("horizon")
        .args(curve)
        .args([
            "--cycle",
            "30 days",
            "--horizon",
            "3 years",
            "--json",
            "h.json",
        ])
        .assert()
        .success();
    tunnelcast(d)
        .arg("draws")
        .args(curve)
        .args(["--cycle", "30 days", "--count", "6", "--draws", "40"])
        .args(["--seed", "11", "--quiet", "--summary-out", "s.json"])
        .assert()
        .success();

    // Tunnel table: the run's JSON and CSV and the standalone command's JSON.
    let run_tunnels = read_table(&out.join("tunnels.json"));
    let alone = read_table(&d.join("t.json"));
    assert_eq!(run_tunnels.tables[0].columns, alone.tables[0].columns);
    assert_eq!(run_tunnels.tables[0].rows.len(), COUNT);
    same("tunnels", &numbers(&run_tunnels), &numbers(&alone));
    same(
        "tunnels.csv",
        &read_csv_table(&out.join("tunnels.csv")).numbers(),
        &numbers(&alone),
    );
    // The workbook: the same numbers, the joint model's lines in its notes sheet.
    let (columns, rows) = xlsx_sheet(&out.join("tunnels.xlsx"), "tunnels");
    assert_eq!(columns, alone.tables[0].columns);
    same("tunnels.xlsx", &rows, &numbers(&alone));
    let notes = xlsx_text(&out.join("tunnels.xlsx"), "notes");
    for (key, value) in curve_lines(&alone) {
        assert!(
            notes.contains(&vec![key.clone(), value.clone()]),
            "{key} = {value} not in the notes sheet"
        );
    }
    // The same curve described by the same lines.
    assert_eq!(curve_lines(&run_tunnels), curve_lines(&alone));
    assert_eq!(
        run_tunnels.metadata["joint_model"],
        "weibull ph across arms (reference arm standard)"
    );
    // Arm test's patients, counted in the data file.
    let in_test = std::fs::read_to_string(d.join("va.csv"))
        .unwrap()
        .lines()
        .filter(|l| l.split(',').nth(2) == Some("test"))
        .count();
    let standardised = format!("standardised over the arm's {in_test} patients");
    assert!(
        run_tunnels.metadata["covariates"].starts_with(&standardised),
        "{:?}",
        run_tunnels.metadata
    );
    assert!(!run_tunnels.metadata.contains_key("parameters"));

    // Horizon: the truncation table (four contract columns) and the within-cycle table.
    let h: Value = serde_json::from_slice(&std::fs::read(d.join("h.json")).unwrap()).unwrap();
    let truncation = read_table(&out.join("truncation.json"));
    assert_eq!(
        truncation.metadata["horizon_cycles"],
        h["horizon_cycles"].to_string()
    );
    assert_eq!(
        truncation.metadata["suggested_count"],
        h["suggested_count"].to_string()
    );
    let keys = ["count", "max_surv_gap", "ly_rel_error", "p_exit_last"];
    assert_eq!(truncation.tables[0].columns, keys);
    let from_h = json_rows(&h, "truncation", &truncation.tables[0].columns);
    same("truncation", &numbers(&truncation), &from_h);
    let within = read_table(&out.join("within_cycle.json"));
    let columns = within.tables[0].columns.clone();
    let from_h = json_rows(&h, "within_cycle", &columns);
    same("within_cycle", &numbers(&within), &from_h);

    // Draws: the same draws of all the joint parameters give the same summary.
    let summary = read_table(&out.join("draws_summary.json"));
    let alone = read_table(&d.join("s.json"));
    assert_eq!(summary.tables[0].columns, alone.tables[0].columns);
    same("draws summary", &numbers(&summary), &numbers(&alone));
    // The draws carry the effect's uncertainty: the intervals are not the point estimate.
    let spread = numbers(&summary)
        .iter()
        .map(|r| r[r.len() - 1] - r[r.len() - 2])
        .fold(f64::INFINITY, f64::min);
    assert!(spread > 0.0, "{spread}");

    // The report names the joint model, the arm and the covariate setting.
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    let doc = shell::parse_report(&html);
    let chosen = doc
        .descendants()
        .find(|n| n.attribute("id") == Some("chosen"))
        .expect("chosen section");
    let text: String = chosen
        .descendants()
        .filter_map(|n| n.text())
        .collect::<Vec<_>>()
        .join(" ");
    for needle in [
        "weibull ph across arms (reference arm standard)",
        "test",
        standardised.as_str(),
        "log_hr_test",
        "b_karnofsky",
        "proportional hazards across arms, as the trial was analysed",
    ] {
        assert!(text.contains(needle), "{needle} not in: {text}");
    }
}

#[test]
fn exponential_ph_arm_has_the_closed_form_tunnel_probabilities() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    setup(
        d,
        "families = [\"exponential\"]\nchoose = \"exponential\"",
        "[effects]\n\n[choice]\nmodel = \"ph\"\narm = \"test\"\nreason = \"constant hazards in both arms\"\n",
    );
    run(d);
    let json = fit_json(d);
    let ph = joint(&json, "exponential", "ph");
    // S_arm(t) = exp(−λ·e^coef·t): p_exit = 1 − exp(−λ·e^coef·cycle) in every tunnel.
    let rate = param(ph, "rate") * param(ph, "log_hr_test").exp();
    let want = 1.0 - (-rate * 30.0).exp();
    let tunnels = read_table(&d.join("out/tunnels.json"));
    let csv = read_csv_table(&d.join("out/tunnels.csv"));
    let p = tunnels.tables[0]
        .columns
        .iter()
        .position(|c| c == "p_exit")
        .unwrap();
    assert_eq!(tunnels.tables[0].rows.len(), COUNT);
    for (k, row) in tunnels.tables[0].rows.iter().enumerate() {
        let got = row[p].as_f64().unwrap();
        assert!(
            (got - want).abs() < 1e-12 * want,
            "tunnel {}: {got} vs {want}",
            k + 1
        );
        let from_csv = csv.number(k, "p_exit");
        assert!((from_csv - want).abs() < 1e-12 * want, "{from_csv}");
    }
    assert_eq!(tunnels.metadata["arm"], "test");
    assert!(tunnels.metadata["joint_model"].starts_with("exponential ph"));
    assert!(!tunnels.metadata.contains_key("covariates"));
}

#[test]
fn weibull_aft_at_a_covariate_value_has_the_closed_form_survival() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    setup(
        d,
        "families = [\"weibull\"]\nchoose = \"weibull\"",
        "[effects]\ncovariates = [\"karnofsky\"]\n\n\
         [choice]\nmodel = \"aft\"\narm = \"test\"\nat = { karnofsky = 60 }\nreason = \"an acceleration factor is the effect measure of the submission\"\n",
    );
    run(d);
    let json = fit_json(d);
    let aft = joint(&json, "weibull", "aft");
    let (shape, scale) = (param(aft, "shape"), param(aft, "scale"));
    let eta = param(aft, "log_af_test") + param(aft, "b_karnofsky") * 60.0;
    let survival = |t: f64| (-(t / (scale * eta.exp())).powf(shape)).exp();
    let tunnels = read_table(&d.join("out/tunnels.json"));
    let col = |n: &str| {
        tunnels.tables[0]
            .columns
            .iter()
            .position(|c| c == n)
            .unwrap()
    };
    let (t_end, s_end) = (col("t_end"), col("surv_end"));
    for row in &tunnels.tables[0].rows {
        let t = row[t_end].as_f64().unwrap();
        let want = survival(t);
        let got = row[s_end].as_f64().unwrap();
        assert!((got - want).abs() < 1e-12 * want, "S({t}): {got} vs {want}");
    }
    // The setting as `--at` records it.
    assert_eq!(tunnels.metadata["covariates_at"], "karnofsky=60");
    assert_eq!(tunnels.metadata["arm"], "test");
}

/// Runs a broken analysis: exit 2, one line on stderr naming the analysis file, nothing written.
fn fails(fit: &str, extra: &str) -> String {
    let dir = tempfile::tempdir().unwrap();
    setup(dir.path(), fit, extra);
    let before = listing(dir.path());
    let out = tunnelcast(dir.path())
        .args(["run", "analysis.toml", "--out", "out"])
        .assert()
        .code(2)
        .get_output()
        .clone();
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    assert!(stderr.starts_with("error: analysis.toml line "), "{stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert_eq!(listing(dir.path()), before, "no output folder");
    stderr
}

#[test]
fn bad_joint_choices_are_one_line_errors_naming_the_key() {
    let weibull = "families = [\"weibull\"]\nchoose = \"weibull\"";
    let effects = "[effects]\ncovariates = [\"karnofsky\", \"age\"]\n\n";
    // An arm the data do not have.
    let e = fails(
        weibull,
        &format!("{effects}[choice]\nmodel = \"ph\"\narm = \"placebo\"\nreason = \"r\"\n"),
    );
    assert!(
        e.contains("[choice] arm placebo: not an arm of the joint model (arms: standard, test)"),
        "{e}"
    );
    // `at` must fix every covariate.
    let e = fails(
        weibull,
        &format!(
            "{effects}[choice]\nmodel = \"ph\"\narm = \"test\"\nat = {{ karnofsky = 60 }}\nreason = \"r\"\n"
        ),
    );
    assert!(
        e.contains("[choice] at must fix every covariate; missing: age"),
        "{e}"
    );
    // A joint model needs [effects].
    let e = fails(
        weibull,
        "[choice]\nmodel = \"ph\"\narm = \"test\"\nreason = \"r\"\n",
    );
    assert!(
        e.contains("[choice] model") && e.contains("[effects]"),
        "{e}"
    );
    // A model the family has no joint form of.
    let e = fails(
        "families = [\"lognormal\"]\nchoose = \"lognormal\"",
        &format!("{effects}[choice]\nmodel = \"ph\"\narm = \"test\"\nreason = \"r\"\n"),
    );
    assert!(e.contains("there is no joint lognormal ph model"), "{e}");
    // The curve options' rules: `at` needs `model`, a model needs an arm, a known kind.
    let e = fails(
        weibull,
        &format!("{effects}[choice]\nat = {{ karnofsky = 60, age = 60 }}\n"),
    );
    assert!(
        e.contains("[choice] at fixes the covariates of a joint model"),
        "{e}"
    );
    let e = fails(weibull, &format!("{effects}[choice]\nmodel = \"ph\"\n"));
    assert!(
        e.contains("[choice] model needs arm = \"LEVEL\" (arms: standard, test)"),
        "{e}"
    );
    let e = fails(
        weibull,
        &format!("{effects}[choice]\nmodel = \"cox\"\narm = \"test\"\n"),
    );
    assert!(e.contains("[choice] model cox: unknown model"), "{e}");
    // The arm may come from [fit] arm; an unknown one is named by that key.
    let e = fails(
        "families = [\"weibull\"]\nchoose = \"weibull\"\narm = \"placebo\"",
        &format!("{effects}[choice]\nmodel = \"ph\"\nreason = \"r\"\n"),
    );
    assert!(
        e.contains("line 9 column 7: [fit] arm placebo: not an arm of the joint model"),
        "{e}"
    );
    // [fit] arm and [choice] arm must agree.
    let e = fails(
        "families = [\"weibull\"]\nchoose = \"weibull\"\narm = \"standard\"",
        &format!("{effects}[choice]\nmodel = \"ph\"\narm = \"test\"\n"),
    );
    assert!(e.contains("differs from [fit] arm"), "{e}");
}

#[test]
fn a_joint_model_that_is_not_the_lowest_aic_needs_a_reason() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // best-aic over the joint models of one kind: the lowest AIC of all is then chosen when
    // its kind is asked for, with no reason needed.
    setup(
        d,
        "families = [\"weibull\"]\nchoose = \"best-aic\"",
        "[effects]\n\n[choice]\nmodel = \"aft\"\narm = \"test\"\n",
    );
    // The joint models' AICs from `fit --effects` on the same data.
    tunnelcast(d)
        .args(["fit", "va.csv", "--time-unit", "days", "--arm-col", "arm"])
        .args(["--families", "weibull", "--effects", "--json", "fit.json"])
        .assert()
        .success();
    let json: Value = serde_json::from_slice(&std::fs::read(d.join("fit.json")).unwrap()).unwrap();
    let printed = tunnelcast(d)
        .args(["run", "analysis.toml", "--out", "out"])
        .output()
        .unwrap();
    let models: Vec<(String, String, f64)> = json["effects"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|m| m["converged"] == true)
        .map(|m| {
            (
                m["family"].as_str().unwrap().to_string(),
                m["model"].as_str().unwrap().to_string(),
                m["aic"].as_f64().unwrap(),
            )
        })
        .collect();
    let lowest = models.iter().map(|m| m.2).fold(f64::INFINITY, f64::min);
    let best_aft = models
        .iter()
        .filter(|m| m.1 == "aft")
        .min_by(|a, b| a.2.total_cmp(&b.2))
        .unwrap();
    // Succeeds without a reason only when the lowest AFT model is the lowest of all (or ties
    // with it: the Weibull and exponential are each the same model as PH and AFT).
    assert_eq!(
        printed.status.success(),
        best_aft.2 <= lowest + 1e-6,
        "{}",
        String::from_utf8_lossy(&printed.stderr)
    );
    if printed.status.success() {
        let tunnels = read_table(&d.join("out/tunnels.json"));
        assert_eq!(tunnels.metadata["family"], best_aft.0);
        assert_eq!(
            tunnels.metadata["chosen_by"],
            "smallest AIC among converged joint aft models"
        );
    }
    // A joint model more than 1 AIC point above the lowest, named without a reason: refused.
    let worse = models
        .iter()
        .find(|m| m.2 > lowest + 1.0)
        .expect("a joint model above the lowest AIC");
    let e = fails(
        &format!("choose = \"{}\"", worse.0),
        &format!(
            "[effects]\n\n[choice]\nmodel = \"{}\"\narm = \"test\"\n",
            worse.1
        ),
    );
    assert!(
        e.contains(&format!(
            "[fit] choose: the joint {} {} model is not the lowest AIC among the joint models",
            worse.0, worse.1
        )) && e.contains("[choice] reason"),
        "{e}"
    );
}

#[test]
fn background_mortality_and_payoffs_on_a_joint_curve_match_the_standalone_commands() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let data = format!("{}/data", env!("CARGO_MANIFEST_DIR"));
    for name in ["demo_lifetable.csv", "demo_payoffs.csv"] {
        std::fs::copy(format!("{data}/{name}"), d.join(name)).unwrap();
    }
    // Log-normal AFT, standardised over arm standard's patients, background mortality added
    // (two causes of exit) and the demo's invented payoff schedule.
    setup(
        d,
        "families = [\"lognormal\"]\nchoose = \"lognormal\"",
        "[adjust]\nbackground = \"demo_lifetable.csv\"\nstart_age = 60\nsex = \"male\"\nbackground_mode = \"add\"\n\n\
         [payoffs]\nfile = \"demo_payoffs.csv\"\n\n\
         [effects]\ncovariates = [\"karnofsky\"]\n\n\
         [choice]\nmodel = \"aft\"\narm = \"standard\"\nreason = \"log-normal hazards rise then fall, as clinicians expect\"\n",
    );
    run(d);
    let curve = [
        "--fit",
        "out/fit.json",
        "--family",
        "lognormal",
        "--model",
        "aft",
        "--arm",
        "standard",
        "--background",
        "demo_lifetable.csv",
        "--start-age",
        "60",
        "--sex",
        "male",
        "--background-mode",
        "add",
        "--payoffs",
        "demo_payoffs.csv",
        "--discount",
        "0.035",
        "--cycle",
        "30 days",
    ];
    tunnelcast(d)
        .arg("tunnels")
        .args(curve)
        .args(["--count", "6", "--out", "t.json"])
        .assert()
        .success();
    tunnelcast(d)
        .arg("horizon")
        .args(curve)
        .args(["--horizon", "3 years", "--json", "h.json"])
        .assert()
        .success();
    let run_tunnels = read_table(&d.join("out/tunnels.json"));
    let alone = read_table(&d.join("t.json"));
    assert_eq!(run_tunnels.tables[0].columns, alone.tables[0].columns);
    for column in ["p_exit_background", "payoff_treatment_cost"] {
        assert!(
            run_tunnels.tables[0].columns.iter().any(|c| c == column),
            "no {column}"
        );
    }
    same("tunnels", &numbers(&run_tunnels), &numbers(&alone));
    assert_eq!(curve_lines(&run_tunnels), curve_lines(&alone));
    // The truncation table with the payoff criteria, and the payoff totals by method.
    let h: Value = serde_json::from_slice(&std::fs::read(d.join("h.json")).unwrap()).unwrap();
    let truncation = read_table(&d.join("out/truncation.json"));
    let columns = truncation.tables[0].columns.clone();
    assert!(columns.iter().any(|c| c.starts_with("payoff_rel_error_")));
    let from_h = json_rows(&h, "truncation", &columns);
    same("truncation", &numbers(&truncation), &from_h);
    let methods = read_table(&d.join("out/payoff_methods.json"));
    let columns = methods.tables[0].columns.clone();
    let from_h = json_rows(&h, "payoffs", &columns);
    same("payoff methods", &numbers(&methods), &from_h);
}

#[test]
fn the_joint_model_example_runs_and_gives_the_log_logistic_aft_arm() {
    // data/demo_joint_analysis.toml: the invented demo trial, the veltranib arm's curve from
    // the joint log-logistic AFT model, S(t) = 1/(1 + (t/(scale·e^γ))^shape) (definition of
    // the log-logistic AFT model, common practice), γ = log_af_veltranib.
    let dir = tempfile::tempdir().unwrap();
    let example = format!(
        "{}/data/demo_joint_analysis.toml",
        env!("CARGO_MANIFEST_DIR")
    );
    let out = dir.path().join("out");
    tunnelcast(dir.path())
        .args(["run", &example, "--out", "out"])
        .assert()
        .success();
    let json: Value =
        serde_json::from_slice(&std::fs::read(out.join("fit.json")).unwrap()).unwrap();
    let aft = joint(&json, "loglogistic", "aft");
    let scale = param(aft, "scale") * param(aft, "log_af_veltranib").exp();
    let shape = param(aft, "shape");
    let survival = |t: f64| 1.0 / (1.0 + (t / scale).powf(shape));
    let tunnels = read_table(&out.join("tunnels.json"));
    assert_eq!(tunnels.metadata["arm"], "veltranib");
    assert!(tunnels.metadata["joint_model"].starts_with("loglogistic aft across arms"));
    let col = |n: &str| {
        tunnels.tables[0]
            .columns
            .iter()
            .position(|c| c == n)
            .unwrap()
    };
    let (t_end, s_end) = (col("t_end"), col("surv_end"));
    for row in &tunnels.tables[0].rows {
        let t = row[t_end].as_f64().unwrap();
        let (got, want) = (row[s_end].as_f64().unwrap(), survival(t));
        assert!((got - want).abs() < 1e-12 * want, "S({t}): {got} vs {want}");
    }
    assert!(out.join("draws_summary.csv").is_file());
}
