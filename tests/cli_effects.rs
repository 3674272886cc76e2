//! `fit --effects` from the command line: the `cox` object of the fit JSON, the printed
//! section, and errors (exit 2, one line naming file, line and column, no output written).

mod shell;

use shell::{listing, tunnelcast};

fn va_lung() -> String {
    format!("{}/tests/reference/va_lung.csv", env!("CARGO_MANIFEST_DIR"))
}

#[test]
fn fit_effects_writes_the_cox_model_and_its_test() {
    let dir = tempfile::tempdir().unwrap();
    let out = tunnelcast(dir.path())
        .args(["fit", &va_lung(), "--time-unit", "days", "--arm-col", "arm"])
        .args([
            "--families",
            "weibull",
            "--effects",
            "--covariates",
            "karnofsky,cell",
        ])
        .args(["--json", "fit.json"])
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let text = String::from_utf8(out).unwrap();
    assert!(
        text.contains("Cox model across arms (Efron ties; reference arm standard"),
        "{text}"
    );
    assert!(text.contains("Test of proportional hazards"), "{text}");
    let json: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("fit.json")).unwrap()).unwrap();
    let cox = &json["cox"];
    assert_eq!(cox["ties"], "efron");
    let names: Vec<&str> = cox["terms"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| t["name"].as_str().unwrap())
        .collect();
    assert_eq!(
        names,
        [
            "arm_test",
            "b_karnofsky",
            "b_cell_large",
            "b_cell_small",
            "b_cell_squamous"
        ]
    );
    // The hazard ratio is the exponential of the coefficient and inside its interval.
    for t in cox["terms"].as_array().unwrap() {
        let coef = t["coef"].as_f64().unwrap();
        let hr = t["exp_coef"].as_f64().unwrap();
        assert!((hr - coef.exp()).abs() < 1e-12 * hr);
        assert!(t["lower"].as_f64().unwrap() < hr && hr < t["upper"].as_f64().unwrap());
    }
    assert_eq!(cox["ph_test"]["df"], 5);
    // Every joint model, PH first; the Weibull PH and AFT are the same fit
    // (AF = HR^(-1/shape)); no LR test with covariates (the separate fits have none).
    let effects = json["effects"].as_array().unwrap();
    let listed: Vec<String> = effects
        .iter()
        .map(|e| {
            format!(
                "{} {}",
                e["family"].as_str().unwrap(),
                e["model"].as_str().unwrap()
            )
        })
        .collect();
    assert_eq!(
        listed,
        [
            "exponential ph",
            "weibull ph",
            "gompertz ph",
            "exponential aft",
            "weibull aft",
            "lognormal aft",
            "loglogistic aft",
            "generalized-gamma aft"
        ]
    );
    assert!(effects.iter().all(|e| e["lr_test"].is_null()));
    let (ph, aft) = (&effects[1], &effects[4]);
    let shape = ph["params"]["shape"].as_f64().unwrap();
    let hr = ph["params"]["log_hr_test"].as_f64().unwrap().exp();
    let af = aft["params"]["log_af_test"].as_f64().unwrap().exp();
    assert!((af - hr.powf(-1.0 / shape)).abs() < 1e-5 * af);
    assert!(ph["lr_test"].is_null());
    assert_eq!(ph["covariance"]["names"][2], "log_hr_test");
    // The plot of the arms and the residuals, one panel per term.
    tunnelcast(dir.path())
        .args(["fit", &va_lung(), "--time-unit", "days", "--arm-col", "arm"])
        .args(["--families", "weibull", "--effects", "--plots", "plots"])
        .assert()
        .success();
    // Without covariates: the likelihood-ratio test against the separate Weibull fits.
    tunnelcast(dir.path())
        .args(["fit", &va_lung(), "--time-unit", "days", "--arm-col", "arm"])
        .args(["--families", "weibull", "--effects", "--json", "plain.json"])
        .assert()
        .success();
    let plain: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("plain.json")).unwrap()).unwrap();
    let lr = &plain["effects"][1]["lr_test"];
    assert_eq!(plain["effects"][1]["family"], "weibull");
    assert_eq!(lr["df"], 1);
    // Only the Weibull has separate fits here: the other families' tests are null.
    for (j, e) in plain["effects"].as_array().unwrap().iter().enumerate() {
        assert_eq!(e["lr_test"].is_null(), e["family"] != "weibull", "{j}");
    }
    let separate: f64 = plain["fits"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f["loglik"].as_f64().unwrap())
        .sum();
    assert!((lr["separate_loglik"].as_f64().unwrap() - separate).abs() < 1e-9);
    let statistic = 2.0 * (separate - plain["effects"][1]["loglik"].as_f64().unwrap());
    assert!((lr["statistic"].as_f64().unwrap() - statistic).abs() < 1e-9);
    // Degrees of freedom of the test by family: (parameters - 1) x (arms - 1), two arms; the
    // exponential joint model is the separate fits reparameterised (0 df, statistic 0).
    let out = tunnelcast(dir.path())
        .args(["fit", &va_lung(), "--time-unit", "days", "--arm-col", "arm"])
        .args(["--families", "exponential,lognormal,generalized-gamma"])
        .args(["--effects", "--json", "df.json"])
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let text = String::from_utf8(out).unwrap();
    let df: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("df.json")).unwrap()).unwrap();
    for e in df["effects"].as_array().unwrap() {
        let expected = match e["family"].as_str().unwrap() {
            "exponential" => Some(0),
            "lognormal" => Some(1),
            "generalized-gamma" => Some(2),
            _ => None,
        };
        match expected {
            Some(d) => {
                assert_eq!(e["lr_test"]["df"], d, "{e}");
                if d == 0 {
                    assert!(e["lr_test"]["statistic"].as_f64().unwrap() < 1e-6);
                    assert_eq!(e["lr_test"]["p_value"], 1.0);
                }
            }
            None => assert!(e["lr_test"].is_null()),
        }
    }
    assert!(text.contains("on 2 df"), "{text}");
    assert!(text.contains("the same model (0 df"), "{text}");
    for line in [
        "lognormal         aft",
        "gompertz          ph ",
        "AF test",
        "HR test",
    ] {
        assert!(text.contains(line), "{line}: {text}");
    }
    let svg = std::fs::read_to_string(dir.path().join("plots/effects.svg")).unwrap();
    assert!(svg.contains("arm_test") && svg.contains("running mean"));
    assert!(dir.path().join("plots/effects.png").exists());
    // The file still reads back as a fit file for the curve options.
    tunnelcast(dir.path())
        .args([
            "tunnels", "--fit", "fit.json", "--family", "weibull", "--arm", "test",
        ])
        .args(["--cycle", "1 month", "--until", "2 years", "--out", "t.csv"])
        .assert()
        .success();
}

