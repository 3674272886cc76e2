//! The adjustment integrals against SciPy: waning hazard ratios and a floored hazard whose
//! cumulative hazards were computed by `scipy.integrate.quad` on the hazard itself (not by the
//! integration by parts or the crossing search tunnelcast uses); values and generator in
//! `tests/reference/` (`adjust.json`, `adjust_reference.py`).

use tunnelcast::adjust::{self, Adjustments, BackgroundMode, BackgroundSettings, Waning};
use tunnelcast::curve::{Curve, ParametricCurve};
use tunnelcast::families;
use tunnelcast::units::{Duration, TimeUnit};

#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct Reference {
    #[allow(dead_code)]
    generator: String,
    cases: Vec<Case>,
}

#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct Case {
    name: String,
    kind: String,
    family: String,
    params: Vec<f64>,
    ratio: Option<f64>,
    start: Option<f64>,
    end: Option<f64>,
    start_age: Option<f64>,
    qx: Option<f64>,
    times: Vec<f64>,
    cumulative_hazard: Vec<f64>,
    crossings: Option<Vec<f64>>,
    quarter_year_p_exit_rise: Option<Vec<f64>>,
}

fn months(value: f64) -> Duration {
    Duration {
        value,
        unit: TimeUnit::Months,
    }
}

#[test]
fn waning_and_floor_match_scipy_quadrature() {
    let text = include_str!("reference/adjust.json");
    let reference: Reference = serde_json::from_str(text).unwrap();
    assert_eq!(reference.cases.len(), 3);
    let dir = tempfile::tempdir().unwrap();
    for case in &reference.cases {
        let family = families::by_name(&case.family).unwrap();
        let (unit, adjustments) = match case.kind.as_str() {
            "waning" => (
                TimeUnit::Months,
                Adjustments {
                    hazard_ratio: case.ratio,
                    waning: Some(Waning {
                        start: months(case.start.unwrap()),
                        end: months(case.end.unwrap()),
                    }),
                    ..Default::default()
                },
            ),
            "floor" => {
                // A constant background qx over twenty years of age from the start age.
                let first = case.start_age.unwrap() as u32;
                let mut table = String::from("age,qx\n");
                for age in first..first + 21 {
                    table.push_str(&format!("{age},{}\n", case.qx.unwrap()));
                }
                let path = dir.path().join("constant.csv");
                std::fs::write(&path, table).unwrap();
                (
                    TimeUnit::Years,
                    Adjustments {
                        background: Some(BackgroundSettings {
                            path,
                            start_age: case.start_age.unwrap(),
                            sex: None,
                            mode: BackgroundMode::Floor,
                            beyond: adjust::background::BeyondTable::Error,
                        }),
                        ..Default::default()
                    },
                )
            }
            other => panic!("unknown kind {other}"),
        };
        let base = ParametricCurve::new(family, case.params.clone(), unit).unwrap();
        let adjusted = adjust::Adjuster::load(adjustments)
            .unwrap()
            .adjust(base)
            .unwrap();
        for (t, expected) in case.times.iter().zip(&case.cumulative_hazard) {
            // SciPy quad asked for 1e-14 absolute / 1e-13 relative; 1e-12 leaves room for both sides.
            let got = -adjusted.log_survival(*t);
            assert!(
                (got - expected).abs() < 1e-12,
                "{}: t {t}: {got} vs {expected}",
                case.name
            );
        }
        if let (Some(crossings), Some(rises)) = (&case.crossings, &case.quarter_year_p_exit_rise) {
            // The hazard starts at 0, rises through the background at the first brentq crossing
            // and falls back below it at the second. With quarter-year cycles the floor binds
            // in the tunnels up to the first crossing and from the second on, but in the
            // tunnel of the second crossing only for a sliver: SciPy's p_exit rises there by
            // less than the 0.1% materiality threshold, so that tunnel is not listed.
            assert_eq!(crossings.len(), 2);
            let cycle = 0.25;
            let material: Vec<usize> = (1..=80)
                .filter(|k| rises[k - 1] >= adjust::FLOOR_MATERIAL)
                .collect();
            let last_early = (crossings[0] / cycle).ceil() as usize;
            let crossing_tunnel = (crossings[1] / cycle).floor() as usize + 1;
            assert!(rises[crossing_tunnel - 1] < adjust::FLOOR_MATERIAL);
            assert_eq!(
                material,
                (1..=last_early)
                    .chain(crossing_tunnel + 1..=80)
                    .collect::<Vec<_>>()
            );
            let rows = adjusted.floor_report(cycle, 80);
            let value = |key: &str| {
                rows.iter()
                    .find(|(k, _)| k == key)
                    .unwrap_or_else(|| panic!("{key} missing: {rows:?}"))
                    .1
                    .clone()
            };
            assert_eq!(
                value("floor_binds_in_tunnels"),
                format!("1\u{2013}{last_early}, {}\u{2013}80", crossing_tunnel + 1),
                "{rows:?}"
            );
            // The largest rise, in percent at 3 significant digits, and where.
            let (k, largest) = rises
                .iter()
                .enumerate()
                .max_by(|a, b| a.1.total_cmp(b.1))
                .unwrap();
            let largest_text = value("floor_largest_change");
            let (lead, rest) = largest_text.split_once("% in tunnel ").unwrap();
            let shown: f64 = lead.trim_start_matches('+').parse().unwrap();
            assert!(
                (shown - 100.0 * largest).abs() <= 0.005 * 100.0 * largest,
                "{rows:?}"
            );
            assert!(rest.starts_with(&format!("{} ", k + 1)), "{rows:?}");
            let age: f64 = value("floor_first_binds_at_age").parse().unwrap();
            assert!((age - case.start_age.unwrap()).abs() < 1e-9, "{rows:?}");
        }
    }
}
