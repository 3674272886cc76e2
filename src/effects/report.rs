//! What `fit --effects` writes and prints about the Cox model and its test of proportional
//! hazards: the `cox` object of the fit JSON and the printed section.

use super::cox::{self, CoxFit};
use super::design::Design;
use super::ph_test::{self, PhTest};
use crate::format::sig;
use crate::numeric::{normal_quantile, normal_sf};
use serde::{Deserialize, Serialize};

/// One term of the Cox model.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct CoxTerm {
    /// Term name (`arm_LEVEL`, `b_NAME`, `b_NAME_LEVEL`).
    pub name: String,
    /// Coefficient (log hazard ratio).
    pub coef: f64,
    /// Standard error from the observed information.
    pub se: f64,
    /// Hazard ratio.
    pub exp_coef: f64,
    /// Lower 95% limit of the hazard ratio (Wald, log scale).
    pub lower: f64,
    /// Upper 95% limit.
    pub upper: f64,
    /// Two-sided Wald p-value.
    pub p_value: f64,
}

/// The test of one term.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct PhTermSummary {
    /// Term name.
    pub name: String,
    /// Chi-square statistic, 1 df.
    pub chi2: f64,
    /// Upper-tail p-value.
    pub p_value: f64,
}

/// The test of proportional hazards.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct PhTestSummary {
    /// Time transform (`km`: 1 − Kaplan–Meier of the pooled data).
    pub transform: String,
    /// Global statistic.
    pub chi2: f64,
    /// Degrees of freedom.
    pub df: usize,
    /// Upper-tail p-value.
    pub p_value: f64,
    /// Per term.
    pub terms: Vec<PhTermSummary>,
}

/// The `cox` object of the fit JSON.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct CoxSummary {
    /// Handling of tied times (`efron`).
    pub ties: String,
    /// Reference arm.
    pub reference: String,
    /// Partial log-likelihood at the maximum.
    pub loglik: f64,
    /// Partial log-likelihood with all coefficients 0.
    pub loglik_null: f64,
    /// Whether Newton–Raphson converged.
    pub converged: bool,
    /// Number of subjects.
    pub n: usize,
    /// Number of events.
    pub events: usize,
    /// Terms.
    pub terms: Vec<CoxTerm>,
    /// Test of proportional hazards.
    pub ph_test: PhTestSummary,
}

/// Fits the Cox model and the test, and summarises both.
pub fn analyse(design: &Design) -> (CoxFit, PhTest, CoxSummary) {
    let fit = cox::fit(design);
    let test = ph_test::test(design, &fit);
    let z = normal_quantile(0.975);
    let terms = design
        .terms
        .iter()
        .enumerate()
        .map(|(j, term)| {
            let coef = fit.coef[j];
            let se = fit.se(j);
            CoxTerm {
                name: term.name.clone(),
                coef,
                se,
                exp_coef: coef.exp(),
                lower: (coef - z * se).exp(),
                upper: (coef + z * se).exp(),
                p_value: 2.0 * normal_sf((coef / se).abs()),
            }
        })
        .collect();
    let summary = CoxSummary {
        ties: "efron".into(),
        reference: design.arms[design.reference].clone(),
        loglik: fit.loglik,
        loglik_null: fit.loglik_null,
        converged: fit.converged,
        n: design.subjects.len(),
        events: fit.schoenfeld.len(),
        terms,
        ph_test: PhTestSummary {
            transform: "km".into(),
            chi2: test.chi2,
            df: test.df,
            p_value: test.p_value,
            terms: design
                .terms
                .iter()
                .zip(&test.terms)
                .map(|(term, t)| PhTermSummary {
                    name: term.name.clone(),
                    chi2: t.chi2,
                    p_value: t.p_value,
                })
                .collect(),
        },
    };
    (fit, test, summary)
}

fn p_text(p: f64) -> String {
    if p < 0.001 {
        "< 0.001".into()
    } else {
        sig(p, 2)
    }
}

