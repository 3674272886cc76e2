//! Joint models across arms against SciPy maximum likelihood on the Veterans' Administration
//! lung cancer trial (Kalbfleisch and Prentice, 1980; values from
//! `tests/reference/joint_reference.py`: scipy.stats log-likelihoods — weibull_min, expon,
//! lognorm, fisk, gengamma, Gompertz written out — maximised by scipy.optimize), and the
//! identities of the PH and AFT forms (Weibull: AF = HR^(−1/shape); exponential: AF = 1/HR).

use serde_json::Value;
use tunnelcast::draws::NormalStream;
use tunnelcast::effects::design::{parse, Design, DesignOptions, Subject, Term, TermKind};
use tunnelcast::effects::joint::{by_name, fit, fit_with, JointExponential, Model};

fn va_lung() -> Design {
    let root = env!("CARGO_MANIFEST_DIR");
    let bytes = std::fs::read(format!("{root}/tests/reference/va_lung.csv")).unwrap();
    let options = DesignOptions {
        time_col: "time".into(),
        event_col: "event".into(),
        arm_col: "arm".into(),
        reference: None,
        covariates: vec!["karnofsky".into()],
        delimiter: None,
        zero_time: None,
    };
    parse("va_lung.csv", &bytes, &options).unwrap()
}

#[test]
fn joint_weibull_matches_scipy_on_the_va_lung_trial() {
    let root = env!("CARGO_MANIFEST_DIR");
    let reference: Value = serde_json::from_str(
        &std::fs::read_to_string(format!("{root}/tests/reference/joint.json")).unwrap(),
    )
    .unwrap();
    let design = va_lung();
    for (key, model) in [("ph", Model::Ph), ("aft", Model::Aft)] {
        let expected = &reference["fits"][key];
        let result = fit(&design, model);
        assert!(result.converged, "{key}");
        let loglik = expected["loglik"].as_f64().unwrap();
        // SciPy maximum likelihood: log-likelihood to 1e-6, estimates to 1e-5.
        assert!(
            (result.loglik - loglik).abs() < 1e-6,
            "{key}: {} vs {loglik}",
            result.loglik
        );
        for (j, v) in expected["theta"].as_array().unwrap().iter().enumerate() {
            let v = v.as_f64().unwrap();
            assert!(
                (result.theta[j] - v).abs() < 1e-5,
                "{key} {j}: {} vs {v}",
                result.theta[j]
            );
        }
    }
}

#[test]
fn joint_families_match_scipy_on_the_va_lung_trial() {
    // Exponential PH and AFT, Gompertz PH, log-normal AFT, log-logistic AFT and generalized
    // gamma AFT: SciPy maximum likelihood (scipy.optimize on scipy.stats log-likelihoods; the
    // Gompertz log-likelihood written out with numpy) on the VA lung trial (Kalbfleisch and
    // Prentice, 1980). Log-likelihood to 1e-6, estimates to 1e-5.
    let root = env!("CARGO_MANIFEST_DIR");
    let reference: Value = serde_json::from_str(
        &std::fs::read_to_string(format!("{root}/tests/reference/joint.json")).unwrap(),
    )
    .unwrap();
    let design = va_lung();
    let cases = reference["models"].as_array().unwrap();
    assert_eq!(cases.len(), 6);
    for case in cases {
        let name = case["family"].as_str().unwrap();
        let model = match case["model"].as_str().unwrap() {
            "ph" => Model::Ph,
            _ => Model::Aft,
        };
        let family = by_name(name).unwrap();
        let names: Vec<&str> = case["names"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_str().unwrap())
            .collect();
        let base = family.family().estimation_names();
        assert_eq!(&names[..base.len()], base, "{name}");
        let result = fit_with(family, model, &design).unwrap();
        assert!(result.converged, "{name} {model:?}");
        let loglik = case["loglik"].as_f64().unwrap();
        assert!(
            (result.loglik - loglik).abs() < 1e-6,
            "{name} {model:?}: {} vs {loglik}",
            result.loglik
        );
        for (j, v) in case["theta"].as_array().unwrap().iter().enumerate() {
            let v = v.as_f64().unwrap();
            assert!(
                (result.theta[j] - v).abs() < 1e-5,
                "{name} {model:?} {j}: {} vs {v}",
                result.theta[j]
            );
        }
    }
}

fn uniform(rng: &mut NormalStream) -> f64 {
    ((rng.next_u64() >> 11) as f64 + 0.5) / 9_007_199_254_740_992.0
}

