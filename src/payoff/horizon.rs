//! What the within-cycle method costs for payoffs, and how many tunnels the payoffs need: totals
//! for one person entering at time 0, to a horizon of N whole cycles, by each method of the
//! contract beside the exact integral, and the relative error of the discounted cycle-integrated
//! total when the chain is cut at K tunnels.
//!
//! With m_j = S(t_j) at the boundaries t_j = j·cycle, c_j = the rate at t_j times the cycle
//! length and d_j = (1+R)^-t_j (t in years): `start` Σ_{j<N} c_j m_j d_j; `end`
//! Σ_{j<N} c_j m_{j+1} d_{j+1}; `trapezoid` Σ_{j<N} c_j (m_j d_j + m_{j+1} d_{j+1})/2;
//! `half-cycle` Σ_{j≤N} c_j m_j d_j with the first and last terms halved; `simpson` the same with
//! Simpson's weights; `cycle-integrated` Σ_{j<N} m_j d_j · (tunnel j+1's payoff). One-offs:
//! `at_entry` once at time 0 by every method; `at_exit` Σ_{j<N} (m_j - m_{j+1}) d_{j+1} · amount
//! by every method but `cycle-integrated`, which has it exactly in the tunnel payoffs. A payoff
//! made of several parts (a rate, an entry amount, an exit amount) totals the sum of its parts.

use super::discount::Discount;
use super::integral::{Exactness, Integrator};
use super::schedule::{Payoff, Schedule};
use super::tunnel::{rate_on, tunnel_payoffs, TunnelPayoffs};
use crate::curve::Curve;
use crate::discretise::exit_probability;
use crate::horizon::{boundary_log_survival, integrate_boundaries, Method, TruncationRow};
use crate::units::Duration;
use serde::Serialize;

/// A way of totalling a payoff to the horizon.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum PayoffMethod {
    /// Each cycle's amount with the membership at its start.
    Start,
    /// Each cycle's amount with the membership at its end.
    End,
    /// Boundary amounts with the first and last halved.
    HalfCycle,
    /// Each cycle's amount with the mean of its two boundary memberships.
    Trapezoid,
    /// Boundary amounts with Simpson's weights (3/8 rule on the last three cycles when N is odd).
    Simpson,
    /// The exact per-tunnel payoffs times the membership at the start of each cycle.
    CycleIntegrated,
}

/// The methods in table order.
pub const PAYOFF_METHODS: [PayoffMethod; 6] = [
    PayoffMethod::Start,
    PayoffMethod::End,
    PayoffMethod::HalfCycle,
    PayoffMethod::Trapezoid,
    PayoffMethod::Simpson,
    PayoffMethod::CycleIntegrated,
];

impl PayoffMethod {
    /// Name as printed and written.
    pub fn name(self) -> &'static str {
        match self {
            PayoffMethod::Start => "start",
            PayoffMethod::End => "end",
            PayoffMethod::HalfCycle => "half-cycle",
            PayoffMethod::Trapezoid => "trapezoid",
            PayoffMethod::Simpson => "simpson",
            PayoffMethod::CycleIntegrated => "cycle-integrated",
        }
    }
}

/// One row of the `payoffs` table of `horizon` (contract column names).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PayoffMethodRow {
    /// Payoff name.
    pub payoff: String,
    /// The method.
    pub method: PayoffMethod,
    /// Undiscounted total by the method.
    pub total: f64,
    /// Undiscounted exact total.
    pub exact: f64,
    /// `total` - `exact`.
    pub error: f64,
    /// `error` / |`exact`|; `None` (missing) when `exact` is 0.
    pub rel_error: Option<f64>,
    /// Discounted total by the method.
    pub disc_total: f64,
    /// Discounted exact total.
    pub disc_exact: f64,
    /// `disc_total` - `disc_exact`.
    pub disc_error: f64,
    /// `disc_error` / |`disc_exact`|; `None` (missing) when `disc_exact` is 0.
    pub disc_rel_error: Option<f64>,
}

