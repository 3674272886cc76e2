//! A survival curve as downstream code (tunnels, horizon, adjustments, draws) sees it:
//! log-survival and hazard in a stated time unit, whatever produced it.

use crate::families::Family;
use crate::units::TimeUnit;

/// A survival curve over time in [`Curve::time_unit`].
pub trait Curve: Send + Sync {
    /// ln S(t) for t ≥ 0 (0 at t = 0; may be -∞ where S has reached 0).
    fn log_survival(&self, t: f64) -> f64;

    /// Hazard h(t), per unit of [`Curve::time_unit`].
    fn hazard(&self, t: f64) -> f64;

    /// Unit in which `t` is measured.
    fn time_unit(&self) -> TimeUnit;

    /// S(t).
    fn survival(&self, t: f64) -> f64 {
        self.log_survival(t).exp()
    }

    /// For a curve with several causes of exit (e.g. disease plus background mortality): the
    /// probability of leaving by each named cause within [t0, t1) given survival to t0; the
    /// values sum to 1 - S(t1)/S(t0). `None` for a single-cause curve.
    fn exit_by_cause(&self, _t0: f64, _t1: f64) -> Option<Vec<(&'static str, f64)>> {
        None
    }

    /// Extra per-cycle values the curve reports beside its probabilities over [t0, t1), by column
    /// name (e.g. the share of the cycle in which a background-mortality floor binds). Empty by default.
    fn cycle_columns(&self, _t0: f64, _t1: f64) -> Vec<(&'static str, f64)> {
        Vec::new()
    }

    /// One-line description for headers and reports (family, parameters, adjustments).
    fn describe(&self) -> String;

    /// Restricted mean ∫₀^horizon S(t) dt in [`Curve::time_unit`]: adaptive quadrature unless
    /// the curve knows a closed form (a parametric curve asks its family).
    fn restricted_mean(&self, horizon: f64) -> f64 {
        crate::numeric::integrate(|t| self.survival(t), 0.0, horizon, 1e-10)
    }

    /// The hazard as constant pieces (cuts and rates in [`Curve::time_unit`]) when it is
    /// piecewise constant on [0, `until`], so payoffs can use closed forms; beyond `until` the
    /// pieces need not describe the curve. `None` (the default) when it is not, or not known.
    fn piecewise_hazard(&self, _until: f64) -> Option<PiecewiseHazard> {
        None
    }
}

/// A hazard that is constant between cut points: `rates[i]` on [cuts[i-1], cuts[i]) (from 0,
/// the last to ∞), time in `unit`. A rate may be +∞ (a life table closing with qx = 1): nobody
/// stays in the chain past the start of that interval.
#[derive(Debug, Clone, PartialEq)]
pub struct PiecewiseHazard {
    /// Cut points, positive, finite and increasing.
    pub cuts: Vec<f64>,
    /// Hazard per one `unit` of time on each interval (one more than the cuts), ≥ 0, possibly +∞.
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
        if rates.iter().any(|r| r.is_nan() || *r < 0.0) {
            return Err("hazard rates must not be negative or NaN".into());
        }
        Ok(PiecewiseHazard { cuts, rates, unit })
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

    /// Cumulative hazard H(t) = ∫₀^t h (+∞ past the start of an infinite rate).
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

    /// The hazard `combine(self, other)` on every interval of both sets of cuts (e.g. the sum
    /// of two competing hazards, or their maximum); `other` is first converted to this unit.
    pub fn merged(&self, other: &PiecewiseHazard, combine: impl Fn(f64, f64) -> f64) -> Self {
        let other = other.in_unit(self.unit);
        let mut cuts: Vec<f64> = self.cuts.iter().chain(&other.cuts).copied().collect();
        cuts.sort_by(f64::total_cmp);
        cuts.dedup();
        // Each interval's rate is the rate at its left end (0 or a cut).
        let rates = std::iter::once(0.0)
            .chain(cuts.iter().copied())
            .map(|t| combine(self.rate_at(t), other.rate_at(t)))
            .collect();
        PiecewiseHazard {
            cuts,
            rates,
            unit: self.unit,
        }
    }
}

