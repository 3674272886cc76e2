//! Generalized gamma family in the Prentice (1974) form used by Cox, Chu, Schneider and Muñoz
//! (2007): with w = (ln t - mu)/sigma and a = q⁻², u = a·e^(q·w) follows a gamma(a, 1)
//! distribution; S = Q(a, u) for q > 0, P(a, u) for q < 0, and 1 - Φ(w) at q = 0. Estimated
//! as `mu`, `ln_sigma`, `q`.
//!
//! Near q = 0 (|q| < 0.01, a > 10⁴) the incomplete gamma is replaced by Temme's uniform
//! asymptotic expansion (Temme, 1979; DLMF §8.12), which is continuous through the
//! log-normal limit; elsewhere the log-scale series/continued fraction of
//! [`super::incomplete_gamma`] is used. The log density is written so that the large terms
//! of ln Γ(a) cancel analytically (Stirling remainder), stable for every q.

use super::incomplete_gamma::{
    expm1_minus_x_over_x2, expm1_minus_x_over_x2_derivative, expm1_minus_x_over_x2_with,
    log_gamma_pq, log_gamma_side_derivative, log_gamma_side_second, stirlerr, Curve, Shape,
};
use super::{check_finite, check_positive, quantile_by_bisection, Family, ParamUnit};
use crate::fit::{sum_terms, FitData, SecondOrder};
use crate::numeric::{inverse_mills, log_normal_sf, normal_quantile, LN_SQRT_2PI};

/// Three-parameter family containing the Weibull (q = 1), log-normal (q = 0) and gamma
/// (q = sigma); accelerated-failure-time.
pub struct GeneralizedGamma;

/// Below this |q| the uniform asymptotic expansion is used (its error is of order |q|⁵).
const Q_UNIFORM: f64 = 0.01;

/// Temme's coefficients C₀(η), C₁(η) with λ - 1 = `lm1`; Taylor series near η = 0 where the
/// closed forms cancel (DLMF 8.12.8–8.12.9; checked against the closed forms in the tests).
fn temme_coefficients(eta: f64, lm1: f64) -> (f64, f64) {
    let c0 = if eta.abs() < 0.01 {
        -1.0 / 3.0 + eta / 12.0 - 2.0 * eta * eta / 135.0 + eta * eta * eta / 864.0
    } else {
        1.0 / lm1 - 1.0 / eta
    };
    let c1 = if eta.abs() < 0.02 {
        -1.0 / 540.0 - eta / 288.0 + eta * eta / 378.0
    } else {
        1.0 / (eta * eta * eta) - 1.0 / (lm1 * lm1 * lm1) - 1.0 / (lm1 * lm1) - 1.0 / (12.0 * lm1)
    };
    (c0, c1)
}

/// ln S at standardised log time `w`, choosing the uniform expansion when `uniform`.
fn log_survival_w(q: f64, w: f64, uniform: bool) -> f64 {
    if w == f64::NEG_INFINITY {
        return 0.0;
    }
    let y = q * w;
    if uniform {
        // S = Q̄(z) + q·φ(z)·(C₀(η) + q²·C₁(η)), z = w·√(2φ₂(qw)), η = q·z.
        let z = w * (2.0 * expm1_minus_x_over_x2(y)).sqrt();
        let eta = q * z;
        let (c0, c1) = temme_coefficients(eta, y.exp_m1());
        let correction = q * inverse_mills(z) * (c0 + q * q * c1);
        log_normal_sf(z) + correction.ln_1p()
    } else {
        let (log_p, log_q) = log_gamma_pq(1.0 / (q * q), y);
        if q > 0.0 {
            log_q
        } else {
            log_p
        }
    }
}

/// ln f(t)·t·sigma as a function of w: -ln √(2π) - stirlerr(q⁻²) - w²·φ₂(qw).
fn log_density_w(q: f64, w: f64) -> f64 {
    let a_term = if q == 0.0 {
        0.0
    } else {
        stirlerr(1.0 / (q * q))
    };
    -LN_SQRT_2PI - a_term - w * w * expm1_minus_x_over_x2(q * w)
}

