//! The `--effects` part of `fit`: options, reading the design and the Cox section. Kept apart
//! from `fit.rs` so the separate fits and the models across arms evolve independently.

use crate::csv_read::read_file;
use crate::effects::design::{self, Design, DesignOptions};
use crate::effects::report::{self, CoxSummary};
use crate::error::{Error, Result};
use clap::Args;
use std::path::Path;

/// Options of `fit` for models across arms.
#[derive(Debug, Args, Clone, Default)]
pub struct EffectsArgs {
    /// Also fit models across arms (needs --arm-col): the Cox model (Efron ties) with its test
    /// of proportional hazards.
    #[arg(long)]
    pub effects: bool,
    /// Reference arm of --effects (default: the first arm in sorted order).
    #[arg(long, value_name = "LEVEL")]
    pub reference: Option<String>,
    /// Covariate columns of --effects, comma-separated: numeric columns (per unit) and text
    /// columns (indicators against the first level in sorted order).
    #[arg(long, value_delimiter = ',', value_name = "NAMES")]
    pub covariates: Vec<String>,
}

/// The models across arms of one `fit` run.
pub struct EffectsResult {
    /// The design they were fitted to.
    pub design: Design,
    /// Its covariates (with the levels of text ones).
    pub covariates: Vec<design::Covariate>,
    /// The Cox model and its test.
    pub cox: CoxSummary,
    /// Per term: (time, scaled Schoenfeld residual) of each event, for the plot.
    pub scaled: Vec<Vec<(f64, f64)>>,
}

/// Checks the options, reads the design and fits the models; `None` without `--effects`.
pub fn prepare(
    args: &EffectsArgs,
    data: &Path,
    columns: (&str, &str, Option<&str>),
    delimiter: Option<u8>,
    zero_time: Option<f64>,
) -> Result<Option<EffectsResult>> {
    if !args.effects {
        if args.reference.is_some() || !args.covariates.is_empty() {
            return Err(Error::Usage(
                "--reference and --covariates belong to --effects; add --effects".into(),
            ));
        }
        return Ok(None);
    }
    let (time_col, event_col, arm_col) = columns;
    let Some(arm_col) = arm_col else {
        return Err(Error::Usage(
            "--effects needs --arm-col naming the treatment arm".into(),
        ));
    };
    let options = DesignOptions {
        time_col: time_col.into(),
        event_col: event_col.into(),
        arm_col: arm_col.into(),
        reference: args.reference.clone(),
        covariates: args
            .covariates
            .iter()
            .map(|c| c.trim().to_string())
            .filter(|c| !c.is_empty())
            .collect(),
        delimiter,
        zero_time,
    };
    let bytes = read_file(data)?;
    from_bytes(&data.display().to_string(), &bytes, &options).map(Some)
}

/// Reads the design from the data's bytes and fits the Cox model and its test.
fn from_bytes(name: &str, bytes: &[u8], options: &DesignOptions) -> Result<EffectsResult> {
    let (design, covariates) = design::parse_with_covariates(name, bytes, options)?;
    let (_, test, cox) = report::analyse(&design);
    let scaled = (0..design.p())
        .map(|j| test.scaled.iter().map(|(t, _, s)| (*t, s[j])).collect())
        .collect();
    Ok(EffectsResult {
        design,
        covariates,
        cox,
        scaled,
    })
}

/// `run`'s `[effects]`: fits the models across arms to the data's bytes and records them in
/// the fit file (Cox model, joint models, the design's patterns), as `fit --effects` does.
pub fn attach(
    file: &mut crate::fit::FitFile,
    args: &EffectsArgs,
    name: &str,
    bytes: &[u8],
    columns: (&str, &str, &str),
) -> Result<()> {
    let options = DesignOptions {
        time_col: columns.0.into(),
        event_col: columns.1.into(),
        arm_col: columns.2.into(),
        reference: args.reference.clone(),
        covariates: args
            .covariates
            .iter()
            .map(|c| c.trim().to_string())
            .filter(|c| !c.is_empty())
            .collect(),
        delimiter: None,
        zero_time: None,
    };
    let result = from_bytes(name, bytes, &options)?;
    file.cox = Some(result.cox.clone());
    file.effects = joint(&result, file);
    file.effects_design = Some(crate::effects::curve::record(
        &result.design,
        &result.covariates,
    ));
    Ok(())
}

/// The printed section of the models across arms.
pub fn render(result: &EffectsResult, joint: &[report::JointSummary]) -> String {
    let mut text = report::render_joint(joint);
    text.push_str(&report::render(&result.cox));
    text
}

/// The joint models, each with the likelihood-ratio test against the separate fits of the
/// same family in `file` when every arm has a converged one.
pub fn joint(result: &EffectsResult, file: &crate::fit::FitFile) -> Vec<report::JointSummary> {
    let separate = |family: &str| -> Option<f64> {
        let mut sum = 0.0;
        for arm in &result.design.arms {
            sum += file
                .fits
                .iter()
                .find(|f| f.family == family && f.arm.as_deref() == Some(arm) && f.converged)
                .and_then(|f| f.loglik)?;
        }
        Some(sum)
    };
    report::joint(&result.design, &separate)
}

/// The figure `effects.svg`/`effects.png`: ln(−ln S) per arm against ln t, and the scaled
/// Schoenfeld residuals of each term over time.
pub fn figures(
    result: &EffectsResult,
    data: &crate::input::Dataset,
    unit: crate::units::TimeUnit,
) -> Result<Vec<crate::plot::Figure>> {
    let kms: Vec<(String, crate::km::KaplanMeier)> = data
        .arms
        .iter()
        .map(|a| {
            (
                a.arm.clone().unwrap_or_default(),
                crate::km::KaplanMeier::from_records(&a.records),
            )
        })
        .collect();
    let plot = crate::plot::EffectsPlot {
        title: format!(
            "Proportional hazards: arms and Schoenfeld residuals (reference arm {})",
            result.cox.reference
        ),
        unit,
        arms: kms.iter().map(|(n, k)| (n.clone(), k)).collect(),
        terms: result
            .cox
            .terms
            .iter()
            .zip(&result.scaled)
            .map(|(t, points)| crate::plot::ResidualPanel {
                name: t.name.clone(),
                coef: t.coef,
                points: points.clone(),
            })
            .collect(),
    };
    crate::plot::both("effects", &plot)
}