/// error / |exact|, signed like the error; `None` (written as missing: an empty CSV cell, JSON
/// `null`, a blank XLSX cell) when the exact total is 0, where no relative error exists.
pub fn relative(error: f64, exact: f64) -> Option<f64> {
    if exact == 0.0 {
        None
    } else {
        Some(error / exact.abs())
    }
}

/// Discount factors d_j = (1+R)^-(j·cycle) at the boundaries j = 0..=n.
fn boundary_discounts(cycle: Duration, n: usize, discount: Discount) -> Vec<f64> {
    (0..=n)
        .map(|j| discount.factor(j as f64 * cycle.value, cycle.unit))
        .collect()
}

/// Total of `payoff` to the horizon by a boundary `method` (not the cycle-integrated one), from
/// the boundary log-survival `log_s` (n + 1 values, boundaries j·cycle): its rate by the method,
/// plus its entry amount, plus its exit amount by the boundary sum.
pub fn boundary_total(
    payoff: &Payoff,
    method: Method,
    log_s: &[f64],
    cycle: Duration,
    discount: Discount,
) -> f64 {
    let n = log_s.len().saturating_sub(1);
    let d = boundary_discounts(cycle, n, discount);
    let m: Vec<f64> = log_s.iter().map(|l| l.exp()).collect();
    let entry = payoff.at_entry.unwrap_or(0.0);
    // m_j - m_{j+1} as m_j·p_exit, so it keeps its digits when the two are close.
    let exit = payoff.at_exit.map_or(0.0, |amount| {
        (0..n)
            .map(|j| m[j] * exit_probability(log_s[j], log_s[j + 1]) * d[j + 1])
            .sum::<f64>()
            * amount
    });
    if payoff.rate.is_empty() {
        return entry + exit;
    }
    let h = cycle.value;
    // Rate per unit of the cycle's time at each boundary: c_j = rate_j·h.
    let rate: Vec<f64> = (0..=n)
        .map(|j| payoff.rate_at(j as f64 * h, cycle.unit))
        .collect();
    let accrued = match method {
        // Boundary rules on g_j = rate_j·m_j·d_j: h·Σ w_j g_j is Σ w_j c_j m_j d_j.
        Method::Start | Method::HalfCycle | Method::Simpson => {
            let g: Vec<f64> = (0..=n).map(|j| rate[j] * m[j] * d[j]).collect();
            integrate_boundaries(&g, h, method)
        }
        // These two weight each cycle's own amount c_j by memberships at its ends, so
        // they are not boundary rules on one sequence.
        Method::End => (0..n).map(|j| rate[j] * h * m[j + 1] * d[j + 1]).sum(),
        Method::Trapezoid => (0..n)
            .map(|j| rate[j] * h * 0.5 * (m[j] * d[j] + m[j + 1] * d[j + 1]))
            .sum(),
    };
    accrued + entry + exit
}

/// Σ_{j<n} m_j d_j · payoff of tunnel j+1: the cycle-integrated total from per-tunnel payoffs
/// (`per_tunnel[k-1]` for tunnel k, at least n of them) discounted at the same rate.
pub fn cycle_integrated_total(
    log_s: &[f64],
    per_tunnel: &[f64],
    cycle: Duration,
    discount: Discount,
) -> f64 {
    let n = log_s.len().saturating_sub(1);
    let d = boundary_discounts(cycle, n, discount);
    (0..n)
        .map(|j| {
            let weight = log_s[j].exp() * d[j];
            if weight == 0.0 {
                0.0
            } else {
                weight * per_tunnel[j]
            }
        })
        .sum()
}