/// Step for the Richardson-extrapolated derivative in q.
fn q_step(q: f64) -> f64 {
    2e-3 * q.abs().max(1.0)
}

/// d/dq of `f` by Richardson extrapolation of central differences (error of order h⁴).
fn d_dq(f: impl Fn(f64) -> f64, q: f64) -> f64 {
    let h = q_step(q);
    let d1 = (f(q + h) - f(q - h)) / (2.0 * h);
    let d2 = (f(q + h / 2.0) - f(q - h / 2.0)) / h;
    (4.0 * d2 - d1) / 3.0
}

/// First and second derivatives in q of `f`, whose value at q is `at_q`, by Richardson
/// extrapolation of central differences from the four evaluations of [`d_dq`].
fn d_dq_second(f: impl Fn(f64) -> f64, q: f64, at_q: f64) -> (f64, f64) {
    let h = q_step(q);
    let (up, down) = (f(q + h), f(q - h));
    let (up_half, down_half) = (f(q + h / 2.0), f(q - h / 2.0));
    let d1 = (up - down) / (2.0 * h);
    let d1_half = (up_half - down_half) / h;
    let s = (up - 2.0 * at_q + down) / (h * h);
    let s_half = (up_half - 2.0 * at_q + down_half) / (h * h / 4.0);
    ((4.0 * d1_half - d1) / 3.0, (4.0 * s_half - s) / 3.0)
}

impl Family for GeneralizedGamma {
    fn name(&self) -> &'static str {
        "generalized-gamma"
    }
    fn param_names(&self) -> &'static [&'static str] {
        &["mu", "sigma", "q"]
    }
    fn param_units(&self) -> Vec<ParamUnit> {
        vec![ParamUnit::LogTime, ParamUnit::Unitless, ParamUnit::Unitless]
    }
    fn estimation_names(&self) -> &'static [&'static str] {
        &["mu", "ln_sigma", "q"]
    }
    fn to_natural(&self, theta: &[f64]) -> Vec<f64> {
        vec![theta[0], theta[1].exp(), theta[2]]
    }
    fn to_estimation(&self, params: &[f64]) -> Vec<f64> {
        vec![params[0], params[1].ln(), params[2]]
    }
    fn check_params(&self, params: &[f64]) -> Result<(), String> {
        check_finite("mu", params[0])?;
        check_positive("sigma", params[1])?;
        check_finite("q", params[2])
    }
    fn log_survival(&self, p: &[f64], t: f64) -> f64 {
        if t <= 0.0 {
            return 0.0;
        }
        let w = (t.ln() - p[0]) / p[1];
        log_survival_w(p[2], w, p[2].abs() < Q_UNIFORM)
    }
    fn log_hazard(&self, p: &[f64], t: f64) -> f64 {
        self.log_density(p, t) - self.log_survival(p, t)
    }
    fn log_density(&self, p: &[f64], t: f64) -> f64 {
        let w = (t.ln() - p[0]) / p[1];
        log_density_w(p[2], w) - p[1].ln() - t.ln()
    }
    fn quantile(&self, p: &[f64], prob: f64) -> f64 {
        if p[2] == 0.0 {
            return (p[0] + p[1] * normal_quantile(prob)).exp();
        }
        quantile_by_bisection(|t| self.log_survival(p, t), prob)
    }
    fn rescale_time(&self, p: &[f64], factor: f64) -> Vec<f64> {
        vec![p[0] + factor.ln(), p[1], p[2]]
    }
    fn proportional_hazards(&self) -> bool {
        false
    }
    fn accelerated_failure_time(&self) -> bool {
        true
    }
    fn start_values(&self, data: &FitData) -> Vec<Vec<f64>> {
        let mut starts = Vec::new();
        // Weibull line ln(-ln S) = shape·(ln t - ln scale): q = 1, sigma = 1/shape, mu = ln scale.
        if let Some((slope, intercept)) = data.km_line(|s| (-s.ln()).ln()) {
            if slope > 0.0 {
                starts.push(vec![-intercept / slope, -slope.ln(), 1.0]);
            }
        }
        // Probit line Φ⁻¹(1 - S) = (ln t - mu)/sigma: q = 0 (log-normal), and either side of it.
        if let Some((slope, intercept)) = data.km_line(|s| normal_quantile(1.0 - s)) {
            if slope > 0.0 {
                for q in [0.0, -0.5] {
                    starts.push(vec![-intercept / slope, -slope.ln(), q]);
                }
            }
        }
        let (mean, sd) = data.event_log_time_moments();
        starts.push(vec![mean + sd, sd.max(0.1).ln(), 0.5]);
        starts
    }
    fn loglik_grad(&self, theta: &[f64], data: &FitData) -> (f64, Vec<f64>) {
        let (ll, s) = sums::<false>(theta, data);
        (ll, s[..3].to_vec())
    }
    fn loglik_grad_hessian(&self, theta: &[f64], data: &FitData) -> Option<SecondOrder> {
        let (ll, s) = sums::<true>(theta, data);
        let hessian = [[s[3], s[4], s[6]], [s[4], s[5], s[7]], [s[6], s[7], s[8]]];
        Some(SecondOrder {
            loglik: ll,
            grad: s[..3].to_vec(),
            hessian: hessian.iter().map(|row| row.to_vec()).collect(),
            exact: 3,
        })
    }
}