/// The printed section: hazard ratios with 95% intervals, then the test of proportional
/// hazards, with a reminder of what the test can and cannot say.
pub fn render(summary: &CoxSummary) -> String {
    let mut out = format!(
        "\nCox model across arms (Efron ties; reference arm {}; n = {}, events = {}{})\n",
        summary.reference,
        summary.n,
        summary.events,
        if summary.converged {
            ""
        } else {
            "; DID NOT CONVERGE"
        }
    );
    let width = summary
        .terms
        .iter()
        .map(|t| t.name.chars().count())
        .max()
        .unwrap_or(4)
        .max(4);
    out.push_str(&format!(
        "  {:<width$}  {:>10}  {:>22}  {:>8}\n",
        "term", "HR", "95% interval", "p"
    ));
    for t in &summary.terms {
        out.push_str(&format!(
            "  {:<width$}  {:>10}  {:>22}  {:>8}\n",
            t.name,
            sig(t.exp_coef, 4),
            format!("{} to {}", sig(t.lower, 3), sig(t.upper, 3)),
            p_text(t.p_value)
        ));
    }
    out.push_str(&format!(
        "Test of proportional hazards (Schoenfeld residuals against 1 − Kaplan–Meier; global chi-square {} on {} df, p {})\n",
        sig(summary.ph_test.chi2, 4),
        summary.ph_test.df,
        p_text(summary.ph_test.p_value)
    ));
    for t in &summary.ph_test.terms {
        out.push_str(&format!(
            "  {:<width$}  chi-square {:>8}  p {:>8}\n",
            t.name,
            sig(t.chi2, 4),
            p_text(t.p_value)
        ));
    }
    out.push_str(
        "note: a small p suggests the hazard ratio changes over time; a large p does not prove it constant (low power with few events). A test does not settle the clinical question of how the effect behaves beyond follow-up.\n",
    );
    out
}

/// The likelihood-ratio test of a joint model against the separate fits of the same family.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct LrTest {
    /// Sum of the separate fits' log-likelihoods.
    pub separate_loglik: f64,
    /// 2·(separate − joint).
    pub statistic: f64,
    /// Parameters of the separate fits minus those of the joint model.
    pub df: usize,
    /// Upper-tail chi-square p-value.
    pub p_value: f64,
}

/// One joint model of the fit JSON's `effects` list.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct JointSummary {
    /// Family of the reference curve.
    pub family: String,
    /// `ph` or `aft`.
    pub model: String,
    /// Reference arm.
    pub reference: String,
    /// The reference curve's parameters, then the coefficients (`log_hr_LEVEL` or
    /// `log_af_LEVEL`, `b_NAME`, `b_NAME_LEVEL`).
    pub params: std::collections::BTreeMap<String, f64>,
    /// Log-likelihood.
    pub loglik: f64,
    /// Akaike information criterion.
    pub aic: f64,
    /// Bayesian information criterion (n = patients).
    pub bic: f64,
    /// Whether the optimiser converged.
    pub converged: bool,
    /// Covariance on the estimation scale.
    pub covariance: crate::fit::Covariance,
    /// Test against the separate fits (null with covariates or without the separate fits).
    pub lr_test: Option<LrTest>,
}

/// Fits every joint model (PH: exponential, Weibull, Gompertz; AFT: exponential, Weibull,
/// log-normal, log-logistic, generalized gamma) and summarises them; `separate(family)` is the
/// sum of that family's separate fits' log-likelihoods over the arms, when every arm has a
/// converged one. A model with no finite likelihood, estimates or covariance is left out (and
/// named by [`missing_joint`]); one that does not converge otherwise is kept with
/// `converged: false`.
pub fn joint(design: &Design, separate: &dyn Fn(&str) -> Option<f64>) -> Vec<JointSummary> {
    use super::joint::{all, fit_patterns, Patterns};
    // Collapsed once for all models.
    let patterns = Patterns::new(design);
    all()
        .into_iter()
        .filter_map(|(family, model)| {
            let result = fit_patterns(family, model, &patterns)?;
            let summary = summarise_joint(design, &result, separate(family.family().name()));
            // JSON has no NaN: a model without finite estimates or covariance (information
            // not positive definite) is left out, so the fit file reads back, and named in
            // the printout by `missing_joint`.
            let finite = summary.loglik.is_finite()
                && summary.params.values().all(|v| v.is_finite())
                && summary
                    .covariance
                    .matrix
                    .iter()
                    .flatten()
                    .all(|v| v.is_finite());
            finite.then_some(summary)
        })
        .collect()
}

/// The (family, model) pairs of [`super::joint::all`] missing from `models`.
pub fn missing_joint(models: &[JointSummary]) -> Vec<String> {
    super::joint::all()
        .into_iter()
        .filter(|(f, m)| {
            !models
                .iter()
                .any(|s| s.family == f.family().name() && s.model == m.name())
        })
        .map(|(f, m)| format!("{} {}", f.family().name(), m.name()))
        .collect()
}

