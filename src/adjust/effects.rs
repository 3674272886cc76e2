//! Relative treatment effects applied to a reference curve: a hazard ratio (cumulative hazard
//! times X), an acceleration factor (time divided by X), and a hazard ratio whose logarithm
//! wanes linearly to 0 between two durations since entry.
//!
//! Waning: h(t) = h₀(t)·X^w(t), w = 1 before START, (END - t)/(END - START) between, 0 after.
//! Over the waning stretch the cumulative hazard has no closed form for most families, so it is
//! integrated by parts, ∫ h₀ g = [(H₀ - H₀(a)) g] - ∫ (H₀ - H₀(a)) g′, which replaces the hazard
//! (possibly unbounded near 0) by the bounded, smooth cumulative-hazard increment; the remaining
//! integral is done by adaptive Gauss–Kronrod to a relative tolerance of 1e-14.

use crate::curve::{Curve, PiecewiseHazard};
use crate::numeric::integrate_with_floor;
use crate::units::TimeUnit;

/// A reference curve with every hazard multiplied by X: S(t)^X (proportional hazards).
pub struct HazardRatioCurve {
    /// Reference curve.
    pub base: Box<dyn Curve>,
    /// Hazard ratio X > 0.
    pub ratio: f64,
}

impl Curve for HazardRatioCurve {
    fn log_survival(&self, t: f64) -> f64 {
        self.ratio * self.base.log_survival(t)
    }
    fn hazard(&self, t: f64) -> f64 {
        self.ratio * self.base.hazard(t)
    }
    fn time_unit(&self) -> TimeUnit {
        self.base.time_unit()
    }
    fn describe(&self) -> String {
        format!("{}, hazard ratio {}", self.base.describe(), self.ratio)
    }
    /// The reference's pieces with every rate times X.
    fn piecewise_hazard(&self, until: f64) -> Option<PiecewiseHazard> {
        let mut hazard = self.base.piecewise_hazard(until)?;
        hazard.rates.iter_mut().for_each(|r| *r *= self.ratio);
        Some(hazard)
    }
}

/// A reference curve with time stretched by X: S(t/X) (accelerated failure time; X > 1 lengthens survival).
pub struct AccelerationCurve {
    /// Reference curve.
    pub base: Box<dyn Curve>,
    /// Acceleration factor X > 0.
    pub factor: f64,
}

impl Curve for AccelerationCurve {
    fn log_survival(&self, t: f64) -> f64 {
        self.base.log_survival(t / self.factor)
    }
    fn hazard(&self, t: f64) -> f64 {
        self.base.hazard(t / self.factor) / self.factor
    }
    fn time_unit(&self) -> TimeUnit {
        self.base.time_unit()
    }
    fn describe(&self) -> String {
        format!(
            "{}, acceleration factor {}",
            self.base.describe(),
            self.factor
        )
    }
    /// The reference's pieces up to `until`/X, with every cut times X and every rate divided by
    /// X (H(t) = H₀(t/X)).
    fn piecewise_hazard(&self, until: f64) -> Option<PiecewiseHazard> {
        let base = self.base.piecewise_hazard(until / self.factor)?;
        PiecewiseHazard::new(
            base.cuts.iter().map(|c| c * self.factor).collect(),
            base.rates.iter().map(|r| r / self.factor).collect(),
            base.unit,
        )
        .ok()
    }
}

/// Knots at which the waning integral is stored, so that evaluating the curve at any time
/// integrates only from the nearest knot below (cost independent of the time).
const WANING_KNOTS: usize = 64;

/// A hazard ratio whose logarithm moves linearly to 0 between `start` and `end` (curve's time unit).
pub struct WaningCurve {
    /// Reference curve.
    pub base: Box<dyn Curve>,
    /// Hazard ratio X > 0 in force up to `start`.
    pub ratio: f64,
    /// Duration since entry at which waning begins (curve's time unit, ≥ 0).
    pub start: f64,
    /// Duration since entry from which the effect is gone (> `start`).
    pub end: f64,
    /// How the durations were written by the user, for descriptions.
    pub label: String,
    /// Waning integral from `start` to each of `WANING_KNOTS + 1` equally spaced knots up to `end`.
    knots: Vec<f64>,
}

