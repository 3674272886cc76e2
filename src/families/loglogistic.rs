//! Log-logistic family: S(t) = 1/(1 + (t/scale)^shape); estimated as `ln_shape`, `ln_scale`.

use super::{check_positive, Family, ParamUnit};
use crate::fit::{sum_terms, FitData, SecondOrder};
use crate::numeric::softplus;

/// Hazard rising then falling for shape > 1; accelerated-failure-time (proportional odds).
pub struct LogLogistic;

impl Family for LogLogistic {
    fn name(&self) -> &'static str {
        "loglogistic"
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
        -softplus(p[0] * (t / p[1]).ln())
    }
    fn log_hazard(&self, p: &[f64], t: f64) -> f64 {
        // h = (k/t)·e^u/(1 + e^u), u = k ln(t/scale).
        let u = p[0] * (t / p[1]).ln();
        p[0].ln() - t.ln() + u - softplus(u)
    }
    fn quantile(&self, p: &[f64], prob: f64) -> f64 {
        p[1] * (prob / (1.0 - prob)).powf(1.0 / p[0])
    }
    fn rescale_time(&self, p: &[f64], factor: f64) -> Vec<f64> {
        vec![p[0], p[1] * factor]
    }
    fn proportional_hazards(&self) -> bool {
        false
    }
    fn accelerated_failure_time(&self) -> bool {
        true
    }
    fn start_values(&self, data: &FitData) -> Vec<Vec<f64>> {
        let mut starts = Vec::new();
        // Log-odds line: ln((1 - S)/S) = shape·ln t - shape·ln scale through the Kaplan–Meier points.
        if let Some((slope, intercept)) = data.km_line(|s| ((1.0 - s) / s).ln()) {
            if slope > 0.0 {
                starts.push(vec![slope.ln(), -intercept / slope]);
            }
        }
        let (mean, sd) = data.event_log_time_moments();
        // Logistic sd = π/(√3·shape).
        let shape = (std::f64::consts::PI / (3f64.sqrt() * sd.max(0.05))).max(0.1);
        starts.push(vec![shape.ln(), mean + sd]);
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
}

/// Log-likelihood, gradient and, when `SECOND`, the Hessian [h00, h01, h11] on the estimation
/// scale in one pass (zeros in its place otherwise), so both trait methods share one loop.
fn sums<const SECOND: bool>(theta: &[f64], data: &FitData) -> (f64, [f64; 5]) {
    let ln_shape = theta[0];
    let shape = ln_shape.exp();
    let ln_scale = theta[1];
    // u = shape·(ln t - ln scale): ∂u/∂ln shape = u, ∂u/∂ln scale = -shape; the logistic
    // σ(u) has σ' = σ(1 - σ).
    sum_terms::<5>(data, |_t, ln_t, d, n| {
        let u = shape * (ln_t - ln_scale);
        let (sp, sig) = softplus_and_logistic(u);
        let ll = d * (ln_shape - ln_t + u - sp) - n * sp;
        let g_shape = d * (1.0 + u * (1.0 - sig)) - n * sig * u;
        let g_scale = shape * (n * sig - d * (1.0 - sig));
        if !SECOND {
            return (ll, [g_shape, g_scale, 0.0, 0.0, 0.0]);
        }
        let slope = sig * (1.0 - sig);
        let event_part = 1.0 - sig - slope * u;
        let total_part = sig + slope * u;
        let h_shape = u * (d * event_part - n * total_part);
        let h_cross = shape * (n * total_part - d * event_part);
        let h_scale = -shape * shape * (n + d) * slope;
        (ll, [g_shape, g_scale, h_shape, h_cross, h_scale])
    })
}

/// softplus(u) = ln(1 + e^u) and its derivative, the logistic 1/(1 + e^-u), from one
/// exponential (the likelihood loop's cost is its transcendental calls).
fn softplus_and_logistic(u: f64) -> (f64, f64) {
    let e = (-u.abs()).exp();
    let sp = u.max(0.0) + e.ln_1p();
    let sig = if u >= 0.0 {
        1.0 / (1.0 + e)
    } else {
        e / (1.0 + e)
    };
    (sp, sig)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::numeric::logistic;

    #[test]
    fn combined_softplus_and_logistic_match_the_separate_forms() {
        for &u in &[-800.0, -40.0, -3.0, -1e-9, 0.0, 1e-9, 2.5, 35.0, 800.0] {
            let (sp, sig) = softplus_and_logistic(u);
            assert!((sp - softplus(u)).abs() <= 1e-15 * softplus(u).abs().max(1e-300));
            assert!((sig - logistic(u)).abs() <= 1e-15 * logistic(u).max(1e-300));
        }
    }
}
