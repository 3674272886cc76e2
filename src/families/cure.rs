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
use crate::fit::{fit_family, fit_family_from, fit_family_searched, sum_terms, FamilyFit, FitData};
use crate::numeric::{
    inverse_mills, log_normal_sf, logistic, normal_pdf, normal_sf, softplus, LN_SQRT_2PI,
};

/// A standard family with a cured fraction; neither proportional-hazards nor (with π > 0)
/// a hazard that tends to the base family's.
pub struct Cure {
    base: &'static dyn Family,
    kind: Kind,
    name: &'static str,
    param_names: &'static [&'static str],
    estimation_names: &'static [&'static str],
}

/// Weibull uncured curve.
pub static CURE_WEIBULL: Cure = Cure {
    base: &Weibull,
    kind: Kind::Weibull,
    name: "cure-weibull",
    param_names: &["shape", "scale", "cure"],
    estimation_names: &["ln_shape", "ln_scale", "logit_cure"],
};

/// Log-normal uncured curve.
pub static CURE_LOGNORMAL: Cure = Cure {
    base: &LogNormal,
    kind: Kind::LogNormal,
    name: "cure-lognormal",
    param_names: &["mu", "sigma", "cure"],
    estimation_names: &["mu", "ln_sigma", "logit_cure"],
};

/// Log-logistic uncured curve.
pub static CURE_LOGLOGISTIC: Cure = Cure {
    base: &LogLogistic,
    kind: Kind::LogLogistic,
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

/// Which standard family the uncured curve is; the likelihood pass evaluates it inline.
#[derive(Clone, Copy)]
enum Kind {
    Weibull,
    LogNormal,
    LogLogistic,
}

/// The uncured family at fixed parameters, evaluated per record in one pass.
struct Uncured {
    kind: Kind,
    /// (ln shape, shape, ln scale) or (mu, sigma, ln sigma).
    a: f64,
    b: f64,
    c: f64,
}

/// One record's uncured pieces: ln f_u (when asked for) and ln S_u with their gradients in
/// the base family's estimation parameters, S_u and 1 - S_u (each without cancellation
/// where the family allows).
struct At {
    ln_f: f64,
    d_ln_f: [f64; 2],
    ln_s: f64,
    s: f64,
    one_minus_s: f64,
    d_ln_s: [f64; 2],
}

impl Uncured {
    fn new(kind: Kind, theta: &[f64]) -> Uncured {
        match kind {
            Kind::Weibull | Kind::LogLogistic => Uncured {
                kind,
                a: theta[0],
                b: theta[0].exp(),
                c: theta[1],
            },
            Kind::LogNormal => Uncured {
                kind,
                a: theta[0],
                b: theta[1].exp(),
                c: theta[1],
            },
        }
    }

    /// The pieces at ln t; ln f_u only when `density`, the survival pieces only when
    /// `survival` (the others are then left at 0: each transcendental is a cost per record).
    fn at(&self, ln_t: f64, density: bool, survival: bool) -> At {
        match self.kind {
            Kind::Weibull => {
                let (ln_shape, shape, ln_scale) = (self.a, self.b, self.c);
                let u = shape * (ln_t - ln_scale);
                let cum = u.exp();
                let m = if survival { (-cum).exp_m1() } else { 0.0 };
                At {
                    ln_f: ln_shape + (shape - 1.0) * ln_t - shape * ln_scale - cum,
                    d_ln_f: [1.0 + u - cum * u, shape * (cum - 1.0)],
                    ln_s: -cum,
                    s: 1.0 + m,
                    one_minus_s: -m,
                    d_ln_s: [-cum * u, shape * cum],
                }
            }
            Kind::LogLogistic => {
                let (ln_shape, shape, ln_scale) = (self.a, self.b, self.c);
                let u = shape * (ln_t - ln_scale);
                let e = (-u.abs()).exp();
                let sp = u.max(0.0) + e.ln_1p();
                // sig = logistic(u) = F_u, s = logistic(-u) = S_u, both from e.
                let (sig, s) = if u >= 0.0 {
                    (1.0 / (1.0 + e), e / (1.0 + e))
                } else {
                    (e / (1.0 + e), 1.0 / (1.0 + e))
                };
                At {
                    ln_f: ln_shape - ln_t + u - 2.0 * sp,
                    d_ln_f: [1.0 + u * (1.0 - 2.0 * sig), shape * (2.0 * sig - 1.0)],
                    ln_s: -sp,
                    s,
                    one_minus_s: sig,
                    d_ln_s: [-sig * u, shape * sig],
                }
            }
            Kind::LogNormal => {
                let (mu, sigma, ln_sigma) = (self.a, self.b, self.c);
                let z = (ln_t - mu) / sigma;
                let (s, ln_s, lambda) = if !survival {
                    (0.0, 0.0, 0.0)
                } else if (-5.0..=5.0).contains(&z) {
                    let q = normal_sf(z);
                    (q, q.ln(), normal_pdf(z) / q)
                } else {
                    let ln_q = log_normal_sf(z);
                    (ln_q.exp(), ln_q, inverse_mills(z))
                };
                let ln_f = if density {
                    -0.5 * z * z - LN_SQRT_2PI - ln_sigma - ln_t
                } else {
                    0.0
                };
                At {
                    ln_f,
                    d_ln_f: [z / sigma, z * z - 1.0],
                    ln_s,
                    s,
                    one_minus_s: 1.0 - s,
                    d_ln_s: [lambda / sigma, lambda * z],
                }
            }
        }
    }
}

impl Cure {
    /// Base-family parameters and π.
    fn split<'a>(&self, p: &'a [f64]) -> (&'a [f64], f64) {
        let k = p.len() - 1;
        (&p[..k], p[k])
    }
}

