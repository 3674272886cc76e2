//! Mixture cure families `cure-weibull`, `cure-lognormal`, `cure-loglogistic`: a cured
//! fraction π that never has the event plus an uncured curve S_u from a standard family,
//! S = π + (1 - π)·S_u (Boag, 1949; Farewell, 1982; from memory). Parameters are the base
//! family's followed by `cure` = π, estimated on the logit scale (`logit_cure`).
//!
//! The gradient reuses the base family's analytic one: the events contribute
//! ln(1 - π) + ln f_u, the base log-likelihood of the events alone; a censored time contributes
//! ln S, whose derivative in the base parameters is w·∂ln S_u with w = (1 - π)S_u/S, the base
//! log-likelihood's gradient on the censored times weighted by w.

use super::{Family, LogLogistic, LogNormal, ParamUnit, Weibull};
use crate::fit::FitData;
use crate::numeric::{logistic, softplus};

/// A standard family with a cured fraction; neither proportional-hazards nor (with π > 0)
/// a hazard that tends to the base family's.
pub struct Cure {
    base: &'static dyn Family,
    name: &'static str,
    param_names: &'static [&'static str],
    estimation_names: &'static [&'static str],
}

/// Weibull uncured curve.
pub static CURE_WEIBULL: Cure = Cure {
    base: &Weibull,
    name: "cure-weibull",
    param_names: &["shape", "scale", "cure"],
    estimation_names: &["ln_shape", "ln_scale", "logit_cure"],
};

/// Log-normal uncured curve.
pub static CURE_LOGNORMAL: Cure = Cure {
    base: &LogNormal,
    name: "cure-lognormal",
    param_names: &["mu", "sigma", "cure"],
    estimation_names: &["mu", "ln_sigma", "logit_cure"],
};

/// Log-logistic uncured curve.
pub static CURE_LOGLOGISTIC: Cure = Cure {
    base: &LogLogistic,
    name: "cure-loglogistic",
    param_names: &["shape", "scale", "cure"],
    estimation_names: &["ln_shape", "ln_scale", "logit_cure"],
};

/// ln(e^a + e^b) without overflow; -∞ when both are.
fn log_add_exp(a: f64, b: f64) -> f64 {
    let (hi, lo) = if a > b { (a, b) } else { (b, a) };
    if hi == f64::NEG_INFINITY {
        return hi;
    }
    hi + (lo - hi).exp().ln_1p()
}

/// The collapsed data restricted to the times where `weights` gives (events, total) > 0.
fn reweighted(data: &FitData, weights: impl Fn(usize) -> (f64, f64)) -> FitData {
    let mut out = data.clone();
    out.time.clear();
    out.ln_time.clear();
    out.events.clear();
    out.total.clear();
    for i in 0..data.time.len() {
        let (d, n) = weights(i);
        if n > 0.0 && n.is_finite() {
            out.time.push(data.time[i]);
            out.ln_time.push(data.ln_time[i]);
            out.events.push(d);
            out.total.push(n);
        }
    }
    out
}

impl Cure {
    /// Base-family parameters and π.
    fn split<'a>(&self, p: &'a [f64]) -> (&'a [f64], f64) {
        let k = p.len() - 1;
        (&p[..k], p[k])
    }
}

