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

/// Fits the joint Weibull models and summarises them; `separate` is the sum of the separate
/// Weibull fits' log-likelihoods over the arms, when every arm has one.
pub fn joint(design: &Design, separate: Option<f64>) -> Vec<JointSummary> {
    use super::design::TermKind;
    use super::joint::{fit, Model};
    let n = design.subjects.len() as f64;
    [Model::Ph, Model::Aft]
        .into_iter()
        .map(|model| {
            let result = fit(design, model);
            let prefix = match model {
                Model::Ph => "log_hr",
                Model::Aft => "log_af",
            };
            let mut names = vec!["ln_shape".to_string(), "ln_scale".to_string()];
            for term in &design.terms {
                names.push(match &term.kind {
                    TermKind::Arm(level) => format!("{prefix}_{level}"),
                    _ => term.name.clone(),
                });
            }
            let mut params = std::collections::BTreeMap::new();
            params.insert("shape".to_string(), result.theta[0].exp());
            params.insert("scale".to_string(), result.theta[1].exp());
            for (name, v) in names.iter().zip(&result.theta).skip(2) {
                params.insert(name.clone(), *v);
            }
            let k = result.theta.len() as f64;
            let lr_test = match separate {
                Some(sep) if !design.has_covariates() => {
                    let statistic = (2.0 * (sep - result.loglik)).max(0.0);
                    let df = design.arms.len() - 1;
                    let p_value = statrs::distribution::ChiSquared::new(df as f64)
                        .map(|d| statrs::distribution::ContinuousCDF::sf(&d, statistic))
                        .unwrap_or(f64::NAN);
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
                family: "weibull".into(),
                model: match model {
                    Model::Ph => "ph".into(),
                    Model::Aft => "aft".into(),
                },
                reference: design.arms[design.reference].clone(),
                params,
                loglik: result.loglik,
                aic: 2.0 * k - 2.0 * result.loglik,
                bic: k * n.ln() - 2.0 * result.loglik,
                converged: result.converged,
                covariance: crate::fit::Covariance {
                    scale: "estimation".into(),
                    names,
                    matrix: result.covariance,
                },
                lr_test,
            }
        })
        .collect()
}

/// The printed section of the joint models: per model, the effect of each non-reference arm
/// (HR or AF) with its 95% interval, the log-likelihood, AIC and the test against the
/// separate fits.
pub fn render_joint(models: &[JointSummary]) -> String {
    let z = normal_quantile(0.975);
    let mut out =
        String::from("\nJoint models across arms (one reference curve, one effect per arm)\n");
    for m in models {
        let what = if m.model == "ph" { "HR" } else { "AF" };
        let mut line = format!(
            "  {} {:<3}  shape {}  scale {}",
            m.family,
            m.model,
            sig(m.params["shape"], 4),
            sig(m.params["scale"], 4)
        );
        for (j, name) in m.covariance.names.iter().enumerate().skip(2) {
            let v = m.params[name];
            let se = m.covariance.matrix[j][j].sqrt();
            let label = name
                .strip_prefix("log_hr_")
                .or_else(|| name.strip_prefix("log_af_"))
                .map(|arm| format!("{what} {arm}"))
                .unwrap_or_else(|| format!("{what} per {name}"));
            line.push_str(&format!(
                "; {label} {} ({} to {})",
                sig(v.exp(), 4),
                sig((v - z * se).exp(), 3),
                sig((v + z * se).exp(), 3)
            ));
        }
        line.push_str(&format!("; loglik {:.2}; AIC {:.2}", m.loglik, m.aic));
        if let Some(lr) = &m.lr_test {
            line.push_str(&format!(
                "; vs separate fits: chi-square {} on {} df, p {}",
                sig(lr.statistic, 4),
                lr.df,
                p_text(lr.p_value)
            ));
        }
        if !m.converged {
            line.push_str("; DID NOT CONVERGE");
        }
        out.push_str(&line);
        out.push('\n');
    }
    out
}
