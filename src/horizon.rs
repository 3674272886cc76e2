//! How many tunnel states are enough, and what the cycle length costs in accuracy.
//!
//! Everything works on the survival at cycle boundaries t_j = j·cycle, j = 0..n, where the
//! horizon is rounded up to n whole cycles. A chain cut at K tunnels follows the curve up to
//! tunnel K and then repeats tunnel K's probability, so its survival after K cycles is
//! S(K·cycle)·(1 - p_K)^(j - K). See `docs/tunnels.md` for the definitions and conventions.
//! Life-years are in years whatever the curve's or the cycle's unit (interface contract).

use crate::curve::Curve;
use crate::discretise::exit_probability;
use crate::units::{Duration, TimeUnit};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

/// Survival threshold that ends the default horizon.
pub const DEFAULT_HORIZON_SURVIVAL: f64 = 0.001;
/// Longest default horizon, in years.
pub const DEFAULT_HORIZON_YEARS: f64 = 100.0;
/// Most cycles a horizon may span (the truncation table is quadratic in it in the worst case).
pub const MAX_HORIZON_CYCLES: usize = 200_000;

/// One candidate count K of the truncation table.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TruncationRow {
    /// Number of tunnel states K.
    pub count: usize,
    /// Largest |S_K-chain(t_j) - S(t_j)| over the cycle boundaries up to the horizon.
    pub max_surv_gap: f64,
    /// |LY_K - LY| / LY, life-years to the horizon by the trapezoid rule on both chains.
    pub ly_rel_error: f64,
    /// Exit probability of tunnel K (repeated for every later cycle by the cut chain).
    pub p_exit_last: f64,
}

/// A within-cycle method turning boundary values into an integral over the horizon.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Method {
    /// Each cycle counted with the value at its start.
    Start,
    /// Each cycle counted with the value at its end.
    End,
    /// End-of-cycle counts plus half the first boundary, minus half the last.
    HalfCycle,
    /// Average of the two boundaries of each cycle.
    Trapezoid,
    /// Composite Simpson's 1/3 rule (3/8 rule on the last three cycles when n is odd).
    Simpson,
}

/// The methods in table order.
pub const METHODS: [Method; 5] = [
    Method::Start,
    Method::End,
    Method::HalfCycle,
    Method::Trapezoid,
    Method::Simpson,
];

impl Method {
    /// Name as printed and written.
    pub fn name(self) -> &'static str {
        match self {
            Method::Start => "start",
            Method::End => "end",
            Method::HalfCycle => "half-cycle",
            Method::Trapezoid => "trapezoid",
            Method::Simpson => "simpson",
        }
    }
}

/// ∫ over [0, n·h] from the n + 1 boundary values `f` (spacing `h`) by `method`.
pub fn integrate_boundaries(f: &[f64], h: f64, method: Method) -> f64 {
    let n = f.len().saturating_sub(1);
    if n == 0 {
        return 0.0;
    }
    match method {
        Method::Start => h * f[..n].iter().sum::<f64>(),
        Method::End => h * f[1..].iter().sum::<f64>(),
        // Written as membership counts at cycle ends with the correction, as modellers do;
        // equal to the trapezoid rule by algebra, computed independently here.
        Method::HalfCycle => h * (f[1..].iter().sum::<f64>() + 0.5 * (f[0] - f[n])),
        Method::Trapezoid => h * f.windows(2).map(|w| 0.5 * (w[0] + w[1])).sum::<f64>(),
        Method::Simpson => {
            if n == 1 {
                return 0.5 * h * (f[0] + f[1]);
            }
            // Simpson's 1/3 needs an even number of intervals; with an odd number the last
            // three use Simpson's 3/8 rule, which has the same order (h⁴).
            let even = if n % 2 == 0 { n } else { n - 3 };
            let mut total = 0.0;
            for i in (0..even).step_by(2) {
                total += h / 3.0 * (f[i] + 4.0 * f[i + 1] + f[i + 2]);
            }
            if even < n {
                let i = even;
                total += 3.0 * h / 8.0 * (f[i] + 3.0 * f[i + 1] + 3.0 * f[i + 2] + f[i + 3]);
            }
            total
        }
    }
}