impl WaningCurve {
    /// The reference curve with hazard ratio `ratio` waning over [`start`, `end`] (curve's time unit).
    pub fn new(base: Box<dyn Curve>, ratio: f64, start: f64, end: f64, label: String) -> Self {
        let mut curve = WaningCurve {
            base,
            ratio,
            start,
            end,
            label,
            knots: vec![0.0],
        };
        for i in 1..=WANING_KNOTS {
            let (a, b) = (curve.knot(i - 1), curve.knot(i));
            let next = curve.knots[i - 1] + curve.waning_integral(a, b);
            curve.knots.push(next);
        }
        curve
    }

    /// Time of knot `i`.
    fn knot(&self, i: usize) -> f64 {
        if i == WANING_KNOTS {
            self.end
        } else {
            self.start + (self.end - self.start) * i as f64 / WANING_KNOTS as f64
        }
    }

    /// Waning integral from `start` to `t` in [`start`, `end`], from the nearest knot below.
    fn waning_from_start(&self, t: f64) -> f64 {
        let position = (t - self.start) / (self.end - self.start) * WANING_KNOTS as f64;
        let mut i = (position.floor().max(0.0) as usize).min(WANING_KNOTS);
        while i > 0 && self.knot(i) > t {
            i -= 1;
        }
        match self.knots.get(i) {
            Some(stored) => stored + self.waning_integral(self.knot(i), t),
            // Knots are still being built: integrate from the start.
            None => self.waning_integral(self.start, t),
        }
    }

    /// Weight of the log hazard ratio at `t`: 1, then linear down to 0, then 0.
    pub fn weight(&self, t: f64) -> f64 {
        if t <= self.start {
            1.0
        } else if t >= self.end {
            0.0
        } else {
            (self.end - t) / (self.end - self.start)
        }
    }

    /// Reference cumulative hazard increment H₀(b) - H₀(a) from log-survival values.
    fn base_increment(&self, a: f64, b: f64) -> f64 {
        let (la, lb) = (self.base.log_survival(a), self.base.log_survival(b));
        if lb == f64::NEG_INFINITY {
            f64::INFINITY
        } else {
            la - lb
        }
    }

    /// ∫ₐᵇ h₀(u) X^w(u) du for START ≤ a ≤ b ≤ END, by parts (see the module documentation).
    fn waning_integral(&self, a: f64, b: f64) -> f64 {
        if b <= a {
            return 0.0;
        }
        let ln_x = self.ratio.ln();
        let g = |u: f64| (ln_x * self.weight(u)).exp();
        let whole = self.base_increment(a, b);
        if !whole.is_finite() {
            return f64::INFINITY;
        }
        let log_sa = self.base.log_survival(a);
        // g′(u) = -g(u)·ln X/(END - START), so -∫ ΔH₀ g′ = (ln X/(END - START)) ∫ ΔH₀ g.
        // The integrand vanishes at a; an absolute floor far below the 1e-10 per-cycle target
        // stops the relative test from chasing rounding noise there.
        let inner = integrate_with_floor(
            |u| (log_sa - self.base.log_survival(u)) * g(u),
            a,
            b,
            1e-14,
            1e-16 * whole.max(1.0) * (b - a).max(1.0),
        );
        whole * g(b) + ln_x / (self.end - self.start) * inner
    }

    /// Cumulative hazard of the waning curve from 0 to `t`.
    pub fn cumulative_hazard(&self, t: f64) -> f64 {
        let before = self.ratio * self.base_increment(0.0, t.min(self.start));
        if t <= self.start {
            return before;
        }
        let during = self.waning_from_start(t.min(self.end));
        if t <= self.end {
            return before + during;
        }
        before + during + self.base_increment(self.end, t)
    }
}