/// The exact totals of every payoff of `schedule` to `end` (time since entry in the curve's
/// unit) for one person entering at 0: ∫₀^end c(t) S(t) (1+R)^-t dt for the rate, plus the
/// `at_entry` amount, plus the `at_exit` amount · ∫₀^end f(t) (1+R)^-t dt. The integral is split at the
/// schedule's changes and in 64 equal pieces, independently of any cycle; closed forms when
/// the curve's hazard is piecewise constant up to `end`.
pub fn exact_totals(
    curve: &dyn Curve,
    schedule: &Schedule,
    end: f64,
    discount: Discount,
) -> (Vec<f64>, Exactness) {
    const PIECES: usize = 64;
    let unit = curve.time_unit();
    let integrator = Integrator::new(
        curve,
        discount.per_unit(unit),
        &schedule.changes_in(unit),
        end,
    );
    let uniform: Vec<f64> = (1..PIECES)
        .map(|i| end * i as f64 / PIECES as f64)
        .collect();
    let want_exit = schedule.payoffs.iter().any(|p| p.at_exit.is_some());
    let window = integrator.window(
        0.0,
        end,
        curve.log_survival(0.0),
        curve.log_survival(end),
        &uniform,
        want_exit,
    );
    let totals = schedule
        .payoffs
        .iter()
        .map(|payoff| {
            let pieces = payoff.rates_in(unit);
            let accrued: f64 = window
                .pieces
                .iter()
                .map(|&(a, b, stay)| rate_on(&pieces, a, b) * stay)
                .sum();
            let exit = payoff.at_exit.map_or(0.0, |amount| amount * window.exit);
            accrued + payoff.at_entry.unwrap_or(0.0) + exit
        })
        .collect();
    (totals, integrator.exactness())
}

/// The `payoffs` table rows (payoff by payoff, methods in [`PAYOFF_METHODS`] order) from the
/// pieces already computed: boundary log-survival, per-tunnel payoffs undiscounted and
/// discounted at `discount` (at least n tunnels), and the exact totals both ways.
#[allow(clippy::too_many_arguments)]
pub fn payoff_method_rows(
    schedule: &Schedule,
    log_s: &[f64],
    cycle: Duration,
    discount: Discount,
    plain: &TunnelPayoffs,
    discounted: &TunnelPayoffs,
    exact: &[f64],
    disc_exact: &[f64],
) -> Vec<PayoffMethodRow> {
    let mut rows = Vec::with_capacity(schedule.payoffs.len() * PAYOFF_METHODS.len());
    for (p, payoff) in schedule.payoffs.iter().enumerate() {
        for method in PAYOFF_METHODS {
            let total_at = |d: Discount, per_tunnel: &[f64]| match method {
                PayoffMethod::Start => boundary_total(payoff, Method::Start, log_s, cycle, d),
                PayoffMethod::End => boundary_total(payoff, Method::End, log_s, cycle, d),
                PayoffMethod::HalfCycle => {
                    boundary_total(payoff, Method::HalfCycle, log_s, cycle, d)
                }
                PayoffMethod::Trapezoid => {
                    boundary_total(payoff, Method::Trapezoid, log_s, cycle, d)
                }
                PayoffMethod::Simpson => boundary_total(payoff, Method::Simpson, log_s, cycle, d),
                PayoffMethod::CycleIntegrated => {
                    cycle_integrated_total(log_s, per_tunnel, cycle, d)
                }
            };
            let total = total_at(Discount::NONE, &plain.values[p]);
            let disc_total = total_at(discount, &discounted.values[p]);
            rows.push(PayoffMethodRow {
                payoff: payoff.name.clone(),
                method,
                total,
                exact: exact[p],
                error: total - exact[p],
                rel_error: relative(total - exact[p], exact[p]),
                disc_total,
                disc_exact: disc_exact[p],
                disc_error: disc_total - disc_exact[p],
                disc_rel_error: relative(disc_total - disc_exact[p], disc_exact[p]),
            });
        }
    }
    rows
}

