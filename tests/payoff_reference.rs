//! Payoffs by time since entry against values computed independently by mpmath from the
//! contract's definitions (`tests/reference/payoff_reference.py`, fixture
//! `payoff_reference.json`): per-tunnel payoffs (quadrature on the exit density itself, where
//! tunnelcast integrates by parts), every within-cycle method's totals, the exact totals and the
//! truncation criterion (the cut chain pushed cycle by cycle). Then closed-form identities, the
//! trade fact about half-cycle correction of front-loaded costs, and the telescoping identity
//! that makes `cycle-integrated` equal to `exact`.

use tunnelcast::adjust::{self, Adjustments, BackgroundMode, BackgroundSettings};
use tunnelcast::curve::{Curve, ParametricCurve};
use tunnelcast::families::{self, Piecewise};
use tunnelcast::payoff::horizon::{exact_totals, PayoffMethod};
use tunnelcast::payoff::{
    horizon_payoffs, tunnel_payoffs, CurveHint, Discount, Exactness, PayoffColumns, PayoffRow,
    PiecewiseHazard, Schedule,
};
use tunnelcast::units::{Duration, TimeUnit};

#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct Reference {
    #[allow(dead_code)]
    generator: String,
    rows: Vec<[String; 5]>,
    cases: Vec<Case>,
}

#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct Case {
    name: String,
    family: String,
    params: Vec<f64>,
    cuts: Vec<f64>,
    time_unit: TimeUnit,
    cycle: String,
    cycles: usize,
    discount: f64,
    tunnels: std::collections::BTreeMap<String, Pair<Vec<f64>>>,
    methods: std::collections::BTreeMap<String, Pair<Totals>>,
    truncation: std::collections::BTreeMap<String, Vec<f64>>,
}

#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct Pair<T> {
    plain: T,
    discounted: T,
}

#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct Totals {
    exact: f64,
    totals: std::collections::BTreeMap<String, f64>,
}

fn reference() -> Reference {
    serde_json::from_str(include_str!("reference/payoff_reference.json")).unwrap()
}

fn schedule_of(rows: &[[String; 5]]) -> Schedule {
    let rows: Vec<PayoffRow> = rows
        .iter()
        .enumerate()
        .map(|(i, f)| PayoffRow {
            line: i as u64 + 2,
            payoff: f[0].clone(),
            kind: f[1].clone(),
            from: f[2].clone(),
            amount: f[3].clone(),
            per: f[4].clone(),
        })
        .collect();
    Schedule::from_rows("payoffs.csv", &PayoffColumns::default(), &rows).unwrap()
}

fn curve_of(case: &Case) -> ParametricCurve {
    let family = if case.family == "piecewise" {
        Piecewise::with_cuts(&case.cuts).unwrap()
    } else {
        families::by_name(&case.family).unwrap()
    };
    ParametricCurve::new(family, case.params.clone(), case.time_unit).unwrap()
}

/// |got - expected| within `relative` of |expected|, or within 1e-12 of `scale` for values that
/// are 0 (a cost of the first month only, in later tunnels).
fn close(got: f64, expected: f64, relative: f64, scale: f64) -> bool {
    (got - expected).abs() <= relative * expected.abs() + 1e-12 * scale
}