#[test]
fn weibull_ph_and_aft_are_the_same_fit() {
    // Seeded invented trials of varying size, shape and effect: the two forms reach the same
    // maximum, with AF = HR^(-1/shape) for every coefficient (a property of the Weibull).
    let mut rng = NormalStream::new(2026);
    for case in 0..12 {
        let n = 40 + 30 * case;
        let shape = 0.6 + 0.15 * case as f64;
        let log_hr = -0.8 + 0.15 * case as f64;
        let subjects: Vec<Subject> = (0..n)
            .map(|i| {
                let arm = i % 2;
                let age = 10.0 * (uniform(&mut rng) - 0.5);
                let z = log_hr * arm as f64 + 0.05 * age;
                let t = 10.0 * (-uniform(&mut rng).ln() / f64::exp(z)).powf(1.0 / shape);
                let c = 5.0 + 25.0 * uniform(&mut rng);
                Subject {
                    time: t.min(c),
                    event: t <= c,
                    arm,
                    x: vec![arm as f64, age],
                }
            })
            .collect();
        let design = Design {
            arms: vec!["A".into(), "B".into()],
            reference: 0,
            terms: vec![
                Term {
                    name: "arm_B".into(),
                    kind: TermKind::Arm("B".into()),
                },
                Term {
                    name: "b_age".into(),
                    kind: TermKind::Numeric("age".into()),
                },
            ],
            subjects,
        };
        let ph = fit(&design, Model::Ph);
        let aft = fit(&design, Model::Aft);
        assert!(ph.converged && aft.converged, "case {case}");
        assert!((ph.loglik - aft.loglik).abs() < 1e-8 * (1.0 + ph.loglik.abs()));
        let k = ph.theta[0].exp();
        assert!((ph.theta[0] - aft.theta[0]).abs() < 1e-6);
        assert!((ph.theta[1] - aft.theta[1]).abs() < 1e-6);
        for j in 2..4 {
            let af = aft.theta[j].exp();
            let hr = ph.theta[j].exp();
            assert!(
                (af - hr.powf(-1.0 / k)).abs() < 1e-6 * af,
                "case {case} term {j}"
            );
        }
    }
}

#[test]
fn exponential_ph_and_aft_are_the_same_fit() {
    // A constant hazard multiplied by e^β is the time scale divided by e^β: the two forms are
    // one model (AF = 1/HR, the coefficients opposite), so they reach the same maximum
    // (definition of the exponential; no outside value needed). Seeded invented trials.
    let mut rng = NormalStream::new(17);
    for case in 0..10 {
        let n = 30 + 40 * case;
        let log_hr = -0.9 + 0.2 * case as f64;
        let subjects: Vec<Subject> = (0..n)
            .map(|i| {
                let arm = i % 3;
                let dose = 4.0 * uniform(&mut rng);
                let z =
                    log_hr * (arm == 1) as u8 as f64 + 0.3 * (arm == 2) as u8 as f64 - 0.1 * dose;
                let t = -uniform(&mut rng).ln() / (0.1 * f64::exp(z));
                let c = 2.0 + 20.0 * uniform(&mut rng);
                Subject {
                    time: t.min(c),
                    event: t <= c,
                    arm,
                    x: vec![(arm == 1) as u8 as f64, (arm == 2) as u8 as f64, dose],
                }
            })
            .collect();
        let design = Design {
            arms: vec!["A".into(), "B".into(), "C".into()],
            reference: 0,
            terms: vec![
                Term {
                    name: "arm_B".into(),
                    kind: TermKind::Arm("B".into()),
                },
                Term {
                    name: "arm_C".into(),
                    kind: TermKind::Arm("C".into()),
                },
                Term {
                    name: "b_dose".into(),
                    kind: TermKind::Numeric("dose".into()),
                },
            ],
            subjects,
        };
        let ph = fit_with(&JointExponential, Model::Ph, &design).unwrap();
        let aft = fit_with(&JointExponential, Model::Aft, &design).unwrap();
        assert!(ph.converged && aft.converged, "case {case}");
        assert!(
            (ph.loglik - aft.loglik).abs() < 1e-9 * (1.0 + ph.loglik.abs()),
            "case {case}: {} vs {}",
            ph.loglik,
            aft.loglik
        );
        assert!((ph.theta[0] - aft.theta[0]).abs() < 1e-7, "case {case}");
        for j in 1..4 {
            let (hr, af) = (ph.theta[j].exp(), aft.theta[j].exp());
            assert!((af - 1.0 / hr).abs() < 1e-7 * af, "case {case} term {j}");
        }
        // The standard errors of β and γ agree too (same information, sign flipped).
        for j in 1..4 {
            let (a, b) = (ph.covariance[j][j], aft.covariance[j][j]);
            assert!(
                (a - b).abs() < 1e-5 * a,
                "case {case} variance {j}: {a} vs {b}"
            );
        }
    }
}