/// One-sided 95% normal quantile, z(0.95) (common practice).
const Z_ONE_SIDED_95: f64 = 1.644_853_626_951_472_2;

/// Distinct times up to which the general search also runs on boundary data, to catch a
/// separate interior maximum (cheap there; on large data the score test alone decides).
const SEARCH_ALSO_UP_TO: usize = 60_000;

/// The cure model at π = 0 (where it is the base family) at base parameters `theta`: the
/// log-likelihood, its gradient in the base parameters, the score U = ∂ℓ/∂π, and the observed
/// information J_ππ and J_πθ in π (natural scale; logit π has no curvature at -∞).
struct NoCure {
    loglik: f64,
    grad: [f64; 2],
    score: f64,
    j_pp: f64,
    j_pt: [f64; 2],
}

impl Cure {
    /// The pieces of [`NoCure`] in one pass: events add ln f_u, -1 to U and 1 to J_ππ;
    /// a censored time adds ln S_u, (1 - S_u)/S_u to U, its square to J_ππ and
    /// ∂ln S_u/∂θ / S_u to J_πθ (differentiate ln(π + (1 - π)S_u) at π = 0).
    fn no_cure(&self, theta: &[f64], data: &FitData) -> NoCure {
        let uncured = Uncured::new(self.kind, theta);
        let (loglik, g) = sum_terms::<6>(data, |_t, ln_t, d, n| {
            let c = n - d;
            let at = uncured.at(ln_t, d > 0.0, c > 0.0);
            let mut ll = 0.0;
            let mut g = [0.0; 6];
            if d > 0.0 {
                ll += d * at.ln_f;
                g[0] += d * at.d_ln_f[0];
                g[1] += d * at.d_ln_f[1];
                g[2] -= d;
                g[3] += d;
            }
            if c > 0.0 {
                let a = at.one_minus_s / at.s;
                ll += c * at.ln_s;
                g[0] += c * at.d_ln_s[0];
                g[1] += c * at.d_ln_s[1];
                g[2] += c * a;
                g[3] += c * a * a;
                g[4] += c * at.d_ln_s[0] / at.s;
                g[5] += c * at.d_ln_s[1] / at.s;
            }
            (ll, g)
        });
        NoCure {
            loglik,
            grad: [g[0], g[1]],
            score: g[2],
            j_pp: g[3],
            j_pt: [g[4], g[5]],
        }
    }

