//! `--background-mode floor`: the curve is all-cause, and at every moment the hazard is the
//! larger of the curve's and the background's, so the extrapolated risk of death never falls
//! below that of the general population of the same age and sex.
//!
//! Within a year of age the background hazard is a constant h_b, so the combined cumulative
//! hazard over a piece is exact once the times where the curve's hazard crosses h_b are known:
//! the curve's own cumulative-hazard increment where it is the larger, h_b × length where the
//! background is. Crossings are found by sampling the hazard 32 times per year of age and
//! bisecting each sign change to machine precision; a crossing pair closer together than a
//! sampling step can be missed, which changes the cumulative hazard only by the area of that
//! sliver between two nearly equal hazards.

use super::background::BackgroundHazard;
use crate::curve::{Curve, PiecewiseHazard};
use crate::units::TimeUnit;

/// Hazard samples per piece (at most one year of age) when looking for crossings.
const SAMPLES: usize = 32;

/// An all-cause curve whose hazard is never below the background hazard.
pub struct FlooredCurve {
    /// All-cause curve (after any treatment effect).
    pub curve: Box<dyn Curve>,
    /// Background hazard, in the curve's time unit.
    pub background: BackgroundHazard,
    /// Cumulative combined hazard at each whole-year age boundary within the table (index 0 is t = 0).
    prefix: Vec<f64>,
}

/// A stretch of time on which one of the two hazards is the larger.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Stretch {
    from: f64,
    to: f64,
    /// The background hazard is strictly the larger (the floor binds).
    binds: bool,
}

impl FlooredCurve {
    /// Builds the floored curve and precomputes its cumulative hazard at each birthday in the table.
    pub fn new(curve: Box<dyn Curve>, background: BackgroundHazard) -> Self {
        let mut floored = FlooredCurve {
            curve,
            background,
            prefix: vec![0.0],
        };
        let birthdays = (floored.background.table.end_age() - floored.background.start_age.floor())
            .max(0.0) as usize;
        for k in 1..=birthdays {
            let (a, b) = (floored.boundary(k - 1), floored.boundary(k));
            let next = floored.prefix[k - 1] + floored.piece_hazard(a, b);
            floored.prefix.push(next);
        }
        floored
    }

    /// Time of the k-th piece boundary: 0, then each birthday after entry.
    fn boundary(&self, k: usize) -> f64 {
        if k == 0 {
            0.0
        } else {
            self.background
                .time_at_age(self.background.start_age.floor() + k as f64)
        }
    }

    /// Index k of the piece [boundary(k), boundary(k + 1)) holding `t`.
    fn piece_index(&self, t: f64) -> usize {
        let mut k = (self.background.age_at(t).floor() - self.background.start_age.floor()).max(0.0)
            as usize;
        while k > 0 && self.boundary(k) > t {
            k -= 1;
        }
        while self.boundary(k + 1) <= t {
            k += 1;
        }
        k
    }

    /// Whether the background hazard `h_b` strictly exceeds the curve's hazard at `u`
    /// (the curve's hazard at 0 is taken as its right limit).
    fn background_above(&self, u: f64, h_b: f64, width: f64) -> bool {
        let at = if u > 0.0 { u } else { 1e-12 * width };
        // A NaN hazard counts as "curve above", so the curve's own (finite) increments are used.
        h_b > self.curve.hazard(at)
    }

    /// Splits [a, b] (within one year of age) into stretches where the floor binds or not.
    fn stretches(&self, a: f64, b: f64) -> Vec<Stretch> {
        let h_b = self.background.hazard(0.5 * (a + b));
        if h_b == f64::INFINITY {
            return vec![Stretch {
                from: a,
                to: b,
                binds: true,
            }];
        }
        let width = b - a;
        let mut out: Vec<Stretch> = Vec::new();
        let mut from = a;
        let mut state = self.background_above(a, h_b, width);
        let mut previous = a;
        for i in 1..=SAMPLES {
            let u = if i == SAMPLES {
                b
            } else {
                a + width * i as f64 / SAMPLES as f64
            };
            let here = self.background_above(u, h_b, width);
            if here != state {
                // Bisect [previous, u] for the crossing.
                let (mut lo, mut hi) = (previous, u);
                for _ in 0..200 {
                    let mid = 0.5 * (lo + hi);
                    if mid <= lo || mid >= hi {
                        break;
                    }
                    if self.background_above(mid, h_b, width) == state {
                        lo = mid;
                    } else {
                        hi = mid;
                    }
                }
                out.push(Stretch {
                    from,
                    to: hi,
                    binds: state,
                });
                from = hi;
                state = here;
            }
            previous = u;
        }
        out.push(Stretch {
            from,
            to: b,
            binds: state,
        });
        out
    }

