//! The exact integrals behind every payoff figure: for someone in the chain at time since entry
//! t0, the expected discounted time spent in the chain over parts of [t0, t1], and the
//! expected discounted number of exits over [t0, t1]:
//!
//!   stay(a, b) = ∫_a^b S(u)/S(t0) e^(-δ(u - t0)) du,
//!   exit       = ∫_t0^t1 f(u)/S(t0) e^(-δ(u - t0)) du,
//!
//! with δ = ln(1 + R) per unit of the curve's time. S(u)/S(t0) is taken as e^(ln S(u) - ln S(t0)),
//! so far tails where S itself underflows keep their digits. Closed forms when the curve says its
//! hazard is piecewise constant ([`Curve::piecewise_hazard`]: exponential and piecewise families,
//! through hazard ratios, acceleration factors and background mortality); adaptive Gauss–Kronrod
//! quadrature otherwise (see `docs/payoffs.md`).

use crate::curve::{Curve, PiecewiseHazard};
use crate::discretise::exit_probability;
use crate::numeric::{expm1_over_x, integrate_with_floor};

/// Tolerance asked of the quadrature: [`crate::numeric::integrate`] accepts a piece once its
/// error estimate is within this share of the piece's value, two orders below the 1e-10
/// relative accuracy promised for the payoffs.
pub const QUADRATURE_TOLERANCE: f64 = 1e-12;

/// How the integrals were computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Exactness {
    /// Closed forms of a piecewise-constant hazard.
    ClosedForm,
    /// Adaptive Gauss–Kronrod quadrature to [`QUADRATURE_TOLERANCE`] per piece.
    Quadrature,
}

impl Exactness {
    /// One line for headers and reports.
    pub fn describe(self) -> &'static str {
        match self {
            Exactness::ClosedForm => "closed form (piecewise-constant hazard)",
            Exactness::Quadrature => "adaptive Gauss-Kronrod quadrature, 1e-12 relative per piece",
        }
    }
}

/// The stay integral over each piece of a window and the window's exit integral.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Window {
    /// (a, b, stay(a, b)) for consecutive pieces covering [t0, t1].
    pub pieces: Vec<(f64, f64, f64)>,
    /// Exit integral over [t0, t1]; 0 when not asked for.
    pub exit: f64,
}

/// The integrals of one curve at one discount rate, all times in the curve's unit.
pub(crate) struct Integrator<'a> {
    curve: &'a dyn Curve,
    /// The curve's piecewise-constant hazard over the times integrated, when it has one.
    hazard: Option<PiecewiseHazard>,
    /// Every time where the integrand may have a kink (schedule changes, hazard cuts), sorted.
    breaks: Vec<f64>,
    /// δ per unit of the curve's time.
    delta: f64,
}