    /// The fit at the boundary π = 0 when the plain base family's maximum is also the cure
    /// model's: there the profile log-likelihood's slope in π is the score U (the base
    /// parameters are at their maximum), and U ≤ 0 means no cured fraction improves the fit.
    /// With U > 0 the interior maximum, from a start one Newton step away from the plain fit;
    /// `None` (the general search decides) when the plain fit failed.
    fn boundary_fit(&self, data: &FitData, arm: Option<&str>) -> Option<FamilyFit> {
        let plain = fit_family(self.base, data, arm);
        let base_cov = plain.covariance.as_ref()?;
        if !plain.converged || plain.estimates.len() != 2 {
            return None;
        }
        let at = self.no_cure(&plain.estimates, data);
        if !at.loglik.is_finite() || at.score.is_nan() {
            return None;
        }
        // Efficient information for π with the base parameters profiled out:
        // J_ππ - J_πθ·Σ·J_θπ, Σ the plain fit's covariance (the inverse of J_θθ).
        let m = &base_cov.matrix;
        let sigma_j: Vec<f64> = (0..2)
            .map(|i| (0..2).map(|j| m[i][j] * at.j_pt[j]).sum())
            .collect();
        let quad: f64 = (0..2).map(|i| at.j_pt[i] * sigma_j[i]).sum();
        let j_eff = at.j_pp - quad;
        let small = data.time.len() <= SEARCH_ALSO_UP_TO;
        if at.score > 0.0 {
            // Interior: one Newton step from (plain fit, π = 0) in (θ, π) gives the start
            // π₀ = U/J_eff, θ₀ = θ̂ - Σ·J_θπ·π₀; Newton on the full data goes on from there. On
            // small data the general search runs too and the higher maximum wins.
            let pi0 = if j_eff > 0.0 && at.score.is_finite() {
                (at.score / j_eff).clamp(1e-6, 0.9)
            } else {
                0.2
            };
            let mut start: Vec<f64> = (0..2)
                .map(|i| plain.estimates[i] - sigma_j[i] * pi0)
                .collect();
            start.push(pi0.ln() - (-pi0).ln_1p());
            let warm = fit_family_from(self, data, arm, start);
            if !small && warm.converged {
                return Some(warm);
            }
            let searched = fit_family_searched(self, data, arm);
            let better = |a: &FamilyFit, b: &FamilyFit| {
                (a.converged, a.loglik.unwrap_or(f64::NEG_INFINITY))
                    > (b.converged, b.loglik.unwrap_or(f64::NEG_INFINITY))
            };
            return Some(if better(&warm, &searched) {
                warm
            } else {
                searched
            });
        }
        if small {
            let searched = fit_family_searched(self, data, arm);
            let better = searched
                .loglik
                .is_some_and(|ll| ll > at.loglik + 1e-9 * at.loglik.abs());
            if searched.converged && better {
                return Some(searched);
            }
        }
        let upper = (Z_ONE_SIDED_95 / j_eff.sqrt()).min(1.0);
        let k = 3.0;
        let mut fit = plain.clone();
        fit.family = self.name.to_string();
        fit.settings = None;
        fit.params.insert("cure".into(), 0.0);
        fit.loglik = Some(at.loglik);
        fit.aic = Some(2.0 * k - 2.0 * at.loglik);
        fit.bic = Some(k * data.n_subjects.ln() - 2.0 * at.loglik);
        fit.gradient_max = Some(at.grad[0].abs().max(at.grad[1].abs()));
        fit.covariance = None;
        fit.estimates = Vec::new();
        fit.delta_aic = None;
        fit.message = None;
        if j_eff > 0.0 && upper.is_finite() {
            fit.intervals.insert("cure".into(), [0.0, upper]);
        }
        let bound = if j_eff > 0.0 && upper.is_finite() {
            format!("cure has a one-sided 95% interval 0 to {upper:.3e} (Wald, from the information at 0)")
        } else {
            "cure has no interval (no information at 0)".to_string()
        };
        fit.note = Some(format!(
            "converged to the boundary: the cured fraction is at 0 (boundary), where the model reduces to the plain {} fit, whose parameters and intervals are reported (score in the cured fraction at 0: {:.3e} <= 0); {bound}; AIC and BIC count 3 parameters; no covariance for draws (draw from {} instead)",
            self.base.name(),
            at.score,
            self.base.name()
        ));
        fit.converged = true;
        Some(fit)
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
        let uncured = Uncured::new(self.kind, base_theta);
        let ln_cure = -softplus(-logit);
        let ln_uncured = -softplus(logit);
        let cure = logistic(logit);
        let (ll, g) = sum_terms::<3>(data, |_t, ln_t, d, n| {
            let c = n - d;
            let mut ll = 0.0;
            let mut g = [0.0; 3];
            let at = uncured.at(ln_t, d > 0.0, c > 0.0);
            if d > 0.0 {
                // Events: d·(ln(1 - π) + ln f_u).
                ll += d * (ln_uncured + at.ln_f);
                g[0] += d * at.d_ln_f[0];
                g[1] += d * at.d_ln_f[1];
                g[2] -= d * cure;
            }
            if c > 0.0 {
                // Censored: c·ln S, S = π + (1 - π)S_u; w = (1 - π)S_u/S.
                let a = ln_uncured + at.ln_s;
                let (ln_s, w) = if a >= ln_cure {
                    let r = if cure > 0.0 {
                        cure / ((1.0 - cure) * at.s)
                    } else {
                        0.0
                    };
                    (a + r.ln_1p(), 1.0 / (1.0 + r))
                } else {
                    let q = (1.0 - cure) * at.s / cure;
                    (ln_cure + q.ln_1p(), q / (1.0 + q))
                };
                ll += c * ln_s;
                g[0] += c * w * at.d_ln_s[0];
                g[1] += c * w * at.d_ln_s[1];
                // ∂ln S/∂logit π = π(1 - π)(1 - S_u)/S = (1 - π)(1 - w)(1 - S_u).
                g[2] += c * (1.0 - cure) * (1.0 - w) * at.one_minus_s;
            }
            (ll, g)
        });
        (ll, g.to_vec())
    }
    fn fit_on_boundary(&self, data: &FitData, arm: Option<&str>) -> Option<FamilyFit> {
        self.boundary_fit(data, arm)
    }
    fn restricted_mean(&self, p: &[f64], horizon: f64) -> f64 {
        let (base, cure) = self.split(p);
        cure * horizon + (1.0 - cure) * self.base.restricted_mean(base, horizon)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::input::Record;
    use rand_chacha::rand_core::{Rng, SeedableRng};
    use rand_chacha::ChaCha20Rng;

    /// Seeded invented cohort: a fraction `cure` never has the event, the others Weibull(1.5,
    /// 10) event times (inverse transform); each subject drops out at a uniform time on
    /// (0, `dropout`) and follow-up ends at 40.
    fn seeded_records(n: usize, cure: f64, dropout: f64, seed: u64) -> Vec<Record> {
        let mut rng = ChaCha20Rng::seed_from_u64(seed);
        let mut uniform = move || ((rng.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
        let mut r: Vec<Record> = (0..n)
            .map(|_| {
                let cured = uniform() < cure;
                let t = 10.0 * (-uniform().ln()).powf(1.0 / 1.5);
                let t = if cured { f64::INFINITY } else { t };
                let end = (dropout * uniform()).min(40.0);
                Record {
                    time: t.min(end),
                    event: t <= end,
                }
            })
            .collect();
        r.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
        r
    }

    #[test]
    fn no_plateau_gives_the_plain_family_at_the_boundary() {
        // No cured fraction and dropout only before about the median: the censored are few
        // and early, so the score in π at 0 is negative and the maximum is π = 0, where the
        // model is the plain family. Its log-likelihood there is checked against the plain
        // family's own fit (a different code path) and against the closed-form densities
        // and survival of the plain family summed over the records.
        let records = seeded_records(3000, 0.0, 12.0, 11);
        let data = FitData::from_records(&records);
        for family in [&CURE_WEIBULL, &CURE_LOGNORMAL, &CURE_LOGLOGISTIC] {
            let fit = fit_family(family, &data, None);
            let plain = fit_family(family.base, &data, None);
            let name = family.name();
            assert!(fit.converged, "{name}: {:?}", fit.message);
            assert_eq!(fit.params["cure"], 0.0, "{name}");
            let note = fit.note.as_deref().unwrap_or_default();
            assert!(note.contains("at 0 (boundary)"), "{name}: {note}");
            let (ll, plain_ll) = (fit.loglik.unwrap(), plain.loglik.unwrap());
            assert!(
                (ll - plain_ll).abs() < 1e-6 * plain_ll.abs(),
                "{name}: {ll} vs {plain_ll}"
            );
            let base_params: Vec<f64> = family
                .base
                .param_names()
                .iter()
                .map(|p| fit.params[*p])
                .collect();
            let direct: f64 = records
                .iter()
                .map(|r| {
                    if r.event {
                        family.base.log_density(&base_params, r.time)
                    } else {
                        family.base.log_survival(&base_params, r.time)
                    }
                })
                .sum();
            assert!(
                (ll - direct).abs() < 1e-9 * direct.abs(),
                "{name}: {ll} vs {direct}"
            );
            // AIC counts the cure parameter: the plain family's AIC plus 2.
            assert!((fit.aic.unwrap() - plain.aic.unwrap() - 2.0).abs() < 1e-6 * ll.abs());
            let [lo, hi] = fit.intervals["cure"];
            assert!(
                lo == 0.0 && hi > 0.0 && hi < 0.5,
                "{name}: cure interval {lo}..{hi}"
            );
            assert!(fit.covariance.is_none(), "{name}");
            // No cured fraction does better: the cure model's own likelihood, maximised over
            // the base parameters by the general search from its own starts, stays below.
            let searched = crate::fit::fit_family_searched(family, &data, None);
            if let Some(other) = searched.loglik {
                assert!(other <= ll + 1e-9 * ll.abs(), "{name}: {other} > {ll}");
            }
        }
    }

    #[test]
    fn a_plateau_is_estimated_inside_with_the_true_fraction_in_its_interval() {
        // π = 0.3 by simulation, follow-up to 40 (four Weibull scales: the uncured are
        // nearly all dead, so the plateau shows); the true 0.3 must be inside the 95% interval.
        let data = FitData::from_records(&seeded_records(3000, 0.3, 200.0, 12));
        let fit = fit_family(&CURE_WEIBULL, &data, None);
        assert!(fit.converged, "{:?}", fit.message);
        assert!(fit.note.is_none(), "{:?}", fit.note);
        let [lo, hi] = fit.intervals["cure"];
        assert!(lo < 0.3 && 0.3 < hi, "cure interval {lo}..{hi}");
        assert!(
            hi - lo < 0.1,
            "cure interval {lo}..{hi} too wide to mean anything"
        );
    }

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
