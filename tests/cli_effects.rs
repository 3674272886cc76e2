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
    // The plot of the arms and the residuals, one panel per term.
    tunnelcast(dir.path())
        .args(["fit", &va_lung(), "--time-unit", "days", "--arm-col", "arm"])
        .args(["--families", "weibull", "--effects", "--plots", "plots"])
        .assert()
        .success();
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
