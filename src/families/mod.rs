//! Parametric survival families: one file per family behind the [`Family`] trait.
//!
//! Parameters are held in two forms: *natural* (the interface's names, e.g. `shape`, `scale`)
//! and *estimation* (unconstrained: logs of positive parameters, e.g. `ln_shape`), on which
//! the fitter works and the covariance is reported. Times are in the curve's own unit.
//!
//! Most families are stateless unit structs. *Configured* families (piecewise cut points,
//! spline knots) carry settings: they are built by [`configured`] from a name plus
//! [`FamilySettings`], interned (each distinct configuration is allocated once and lives for
//! the rest of the process, so a bounded number of small leaks), and handed out as the same
//! `&'static dyn Family` as the unit structs. The settings are written to the fit file so that
//! [`crate::fit::FamilyFit::family`] rebuilds the exact curve later.

use crate::fit::{FitData, SecondOrder};
use crate::units::TimeUnit;
use serde::{Deserialize, Serialize};
use std::sync::Mutex;

mod cure;
mod exponential;
mod generalized_gamma;
mod gompertz;
mod incomplete_gamma;
mod loglogistic;
mod lognormal;
mod piecewise;
mod spline;
mod weibull;

pub use cure::{Cure, CURE_LOGLOGISTIC, CURE_LOGNORMAL, CURE_WEIBULL};
pub use exponential::Exponential;
pub use generalized_gamma::GeneralizedGamma;
pub use gompertz::Gompertz;
pub use loglogistic::LogLogistic;
pub use lognormal::LogNormal;
pub use piecewise::Piecewise;
pub use spline::{Spline, SplineScale};
pub use weibull::Weibull;

/// What a parametric survival family provides. Implementations are stateless unit structs.
pub trait Family: Sync + Send {
    /// Name on the command line and in files, e.g. `weibull`.
    fn name(&self) -> &'static str;

