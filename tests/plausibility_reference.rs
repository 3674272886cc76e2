//! The plausibility numbers against outside sources:
//! - survival at landmarks and restricted means of every standard family against SciPy
//!   (`tests/reference/plausibility_scipy_reference.py`: the contract's S(t) integrated by
//!   scipy.integrate.quad; fixture `plausibility_scipy_reference.json`), to 1e-8;
//! - the Weibull restricted mean against its closed form scale·Γ(1+1/k)·P(1/k, (τ/scale)^k)
//!   (substitute u = (t/scale)^k in ∫₀^τ exp(−(t/scale)^k) dt; P the regularised lower
//!   incomplete gamma, here statrs' `gamma_lr`), to 1e-10;
//! - general-population survival from an invented life table and the first time a fit's hazard
//!   is below the population's, against the same script's life-table computation;
//! - the delta-method interval of S(t) from `fit` against a simulation from the fit's own
//!   covariance (multivariate normal by Cholesky, written here): the share of simulated S(t)
//!   inside the delta interval is 95% within 2 percentage points at 5 landmarks.

mod shell;
use shell::tunnelcast;
use std::collections::BTreeMap;
use tunnelcast::adjust::background::{BackgroundHazard, BeyondTable};
use tunnelcast::adjust::lifetable;
use tunnelcast::families::{self, Family};
use tunnelcast::plausibility::population::{below_population_from, population_survival};
use tunnelcast::units::TimeUnit;

#[derive(serde::Deserialize)]
struct Reference {
    cases: Vec<Case>,
    population: Population,
}

#[derive(serde::Deserialize)]
struct Case {
    family: String,
    params: BTreeMap<String, f64>,
    landmarks: Vec<[f64; 2]>,
    restricted_means: Vec<[f64; 2]>,
    #[serde(default)]
    weibull_closed_form: Vec<[f64; 2]>,
}

#[derive(serde::Deserialize)]
struct Population {
    table_csv: String,
    start_age: f64,
    survival: Vec<[f64; 2]>,
    cases: Vec<PopulationCase>,
}

#[derive(serde::Deserialize)]
struct PopulationCase {
    family: String,
    params: BTreeMap<String, f64>,
    from_years: f64,
    horizon_years: f64,
    below_population_from_years: Option<f64>,
}

fn reference() -> Reference {
    serde_json::from_str(include_str!("reference/plausibility_scipy_reference.json")).unwrap()
}

/// The family and its parameters in the family's own order.
fn curve(name: &str, params: &BTreeMap<String, f64>) -> (&'static dyn Family, Vec<f64>) {
    let family = families::by_name(name).unwrap();
    let p = family
        .param_names()
        .iter()
        .map(|n| params[*n])
        .collect::<Vec<_>>();
    (family, p)
}

#[test]
fn landmarks_and_restricted_means_match_scipy_quadrature() {
    let r = reference();
    let mut checked = std::collections::BTreeSet::new();
    for case in &r.cases {
        let (family, p) = curve(&case.family, &case.params);
        for [t, s] in &case.landmarks {
            let got = family.survival(&p, *t);
            assert!(
                (got - s).abs() <= 1e-8 * s.max(1e-3),
                "{} {:?} S({t}) = {got}, SciPy {s}",
                case.family,
                case.params
            );
        }
        for [tau, mean] in &case.restricted_means {
            let got = family.restricted_mean(&p, *tau);
            assert!(
                (got - mean).abs() <= 1e-8 * mean.max(1.0),
                "{} {:?} RMST({tau}) = {got}, SciPy {mean}",
                case.family,
                case.params
            );
        }
        checked.insert(case.family.clone());
    }
    for name in [
        "exponential",
        "weibull",
        "gompertz",
        "lognormal",
        "loglogistic",
        "generalized-gamma",
    ] {
        assert!(checked.contains(name), "{name} has no reference case");
    }
}

#[test]
fn weibull_restricted_mean_matches_the_incomplete_gamma_closed_form() {
    let r = reference();
    let mut n = 0;
    for case in r.cases.iter().filter(|c| c.family == "weibull") {
        let (family, p) = curve("weibull", &case.params);
        let (k, scale) = (case.params["shape"], case.params["scale"]);
        for [tau, scipy_closed] in &case.weibull_closed_form {
            // scale·Γ(1+1/k)·P(1/k, (τ/scale)^k), computed here with statrs.
            let closed = scale
                * statrs::function::gamma::gamma(1.0 + 1.0 / k)
                * statrs::function::gamma::gamma_lr(1.0 / k, (tau / scale).powf(k));
            assert!((closed - scipy_closed).abs() <= 1e-10 * closed.max(1.0));
            let got = family.restricted_mean(&p, *tau);
            assert!(
                (got - closed).abs() <= 1e-10 * closed.max(1.0),
                "RMST({tau}) = {got}, closed form {closed}"
            );
            n += 1;
        }
    }
    assert!(n >= 8, "{n} Weibull cases");
}

#[test]
fn population_survival_and_crossing_match_the_life_table_computation() {
    let r = reference().population;
    let table = lifetable::parse("invented.csv", r.table_csv.as_bytes(), None).unwrap();
    let population =
        BackgroundHazard::new(table, r.start_age, BeyondTable::HoldLast, TimeUnit::Years).unwrap();
    for [years, s] in &r.survival {
        let got = population_survival(&population, *years);
        assert!(
            (got - s).abs() <= 1e-12,
            "S_pop({years}) = {got}, script {s}"
        );
    }
    let mut crossings = 0;
    for case in &r.cases {
        let (family, p) = curve(&case.family, &case.params);
        let got = below_population_from(
            |t| family.hazard(&p, t),
            &population,
            case.from_years,
            case.horizon_years,
        );
        match (got, case.below_population_from_years) {
            (Some(g), Some(e)) => {
                assert!(
                    (g - e).abs() <= 1e-9,
                    "{} {:?}: {g} vs {e}",
                    case.family,
                    case.params
                );
                crossings += 1;
            }
            (None, None) => {}
            other => panic!("{} {:?}: {other:?}", case.family, case.params),
        }
    }
    assert!(crossings >= 4, "{crossings} crossings checked");
}

