//! Discretising a survival curve into the per-cycle conditional probabilities of a chain of
//! tunnel states.
//!
//! Tunnel k covers [(k-1)·cycle, k·cycle) since entry; `p_exit` = 1 - S(t_end)/S(t_start),
//! computed as -expm1(ln S(t_end) - ln S(t_start)) so that tiny probabilities keep their
//! precision. Probabilities are indexed by whole cycles since entry, with no half-cycle offset:
//! a person entering a tunnel has just entered it. Within-cycle corrections belong to
//! accumulating outcomes (life-years, costs), never to transition probabilities.

use crate::curve::Curve;
use crate::units::{Duration, TimeUnit};

/// One tunnel state's row of the long layout.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TunnelRow {
    /// 1-based tunnel number (cycles since entry, counting the current one).
    pub tunnel: usize,
    /// Start of the tunnel's cycle since entry (table's time unit).
    pub t_start: f64,
    /// End of the tunnel's cycle since entry (table's time unit).
    pub t_end: f64,
    /// S(t_start).
    pub surv_start: f64,
    /// S(t_end).
    pub surv_end: f64,
    /// Probability of leaving during the cycle given presence at its start.
    pub p_exit: f64,
    /// 1 - `p_exit`: probability of moving on to the next tunnel (the last one repeats itself).
    pub p_next: f64,
}

/// A tunnel table: the long layout plus any extra per-tunnel columns (e.g. exit by cause).
#[derive(Debug, Clone, PartialEq)]
pub struct TunnelTable {
    /// Unit of `t_start`, `t_end` and `cycle` (the cycle's own unit).
    pub time_unit: TimeUnit,
    /// Cycle length in `time_unit`.
    pub cycle: f64,
    /// One row per tunnel state; the last state repeats its own probability for every later cycle.
    pub rows: Vec<TunnelRow>,
    /// Extra columns after `p_next`, by name, one value per row.
    pub extra: Vec<(String, Vec<f64>)>,
    /// Description of the curve the table was computed from.
    pub curve: String,
}

/// Conditional exit probability over [t0, t1) from log-survival values: -expm1(Δ ln S);
/// 1 once survival has reached 0 (the state is then left with certainty, never NaN).
pub fn exit_probability(log_s0: f64, log_s1: f64) -> f64 {
    if log_s0 == f64::NEG_INFINITY || log_s1 == f64::NEG_INFINITY {
        return 1.0;
    }
    (-(log_s1 - log_s0).exp_m1()).clamp(0.0, 1.0)
}

/// exp(log_s), with 0 straight away where the result is below the smallest double: the
/// library's underflow path is slow, and long tables of short-lived curves hit it every row.
fn survival_from_log(log_s: f64) -> f64 {
    if log_s < -746.0 {
        0.0
    } else {
        log_s.exp()
    }
}

/// Computes `count` tunnel states of length `cycle` from `curve`.
pub fn tunnel_table(curve: &dyn Curve, cycle: Duration, count: usize) -> TunnelTable {
    let unit = cycle.unit;
    let to_curve = unit.factor_to(curve.time_unit());
    let mut rows = Vec::with_capacity(count);
    let mut by_cause: Vec<(String, Vec<f64>)> = Vec::new();
    let mut log_s0 = curve.log_survival(0.0);
    let mut surv_start = survival_from_log(log_s0);
    for k in 1..=count {
        let t_start = (k - 1) as f64 * cycle.value;
        let t_end = k as f64 * cycle.value;
        let log_s1 = curve.log_survival(t_end * to_curve);
        let p_exit = exit_probability(log_s0, log_s1);
        let surv_end = survival_from_log(log_s1);
        rows.push(TunnelRow {
            tunnel: k,
            t_start,
            t_end,
            surv_start,
            surv_end,
            p_exit,
            p_next: 1.0 - p_exit,
        });
        let (c0, c1) = (t_start * to_curve, t_end * to_curve);
        let causes = curve.exit_by_cause(c0, c1).unwrap_or_default();
        let named = causes
            .into_iter()
            .map(|(name, p)| (format!("p_exit_{name}"), p))
            .chain(
                curve
                    .cycle_columns(c0, c1)
                    .into_iter()
                    .map(|(name, v)| (name.to_string(), v)),
            );
        for (column, value) in named {
            match by_cause.iter_mut().find(|(n, _)| *n == column) {
                Some((_, values)) => values.push(value),
                None => by_cause.push((column, vec![value])),
            }
        }
        log_s0 = log_s1;
        surv_start = surv_end;
    }
    TunnelTable {
        time_unit: unit,
        cycle: cycle.value,
        rows,
        extra: by_cause,
        curve: curve.describe(),
    }
}