/// No `piecewise_hazard`: the hazard ratio varies continuously over the waning stretch, so the
/// hazard is not piecewise constant even when the reference's is.
impl Curve for WaningCurve {
    fn log_survival(&self, t: f64) -> f64 {
        if t <= 0.0 {
            return 0.0;
        }
        -self.cumulative_hazard(t)
    }
    fn hazard(&self, t: f64) -> f64 {
        self.base.hazard(t) * (self.ratio.ln() * self.weight(t)).exp()
    }
    fn time_unit(&self) -> TimeUnit {
        self.base.time_unit()
    }
    fn describe(&self) -> String {
        format!(
            "{}, hazard ratio {} waning to 1 over {}",
            self.base.describe(),
            self.ratio,
            self.label
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::curve::ParametricCurve;
    use crate::families::{Exponential, Gompertz, LogLogistic, LogNormal, Weibull};

    fn curve(family: &'static dyn crate::families::Family, params: &[f64]) -> Box<dyn Curve> {
        Box::new(ParametricCurve::new(family, params.to_vec(), TimeUnit::Months).unwrap())
    }

    fn times() -> Vec<f64> {
        (1..200).map(|i| 0.37 * i as f64).collect()
    }

    #[test]
    fn weibull_hazard_ratio_is_weibull_with_shrunk_scale() {
        // PH identity: Weibull(shape, scale) with hazard ratio X is Weibull(shape, scale·X^(-1/shape))
        // (the Weibull proportional-hazards property, as in Collett, Modelling Survival Data in
        // Medical Research; recalled from memory).
        for (shape, scale, x) in [(0.7, 20.0, 0.6), (1.8, 35.0, 1.4), (1.0, 12.0, 0.25)] {
            let treated = HazardRatioCurve {
                base: curve(&Weibull, &[shape, scale]),
                ratio: x,
            };
            let closed = curve(&Weibull, &[shape, scale * f64::powf(x, -1.0 / shape)]);
            for t in times() {
                let (a, b) = (treated.log_survival(t), closed.log_survival(t));
                assert!(
                    (a - b).abs() <= 1e-12 * b.abs().max(1.0),
                    "t {t}: {a} vs {b}"
                );
                let (ha, hb) = (treated.hazard(t), closed.hazard(t));
                assert!((ha - hb).abs() <= 1e-12 * hb);
            }
        }
    }

    #[test]
    fn aft_identities_for_loglogistic_and_lognormal() {
        // AFT identities: log-logistic with acceleration factor X is log-logistic(shape, scale·X);
        // log-normal with acceleration factor X is log-normal(mu + ln X, sigma) (accelerated
        // failure time models as in Collett, Modelling Survival Data in Medical Research;
        // recalled from memory).
        for x in [0.5, 1.7, 3.0] {
            let ll = AccelerationCurve {
                base: curve(&LogLogistic, &[1.6, 14.0]),
                factor: x,
            };
            let ll_closed = curve(&LogLogistic, &[1.6, 14.0 * x]);
            let ln = AccelerationCurve {
                base: curve(&LogNormal, &[2.3, 0.9]),
                factor: x,
            };
            let ln_closed = curve(&LogNormal, &[2.3 + f64::ln(x), 0.9]);
            for t in times() {
                for (a, b) in [(&ll, &ll_closed), (&ln, &ln_closed)] {
                    let (u, v) = (a.log_survival(t), b.log_survival(t));
                    assert!(
                        (u - v).abs() <= 1e-12 * v.abs().max(1.0),
                        "t {t}: {u} vs {v}"
                    );
                    let (hu, hv) = (a.hazard(t), b.hazard(t));
                    assert!((hu - hv).abs() <= 1e-12 * hv);
                }
            }
        }
    }

    #[test]
    fn hazard_pieces_pass_through_a_hazard_ratio_and_an_acceleration_factor_not_waning() {
        // Piecewise exponential 0.05, 0.02, 0.04 a month, cuts at 6 and 18 months. A hazard ratio
        // X multiplies each rate (h = X·h₀); an acceleration factor X gives S₀(t/X), whose hazard
        // is h₀(t/X)/X: cuts at 6X and 18X, rates divided by X (definitions of the two effects).
        let family = crate::families::Piecewise::with_cuts(&[6.0, 18.0]).unwrap();
        let base = || curve(family, &[0.05, 0.02, 0.04]);
        let hr = HazardRatioCurve {
            base: base(),
            ratio: 0.6,
        };
        let h = hr.piecewise_hazard(100.0).unwrap();
        assert_eq!(h.cuts, vec![6.0, 18.0]);
        for (got, want) in h.rates.iter().zip([0.03, 0.012, 0.024]) {
            assert!((got - want).abs() < 1e-16, "{got} vs {want}");
        }
        let af = AccelerationCurve {
            base: base(),
            factor: 1.5,
        };
        let h = af.piecewise_hazard(100.0).unwrap();
        assert_eq!(h.cuts, vec![9.0, 27.0]);
        for (got, want) in h.rates.iter().zip([0.05 / 1.5, 0.02 / 1.5, 0.04 / 1.5]) {
            assert!((got - want).abs() < 1e-16, "{got} vs {want}");
        }
        // The pieces' cumulative hazard is the curves' own -ln S.
        for t in times() {
            for (c, pieces) in [
                (&hr as &dyn Curve, hr.piecewise_hazard(80.0).unwrap()),
                (&af, af.piecewise_hazard(80.0).unwrap()),
            ] {
                let (a, b) = (pieces.cumulative(t), -c.log_survival(t));
                assert!((a - b).abs() <= 1e-14 * b.max(1.0), "t {t}: {a} vs {b}");
            }
        }
        let waning = WaningCurve::new(base(), 0.6, 12.0, 24.0, "12..24 months".into());
        assert!(waning.piecewise_hazard(100.0).is_none());
        let weibull = HazardRatioCurve {
            base: curve(&Weibull, &[1.2, 10.0]),
            ratio: 0.6,
        };
        assert!(weibull.piecewise_hazard(100.0).is_none());
    }

    #[test]
    fn waning_exponential_matches_closed_form() {
        // With a constant reference hazard λ, ∫_S^t λ X^((E-u)/(E-S)) du
        // = λ (E-S)/ln X · (X - X^((E-t)/(E-S))) (elementary integral, from memory).
        let (rate, x, s, e) = (0.03, 0.55, 12.0, 36.0);
        let waning = WaningCurve::new(
            curve(&Exponential, &[rate]),
            x,
            s,
            e,
            "12..36 months".into(),
        );
        let ln_x = f64::ln(x);
        let expected = |t: f64| {
            if t <= s {
                rate * x * t
            } else if t <= e {
                rate * x * s + rate * (e - s) / ln_x * (x - x.powf((e - t) / (e - s)))
            } else {
                rate * x * s + rate * (e - s) / ln_x * (x - 1.0) + rate * (t - e)
            }
        };
        for t in times() {
            let h = waning.cumulative_hazard(t);
            assert!(
                (h - expected(t)).abs() < 1e-12,
                "t {t}: {h} vs {}",
                expected(t)
            );
        }
    }

    #[test]
    fn waning_gompertz_matches_closed_form() {
        // Gompertz hazard r·e^(γu) times X^((E-u)/(E-S)) is r·X^(E/(E-S))·e^((γ - ln X/(E-S))u),
        // whose integral is elementary (from memory); exercised per cycle to 1e-10 as the issue asks.
        let (shape, rate, x, s, e) = (0.04, 0.01, 0.5, 6.0, 30.0);
        let waning = WaningCurve::new(
            curve(&Gompertz, &[shape, rate]),
            x,
            s,
            e,
            "6..30 months".into(),
        );
        let ln_x = f64::ln(x);
        let k = shape - ln_x / (e - s);
        let c = rate * x.powf(e / (e - s));
        let gompertz = |a: f64, b: f64| rate / shape * ((shape * b).exp() - (shape * a).exp());
        let expected = |t: f64| {
            let before = x * gompertz(0.0, t.min(s));
            if t <= s {
                return before;
            }
            let during = c / k * ((k * t.min(e)).exp() - (k * s).exp());
            if t <= e {
                return before + during;
            }
            before + during + gompertz(e, t)
        };
        let mut last = 0.0;
        for cycle in 1..=60 {
            let t = cycle as f64;
            let p = -(waning.log_survival(t) - waning.log_survival(last)).exp_m1();
            let q = -(expected(last) - expected(t)).exp_m1();
            assert!((p - q).abs() < 1e-10, "cycle {cycle}: {p} vs {q}");
            last = t;
        }
    }

    #[test]
    fn waning_with_singular_reference_hazard_starting_at_zero() {
        // Weibull shape 0.5 has an infinite hazard at 0; waning from 0 must still be finite and
        // lie between the treated and untreated cumulative hazards (monotonicity, common practice).
        let waning = WaningCurve::new(
            curve(&Weibull, &[0.5, 10.0]),
            0.5,
            0.0,
            24.0,
            "0..24 months".into(),
        );
        for t in [0.01, 1.0, 10.0, 24.0, 50.0] {
            let h = waning.cumulative_hazard(t);
            let untreated = (t / 10.0f64).sqrt();
            assert!(
                h.is_finite() && h > 0.5 * untreated && h < untreated,
                "t {t}: {h}"
            );
        }
    }
}