    /// Natural parameter names, in order (interface names).
    fn param_names(&self) -> &'static [&'static str];

    /// What each natural parameter is measured in, in the same order: the one place that says
    /// which parameters carry the time unit (written beside the values in every output).
    fn param_units(&self) -> Vec<ParamUnit>;

    /// Estimation-scale parameter names, in the same order (e.g. `ln_scale`).
    fn estimation_names(&self) -> &'static [&'static str];

    /// Natural parameters from estimation-scale ones.
    fn to_natural(&self, theta: &[f64]) -> Vec<f64>;

    /// Estimation-scale parameters from natural ones (which must satisfy [`Family::check_params`]).
    fn to_estimation(&self, params: &[f64]) -> Vec<f64>;

    /// Checks natural parameters are finite and in range; the message names the parameter.
    fn check_params(&self, params: &[f64]) -> Result<(), String>;

    /// ln S(t); accurate far in the tail. `t` ≥ 0; returns 0 at t = 0.
    fn log_survival(&self, params: &[f64], t: f64) -> f64;

    /// ln h(t), the log hazard at `t` > 0.
    fn log_hazard(&self, params: &[f64], t: f64) -> f64;

    /// Time t at which the cumulative distribution F(t) = 1 - S(t) equals `p` (∞ when never reached).
    fn quantile(&self, params: &[f64], p: f64) -> f64;

    /// Parameters of the same curve with time measured in a new unit, where t_new = factor · t_old.
    fn rescale_time(&self, params: &[f64], factor: f64) -> Vec<f64>;

    /// Whether a hazard ratio keeps the curve in this family (proportional hazards).
    fn proportional_hazards(&self) -> bool;

    /// Whether an acceleration factor keeps the curve in this family (accelerated failure time).
    fn accelerated_failure_time(&self) -> bool;

    /// Data-driven starting points on the estimation scale; several where the surface has several basins.
    fn start_values(&self, data: &FitData) -> Vec<Vec<f64>>;

    /// Log-likelihood at estimation-scale `theta` (full densities) and its gradient with respect to `theta`.
    fn loglik_grad(&self, theta: &[f64], data: &FitData) -> (f64, Vec<f64>);

    /// Log-likelihood, gradient and Hessian (estimation scale) from one pass over the data,
    /// for families with analytic second derivatives: Newton then costs one pass per step and
    /// the covariance comes with the last one. `None` (the default): the Hessian is differenced.
    fn loglik_grad_hessian(&self, _theta: &[f64], _data: &FitData) -> Option<SecondOrder> {
        None
    }

    /// Closed-form maximum-likelihood estimate where one exists (exponential).
    fn closed_form_mle(&self, _data: &FitData) -> Option<Vec<f64>> {
        None
    }

    /// S(t).
    fn survival(&self, params: &[f64], t: f64) -> f64 {
        self.log_survival(params, t).exp()
    }

    /// Cumulative hazard H(t) = -ln S(t).
    fn cumulative_hazard(&self, params: &[f64], t: f64) -> f64 {
        -self.log_survival(params, t)
    }

    /// h(t).
    fn hazard(&self, params: &[f64], t: f64) -> f64 {
        self.log_hazard(params, t).exp()
    }

    /// ln f(t) = ln h(t) + ln S(t).
    fn log_density(&self, params: &[f64], t: f64) -> f64 {
        self.log_hazard(params, t) + self.log_survival(params, t)
    }

    /// Restricted mean survival ∫₀^horizon S(t) dt (adaptive quadrature unless a family has a closed form).
    fn restricted_mean(&self, params: &[f64], horizon: f64) -> f64 {
        crate::numeric::integrate(|t| self.survival(params, t), 0.0, horizon, 1e-10)
    }

    /// Median survival time (∞ when survival never falls to one half).
    fn median(&self, params: &[f64]) -> f64 {
        self.quantile(params, 0.5)
    }

    /// This family rebuilt from recorded settings (see [`configured`]); unit-struct families
    /// accept no settings.
    fn with_settings(&self, settings: &FamilySettings) -> Result<&'static dyn Family, String> {
        if *settings == FamilySettings::default() {
            by_name(self.name())
        } else {
            Err(format!("family {} takes no settings", self.name()))
        }
    }

    /// This family configured by command-line options (`--cuts`, `--knots`); unit-struct
    /// families ignore them.
    fn with_options(&self, _options: &FamilyOptions) -> Result<&'static dyn Family, String> {
        by_name(self.name())
    }

    /// Settings of a configured family (cut points, knots), as recorded in the fit file; `None`
    /// for the unit-struct families.
    fn settings(&self) -> Option<FamilySettings> {
        None
    }

    /// The family to fit to `data`: `None` for itself, or a configured instance whose settings
    /// come from the data (spline knots). The error says why the data cannot support the family.
    fn for_data(&self, _data: &FitData) -> Result<Option<&'static dyn Family>, String> {
        Ok(None)
    }

    /// For configured families whose settings are times: the same family with time measured in
    /// a new unit (t_new = factor · t_old), used with [`Family::rescale_time`]; `None` when the
    /// family has no time-valued settings.
    fn rescaled_family(&self, _factor: f64) -> Option<&'static dyn Family> {
        None
    }

    /// A fit decided by the family itself before the general search, e.g. a cure model whose
    /// maximum is on the boundary (no cured fraction); `None` to run the general search.
    fn fit_on_boundary(
        &self,
        _data: &FitData,
        _arm: Option<&str>,
    ) -> Option<crate::fit::FamilyFit> {
        None
    }
}

/// What a natural parameter is measured in, for a curve with time in some unit. Converting a
/// curve to another unit (t_new = factor·t_old) multiplies a `Time` parameter by the factor,
/// divides a `PerTime` one by it, adds ln(factor) to a `LogTime` one and leaves a `Unitless` one
/// alone (tested against every family's `rescale_time`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ParamUnit {
    /// A time: Weibull and log-logistic `scale`; spline knots and cut points.
    Time,
    /// Per unit time: rates (exponential, piecewise, Gompertz `rate`) and the Gompertz `shape`.
    PerTime,
    /// The logarithm of a time: log-normal and generalized-gamma `mu`.
    LogTime,
    /// A pure number, the same in every time unit: shapes, `sigma`, `q`, the cure fraction,
    /// spline coefficients after `c0`.
    Unitless,
    /// A pure number whose value still depends on the time unit: the spline intercept `c0` of
    /// s(ln t) (c0' = c0 - c1·ln factor).
    LogTimeIntercept,
}