/// Log-likelihood, gradient in (mu, ln σ, q) and, when `HESSIAN`, the Hessian
/// [∂²/∂mu², ∂²/∂mu∂ln σ, ∂²/∂ln σ², ∂²/∂mu∂q, ∂²/∂ln σ∂q, ∂²/∂q²] in one pass. With
/// w = (ln t - mu)/σ, ∂w/∂mu = -1/σ and ∂w/∂ln σ = -w, so the (mu, ln σ) block needs only
/// second derivatives in w: of ln f, -g''(w) with g(w) = w²φ₂(qw), g'' = e^(qw); of ln S,
/// -r·(r - g') with r = σ·t·h. The cross terms with q are those of ∂ln f/∂mu = g'/σ
/// (∂g'/∂q = w²ψ(qw), ψ = d((e^y - 1)/y)/dy) and of ∂ln S/∂mu = r/σ, with
/// ∂ln r/∂q = ∂ln(fσt)/∂q - ∂ln S/∂q; ∂²ln S/∂q² comes from the incomplete gamma's series or
/// continued fraction differentiated twice along (a, y) = (q⁻², qw).
fn sums<const HESSIAN: bool>(theta: &[f64], data: &FitData) -> (f64, [f64; 9]) {
    let (mu, ln_sigma, q) = (theta[0], theta[1], theta[2]);
    let sigma = ln_sigma.exp();
    let uniform = q.abs() < Q_UNIFORM;
    // Shared by every record of the pass: the shape a = q⁻², its Stirling remainder and
    // the derivatives in q (no ln Γ per record).
    let a = 1.0 / (q * q);
    let has_shape = q != 0.0 && a.is_finite();
    let shape = has_shape.then(|| Shape::new(a));
    let (a_term, da_term_dq) = if has_shape {
        (stirlerr(a), a_term_derivative(q))
    } else {
        (0.0, 0.0)
    };
    // By its series in q² also at q = 0, where it is 1/6.
    let d2a_term_dq2 = a_term_second_derivative(q);
    // a = q⁻² along q, y = q·w along q (da, d2a; dy = w per record).
    let (da_dq, d2a_dq2) = if has_shape {
        (-2.0 / (q * q * q), 6.0 / (q * q * q * q))
    } else {
        (0.0, 0.0)
    };
    let inv_sigma = 1.0 / sigma;
    let inv_sigma2 = inv_sigma * inv_sigma;
    sum_terms::<9>(data, |_t, ln_t, d, n| {
        let w = (ln_t - mu) * inv_sigma;
        let c = n - d;
        // One exponential per record serves the density, its derivatives and the survival.
        let y = q * w;
        let em1 = y.exp_m1();
        let (phi2, expm1_over_y, dphi2, inv_y) = phi_terms(y, em1);
        // ln f·σ·t = -ln √(2π) - stirlerr(q⁻²) - w²φ₂(qw), as `log_density_w`.
        let log_f = -LN_SQRT_2PI - a_term - w * w * phi2;
        // d(w²φ₂)/dw = w·(e^(qw) - 1)/(qw); d(w²φ₂(qw))/dq = w³φ₂'(qw).
        let dg_dw = w * expm1_over_y;
        let w2 = w * w;
        let w3 = w2 * w;
        let dlog_f_dq = -da_term_dq - w3 * dphi2;
        let mut ll = 0.0;
        let mut out = [0.0; 9];
        if d > 0.0 {
            ll += d * (log_f - ln_sigma - ln_t);
            out[0] += d * dg_dw * inv_sigma;
            out[1] += d * (w * dg_dw - 1.0);
            out[2] += d * dlog_f_dq;
            if HESSIAN {
                let g2 = em1 + 1.0;
                out[3] -= d * g2 * inv_sigma2;
                out[4] -= d * (w * g2 + dg_dw) * inv_sigma;
                out[5] -= d * w * (dg_dw + w * g2);
                let (psi, d2phi2) = second_phi_terms(y, inv_y, em1, expm1_over_y, dphi2);
                out[6] += d * w2 * psi * inv_sigma;
                out[7] += d * w3 * psi;
                out[8] += d * (-d2a_term_dq2 - w2 * w2 * d2phi2);
            }
        }
        if c > 0.0 {
            let (log_s, dlog_s_dq, d2log_s_dq2) = match (&shape, uniform, HESSIAN) {
                (Some(shape), false, false) => {
                    let (v, dv) = log_gamma_side_derivative(shape, y, em1, phi2, q > 0.0, da_dq, w);
                    (v, dv, 0.0)
                }
                (Some(shape), false, true) => {
                    let curve = Curve {
                        da: da_dq,
                        dy: w,
                        d2a: d2a_dq2,
                        d2y: 0.0,
                    };
                    let [v, dv, d2v] = log_gamma_side_second(shape, y, em1, phi2, q > 0.0, &curve);
                    (v, dv, d2v)
                }
                (_, _, false) => (
                    log_survival_w(q, w, true),
                    d_dq(|qq| log_survival_w(qq, w, true), q),
                    0.0,
                ),
                (_, _, true) => {
                    let v = log_survival_w(q, w, true);
                    let (dv, d2v) = d_dq_second(|qq| log_survival_w(qq, w, true), q, v);
                    (v, dv, d2v)
                }
            };
            // ∂ln S/∂mu = t·h, ∂ln S/∂ln σ = σ·t·h·w, with ln(σ·t·h) = ln f·σ·t - ln S.
            let sigma_t_h = (log_f - log_s).exp();
            ll += c * log_s;
            out[0] += c * sigma_t_h * inv_sigma;
            out[1] += c * sigma_t_h * w;
            out[2] += c * dlog_s_dq;
            if HESSIAN {
                let slope = sigma_t_h * (sigma_t_h - dg_dw);
                out[3] -= c * slope * inv_sigma2;
                out[4] -= c * (w * slope + sigma_t_h) * inv_sigma;
                out[5] -= c * w * (w * slope + sigma_t_h);
                let cross = sigma_t_h * (dlog_f_dq - dlog_s_dq);
                out[6] += c * cross * inv_sigma;
                out[7] += c * cross * w;
                out[8] += c * d2log_s_dq2;
            }
        }
        (ll, out)
    })
}

