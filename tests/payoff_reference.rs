//! Payoffs by time since entry against values computed independently by mpmath from the
//! contract's definitions (`tests/reference/payoff_reference.py`, fixture
//! `payoff_reference.json`): per-tunnel payoffs (quadrature on the exit density itself, where
//! tunnelcast integrates by parts), every within-cycle method's totals, the exact totals and the
//! truncation criterion (the cut chain pushed cycle by cycle). Then closed-form identities, the
//! trade fact about half-cycle correction of front-loaded costs, and the telescoping identity
//! that makes `cycle-integrated` equal to `exact`.

use tunnelcast::adjust::{self, Adjustments, BackgroundMode, BackgroundSettings, Waning};
use tunnelcast::curve::{Curve, ParametricCurve};
use tunnelcast::families::{self, Piecewise};
use tunnelcast::payoff::horizon::{exact_totals, PayoffMethod};
use tunnelcast::payoff::{
    horizon_payoffs, tunnel_payoffs, Discount, Exactness, PayoffColumns, PayoffRow, Schedule,
};
use tunnelcast::units::{Duration, TimeUnit};

/// A curve with its closed forms hidden ([`Curve::piecewise_hazard`] left at its default), so
/// the payoffs take the quadrature route on the same survival function.
struct Opaque<'a>(&'a dyn Curve);

impl Curve for Opaque<'_> {
    fn log_survival(&self, t: f64) -> f64 {
        self.0.log_survival(t)
    }
    fn hazard(&self, t: f64) -> f64 {
        self.0.hazard(t)
    }
    fn time_unit(&self) -> TimeUnit {
        self.0.time_unit()
    }
    fn describe(&self) -> String {
        self.0.describe()
    }
}

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
        let opaque = Opaque(&curve);
        let mut routes: Vec<(&dyn Curve, Exactness)> = vec![(&opaque, Exactness::Quadrature)];
        if curve.piecewise_hazard(1.0).is_some() {
            routes.push((&curve, Exactness::ClosedForm));
        }
        for (route, expected_exactness) in routes {
            for (d, label) in [(Discount::NONE, "plain"), (discount, "discounted")] {
                let got = tunnel_payoffs(route, &schedule, cycle, case.cycles, d);
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
        let result = horizon_payoffs(&curve, &schedule, cycle, case.cycles, discount);
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
        let ours = horizon_payoffs(&Opaque(&curve), &schedule, cycle, case.cycles, discount);
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
        // (rel_error, disc_rel_error) of a row; both present, the exact totals not being 0.
        let rel = |m: PayoffMethod| {
            let r = row(m);
            (r.rel_error.unwrap(), r.disc_rel_error.unwrap())
        };
        let (half, disc_half) = rel(PayoffMethod::HalfCycle);
        let (trapezoid, disc_trapezoid) = rel(PayoffMethod::Trapezoid);
        let (integrated, disc_integrated) = rel(PayoffMethod::CycleIntegrated);
        println!(
            "{name}: induction exact {:.2}; half-cycle {:.2} ({:+.1}%), trapezoid {:.2} ({:+.2}%), cycle-integrated {:.6} ({:+.1e}); discounted half-cycle {:+.1}%, trapezoid {:+.2}%",
            row(PayoffMethod::HalfCycle).exact,
            row(PayoffMethod::HalfCycle).total,
            100.0 * half,
            row(PayoffMethod::Trapezoid).total,
            100.0 * trapezoid,
            row(PayoffMethod::CycleIntegrated).total,
            integrated,
            100.0 * disc_half,
            100.0 * disc_trapezoid
        );
        assert!(half < -0.45 && disc_half < -0.45);
        assert!(trapezoid.abs() < 0.005 && disc_trapezoid.abs() < 0.005);
        assert!(integrated.abs() < 1e-10 && disc_integrated.abs() < 1e-10);
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
            let result = horizon_payoffs(curve, &schedule, month, n, Discount::annual(r).unwrap());
            for row in result
                .rows
                .iter()
                .filter(|r| r.method == PayoffMethod::CycleIntegrated)
            {
                let (plain, discounted) = (row.rel_error.unwrap(), row.disc_rel_error.unwrap());
                assert!(
                    plain.abs() < 1e-10 && discounted.abs() < 1e-10,
                    "{curve:?} n={n} r={r} {}: {plain} {discounted}",
                    row.payoff,
                );
            }
        }
    }
}