/// For each K = 1..n, |T_K - T| / |T|: T the discounted cycle-integrated total of one payoff to
/// the horizon (n = `log_s.len()` - 1 cycles) on the untruncated chain, T_K the same on the
/// chain cut at K tunnels, whose last tunnel repeats its probability and its payoff (`at_entry`
/// included when K = 1, as an engine looping on tunnel 1 would count it). `per_tunnel` holds
/// the payoffs of tunnels 1..=n discounted at `discount` within each cycle.
pub fn payoff_truncation_errors(
    log_s: &[f64],
    per_tunnel: &[f64],
    cycle: Duration,
    discount: Discount,
) -> Vec<f64> {
    let n = log_s.len().saturating_sub(1);
    let ln_d = -discount.per_unit(cycle.unit) * cycle.value;
    // prefix[j]: Σ_{i<j} m_i d_i P_{i+1}, with the magnitudes beside it for a scale.
    let mut prefix = vec![0.0; n + 1];
    let mut magnitude = 0.0;
    for j in 0..n {
        let term = if log_s[j] == f64::NEG_INFINITY {
            0.0
        } else {
            (log_s[j] + ln_d * j as f64).exp() * per_tunnel[j]
        };
        prefix[j + 1] = prefix[j] + term;
        magnitude += term.abs();
    }
    let full = prefix[n];
    (1..=n)
        .map(|k| {
            let remaining = n - k;
            let tail = if remaining == 0 || log_s[k] == f64::NEG_INFINITY {
                0.0
            } else {
                // Σ_{i<remaining} m_K q^i d_{K+i} P_K with q = S_K/S_{K-1}: a geometric series
                // in r = q·d, summed as expm1(remaining·ln r)/expm1(ln r).
                let ln_r = (log_s[k] - log_s[k - 1]) + ln_d;
                let series = if ln_r == 0.0 {
                    remaining as f64
                } else {
                    (remaining as f64 * ln_r).exp_m1() / ln_r.exp_m1()
                };
                (log_s[k] + ln_d * k as f64).exp() * series * per_tunnel[k - 1]
            };
            let difference = (prefix[k] + tail - full).abs();
            if difference == 0.0 {
                0.0
            } else if full != 0.0 {
                difference / full.abs()
            } else {
                // A total of 0 from terms of both signs: relative to their magnitude instead.
                difference / magnitude
            }
        })
        .collect()
}

/// The truncation table's payoff columns `payoff_rel_error_NAME` (one value per K = 1..n) from
/// the per-tunnel payoffs discounted at `discount`.
pub fn payoff_truncation_columns(
    log_s: &[f64],
    discounted: &TunnelPayoffs,
    cycle: Duration,
    discount: Discount,
) -> Vec<(String, Vec<f64>)> {
    discounted
        .columns
        .iter()
        .zip(&discounted.values)
        .map(|(column, values)| {
            let name = column.strip_prefix("payoff_").unwrap_or(column);
            (
                format!("payoff_rel_error_{name}"),
                payoff_truncation_errors(log_s, values, cycle, discount),
            )
        })
        .collect()
}

/// Smallest K with `max_surv_gap`, `ly_rel_error` and every payoff column's error at K all ≤
/// `tolerance` (K = n always qualifies).
pub fn suggested_count_with_payoffs(
    rows: &[TruncationRow],
    payoff_errors: &[(String, Vec<f64>)],
    tolerance: f64,
) -> usize {
    rows.iter()
        .enumerate()
        .find(|(i, r)| {
            r.max_surv_gap <= tolerance
                && r.ly_rel_error <= tolerance
                && payoff_errors.iter().all(|(_, e)| e[*i] <= tolerance)
        })
        .map_or(rows.len(), |(_, r)| r.count)
}

/// Everything `horizon --payoffs` adds, computed from a curve.
#[derive(Debug, Clone, PartialEq)]
pub struct HorizonPayoffs {
    /// The `payoffs` table.
    pub rows: Vec<PayoffMethodRow>,
    /// `payoff_rel_error_NAME` for K = 1..n.
    pub truncation: Vec<(String, Vec<f64>)>,
    /// How the per-tunnel payoffs were computed.
    pub exactness: Exactness,
}

/// The payoff method table and truncation columns of `schedule` on `curve` to a horizon of `n`
/// cycles, discounted at `discount` for the discounted columns and the truncation criterion.
pub fn horizon_payoffs(
    curve: &dyn Curve,
    schedule: &Schedule,
    cycle: Duration,
    n: usize,
    discount: Discount,
) -> HorizonPayoffs {
    let log_s = boundary_log_survival(curve, cycle, n);
    let plain = tunnel_payoffs(curve, schedule, cycle, n, Discount::NONE);
    let discounted = if discount == Discount::NONE {
        plain.clone()
    } else {
        tunnel_payoffs(curve, schedule, cycle, n, discount)
    };
    let end = n as f64 * cycle.in_unit(curve.time_unit());
    let (exact, _) = exact_totals(curve, schedule, end, Discount::NONE);
    let (disc_exact, _) = exact_totals(curve, schedule, end, discount);
    let rows = payoff_method_rows(
        schedule,
        &log_s,
        cycle,
        discount,
        &plain,
        &discounted,
        &exact,
        &disc_exact,
    );
    let truncation = payoff_truncation_columns(&log_s, &discounted, cycle, discount);
    HorizonPayoffs {
        rows,
        truncation,
        exactness: plain.exactness,
    }
}

