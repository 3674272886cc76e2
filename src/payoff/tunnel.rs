//! Payoffs per tunnel state: for each tunnel k, covering [(k-1)·cycle, k·cycle) since entry, the
//! expected amount accrued during that cycle by one person at the start of tunnel k,
//!
//!   ∫ c(u) S(u)/S(t_start) (1+R)^-(u - t_start) du over the cycle
//!   + `at_entry` (tunnel 1 only)
//!   + `at_exit` · ∫ f(u)/S(t_start) (1+R)^-(u - t_start) du over the cycle,
//!
//! each term only for a payoff that has that part, discounted within the cycle only. A cohort engine multiplies it by the membership at the start
//! of the cycle (and its own discount factor for that time): no within-cycle correction is needed.

use super::discount::Discount;
use super::integral::{Exactness, Integrator};
use super::schedule::Schedule;
use crate::curve::Curve;
use crate::discretise::TunnelTable;
use crate::units::Duration;
use rayon::prelude::*;

/// Per-tunnel payoffs of a schedule, ready to be appended to a tunnel table's extra columns.
#[derive(Debug, Clone, PartialEq)]
pub struct TunnelPayoffs {
    /// Column names `payoff_NAME`, in the schedule's order.
    pub columns: Vec<String>,
    /// `values[p][k - 1]`: payoff p in tunnel k.
    pub values: Vec<Vec<f64>>,
    /// The annual discount rate applied within each cycle.
    pub discount: Discount,
    /// How the integrals were computed.
    pub exactness: Exactness,
    /// One line each, for commands to print (`warning: …`) and record as `warning` metadata:
    /// an entry amount in a chain of one tunnel ([`single_tunnel_entry_warning`]).
    pub warnings: Vec<String>,
}

impl TunnelPayoffs {
    /// The payoff columns as (name, one value per tunnel), the shape of [`TunnelTable::extra`].
    pub fn extra_columns(&self) -> Vec<(String, Vec<f64>)> {
        self.columns
            .iter()
            .cloned()
            .zip(self.values.iter().cloned())
            .collect()
    }

    /// Appends the payoff columns after the table's other extra columns, so every export format
    /// that writes the long layout (CSV, JSON, XLSX, draws) carries them. The table must have
    /// been computed for the same curve, cycle and count.
    pub fn append_to(&self, table: &mut TunnelTable) {
        debug_assert!(self.values.iter().all(|v| v.len() == table.rows.len()));
        table.extra.extend(self.extra_columns());
    }
}

/// The payoffs of `schedule` for `count` tunnel states of length `cycle` on `curve`, discounted
/// within each cycle at `discount` (from the cycle's start): closed forms when the curve's hazard
/// is piecewise constant over the `count` cycles ([`Curve::piecewise_hazard`]), quadrature
/// otherwise.
pub fn tunnel_payoffs(
    curve: &dyn Curve,
    schedule: &Schedule,
    cycle: Duration,
    count: usize,
    discount: Discount,
) -> TunnelPayoffs {
    let unit = curve.time_unit();
    let h = cycle.in_unit(unit);
    let bound = |k: usize| k as f64 * h;
    let integrator = Integrator::new(
        curve,
        discount.per_unit(unit),
        &schedule.changes_in(unit),
        bound(count),
    );
    let rates: Vec<Vec<(f64, f64)>> = schedule.payoffs.iter().map(|p| p.rates_in(unit)).collect();
    let want_exit = schedule.payoffs.iter().any(|p| p.at_exit.is_some());
    let per_tunnel: Vec<Vec<f64>> = (1..=count)
        .into_par_iter()
        .map(|k| {
            let (t0, t1) = (bound(k - 1), bound(k));
            let window = integrator.window(
                t0,
                t1,
                curve.log_survival(t0),
                curve.log_survival(t1),
                &[],
                want_exit,
            );
            schedule
                .payoffs
                .iter()
                .zip(&rates)
                .map(|(payoff, pieces)| {
                    let rate: f64 = window
                        .pieces
                        .iter()
                        .map(|&(a, b, stay)| rate_on(pieces, a, b) * stay)
                        .sum();
                    let entry = if k == 1 {
                        payoff.at_entry.unwrap_or(0.0)
                    } else {
                        0.0
                    };
                    let exit = payoff.at_exit.map_or(0.0, |amount| amount * window.exit);
                    rate + entry + exit
                })
                .collect()
        })
        .collect();
    let values = (0..schedule.payoffs.len())
        .map(|p| per_tunnel.iter().map(|row| row[p]).collect())
        .collect();
    TunnelPayoffs {
        columns: schedule.payoffs.iter().map(|p| p.column()).collect(),
        values,
        discount,
        exactness: integrator.exactness(),
        warnings: single_tunnel_entry_warning(schedule, count)
            .into_iter()
            .collect(),
    }
}