/// A life table CSV from `first_age` with the given qx, one row per year of age.
fn life_table(first_age: u32, qx: &[f64]) -> adjust::lifetable::LifeTable {
    let mut text = String::from("age,qx\n");
    for (i, q) in qx.iter().enumerate() {
        text.push_str(&format!("{},{q}\n", first_age + i as u32));
    }
    adjust::lifetable::parse("life.csv", text.as_bytes(), None).unwrap()
}

/// Background mortality from `life.csv` at `start_age`, combined by `mode`.
fn background(start_age: f64, mode: BackgroundMode) -> BackgroundSettings {
    BackgroundSettings {
        path: "life.csv".into(),
        start_age,
        sex: None,
        mode,
        beyond: adjust::background::BeyondTable::Error,
    }
}

/// The adjusted curve of `base` (through the one path every command uses).
fn adjusted(
    base: &ParametricCurve,
    adjustments: Adjustments,
    table: Option<adjust::lifetable::LifeTable>,
) -> adjust::AdjustedCurve {
    let table = adjustments.background.as_ref().and(table);
    adjust::Adjuster::new(adjustments, table)
        .unwrap()
        .adjust(base.clone())
        .unwrap()
}

/// Largest relative difference between two sets of per-tunnel payoffs (values below 1e-12 of
/// their column's largest count as 0).
fn largest_difference(a: &[Vec<f64>], b: &[Vec<f64>]) -> f64 {
    let mut worst: f64 = 0.0;
    for (x, y) in a.iter().zip(b) {
        let scale = x.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        for (u, v) in x.iter().zip(y) {
            let difference = (u - v).abs();
            if difference > 1e-12 * scale {
                worst = worst.max(difference / u.abs());
            }
        }
    }
    worst
}

#[test]
fn background_mortality_added_to_a_constant_hazard_uses_the_closed_form_and_quadrature_agrees() {
    // Exponential disease hazard 0.02 a month plus an invented life table with constant qx by
    // year of age from age 60 (hazard -ln(1 - qx) a year within each year of age: interface,
    // "Background life table"), entry at 60.5: the total hazard is piecewise constant with cuts
    // at the birthdays, 6, 18, 30, … months after entry. The pieces are written out here from
    // those numbers and compared with the adjusted curve's; then both integration routes.
    let qx = [
        0.01, 0.012, 0.015, 0.02, 0.026, 0.033, 0.04, 0.05, 0.06, 0.07, 0.08,
    ];
    let base = ParametricCurve::new(
        families::by_name("exponential").unwrap(),
        vec![0.02],
        TimeUnit::Months,
    )
    .unwrap();
    let curve = adjusted(
        &base,
        Adjustments {
            background: Some(background(60.5, BackgroundMode::Add)),
            ..Default::default()
        },
        Some(life_table(60, &qx)),
    );
    let pieces = curve.piecewise_hazard(120.0).unwrap();
    assert_eq!(pieces.unit, TimeUnit::Months);
    let cuts: Vec<f64> = (0..10).map(|i| 6.0 + 12.0 * i as f64).collect();
    assert_eq!(pieces.cuts.len(), cuts.len());
    for (got, want) in pieces.cuts.iter().zip(&cuts) {
        assert!((got - want).abs() < 1e-12, "{got} vs {want}");
    }
    for (got, q) in pieces.rates.iter().zip(qx) {
        let want = 0.02 - (-q).ln_1p() / 12.0;
        assert!((got - want).abs() < 1e-15, "{got} vs {want}");
    }
    let schedule = long_schedule();
    let month: Duration = "1 month".parse().unwrap();
    let d = Discount::annual(0.035).unwrap();
    let closed = tunnel_payoffs(&curve, &schedule, month, 120, d);
    let quadrature = tunnel_payoffs(&Opaque(&curve), &schedule, month, 120, d);
    assert_eq!(closed.exactness, Exactness::ClosedForm);
    assert_eq!(quadrature.exactness, Exactness::Quadrature);
    let worst = largest_difference(&closed.values, &quadrature.values);
    assert!(worst < 1e-10, "{worst}");
    // And the exact totals agree by both routes over the ten years.
    let (a, ea) = exact_totals(&curve, &schedule, 120.0, d);
    let (b, eb) = exact_totals(&Opaque(&curve), &schedule, 120.0, d);
    assert_eq!((ea, eb), (Exactness::ClosedForm, Exactness::Quadrature));
    for (x, y) in a.iter().zip(&b) {
        assert!((x - y).abs() <= 1e-10 * x.abs(), "{x} vs {y}");
    }
}