/// φ₂(y) = (e^y - 1 - y)/y², (e^y - 1)/y, φ₂'(y) and 1/y given `em1` = e^y - 1: one division
/// away from 0, the series of the separate functions near it (|y| < 0.05, where they switch;
/// 1/y is then not needed and returned as 0).
fn phi_terms(y: f64, em1: f64) -> (f64, f64, f64, f64) {
    if y.abs() < 0.05 {
        let phi2 = expm1_minus_x_over_x2_with(y, em1);
        let derivative = expm1_minus_x_over_x2_derivative(y, em1, phi2);
        (phi2, expm1_over_x_with(y, em1), derivative, 0.0)
    } else {
        let r = 1.0 / y;
        let ratio = em1 * r;
        let phi2 = (ratio - 1.0) * r;
        (phi2, ratio, (ratio - 2.0 * phi2) * r, r)
    }
}

/// ψ(y) = d((e^y - 1)/y)/dy = 3φ₂' + y·φ₂'' and φ₂''(y), given `em1` = e^y - 1, `ratio` =
/// (e^y - 1)/y, `dphi2` = φ₂'(y) and `inv_y` = 1/y from [`phi_terms`]; by their series where
/// that switches.
fn second_phi_terms(y: f64, inv_y: f64, em1: f64, ratio: f64, dphi2: f64) -> (f64, f64) {
    if y.abs() < 0.05 {
        // ψ = Σ (k+1) y^k/(k+2)!, φ₂'' = Σ (k+1)(k+2) y^k/(k+4)!.
        let mut psi = 0.0;
        let mut d2phi2 = 0.0;
        let mut power = 1.0;
        let mut factorial = 2.0; // (k+2)!
        for k in 0..12 {
            let k = k as f64;
            psi += (k + 1.0) * power / factorial;
            d2phi2 += (k + 1.0) * (k + 2.0) * power / (factorial * (k + 3.0) * (k + 4.0));
            power *= y;
            factorial *= k + 3.0;
        }
        (psi, d2phi2)
    } else {
        let psi = (em1 + 1.0 - ratio) * inv_y;
        (psi, (psi - 3.0 * dphi2) * inv_y)
    }
}