/// ln S at the cycle boundaries 0, cycle, …, n·cycle (cycle in its own unit).
pub fn boundary_log_survival(curve: &dyn Curve, cycle: Duration, n: usize) -> Vec<f64> {
    let to_curve = cycle.unit.factor_to(curve.time_unit());
    (0..=n)
        .map(|j| curve.log_survival(j as f64 * cycle.value * to_curve))
        .collect()
}

/// Number of cycles of the default horizon: the first boundary where S falls below
/// [`DEFAULT_HORIZON_SURVIVAL`], at most [`DEFAULT_HORIZON_YEARS`] (rounded up to whole cycles).
/// Returns the count and whether the survival threshold (rather than the cap) ended it.
pub fn default_horizon(curve: &dyn Curve, cycle: Duration) -> (usize, bool) {
    let cap_cycles = (DEFAULT_HORIZON_YEARS / cycle.in_unit(TimeUnit::Years))
        .ceil()
        .clamp(1.0, MAX_HORIZON_CYCLES as f64) as usize;
    let to_curve = cycle.unit.factor_to(curve.time_unit());
    let threshold = DEFAULT_HORIZON_SURVIVAL.ln();
    for j in 1..=cap_cycles {
        if curve.log_survival(j as f64 * cycle.value * to_curve) < threshold {
            return (j, true);
        }
    }
    (cap_cycles, false)
}

/// The truncation table for K = 1..n from boundary log-survival `log_s` (length n + 1).
pub fn truncation_table(log_s: &[f64], cycle: f64) -> Vec<TruncationRow> {
    let n = log_s.len() - 1;
    let s: Vec<f64> = log_s.iter().map(|l| l.exp()).collect();
    // prefix[j] = trapezoid life-years over [0, t_j] of the untruncated chain.
    let mut prefix = vec![0.0; n + 1];
    for j in 1..=n {
        prefix[j] = prefix[j - 1] + 0.5 * cycle * (s[j - 1] + s[j]);
    }
    let ly = prefix[n];
    (1..=n)
        .into_par_iter()
        .map(|k| {
            let p = exit_probability(log_s[k - 1], log_s[k]);
            let remaining = n - k;
            // ln(1 - p) of the repeated tunnel; -∞ once survival has reached 0.
            let ln_q = if log_s[k] == f64::NEG_INFINITY {
                f64::NEG_INFINITY
            } else {
                log_s[k] - log_s[k - 1]
            };
            let q = ln_q.exp();
            // Trapezoid over the geometric tail: c·S_K·(1 + q)/2·Σ_{m<remaining} q^m.
            let geometric = if remaining == 0 || s[k] == 0.0 {
                0.0
            } else if ln_q == 0.0 {
                remaining as f64
            } else {
                (remaining as f64 * ln_q).exp_m1() / ln_q.exp_m1()
            };
            let ly_cut = prefix[k] + 0.5 * cycle * s[k] * (1.0 + q) * geometric;
            let mut gap: f64 = 0.0;
            let mut chain = s[k];
            for j in k + 1..=n {
                chain *= q;
                gap = gap.max((chain - s[j]).abs());
                // Both sequences only fall from here, so no later gap can exceed the current one.
                if chain.max(s[j]) <= gap {
                    break;
                }
            }
            TruncationRow {
                count: k,
                max_surv_gap: gap,
                ly_rel_error: ((ly_cut - ly) / ly).abs(),
                p_exit_last: p,
            }
        })
        .collect()
}

/// Smallest K with both `max_surv_gap` and `ly_rel_error` ≤ `tolerance` (K = n always qualifies).
pub fn suggested_count(rows: &[TruncationRow], tolerance: f64) -> usize {
    rows.iter()
        .find(|r| r.max_surv_gap <= tolerance && r.ly_rel_error <= tolerance)
        .map_or(rows.len(), |r| r.count)
}

/// Shortest stretch, in years, over which `p_exit` must hold still to count as stable: two
/// years of age always hold a birthday, where a background life table's hazard steps, so a
/// hazard that is flat only within one year of age (or only in the last cycles before the
/// horizon) cannot pass.
pub const STABLE_WINDOW_YEARS: f64 = 2.0;