/// A shared curve is a curve (lets a command keep a handle on an adjusted curve it also boxes).
impl<T: Curve + ?Sized> Curve for std::sync::Arc<T> {
    fn log_survival(&self, t: f64) -> f64 {
        (**self).log_survival(t)
    }
    fn hazard(&self, t: f64) -> f64 {
        (**self).hazard(t)
    }
    fn time_unit(&self) -> TimeUnit {
        (**self).time_unit()
    }
    fn survival(&self, t: f64) -> f64 {
        (**self).survival(t)
    }
    fn exit_by_cause(&self, t0: f64, t1: f64) -> Option<Vec<(&'static str, f64)>> {
        (**self).exit_by_cause(t0, t1)
    }
    fn cycle_columns(&self, t0: f64, t1: f64) -> Vec<(&'static str, f64)> {
        (**self).cycle_columns(t0, t1)
    }
    fn describe(&self) -> String {
        (**self).describe()
    }
    fn restricted_mean(&self, horizon: f64) -> f64 {
        (**self).restricted_mean(horizon)
    }
    fn piecewise_hazard(&self, until: f64) -> Option<PiecewiseHazard> {
        (**self).piecewise_hazard(until)
    }
}

/// A fitted or published parametric curve: a family, its natural parameters, and their time unit.
#[derive(Clone)]
pub struct ParametricCurve {
    /// The family.
    pub family: &'static dyn Family,
    /// Natural parameters in the family's order, for time in `unit`.
    pub params: Vec<f64>,
    /// Time unit of the parameters.
    pub unit: TimeUnit,
}

impl std::fmt::Debug for ParametricCurve {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "{} {:?} ({})",
            self.family.name(),
            self.params,
            self.unit
        )
    }
}

impl ParametricCurve {
    /// A curve from natural parameters; errors name the parameter that is out of range.
    pub fn new(
        family: &'static dyn Family,
        params: Vec<f64>,
        unit: TimeUnit,
    ) -> Result<Self, String> {
        if params.len() != family.param_names().len() {
            return Err(format!(
                "family {} needs {} parameter(s) ({}), got {}",
                family.name(),
                family.param_names().len(),
                family.param_names().join(", "),
                params.len()
            ));
        }
        family.check_params(&params)?;
        Ok(ParametricCurve {
            family,
            params,
            unit,
        })
    }

    /// The same curve with time measured in `unit` (parameters rescaled exactly, not the time grid).
    pub fn in_unit(&self, unit: TimeUnit) -> ParametricCurve {
        let factor = self.unit.factor_to(unit);
        ParametricCurve {
            // Families with time-valued settings (cut points, knots) move them too.
            family: self.family.rescaled_family(factor).unwrap_or(self.family),
            params: self.family.rescale_time(&self.params, factor),
            unit,
        }
    }
}