impl<'a> Integrator<'a> {
    /// An integrator for `curve` over [0, `until`], discounted at `delta` per unit of its time,
    /// splitting at `changes` (curve's unit): closed forms when the curve's hazard is piecewise
    /// constant up to `until`, quadrature otherwise.
    pub fn new(curve: &'a dyn Curve, delta: f64, changes: &[f64], until: f64) -> Integrator<'a> {
        let unit = curve.time_unit();
        let hazard = curve.piecewise_hazard(until).map(|h| h.in_unit(unit));
        let mut breaks: Vec<f64> = changes
            .iter()
            .chain(hazard.iter().flat_map(|h| &h.cuts))
            .copied()
            .filter(|t| t.is_finite() && *t > 0.0)
            .collect();
        breaks.sort_by(f64::total_cmp);
        breaks.dedup();
        Integrator {
            curve,
            hazard,
            breaks,
            delta,
        }
    }

    /// How this integrator computes.
    pub fn exactness(&self) -> Exactness {
        if self.hazard.is_some() {
            Exactness::ClosedForm
        } else {
            Exactness::Quadrature
        }
    }

    /// The integrals over [t0, t1] for someone present at t0, split at the breaks inside and at
    /// `extra` (sorted, may be empty), with the curve's ln S at the ends given. `want_exit`
    /// asks for the exit integral.
    pub fn window(
        &self,
        t0: f64,
        t1: f64,
        log_s0: f64,
        log_s1: f64,
        extra: &[f64],
        want_exit: bool,
    ) -> Window {
        let width = t1 - t0;
        // Breaks within 1e-9 of a cycle's width of an end would only make slivers.
        let inside = |t: &f64| *t > t0 + 1e-9 * width && *t < t1 - 1e-9 * width;
        let mut nodes = vec![t0];
        let lo = self.breaks.partition_point(|b| *b <= t0);
        let hi = self.breaks.partition_point(|b| *b < t1);
        let mut interior: Vec<f64> = self.breaks[lo..hi]
            .iter()
            .chain(extra.iter())
            .copied()
            .filter(inside)
            .collect();
        interior.sort_by(f64::total_cmp);
        interior.dedup();
        nodes.extend(interior);
        nodes.push(t1);
        if log_s0 == f64::NEG_INFINITY || log_s0.is_nan() {
            // Survival has reached 0 before the window: the chain is left at once, at t0
            // (the tunnel table's p_exit is 1 there), so nothing accrues and exit is undiscounted.
            return Window {
                pieces: nodes.windows(2).map(|w| (w[0], w[1], 0.0)).collect(),
                exit: if want_exit { 1.0 } else { 0.0 },
            };
        }
        let delta = self.delta;
        match &self.hazard {
            Some(h) => {
                let h0 = h.cumulative(t0);
                let mut exit = 0.0;
                let pieces = nodes
                    .windows(2)
                    .map(|w| {
                        let (a, b) = (w[0], w[1]);
                        let rate = h.rate_at(0.5 * (a + b));
                        // Survival from t0 to a, discounted to t0 (0 once an infinite hazard
                        // has been passed).
                        let weight = (-(h.cumulative(a) - h0) - delta * (a - t0)).exp();
                        if weight == 0.0 || weight.is_nan() {
                            return (a, b, 0.0);
                        }
                        if rate == f64::INFINITY {
                            // Certain exit on reaching a (a life table closing with qx = 1).
                            exit += weight;
                            return (a, b, 0.0);
                        }
                        // ∫_a^b e^(-(H(a) - H(t0)) - λ(u - a) - δ(u - t0)) du in closed form:
                        // weight at a times (b - a)(1 - e^(-x))/x, x = (λ + δ)(b - a).
                        let x = (rate + delta) * (b - a);
                        let stay = weight * (b - a) * expm1_over_x(-x);
                        // The exit density is λ times the stay integrand on the piece.
                        exit += rate * stay;
                        (a, b, stay)
                    })
                    .collect();
                Window {
                    pieces,
                    exit: if want_exit { exit } else { 0.0 },
                }
            }
            None => {
                let curve = self.curve;
                let relative = |u: f64| curve.log_survival(u) - log_s0;
                // ln S(u) - ln S(t0) carries an absolute rounding error of about ε·|ln S(t0)|,
                // so both integrands (at most 1) are known only to that absolute accuracy: a
                // piece is accepted once its error estimate is within its share of that floor,
                // instead of chasing the rounding noise (far tails, where |ln S| is in the
                // hundreds, otherwise split to the quadrature's limit).
                let noise = |a: f64, b: f64| 64.0 * f64::EPSILON * (1.0 + log_s0.abs()) * (b - a);
                let pieces: Vec<(f64, f64, f64)> = nodes
                    .windows(2)
                    .map(|w| {
                        let stay = integrate_with_floor(
                            |u| (relative(u) - delta * (u - t0)).exp(),
                            w[0],
                            w[1],
                            QUADRATURE_TOLERANCE,
                            noise(w[0], w[1]),
                        );
                        (w[0], w[1], stay)
                    })
                    .collect();
                let exit = if !want_exit {
                    0.0
                } else {
                    // By parts with F(u) = 1 - S(u)/S(t0), which avoids the hazard (unbounded at
                    // 0 for some curves) and has two terms that are never negative, so nothing
                    // cancels: ∫ e^(-δ(u-t0)) dF = F(t1) e^(-δ(t1-t0)) + δ ∫ F(u) e^(-δ(u-t0)) du.
                    let p = exit_probability(log_s0, log_s1);
                    let tail = if delta == 0.0 {
                        0.0
                    } else {
                        nodes
                            .windows(2)
                            .map(|w| {
                                integrate_with_floor(
                                    |u| -relative(u).exp_m1() * (-delta * (u - t0)).exp(),
                                    w[0],
                                    w[1],
                                    QUADRATURE_TOLERANCE,
                                    noise(w[0], w[1]),
                                )
                            })
                            .sum::<f64>()
                    };
                    p * (-delta * width).exp() + delta * tail
                };
                Window { pieces, exit }
            }
        }
    }
}

/// The same curve with its closed forms hidden, so tests can take the quadrature route.
#[cfg(test)]
pub(crate) struct Opaque<'a>(pub &'a dyn Curve);

