//! `fit`'s plausibility fields: landmarks and means against closed forms written from the
//! contract's survival functions, targets flags, and the targets reader's errors.

mod shell;

use serde_json::Value;
use shell::tunnelcast;

fn fit_json(dir: &std::path::Path, extra: &[&str]) -> Value {
    let data = concat!(env!("CARGO_MANIFEST_DIR"), "/data/demo_trial.csv");
    let mut args = vec![
        "fit",
        data,
        "--arm-col",
        "arm",
        "--time-unit",
        "months",
        "--families",
        "weibull,exponential",
        "--json",
        "fit.json",
    ];
    args.extend_from_slice(extra);
    tunnelcast(dir).args(&args).assert().success();
    serde_json::from_slice(&std::fs::read(dir.join("fit.json")).unwrap()).unwrap()
}

#[test]
fn weibull_and_exponential_landmarks_and_means_match_closed_forms() {
    let dir = tempfile::tempdir().unwrap();
    let json = fit_json(dir.path(), &[]);
    for fit in json["fits"].as_array().unwrap() {
        let p = &fit["params"];
        // S(t) from the contract's table (interface.md, "Parametric families"), t in months.
        let survival = |months: f64| match fit["family"].as_str().unwrap() {
            "weibull" => {
                let (k, s) = (p["shape"].as_f64().unwrap(), p["scale"].as_f64().unwrap());
                (-(months / s).powf(k)).exp()
            }
            _ => (-p["rate"].as_f64().unwrap() * months).exp(),
        };
        for l in fit["landmarks"].as_array().unwrap() {
            let years = l["time_years"].as_f64().unwrap();
            let s = l["survival"].as_f64().unwrap();
            let expected = survival(years * 12.0);
            assert!(
                (s - expected).abs() <= 1e-12 * expected.max(1e-300),
                "{s} vs {expected}"
            );
            let (lo, hi) = (l["lower"].as_f64().unwrap(), l["upper"].as_f64().unwrap());
            assert!(lo <= s && s <= hi, "{lo} {s} {hi}");
        }
        if fit["family"] == "exponential" {
            // ∫₀^H e^(−λt) dt = (1 − e^(−λH))/λ (elementary), H = 60 years = 720 months.
            let rate = p["rate"].as_f64().unwrap();
            let mean_months = (1.0 - (-rate * 720.0).exp()) / rate;
            let got = fit["mean_years"].as_f64().unwrap();
            assert!((got - mean_months / 12.0).abs() < 1e-8, "{got}");
        }
    }
}

#[test]
fn targets_flag_fits_outside_and_bad_targets_are_one_line_errors() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("targets.csv"),
        "time,lower,upper,source\n5 years,0.9,1.0,invented high range\n",
    )
    .unwrap();
    let json = fit_json(dir.path(), &["--targets", "targets.csv"]);
    for fit in json["fits"].as_array().unwrap() {
        let t = &fit["targets"][0];
        assert_eq!(t["within"], false, "{t}");
        assert_eq!(t["source"], "invented high range");
    }
    std::fs::write(
        dir.path().join("bad.csv"),
        "time,lower,upper\n5 years,20,30\n",
    )
    .unwrap();
    let out = tunnelcast(dir.path())
        .args([
            "fit",
            concat!(env!("CARGO_MANIFEST_DIR"), "/data/demo_trial.csv"),
            "--time-unit",
            "months",
            "--targets",
            "bad.csv",
            "--json",
            "other.json",
        ])
        .assert()
        .code(2)
        .get_output()
        .clone();
    let err = String::from_utf8(out.stderr).unwrap();
    assert!(err.contains("bad.csv line 2 column 2"), "{err}");
    assert_eq!(err.trim().lines().count(), 1, "{err}");
    assert!(!dir.path().join("other.json").exists());
}