/// Largest number of tunnel states a table may have (a guard against a mistyped `--count`
/// or a cycle far shorter than intended: a million rows is already beyond any cohort engine).
pub const MAX_COUNT: usize = 1_000_000;

/// Number of tunnel states that reach `until`: ⌈until / cycle⌉, where a ratio within 1e-9
/// (relative) of a whole number counts as that number (so "1 year" of "1 month" cycles is 12, not 13).
/// `Err` when `until` is shorter than one cycle or the count exceeds [`MAX_COUNT`].
pub fn count_until(cycle: Duration, until: Duration) -> Result<usize, String> {
    let ratio = until.in_unit(cycle.unit) / cycle.value;
    let nearest = ratio.round();
    let count = if (ratio - nearest).abs() <= 1e-9 * nearest.max(1.0) {
        nearest
    } else {
        ratio.ceil()
    };
    if ratio < 1.0 - 1e-9 {
        return Err(format!(
            "--until {until} is shorter than one cycle ({cycle})"
        ));
    }
    if !count.is_finite() || count > MAX_COUNT as f64 {
        return Err(format!(
            "--until {until} needs {count} cycles of {cycle}; at most {MAX_COUNT} tunnel states are allowed"
        ));
    }
    Ok(count as usize)
}

/// The transition matrix over the tunnel states plus `exit` (last row and column): row k
/// moves to tunnel k+1 with `p_next` and to exit with `p_exit`; the last tunnel moves to itself
/// with `p_next`; exit is absorbing. Every row sums to 1.
pub fn transition_matrix(table: &TunnelTable) -> Vec<Vec<f64>> {
    let n = table.rows.len();
    let mut m = vec![vec![0.0; n + 1]; n + 1];
    for (k, row) in table.rows.iter().enumerate() {
        let next = if k + 1 < n { k + 1 } else { k };
        m[k][next] = row.p_next;
        m[k][n] = row.p_exit;
    }
    m[n][n] = 1.0;
    m
}

/// The causes a table splits `p_exit` into (its `p_exit_<cause>` columns, in order), with
/// their values by tunnel; empty when exit is not split.
pub fn exit_causes(table: &TunnelTable) -> Vec<(&str, &[f64])> {
    table
        .extra
        .iter()
        .filter_map(|(name, values)| {
            name.strip_prefix("p_exit_")
                .map(|cause| (cause, values.as_slice()))
        })
        .collect()
}