    /// Combined cumulative hazard over [a, b] within one year of age (may be +∞).
    fn piece_hazard(&self, a: f64, b: f64) -> f64 {
        if b <= a {
            return 0.0;
        }
        let h_b = self.background.hazard(0.5 * (a + b));
        let mut total = 0.0;
        for s in self.stretches(a, b) {
            total += if s.binds {
                if h_b == f64::INFINITY {
                    f64::INFINITY
                } else {
                    h_b * (s.to - s.from)
                }
            } else {
                let (l0, l1) = (
                    self.curve.log_survival(s.from),
                    self.curve.log_survival(s.to),
                );
                if l1 == f64::NEG_INFINITY {
                    f64::INFINITY
                } else {
                    l0 - l1
                }
            };
        }
        total
    }

    /// Splits [t0, t1] at birthdays into pieces of constant background hazard.
    fn pieces(&self, t0: f64, t1: f64) -> Vec<(f64, f64)> {
        let mut points = vec![t0];
        points.extend(self.background.breakpoints(t0, t1));
        points.push(t1);
        points.windows(2).map(|w| (w[0], w[1])).collect()
    }

    /// Length of [t0, t1] during which the floor binds (background hazard strictly larger).
    pub fn binding_time(&self, t0: f64, t1: f64) -> f64 {
        self.pieces(t0, t1)
            .into_iter()
            .flat_map(|(a, b)| self.stretches(a, b))
            .filter(|s| s.binds)
            .map(|s| s.to - s.from)
            .sum()
    }

    /// First time in [0, t_max] at which the floor binds, if it does.
    pub fn first_binding(&self, t_max: f64) -> Option<f64> {
        self.first_binding_from(0.0, t_max)
    }

    /// First time in [t_min, t_max] at which the floor binds, if it does.
    pub fn first_binding_from(&self, t_min: f64, t_max: f64) -> Option<f64> {
        self.pieces(t_min, t_max)
            .into_iter()
            .flat_map(|(a, b)| self.stretches(a, b))
            .find(|s| s.binds && s.to > s.from)
            .map(|s| s.from)
    }
}

