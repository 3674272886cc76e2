//! Flexible families against values computed outside tunnelcast by the committed script
//! `tests/reference/make_flexible_reference.py` (mpmath, SciPy) on the Stanford heart
//! transplant data (Miller, 1976) as carried by the statsmodels package.

use serde::Deserialize;
use tunnelcast::families::{self, Family};
use tunnelcast::fit::{fit_family, FitData};
use tunnelcast::input::Record;

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct Reference {
    #[allow(dead_code)]
    source: String,
    #[allow(dead_code)]
    data: String,
    generalized_gamma_points: Vec<GeneralizedGammaPoint>,
    fits: Vec<ReferenceFit>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct GeneralizedGammaPoint {
    mu: f64,
    sigma: f64,
    q: f64,
    t: f64,
    log_survival: f64,
    log_density: f64,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct ReferenceFit {
    family: String,
    params: std::collections::BTreeMap<String, f64>,
    loglik: f64,
}

fn reference() -> Reference {
    let text = std::fs::read_to_string("tests/reference/flexible_reference.json").unwrap();
    serde_json::from_str(&text).unwrap()
}

/// The heart transplant data as sorted records (time in days).
fn heart() -> Vec<Record> {
    let text = std::fs::read_to_string("tests/reference/heart_transplant.csv").unwrap();
    let mut records: Vec<Record> = text
        .lines()
        .skip(1)
        .map(|line| {
            let (t, d) = line.split_once(',').unwrap();
            Record {
                time: t.parse().unwrap(),
                event: d == "1",
            }
        })
        .collect();
    records.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
    records
}

#[test]
fn generalized_gamma_matches_mpmath_in_body_and_tails() {
    // mpmath's regularised incomplete gamma at 50 digits (script above); Prentice (1974) form.
    let family = families::by_name("generalized-gamma").unwrap();
    let points = reference().generalized_gamma_points;
    assert!(points.len() >= 80);
    for p in points {
        let params = [p.mu, p.sigma, p.q];
        let ls = family.log_survival(&params, p.t);
        let lf = family.log_density(&params, p.t);
        // Relative on ln S where it is far from 0, and on S itself near S = 1.
        let tol_s = 1e-10 * p.log_survival.abs().max(1e-300);
        assert!(
            (ls - p.log_survival).abs() <= tol_s.max(1e-15),
            "ln S{params:?} at {}: {ls} vs {}",
            p.t,
            p.log_survival
        );
        assert!(
            (lf - p.log_density).abs() <= 1e-10 * p.log_density.abs().max(1.0),
            "ln f{params:?} at {}: {lf} vs {}",
            p.t,
            p.log_density
        );
    }
}

#[test]
fn censored_fits_match_scipy_optimize_on_heart_data() {
    // Maximum likelihood by scipy.optimize on the same full log-likelihood (script above).
    let data = FitData::from_records(&heart());
    for reference in reference().fits {
        let family: &dyn Family = families::by_name(&reference.family).unwrap();
        let fit = fit_family(family, &data, None);
        assert!(fit.converged, "{}: {:?}", reference.family, fit.message);
        let ll = fit.loglik.unwrap();
        assert!(
            (ll - reference.loglik).abs() < 1e-6,
            "{}: loglik {ll} vs {}",
            reference.family,
            reference.loglik
        );
        for (name, value) in &reference.params {
            let got = fit.params[name];
            assert!(
                (got - value).abs() < 1e-3 * value.abs().max(0.1),
                "{} {name}: {got} vs {value}",
                reference.family
            );
        }
    }
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct SplineReference {
    #[allow(dead_code)]
    source: String,
    #[allow(dead_code)]
    data: String,
    rule_knots: std::collections::BTreeMap<String, Vec<f64>>,
    fits: Vec<SplineFit>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct SplineFit {
    family: String,
    knot_choice: String,
    knots: Vec<f64>,
    params: std::collections::BTreeMap<String, f64>,
    loglik: f64,
    gradient_max: f64,
}

fn spline_reference() -> SplineReference {
    let text = std::fs::read_to_string("tests/reference/spline_reference.json").unwrap();
    serde_json::from_str(&text).unwrap()
}

/// GBSG2 (Schumacher et al., 1994; Rdatasets collection) as sorted records, days.
fn gbsg2() -> Vec<Record> {
    let text = std::fs::read_to_string("tests/reference/gbsg2.csv").unwrap();
    let mut records: Vec<Record> = text
        .lines()
        .skip(1)
        .map(|line| {
            let mut fields = line.split(',');
            let t = fields.next().unwrap().parse().unwrap();
            let d = fields.next().unwrap() == "1";
            Record { time: t, event: d }
        })
        .collect();
    records.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
    records
}

#[test]
fn spline_fits_with_internal_knots_match_scipy_on_gbsg2() {
    // Royston and Parmar (2002), section 2: basis, scales and full log-likelihood written out
    // in numpy and maximised by scipy.optimize (make_spline_reference.py), at the same knots.
    // Both use the raw basis coefficients, so parameters are compared directly.
    let data = FitData::from_records(&gbsg2());
    let reference = spline_reference();
    assert_eq!(reference.fits.len(), 18);
    for r in &reference.fits {
        assert!(
            r.gradient_max < 1e-8,
            "{}: reference not at an optimum",
            r.family
        );
        let settings = families::FamilySettings {
            scale: Some(r.family.split('-').nth(1).unwrap().to_string()),
            knots: Some(r.knots.clone()),
            cuts: None,
        };
        let family = families::configured(&r.family, Some(&settings)).unwrap();
        let fit = fit_family(family, &data, None);
        let what = format!("{} ({} knots)", r.family, r.knot_choice);
        assert!(fit.converged, "{what}: {:?}", fit.message);
        let ll = fit.loglik.unwrap();
        assert!(
            (ll - r.loglik).abs() < 1e-6,
            "{what}: loglik {ll} vs {}",
            r.loglik
        );
        assert_eq!(fit.params.len(), r.params.len(), "{what}");
        for (name, value) in &r.params {
            let got = fit.params[name];
            assert!(
                (got - value).abs() < 1e-4 * value.abs(),
                "{what} {name}: {got} vs {value}"
            );
        }
    }
}

#[test]
fn default_spline_knots_follow_the_documented_centile_rule() {
    // The rule (docs/families.md): boundary knots at the extreme event times, internal knots at
    // centiles j/(K+1) of the event log times by linear interpolation (numpy.quantile's
    // default), computed independently by make_spline_reference.py.
    let data = FitData::from_records(&gbsg2());
    for (k, expected) in spline_reference().rule_knots {
        let name = format!("spline-ph-{k}");
        let family = families::by_name(&name)
            .unwrap()
            .for_data(&data)
            .unwrap()
            .unwrap();
        let knots = family.settings().unwrap().knots.unwrap();
        assert_eq!(knots.len(), expected.len(), "{name}");
        for (a, b) in knots.iter().zip(&expected) {
            assert!(
                (a - b).abs() < 1e-9 * b,
                "{name}: knots {knots:?} vs {expected:?}"
            );
        }
    }
}