/// Transition matrix with one absorbing exit state per cause ([`exit_causes`], in order) after
/// the tunnel states, so a cohort model can count each cause's exits; the single-exit
/// [`transition_matrix`] when exit is not split. Rows sum to 1 (the causes sum to `p_exit`).
pub fn transition_matrix_by_cause(table: &TunnelTable) -> Vec<Vec<f64>> {
    let causes = exit_causes(table);
    if causes.is_empty() {
        return transition_matrix(table);
    }
    let n = table.rows.len();
    let size = n + causes.len();
    let mut m = vec![vec![0.0; size]; size];
    for (k, row) in table.rows.iter().enumerate() {
        let next = if k + 1 < n { k + 1 } else { k };
        m[k][next] = row.p_next;
        for (j, (_, values)) in causes.iter().enumerate() {
            m[k][n + j] = values.get(k).copied().unwrap_or(f64::NAN);
        }
    }
    for j in n..size {
        m[j][j] = 1.0;
    }
    m
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::curve::ParametricCurve;
    use crate::families::{Exponential, Weibull};

    #[test]
    fn weibull_matches_closed_form_transition_probability() {
        // Time-dependent transition probability of the Weibull, 1 - exp(λ(t-u)^γ - λt^γ) with
        // cumulative hazard λt^γ and cycle length u (Briggs, Claxton and Sculpher, 2006,
        // Decision Modelling for Health Economic Evaluation, chapter 3).
        for shape in [0.5, 0.9, 1.0, 1.7, 3.0] {
            let scale: f64 = 30.0;
            let curve =
                ParametricCurve::new(&Weibull, vec![shape, scale], TimeUnit::Months).unwrap();
            let cycle = Duration {
                value: 1.0,
                unit: TimeUnit::Months,
            };
            let table = tunnel_table(&curve, cycle, 120);
            let lambda = scale.powf(-shape);
            for row in &table.rows {
                let (t, u) = (row.t_end, cycle.value);
                let expected = 1.0 - (lambda * (t - u).powf(shape) - lambda * t.powf(shape)).exp();
                assert!(
                    (row.p_exit - expected).abs() < 1e-12,
                    "shape {shape} tunnel {}",
                    row.tunnel
                );
            }
        }
    }

    #[test]
    fn exponential_gives_constant_probability() {
        // Constant hazard: p = 1 - exp(-r·Δ) (standard rate–probability relation; Briggs et al., 2006).
        let curve = ParametricCurve::new(&Exponential, vec![0.02], TimeUnit::Days).unwrap();
        let cycle = Duration {
            value: 1.0,
            unit: TimeUnit::Weeks,
        };
        let table = tunnel_table(&curve, cycle, 50);
        let expected = 1.0 - (-0.02f64 * 7.0).exp();
        for row in &table.rows {
            assert!((row.p_exit - expected).abs() < 1e-13);
        }
    }

    #[test]
    fn product_of_stay_probabilities_reproduces_survival() {
        // Identity: Π_{j≤k} (1 - p_exit_j) = S(k·cycle).
        let curve = ParametricCurve::new(&Weibull, vec![1.4, 200.0], TimeUnit::Days).unwrap();
        let cycle = Duration {
            value: 28.0,
            unit: TimeUnit::Days,
        };
        let table = tunnel_table(&curve, cycle, 40);
        let mut product = 1.0;
        for row in &table.rows {
            product *= row.p_next;
            assert!((product - curve.survival(row.t_end)).abs() < 1e-12);
        }
    }

    #[test]
    fn exit_is_certain_once_survival_is_zero() {
        assert_eq!(exit_probability(f64::NEG_INFINITY, f64::NEG_INFINITY), 1.0);
        assert_eq!(exit_probability(-800.0, f64::NEG_INFINITY), 1.0);
        // Tiny probabilities keep their precision: 1 - e^-x = x - x²/2 + … for x = 1e-12.
        assert!((exit_probability(0.0, -1e-12) - (1e-12 - 0.5e-24)).abs() < 1e-27);
    }

    #[test]
    fn per_cycle_probability_reexpressed_for_another_cycle_by_powers_not_scaling() {
        // Constant hazard: p = 1 - exp(-r·Δ), and a probability for cycle Δ1 becomes
        // 1 - (1 - p)^(Δ2/Δ1) for cycle Δ2, not p·Δ2/Δ1 (Fleurence and Hollenbeak, 2007,
        // PharmacoEconomics 25(1), "Rates and probabilities in economic modelling"; Briggs,
        // Claxton and Sculpher, 2006, section 3.3).
        let rate = 0.04;
        let curve = ParametricCurve::new(&Exponential, vec![rate], TimeUnit::Months).unwrap();
        let month = tunnel_table(
            &curve,
            Duration {
                value: 1.0,
                unit: TimeUnit::Months,
            },
            1,
        );
        let quarter = tunnel_table(
            &curve,
            Duration {
                value: 3.0,
                unit: TimeUnit::Months,
            },
            1,
        );
        let p1 = month.rows[0].p_exit;
        let p3 = quarter.rows[0].p_exit;
        assert!((p1 - (1.0 - (-rate).exp())).abs() < 1e-15);
        assert!((p3 - (1.0 - (1.0 - p1).powf(3.0))).abs() < 1e-15);
        // Linear scaling is wrong by more than rounding: 3·p1 overstates the quarterly probability.
        assert!(3.0 * p1 - p3 > 1e-3);
        // Non-whole ratios too: 10 days from a 1-week probability.
        let week = tunnel_table(
            &curve,
            Duration {
                value: 1.0,
                unit: TimeUnit::Weeks,
            },
            1,
        );
        let ten_days = tunnel_table(
            &curve,
            Duration {
                value: 10.0,
                unit: TimeUnit::Days,
            },
            1,
        );
        let expected = 1.0 - (1.0 - week.rows[0].p_exit).powf(10.0 / 7.0);
        assert!((ten_days.rows[0].p_exit - expected).abs() < 1e-15);
    }

    #[test]
    fn matrix_rows_sum_to_one_and_cohort_reproduces_survival() {
        // Interface contract: rows sum to 1; pushing a cohort through the matrix for k cycles
        // gives S(k·cycle) while k ≤ count (identity of the chain).
        let curve = ParametricCurve::new(&Weibull, vec![1.3, 18.0], TimeUnit::Months).unwrap();
        let cycle = Duration {
            value: 1.0,
            unit: TimeUnit::Months,
        };
        let table = tunnel_table(&curve, cycle, 24);
        let m = transition_matrix(&table);
        for row in &m {
            assert!((row.iter().sum::<f64>() - 1.0).abs() < 1e-12);
        }
        let mut cohort = vec![0.0; m.len()];
        cohort[0] = 1.0;
        for k in 1..=24 {
            let mut next = vec![0.0; m.len()];
            for (i, share) in cohort.iter().enumerate() {
                for (j, p) in m[i].iter().enumerate() {
                    next[j] += share * p;
                }
            }
            cohort = next;
            let alive: f64 = cohort[..24].iter().sum();
            assert!((alive - curve.survival(k as f64)).abs() < 1e-12, "k={k}");
        }
    }

    #[test]
    fn count_until_rounds_up_to_whole_cycles() {
        let month = Duration {
            value: 1.0,
            unit: TimeUnit::Months,
        };
        let year = Duration {
            value: 1.0,
            unit: TimeUnit::Years,
        };
        assert_eq!(count_until(month, year), Ok(12));
        let four_weeks = Duration {
            value: 4.0,
            unit: TimeUnit::Weeks,
        };
        // 365.25 / 28 = 13.04…: 14 cycles reach a year.
        assert_eq!(count_until(four_weeks, year), Ok(14));
        assert!(count_until(year, month).is_err());
    }

    #[test]
    fn tails_stay_finite_plateau_to_zero_and_certain_exit_after_zero() {
        use crate::families::Gompertz;
        // Far tails of every family: no NaN and probabilities in [0, 1], even where survival
        // is far below 1e-300 (p_exit then still comes from log-survival differences).
        let extreme: [(&str, Vec<f64>); 5] = [
            ("exponential", vec![5.0]),
            ("weibull", vec![3.0, 2.0]),
            ("lognormal", vec![0.0, 0.2]),
            ("loglogistic", vec![120.0, 1.0]),
            ("gompertz", vec![1.5, 0.5]),
        ];
        for (name, params) in &extreme {
            let family = crate::families::by_name(name).unwrap();
            let curve = ParametricCurve::new(family, params.clone(), TimeUnit::Months).unwrap();
            let table = tunnel_table(
                &curve,
                Duration {
                    value: 1.0,
                    unit: TimeUnit::Months,
                },
                2000,
            );
            for row in &table.rows {
                for x in [row.surv_start, row.surv_end, row.p_exit, row.p_next] {
                    assert!(
                        x.is_finite() && (0.0..=1.0).contains(&x),
                        "{} {row:?}",
                        family.name()
                    );
                }
            }
            assert!(
                table.rows.last().unwrap().surv_end < 1e-300,
                "{} tail not reached",
                family.name()
            );
        }
        // Gompertz with negative shape levels off at exp(rate/shape): p_exit → 0.
        let plateau = ParametricCurve::new(&Gompertz, vec![-0.5, 0.1], TimeUnit::Months).unwrap();
        let table = tunnel_table(
            &plateau,
            Duration {
                value: 1.0,
                unit: TimeUnit::Months,
            },
            200,
        );
        let last = table.rows.last().unwrap();
        assert!(last.p_exit < 1e-40 && last.p_exit >= 0.0);
        assert!((last.surv_end - (0.1f64 / -0.5).exp()).abs() < 1e-12);
        // Survival exactly 0 (log-survival -∞): exit is certain and stays defined afterwards.
        let steep = ParametricCurve::new(&Gompertz, vec![20.0, 1.0], TimeUnit::Months).unwrap();
        let table = tunnel_table(
            &steep,
            Duration {
                value: 1.0,
                unit: TimeUnit::Months,
            },
            60,
        );
        for row in &table.rows[40..] {
            assert_eq!((row.p_exit, row.p_next, row.surv_end), (1.0, 0.0, 0.0));
        }
    }

    #[test]
    fn fitting_in_days_or_months_gives_the_same_tunnel_table() {
        // Interface contract: converting a curve's unit rescales its parameters exactly, so the
        // same data fitted in days (then converted) and in months give one table; 1e-9 allows
        // for the optimiser's own tolerance on each fit.
        use crate::fit::{fit_family, FitData};
        use crate::input::Record;
        // Invented data: a seeded linear congruential generator drawing Weibull times (shape
        // 1.3, scale 500 days) with uniform censoring; no external source.
        let mut state: u64 = 20_261_202;
        let mut uniform = || {
            state = state
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            ((state >> 11) as f64 + 0.5) / (1u64 << 53) as f64
        };
        let mut days = Vec::new();
        for _ in 0..300 {
            let event_time = 500.0 * (-uniform().ln()).powf(1.0 / 1.3);
            let censor = 1500.0 * uniform();
            days.push(Record {
                time: event_time.min(censor),
                event: event_time <= censor,
            });
        }
        days.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
        let per_month = TimeUnit::Days.factor_to(TimeUnit::Months);
        let months: Vec<Record> = days
            .iter()
            .map(|r| Record {
                time: r.time * per_month,
                event: r.event,
            })
            .collect();
        let cycle = Duration {
            value: 1.0,
            unit: TimeUnit::Months,
        };
        for family in crate::families::STANDARD {
            let fit_days = fit_family(family, &FitData::from_records(&days), None);
            let fit_months = fit_family(family, &FitData::from_records(&months), None);
            assert!(
                fit_days.converged && fit_months.converged,
                "{}",
                family.name()
            );
            let in_days = ParametricCurve::new(
                family,
                fit_days.param_vector(family).unwrap(),
                TimeUnit::Days,
            )
            .unwrap()
            .in_unit(TimeUnit::Months);
            let in_months = ParametricCurve::new(
                family,
                fit_months.param_vector(family).unwrap(),
                TimeUnit::Months,
            )
            .unwrap();
            let a = tunnel_table(&in_days, cycle, 60);
            let b = tunnel_table(&in_months, cycle, 60);
            for (x, y) in a.rows.iter().zip(&b.rows) {
                assert!(
                    (x.p_exit - y.p_exit).abs() < 1e-9,
                    "{} tunnel {}: {} vs {}",
                    family.name(),
                    x.tunnel,
                    x.p_exit,
                    y.p_exit
                );
            }
        }
    }

    #[test]
    fn count_until_accepts_exactly_one_cycle_and_exactly_the_maximum() {
        // ⌈until / cycle⌉ at its edges (the definition in the doc comment, by hand): one cycle
        // of one day reaches one day; 1,000,000 daily cycles are allowed (the cap is "at
        // most"), 1,000,001 are not; a ratio within 1e-9 relative of a whole number counts as
        // that number (100,000.00001 days: off by 1e-5 ≤ 1e-9 × 100,000 = 1e-4), a ratio off
        // by more is rounded up (100,000.001 days: off by 1e-3 > 1e-4, so 100,001 cycles).
        let days = |value: f64| Duration {
            value,
            unit: TimeUnit::Days,
        };
        assert_eq!(count_until(days(1.0), days(1.0)), Ok(1));
        assert_eq!(count_until(days(7.0), days(7.0)), Ok(1));
        assert!(count_until(days(7.0), days(6.9)).is_err());
        assert_eq!(count_until(days(1.0), days(1_000_000.0)), Ok(MAX_COUNT));
        assert!(count_until(days(1.0), days(1_000_001.0)).is_err());
        assert_eq!(count_until(days(1.0), days(100_000.000_01)), Ok(100_000));
        assert_eq!(count_until(days(1.0), days(100_000.001)), Ok(100_001));
    }

    #[test]
    fn cause_columns_follow_a_cycle_in_another_unit_than_the_curve() {
        // Two constant competing hazards (disease 0.015 a month, background -ln(1 - 0.04) a
        // year, i.e. per month /12): P(cause j within Δ) = h_j/(h_1 + h_2)·(1 - e^-(h_1+h_2)Δ)
        // (standard competing-risks result, from memory). The curve is in months and the cycle
        // is one year, so each cycle spans Δ = 12 months of the curve; the causes must be
        // evaluated over the cycle converted to the curve's unit, as p_exit is.
        use crate::adjust::add::AddedCurve;
        use crate::adjust::background::{BackgroundHazard, BeyondTable};
        let table = crate::adjust::lifetable::parse(
            "life.csv",
            b"age,qx\n50,0.04\n51,0.04\n52,0.04\n53,0.04\n54,0.04\n",
            None,
        )
        .unwrap();
        let h_d = 0.015;
        let h_b = -(-0.04f64).ln_1p() / 12.0;
        let curve = AddedCurve {
            disease: Box::new(
                ParametricCurve::new(&Exponential, vec![h_d], TimeUnit::Months).unwrap(),
            ),
            background: BackgroundHazard::new(table, 50.0, BeyondTable::HoldLast, TimeUnit::Months)
                .unwrap(),
        };
        let year = Duration {
            value: 1.0,
            unit: TimeUnit::Years,
        };
        let table = tunnel_table(&curve, year, 4);
        let total = h_d + h_b;
        let p_total = 1.0 - (-total * 12.0).exp();
        let causes = exit_causes(&table);
        assert_eq!(causes.len(), 2);
        assert_eq!((causes[0].0, causes[1].0), ("disease", "background"));
        for (i, row) in table.rows.iter().enumerate() {
            assert!((row.p_exit - p_total).abs() < 1e-12, "tunnel {}", i + 1);
            assert!((causes[0].1[i] - h_d / total * p_total).abs() < 1e-12);
            assert!((causes[1].1[i] - h_b / total * p_total).abs() < 1e-12);
        }
        // The by-cause matrix: tunnel k → k+1 with p_next (the last repeats itself), one
        // absorbing state per cause receiving that cause's probability; rows sum to 1.
        let m = transition_matrix_by_cause(&table);
        assert_eq!(m.len(), 6);
        for k in 0..4 {
            let next = if k < 3 { k + 1 } else { 3 };
            assert!((m[k][next] - (1.0 - p_total)).abs() < 1e-12);
            assert!((m[k][4] - h_d / total * p_total).abs() < 1e-12);
            assert!((m[k][5] - h_b / total * p_total).abs() < 1e-12);
            assert!((m[k].iter().sum::<f64>() - 1.0).abs() < 1e-12);
        }
        assert_eq!((m[4][4], m[5][5], m[4][5], m[5][4]), (1.0, 1.0, 0.0, 0.0));
    }
}
