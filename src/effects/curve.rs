//! Curves from joint models across arms: one arm's survival curve, at fixed covariates
//! (`--at NAME=VALUE,...`) or standardised over the arm's own patients, S̄(t) = Σᵢ wᵢ·S(t | xᵢ)
//! (exact mean of the patients' curves, not the curve at the mean covariate). Every value is
//! read through [`JointFit::ln_survival`](super::joint::JointFit::ln_survival)'s free form
//! [`ln_survival_at`], so a draw of θ is a curve like the point estimate.
//!
//! The fit JSON carries what this needs in `effects_design`: the arms, the terms, the
//! covariates (with the levels of text ones) and the distinct covariate patterns per arm with
//! their counts.

use super::design::{Covariate, Design};
use super::joint::{ln_survival_at, JointFamily, Model};
use super::report::JointSummary;
use crate::curve::Curve;
use crate::error::{Error, Result};
use crate::export::number_text;
use crate::families::Family;
use crate::fit::FitFile;
use crate::units::TimeUnit;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// One covariate of the design in the fit JSON.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct CovariateRecord {
    /// Column name.
    pub name: String,
    /// `numeric` or `text`.
    pub kind: String,
    /// Levels of a text covariate in sorted order (the first is the reference level).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub levels: Option<Vec<String>>,
}

/// A distinct covariate pattern of one arm and how many patients have it.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Pattern {
    /// Arm level.
    pub arm: String,
    /// Values of the covariate terms (the design's terms after the arm indicators).
    pub values: Vec<f64>,
    /// Number of patients with this arm and pattern.
    pub count: usize,
}

/// The `effects_design` object of the fit JSON: what a curve from a joint model needs.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct DesignRecord {
    /// Arm levels in sorted order.
    pub arms: Vec<String>,
    /// Reference arm.
    pub reference: String,
    /// Term names in the design's order (`arm_LEVEL`, then `b_NAME`, `b_NAME_LEVEL`).
    pub terms: Vec<String>,
    /// Covariates in the order given.
    pub covariates: Vec<CovariateRecord>,
    /// Distinct covariate patterns per arm, with counts.
    pub patterns: Vec<Pattern>,
}

/// The record of a design: covariates and distinct patterns per arm (arm order, then values).
pub fn record(design: &Design, covariates: &[Covariate]) -> DesignRecord {
    let arm_terms = design.arms.len() - 1;
    let mut counts: BTreeMap<(usize, Vec<u64>), usize> = BTreeMap::new();
    for s in &design.subjects {
        let key: Vec<u64> = s.x[arm_terms..].iter().map(|v| v.to_bits()).collect();
        *counts.entry((s.arm, key)).or_insert(0) += 1;
    }
    DesignRecord {
        arms: design.arms.clone(),
        reference: design.arms[design.reference].clone(),
        terms: design.terms.iter().map(|t| t.name.clone()).collect(),
        covariates: covariates
            .iter()
            .map(|c| CovariateRecord {
                name: c.name.clone(),
                kind: if c.levels.is_some() {
                    "text"
                } else {
                    "numeric"
                }
                .into(),
                levels: c.levels.clone(),
            })
            .collect(),
        patterns: counts
            .into_iter()
            .map(|((arm, bits), count)| Pattern {
                arm: design.arms[arm].clone(),
                values: bits.into_iter().map(f64::from_bits).collect(),
                count,
            })
            .collect(),
    }
}

/// One arm's curve from a joint model: the mixture Σᵢ wᵢ·S(t | xᵢ) over design rows xᵢ with
/// weights summing to 1 (one row at fixed covariates).
#[derive(Debug, Clone)]
pub struct JointCurve {
    /// Family of the reference curve, with how the effects move its parameters.
    pub joint_family: &'static dyn JointFamily,
    /// PH or AFT.
    pub model: Model,
    /// Parameters on the estimation scale.
    pub theta: Vec<f64>,
    /// (ln weight, design row) of each row.
    pub rows: Vec<(f64, Vec<f64>)>,
    /// Time unit of the parameters.
    pub unit: TimeUnit,
    /// Description for headers.
    pub label: String,
}

impl JointCurve {
    /// The same curve at other parameters (a draw).
    pub fn with_theta(&self, theta: &[f64]) -> JointCurve {
        JointCurve {
            theta: theta.to_vec(),
            ..self.clone()
        }
    }
}