impl Curve for FlooredCurve {
    fn log_survival(&self, t: f64) -> f64 {
        if t <= 0.0 {
            return 0.0;
        }
        let k = self.piece_index(t);
        let mut cumulative = if k < self.prefix.len() {
            self.prefix[k]
        } else {
            // Beyond the table (hold-last): continue birthday by birthday from the last prefix.
            let last = self.prefix.len() - 1;
            let mut c = self.prefix[last];
            for j in last..k {
                c += self.piece_hazard(self.boundary(j), self.boundary(j + 1));
            }
            c
        };
        cumulative += self.piece_hazard(self.boundary(k), t);
        if cumulative == f64::INFINITY {
            f64::NEG_INFINITY
        } else {
            -cumulative
        }
    }
    fn hazard(&self, t: f64) -> f64 {
        self.curve.hazard(t).max(self.background.hazard(t))
    }
    fn time_unit(&self) -> TimeUnit {
        self.curve.time_unit()
    }
    fn cycle_columns(&self, t0: f64, t1: f64) -> Vec<(&'static str, f64)> {
        vec![("floor_share", self.binding_time(t0, t1) / (t1 - t0))]
    }
    fn describe(&self) -> String {
        format!(
            "{}; hazard floored at background mortality from {} ({}) from age {}",
            self.curve.describe(),
            self.background.table.file,
            self.background.table.column,
            crate::format::readable(self.background.start_age)
        )
    }
    /// The larger of the curve's pieces and the background's year-of-age pieces on each interval.
    fn piecewise_hazard(&self, until: f64) -> Option<PiecewiseHazard> {
        let curve = self.curve.piecewise_hazard(until)?;
        Some(curve.merged(&self.background.piecewise(until), f64::max))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::adjust::background::BeyondTable;
    use crate::adjust::lifetable::parse;
    use crate::curve::ParametricCurve;
    use crate::discretise::tunnel_table;
    use crate::families::{Exponential, LogLogistic, Weibull};
    use crate::units::Duration;

    /// A smooth invented table from age 40 to 110 (Gompertz-like growth of qx, closing at 1).
    fn table_text() -> String {
        let mut text = String::from("age,qx\n");
        for age in 40..110 {
            let q = (0.001 * (0.09 * (age as f64 - 40.0)).exp()).min(0.6);
            text.push_str(&format!("{age},{q}\n"));
        }
        text.push_str("110,1\n");
        text
    }

    fn background(start_age: f64, unit: TimeUnit) -> BackgroundHazard {
        let table = parse("life.csv", table_text().as_bytes(), None).unwrap();
        BackgroundHazard::new(table, start_age, BeyondTable::Error, unit).unwrap()
    }

    #[test]
    fn p_exit_is_never_below_background_alone() {
        // Floor property (issue 4): every cycle's p_exit ≥ the background probability alone,
        // 1 - exp(-H_b over the cycle) (common practice); tolerance 1e-14 for rounding.
        for (curve, start) in [
            (
                ParametricCurve::new(&LogLogistic, vec![1.5, 30.0], TimeUnit::Months).unwrap(),
                63.7,
            ),
            (
                ParametricCurve::new(&Weibull, vec![0.6, 200.0], TimeUnit::Months).unwrap(),
                45.2,
            ),
        ] {
            let bg = background(start, TimeUnit::Months);
            let floored = FlooredCurve::new(Box::new(curve), bg.clone());
            let cycle = Duration {
                value: 1.0,
                unit: TimeUnit::Months,
            };
            let table = tunnel_table(&floored, cycle, 600);
            let share = &table.extra[0];
            assert_eq!(share.0, "floor_share");
            let mut binds = 0;
            for (i, row) in table.rows.iter().enumerate() {
                let p_bg = -(-bg.cumulative(row.t_start, row.t_end)).exp_m1();
                assert!(row.p_exit >= p_bg - 1e-14, "tunnel {}", row.tunnel);
                if share.1[i] > 0.0 {
                    binds += 1;
                }
            }
            assert!(binds > 0, "the floor should bind somewhere in 50 years");
        }
    }

    #[test]
    fn exponential_below_and_above_a_step_background() {
        // A constant curve hazard λ against a constant background h_b: the combined hazard is
        // max(λ, h_b), so the cycle probability is 1 - exp(-max(λ, h_b)Δ) (definition of the floor).
        let text = "age,qx\n60,0.02\n61,0.02\n62,0.3\n63,0.3\n";
        let table = parse("life.csv", text.as_bytes(), None).unwrap();
        let bg = BackgroundHazard::new(table, 60.0, BeyondTable::Error, TimeUnit::Years).unwrap();
        let rate = 0.1;
        let floored = FlooredCurve::new(
            Box::new(ParametricCurve::new(&Exponential, vec![rate], TimeUnit::Years).unwrap()),
            bg,
        );
        let cycle = Duration {
            value: 0.5,
            unit: TimeUnit::Years,
        };
        let t = tunnel_table(&floored, cycle, 8);
        let h_high = -(0.7f64.ln());
        for row in &t.rows {
            let h = if row.t_start < 2.0 { rate } else { h_high };
            assert!((row.p_exit - (1.0 - (-h * 0.5).exp())).abs() < 1e-14);
        }
        assert_eq!(t.extra[0].1, vec![0.0, 0.0, 0.0, 0.0, 1.0, 1.0, 1.0, 1.0]);
        assert_eq!(floored.first_binding(4.0), Some(2.0)); // As pieces: the larger of the two rates in each year of age.
        let pieces = floored.piecewise_hazard(4.0).unwrap();
        assert_eq!(pieces.cuts, vec![1.0, 2.0, 3.0]);
        for (got, want) in pieces.rates.iter().zip([rate, rate, h_high, h_high]) {
            assert!((got - want).abs() < 1e-15, "{got} vs {want}");
        }
        for i in 0..=40 {
            let t = 0.1 * i as f64;
            let (a, b) = (pieces.cumulative(t), -floored.log_survival(t));
            assert!((a - b).abs() <= 1e-14 * b.max(1.0), "t {t}: {a} vs {b}");
        }
    }

    #[test]
    fn crossing_inside_a_year_is_located_exactly() {
        // Weibull shape 0.5 hazard 0.5·t^-0.5/√scale falls through a constant background hazard
        // h_b at t* = scale·(0.5/(h_b·scale))² (solving the closed-form hazard; from memory).
        let text = "age,qx\n70,0.05\n71,0.05\n72,0.05\n";
        let table = parse("life.csv", text.as_bytes(), None).unwrap();
        let bg = BackgroundHazard::new(table, 70.0, BeyondTable::Error, TimeUnit::Years).unwrap();
        let scale: f64 = 40.0;
        let h_b = -(0.95f64.ln());
        let crossing = scale * (0.5 / (h_b * scale)).powi(2);
        let curve = ParametricCurve::new(&Weibull, vec![0.5, scale], TimeUnit::Years).unwrap();
        let floored = FlooredCurve::new(Box::new(curve), bg);
        let first = floored.first_binding(3.0).unwrap();
        assert!((first - crossing).abs() < 1e-12, "{first} vs {crossing}");
        // Cumulative hazard to 2.5 years: √(t*/scale) + h_b (2.5 - t*).
        let expected = (crossing / scale).sqrt() + h_b * (2.5 - crossing);
        assert!((floored.log_survival(2.5) + expected).abs() < 1e-13);
    }
}