/// Number of tunnels the stability window spans with cycles of `cycle`: whole cycles covering
/// [`STABLE_WINDOW_YEARS`] (a ratio within 1e-9 of a whole number counts as that number), and
/// never fewer than 2.
pub fn stable_window(cycle: Duration) -> usize {
    let ratio = STABLE_WINDOW_YEARS / cycle.in_unit(TimeUnit::Years);
    let whole = ratio.round();
    let cycles = if (ratio - whole).abs() <= 1e-9 * whole.max(1.0) {
        whole
    } else {
        ratio.ceil()
    };
    cycles.clamp(2.0, MAX_HORIZON_CYCLES as f64 + 1.0) as usize
}

/// The first tunnel k from which `p_exit` is stable: every later tunnel up to the horizon has
/// p_exit within `tolerance` (relative) of tunnel k's, |p_j - p_k| ≤ tolerance·p_k for all
/// j ≥ k, and tunnels k..n span at least `window` tunnels ([`stable_window`]). Repeating
/// p_exit(k) then reproduces every later probability within the tolerance. `None` ("not
/// reached") when no tunnel qualifies: a drifting hazard, a hazard flat only between
/// birthdays, or a horizon too short to show the window. `p_exit[0]` is tunnel 1.
pub fn stable_count(p_exit: &[f64], tolerance: f64, window: usize) -> Option<usize> {
    let n = p_exit.len();
    if n < window.max(1) {
        return None;
    }
    let (mut low, mut high) = (f64::INFINITY, f64::NEG_INFINITY);
    let mut first = None;
    // Walk back from the horizon, keeping the range of p_exit over tunnels j..n.
    for j in (0..n).rev() {
        let p = p_exit[j];
        low = low.min(p);
        high = high.max(p);
        if n - j >= window && high - p <= tolerance * p && p - low <= tolerance * p {
            first = Some(j + 1);
        }
    }
    first
}

/// One method's row of the within-cycle table. Every life-year figure is in years, whatever
/// the curve's or the cycle's unit.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct WithinCycleRow {
    /// The method.
    pub method: Method,
    /// Life-years to the horizon from the boundary survival, in years.
    pub life_years: f64,
    /// Exact ∫₀^horizon S(t) dt, in years.
    pub exact: f64,
    /// Signed error, `life_years` - `exact`, in years.
    pub error: f64,
    /// `error` / `exact`.
    pub rel_error: f64,
    /// The method on the discounted integrand S(t)·(1 + r)^(-t in years), in years.
    pub discounted_life_years: f64,
    /// Exact ∫₀^horizon S(t)·(1 + r)^(-t in years) dt, in years.
    pub discounted_exact: f64,
    /// Signed error, `discounted_life_years` - `discounted_exact`, in years.
    pub discounted_error: f64,
    /// `discounted_error` / `discounted_exact`.
    pub discounted_rel_error: f64,
}

/// ∫₀^end of `f` in 64 adaptive pieces (survival can fall steeply in one part of a long horizon).
fn integrate_pieces(f: impl Fn(f64) -> f64, end: f64) -> f64 {
    const PIECES: usize = 64;
    let w = end / PIECES as f64;
    (0..PIECES)
        .map(|i| crate::numeric::integrate(&f, i as f64 * w, (i + 1) as f64 * w, 1e-12))
        .sum()
}