impl ParamUnit {
    /// The unit as written beside a value with time in `unit`: `months`, `per month`,
    /// `ln(months)`, `unitless`, or `unitless (intercept on ln t, t in months)`.
    pub fn label(self, unit: TimeUnit) -> String {
        let singular = unit.name_for(1.0);
        match self {
            ParamUnit::Time => unit.name().to_string(),
            ParamUnit::PerTime => format!("per {singular}"),
            ParamUnit::LogTime => format!("ln({})", unit.name()),
            ParamUnit::Unitless => "unitless".to_string(),
            ParamUnit::LogTimeIntercept => {
                format!("unitless (intercept on ln t, t in {})", unit.name())
            }
        }
    }
}

/// `name: unit; …` for every parameter of `family` with time in `unit`, as recorded in output
/// metadata (`parameter_units`).
pub fn parameter_units_text(family: &dyn Family, unit: TimeUnit) -> String {
    family
        .param_names()
        .iter()
        .zip(family.param_units())
        .map(|(name, kind)| format!("{name}: {}", kind.label(unit)))
        .collect::<Vec<_>>()
        .join("; ")
}

/// Settings of a configured family, written to the fit file beside its parameters (an
/// optional `settings` object; absent for the unit-struct families).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct FamilySettings {
    /// Spline scale: `ph` (proportional hazards), `po` (proportional odds) or `probit`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub scale: Option<String>,
    /// Spline knots as times (curve's time unit), boundary knots first and last, ascending.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub knots: Option<Vec<f64>>,
    /// Piecewise-exponential cut points (curve's time unit), ascending.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cuts: Option<Vec<f64>>,
}

/// Options of the configured families given on the command line, in the data's time unit.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct FamilyOptions {
    /// Piecewise-exponential cut points.
    pub cuts: Option<Vec<f64>>,
    /// Spline knots: K internal knots, or all K + 2 including the boundary knots.
    pub knots: Option<Vec<f64>>,
}

/// One interned configured family: its name, its settings and the one leaked instance.
type Interned = (String, Option<FamilySettings>, &'static dyn Family);

/// Interned configured families.
static CONFIGURED: Mutex<Vec<Interned>> = Mutex::new(Vec::new());

/// The one instance of a configured family with this name and these settings, made by `make`
/// on first use. Bounded: one allocation per distinct configuration in the process.
pub(crate) fn intern(
    name: &str,
    settings: Option<FamilySettings>,
    make: impl FnOnce() -> Box<dyn Family>,
) -> &'static dyn Family {
    let mut table = CONFIGURED.lock().unwrap_or_else(|e| e.into_inner());
    if let Some((_, _, f)) = table.iter().find(|(n, s, _)| *n == name && *s == settings) {
        return *f;
    }
    let leaked: &'static dyn Family = Box::leak(make());
    table.push((name.to_string(), settings, leaked));
    leaked
}

/// A string that lives for the rest of the process (parameter names of configured families;
/// allocated once per distinct configuration through [`intern`]).
pub(crate) fn leak_names(names: Vec<String>) -> &'static [&'static str] {
    let names: Vec<&'static str> = names
        .into_iter()
        .map(|n| &*Box::leak(n.into_boxed_str()))
        .collect();
    Box::leak(names.into_boxed_slice())
}

/// A family from its name and the settings recorded in a fit file (the inverse of
/// [`Family::settings`]); the unit-struct families take no settings.
pub fn configured(
    name: &str,
    settings: Option<&FamilySettings>,
) -> Result<&'static dyn Family, String> {
    let template = by_name(name)?;
    match settings {
        None => Ok(template),
        Some(s) => template.with_settings(s),
    }
}

/// The configured families given the command-line options: `--cuts` for `piecewise`,
/// `--knots` for the spline families. Unit-struct families pass through.
pub fn with_options(
    family: &'static dyn Family,
    options: &FamilyOptions,
) -> Result<&'static dyn Family, String> {
    family.with_options(options)
}

