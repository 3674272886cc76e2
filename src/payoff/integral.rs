//! The exact integrals behind every payoff figure: for someone in the chain at time since entry
//! t0, the expected discounted time spent in the chain over parts of [t0, t1], and the
//! expected discounted number of exits over [t0, t1]:
//!
//!   stay(a, b) = ∫_a^b S(u)/S(t0) e^(-δ(u - t0)) du,
//!   exit       = ∫_t0^t1 f(u)/S(t0) e^(-δ(u - t0)) du,
//!
//! with δ = ln(1 + R) per unit of the curve's time. S(u)/S(t0) is taken as e^(ln S(u) - ln S(t0)),
//! so far tails where S itself underflows keep their digits. Closed forms for a
//! piecewise-constant hazard; adaptive Gauss–Kronrod quadrature otherwise (see `docs/payoffs.md`).

use crate::curve::{Curve, ParametricCurve};
use crate::discretise::exit_probability;
use crate::numeric::{expm1_over_x, integrate};
use crate::units::TimeUnit;

/// Tolerance asked of the quadrature: [`crate::numeric::integrate`] accepts a piece once its
/// error estimate is within this share of the piece's value, two orders below the 1e-10
/// relative accuracy promised for the payoffs.
pub const QUADRATURE_TOLERANCE: f64 = 1e-12;

/// How far (relative) a piecewise-constant hazard's cumulative hazard may be from the curve's
/// own -ln S before the closed forms are set aside for quadrature.
const HINT_AGREEMENT: f64 = 1e-9;

/// A hazard that is constant between cut points: `rates[i]` on [cuts[i-1], cuts[i]) (from 0,
/// the last to ∞), time in `unit`.
#[derive(Debug, Clone, PartialEq)]
pub struct PiecewiseHazard {
    /// Cut points, positive and increasing.
    pub cuts: Vec<f64>,
    /// Hazard per one `unit` of time on each interval (one more than the cuts), finite and ≥ 0.
    pub rates: Vec<f64>,
    /// Time unit of `cuts` and `rates`.
    pub unit: TimeUnit,
}

impl PiecewiseHazard {
    /// A checked piecewise-constant hazard.
    pub fn new(cuts: Vec<f64>, rates: Vec<f64>, unit: TimeUnit) -> Result<Self, String> {
        if rates.len() != cuts.len() + 1 {
            return Err(format!(
                "{} cut point(s) need {} rate(s), got {}",
                cuts.len(),
                cuts.len() + 1,
                rates.len()
            ));
        }
        if cuts.iter().any(|c| !(c.is_finite() && *c > 0.0))
            || cuts.windows(2).any(|w| w[0] >= w[1])
        {
            return Err("cut points must be positive, finite and increasing".into());
        }
        if rates.iter().any(|r| !(r.is_finite() && *r >= 0.0)) {
            return Err("hazard rates must be finite and not negative".into());
        }
        Ok(PiecewiseHazard { cuts, rates, unit })
    }

    /// The hazard of an `exponential` or `piecewise` curve; `None` for every other family.
    pub fn of_parametric(curve: &ParametricCurve) -> Option<PiecewiseHazard> {
        match curve.family.name() {
            "exponential" => {
                PiecewiseHazard::new(Vec::new(), curve.params.clone(), curve.unit).ok()
            }
            "piecewise" => {
                let cuts = curve.family.settings()?.cuts?;
                PiecewiseHazard::new(cuts, curve.params.clone(), curve.unit).ok()
            }
            _ => None,
        }
    }

    /// The same hazard with time in `unit` (cut points and rates rescaled exactly).
    pub fn in_unit(&self, unit: TimeUnit) -> PiecewiseHazard {
        let factor = self.unit.factor_to(unit);
        PiecewiseHazard {
            cuts: self.cuts.iter().map(|c| c * factor).collect(),
            rates: self.rates.iter().map(|r| r / factor).collect(),
            unit,
        }
    }

