//! Weibull family: S(t) = exp(-(t/scale)^shape); estimated as `ln_shape`, `ln_scale`.

use super::{check_positive, Family, ParamUnit};
use crate::fit::{sum_terms, FitData, SecondOrder};

/// Monotone hazard (increasing for shape > 1); both proportional-hazards and accelerated-failure-time.
pub struct Weibull;

impl Family for Weibull {
    fn name(&self) -> &'static str {
        "weibull"
    }
    fn param_names(&self) -> &'static [&'static str] {
        &["shape", "scale"]
    }
    fn param_units(&self) -> Vec<ParamUnit> {
        vec![ParamUnit::Unitless, ParamUnit::Time]
    }
    fn estimation_names(&self) -> &'static [&'static str] {
        &["ln_shape", "ln_scale"]
    }
    fn to_natural(&self, theta: &[f64]) -> Vec<f64> {
        vec![theta[0].exp(), theta[1].exp()]
    }
    fn to_estimation(&self, params: &[f64]) -> Vec<f64> {
        vec![params[0].ln(), params[1].ln()]
    }
    fn check_params(&self, params: &[f64]) -> Result<(), String> {
        check_positive("shape", params[0])?;
        check_positive("scale", params[1])
    }
    fn log_survival(&self, p: &[f64], t: f64) -> f64 {
        if t <= 0.0 {
            return 0.0;
        }
        -(p[0] * (t / p[1]).ln()).exp()
    }
    fn log_hazard(&self, p: &[f64], t: f64) -> f64 {
        let (shape, scale) = (p[0], p[1]);
        shape.ln() - scale.ln() + (shape - 1.0) * (t / scale).ln()
    }
    fn quantile(&self, p: &[f64], prob: f64) -> f64 {
        p[1] * (-(-prob).ln_1p()).powf(1.0 / p[0])
    }
    fn rescale_time(&self, p: &[f64], factor: f64) -> Vec<f64> {
        vec![p[0], p[1] * factor]
    }
    fn proportional_hazards(&self) -> bool {
        true
    }
    fn accelerated_failure_time(&self) -> bool {
        true
    }
    fn start_values(&self, data: &FitData) -> Vec<Vec<f64>> {
        let mut starts = Vec::new();
        // Straight line ln(-ln S) = shape·ln t - shape·ln scale through the Kaplan–Meier points.
        if let Some((slope, intercept)) = data.km_line(|s| (-s.ln()).ln()) {
            if slope > 0.0 {
                starts.push(vec![slope.ln(), -intercept / slope]);
            }
        }
        for shape in [1.0f64, 0.5, 2.0] {
            // Given the shape, the scale MLE is (Σ n t^shape / D)^(1/shape).
            let sum: f64 = data
                .time
                .iter()
                .zip(&data.total)
                .map(|(t, n)| n * t.powf(shape))
                .sum();
            starts.push(vec![shape.ln(), (sum / data.n_events).ln() / shape]);
        }
        starts
    }
    fn loglik_grad(&self, theta: &[f64], data: &FitData) -> (f64, Vec<f64>) {
        let (ll, s) = sums::<false>(theta, data);
        (ll, s[..2].to_vec())
    }
    fn loglik_grad_hessian(&self, theta: &[f64], data: &FitData) -> Option<SecondOrder> {
        let (ll, s) = sums::<true>(theta, data);
        Some(SecondOrder::two(ll, s))
    }
    fn restricted_mean(&self, p: &[f64], horizon: f64) -> f64 {
        // ∫₀^τ S = (scale/k)·γ(1/k, x) = scale·Γ(1+1/k)·P(1/k, x) with x = (τ/scale)^k, P the
        // regularised lower incomplete gamma (substitute u = (t/scale)^k).
        let a = 1.0 + 1.0 / p[0];
        if !horizon.is_finite() {
            return p[1] * statrs::function::gamma::gamma(a);
        }
        let x = (horizon / p[1]).powf(p[0]);
        p[1] * statrs::function::gamma::gamma(a) * statrs::function::gamma::gamma_lr(1.0 / p[0], x)
    }
}

/// Log-likelihood, gradient and, when `SECOND`, the Hessian [h00, h01, h11] on the estimation
/// scale in one pass (zeros in its place otherwise), so both trait methods share one loop.
fn sums<const SECOND: bool>(theta: &[f64], data: &FitData) -> (f64, [f64; 5]) {
    let shape = theta[0].exp();
    let (ln_shape, ln_scale) = (theta[0], theta[1]);
    // With u = shape·(ln t - ln scale): ∂u/∂ln shape = u, ∂u/∂ln scale = -shape.
    sum_terms::<5>(data, |_t, ln_t, d, n| {
        let u = shape * (ln_t - ln_scale);
        let cum = u.exp();
        let ll = d * (ln_shape + (shape - 1.0) * ln_t - shape * ln_scale) - n * cum;
        let g_shape = d * (1.0 + u) - n * cum * u;
        let g_scale = shape * (n * cum - d);
        if !SECOND {
            return (ll, [g_shape, g_scale, 0.0, 0.0, 0.0]);
        }
        let h_shape = d * u - n * cum * u * (u + 1.0);
        let h_cross = shape * (n * cum * (u + 1.0) - d);
        let h_scale = -shape * shape * n * cum;
        (ll, [g_shape, g_scale, h_shape, h_cross, h_scale])
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn restricted_mean_is_the_integral_of_survival_not_the_truncated_mean() {
        // Regression: the closed form once used P(1 + 1/k, x), which is the mean of T over
        // T < τ without the τ·S(τ) term. Exponential case (shape 1): ∫₀^τ e^(-t/s) dt =
        // s(1 - e^(-τ/s)) (elementary integral).
        let got = Weibull.restricted_mean(&[1.0, 5.0], 7.0);
        assert!((got - 5.0 * (1.0 - (-7.0f64 / 5.0).exp())).abs() < 1e-12);
    }
}