/// The five standard families, in the interface's order.
pub static STANDARD: [&dyn Family; 5] =
    [&Exponential, &Weibull, &LogNormal, &LogLogistic, &Gompertz];

/// Every family the tool knows.
pub fn all() -> Vec<&'static dyn Family> {
    let mut families = STANDARD.to_vec();
    families.extend([
        &GeneralizedGamma as &dyn Family,
        &CURE_WEIBULL,
        &CURE_LOGNORMAL,
        &CURE_LOGLOGISTIC,
    ]);
    families
}

/// The families `fit` uses when none are named: the five standard ones plus the generalized gamma.
pub fn defaults() -> Vec<&'static dyn Family> {
    let mut families = STANDARD.to_vec();
    families.push(&GeneralizedGamma);
    families
}

/// Time t with ln S(t) = ln(1 - `p`) for a survival curve given as ln S over t, by bisection
/// on ln t (∞ when the curve never falls that far); for families without a closed-form inverse.
pub(crate) fn quantile_by_bisection(log_survival: impl Fn(f64) -> f64, p: f64) -> f64 {
    if p <= 0.0 {
        return 0.0;
    }
    let target = (-p).ln_1p();
    let below = |x: f64| log_survival(x.exp()) <= target;
    let (mut lo, mut hi) = (-1.0f64, 1.0f64);
    while !below(hi) {
        hi = 2.0 * hi + 1.0;
        if hi > 710.0 {
            return f64::INFINITY;
        }
    }
    while below(lo) {
        lo = 2.0 * lo - 1.0;
        if lo < -710.0 {
            return 0.0;
        }
    }
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        if below(mid) {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    (0.5 * (lo + hi)).exp()
}

/// Looks a family up by name; the error lists the known names and suggests the nearest.
///
/// The configured families come back unconfigured (`piecewise` without cut points, splines
/// with knots still to be placed on the data): fit them after [`with_options`], or rebuild
/// them from a fit file with [`configured`].
pub fn by_name(name: &str) -> Result<&'static dyn Family, String> {
    let lower = name.trim().to_ascii_lowercase();
    let families = all();
    if let Some(f) = families.iter().find(|f| f.name() == lower) {
        return Ok(*f);
    }
    if let Some(f) = flexible_template(&lower) {
        return Ok(f);
    }
    let mut names: Vec<&str> = families.iter().map(|f| f.name()).collect();
    names.extend(FLEXIBLE_NAMES);
    let hint = crate::units::nearest(&lower, &names)
        .map(|n| format!(" (did you mean \"{n}\"?)"))
        .unwrap_or_default();
    Err(format!(
        "unknown family \"{}\"{hint}; known families: {}",
        name.trim(),
        names.join(", ")
    ))
}

/// Names of the configured families (spline K = 0–3 internal knots, piecewise exponential).
pub const FLEXIBLE_NAMES: [&str; 13] = [
    "spline-ph-0",
    "spline-ph-1",
    "spline-ph-2",
    "spline-ph-3",
    "spline-po-0",
    "spline-po-1",
    "spline-po-2",
    "spline-po-3",
    "spline-probit-0",
    "spline-probit-1",
    "spline-probit-2",
    "spline-probit-3",
    "piecewise",
];

/// The unconfigured instance of a configured family, by lower-case name.
fn flexible_template(name: &str) -> Option<&'static dyn Family> {
    if name == "piecewise" {
        return Some(intern("piecewise", None, || {
            Box::new(Piecewise::unconfigured())
        }));
    }
    let name: &'static str = FLEXIBLE_NAMES.iter().find(|n| **n == name)?;
    let rest = name.strip_prefix("spline-")?;
    let (scale, internal) = rest.split_once('-')?;
    let scale = match scale {
        "ph" => SplineScale::ProportionalHazards,
        "po" => SplineScale::ProportionalOdds,
        _ => SplineScale::Probit,
    };
    let internal: usize = internal.parse().ok()?;
    Some(intern(name, None, || {
        Box::new(Spline::unconfigured(scale, internal, name))
    }))
}