#[test]
fn bad_covariates_are_one_line_errors_and_write_nothing() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("d.csv"),
        "time,event,arm,age\n5,1,A,60\n7,0,B,61\n9,1,B,n/a\n3,1,A,58\n",
    )
    .unwrap();
    let run = |extra: &[&str]| {
        let out = tunnelcast(dir.path())
            .args(["fit", "d.csv", "--time-unit", "months", "--arm-col", "arm"])
            .args(["--families", "exponential", "--json", "fit.json"])
            .args(extra)
            .assert()
            .code(2)
            .get_output()
            .clone();
        let err = String::from_utf8(out.stderr).unwrap();
        assert!(!err.contains("panicked"), "{err}");
        assert_eq!(err.trim_end().lines().count(), 1, "{err}");
        err
    };
    let err = run(&["--effects", "--covariates", "age"]);
    assert!(
        err.contains("d.csv line 4 column 4 (\"age\"): covariate \"age\" is numeric"),
        "{err}"
    );
    let err = run(&["--effects", "--covariates", "weight"]);
    assert!(err.contains("weight"), "{err}");
    let err = run(&["--covariates", "age"]);
    assert!(err.contains("add --effects"), "{err}");
    let err = run(&["--effects", "--reference", "C"]);
    assert!(err.contains("--reference \"C\""), "{err}");
    assert_eq!(listing(dir.path()), ["d.csv"]);
}