#[test]
fn adjusted_constant_hazards_give_the_exponential_closed_form_by_both_routes() {
    // A constant total hazard Λ, one person present at the start of a cycle of length Δ, discount
    // δ = ln(1 + R) a unit: the rate c accrues c·(1 - e^(-(Λ+δ)Δ))/(Λ+δ), an exit amount A gives
    // A·Λ·(1 - e^(-(Λ+δ)Δ))/(Λ+δ), an entry amount counts in tunnel 1 (calculus of the
    // exponential, from memory). Λ for each adjustment of an exponential λ with a background of
    // constant qx (μ = -ln(1 - qx) a year: interface, "Background life table"), by the
    // definitions: hazard ratio X·λ; acceleration factor λ/X; add λ + μ; floor max(λ, μ).
    let mu = -(-0.05f64).ln_1p() / 12.0; // a month
    let table = || Some(life_table(60, &[0.05; 31]));
    let schedule = schedule_of(&[
        ["care", "rate", "0", "100", "1 month"].map(String::from),
        ["care", "at_exit", "", "1000", ""].map(String::from),
        ["care", "at_entry", "", "50", ""].map(String::from),
    ]);
    let month: Duration = "1 month".parse().unwrap();
    let discount = Discount::annual(0.035).unwrap();
    let delta = 0.035f64.ln_1p() / 12.0;
    let with = |hazard_ratio, acceleration_factor, mode: Option<BackgroundMode>| Adjustments {
        hazard_ratio,
        acceleration_factor,
        background: mode.map(|m| background(60.5, m)),
        ..Default::default()
    };
    let add = Some(BackgroundMode::Add);
    let floor = Some(BackgroundMode::Floor);
    let cases = [
        (0.03, with(Some(0.7), None, None), 0.7 * 0.03),
        (0.03, with(None, Some(1.6), None), 0.03 / 1.6),
        (0.03, with(None, None, add), 0.03 + mu),
        (0.03, with(None, None, floor), 0.03f64.max(mu)),
        (0.002, with(None, None, floor), 0.002f64.max(mu)),
        (0.03, with(Some(0.5), None, add), 0.5 * 0.03 + mu),
        (
            0.006,
            with(None, Some(2.0), floor),
            (0.006f64 / 2.0).max(mu),
        ),
    ];
    for (lambda, adjustments, total) in cases {
        let base = ParametricCurve::new(
            families::by_name("exponential").unwrap(),
            vec![lambda],
            TimeUnit::Months,
        )
        .unwrap();
        let label = format!("λ {lambda}, {adjustments:?}");
        let curve = adjusted(&base, adjustments, table());
        let stay = -(-(total + delta)).exp_m1() / (total + delta);
        let opaque = Opaque(&curve);
        let routes: [(&dyn Curve, Exactness); 2] = [
            (&curve, Exactness::ClosedForm),
            (&opaque, Exactness::Quadrature),
        ];
        for (route, exactness) in routes {
            let got = tunnel_payoffs(route, &schedule, month, 120, discount);
            assert_eq!(got.exactness, exactness, "{label}");
            for (k, value) in got.values[0].iter().enumerate() {
                let entry = if k == 0 { 50.0 } else { 0.0 };
                let expected = 100.0 * stay + 1000.0 * total * stay + entry;
                assert!(
                    (value - expected).abs() <= 1e-10 * expected,
                    "{label} {exactness:?} tunnel {}: {value} vs {expected}",
                    k + 1
                );
            }
        }
    }
}