/// The JSON summary of one fitted joint model.
pub fn summarise_joint(
    design: &Design,
    result: &super::joint::JointFit,
    separate: Option<f64>,
) -> JointSummary {
    use super::design::TermKind;
    use super::joint::Model;
    let n = design.subjects.len() as f64;
    let one = result.family.family();
    let m = one.estimation_names().len();
    let prefix = match result.model {
        Model::Ph => "log_hr",
        Model::Aft => "log_af",
    };
    let mut names: Vec<String> = one
        .estimation_names()
        .iter()
        .map(|s| s.to_string())
        .collect();
    for term in &design.terms {
        names.push(match &term.kind {
            TermKind::Arm(level) => format!("{prefix}_{level}"),
            _ => term.name.clone(),
        });
    }
    let mut params = std::collections::BTreeMap::new();
    for (name, v) in one
        .param_names()
        .iter()
        .zip(one.to_natural(&result.theta[..m]))
    {
        params.insert(name.to_string(), v);
    }
    for (name, v) in names.iter().zip(&result.theta).skip(m) {
        params.insert(name.clone(), *v);
    }
    let k = result.theta.len() as f64;
    let lr_test = match separate {
        Some(sep) if !design.has_covariates() => {
            let statistic = (2.0 * (sep - result.loglik)).max(0.0);
            // Separate fits: m parameters per arm; joint: m plus one per non-reference arm.
            let df = (m - 1) * (design.arms.len() - 1);
            // With 0 df (exponential) the joint model is the separate fits reparameterised:
            // nothing to test, p = 1.
            let p_value = if df == 0 {
                1.0
            } else {
                statrs::distribution::ChiSquared::new(df as f64)
                    .map(|d| statrs::distribution::ContinuousCDF::sf(&d, statistic))
                    .unwrap_or(f64::NAN)
            };
            Some(LrTest {
                separate_loglik: sep,
                statistic,
                df,
                p_value,
            })
        }
        _ => None,
    };
    JointSummary {
        family: one.name().into(),
        model: result.model.name().into(),
        reference: design.arms[design.reference].clone(),
        params,
        loglik: result.loglik,
        aic: 2.0 * k - 2.0 * result.loglik,
        bic: k * n.ln() - 2.0 * result.loglik,
        converged: result.converged,
        covariance: crate::fit::Covariance {
            scale: "estimation".into(),
            names,
            matrix: result.covariance.clone(),
        },
        lr_test,
    }
}

/// The printed section of the joint models: per model, the effect of each non-reference arm
/// (HR or AF) with its 95% interval, the log-likelihood, AIC and the test against the
/// separate fits.
pub fn render_joint(models: &[JointSummary]) -> String {
    let z = normal_quantile(0.975);
    let mut out = String::from(
        "\nJoint models across arms (one reference curve, one effect per arm; HR: hazard ratio, AF: acceleration factor, with 95% intervals)\n",
    );
    let width = models
        .iter()
        .map(|m| m.family.chars().count())
        .max()
        .unwrap_or(0);
    for m in models {
        let what = if m.model == "ph" { "HR" } else { "AF" };
        let family = crate::families::by_name(&m.family).ok();
        let base = family.map_or(0, |f| f.estimation_names().len());
        let reference: Vec<String> = family
            .map(|f| {
                f.param_names()
                    .iter()
                    .filter_map(|n| m.params.get(*n).map(|v| format!("{n} {}", sig(*v, 4))))
                    .collect()
            })
            .unwrap_or_default();
        let mut line = format!(
            "  {:<width$} {:<3}  {}",
            m.family,
            m.model,
            reference.join(", ")
        );
        for (j, name) in m.covariance.names.iter().enumerate().skip(base) {
            let Some(&v) = m.params.get(name) else {
                continue;
            };
            let se = m.covariance.matrix[j][j].sqrt();
            let label = name
                .strip_prefix("log_hr_")
                .or_else(|| name.strip_prefix("log_af_"))
                .map(|arm| format!("{what} {arm}"))
                .unwrap_or_else(|| format!("{what} per {name}"));
            let interval = if se.is_finite() {
                format!(
                    "({} to {})",
                    sig((v - z * se).exp(), 3),
                    sig((v + z * se).exp(), 3)
                )
            } else {
                "(no interval)".to_string()
            };
            line.push_str(&format!("; {label} {} {interval}", sig(v.exp(), 4)));
        }
        line.push_str(&format!("; loglik {:.2}; AIC {:.2}", m.loglik, m.aic));
        if let Some(lr) = &m.lr_test {
            if lr.df == 0 {
                line.push_str("; vs separate fits: the same model (0 df, nothing to test)");
            } else {
                line.push_str(&format!(
                    "; vs separate fits: chi-square {} on {} df, p {}",
                    sig(lr.statistic, 4),
                    lr.df,
                    p_text(lr.p_value)
                ));
            }
        }
        if !m.converged {
            line.push_str("; DID NOT CONVERGE");
        }
        out.push_str(&line);
        out.push('\n');
    }
    let missing = missing_joint(models);
    if !missing.is_empty() {
        out.push_str(&format!(
            "  left out (no finite likelihood, or the information is not positive definite): {}\n",
            missing.join(", ")
        ));
    }
    out
}