#[test]
fn tunnel_payoffs_match_mpmath_by_closed_form_and_by_quadrature() {
    let reference = reference();
    let schedule = schedule_of(&reference.rows);
    let mut worst: f64 = 0.0;
    for case in &reference.cases {
        let curve = curve_of(case);
        let cycle: Duration = case.cycle.parse().unwrap();
        let discount = Discount::annual(case.discount).unwrap();
        let closed = CurveHint::of_parametric(&curve);
        let none = CurveHint::none();
        let hints: Vec<&CurveHint> = if closed.constant_hazard.is_some() {
            vec![&closed, &none]
        } else {
            vec![&closed]
        };
        for hint in hints {
            for (d, label) in [(Discount::NONE, "plain"), (discount, "discounted")] {
                let got = tunnel_payoffs(&curve, hint, &schedule, cycle, case.cycles, d);
                let expected_exactness = if hint.constant_hazard.is_some() {
                    Exactness::ClosedForm
                } else {
                    Exactness::Quadrature
                };
                assert_eq!(got.exactness, expected_exactness, "{}", case.name);
                for (column, values) in got.columns.iter().zip(&got.values) {
                    let name = column.strip_prefix("payoff_").unwrap();
                    let pair = &case.tunnels[name];
                    let expected = if label == "plain" {
                        &pair.plain
                    } else {
                        &pair.discounted
                    };
                    assert_eq!(values.len(), expected.len());
                    let scale = expected.iter().fold(0.0f64, |m, v| m.max(v.abs()));
                    for (k, (g, e)) in values.iter().zip(expected).enumerate() {
                        // mpmath at 30 digits against the promised 1e-10 relative.
                        assert!(
                            close(*g, *e, 1e-10, scale),
                            "{} {label} {name} tunnel {}: {g} vs {e} ({:?})",
                            case.name,
                            k + 1,
                            got.exactness
                        );
                        if *e != 0.0 {
                            worst = worst.max(((g - e) / e).abs());
                        }
                    }
                }
            }
        }
    }
    println!("largest relative difference from mpmath, per-tunnel payoffs: {worst:e}");
}

#[test]
fn horizon_methods_exact_totals_and_truncation_match_mpmath() {
    let reference = reference();
    let schedule = schedule_of(&reference.rows);
    for case in &reference.cases {
        let curve = curve_of(case);
        let cycle: Duration = case.cycle.parse().unwrap();
        let discount = Discount::annual(case.discount).unwrap();
        let result = horizon_payoffs(
            &curve,
            &CurveHint::of_parametric(&curve),
            &schedule,
            cycle,
            case.cycles,
            discount,
        );
        assert_eq!(result.rows.len(), 6 * schedule.payoffs.len());
        for row in &result.rows {
            let expected = &case.methods[&row.payoff];
            let method = row.method.name();
            for (got, want, what) in [
                (row.total, expected.plain.totals[method], "total"),
                (row.exact, expected.plain.exact, "exact"),
                (
                    row.disc_total,
                    expected.discounted.totals[method],
                    "disc_total",
                ),
                (row.disc_exact, expected.discounted.exact, "disc_exact"),
            ] {
                assert!(
                    close(got, want, 1e-10, want.abs()),
                    "{} {} {method} {what}: {got} vs {want}",
                    case.name,
                    row.payoff
                );
            }
            assert_eq!(row.error, row.total - row.exact);
        }
        // Truncation: the mpmath chain cut at K and pushed cycle by cycle. The errors are
        // differences of nearly equal totals, so compared in absolute terms at 1e-12.
        for (column, values) in &result.truncation {
            let name = column.strip_prefix("payoff_rel_error_").unwrap();
            let expected = &case.truncation[name];
            assert_eq!(values.len(), case.cycles);
            for (k, (g, e)) in values.iter().zip(expected).enumerate() {
                assert!(
                    (g - e).abs() <= 1e-9 * e + 1e-12,
                    "{} {name} K={}: {g} vs {e}",
                    case.name,
                    k + 1
                );
            }
            assert_eq!(*values.last().unwrap(), 0.0);
        }
    }
}

