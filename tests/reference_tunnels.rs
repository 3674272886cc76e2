//! Tunnel tables and horizon integrals checked against SciPy reference values
//! (`tests/reference/tunnels_reference.json`, made by `scripts/reference_tunnels.py`).

use serde::Deserialize;
use std::collections::BTreeMap;
use tunnelcast::curve::{Curve, ParametricCurve};
use tunnelcast::discretise::tunnel_table;
use tunnelcast::families;
use tunnelcast::horizon::within_cycle_table;
use tunnelcast::units::{Duration, TimeUnit};

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct Reference {
    #[allow(dead_code)]
    generator: String,
    tunnels: Vec<TunnelCase>,
    weibull_restricted_mean: Vec<RestrictedCase>,
    discounted_life_months: Vec<DiscountedCase>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct TunnelCase {
    family: String,
    params: BTreeMap<String, f64>,
    cycle: f64,
    p_exit: Vec<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RestrictedCase {
    shape: f64,
    scale: f64,
    horizon: f64,
    closed_form: f64,
    quadrature: f64,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct DiscountedCase {
    family: String,
    params: BTreeMap<String, f64>,
    horizon_months: f64,
    discount: f64,
    exact: f64,
}

fn reference() -> Reference {
    let text = include_str!("reference/tunnels_reference.json");
    serde_json::from_str(text).unwrap()
}

fn curve(family: &str, params: &BTreeMap<String, f64>) -> ParametricCurve {
    let family = families::by_name(family).unwrap();
    let values = family.param_names().iter().map(|n| params[*n]).collect();
    ParametricCurve::new(family, values, TimeUnit::Months).unwrap()
}

#[test]
fn tunnel_probabilities_match_scipy_survival_functions() {
    // SciPy 1.17 scipy.stats logsf (lognorm, fisk, gompertz, weibull_min); relative 1e-9, as
    // SciPy's own log-survival functions are accurate to about that in these ranges.
    for case in reference().tunnels {
        let c = curve(&case.family, &case.params);
        let cycle = Duration {
            value: case.cycle,
            unit: TimeUnit::Months,
        };
        let table = tunnel_table(&c, cycle, case.p_exit.len());
        for (row, expected) in table.rows.iter().zip(&case.p_exit) {
            assert!(
                (row.p_exit - expected).abs() <= 1e-9 * expected.abs() + 1e-15,
                "{} tunnel {}: {} vs SciPy {expected}",
                case.family,
                row.tunnel,
                row.p_exit
            );
        }
    }
}

#[test]
fn weibull_restricted_mean_matches_incomplete_gamma_and_quadrature() {
    // SciPy special.gammainc (regularised lower incomplete gamma) and integrate.quad.
    for case in reference().weibull_restricted_mean {
        let c = ParametricCurve::new(
            &families::Weibull,
            vec![case.shape, case.scale],
            TimeUnit::Months,
        )
        .unwrap();
        let got = c.restricted_mean(case.horizon);
        assert!(
            (got - case.closed_form).abs() < 1e-10 * case.closed_form,
            "{got} vs {}",
            case.closed_form
        );
        assert!((got - case.quadrature).abs() < 1e-10 * case.quadrature);
    }
}

#[test]
fn discounted_exact_integral_matches_scipy_quadrature() {
    // SciPy integrate.quad of S(t)·(1 + r)^(-t/12) over months.
    for case in reference().discounted_life_months {
        let c = curve(&case.family, &case.params);
        let cycle = Duration {
            value: 1.0,
            unit: TimeUnit::Months,
        };
        let rows = within_cycle_table(&c, cycle, case.horizon_months as usize, case.discount);
        // SciPy gives life-months; the table is in years (a month is a twelfth of a year,
        // interface).
        let got = rows[0].discounted_exact;
        let expected = case.exact / 12.0;
        assert!(
            (got - expected).abs() < 1e-9 * expected,
            "{}: {got} vs {expected} years",
            case.family
        );
    }
}