#[cfg(test)]
impl Curve for Opaque<'_> {
    fn log_survival(&self, t: f64) -> f64 {
        self.0.log_survival(t)
    }
    fn hazard(&self, t: f64) -> f64 {
        self.0.hazard(t)
    }
    fn time_unit(&self) -> crate::units::TimeUnit {
        self.0.time_unit()
    }
    fn describe(&self) -> String {
        self.0.describe()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::adjust::add::AddedCurve;
    use crate::adjust::background::{BackgroundHazard, BeyondTable};
    use crate::curve::ParametricCurve;
    use crate::families::{Exponential, Weibull};
    use crate::units::TimeUnit;

    #[test]
    fn constant_hazard_window_matches_closed_form_by_both_routes() {
        // ∫_0^Δ e^(-(λ+δ)u) du = (1 - e^(-(λ+δ)Δ))/(λ+δ) and the exit integral λ times it
        // (calculus of the exponential).
        let curve = ParametricCurve::new(&Exponential, vec![0.07], TimeUnit::Months).unwrap();
        let opaque = Opaque(&curve);
        let (lambda, delta): (f64, f64) = (0.07, 0.035f64.ln_1p() / 12.0);
        let routes: [(&dyn Curve, Exactness); 2] = [
            (&curve, Exactness::ClosedForm),
            (&opaque, Exactness::Quadrature),
        ];
        for (route, expected_exactness) in routes {
            let integrator = Integrator::new(route, delta, &[], 123.0);
            assert_eq!(integrator.exactness(), expected_exactness);
            for k in [0.0, 7.0, 40.0] {
                let (t0, t1) = (k * 3.0, k * 3.0 + 3.0);
                let w = integrator.window(
                    t0,
                    t1,
                    curve.log_survival(t0),
                    curve.log_survival(t1),
                    &[t0 + 1.0],
                    true,
                );
                let stay: f64 = w.pieces.iter().map(|p| p.2).sum();
                let expected = -(-(lambda + delta) * 3.0).exp_m1() / (lambda + delta);
                assert!((stay - expected).abs() < 1e-13 * expected);
                assert!((w.exit - lambda * expected).abs() < 1e-13 * lambda * expected);
                assert_eq!(w.pieces.len(), 2);
            }
        }
        let weibull = ParametricCurve::new(&Weibull, vec![1.2, 10.0], TimeUnit::Months).unwrap();
        let integrator = Integrator::new(&weibull, delta, &[], 20.0);
        assert_eq!(integrator.exactness(), Exactness::Quadrature);
    }

    #[test]
    fn a_closing_certain_death_inside_a_cycle_ends_the_stay_and_counts_the_exit_there() {
        // Exponential λ a year plus background qx = 0.1 at age 60 (μ = -ln 0.9 a year) and
        // qx = 1 at 61, entry at 60.5: everyone left at t = 0.5 leaves then. Over the year
        // [0, 1]: stay = (1 - e^(-(λ+μ+δ)/2))/(λ+μ+δ), exit = (λ+μ)·stay + e^(-(λ+μ+δ)/2)
        // (the exponential's calculus, with the certain exit discounted from 0.5).
        let (lambda, delta): (f64, f64) = (0.2, 0.035f64.ln_1p());
        let mu = -(0.9f64.ln());
        let table =
            crate::adjust::lifetable::parse("life.csv", b"age,qx\n60,0.1\n61,1\n", None).unwrap();
        let curve = AddedCurve {
            disease: Box::new(
                ParametricCurve::new(&Exponential, vec![lambda], TimeUnit::Years).unwrap(),
            ),
            background: BackgroundHazard::new(table, 60.5, BeyondTable::Error, TimeUnit::Years)
                .unwrap(),
        };
        let integrator = Integrator::new(&curve, delta, &[], 2.0);
        assert_eq!(integrator.exactness(), Exactness::ClosedForm);
        let total = lambda + mu + delta;
        let stay = -(-total * 0.5).exp_m1() / total;
        let exit = (lambda + mu) * stay + (-total * 0.5).exp();
        let w = integrator.window(0.0, 1.0, 0.0, curve.log_survival(1.0), &[], true);
        let got: f64 = w.pieces.iter().map(|p| p.2).sum();
        assert!((got - stay).abs() < 1e-14 * stay, "{got} vs {stay}");
        assert!((w.exit - exit).abs() < 1e-14 * exit, "{} vs {exit}", w.exit);
        assert_eq!(curve.log_survival(1.0), f64::NEG_INFINITY);
    }

    #[test]
    fn survival_already_zero_leaves_at_once() {
        let curve = ParametricCurve::new(&Weibull, vec![1.2, 10.0], TimeUnit::Months).unwrap();
        let integrator = Integrator::new(&curve, 0.01, &[], 6.0);
        let w = integrator.window(5.0, 6.0, f64::NEG_INFINITY, f64::NEG_INFINITY, &[], true);
        assert_eq!(w.exit, 1.0);
        assert_eq!(w.pieces[0].2, 0.0);
    }
}