impl Curve for JointCurve {
    fn log_survival(&self, t: f64) -> f64 {
        if t <= 0.0 {
            return 0.0;
        }
        if let [(_, x)] = self.rows.as_slice() {
            return ln_survival_at(self.joint_family, self.model, &self.theta, t, x);
        }
        // ln Σ wᵢ Sᵢ on the log scale (every Sᵢ may underflow far in the tail).
        let terms: Vec<f64> = self
            .rows
            .iter()
            .map(|(lw, x)| lw + ln_survival_at(self.joint_family, self.model, &self.theta, t, x))
            .collect();
        let m = terms.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        if m == f64::NEG_INFINITY {
            return m;
        }
        m + terms.iter().map(|v| (v - m).exp()).sum::<f64>().ln()
    }

    /// −d ln S̄/dt by a central difference with a relative step (the read path gives ln S only).
    fn hazard(&self, t: f64) -> f64 {
        let t = t.max(1e-9);
        let d = 1e-5 * t;
        let (a, b) = (self.log_survival(t - d), self.log_survival(t + d));
        if !(a.is_finite() && b.is_finite()) {
            return f64::NAN;
        }
        ((a - b) / (2.0 * d)).max(0.0)
    }

    fn time_unit(&self) -> TimeUnit {
        self.unit
    }

    fn describe(&self) -> String {
        format!("{}; time in {}", self.label, self.unit)
    }
}

/// A joint model chosen by the curve options, with everything draws and listings need.
#[derive(Clone)]
pub struct JointSource {
    /// The arm's curve at the estimates.
    pub curve: JointCurve,
    /// Family of the reference curve.
    pub family: &'static dyn Family,
    /// Estimation-scale names of θ.
    pub names: Vec<String>,
    /// Covariance of θ.
    pub covariance: Vec<Vec<f64>>,
    /// Metadata lines (model, arm, covariates).
    pub metadata: Vec<(String, String)>,
    /// Warnings (an unconverged model used anyway).
    pub warnings: Vec<String>,
}

impl JointSource {
    /// The sampler of all the model's parameters together (reference curve, effects and
    /// covariate coefficients) on the estimation scale: what every path draws from.
    pub fn sampler(&self) -> std::result::Result<crate::draws::Sampler, String> {
        let what = format!("the joint {} model", self.family.name());
        crate::draws::Sampler::from_covariance(
            self.family,
            &what,
            &self.curve.theta,
            &self.covariance,
        )
    }
}

/// `--model` as the joint model kind.
pub fn parse_model(text: &str) -> Result<Model> {
    match text.trim().to_ascii_lowercase().as_str() {
        "ph" => Ok(Model::Ph),
        "aft" => Ok(Model::Aft),
        other => Err(Error::Usage(format!(
            "--model {other}: unknown model; choose ph (proportional hazards) or aft (accelerated failure time)"
        ))),
    }
}

/// The estimates θ on the estimation scale, in the order of the covariance's names.
fn theta_of(summary: &JointSummary, family: &dyn Family) -> std::result::Result<Vec<f64>, String> {
    let natural: Option<Vec<f64>> = family
        .param_names()
        .iter()
        .map(|n| summary.params.get(*n).copied())
        .collect();
    let natural = natural.ok_or("lacks a parameter of the reference curve")?;
    let estimation = family.to_estimation(&natural);
    summary
        .covariance
        .names
        .iter()
        .map(|name| {
            match family.estimation_names().iter().position(|n| n == name) {
                Some(i) => estimation.get(i).copied(),
                None => summary.params.get(name).copied(),
            }
            .ok_or_else(|| format!("has no value for \"{name}\""))
        })
        .collect()
}

