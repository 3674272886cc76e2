//! The Cox model (Efron ties) and the test of proportional hazards against outside values on
//! the Veterans' Administration lung cancer trial (Kalbfleisch and Prentice, 1980):
//! coefficients, standard errors and partial log-likelihood from statsmodels PHReg
//! (ties="efron"), the Grambsch–Therneau (1994, section 4) statistics from a numpy
//! implementation; both by `tests/reference/cox_reference.py`.

use serde_json::Value;
use tunnelcast::effects::design::{parse, DesignOptions};
use tunnelcast::effects::report::analyse;

fn options(covariates: &[String]) -> DesignOptions {
    DesignOptions {
        time_col: "time".into(),
        event_col: "event".into(),
        arm_col: "arm".into(),
        reference: None,
        covariates: covariates.to_vec(),
        delimiter: None,
        zero_time: None,
    }
}

fn floats(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

#[test]
fn cox_and_ph_test_match_the_reference_on_the_va_lung_trial() {
    let root = env!("CARGO_MANIFEST_DIR");
    let bytes = std::fs::read(format!("{root}/tests/reference/va_lung.csv")).unwrap();
    let reference: Value = serde_json::from_str(
        &std::fs::read_to_string(format!("{root}/tests/reference/cox.json")).unwrap(),
    )
    .unwrap();
    for case in reference["cases"].as_array().unwrap() {
        let covariates: Vec<String> = case["covariates"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| c.as_str().unwrap().to_string())
            .collect();
        let design = parse("va_lung.csv", &bytes, &options(&covariates)).unwrap();
        let names: Vec<&str> = design.terms.iter().map(|t| t.name.as_str()).collect();
        let expected_names: Vec<&str> = case["names"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| c.as_str().unwrap())
            .collect();
        assert_eq!(names, expected_names);
        let (fit, _, summary) = analyse(&design);
        assert!(summary.converged);
        // statsmodels PHReg (ties="efron"), tolerance 1e-6 absolute.
        let loglik = case["loglik"].as_f64().unwrap();
        assert!(
            (fit.loglik - loglik).abs() < 1e-6,
            "{} vs {loglik}",
            fit.loglik
        );
        for (j, (c, s)) in floats(&case["coef"])
            .into_iter()
            .zip(floats(&case["se"]))
            .enumerate()
        {
            assert!(
                (summary.terms[j].coef - c).abs() < 1e-6,
                "coef {j}: {} vs {c}",
                summary.terms[j].coef
            );
            assert!(
                (summary.terms[j].se - s).abs() < 1e-6,
                "se {j}: {} vs {s}",
                summary.terms[j].se
            );
        }
        // Grambsch and Therneau (1994, section 4), numpy; relative 1e-6.
        let chi2 = case["ph_chi2"].as_f64().unwrap();
        assert!(
            (summary.ph_test.chi2 / chi2 - 1.0).abs() < 1e-6,
            "{} vs {chi2}",
            summary.ph_test.chi2
        );
        let p = case["ph_p"].as_f64().unwrap();
        assert!((summary.ph_test.p_value - p).abs() < 1e-6);
        for (j, c) in floats(&case["ph_terms"]).into_iter().enumerate() {
            let got = summary.ph_test.terms[j].chi2;
            assert!((got - c).abs() < 1e-6 * (1.0 + c), "term {j}: {got} vs {c}");
        }
    }
}