    /// Hazard at `t` (a time on a cut belongs to the later interval).
    pub fn rate_at(&self, t: f64) -> f64 {
        self.rates[self.cuts.partition_point(|c| *c <= t)]
    }

    /// Cumulative hazard H(t) = ∫₀^t h.
    pub fn cumulative(&self, t: f64) -> f64 {
        let mut total = 0.0;
        let mut start = 0.0;
        for (i, rate) in self.rates.iter().enumerate() {
            let end = self.cuts.get(i).copied().unwrap_or(f64::INFINITY);
            if t <= start {
                break;
            }
            total += rate * (t.min(end) - start);
            start = end;
        }
        total
    }
}

/// What the payoff integrals may know about a curve beyond [`Curve`], which says nothing of its
/// form: a piecewise-constant hazard equal to the curve's (closed forms), and times where the
/// hazard jumps (quadrature breakpoints).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct CurveHint {
    /// The curve's hazard when it is piecewise constant. Used only where its cumulative hazard
    /// agrees with the curve's own -ln S at every tunnel boundary and mid-cycle to 1e-9; set
    /// aside for quadrature otherwise.
    pub constant_hazard: Option<PiecewiseHazard>,
    /// Times since entry (curve's time unit) where the hazard may jump, e.g. birthdays of a
    /// life table's ages; the quadrature splits there.
    pub breakpoints: Vec<f64>,
}

impl CurveHint {
    /// Nothing known: quadrature everywhere.
    pub fn none() -> CurveHint {
        CurveHint::default()
    }

    /// The hint for an unadjusted parametric curve: the exponential and piecewise-exponential
    /// families have a piecewise-constant hazard; others nothing.
    pub fn of_parametric(curve: &ParametricCurve) -> CurveHint {
        CurveHint {
            constant_hazard: PiecewiseHazard::of_parametric(curve),
            breakpoints: Vec::new(),
        }
    }
}

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
    /// The piecewise-constant hazard in the curve's unit, when it agrees with the curve.
    hazard: Option<PiecewiseHazard>,
    /// Every time where the integrand may have a kink (schedule changes, hint breakpoints,
    /// hazard cuts), sorted.
    breaks: Vec<f64>,
    /// δ per unit of the curve's time.
    delta: f64,
}