#[test]
fn closed_form_and_quadrature_agree_on_adjusted_piecewise_curves() {
    // The same adjusted curves by both routes: closed forms from the adjusted curve's pieces
    // against quadrature of its survival function (which knows nothing of pieces, and is not
    // split at birthdays or cuts). A wrong cut, rate or merge moves the closed form away from
    // the quadrature. Piecewise exponential (cuts 7 and 30 months, not on birthdays), an
    // invented smooth life table, entry at 57.3, twenty years of monthly cycles, and the same in
    // years with quarterly cycles; the contract's payoffs plus a first-month cost.
    let qx: Vec<f64> = (0..46)
        .map(|i| (0.004 * (0.085 * i as f64).exp()).min(0.5))
        .collect();
    let table = || Some(life_table(55, &qx));
    let schedule = long_schedule();
    let monthly = ParametricCurve::new(
        Piecewise::with_cuts(&[7.0, 30.0]).unwrap(),
        vec![0.06, 0.025, 0.04],
        TimeUnit::Months,
    )
    .unwrap();
    let yearly = monthly.in_unit(TimeUnit::Years);
    let month: Duration = "1 month".parse().unwrap();
    let quarter: Duration = "3 months".parse().unwrap();
    let with = |hazard_ratio, acceleration_factor, mode: Option<BackgroundMode>| Adjustments {
        hazard_ratio,
        acceleration_factor,
        background: mode.map(|m| background(57.3, m)),
        ..Default::default()
    };
    let add = Some(BackgroundMode::Add);
    let floor = Some(BackgroundMode::Floor);
    let settings = [
        with(None, None, None),
        with(Some(0.65), None, None),
        with(None, Some(1.4), None),
        with(None, None, add),
        with(None, None, floor),
        with(Some(0.65), None, add),
        with(None, Some(1.4), floor),
        with(Some(0.3), None, floor),
    ];
    let mut worst: f64 = 0.0;
    for (base, cycle, count) in [(&monthly, month, 240), (&yearly, quarter, 80)] {
        for adjustments in &settings {
            let label = format!("{base:?} {adjustments:?}");
            let curve = adjusted(base, adjustments.clone(), table());
            let end = count as f64 * cycle.in_unit(base.unit);
            for r in [0.0, 0.035] {
                let d = Discount::annual(r).unwrap();
                let closed = tunnel_payoffs(&curve, &schedule, cycle, count, d);
                let quadrature = tunnel_payoffs(&Opaque(&curve), &schedule, cycle, count, d);
                assert_eq!(closed.exactness, Exactness::ClosedForm, "{label}");
                assert_eq!(quadrature.exactness, Exactness::Quadrature, "{label}");
                let difference = largest_difference(&closed.values, &quadrature.values);
                assert!(difference < 1e-10, "{label} r={r}: {difference}");
                worst = worst.max(difference);
                let (a, _) = exact_totals(&curve, &schedule, end, d);
                let (b, _) = exact_totals(&Opaque(&curve), &schedule, end, d);
                for (x, y) in a.iter().zip(&b) {
                    assert!((x - y).abs() <= 1e-10 * x.abs(), "{label}: {x} vs {y}");
                    worst = worst.max((x - y).abs() / x.abs());
                }
            }
        }
    }
    println!("largest relative difference, closed form against quadrature: {worst:e}");
    // Waning: the hazard ratio varies continuously, so no pieces and quadrature throughout.
    let waning = adjusted(
        &monthly,
        Adjustments {
            hazard_ratio: Some(0.65),
            waning: Some(Waning {
                start: "1 year".parse().unwrap(),
                end: "3 years".parse().unwrap(),
            }),
            background: Some(background(57.3, BackgroundMode::Add)),
            ..Default::default()
        },
        table(),
    );
    assert!(waning.piecewise_hazard(240.0).is_none());
    let got = tunnel_payoffs(&waning, &schedule, month, 12, Discount::NONE);
    assert_eq!(got.exactness, Exactness::Quadrature);
}