/// The within-cycle table over n cycles: each method beside the exact integrals, undiscounted
/// and discounted at `discount` a year (applied as (1 + r)^(-t) at the cycle boundaries).
/// Life-years in years: the integrals over time in the cycle's unit are converted at the end.
pub fn within_cycle_table(
    curve: &dyn Curve,
    cycle: Duration,
    n: usize,
    discount: f64,
) -> Vec<WithinCycleRow> {
    let log_s = boundary_log_survival(curve, cycle, n);
    let years_per_unit = cycle.unit.factor_to(TimeUnit::Years);
    let to_curve = cycle.unit.factor_to(curve.time_unit());
    let ln_d = (1.0 + discount).ln();
    let plain: Vec<f64> = log_s.iter().map(|l| l.exp()).collect();
    let discounted: Vec<f64> = log_s
        .iter()
        .enumerate()
        .map(|(j, l)| (l - ln_d * j as f64 * cycle.value * years_per_unit).exp())
        .collect();
    let end = n as f64 * cycle.value;
    // The curve's own restricted mean (closed form where the family has one), in years.
    let exact = curve.restricted_mean(end * to_curve) / to_curve * years_per_unit;
    let discounted_exact = integrate_pieces(
        |t| (curve.log_survival(t * to_curve) - ln_d * t * years_per_unit).exp(),
        end,
    ) * years_per_unit;
    METHODS
        .iter()
        .map(|&method| {
            let ly = integrate_boundaries(&plain, cycle.value, method) * years_per_unit;
            let dly = integrate_boundaries(&discounted, cycle.value, method) * years_per_unit;
            WithinCycleRow {
                method,
                life_years: ly,
                exact,
                error: ly - exact,
                rel_error: (ly - exact) / exact,
                discounted_life_years: dly,
                discounted_exact,
                discounted_error: dly - discounted_exact,
                discounted_rel_error: (dly - discounted_exact) / discounted_exact,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::curve::ParametricCurve;
    use crate::families::{Exponential, Gompertz, Weibull};

    fn months(value: f64) -> Duration {
        Duration {
            value,
            unit: TimeUnit::Months,
        }
    }

    #[test]
    fn half_cycle_equals_trapezoid_without_discounting() {
        // Common practice: with constant per-cycle payoff and no discounting the half-cycle
        // correction and the trapezoid rule give the same life-years.
        let curve = ParametricCurve::new(&Weibull, vec![0.8, 40.0], TimeUnit::Months).unwrap();
        for n in [1, 2, 7, 120] {
            let rows = within_cycle_table(&curve, months(1.0), n, 0.0);
            let half = rows[2].life_years;
            let trap = rows[3].life_years;
            assert!((half - trap).abs() <= 1e-12 * trap, "n={n}");
        }
    }

    #[test]
    fn trapezoid_order_two_and_simpson_order_four() {
        // Composite trapezoid error is O(h²), composite Simpson O(h⁴) on a smooth integrand
        // (Burden and Faires, Numerical Analysis, composite rules; from memory). A Weibull
        // with shape 2 or 3 is smooth at 0 (S is a power series in t²/t³), so the orders show.
        for shape in [2.0, 3.0] {
            let curve =
                ParametricCurve::new(&Weibull, vec![shape, 20.0], TimeUnit::Months).unwrap();
            let horizon = 32.0;
            let errors = |method: Method| -> Vec<f64> {
                [2.0, 1.0, 0.5, 0.25]
                    .iter()
                    .map(|&h| {
                        let n = (horizon / h) as usize;
                        let rows = within_cycle_table(&curve, months(h), n, 0.0);
                        rows.iter().find(|r| r.method == method).unwrap().error
                    })
                    .collect()
            };
            for (method, order) in [(Method::Trapezoid, 2.0), (Method::Simpson, 4.0)] {
                let e = errors(method);
                for w in e.windows(2) {
                    let observed = (w[0] / w[1]).abs().log2();
                    assert!(
                        (observed - order).abs() < 0.15,
                        "shape {shape} {method:?}: observed order {observed} from {e:?}"
                    );
                }
            }
        }
    }

    #[test]
    fn simpson_is_exact_for_cubics_with_odd_and_even_intervals() {
        // Simpson's 1/3 and 3/8 rules integrate cubics exactly (Burden and Faires; from memory).
        let f = |t: f64| 1.0 - 0.3 * t + 0.05 * t * t - 0.002 * t * t * t;
        let exact = |t: f64| t - 0.15 * t * t + 0.05 / 3.0 * t.powi(3) - 0.0005 * t.powi(4);
        for n in [2usize, 3, 4, 5, 9] {
            let h = 0.7;
            let values: Vec<f64> = (0..=n).map(|j| f(j as f64 * h)).collect();
            let got = integrate_boundaries(&values, h, Method::Simpson);
            assert!((got - exact(n as f64 * h)).abs() < 1e-12, "n={n}");
        }
    }

    #[test]
    fn exact_life_expectancy_closed_forms() {
        // Exponential mean 1/rate; Weibull mean scale·Γ(1 + 1/shape) (standard closed forms;
        // e.g. Collett, Modelling Survival Data in Medical Research, 2015, chapter 5).
        let e = ParametricCurve::new(&Exponential, vec![0.05], TimeUnit::Months).unwrap();
        assert!((e.restricted_mean(1e5) - 20.0).abs() < 1e-9);
        let w = ParametricCurve::new(&Weibull, vec![1.5, 12.0], TimeUnit::Months).unwrap();
        // Γ(1 + 1/1.5) = Γ(5/3) = 0.902745292950934 (from memory, A&S table 6.1).
        assert!((w.restricted_mean(1e6) - 12.0 * 0.902_745_292_950_934).abs() < 1e-9);
        // Restricted mean where the horizon cuts the curve: scale·Γ(1+1/k)·P(1/k, (τ/scale)^k),
        // compared with adaptive quadrature of S itself.
        let numeric = crate::numeric::integrate(|t| w.survival(t), 0.0, 10.0, 1e-13);
        assert!((w.restricted_mean(10.0) - numeric).abs() < 1e-9);
    }

    #[test]
    fn truncation_errors_vanish_for_constant_hazard_and_at_full_count() {
        // A constant hazard has the same p_exit in every tunnel: one tunnel is exact.
        let curve = ParametricCurve::new(&Exponential, vec![0.03], TimeUnit::Months).unwrap();
        let log_s = boundary_log_survival(&curve, months(1.0), 240);
        let rows = truncation_table(&log_s, 1.0);
        assert!(rows[0].max_surv_gap < 1e-13 && rows[0].ly_rel_error < 1e-12);
        assert_eq!(suggested_count(&rows, 1e-3), 1);
        assert_eq!(
            stable_count(
                &rows.iter().map(|r| r.p_exit_last).collect::<Vec<_>>(),
                1e-3,
                stable_window(months(1.0))
            ),
            Some(1)
        );
        let curve = ParametricCurve::new(&Weibull, vec![1.6, 30.0], TimeUnit::Months).unwrap();
        let log_s = boundary_log_survival(&curve, months(1.0), 150);
        let rows = truncation_table(&log_s, 1.0);
        assert_eq!(rows.last().unwrap().max_surv_gap, 0.0);
        assert!(suggested_count(&rows, 1e-3) > 1);
    }

    #[test]
    fn life_years_are_in_years_for_a_monthly_curve() {
        // Restricted means by calculus, not by the code: exponential ∫₀^T e^(-λt) dt =
        // (1 - e^(-λT))/λ; Weibull with shape 1/2, substituting u = (t/s)^(1/2):
        // ∫₀^T e^(-(t/s)^(1/2)) dt = 2s·(1 - (1 + U)·e^(-U)), U = (T/s)^(1/2). Time in months,
        // life-years = months / 12 (interface: a month is a twelfth of a year).
        let rate = 0.05;
        let exponential = ParametricCurve::new(&Exponential, vec![rate], TimeUnit::Months).unwrap();
        let (s, t_end) = (40.0, 120.0);
        let weibull = ParametricCurve::new(&Weibull, vec![0.5, s], TimeUnit::Months).unwrap();
        let u = (t_end / s).sqrt();
        let cases: [(&dyn Curve, f64); 2] = [
            (&exponential, (1.0 - (-rate * t_end).exp()) / rate / 12.0),
            (&weibull, 2.0 * s * (1.0 - (1.0 + u) * (-u).exp()) / 12.0),
        ];
        for (curve, expected_years) in cases {
            // The same curve and horizon with monthly, weekly and yearly cycles.
            for cycle in [
                months(1.0),
                Duration {
                    value: 120.0 * 365.25 / 12.0 / 7.0 / 520.0,
                    unit: TimeUnit::Weeks,
                },
                Duration {
                    value: 1.0,
                    unit: TimeUnit::Years,
                },
            ] {
                let n = (t_end / cycle.in_unit(TimeUnit::Months)).round() as usize;
                let rows = within_cycle_table(curve, cycle, n, 0.0);
                for r in &rows {
                    assert!(
                        (r.exact - expected_years).abs() < 1e-9 * expected_years,
                        "{}: {} years, expected {expected_years}",
                        curve.describe(),
                        r.exact
                    );
                    assert!((r.error - (r.life_years - expected_years)).abs() < 1e-9);
                    // Without discounting the discounted columns are the plain ones.
                    assert!((r.discounted_exact - expected_years).abs() < 1e-9 * expected_years);
                }
            }
        }
        // The trapezoid life-years from the boundary survival, by hand, in years.
        let rows = within_cycle_table(&exponential, months(1.0), 120, 0.035);
        let by_hand: f64 = (0..120)
            .map(|j| 0.5 * ((-rate * j as f64).exp() + (-rate * (j + 1) as f64).exp()))
            .sum::<f64>()
            / 12.0;
        let trapezoid = rows.iter().find(|r| r.method == Method::Trapezoid).unwrap();
        assert!((trapezoid.life_years - by_hand).abs() < 1e-12);
    }

    #[test]
    fn stability_needs_all_later_tunnels_within_tolerance_over_the_window() {
        // A hazard drifting by 0.05% a tunnel passes a step-by-step test at 0.1% but is not
        // stable: after 10 tunnels it has moved 0.5%.
        let drifting: Vec<f64> = (0..300).map(|j| 0.01 * 1.0005f64.powi(j)).collect();
        assert_eq!(stable_count(&drifting, 1e-3, 24), None);
        // Settles at tunnel 101 and stays for 200 tunnels.
        let settling: Vec<f64> = (0..300)
            .map(|j| {
                if j < 100 {
                    0.02 - 0.0001 * j as f64
                } else {
                    0.01
                }
            })
            .collect();
        assert_eq!(stable_count(&settling, 1e-3, 24), Some(101));
        // Flat only in the last 23 tunnels, fewer than the window: not reached.
        let late: Vec<f64> = (0..100)
            .map(|j| if j < 77 { 0.01 + 0.001 * j as f64 } else { 0.2 })
            .collect();
        assert_eq!(stable_count(&late, 1e-3, 24), None);
        assert_eq!(stable_count(&late, 1e-3, 23), Some(78));
        // Two years: 24 monthly, 104.36 → 105 weekly, 2 yearly cycles (never fewer than 2).
        assert_eq!(stable_window(months(1.0)), 24);
        assert_eq!(
            stable_window(Duration {
                value: 1.0,
                unit: TimeUnit::Weeks
            }),
            105
        );
        assert_eq!(
            stable_window(Duration {
                value: 5.0,
                unit: TimeUnit::Years
            }),
            2
        );
    }

    #[test]
    fn a_hazard_flat_only_between_birthdays_is_not_stable() {
        // A negligible disease hazard floored by a life table whose qx rises every year: p_exit
        // is constant within each year of age and steps at each birthday. The step-to-step
        // definition called the last year before a 30-month horizon "stable from tunnel 25";
        // the background hazard is -ln(1 - qx) a year (interface: life table convention).
        use crate::adjust::{
            background::BeyondTable, lifetable, Adjuster, Adjustments, BackgroundMode,
            BackgroundSettings,
        };
        let table = lifetable::parse(
            "rising.csv",
            b"age,qx\n60,0.010\n61,0.011\n62,0.0121\n63,0.01331\n",
            None,
        )
        .unwrap();
        let settings = |beyond| Adjustments {
            background: Some(BackgroundSettings {
                path: "rising.csv".into(),
                start_age: 60.0,
                sex: None,
                mode: BackgroundMode::Floor,
                beyond,
            }),
            ..Default::default()
        };
        let tiny = ParametricCurve::new(&Exponential, vec![1e-9], TimeUnit::Months).unwrap();
        let floored = Adjuster::new(settings(BeyondTable::Error), Some(table.clone()))
            .unwrap()
            .adjust(tiny.clone())
            .unwrap();
        let log_s = boundary_log_survival(&floored, months(1.0), 30);
        let p: Vec<f64> = truncation_table(&log_s, 1.0)
            .iter()
            .map(|r| r.p_exit_last)
            .collect();
        // Within age 62 (tunnels 25–30) p_exit is 1 - (1 - 0.0121)^(1/12).
        let in_62 = 1.0 - (1.0f64 - 0.0121).powf(1.0 / 12.0);
        for value in &p[24..30] {
            assert!((value - in_62).abs() < 1e-12 * in_62);
        }
        assert_eq!(stable_count(&p, 1e-3, stable_window(months(1.0))), None);
        // The earlier definition (each step within the tolerance of the one before, to the
        // horizon) is fooled: it finds tunnel 25, the first of the last year of age.
        let step_to_step = (0..p.len() - 1)
            .rev()
            .take_while(|&j| (p[j + 1] - p[j]).abs() <= 1e-3 * p[j])
            .last()
            .map_or(p.len(), |j| j + 1);
        assert_eq!(step_to_step, 25);
        // With hold-last the table's last qx (age 63) holds for every later age, so from age 63
        // (tunnel 37) p_exit is 1 - (1 - 0.01331)^(1/12) in every tunnel: a real plateau.
        let held = Adjuster::new(settings(BeyondTable::HoldLast), Some(table))
            .unwrap()
            .adjust(tiny)
            .unwrap();
        let log_s = boundary_log_survival(&held, months(1.0), 120);
        let p: Vec<f64> = truncation_table(&log_s, 1.0)
            .iter()
            .map(|r| r.p_exit_last)
            .collect();
        assert_eq!(stable_count(&p, 1e-3, stable_window(months(1.0))), Some(37));
    }

    #[test]
    fn truncation_gap_matches_direct_chain() {
        // The chain cut at K written out directly, without the geometric shortcuts.
        let curve = ParametricCurve::new(&Weibull, vec![0.7, 25.0], TimeUnit::Months).unwrap();
        let n = 60;
        let log_s = boundary_log_survival(&curve, months(1.0), n);
        let s: Vec<f64> = log_s.iter().map(|l| l.exp()).collect();
        let rows = truncation_table(&log_s, 1.0);
        for k in [1, 5, 17, 59] {
            let p = 1.0 - s[k] / s[k - 1];
            let mut chain = s.clone();
            for j in k + 1..=n {
                chain[j] = chain[j - 1] * (1.0 - p);
            }
            let gap = (0..=n).map(|j| (chain[j] - s[j]).abs()).fold(0.0, f64::max);
            let ly = |v: &[f64]| integrate_boundaries(v, 1.0, Method::Trapezoid);
            let rel = ((ly(&chain) - ly(&s)) / ly(&s)).abs();
            assert!((rows[k - 1].max_surv_gap - gap).abs() < 1e-14, "k={k}");
            assert!((rows[k - 1].ly_rel_error - rel).abs() < 1e-12, "k={k}");
        }
    }

    #[test]
    fn plateau_and_zero_survival_stay_finite() {
        // Gompertz with negative shape levels off at exp(rate/shape): p_exit → 0.
        let plateau = ParametricCurve::new(&Gompertz, vec![-0.2, 0.05], TimeUnit::Months).unwrap();
        let (n, by_threshold) = default_horizon(&plateau, months(1.0));
        assert!(!by_threshold && n == 1200);
        let log_s = boundary_log_survival(&plateau, months(1.0), n);
        let rows = truncation_table(&log_s, 1.0);
        assert!(rows.last().unwrap().p_exit_last < 1e-40);
        let table = within_cycle_table(&plateau, months(1.0), n, 0.035);
        for r in rows
            .iter()
            .flat_map(|r| [r.max_surv_gap, r.ly_rel_error, r.p_exit_last])
        {
            assert!(r.is_finite());
        }
        for r in &table {
            assert!(r.life_years.is_finite() && r.discounted_rel_error.is_finite());
        }
        // A Gompertz with a steep rising hazard: survival underflows to exactly 0.
        let steep = ParametricCurve::new(&Gompertz, vec![20.0, 1.0], TimeUnit::Months).unwrap();
        let log_s = boundary_log_survival(&steep, months(1.0), 50);
        assert_eq!(log_s[49], f64::NEG_INFINITY);
        let rows = truncation_table(&log_s, 1.0);
        assert_eq!(rows[49].p_exit_last, 1.0);
        for r in &rows {
            assert!(
                r.max_surv_gap.is_finite() && r.ly_rel_error.is_finite(),
                "{r:?}"
            );
        }
    }

    #[test]
    fn method_names_follow_the_interface() {
        // The within-cycle methods as the interface contract names them (/work/shared
        // interface.md, `horizon`: start, end, half-cycle, trapezoid, simpson), in table order.
        let names: Vec<&str> = METHODS.iter().map(|m| m.name()).collect();
        assert_eq!(
            names,
            ["start", "end", "half-cycle", "trapezoid", "simpson"]
        );
    }

    #[test]
    fn default_horizon_stops_at_the_first_boundary_below_the_threshold() {
        // Exponential, 0.05 a month: S(t) < 0.001 once t > ln(1000)/0.05 = 138.155 months
        // (by hand), so the first monthly boundary below is 139 and the first yearly one is
        // year 12 (144 months).
        let curve = ParametricCurve::new(&Exponential, vec![0.05], TimeUnit::Months).unwrap();
        assert!((1000f64.ln() / 0.05 - 138.155).abs() < 1e-3);
        assert_eq!(default_horizon(&curve, months(1.0)), (139, true));
        let year = Duration {
            value: 1.0,
            unit: TimeUnit::Years,
        };
        assert_eq!(default_horizon(&curve, year), (12, true));
        // A curve that never falls below: the 100-year cap, in whole cycles (100 yearly, and
        // 100·365.25/7 = 5217.9 → 5218 weekly cycles, by hand).
        let slow = ParametricCurve::new(&Exponential, vec![1e-6], TimeUnit::Months).unwrap();
        assert_eq!(default_horizon(&slow, year), (100, false));
        let week = Duration {
            value: 1.0,
            unit: TimeUnit::Weeks,
        };
        assert_eq!(default_horizon(&slow, week), (5218, false));
    }

    #[test]
    fn discounted_columns_match_closed_forms() {
        // Exponential hazard λ a month discounted at r a year is an exponential with rate
        // μ = λ + ln(1 + r)/12 a month (calculus, by hand): exact ∫₀^T = (1 - e^(-μT))/μ;
        // the start rule is a geometric sum Σ_{j<n} e^(-μj)·h, the trapezoid rule the mean of
        // the start and end sums. Checked with monthly cycles and, for the unit conversions,
        // yearly cycles (μ and time in years, μ_y = 12λ + ln(1 + r)).
        let (rate, r) = (0.05, 0.035);
        let curve = ParametricCurve::new(&Exponential, vec![rate], TimeUnit::Months).unwrap();
        let cases = [
            (
                months(1.0),
                120,
                rate + (1.0f64 + r).ln() / 12.0,
                1.0 / 12.0,
            ),
            (
                Duration {
                    value: 1.0,
                    unit: TimeUnit::Years,
                },
                10,
                12.0 * rate + (1.0f64 + r).ln(),
                1.0,
            ),
        ];
        for (cycle, n, mu, years_per_cycle) in cases {
            // μ per cycle, and the sums in cycles converted to years at the end.
            let mu_c = mu * cycle.value;
            let exact = (1.0 - (-mu_c * n as f64).exp()) / mu_c * years_per_cycle;
            let start: f64 =
                (0..n).map(|j| (-mu_c * j as f64).exp()).sum::<f64>() * years_per_cycle;
            let end: f64 = (1..=n).map(|j| (-mu_c * j as f64).exp()).sum::<f64>() * years_per_cycle;
            let rows = within_cycle_table(&curve, cycle, n, r);
            for (method, by_hand) in [
                (Method::Start, start),
                (Method::End, end),
                (Method::Trapezoid, 0.5 * (start + end)),
                (Method::HalfCycle, 0.5 * (start + end)),
            ] {
                let row = rows.iter().find(|row| row.method == method).unwrap();
                assert!(
                    (row.discounted_exact - exact).abs() < 1e-9 * exact,
                    "{method:?}: {} vs {exact}",
                    row.discounted_exact
                );
                assert!(
                    (row.discounted_life_years - by_hand).abs() < 1e-12 * by_hand,
                    "{method:?}: {} vs {by_hand}",
                    row.discounted_life_years
                );
                assert!((row.discounted_error - (by_hand - exact)).abs() < 1e-9 * exact);
                let rel = (by_hand - exact) / exact;
                assert!(
                    (row.discounted_rel_error - rel).abs() < 1e-9,
                    "{method:?}: {} vs {rel}",
                    row.discounted_rel_error
                );
                // Discounting lowers the life-years.
                assert!(row.discounted_life_years < row.life_years);
            }
        }
    }
}