#[test]
fn half_cycle_undercounts_a_first_cycle_cost_by_nearly_half_and_trapezoid_does_not() {
    // Common practice (a fact of the trade): the half-cycle correction halves the first
    // cycle's payoff, so a cost concentrated in the first cycle loses nearly half, while the
    // trapezoid rule stays close. The invented `induction` cost is 2,000 for the first month
    // only; with monthly cycles it is concentrated in the first cycle. Checked on the mpmath
    // totals and on ours.
    let reference = reference();
    let schedule = schedule_of(&reference.rows);
    for name in [
        "exponential-monthly",
        "weibull-monthly",
        "piecewise-monthly",
    ] {
        let case = reference.cases.iter().find(|c| c.name == name).unwrap();
        let curve = curve_of(case);
        let cycle: Duration = case.cycle.parse().unwrap();
        let discount = Discount::annual(case.discount).unwrap();
        let ours = horizon_payoffs(
            &curve,
            &CurveHint::none(),
            &schedule,
            cycle,
            case.cycles,
            discount,
        );
        let expected = &case.methods["induction"];
        for (label, totals) in [
            ("plain", &expected.plain),
            ("discounted", &expected.discounted),
        ] {
            let rel = |m: &str| (totals.totals[m] - totals.exact) / totals.exact;
            assert!(
                rel("half-cycle") < -0.45,
                "{name} {label}: {}",
                rel("half-cycle")
            );
            assert!(
                rel("trapezoid").abs() < 0.005,
                "{name} {label}: {}",
                rel("trapezoid")
            );
        }
        let row = |m: PayoffMethod| {
            ours.rows
                .iter()
                .find(|r| r.payoff == "induction" && r.method == m)
                .unwrap()
        };
        let half = row(PayoffMethod::HalfCycle);
        let trapezoid = row(PayoffMethod::Trapezoid);
        let integrated = row(PayoffMethod::CycleIntegrated);
        println!(
            "{name}: induction exact {:.2}; half-cycle {:.2} ({:+.1}%), trapezoid {:.2} ({:+.2}%), cycle-integrated {:.6} ({:+.1e}); discounted half-cycle {:+.1}%, trapezoid {:+.2}%",
            half.exact,
            half.total,
            100.0 * half.rel_error,
            trapezoid.total,
            100.0 * trapezoid.rel_error,
            integrated.total,
            integrated.rel_error,
            100.0 * half.disc_rel_error,
            100.0 * trapezoid.disc_rel_error
        );
        for r in [half, trapezoid] {
            assert!(r.rel_error.is_finite() && r.disc_rel_error.is_finite());
        }
        assert!(half.rel_error < -0.45 && half.disc_rel_error < -0.45);
        assert!(trapezoid.rel_error.abs() < 0.005 && trapezoid.disc_rel_error.abs() < 0.005);
        assert!(integrated.rel_error.abs() < 1e-10 && integrated.disc_rel_error.abs() < 1e-10);
    }
}

/// The fixture's payoffs: `cost` (a rate, an entry and an exit amount), `utility`, `induction`.
fn long_schedule() -> Schedule {
    schedule_of(&reference().rows)
}

#[test]
fn cycle_integrated_equals_exact_over_short_and_long_horizons() {
    // By construction: the per-tunnel payoff of tunnel j+1 is conditional on presence at t_j and
    // discounted from t_j, so m_j·d_j times it is ∫ c(u) S(u) (1+R)^-u du over that cycle
    // unconditionally (S(t_j)·S(u)/S(t_j) = S(u), (1+R)^-t_j·(1+R)^-(u-t_j) = (1+R)^-u), and
    // the cycles tile [0, N·cycle] (exit terms likewise with the density). The sum telescopes to
    // the exact total for any N; only quadrature error can separate them, and `exact` is
    // integrated in one pass over the horizon with its own split, so the check is not circular.
    let schedule = long_schedule();
    let weibull = ParametricCurve::new(
        families::by_name("weibull").unwrap(),
        vec![1.3, 15.0],
        TimeUnit::Months,
    )
    .unwrap();
    let shallow = ParametricCurve::new(
        families::by_name("weibull").unwrap(),
        vec![0.7, 40.0],
        TimeUnit::Months,
    )
    .unwrap();
    let piecewise = ParametricCurve::new(
        Piecewise::with_cuts(&[6.0, 24.0]).unwrap(),
        vec![0.08, 0.03, 0.05],
        TimeUnit::Months,
    )
    .unwrap();
    let month: Duration = "1 month".parse().unwrap();
    for (curve, n) in [
        (&weibull, 3usize),
        (&weibull, 600),
        (&shallow, 1200),
        (&piecewise, 600),
    ] {
        for r in [0.0, 0.035] {
            let result = horizon_payoffs(
                curve,
                &CurveHint::of_parametric(curve),
                &schedule,
                month,
                n,
                Discount::annual(r).unwrap(),
            );
            for row in result
                .rows
                .iter()
                .filter(|r| r.method == PayoffMethod::CycleIntegrated)
            {
                assert!(
                    row.rel_error.abs() < 1e-10 && row.disc_rel_error.abs() < 1e-10,
                    "{curve:?} n={n} r={r} {}: {} {}",
                    row.payoff,
                    row.rel_error,
                    row.disc_rel_error
                );
            }
        }
    }
}

