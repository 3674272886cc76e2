//! Exponential family: S(t) = exp(-rate·t), constant hazard `rate`; estimated as `ln_rate`.

use super::{check_positive, Family, ParamUnit};
use crate::fit::FitData;

/// Constant hazard. The maximum-likelihood rate is events / total time at risk.
pub struct Exponential;

impl Family for Exponential {
    fn name(&self) -> &'static str {
        "exponential"
    }
    fn param_names(&self) -> &'static [&'static str] {
        &["rate"]
    }
    fn param_units(&self) -> Vec<ParamUnit> {
        vec![ParamUnit::PerTime]
    }
    fn estimation_names(&self) -> &'static [&'static str] {
        &["ln_rate"]
    }
    fn to_natural(&self, theta: &[f64]) -> Vec<f64> {
        vec![theta[0].exp()]
    }
    fn to_estimation(&self, params: &[f64]) -> Vec<f64> {
        vec![params[0].ln()]
    }
    fn check_params(&self, params: &[f64]) -> Result<(), String> {
        check_positive("rate", params[0])
    }
    fn log_survival(&self, p: &[f64], t: f64) -> f64 {
        -p[0] * t
    }
    fn log_hazard(&self, p: &[f64], _t: f64) -> f64 {
        p[0].ln()
    }
    fn quantile(&self, p: &[f64], prob: f64) -> f64 {
        -(-prob).ln_1p() / p[0]
    }
    fn rescale_time(&self, p: &[f64], factor: f64) -> Vec<f64> {
        vec![p[0] / factor]
    }
    fn proportional_hazards(&self) -> bool {
        true
    }
    fn accelerated_failure_time(&self) -> bool {
        true
    }
    fn start_values(&self, data: &FitData) -> Vec<Vec<f64>> {
        vec![vec![(data.n_events / data.total_time).ln()]]
    }
    fn closed_form_mle(&self, data: &FitData) -> Option<Vec<f64>> {
        Some(vec![(data.n_events / data.total_time).ln()])
    }
    fn loglik_grad(&self, theta: &[f64], data: &FitData) -> (f64, Vec<f64>) {
        // Sufficient statistics: events D and total time T; ll = D ln r - r T.
        let rate = theta[0].exp();
        let ll = data.n_events * theta[0] - rate * data.total_time;
        (ll, vec![data.n_events - rate * data.total_time])
    }
    fn restricted_mean(&self, p: &[f64], horizon: f64) -> f64 {
        // ∫₀^τ e^{-rt} dt = (1 - e^{-rτ})/r, written to stay exact for small rτ.
        horizon * crate::numeric::expm1_over_x(-p[0] * horizon)
    }
}