/// Checks a parameter is finite and strictly positive.
pub(crate) fn check_positive(name: &str, value: f64) -> Result<(), String> {
    if value.is_finite() && value > 0.0 {
        Ok(())
    } else {
        Err(format!(
            "parameter {name} must be a positive finite number, got {value}"
        ))
    }
}

/// Checks a parameter is finite.
pub(crate) fn check_finite(name: &str, value: f64) -> Result<(), String> {
    if value.is_finite() {
        Ok(())
    } else {
        Err(format!(
            "parameter {name} must be a finite number, got {value}"
        ))
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;

    /// Natural parameter sets used by the generic family tests.
    pub fn examples(name: &str) -> Vec<Vec<f64>> {
        match name {
            "exponential" => vec![vec![0.01], vec![2.5]],
            "weibull" => vec![vec![0.6, 30.0], vec![1.0, 5.0], vec![2.7, 400.0]],
            "lognormal" => vec![vec![3.0, 0.5], vec![-1.0, 2.0]],
            "loglogistic" => vec![vec![0.8, 20.0], vec![3.5, 1.5]],
            "gompertz" => vec![vec![0.05, 0.01], vec![-0.3, 0.2], vec![1e-12, 0.4]],
            "cure-weibull" => vec![vec![1.5, 10.0, 0.3], vec![0.7, 3.0, 0.02]],
            "cure-lognormal" => vec![vec![2.0, 0.8, 0.25]],
            "cure-loglogistic" => vec![vec![2.2, 6.0, 0.4]],
            "generalized-gamma" => vec![
                vec![1.0, 0.5, 1.0],
                vec![3.0, 1.2, -0.7],
                vec![2.0, 0.8, 0.004],
                vec![0.5, 0.3, 2.5],
            ],
            _ => vec![],
        }
    }

    #[test]
    fn survival_is_monotone_in_unit_interval_and_quantile_inverts_it() {
        for family in all() {
            for p in examples(family.name()) {
                family.check_params(&p).unwrap();
                let mut last = 1.0;
                assert_eq!(family.log_survival(&p, 0.0), 0.0, "{}", family.name());
                for i in 1..400 {
                    let t = 1e-3 * 1.05f64.powi(i);
                    let s = family.survival(&p, t);
                    assert!((0.0..=1.0).contains(&s), "{} S({t}) = {s}", family.name());
                    assert!(s <= last + 1e-15, "{} not monotone at {t}", family.name());
                    last = s;
                    let f = 1.0 - s;
                    if f > 1e-6 && s > 1e-6 {
                        // Where the curve is nearly flat t is ill-determined by S, so the round
                        // trip is also accepted in survival: S(quantile(1 - S(t))) = S(t).
                        let back = family.quantile(&p, f);
                        let s_back = family.survival(&p, back);
                        assert!(
                            (back - t).abs() <= 1e-6 * t || (s_back - s).abs() <= 1e-12,
                            "{} quantile(1-S({t})) = {back}",
                            family.name()
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn hazard_matches_numerical_derivative_of_cumulative_hazard() {
        for family in all() {
            for p in examples(family.name()) {
                for &t in &[0.3, 1.0, 7.0, 25.0] {
                    let h = 1e-5 * t;
                    let numeric = (family.cumulative_hazard(&p, t + h)
                        - family.cumulative_hazard(&p, t - h))
                        / (2.0 * h);
                    let analytic = family.hazard(&p, t);
                    assert!(
                        (numeric - analytic).abs() <= 1e-6 * analytic.abs().max(1e-8),
                        "{} {p:?} t={t}: {numeric} vs {analytic}",
                        family.name()
                    );
                }
            }
        }
    }

    #[test]
    fn estimation_scale_round_trips() {
        for family in all() {
            for p in examples(family.name()) {
                let back = family.to_natural(&family.to_estimation(&p));
                for (a, b) in p.iter().zip(&back) {
                    assert!((a - b).abs() <= 1e-12 * a.abs().max(1.0));
                }
            }
        }
    }

    #[test]
    fn rescaling_time_gives_the_same_curve() {
        for family in all() {
            for p in examples(family.name()) {
                let factor = 12.0 / 365.25;
                let q = family.rescale_time(&p, factor);
                for &t in &[0.5, 3.0, 40.0] {
                    let a = family.log_survival(&p, t);
                    let b = family.log_survival(&q, t * factor);
                    assert!(
                        (a - b).abs() <= 1e-12 * a.abs().max(1.0),
                        "{}",
                        family.name()
                    );
                }
            }
        }
    }

    /// Every family with example parameters, the configured ones configured.
    fn every_family_with_examples() -> Vec<(&'static dyn Family, Vec<Vec<f64>>)> {
        let mut out: Vec<(&'static dyn Family, Vec<Vec<f64>>)> =
            all().into_iter().map(|f| (f, examples(f.name()))).collect();
        out.push((
            Piecewise::with_cuts(&[6.0, 12.0]).unwrap(),
            vec![vec![0.05, 0.08, 0.12]],
        ));
        for scale in ["ph", "po", "probit"] {
            let settings = FamilySettings {
                scale: Some(scale.into()),
                knots: Some(vec![0.5, 6.0, 40.0]),
                cuts: None,
            };
            let name = format!("spline-{scale}-1");
            out.push((
                configured(&name, Some(&settings)).unwrap(),
                vec![vec![-2.0, 1.1, 0.02]],
            ));
        }
        out
    }

    #[test]
    fn parameter_units_say_how_each_parameter_moves_with_the_time_unit() {
        // Definitions of the units (dimensional analysis, common practice): a time scales with
        // the factor, a rate with its inverse, a log-time shifts by ln(factor), a pure number
        // stays; checked against each family's own exact rescaling.
        let factor = 12.0 / 365.25;
        for (family, examples) in every_family_with_examples() {
            let units = family.param_units();
            assert_eq!(units.len(), family.param_names().len(), "{}", family.name());
            for p in examples {
                let q = family.rescale_time(&p, factor);
                for (i, kind) in units.iter().enumerate() {
                    let expected = match kind {
                        ParamUnit::Time => p[i] * factor,
                        ParamUnit::PerTime => p[i] / factor,
                        ParamUnit::LogTime => p[i] + factor.ln(),
                        ParamUnit::Unitless => p[i],
                        // c0' = c0 - c1·ln(factor) (Royston and Parmar, 2002: s is a function
                        // of ln t).
                        ParamUnit::LogTimeIntercept => p[i] - p[i + 1] * factor.ln(),
                    };
                    assert!(
                        (q[i] - expected).abs() <= 1e-12 * expected.abs().max(1.0),
                        "{} {}: {} vs {expected}",
                        family.name(),
                        family.param_names()[i],
                        q[i]
                    );
                }
            }
        }
        assert_eq!(
            parameter_units_text(&LogNormal, TimeUnit::Months),
            "mu: ln(months); sigma: unitless"
        );
        assert_eq!(
            parameter_units_text(&Gompertz, TimeUnit::Days),
            "shape: per day; rate: per day"
        );
        assert_eq!(
            parameter_units_text(&CURE_WEIBULL, TimeUnit::Years),
            "shape: unitless; scale: years; cure: unitless"
        );
    }

    #[test]
    fn unknown_family_suggests_nearest() {
        let err = by_name("weibul").err().unwrap();
        assert!(err.contains("did you mean \"weibull\""), "{err}");
        assert_eq!(by_name("LogNormal").unwrap().name(), "lognormal");
    }

    #[test]
    fn earlier_family_names_are_not_aliases() {
        // The renamed identifiers are refused like any unknown name, listing the known ones.
        for (old, new) in [
            ("gengamma", "generalized-gamma"),
            ("spline-hazard-2", "spline-ph-2"),
            ("spline-odds-1", "spline-po-1"),
            ("spline-normal-3", "spline-probit-3"),
        ] {
            let err = by_name(old).err().expect(old);
            assert!(err.contains("unknown family"), "{err}");
            assert!(err.contains(new), "{old}: {err}");
        }
        let spline = by_name("spline-ph-1").unwrap();
        assert_eq!(spline.param_names(), ["c0", "c1", "c2"]);
    }
}