#[test]
fn background_mortality_added_to_a_constant_hazard_uses_the_closed_form_and_quadrature_agrees() {
    // Exponential disease hazard 0.02 a month plus an invented life table with constant qx by
    // year of age from age 60 (hazard -ln(1 - qx) a year within each year of age: interface,
    // "Background life table"), entry at 60.5: the total hazard is piecewise constant with cuts
    // at the birthdays, 6, 18, 30, … months after entry. The hint is written out here from those
    // numbers; the adjusted curve is the library's. Both integration routes must agree.
    let qx = [
        0.01, 0.012, 0.015, 0.02, 0.026, 0.033, 0.04, 0.05, 0.06, 0.07, 0.08,
    ];
    let mut text = String::from("age,qx\n");
    for (i, q) in qx.iter().enumerate() {
        text.push_str(&format!("{},{q}\n", 60 + i));
    }
    let table = adjust::lifetable::parse("life.csv", text.as_bytes(), None).unwrap();
    let base = ParametricCurve::new(
        families::by_name("exponential").unwrap(),
        vec![0.02],
        TimeUnit::Months,
    )
    .unwrap();
    let adjustments = Adjustments {
        background: Some(BackgroundSettings {
            path: "life.csv".into(),
            start_age: 60.5,
            sex: None,
            mode: BackgroundMode::Add,
            beyond: adjust::background::BeyondTable::Error,
        }),
        ..Default::default()
    };
    let curve = adjust::Adjuster::new(adjustments, Some(table))
        .unwrap()
        .adjust(base)
        .unwrap();
    assert_eq!(curve.time_unit(), TimeUnit::Months);
    let cuts: Vec<f64> = (0..qx.len() - 1).map(|i| 6.0 + 12.0 * i as f64).collect();
    let rates: Vec<f64> = std::iter::once(qx[0])
        .chain(qx[1..].iter().copied())
        .map(|q: f64| 0.02 - (-q).ln_1p() / 12.0)
        .collect();
    let hint = CurveHint {
        constant_hazard: Some(PiecewiseHazard::new(cuts.clone(), rates, TimeUnit::Months).unwrap()),
        breakpoints: vec![],
    };
    let quadrature_hint = CurveHint {
        constant_hazard: None,
        breakpoints: cuts,
    };
    let schedule = long_schedule();
    let month: Duration = "1 month".parse().unwrap();
    let d = Discount::annual(0.035).unwrap();
    let closed = tunnel_payoffs(&curve, &hint, &schedule, month, 120, d);
    let quadrature = tunnel_payoffs(&curve, &quadrature_hint, &schedule, month, 120, d);
    let bare = tunnel_payoffs(&curve, &CurveHint::none(), &schedule, month, 120, d);
    assert_eq!(closed.exactness, Exactness::ClosedForm);
    assert_eq!(quadrature.exactness, Exactness::Quadrature);
    for p in 0..schedule.payoffs.len() {
        for k in 0..120 {
            let c = closed.values[p][k];
            for other in [quadrature.values[p][k], bare.values[p][k]] {
                assert!(
                    (other - c).abs() <= 1e-10 * c.abs() + 1e-13,
                    "{} tunnel {}: {other} vs {c}",
                    closed.columns[p],
                    k + 1
                );
            }
        }
    }
    // And the exact totals agree by both routes over the ten years.
    let (a, ea) = exact_totals(&curve, &hint, &schedule, 120.0, d);
    let (b, eb) = exact_totals(&curve, &CurveHint::none(), &schedule, 120.0, d);
    assert_eq!((ea, eb), (Exactness::ClosedForm, Exactness::Quadrature));
    for (x, y) in a.iter().zip(&b) {
        assert!((x - y).abs() <= 1e-10 * x.abs(), "{x} vs {y}");
    }
}