/// (e^y - 1)/y given `em1` = e^y - 1, as [`crate::numeric::expm1_over_x`].
fn expm1_over_x_with(y: f64, em1: f64) -> f64 {
    if y.abs() < 1e-5 {
        1.0 + y / 2.0 + y * y / 6.0 + y * y * y / 24.0
    } else {
        em1 / y
    }
}

/// d/dq of stirlerr(q⁻²): by the series in r = q² where a ≥ 10 (no division by q³ near the
/// log-normal limit), by the chain rule elsewhere.
fn a_term_derivative(q: f64) -> f64 {
    let a = 1.0 / (q * q);
    if a >= 10.0 {
        stirlerr_in_r(q * q).0 * 2.0 * q
    } else {
        super::incomplete_gamma::stirlerr_derivative(a) * (-2.0 / (q * q * q))
    }
}

/// First and second derivatives in r = 1/a of stirlerr(a) = Σ c_k r^(2k+1) (Abramowitz and
/// Stegun, 1964, 6.1.40), for a ≥ 10.
fn stirlerr_in_r(r: f64) -> (f64, f64) {
    let r2 = r * r;
    let ds_dr = 1.0 / 12.0
        - r2 * (3.0 / 360.0 - r2 * (5.0 / 1260.0 - r2 * (7.0 / 1680.0 - r2 * (9.0 / 1188.0))));
    let d2s_dr2 =
        -r * (6.0 / 360.0 - r2 * (20.0 / 1260.0 - r2 * (42.0 / 1680.0 - r2 * (72.0 / 1188.0))));
    (ds_dr, d2s_dr2)
}