/// SplitMix64 (Steele, Lea and Flood, 2014): the test's own uniform stream.
struct SplitMix(u64);

impl SplitMix {
    fn uniform(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        ((z >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    /// Standard normal by Box–Muller (Box and Muller, 1958).
    fn normal(&mut self) -> f64 {
        let (u1, u2) = (self.uniform(), self.uniform());
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
}

/// Lower Cholesky factor of a symmetric positive definite matrix (Cholesky–Banachiewicz).
fn cholesky(a: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let n = a.len();
    let mut l = vec![vec![0.0; n]; n];
    for i in 0..n {
        for j in 0..=i {
            let sum: f64 = (0..j).map(|k| l[i][k] * l[j][k]).sum();
            if i == j {
                l[i][j] = (a[i][i] - sum).sqrt();
            } else {
                l[i][j] = (a[i][j] - sum) / l[j][j];
            }
        }
    }
    l
}

#[test]
fn delta_intervals_cover_the_simulated_spread_of_survival() {
    // An invented trial: 400 patients, Weibull event times (shape 1.3, scale 20 months),
    // uniform censoring over 0–36 months, from the test's own seeded stream.
    let mut rng = SplitMix(20261204);
    let mut csv = String::from("time,event\n");
    for _ in 0..400 {
        let t = 20.0 * (-rng.uniform().ln()).powf(1.0 / 1.3);
        let c = 36.0 * rng.uniform();
        csv.push_str(&format!("{:.6},{}\n", t.min(c), u8::from(t <= c)));
    }
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("trial.csv"), csv).unwrap();
    tunnelcast(dir.path())
        .args([
            "fit",
            "trial.csv",
            "--time-unit",
            "months",
            "--families",
            "weibull,lognormal,loglogistic",
            "--landmarks",
            "6 months,1 year,2 years,3 years,5 years",
            "--json",
            "fit.json",
        ])
        .assert()
        .success();
    let json: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("fit.json")).unwrap()).unwrap();
    for fit in json["fits"].as_array().unwrap() {
        let family = fit["family"].as_str().unwrap();
        let names: Vec<String> = fit["covariance"]["names"]
            .as_array()
            .unwrap()
            .iter()
            .map(|n| n.as_str().unwrap().to_string())
            .collect();
        let matrix: Vec<Vec<f64>> = fit["covariance"]["matrix"]
            .as_array()
            .unwrap()
            .iter()
            .map(|row| {
                row.as_array()
                    .unwrap()
                    .iter()
                    .map(|x| x.as_f64().unwrap())
                    .collect()
            })
            .collect();
        // The estimates on the estimation scale: logs of the positive parameters.
        let centre: Vec<f64> = names
            .iter()
            .map(|n| match n.strip_prefix("ln_") {
                Some(p) => fit["params"][p].as_f64().unwrap().ln(),
                None => fit["params"][n.as_str()].as_f64().unwrap(),
            })
            .collect();
        let natural = |theta: &[f64]| -> BTreeMap<String, f64> {
            names
                .iter()
                .zip(theta)
                .map(|(n, x)| match n.strip_prefix("ln_") {
                    Some(p) => (p.to_string(), x.exp()),
                    None => (n.clone(), *x),
                })
                .collect()
        };
        // S(t) from the contract's table, t in months; the normal tail by statrs' erfc.
        let survival = |p: &BTreeMap<String, f64>, t: f64| match family {
            "weibull" => (-(t / p["scale"]).powf(p["shape"])).exp(),
            "loglogistic" => 1.0 / (1.0 + (t / p["scale"]).powf(p["shape"])),
            "lognormal" => {
                let z = (t.ln() - p["mu"]) / p["sigma"];
                0.5 * statrs::function::erf::erfc(z / std::f64::consts::SQRT_2)
            }
            other => panic!("{other}"),
        };
        let l = cholesky(&matrix);
        let draws = 40_000;
        let landmarks = fit["landmarks"].as_array().unwrap();
        assert_eq!(landmarks.len(), 5);
        let mut inside = vec![0usize; landmarks.len()];
        for _ in 0..draws {
            let z: Vec<f64> = (0..centre.len()).map(|_| rng.normal()).collect();
            let theta: Vec<f64> = (0..centre.len())
                .map(|i| centre[i] + (0..=i).map(|k| l[i][k] * z[k]).sum::<f64>())
                .collect();
            let p = natural(&theta);
            for (j, lm) in landmarks.iter().enumerate() {
                let s = survival(&p, lm["time_years"].as_f64().unwrap() * 12.0);
                let (lo, hi) = (lm["lower"].as_f64().unwrap(), lm["upper"].as_f64().unwrap());
                if lo <= s && s <= hi {
                    inside[j] += 1;
                }
            }
        }
        for (j, lm) in landmarks.iter().enumerate() {
            let coverage = inside[j] as f64 / draws as f64;
            eprintln!("{family} {} y: coverage {coverage:.4}", lm["time_years"]);
            assert!(
                (coverage - 0.95).abs() <= 0.02,
                "{family} at {} years: {coverage} of simulated S(t) inside the delta interval",
                lm["time_years"]
            );
        }
    }
}
