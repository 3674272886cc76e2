//! Log-normal family: S(t) = 1 - Φ((ln t - mu)/sigma); estimated as `mu`, `ln_sigma`.
//! Log-survival uses the log upper-tail form of the normal, never ln(1 - Φ).

use super::{check_finite, check_positive, Family, ParamUnit};
use crate::fit::{sum_terms, FitData, SecondOrder};
use crate::numeric::{
    inverse_mills, log_normal_sf, normal_pdf, normal_quantile, normal_sf, LN_SQRT_2PI,
};

/// Hazard rising then falling; accelerated-failure-time.
pub struct LogNormal;

impl Family for LogNormal {
    fn name(&self) -> &'static str {
        "lognormal"
    }
    fn param_names(&self) -> &'static [&'static str] {
        &["mu", "sigma"]
    }
    fn param_units(&self) -> Vec<ParamUnit> {
        vec![ParamUnit::LogTime, ParamUnit::Unitless]
    }
    fn estimation_names(&self) -> &'static [&'static str] {
        &["mu", "ln_sigma"]
    }
    fn to_natural(&self, theta: &[f64]) -> Vec<f64> {
        vec![theta[0], theta[1].exp()]
    }
    fn to_estimation(&self, params: &[f64]) -> Vec<f64> {
        vec![params[0], params[1].ln()]
    }
    fn check_params(&self, params: &[f64]) -> Result<(), String> {
        check_finite("mu", params[0])?;
        check_positive("sigma", params[1])
    }
    fn log_survival(&self, p: &[f64], t: f64) -> f64 {
        if t <= 0.0 {
            return 0.0;
        }
        log_normal_sf((t.ln() - p[0]) / p[1])
    }
    fn log_hazard(&self, p: &[f64], t: f64) -> f64 {
        // h = φ(z)/(σ t Q(z)) = inverse Mills ratio / (σ t).
        let z = (t.ln() - p[0]) / p[1];
        inverse_mills(z).ln() - p[1].ln() - t.ln()
    }
    fn log_density(&self, p: &[f64], t: f64) -> f64 {
        let z = (t.ln() - p[0]) / p[1];
        -0.5 * z * z - LN_SQRT_2PI - p[1].ln() - t.ln()
    }
    fn quantile(&self, p: &[f64], prob: f64) -> f64 {
        (p[0] + p[1] * normal_quantile(prob)).exp()
    }
    fn rescale_time(&self, p: &[f64], factor: f64) -> Vec<f64> {
        vec![p[0] + factor.ln(), p[1]]
    }
    fn proportional_hazards(&self) -> bool {
        false
    }
    fn accelerated_failure_time(&self) -> bool {
        true
    }
    fn start_values(&self, data: &FitData) -> Vec<Vec<f64>> {
        let mut starts = Vec::new();
        // Probit line: Φ⁻¹(1 - S) = (ln t - mu)/sigma through the Kaplan–Meier points.
        if let Some((slope, intercept)) = data.km_line(|s| normal_quantile(1.0 - s)) {
            if slope > 0.0 {
                starts.push(vec![-intercept / slope, (1.0 / slope).ln()]);
            }
        }
        let (mean, sd) = data.event_log_time_moments();
        starts.push(vec![mean + sd, sd.max(0.1).ln()]);
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
    let (mu, ln_sigma) = (theta[0], theta[1]);
    let sigma = ln_sigma.exp();
    // z = (ln t - mu)/σ: ∂z/∂mu = -1/σ, ∂z/∂ln σ = -z; the inverse Mills ratio λ(z) has
    // λ' = λ(λ - z).
    sum_terms::<5>(data, |_t, ln_t, d, n| {
        let z = (ln_t - mu) / sigma;
        let c = n - d;
        let mut out = [0.0; 5];
        let mut ll = 0.0;
        if d > 0.0 {
            ll += d * (-0.5 * z * z - LN_SQRT_2PI - ln_sigma - ln_t);
            out[0] += d * z / sigma;
            out[1] += d * (z * z - 1.0);
            if SECOND {
                out[2] -= d / (sigma * sigma);
                out[3] -= 2.0 * d * z / sigma;
                out[4] -= 2.0 * d * z * z;
            }
        }
        if c > 0.0 {
            let (log_q, lambda) = log_sf_and_inverse_mills(z);
            ll += c * log_q;
            out[0] += c * lambda / sigma;
            out[1] += c * lambda * z;
            if SECOND {
                let slope = lambda * (lambda - z);
                out[2] -= c * slope / (sigma * sigma);
                out[3] -= c * (slope * z + lambda) / sigma;
                out[4] -= c * z * (slope * z + lambda);
            }
        }
        (ll, out)
    })
}

/// ln Q(z) and the inverse Mills ratio φ(z)/Q(z) from one complementary error function in
/// the central range (the censored terms of the likelihood need both); the tails use the
/// shared guarded forms.
fn log_sf_and_inverse_mills(z: f64) -> (f64, f64) {
    if (-5.0..=5.0).contains(&z) {
        let q = normal_sf(z);
        (q.ln(), normal_pdf(z) / q)
    } else {
        (log_normal_sf(z), inverse_mills(z))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn combined_tail_terms_match_the_separate_forms() {
        for &z in &[
            -30.0, -5.0, -4.99, -1.0, 0.0, 0.7, 4.99, 5.0, 5.01, 12.0, 40.0,
        ] {
            let (log_q, lambda) = log_sf_and_inverse_mills(z);
            assert!((log_q - log_normal_sf(z)).abs() <= 1e-14 * log_normal_sf(z).abs().max(1e-300));
            assert!((lambda - inverse_mills(z)).abs() <= 1e-14 * inverse_mills(z));
        }
    }
}