/// d²/dq² of stirlerr(q⁻²), as [`a_term_derivative`].
fn a_term_second_derivative(q: f64) -> f64 {
    let a = 1.0 / (q * q);
    if a >= 10.0 {
        // With r = q²: d²/dq² = 4q²·d²s/dr² + 2·ds/dr.
        let r = q * q;
        let (ds_dr, d2s_dr2) = stirlerr_in_r(r);
        4.0 * r * d2s_dr2 + 2.0 * ds_dr
    } else {
        let da = -2.0 / (q * q * q);
        super::incomplete_gamma::stirlerr_second_derivative(a) * da * da
            + super::incomplete_gamma::stirlerr_derivative(a) * 6.0 * a * a
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::families::{LogNormal, Weibull};
    use statrs::distribution::{Continuous, ContinuousCDF, Gamma};

    /// Times spanning the body and both tails of each curve.
    fn times() -> Vec<f64> {
        (0..60).map(|i| 1e-3 * 1.3f64.powi(i)).collect()
    }

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol * a.abs().max(b.abs()).max(1e-300) || a == b
    }

    #[test]
    fn q_one_is_the_weibull() {
        // Prentice (1974); Cox et al. (2007), Table 1: q = 1 gives the Weibull with shape
        // 1/sigma and scale e^mu.
        for &(mu, sigma) in &[(1.0, 0.5), (3.0, 1.7), (-0.5, 0.2)] {
            let weibull = [1.0 / sigma, f64::exp(mu)];
            for t in times() {
                let gg = [mu, sigma, 1.0];
                let (a, b) = (
                    GeneralizedGamma.log_survival(&gg, t),
                    Weibull.log_survival(&weibull, t),
                );
                assert!(close(a, b, 1e-10), "ln S({t}) {a} vs {b}");
                let (a, b) = (
                    GeneralizedGamma.log_density(&gg, t),
                    Weibull.log_density(&weibull, t),
                );
                assert!(
                    (a - b).abs() <= 1e-10 * b.abs().max(1.0),
                    "ln f({t}) {a} vs {b}"
                );
            }
        }
    }

    #[test]
    fn q_zero_and_near_zero_is_the_lognormal() {
        // Cox et al. (2007): the log-normal is the q → 0 limit; the survival is continuous there.
        for &(mu, sigma) in &[(1.0, 0.5), (3.0, 1.7)] {
            let ln = [mu, sigma];
            for t in times() {
                for q in [0.0, 1e-9, -1e-9] {
                    let gg = [mu, sigma, q];
                    let (a, b) = (
                        GeneralizedGamma.log_survival(&gg, t),
                        LogNormal.log_survival(&ln, t),
                    );
                    assert!(
                        (a - b).abs() <= 1e-8 * b.abs().max(1e-2),
                        "q={q} ln S({t}) {a} vs {b}"
                    );
                    let (a, b) = (
                        GeneralizedGamma.log_density(&gg, t),
                        LogNormal.log_density(&ln, t),
                    );
                    assert!((a - b).abs() <= 1e-8 * b.abs().max(1.0), "ln f({t})");
                }
            }
        }
    }

    #[test]
    fn q_equal_sigma_is_the_gamma() {
        // Prentice (1974); Cox et al. (2007), Table 1: q = sigma gives the gamma with shape
        // q⁻² and scale e^mu·q²; statrs' Gamma (shape, rate) is the independent reference.
        for &(mu, q) in &[(1.0, 0.5), (2.0, 1.5), (0.3, 0.8)] {
            let shape = 1.0 / (q * q);
            let scale = f64::exp(mu) * q * q;
            let gamma = Gamma::new(shape, 1.0 / scale).unwrap();
            for t in times() {
                let s = gamma.sf(t);
                if s > 1e-300 && s < 1.0 {
                    let a = GeneralizedGamma.log_survival(&[mu, q, q], t).exp();
                    assert!(close(a, s, 1e-10), "S({t}) {a} vs {s}");
                }
                let f = gamma.ln_pdf(t);
                let a = GeneralizedGamma.log_density(&[mu, q, q], t);
                assert!(
                    (a - f).abs() <= 1e-10 * f.abs().max(1.0),
                    "ln f({t}) {a} vs {f}"
                );
            }
        }
    }

    #[test]
    fn uniform_expansion_meets_the_direct_method_at_the_switch() {
        // Both sides of |q| = 0.01 must give the same curve: the two methods are independent.
        for q in [Q_UNIFORM, -Q_UNIFORM, 0.012, -0.015] {
            for w in [-6.0, -2.0, -0.3, 0.0, 0.7, 2.5, 6.0, 12.0] {
                let a = log_survival_w(q, w, true);
                let b = log_survival_w(q, w, false);
                assert!(close(a, b, 1e-10), "q={q} w={w}: {a} vs {b}");
            }
        }
    }

    #[test]
    fn temme_series_agree_with_closed_forms_at_the_switch() {
        // The Taylor series (DLMF 8.12) and the closed forms must agree where both are used.
        for eta in [0.01f64, -0.01, 0.02, -0.02] {
            // λ from η: solve λ - 1 - ln λ = η²/2 by Newton on the side sign(η).
            let mut lambda = 1.0 + eta;
            for _ in 0..50 {
                let f = lambda - 1.0 - lambda.ln() - eta * eta / 2.0;
                lambda -= f / (1.0 - 1.0 / lambda);
            }
            let lm1 = lambda - 1.0;
            let (c0, c1) = temme_coefficients(eta, lm1);
            let c0_closed = 1.0 / lm1 - 1.0 / eta;
            let c1_closed =
                1.0 / eta.powi(3) - 1.0 / lm1.powi(3) - 1.0 / lm1.powi(2) - 1.0 / (12.0 * lm1);
            assert!((c0 - c0_closed).abs() < 1e-8, "{eta}: {c0} vs {c0_closed}");
            assert!((c1 - c1_closed).abs() < 1e-6, "{eta}: {c1} vs {c1_closed}");
        }
    }
}

