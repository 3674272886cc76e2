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