/// The running totals of one payoff to each cycle boundary t_j (j = 0..=n), by every method:
/// what the method has counted for one person entering at 0 by time t_j, discounted at
/// `discount`. `cycle-integrated` is the exact accrual to t_j (the telescoping identity of
/// `docs/payoffs.md`), so a method's running total minus it is where the method gains or loses
/// over time since entry. Simpson's rule has running totals only at even j (composite 1/3 rule
/// to t_j) and at n (the method's total); other entries are `None`. `per_tunnel`: the payoff's
/// per-tunnel values discounted at `discount` (at least n).
pub fn running_totals(
    payoff: &Payoff,
    log_s: &[f64],
    cycle: Duration,
    discount: Discount,
    per_tunnel: &[f64],
) -> Vec<(PayoffMethod, Vec<Option<f64>>)> {
    let n = log_s.len().saturating_sub(1);
    let d = boundary_discounts(cycle, n, discount);
    let m: Vec<f64> = log_s.iter().map(|l| l.exp()).collect();
    let h = cycle.value;
    let c: Vec<f64> = (0..=n)
        .map(|j| {
            if payoff.rate.is_empty() {
                0.0
            } else {
                payoff.rate_at(j as f64 * h, cycle.unit) * h
            }
        })
        .collect();
    let entry = payoff.at_entry.unwrap_or(0.0);
    let exit_amount = payoff.at_exit.unwrap_or(0.0);
    let exit: Vec<f64> = (0..n)
        .map(|j| m[j] * exit_probability(log_s[j], log_s[j + 1]) * d[j + 1] * exit_amount)
        .collect();
    let g: Vec<f64> = (0..=n).map(|j| c[j] * m[j] * d[j]).collect();
    let running = |step: &dyn Fn(usize) -> f64| -> Vec<Option<f64>> {
        let mut total = entry;
        let mut out = vec![Some(total)];
        for j in 0..n {
            total += step(j);
            out.push(Some(total));
        }
        out
    };
    let start = running(&|j| g[j] + exit[j]);
    let end = running(&|j| c[j] * m[j + 1] * d[j + 1] + exit[j]);
    let half = running(&|j| 0.5 * (g[j] + g[j + 1]) + exit[j]);
    let trapezoid = running(&|j| c[j] * 0.5 * (m[j] * d[j] + m[j + 1] * d[j + 1]) + exit[j]);
    // Tunnel 1's payoff holds the entry amount, already counted at t_0.
    let integrated = running(&|j| {
        let weight = m[j] * d[j];
        let own = if weight == 0.0 {
            0.0
        } else {
            weight * per_tunnel[j]
        };
        if j == 0 {
            own - entry
        } else {
            own
        }
    });
    let mut exit_to = vec![0.0; n + 1];
    for j in 0..n {
        exit_to[j + 1] = exit_to[j] + exit[j];
    }
    let mut simpson: Vec<Option<f64>> = (0..=n)
        .map(|j| {
            if j % 2 != 0 {
                return None;
            }
            if j == 0 {
                return Some(entry);
            }
            let sum: f64 = (0..=j)
                .map(|i| {
                    let w = if i == 0 || i == j {
                        1.0
                    } else if i % 2 == 1 {
                        4.0
                    } else {
                        2.0
                    };
                    w * g[i]
                })
                .sum();
            Some(sum / 3.0 + entry + exit_to[j])
        })
        .collect();
    if n > 0 {
        simpson[n] = Some(boundary_total(
            payoff,
            Method::Simpson,
            log_s,
            cycle,
            discount,
        ));
    }
    vec![
        (PayoffMethod::Start, start),
        (PayoffMethod::End, end),
        (PayoffMethod::HalfCycle, half),
        (PayoffMethod::Trapezoid, trapezoid),
        (PayoffMethod::Simpson, simpson),
        (PayoffMethod::CycleIntegrated, integrated),
    ]
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::curve::ParametricCurve;
    use crate::families::{Exponential, Weibull};
    use crate::horizon::truncation_table;
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

    fn month() -> Duration {
        Duration {
            value: 1.0,
            unit: TimeUnit::Months,
        }
    }

    #[test]
    fn memoryless_chain_needs_one_tunnel_unless_entry_is_repeated() {
        // Constant hazard and constant rate: every tunnel has the same probability and payoff,
        // so the chain cut at any K is the same chain (memorylessness of the exponential).
        // An entry amount repeated by the looping tunnel 1 adds 1500·Σ_{1≤j<N} S(t_j)(1+R)^-t_j,
        // a geometric series in e^-(λ+δ) per cycle (λ = 0.05, δ = ln 1.035 / 12 a month).
        let curve = ParametricCurve::new(&Exponential, vec![0.05], TimeUnit::Months).unwrap();
        let s = schedule(&[
            ["care", "rate", "0", "80", "1 month"],
            ["entry", "at_entry", "", "1500", ""],
            ["death", "at_exit", "", "3000", ""],
        ]);
        let d = Discount::annual(0.035).unwrap();
        let n = 48;
        let result = horizon_payoffs(&curve, &s, month(), n, d);
        let errors = |name: &str| {
            &result
                .truncation
                .iter()
                .find(|(c, _)| c.ends_with(name))
                .unwrap()
                .1
        };
        for name in ["care", "death"] {
            assert!(errors(name).iter().all(|e| *e < 1e-13), "{name}");
        }
        let r = (-(0.05 + 0.035f64.ln_1p() / 12.0)).exp();
        let repeated: f64 = (1..n).map(|j| r.powi(j as i32)).sum();
        assert!((errors("entry")[0] - repeated).abs() < 1e-12 * repeated);
        assert!(errors("entry")[1..].iter().all(|e| *e == 0.0));
        assert_eq!(
            result
                .truncation
                .iter()
                .map(|(c, _)| c.as_str())
                .collect::<Vec<_>>(),
            [
                "payoff_rel_error_care",
                "payoff_rel_error_entry",
                "payoff_rel_error_death"
            ]
        );
        // The life-year criteria pass at K = 1; the entry payoff moves the suggestion to 2.
        let log_s = boundary_log_survival(&curve, month(), n);
        let rows = truncation_table(&log_s, 1.0);
        assert_eq!(crate::horizon::suggested_count(&rows, 1e-3), 1);
        assert_eq!(
            suggested_count_with_payoffs(&rows, &result.truncation, 1e-3),
            2
        );
        assert_eq!(suggested_count_with_payoffs(&rows, &[], 1e-3), 1);
    }

    #[test]
    fn truncation_error_matches_a_chain_written_out() {
        // The cut chain pushed cycle by cycle, without the geometric shortcut.
        let curve = ParametricCurve::new(&Weibull, vec![0.7, 25.0], TimeUnit::Months).unwrap();
        let s = schedule(&[
            ["c", "rate", "0", "10", "1 month"],
            ["c", "rate", "6 months", "3", "1 month"],
        ]);
        let d = Discount::annual(0.06).unwrap();
        let n = 40;
        let log_s = boundary_log_survival(&curve, month(), n);
        let per = tunnel_payoffs(&curve, &s, month(), n, d);
        let got = payoff_truncation_errors(&log_s, &per.values[0], month(), d);
        let surv: Vec<f64> = log_s.iter().map(|l| l.exp()).collect();
        let chain = |k: usize| {
            let (mut member, mut total) = (1.0, 0.0);
            for j in 0..n {
                let tunnel = (j + 1).min(k);
                total += member * d.factor(j as f64, TimeUnit::Months) * per.values[0][tunnel - 1];
                member *= surv[tunnel] / surv[tunnel - 1];
            }
            total
        };
        let full = chain(n);
        for k in [1, 2, 5, 6, 7, 20, 39, 40] {
            let expected = (chain(k) - full).abs() / full;
            assert!(
                (got[k - 1] - expected).abs() < 1e-13,
                "K={k}: {} vs {expected}",
                got[k - 1]
            );
        }
    }

    #[test]
    fn zero_exact_totals_give_missing_relative_errors_not_infinities() {
        let curve = ParametricCurve::new(&Weibull, vec![1.5, 10.0], TimeUnit::Months).unwrap();
        let s = schedule(&[
            ["nothing", "rate", "0", "0", "1 month"],
            ["none", "at_exit", "", "0", ""],
            ["cost", "rate", "0", "10", "1 month"],
        ]);
        let result = horizon_payoffs(&curve, &s, month(), 7, Discount::NONE);
        for row in result.rows.iter().filter(|r| r.payoff != "cost") {
            assert_eq!((row.total, row.exact, row.error), (0.0, 0.0, 0.0));
            assert_eq!((row.rel_error, row.disc_rel_error), (None, None));
        }
        for row in result.rows.iter().filter(|r| r.payoff == "cost") {
            let rel = row.rel_error.unwrap();
            assert_eq!(rel, row.error / row.exact);
            assert!(rel.is_finite() && row.disc_rel_error.unwrap().is_finite());
        }
        // Missing is written as JSON null.
        let json = serde_json::to_value(&result.rows[0]).unwrap();
        assert_eq!(json["rel_error"], serde_json::Value::Null);
        assert!(result
            .truncation
            .iter()
            .filter(|(c, _)| !c.ends_with("cost"))
            .all(|(_, e)| e.iter().all(|x| *x == 0.0)));
        assert_eq!(relative(1.0, 0.0), None);
        assert_eq!(relative(0.0, 0.0), None);
        assert_eq!(relative(-2.0, -4.0), Some(-0.5));
    }

    #[test]
    fn one_cycle_simpson_is_the_boundary_trapezoid() {
        // With one cycle there are no Simpson weights; the boundary trapezoid (½, ½) stands in,
        // as for life-years (docs/tunnels.md), so it equals half-cycle.
        let curve = ParametricCurve::new(&Weibull, vec![1.5, 10.0], TimeUnit::Months).unwrap();
        let s = schedule(&[["c", "rate", "0", "10", "1 month"]]);
        let log_s = boundary_log_survival(&curve, month(), 1);
        let simpson = boundary_total(
            &s.payoffs[0],
            Method::Simpson,
            &log_s,
            month(),
            Discount::NONE,
        );
        let half = boundary_total(
            &s.payoffs[0],
            Method::HalfCycle,
            &log_s,
            month(),
            Discount::NONE,
        );
        assert!((simpson - 5.0 * (1.0 + log_s[1].exp())).abs() < 1e-12);
        assert_eq!(simpson, half);
    }

    #[test]
    fn running_totals_end_at_the_method_totals() {
        let curve = ParametricCurve::new(&Weibull, vec![1.3, 15.0], TimeUnit::Months).unwrap();
        let schedule = schedule(&[
            ["cost", "rate", "0", "500", "1 month"],
            ["cost", "rate", "1 year", "50", "1 month"],
            ["cost", "at_entry", "", "1500", ""],
            ["cost", "at_exit", "", "3000", ""],
        ]);
        let discount = Discount::annual(0.035).unwrap();
        for n in [36, 37] {
            let h = horizon_payoffs(&curve, &schedule, month(), n, discount);
            let log_s = boundary_log_survival(&curve, month(), n);
            let per = tunnel_payoffs(&curve, &schedule, month(), n, discount);
            for (method, path) in running_totals(
                &schedule.payoffs[0],
                &log_s,
                month(),
                discount,
                &per.values[0],
            ) {
                let row = h.rows.iter().find(|r| r.method == method).unwrap();
                let last = path[n].unwrap();
                assert!(
                    (last - row.disc_total).abs() <= 1e-9 * row.disc_total.abs(),
                    "{n} {method:?}: {last} against {}",
                    row.disc_total
                );
                assert_eq!(path[0], Some(1500.0));
            }
        }
    }
}
