//! Property tests (proptest) of the payoff methods: for a constant payoff without discounting,
//! the half-cycle correction and the trapezoid rule are the same sum (common practice:
//! Σ c·m_j with both ends halved is Σ c·(m_j + m_{j+1})/2), on every curve; when the payoff
//! steps at a cycle boundary they differ (the half-cycle rule charges the new rate for the half
//! cycle before the change), by exactly (c_new - c_old)·m_k·h/2 at a change at boundary k.

use proptest::prelude::*;
use tunnelcast::curve::{Curve, ParametricCurve};
use tunnelcast::families;
use tunnelcast::payoff::horizon::PayoffMethod;
use tunnelcast::payoff::{horizon_payoffs, Discount, PayoffColumns, PayoffRow, Schedule};
use tunnelcast::units::{Duration, TimeUnit};

/// Every parametric family with parameters in a range that keeps survival visible over the
/// horizon (times in months).
fn curves() -> impl Strategy<Value = (&'static str, Vec<f64>)> {
    prop_oneof![
        (0.005f64..0.3).prop_map(|r| ("exponential", vec![r])),
        (0.3f64..4.0, 2.0f64..80.0).prop_map(|(k, s)| ("weibull", vec![k, s])),
        (0.5f64..4.5, 0.2f64..2.5).prop_map(|(m, s)| ("lognormal", vec![m, s])),
        (0.3f64..5.0, 2.0f64..80.0).prop_map(|(k, s)| ("loglogistic", vec![k, s])),
        (-0.2f64..0.2, 0.002f64..0.2).prop_map(|(g, r)| ("gompertz", vec![g, r])),
        (0.5f64..4.5, 0.2f64..2.0, -1.5f64..1.5)
            .prop_map(|(m, s, q)| ("generalized-gamma", vec![m, s, q])),
    ]
}

fn schedule(rows: &[[&str; 5]]) -> Schedule {
    let rows: Vec<PayoffRow> = rows
        .iter()
        .enumerate()
        .map(|(i, r)| PayoffRow {
            line: i as u64 + 2,
            payoff: r[0].into(),
            kind: r[1].into(),
            from: r[2].into(),
            amount: r[3].into(),
            per: r[4].into(),
        })
        .collect();
    Schedule::from_rows("p.csv", &PayoffColumns::default(), &rows).unwrap()
}

fn total(rows: &[tunnelcast::payoff::PayoffMethodRow], method: PayoffMethod) -> f64 {
    rows.iter().find(|r| r.method == method).unwrap().total
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(96))]

    #[test]
    fn half_cycle_equals_trapezoid_for_a_constant_payoff_without_discounting(
        (name, params) in curves(),
        amount in 0.01f64..5000.0,
        n in 1usize..60,
    ) {
        let family = families::by_name(name).unwrap();
        let curve = ParametricCurve::new(family, params, TimeUnit::Months).unwrap();
        let text = amount.to_string();
        let s = schedule(&[["c", "rate", "0", &text, "1 month"]]);
        let cycle = Duration { value: 1.0, unit: TimeUnit::Months };
        let h = horizon_payoffs(&curve, &s, cycle, n, Discount::NONE);
        let (half, trap) = (total(&h.rows, PayoffMethod::HalfCycle), total(&h.rows, PayoffMethod::Trapezoid));
        prop_assert!((half - trap).abs() <= 1e-12 * trap.abs().max(1e-300), "{name}: {half} against {trap}");
    }

    #[test]
    fn half_cycle_and_trapezoid_differ_when_the_payoff_steps(
        (name, params) in curves(),
        k in 1usize..12,
        extra in 1usize..24,
    ) {
        let family = families::by_name(name).unwrap();
        let curve = ParametricCurve::new(family, params, TimeUnit::Months).unwrap();
        let n = k + extra;
        let from = format!("{k} months");
        let s = schedule(&[
            ["c", "rate", "0", "900", "1 month"],
            ["c", "rate", &from, "100", "1 month"],
        ]);
        let cycle = Duration { value: 1.0, unit: TimeUnit::Months };
        let h = horizon_payoffs(&curve, &s, cycle, n, Discount::NONE);
        let (half, trap) = (total(&h.rows, PayoffMethod::HalfCycle), total(&h.rows, PayoffMethod::Trapezoid));
        let m_k = curve.log_survival(k as f64).exp();
        // Half-cycle charges 100 instead of 900 for the half cycle before boundary k.
        let expected = (100.0 - 900.0) * m_k * 0.5;
        prop_assert!(
            (half - trap - expected).abs() <= 1e-9 * (trap.abs() + expected.abs()),
            "{name}: half {half}, trapezoid {trap}, expected difference {expected}"
        );
        prop_assume!(m_k > 1e-6);
        prop_assert!((half - trap).abs() > 1e-9 * trap.abs());
    }
}