/// Parses `--at NAME=VALUE,...` into the covariate terms' values.
fn at_values(text: &str, covariates: &[CovariateRecord]) -> Result<Vec<f64>> {
    let known: Vec<&str> = covariates.iter().map(|c| c.name.as_str()).collect();
    if covariates.is_empty() {
        return Err(Error::Usage(
            "--at: the joint model has no covariates; leave out --at".into(),
        ));
    }
    let mut given: Vec<Option<String>> = vec![None; covariates.len()];
    for item in text.split(',').map(str::trim).filter(|s| !s.is_empty()) {
        let Some((name, value)) = item.split_once('=') else {
            return Err(Error::Usage(format!(
                "--at {item}: write NAME=VALUE (covariates: {})",
                known.join(", ")
            )));
        };
        let (name, value) = (name.trim(), value.trim());
        let Some(k) = covariates.iter().position(|c| c.name == name) else {
            return Err(Error::Usage(format!(
                "--at {item}: no covariate \"{name}\"; the covariates: {}",
                known.join(", ")
            )));
        };
        if given[k].replace(value.to_string()).is_some() {
            return Err(Error::Usage(format!("--at gives {name} twice")));
        }
    }
    let missing: Vec<&str> = covariates
        .iter()
        .zip(&given)
        .filter(|(_, g)| g.is_none())
        .map(|(c, _)| c.name.as_str())
        .collect();
    if !missing.is_empty() {
        return Err(Error::Usage(format!(
            "--at must fix every covariate; missing: {} (covariates: {})",
            missing.join(", "),
            known.join(", ")
        )));
    }
    let mut values = Vec::new();
    for (c, value) in covariates.iter().zip(given.into_iter().flatten()) {
        match &c.levels {
            None => {
                let v = crate::input::parse_number(&value)
                    .map_err(|e| Error::Usage(format!("--at {}={value}: {e}", c.name)))?;
                values.push(v);
            }
            Some(levels) => {
                let Some(i) = levels.iter().position(|l| *l == value) else {
                    return Err(Error::Usage(format!(
                        "--at {}={value}: unknown level; the levels of {}: {}",
                        c.name,
                        c.name,
                        levels.join(", ")
                    )));
                };
                values.extend((1..levels.len()).map(|j| if j == i { 1.0 } else { 0.0 }));
            }
        }
    }
    Ok(values)
}