impl Family for Cure {
    fn name(&self) -> &'static str {
        self.name
    }
    fn param_names(&self) -> &'static [&'static str] {
        self.param_names
    }
    fn param_units(&self) -> Vec<ParamUnit> {
        // The base family's parameters, then the cured fraction (a proportion).
        let mut units = self.base.param_units();
        units.push(ParamUnit::Unitless);
        units
    }
    fn estimation_names(&self) -> &'static [&'static str] {
        self.estimation_names
    }
    fn to_natural(&self, theta: &[f64]) -> Vec<f64> {
        let (base, logit) = self.split(theta);
        let mut p = self.base.to_natural(base);
        p.push(logistic(logit));
        p
    }
    fn to_estimation(&self, params: &[f64]) -> Vec<f64> {
        let (base, cure) = self.split(params);
        let mut theta = self.base.to_estimation(base);
        theta.push(cure.ln() - (-cure).ln_1p());
        theta
    }
    fn check_params(&self, params: &[f64]) -> Result<(), String> {
        let (base, cure) = self.split(params);
        self.base.check_params(base)?;
        if (0.0..1.0).contains(&cure) {
            Ok(())
        } else {
            Err(format!(
                "parameter cure (the cured fraction) must be at least 0 and below 1, got {cure}"
            ))
        }
    }
    fn log_survival(&self, p: &[f64], t: f64) -> f64 {
        if t <= 0.0 {
            return 0.0;
        }
        let (base, cure) = self.split(p);
        if t == f64::INFINITY {
            // Only the cured remain (the base families need not handle t = ∞).
            return cure.ln();
        }
        log_add_exp(cure.ln(), (-cure).ln_1p() + self.base.log_survival(base, t))
    }
    fn log_hazard(&self, p: &[f64], t: f64) -> f64 {
        self.log_density(p, t) - self.log_survival(p, t)
    }
    fn log_density(&self, p: &[f64], t: f64) -> f64 {
        let (base, cure) = self.split(p);
        (-cure).ln_1p() + self.base.log_density(base, t)
    }
    fn quantile(&self, p: &[f64], prob: f64) -> f64 {
        let (base, cure) = self.split(p);
        // F = (1 - π)·F_u never reaches 1 - π.
        if prob >= 1.0 - cure {
            return f64::INFINITY;
        }
        self.base.quantile(base, prob / (1.0 - cure))
    }
    fn rescale_time(&self, p: &[f64], factor: f64) -> Vec<f64> {
        let (base, cure) = self.split(p);
        let mut q = self.base.rescale_time(base, factor);
        q.push(cure);
        q
    }
    fn proportional_hazards(&self) -> bool {
        false
    }
    fn accelerated_failure_time(&self) -> bool {
        self.base.accelerated_failure_time()
    }
    fn start_values(&self, data: &FitData) -> Vec<Vec<f64>> {
        let mut starts = Vec::new();
        for base in self.base.start_values(data).into_iter().take(2) {
            for cure in [0.05f64, 0.2, 0.45] {
                let mut theta = base.clone();
                theta.push(cure.ln() - (-cure).ln_1p());
                starts.push(theta);
            }
        }
        starts
    }
    fn loglik_grad(&self, theta: &[f64], data: &FitData) -> (f64, Vec<f64>) {
        let (base_theta, logit) = self.split(theta);
        let k = base_theta.len();
        let ln_cure = -softplus(-logit);
        let ln_uncured = -softplus(logit);
        let cure = logistic(logit);
        let base_params = self.base.to_natural(base_theta);
        // Events: Σ d·(ln(1 - π) + ln f_u).
        let events = reweighted(data, |i| (data.events[i], data.events[i]));
        let (ll_events, g_events) = self.base.loglik_grad(base_theta, &events);
        let mut ll = ll_events + data.n_events * ln_uncured;
        let mut grad = g_events;
        grad.push(-data.n_events * cure);
        // Censored: Σ c·ln S, S = π + (1 - π)S_u.
        let mut weights = vec![0.0; data.time.len()];
        for i in 0..data.time.len() {
            let c = data.total[i] - data.events[i];
            if c <= 0.0 {
                continue;
            }
            let log_su = self.base.log_survival(&base_params, data.time[i]);
            let log_s = log_add_exp(ln_cure, ln_uncured + log_su);
            let w = (ln_uncured + log_su - log_s).exp();
            ll += c * log_s;
            // ∂ln S/∂logit π = π(1 - π)(1 - S_u)/S = (1 - π)(1 - w)(1 - S_u).
            grad[k] += c * (1.0 - cure) * (1.0 - w) * -log_su.exp_m1();
            weights[i] = c * w;
        }
        let censored = reweighted(data, |i| (0.0, weights[i]));
        if !censored.time.is_empty() {
            let (_, g_censored) = self.base.loglik_grad(base_theta, &censored);
            for j in 0..k {
                grad[j] += g_censored[j];
            }
        }
        (ll, grad)
    }
    fn restricted_mean(&self, p: &[f64], horizon: f64) -> f64 {
        let (base, cure) = self.split(p);
        cure * horizon + (1.0 - cure) * self.base.restricted_mean(base, horizon)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::fit_family;
    use crate::input::Record;

    /// Invented cohort: a fraction `cure` never has the event (chosen by one low-discrepancy
    /// sequence), the others have Weibull(1.5, 10) times (inverted from another), follow-up
    /// ends at 40.
    fn cured_records(n: usize, cure: f64) -> Vec<Record> {
        let mut r: Vec<Record> = (0..n)
            .map(|i| {
                let x = i as f64 + 0.5;
                let cured = (x * 0.618_033_988_749_895).fract() < cure;
                let u = (x * std::f64::consts::SQRT_2).fract();
                let t = if cured {
                    f64::INFINITY
                } else {
                    10.0 * (-(1.0 - u).ln()).powf(1.0 / 1.5)
                };
                Record {
                    time: t.min(40.0),
                    event: t < 40.0,
                }
            })
            .collect();
        r.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
        r
    }

    #[test]
    fn gradient_matches_differences() {
        let data = FitData::from_records(&cured_records(200, 0.3));
        for (family, theta) in [
            (&CURE_WEIBULL, vec![0.3, 2.2, -0.5]),
            (&CURE_LOGNORMAL, vec![2.0, -0.1, -1.2]),
            (&CURE_LOGLOGISTIC, vec![0.5, 2.4, 0.4]),
        ] {
            crate::fit::assert_gradient_matches_differences(family, &theta, &data, 1e-6);
        }
    }

    #[test]
    fn recovers_a_known_cure_fraction_within_three_standard_errors() {
        // The check asked for in issue 8: simulated data with π = 0.3.
        let data = FitData::from_records(&cured_records(2000, 0.3));
        let fit = fit_family(&CURE_WEIBULL, &data, None);
        assert!(fit.converged, "{:?}", fit.message);
        let cure = fit.params["cure"];
        // Delta method: SE(π) = π(1 - π)·SE(logit π).
        let se = cure * (1.0 - cure) * fit.covariance.unwrap().matrix[2][2].sqrt();
        assert!((cure - 0.3).abs() < 3.0 * se, "cure {cure} ± {se}");
        assert!(se < 0.05, "standard error {se} too wide to mean anything");
    }

    #[test]
    fn with_no_cure_it_reproduces_the_plain_family() {
        // π → 0 gives S = S_u: at the plain family's maximum (and π ≈ 0) the cure model has
        // the same log-likelihood and a zero gradient in the base parameters.
        let data = FitData::from_records(&cured_records(300, 0.0));
        for family in [&CURE_WEIBULL, &CURE_LOGNORMAL, &CURE_LOGLOGISTIC] {
            let plain = fit_family(family.base, &data, None);
            let mut theta = plain.estimates.clone();
            theta.push(-40.0);
            let (ll, grad) = family.loglik_grad(&theta, &data);
            let plain_ll = plain.loglik.unwrap();
            assert!(
                (ll - plain_ll).abs() < 1e-9,
                "{}: {ll} vs {plain_ll}",
                family.name()
            );
            for g in &grad[..2] {
                assert!(g.abs() < 1e-5, "{}: {grad:?}", family.name());
            }
        }
    }
}