#[cfg(test)]
mod fit_tests {
    use super::*;
    use crate::families::Weibull;
    use crate::fit::fit_family;
    use crate::input::Record;

    /// Weibull(shape 1.4, scale 20) times by inversion of a fixed low-discrepancy sequence,
    /// censored administratively at 30 (invented data).
    fn weibull_records(n: usize) -> Vec<Record> {
        let mut records: Vec<Record> = (0..n)
            .map(|i| {
                let u = ((i as f64 + 0.5) * 0.618_033_988_749_895).fract();
                let t = 20.0 * (-(1.0 - u).ln()).powf(1.0 / 1.4);
                Record {
                    time: t.min(30.0),
                    event: t < 30.0,
                }
            })
            .collect();
        records.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
        records
    }

    #[test]
    fn gradient_matches_differences_on_both_sides_of_the_switch() {
        let data = FitData::from_records(&weibull_records(60));
        for theta in [
            vec![3.0, -0.3, 0.8],
            vec![2.8, 0.1, -0.6],
            vec![3.1, -0.2, 0.003],
            vec![3.1, -0.2, -0.02],
            vec![2.9, 0.0, 3.0],
        ] {
            let (_, grad) = GeneralizedGamma.loglik_grad(&theta, &data);
            for j in 0..3 {
                let h = 1e-5;
                let mut up = theta.clone();
                let mut down = theta.clone();
                up[j] += h;
                down[j] -= h;
                let numeric = (GeneralizedGamma.loglik_grad(&up, &data).0
                    - GeneralizedGamma.loglik_grad(&down, &data).0)
                    / (2.0 * h);
                assert!(
                    (numeric - grad[j]).abs() < 1e-5 * grad[j].abs().max(1.0),
                    "{theta:?} component {j}: {numeric} vs {}",
                    grad[j]
                );
            }
        }
    }

    #[test]
    fn fit_on_weibull_data_reaches_the_weibull_loglik() {
        // The Weibull is nested in the generalized gamma (Prentice, 1974), so the maximised
        // log-likelihood can only be higher or equal.
        let records = weibull_records(400);
        let data = FitData::from_records(&records);
        let weibull = fit_family(&Weibull, &data, None);
        let generalized_gamma = fit_family(&GeneralizedGamma, &data, None);
        assert!(
            generalized_gamma.converged,
            "{:?}",
            generalized_gamma.message
        );
        let (lw, lg) = (weibull.loglik.unwrap(), generalized_gamma.loglik.unwrap());
        assert!(lg >= lw - 1e-8, "generalized-gamma {lg} below weibull {lw}");
        // And q should be near 1, sigma near 1/1.4 (the generating values).
        let q = generalized_gamma.params["q"];
        let se = generalized_gamma.covariance.as_ref().unwrap().matrix[2][2].sqrt();
        assert!((q - 1.0).abs() < 3.0 * se, "q = {q} ± {se}");
    }
}
