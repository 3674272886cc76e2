//! Gompertz family: hazard rate·e^(shape·t), S(t) = exp(-(rate/shape)(e^(shape·t) - 1));
//! estimated as `shape`, `ln_rate`. Negative shape: survival levels off at exp(rate/shape).

use super::{check_finite, check_positive, Family, ParamUnit};
use crate::fit::{sum_terms, FitData, SecondOrder};
use crate::numeric::{expm1_over_x, ln1p_over_x};

/// Exponentially changing hazard; proportional-hazards. Shape → 0 is the exponential.
pub struct Gompertz;

/// Cumulative hazard (rate/shape)(e^x - 1) with x = shape·t, written as rate·t·(e^x - 1)/x
/// near x = 0 so that shape → 0 tends to the exponential without cancellation.
fn cumulative(shape: f64, rate: f64, t: f64) -> f64 {
    let x = shape * t;
    if x.abs() < 1e-3 {
        rate * t * expm1_over_x(x)
    } else {
        rate * x.exp_m1() / shape
    }
}

impl Family for Gompertz {
    fn name(&self) -> &'static str {
        "gompertz"
    }
    fn param_names(&self) -> &'static [&'static str] {
        &["shape", "rate"]
    }
    fn param_units(&self) -> Vec<ParamUnit> {
        // The hazard is rate·e^(shape·t): both are per unit time.
        vec![ParamUnit::PerTime, ParamUnit::PerTime]
    }
    fn estimation_names(&self) -> &'static [&'static str] {
        &["shape", "ln_rate"]
    }
    fn to_natural(&self, theta: &[f64]) -> Vec<f64> {
        vec![theta[0], theta[1].exp()]
    }
    fn to_estimation(&self, params: &[f64]) -> Vec<f64> {
        vec![params[0], params[1].ln()]
    }
    fn check_params(&self, params: &[f64]) -> Result<(), String> {
        check_finite("shape", params[0])?;
        check_positive("rate", params[1])
    }
    fn log_survival(&self, p: &[f64], t: f64) -> f64 {
        if t <= 0.0 {
            return 0.0;
        }
        -cumulative(p[0], p[1], t)
    }
    fn log_hazard(&self, p: &[f64], t: f64) -> f64 {
        p[1].ln() + p[0] * t
    }
    fn quantile(&self, p: &[f64], prob: f64) -> f64 {
        // Solve H(t) = y: t = ln(1 + shape·y/rate)/shape, never reached if shape < 0 and the plateau is above 1 - prob.
        let (shape, rate) = (p[0], p[1]);
        let y = -(-prob).ln_1p();
        let x = shape * y / rate;
        if x <= -1.0 {
            return f64::INFINITY;
        }
        y / rate * ln1p_over_x(x)
    }
    fn rescale_time(&self, p: &[f64], factor: f64) -> Vec<f64> {
        vec![p[0] / factor, p[1] / factor]
    }
    fn proportional_hazards(&self) -> bool {
        true
    }
    fn accelerated_failure_time(&self) -> bool {
        false
    }
    fn start_values(&self, data: &FitData) -> Vec<Vec<f64>> {
        let rate = data.n_events / data.total_time;
        let max_t = data.time.last().copied().unwrap_or(1.0);
        let mut starts = vec![vec![0.0, rate.ln()]];
        for k in [-1.0, 1.0] {
            let shape = k / max_t;
            // Rate making the expected number of events match, given the shape.
            let sum: f64 = data
                .time
                .iter()
                .zip(&data.total)
                .map(|(&t, &n)| n * cumulative(shape, 1.0, t))
                .sum();
            starts.push(vec![shape, (data.n_events / sum).ln()]);
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
}

/// Log-likelihood, gradient and, when `SECOND`, the Hessian [h00, h01, h11] on the estimation
/// scale in one pass (zeros in its place otherwise), so both trait methods share one loop.
fn sums<const SECOND: bool>(theta: &[f64], data: &FitData) -> (f64, [f64; 5]) {
    let shape = theta[0];
    let ln_rate = theta[1];
    let rate = ln_rate.exp();
    // H(t) = rate·t·r(shape·t) with r(x) = (e^x - 1)/x; ∂/∂shape brings t·r', then t²·r''.
    sum_terms::<5>(data, |t, _ln_t, d, n| {
        let x = shape * t;
        let (ratio, ratio_derivative) = expm1_over_x_and_derivative(x);
        let cum = rate * t * ratio;
        let ll = d * (ln_rate + x) - n * cum;
        let g_shape = d * t - n * rate * t * t * ratio_derivative;
        let g_rate = d - n * cum;
        if !SECOND {
            return (ll, [g_shape, g_rate, 0.0, 0.0, 0.0]);
        }
        let h_shape = -n * rate * t * t * t * expm1_over_x_second_derivative(x);
        let h_cross = -n * rate * t * t * ratio_derivative;
        (ll, [g_shape, g_rate, h_shape, h_cross, -n * cum])
    })
}

/// Taylor coefficients 1/(k+1)! of (e^x - 1)/x, k = 0..13; with |x| < 0.1 the remainder is
/// below 1e-26.
const EXPM1_OVER_X_SERIES: [f64; 14] = {
    let mut c = [0.0; 14];
    let mut factorial = 1.0;
    let mut k = 0;
    while k < 14 {
        factorial *= (k + 1) as f64;
        c[k] = 1.0 / factorial;
        k += 1;
    }
    c
};

/// (e^x - 1)/x and its derivative in one go for the likelihood loop: a Horner series near 0
/// (no cancellation), one exponential elsewhere.
fn expm1_over_x_and_derivative(x: f64) -> (f64, f64) {
    if x.abs() < 0.1 {
        let c = &EXPM1_OVER_X_SERIES;
        let mut value = c[13];
        let mut slope = 13.0 * c[13];
        for k in (1..13).rev() {
            value = value * x + c[k];
            slope = slope * x + k as f64 * c[k];
        }
        (value * x + c[0], slope)
    } else {
        let e = x.exp();
        ((e - 1.0) / x, (e * (x - 1.0) + 1.0) / (x * x))
    }
}

/// Second derivative of (e^x - 1)/x: the series Σ k(k-1)·x^(k-2)/(k+1)! near 0, where the
/// closed form (e^x·(x² - 2x + 2) - 2)/x³ cancels.
fn expm1_over_x_second_derivative(x: f64) -> f64 {
    if x.abs() < 0.2 {
        let c = &EXPM1_OVER_X_SERIES;
        let mut value = 13.0 * 12.0 * c[13];
        for k in (2..13).rev() {
            value = value * x + (k * (k - 1)) as f64 * c[k];
        }
        value
    } else {
        (x.exp() * (x * x - 2.0 * x + 2.0) - 2.0) / (x * x * x)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::numeric::expm1_over_x_derivative;

    #[test]
    fn combined_ratio_and_derivative_match_the_separate_forms() {
        for &x in &[
            -30.0, -0.5, -0.1, -0.0999, -1e-4, 0.0, 1e-7, 0.05, 0.0999, 0.1, 2.0, 30.0,
        ] {
            let (value, slope) = expm1_over_x_and_derivative(x);
            let (a, b) = (expm1_over_x(x), expm1_over_x_derivative(x));
            assert!((value - a).abs() <= 4e-15 * a.abs(), "{x}: {value} vs {a}");
            assert!((slope - b).abs() <= 1e-13 * b.abs(), "{x}: {slope} vs {b}");
        }
    }
}