impl Curve for ParametricCurve {
    fn log_survival(&self, t: f64) -> f64 {
        self.family.log_survival(&self.params, t)
    }
    fn hazard(&self, t: f64) -> f64 {
        self.family.hazard(&self.params, t)
    }
    fn time_unit(&self) -> TimeUnit {
        self.unit
    }
    fn describe(&self) -> String {
        let params: Vec<String> = self
            .family
            .param_names()
            .iter()
            .zip(&self.params)
            .map(|(n, v)| format!("{n}={}", crate::export::number_text(*v)))
            .collect();
        format!(
            "{} ({}; time in {})",
            self.family.name(),
            params.join(", "),
            self.unit
        )
    }
    fn restricted_mean(&self, horizon: f64) -> f64 {
        self.family.restricted_mean(&self.params, horizon)
    }
    /// The `exponential` family's one rate and the `piecewise` family's rates between its cuts.
    fn piecewise_hazard(&self, _until: f64) -> Option<PiecewiseHazard> {
        let cuts = match self.family.name() {
            "exponential" => Vec::new(),
            "piecewise" => self.family.settings()?.cuts?,
            _ => return None,
        };
        PiecewiseHazard::new(cuts, self.params.clone(), self.unit).ok()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::families::Weibull;

    #[test]
    fn converting_units_keeps_survival_at_the_same_moment() {
        let days = ParametricCurve::new(&Weibull, vec![1.3, 400.0], TimeUnit::Days).unwrap();
        let months = days.in_unit(TimeUnit::Months);
        // 730.5 days = 24 months (interface: a month is a twelfth of 365.25 days).
        assert!((days.log_survival(730.5) - months.log_survival(24.0)).abs() < 1e-13);
    }

    #[test]
    fn exponential_and_piecewise_curves_give_their_hazard_pieces() {
        // Piecewise exponential, rates 0.08 then 0.03 a month from 6 months: cumulative hazard
        // 0.08·6 + 0.03·4 = 0.6 at 10 months, in either unit (definition of the family).
        let family = crate::families::Piecewise::with_cuts(&[6.0]).unwrap();
        let curve = ParametricCurve::new(family, vec![0.08, 0.03], TimeUnit::Months).unwrap();
        let hazard = curve.piecewise_hazard(100.0).unwrap();
        assert_eq!(
            (hazard.cuts.clone(), hazard.unit),
            (vec![6.0], TimeUnit::Months)
        );
        assert!((hazard.cumulative(10.0) - 0.6).abs() < 1e-15);
        let days = hazard.in_unit(TimeUnit::Days);
        assert!((days.cumulative(10.0 * 365.25 / 12.0) - 0.6).abs() < 1e-14);
        // The same curve in days answers in days.
        let in_days = curve.in_unit(TimeUnit::Days).piecewise_hazard(1e4).unwrap();
        assert!((in_days.cumulative(10.0 * 365.25 / 12.0) - 0.6).abs() < 1e-14);
        let exponential =
            ParametricCurve::new(&crate::families::Exponential, vec![0.2], TimeUnit::Years)
                .unwrap();
        let h = exponential.piecewise_hazard(5.0).unwrap();
        assert_eq!((h.cuts.len(), h.rates.clone()), (0, vec![0.2]));
        let weibull = ParametricCurve::new(&Weibull, vec![1.2, 10.0], TimeUnit::Months).unwrap();
        assert!(weibull.piecewise_hazard(100.0).is_none());
    }

    #[test]
    fn merged_pieces_sum_or_take_the_larger_rate_and_an_infinite_rate_ends_survival() {
        let a =
            PiecewiseHazard::new(vec![2.0, 5.0], vec![0.1, 0.4, 0.2], TimeUnit::Months).unwrap();
        // 0.3 a month is 3.6 a year; cut at a quarter of a year (3 months).
        let b =
            PiecewiseHazard::new(vec![0.25], vec![3.6, f64::INFINITY], TimeUnit::Years).unwrap();
        let sum = a.merged(&b, |x, y| x + y);
        assert_eq!(sum.unit, TimeUnit::Months);
        assert_eq!(sum.cuts, vec![2.0, 3.0, 5.0]);
        assert!((sum.rates[0] - 0.4).abs() < 1e-15 && (sum.rates[1] - 0.7).abs() < 1e-15);
        assert_eq!(&sum.rates[2..], &[f64::INFINITY, f64::INFINITY]);
        // H(2.5) = 0.4·2 + 0.7·0.5 by hand; +∞ once past 3 months, never NaN.
        assert!((sum.cumulative(2.5) - 1.15).abs() < 1e-15);
        assert!((sum.cumulative(3.0) - 1.5).abs() < 1e-15);
        assert_eq!(sum.cumulative(3.5), f64::INFINITY);
        let larger = a.merged(&b, f64::max);
        assert!((larger.rates[0] - 0.3).abs() < 1e-15 && larger.rates[1] == 0.4);
        assert!(PiecewiseHazard::new(vec![1.0], vec![0.1, f64::NAN], TimeUnit::Days).is_err());
        assert!(PiecewiseHazard::new(vec![2.0, 1.0], vec![0.1; 3], TimeUnit::Days).is_err());
    }

    #[test]
    fn rejects_out_of_range_parameters() {
        let err = ParametricCurve::new(&Weibull, vec![1.3, -4.0], TimeUnit::Days).unwrap_err();
        assert!(err.contains("scale"), "{err}");
    }
}