/// With a chain of one tunnel, the payoffs with a non-zero `at_entry` amount carry it in tunnel
/// 1's payoff, and a cohort engine that keeps people in tunnel 1 cycle after cycle counts it in
/// every cycle, not once: a warning naming them; `None` otherwise.
pub fn single_tunnel_entry_warning(schedule: &Schedule, count: usize) -> Option<String> {
    let names: Vec<String> = schedule
        .payoffs
        .iter()
        .filter(|p| p.at_entry.is_some_and(|a| a != 0.0))
        .map(|p| format!("payoff_{}", p.name))
        .collect();
    if count != 1 || names.is_empty() {
        return None;
    }
    Some(format!(
        "the chain has 1 tunnel state and {} include(s) an at_entry amount: a cohort engine that keeps people in tunnel 1 counts it in every cycle, not once; use 2 or more tunnel states, or count the entry amount outside the tunnel table",
        names.join(", ")
    ))
}

/// The rate of a payoff (pieces as (start, rate)) on a piece [a, b] lying between two changes:
/// the rate at its middle.
pub(crate) fn rate_on(pieces: &[(f64, f64)], a: f64, b: f64) -> f64 {
    let mid = 0.5 * (a + b);
    pieces
        .iter()
        .rev()
        .find(|(from, _)| *from <= mid)
        .map_or(0.0, |(_, rate)| *rate)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::curve::ParametricCurve;
    use crate::discretise::tunnel_table;
    use crate::families::{Exponential, Weibull};
    use crate::payoff::integral::Opaque;
    use crate::payoff::schedule::{PayoffColumns, PayoffRow};
    use crate::units::TimeUnit;

    fn schedule(rows: &[[&str; 5]]) -> Schedule {
        let rows: Vec<PayoffRow> = rows
            .iter()
            .enumerate()
            .map(|(i, f)| PayoffRow {
                line: i as u64 + 2,
                payoff: f[0].into(),
                kind: f[1].into(),
                from: f[2].into(),
                amount: f[3].into(),
                per: f[4].into(),
            })
            .collect();
        Schedule::from_rows("payoffs.csv", &PayoffColumns::default(), &rows).unwrap()
    }

    fn months(value: f64) -> Duration {
        Duration {
            value,
            unit: TimeUnit::Months,
        }
    }

    #[test]
    fn exponential_tunnels_match_the_closed_form_by_both_routes() {
        // Constant hazard λ, constant rate c: c·(1 - e^(-(λ+δ)Δ))/(λ+δ) per tunnel, and the
        // exit integral λ·(1 - e^(-(λ+δ)Δ))/(λ+δ) (calculus of the exponential; memoryless, so
        // the same in every tunnel).
        let curve = ParametricCurve::new(&Exponential, vec![0.5], TimeUnit::Years).unwrap();
        let s = schedule(&[
            ["drug", "rate", "0", "120", "1 month"],
            ["death", "at_exit", "", "3000", ""],
            ["start", "at_entry", "", "1500", ""],
            ["all", "at_exit", "", "3000", ""],
            ["all", "rate", "0", "120", "1 month"],
            ["all", "at_entry", "", "1500", ""],
        ]);
        let d = Discount::annual(0.035).unwrap();
        let (lambda, delta, width) = (0.5, 0.035f64.ln_1p(), 0.25);
        let common = -(-(lambda + delta) * width).exp_m1() / (lambda + delta);
        let opaque = Opaque(&curve);
        let routes: [(&dyn Curve, Exactness); 2] = [
            (&curve, Exactness::ClosedForm),
            (&opaque, Exactness::Quadrature),
        ];
        for (route, exactness) in routes {
            let t = tunnel_payoffs(route, &s, months(3.0), 12, d);
            assert_eq!(t.exactness, exactness);
            assert_eq!(
                t.columns,
                ["payoff_drug", "payoff_death", "payoff_start", "payoff_all"]
            );
            for k in 0..12 {
                assert!((t.values[0][k] - 1440.0 * common).abs() < 1e-10 * 1440.0 * common);
                let exit = 3000.0 * lambda * common;
                assert!((t.values[1][k] - exit).abs() < 1e-10 * exit);
                let entry = if k == 0 { 1500.0 } else { 0.0 };
                assert_eq!(t.values[2][k], entry);
                // One payoff with all three parts: the sum of the three closed forms.
                let all = 1440.0 * common + exit + entry;
                assert!((t.values[3][k] - all).abs() < 1e-10 * all);
            }
        }
    }

    #[test]
    fn far_tail_keeps_its_digits_where_survival_underflows() {
        // A constant hazard of 3 a month: by tunnel 400 S is e^-1197, below the smallest double,
        // but the conditional payoff is the same as in tunnel 1 (memoryless; closed form as above).
        let curve = ParametricCurve::new(&Exponential, vec![3.0], TimeUnit::Months).unwrap();
        let s = schedule(&[
            ["c", "rate", "0", "1", "1 month"],
            ["x", "at_exit", "", "1", ""],
        ]);
        let d = Discount::annual(0.5).unwrap();
        // By quadrature: the closed form would not test the tail's digits.
        let t = tunnel_payoffs(&Opaque(&curve), &s, months(1.0), 400, d);
        let delta = 0.5f64.ln_1p() / 12.0;
        let stay = -(-(3.0 + delta)).exp_m1() / (3.0 + delta);
        assert!(curve.survival(399.0) == 0.0);
        for k in [0, 200, 399] {
            assert!(
                (t.values[0][k] - stay).abs() < 1e-10 * stay,
                "tunnel {}",
                k + 1
            );
            assert!((t.values[1][k] - 3.0 * stay).abs() < 1e-10 * stay);
        }
    }

    #[test]
    fn without_discount_exit_payoff_is_amount_times_p_exit() {
        // Undiscounted, ∫ f/S(t0) over the cycle is p_exit (definition of the conditional
        // probability; discretise.rs), for a hazard unbounded at 0 (Weibull shape 0.6) too.
        let curve = ParametricCurve::new(&Weibull, vec![0.6, 30.0], TimeUnit::Months).unwrap();
        let s = schedule(&[["x", "at_exit", "", "2", ""]]);
        let t = tunnel_payoffs(&curve, &s, months(1.0), 30, Discount::NONE);
        let table = tunnel_table(&curve, months(1.0), 30);
        for (k, row) in table.rows.iter().enumerate() {
            assert!((t.values[0][k] - 2.0 * row.p_exit).abs() < 1e-14);
        }
    }

    #[test]
    fn an_entry_amount_in_a_chain_of_one_tunnel_is_warned_about() {
        let curve = ParametricCurve::new(&Exponential, vec![0.1], TimeUnit::Months).unwrap();
        let s = schedule(&[
            ["cost", "rate", "0", "5", "1 month"],
            ["cost", "at_entry", "", "1500", ""],
            ["care", "rate", "0", "5", "1 month"],
            ["none", "at_entry", "", "0", ""],
        ]);
        let one = tunnel_payoffs(&curve, &s, months(1.0), 1, Discount::NONE);
        assert_eq!(one.warnings.len(), 1);
        let w = &one.warnings[0];
        assert!(w.contains("1 tunnel state and payoff_cost include"), "{w}");
        assert!(!w.contains("payoff_none") && !w.contains('\n'), "{w}");
        assert!(tunnel_payoffs(&curve, &s, months(1.0), 2, Discount::NONE)
            .warnings
            .is_empty());
        let without = schedule(&[["care", "rate", "0", "5", "1 month"]]);
        assert!(single_tunnel_entry_warning(&without, 1).is_none());
    }

    #[test]
    fn payoff_columns_travel_with_the_table() {
        let curve = ParametricCurve::new(&Weibull, vec![1.3, 15.0], TimeUnit::Months).unwrap();
        let s = schedule(&[["cost", "rate", "0", "500", "1 month"]]);
        let mut table = tunnel_table(&curve, months(1.0), 5);
        let t = tunnel_payoffs(&curve, &s, months(1.0), 5, Discount::NONE);
        t.append_to(&mut table);
        let long = crate::export::tunnel::long_table(&table);
        assert_eq!(long.columns.last().unwrap(), "payoff_cost");
        assert!(crate::discretise::exit_causes(&table).is_empty());
    }
}