/// Chooses the joint model `family`/`model` of the fit file and the arm's curve: at `--at`
/// covariates, or standardised over the arm's patients. Errors are one line, exit 2.
pub fn select(
    file: &FitFile,
    file_name: &str,
    family: &'static dyn Family,
    model: Model,
    arm: Option<&str>,
    at: Option<&str>,
    allow_unconverged: bool,
) -> Result<JointSource> {
    let model_name = match model {
        Model::Ph => "ph",
        Model::Aft => "aft",
    };
    if file.effects.is_empty() {
        return Err(Error::input(
            file_name,
            "the fit file has no joint models across arms (fit with --arm-col ARM --effects)",
        ));
    }
    let Some(design) = &file.effects_design else {
        return Err(Error::input(
            file_name,
            "the fit file lacks effects_design (the arms' covariate patterns); fit again with this version",
        ));
    };
    let Some(summary) = file
        .effects
        .iter()
        .find(|m| m.family == family.name() && m.model == model_name)
    else {
        let have: Vec<String> = file
            .effects
            .iter()
            .map(|m| format!("{} {}", m.family, m.model))
            .collect();
        return Err(Error::Usage(format!(
            "the fit file has no joint {} {model_name} model (it has: {})",
            family.name(),
            have.join(", ")
        )));
    };
    let Some(arm) = arm else {
        return Err(Error::Usage(format!(
            "--model needs --arm LEVEL (arms: {})",
            design.arms.join(", ")
        )));
    };
    let Some(arm_index) = design.arms.iter().position(|a| a == arm) else {
        return Err(Error::Usage(format!(
            "--arm {arm}: not an arm of the joint model (arms: {})",
            design.arms.join(", ")
        )));
    };
    let mut warnings = Vec::new();
    if !summary.converged {
        if !allow_unconverged {
            return Err(Error::input(
                file_name,
                format!(
                    "the joint {} {model_name} model did not converge; choose another or add --allow-unconverged",
                    family.name()
                ),
            ));
        }
        warnings.push(format!(
            "the joint {} {model_name} model did not converge; used because of --allow-unconverged",
            family.name()
        ));
    }
    let bad = |why: String| {
        Error::input(
            file_name,
            format!("joint {} {model_name} model: {why}", family.name()),
        )
    };
    let theta = theta_of(summary, family).map_err(bad)?;
    let coefficients = theta.len() - family.estimation_names().len();
    if coefficients != design.terms.len() {
        return Err(bad(format!(
            "{coefficients} coefficient(s) but effects_design has {} term(s)",
            design.terms.len()
        )));
    }
    let reference = design
        .arms
        .iter()
        .position(|a| *a == design.reference)
        .ok_or_else(|| bad("the reference arm is not among the arms".into()))?;
    let arm_part: Vec<f64> = (0..design.arms.len())
        .filter(|a| *a != reference)
        .map(|a| if a == arm_index { 1.0 } else { 0.0 })
        .collect();
    let row = |values: &[f64]| -> Vec<f64> { arm_part.iter().chain(values).copied().collect() };
    let width = design.terms.len() - arm_part.len();
    let mut metadata = vec![
        (
            "joint_model".to_string(),
            format!(
                "{} {model_name} across arms (reference arm {})",
                family.name(),
                design.reference
            ),
        ),
        ("arm".to_string(), arm.to_string()),
    ];
    let (rows, how) = match at {
        Some(text) => {
            let values = at_values(text, &design.covariates)?;
            metadata.push(("covariates_at".to_string(), text.trim().to_string()));
            (vec![(0.0, row(&values))], format!("at {}", text.trim()))
        }
        None => {
            let mine: Vec<&Pattern> = design.patterns.iter().filter(|p| p.arm == arm).collect();
            let total: usize = mine.iter().map(|p| p.count).sum();
            if total == 0 || mine.iter().any(|p| p.values.len() != width) {
                return Err(bad(format!(
                    "effects_design has no usable patterns for arm {arm}"
                )));
            }
            let rows: Vec<(f64, Vec<f64>)> = mine
                .iter()
                .map(|p| ((p.count as f64 / total as f64).ln(), row(&p.values)))
                .collect();
            if design.covariates.is_empty() {
                (vec![(0.0, row(&[]))], String::new())
            } else {
                let how = format!(
                    "standardised over the arm's {total} patients ({} distinct covariate patterns)",
                    rows.len()
                );
                metadata.push(("covariates".to_string(), how.clone()));
                (rows, how)
            }
        }
    };
    let params: Vec<String> = summary
        .covariance
        .names
        .iter()
        .zip(&theta)
        .map(|(n, v)| format!("{n}={}", number_text(*v)))
        .collect();
    metadata.push(("joint_estimates".to_string(), params.join(", ")));
    let label = format!(
        "{} {model_name} joint model, arm {arm} (reference {}){}",
        family.name(),
        design.reference,
        if how.is_empty() {
            String::new()
        } else {
            format!(", {how}")
        }
    );
    let joint_family = super::joint::by_name(family.name())
        .ok_or_else(|| bad("has a family with no joint form".to_string()))?;
    Ok(JointSource {
        curve: JointCurve {
            joint_family,
            model,
            theta,
            rows,
            unit: file.data.time_unit,
            label,
        },
        family,
        names: summary.covariance.names.clone(),
        covariance: summary.covariance.matrix.clone(),
        metadata,
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn standardised_log_survival_stays_finite_where_every_curve_underflows() {
        // Weibull PH with shape 1, scale 1, one coefficient 1: ln S(t | x) = −t·e^x. At t = 1000
        // with x = 0 and x = ln 1.001 the two curves are e^−1000 and e^−1001 (both 0 in f64);
        // their mean is e^−1000·(1 + e^−1)/2, so ln S̄ = −1000 + ln((1 + e^−1)/2) (by hand).
        let curve = JointCurve {
            joint_family: crate::effects::joint::by_name("weibull").expect("joint Weibull"),
            model: Model::Ph,
            theta: vec![0.0, 0.0, 1.0],
            rows: vec![(0.5f64.ln(), vec![0.0]), (0.5f64.ln(), vec![1.001f64.ln()])],
            unit: TimeUnit::Months,
            label: "test".into(),
        };
        let want = -1000.0 + ((1.0 + (-1.0f64).exp()) / 2.0).ln();
        let got = curve.log_survival(1000.0);
        assert!((got - want).abs() < 1e-9, "{got} vs {want}");
        // Hazard of the mixture: Σ wᵢ Sᵢ hᵢ / Σ wᵢ Sᵢ with hᵢ = e^xᵢ (by hand), at t = 2.
        let (s1, s2) = ((-2.0f64).exp(), (-2.0 * 1.001f64).exp());
        let want = (s1 + s2 * 1.001) / (s1 + s2);
        let got = curve.hazard(2.0);
        assert!((got - want).abs() < 1e-7 * want, "{got} vs {want}");
    }
}