impl<'a> Integrator<'a> {
    /// An integrator for `curve` discounted at `delta` per unit of its time, splitting at
    /// `changes` (curve's unit) and at the hint's breakpoints. The hint's hazard is kept only if
    /// it agrees with the curve at every time of `checks`.
    pub fn new(
        curve: &'a dyn Curve,
        hint: &CurveHint,
        delta: f64,
        changes: &[f64],
        checks: impl Iterator<Item = f64>,
    ) -> Integrator<'a> {
        let unit = curve.time_unit();
        let hazard = hint
            .constant_hazard
            .as_ref()
            .map(|h| h.in_unit(unit))
            .filter(|h| agrees(curve, h, checks));
        let mut breaks: Vec<f64> = changes
            .iter()
            .chain(&hint.breakpoints)
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
                        // ∫_a^b e^(-(H(a) - H(t0)) - λ(u - a) - δ(u - t0)) du in closed form:
                        // weight at a times (b - a)(1 - e^(-x))/x, x = (λ + δ)(b - a).
                        let weight = (-(h.cumulative(a) - h0) - delta * (a - t0)).exp();
                        let x = (rate + delta) * (b - a);
                        let stay = if x.is_finite() {
                            weight * (b - a) * expm1_over_x(-x)
                        } else {
                            0.0
                        };
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
                let pieces: Vec<(f64, f64, f64)> = nodes
                    .windows(2)
                    .map(|w| {
                        let stay = integrate(
                            |u| (relative(u) - delta * (u - t0)).exp(),
                            w[0],
                            w[1],
                            QUADRATURE_TOLERANCE,
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
                                integrate(
                                    |u| -relative(u).exp_m1() * (-delta * (u - t0)).exp(),
                                    w[0],
                                    w[1],
                                    QUADRATURE_TOLERANCE,
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

/// Whether the hazard's cumulative hazard matches the curve's -ln S at every time in `checks`.
fn agrees(curve: &dyn Curve, hazard: &PiecewiseHazard, checks: impl Iterator<Item = f64>) -> bool {
    let mut checks = checks.peekable();
    checks.peek().is_some()
        && checks.all(|t| {
            let h = hazard.cumulative(t);
            let log_s = curve.log_survival(t);
            log_s.is_finite() && (h + log_s).abs() <= HINT_AGREEMENT * h.max(1.0)
        })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::families::{Exponential, Piecewise, Weibull};

    fn grid(end: f64) -> impl Iterator<Item = f64> {
        (0..=40).map(move |i| end * i as f64 / 40.0)
    }

    #[test]
    fn constant_hazard_window_matches_closed_form_by_both_routes() {
        // ∫_0^Δ e^(-(λ+δ)u) du = (1 - e^(-(λ+δ)Δ))/(λ+δ) and the exit integral λ times it
        // (calculus of the exponential).
        let curve = ParametricCurve::new(&Exponential, vec![0.07], TimeUnit::Months).unwrap();
        let (lambda, delta): (f64, f64) = (0.07, 0.035f64.ln_1p() / 12.0);
        for hint in [CurveHint::of_parametric(&curve), CurveHint::none()] {
            let integrator = Integrator::new(&curve, &hint, delta, &[], grid(50.0));
            let expected_exactness = if hint.constant_hazard.is_some() {
                Exactness::ClosedForm
            } else {
                Exactness::Quadrature
            };
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
                assert!((stay - expected).abs() < 1e-13 * expected, "{hint:?}");
                assert!((w.exit - lambda * expected).abs() < 1e-13 * lambda * expected);
                assert_eq!(w.pieces.len(), 2);
            }
        }
    }

    #[test]
    fn a_hint_that_does_not_match_the_curve_is_set_aside() {
        let curve = ParametricCurve::new(&Weibull, vec![1.2, 10.0], TimeUnit::Months).unwrap();
        let wrong = CurveHint {
            constant_hazard: Some(
                PiecewiseHazard::new(vec![], vec![0.1], TimeUnit::Months).unwrap(),
            ),
            breakpoints: vec![],
        };
        let integrator = Integrator::new(&curve, &wrong, 0.0, &[], grid(20.0));
        assert_eq!(integrator.exactness(), Exactness::Quadrature);
    }

    #[test]
    fn piecewise_hint_is_read_from_the_family_and_converted() {
        let family = Piecewise::with_cuts(&[6.0]).unwrap();
        let curve = ParametricCurve::new(family, vec![0.08, 0.03], TimeUnit::Months).unwrap();
        let hazard = PiecewiseHazard::of_parametric(&curve).unwrap();
        assert_eq!(hazard.cuts, vec![6.0]);
        let days = hazard.in_unit(TimeUnit::Days);
        // Cumulative hazard 0.08·6 + 0.03·4 = 0.6 at 10 months, in either unit.
        assert!((hazard.cumulative(10.0) - 0.6).abs() < 1e-15);
        assert!((days.cumulative(10.0 * 365.25 / 12.0) - 0.6).abs() < 1e-14);
        assert!(agrees(&curve, &hazard, grid(30.0)));
        let weibull = ParametricCurve::new(&Weibull, vec![1.2, 10.0], TimeUnit::Months).unwrap();
        assert!(PiecewiseHazard::of_parametric(&weibull).is_none());
    }

    #[test]
    fn survival_already_zero_leaves_at_once() {
        let curve = ParametricCurve::new(&Weibull, vec![1.2, 10.0], TimeUnit::Months).unwrap();
        let integrator = Integrator::new(&curve, &CurveHint::none(), 0.01, &[], grid(1.0));
        let w = integrator.window(5.0, 6.0, f64::NEG_INFINITY, f64::NEG_INFINITY, &[], true);
        assert_eq!(w.exit, 1.0);
        assert_eq!(w.pieces[0].2, 0.0);
    }
}
