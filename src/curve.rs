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
    fn rejects_out_of_range_parameters() {
        let err = ParametricCurve::new(&Weibull, vec![1.3, -4.0], TimeUnit::Days).unwrap_err();
        assert!(err.contains("scale"), "{err}");
    }
}
