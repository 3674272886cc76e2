//! The curve options shared by `tunnels`, `horizon` (and later `draws`): one clap struct,
//! flattened into each command, that turns either a fit file or published parameters into a
//! curve plus the metadata lines describing where it came from.
//!
//! Adding an option (e.g. an adjustment) is a field here and a step in [`CurveArgs::build`]
//! that wraps [`BuiltCurve::curve`] and pushes a metadata line.

use crate::curve::{Curve, ParametricCurve};
use crate::error::{Error, Result};
use crate::export::number_text;
use crate::families::{self, Family};
use crate::fit::{FamilyFit, FitFile};
use crate::units::TimeUnit;
use clap::Args;
use std::path::PathBuf;

/// Where the survival curve comes from: `--fit FIT.json --family NAME [--arm NAME]`, or
/// `--family NAME --param NAME=VALUE … --time-unit UNIT` (parameters from a publication).
#[derive(Debug, Clone, Args)]
pub struct CurveArgs {
    /// Fit file written by `tunnelcast fit --json`.
    #[arg(long, value_name = "FIT.json", help_heading = "Curve")]
    pub fit: Option<PathBuf>,
    /// Family: the fitted family to take from --fit, or the family of the --param values.
    #[arg(long, value_name = "NAME", help_heading = "Curve")]
    pub family: String,
    /// Arm to take from the fit file (needed when it has several arms).
    #[arg(long, value_name = "NAME", help_heading = "Curve")]
    pub arm: Option<String>,
    /// A published parameter, repeated for each one (e.g. --param shape=1.2 --param scale=30).
    #[arg(
        long = "param",
        value_name = "NAME=VALUE",
        help_heading = "Curve",
        allow_hyphen_values = true
    )]
    pub params: Vec<String>,
    /// Time unit of the --param values (days, weeks, months, years); required with --param.
    #[arg(long, value_name = "UNIT", help_heading = "Curve")]
    pub time_unit: Option<String>,
    /// Use a fit that the fitter marked as not converged (refused by default; recorded in the output).
    #[arg(long, help_heading = "Curve")]
    pub allow_unconverged: bool,
}

/// A curve ready for use, with what every output header says about it.
pub struct BuiltCurve {
    /// The curve downstream code works on (adjustments wrap it).
    pub curve: Box<dyn Curve>,
    /// The parametric curve before any adjustment (for draws and parameter listings).
    pub base: ParametricCurve,
    /// The fit it came from, when it came from a fit file (covariance for draws).
    pub fit: Option<FamilyFit>,
    /// Ordered metadata lines: source, file hashes, family, parameters, their time unit, settings.
    pub metadata: Vec<(String, String)>,
    /// Warnings to print on stderr (also recorded in `metadata`).
    pub warnings: Vec<String>,
}

/// `name=value, …` with full-precision values, in the family's parameter order.
pub fn parameter_text(family: &dyn Family, params: &[f64]) -> String {
    family
        .param_names()
        .iter()
        .zip(params)
        .map(|(n, v)| format!("{n}={}", number_text(*v)))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Parses a unit given as an option value, with a one-line error naming the option.
pub fn parse_unit(option: &str, text: &str) -> Result<TimeUnit> {
    text.parse()
        .map_err(|e: String| Error::Usage(format!("{option}: {e}")))
}

impl CurveArgs {
    /// Builds the curve, checking every option; errors are one line (exit 2).
    pub fn build(&self) -> Result<BuiltCurve> {
        let family =
            families::by_name(&self.family).map_err(|e| Error::Usage(format!("--family: {e}")))?;
        let mut built = match &self.fit {
            Some(path) => self.curve_from_fit(path, family)?,
            None => self.curve_from_params(family)?,
        };
        // The curve's own family: for configured families (cut points, knots) the fit file's.
        let family = built.base.family;
        built.metadata.push(("family".into(), family.name().into()));
        built.metadata.push((
            "parameters".into(),
            parameter_text(family, &built.base.params),
        ));
        if let Some(settings) = family.settings() {
            if let Ok(text) = serde_json::to_string(&settings) {
                built.metadata.push(("family_settings".into(), text));
            }
        }
        built
            .metadata
            .push(("parameter_time_unit".into(), built.base.unit.name().into()));
        for w in &built.warnings {
            built.metadata.push(("warning".into(), w.clone()));
        }
        Ok(built)
    }

    fn curve_from_fit(
        &self,
        path: &std::path::Path,
        family: &'static dyn Family,
    ) -> Result<BuiltCurve> {
        if !self.params.is_empty() || self.time_unit.is_some() {
            return Err(Error::Usage(
                "--param and --time-unit describe published parameters; they cannot be combined with --fit (the fit file fixes both)".into(),
            ));
        }
        let name = path.display().to_string();
        let bytes =
            std::fs::read(path).map_err(|e| Error::input(&name, format!("cannot read: {e}")))?;
        let file = FitFile::load(path)?;
        let fit = file
            .find(family.name(), self.arm.as_deref())
            .map_err(|e| Error::input(&name, e))?
            .clone();
        let family = fit
            .family()
            .map_err(|e| Error::input(&name, format!("the {} fit: {e}", fit.family)))?;
        let mut warnings = Vec::new();
        if !fit.converged {
            let why = fit.message.as_deref().unwrap_or("no reason recorded");
            if !self.allow_unconverged {
                return Err(Error::input(
                    &name,
                    format!(
                        "the {} fit did not converge ({why}); choose another family or add --allow-unconverged",
                        family.name()
                    ),
                ));
            }
            warnings.push(format!(
                "the {} fit did not converge ({why}); used because of --allow-unconverged",
                family.name()
            ));
        }
        let params = fit.param_vector(family).ok_or_else(|| {
            Error::input(
                &name,
                format!(
                    "the {} fit lacks a parameter ({})",
                    family.name(),
                    family.param_names().join(", ")
                ),
            )
        })?;
        let base = ParametricCurve::new(family, params, file.data.time_unit)
            .map_err(|e| Error::input(&name, format!("the {} fit: {e}", family.name())))?;
        let mut metadata = vec![
            ("source".into(), "fit file".into()),
            ("fit_file".into(), name.clone()),
            ("fit_file_sha256".into(), crate::input::sha256_hex(&bytes)),
            ("data_file".into(), file.data.file.clone()),
            ("data_sha256".into(), file.data.sha256.clone()),
        ];
        if let Some(arm) = &fit.arm {
            metadata.push(("arm".into(), arm.clone()));
        }
        Ok(BuiltCurve {
            curve: Box::new(base.clone()),
            base,
            fit: Some(fit),
            metadata,
            warnings,
        })
    }

    fn curve_from_params(&self, family: &'static dyn Family) -> Result<BuiltCurve> {
        if self.arm.is_some() {
            return Err(Error::Usage("--arm needs --fit".into()));
        }
        let names = family.param_names();
        if self.params.is_empty() {
            return Err(Error::Usage(format!(
                "give either --fit FIT.json or the {} parameters ({}) with --param NAME=VALUE and --time-unit",
                family.name(),
                names.join(", ")
            )));
        }
        let mut values: Vec<Option<f64>> = vec![None; names.len()];
        for given in &self.params {
            let Some((key, value)) = given.split_once('=') else {
                return Err(Error::Usage(format!(
                    "--param {given}: write NAME=VALUE, e.g. --param {}=1.5",
                    names[0]
                )));
            };
            let key = key.trim();
            let Some(index) = names.iter().position(|n| *n == key) else {
                let hint = crate::units::nearest(key, names)
                    .map(|n| format!(" (did you mean \"{n}\"?)"))
                    .unwrap_or_default();
                return Err(Error::Usage(format!(
                    "--param {given}: {} has no parameter \"{key}\"{hint}; its parameters: {}",
                    family.name(),
                    names.join(", ")
                )));
            };
            let number: f64 = value.trim().parse().map_err(|_| {
                Error::Usage(format!(
                    "--param {given}: \"{}\" is not a number",
                    value.trim()
                ))
            })?;
            if values[index].replace(number).is_some() {
                return Err(Error::Usage(format!("--param {key} is given twice")));
            }
        }
        let missing: Vec<&str> = names
            .iter()
            .zip(&values)
            .filter(|(_, v)| v.is_none())
            .map(|(n, _)| *n)
            .collect();
        if !missing.is_empty() {
            return Err(Error::Usage(format!(
                "{} needs --param {} (missing: {})",
                family.name(),
                names
                    .iter()
                    .map(|n| format!("{n}=…"))
                    .collect::<Vec<_>>()
                    .join(" --param "),
                missing.join(", ")
            )));
        }
        let Some(unit_text) = &self.time_unit else {
            return Err(Error::Usage(
                "--time-unit is required with --param (the unit the published parameters are in)"
                    .into(),
            ));
        };
        let unit = parse_unit("--time-unit", unit_text)?;
        let params: Vec<f64> = values.into_iter().flatten().collect();
        let base = ParametricCurve::new(family, params, unit)
            .map_err(|e| Error::Usage(format!("--param: {e}")))?;
        Ok(BuiltCurve {
            curve: Box::new(base.clone()),
            base,
            fit: None,
            metadata: vec![("source".into(), "published parameters".into())],
            warnings: Vec::new(),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn published(family: &str, params: &[&str], unit: Option<&str>) -> CurveArgs {
        CurveArgs {
            fit: None,
            family: family.into(),
            arm: None,
            params: params.iter().map(|s| s.to_string()).collect(),
            time_unit: unit.map(String::from),
            allow_unconverged: false,
        }
    }

    fn error(args: CurveArgs) -> String {
        args.build().err().expect("should fail").to_string()
    }

    #[test]
    fn builds_published_curve_with_metadata() {
        let built = published("weibull", &["scale=30", "shape=1.2"], Some("months"))
            .build()
            .unwrap();
        assert_eq!(built.base.params, vec![1.2, 30.0]);
        assert_eq!(built.curve.time_unit(), TimeUnit::Months);
        let params = built
            .metadata
            .iter()
            .find(|(k, _)| k == "parameters")
            .unwrap();
        assert_eq!(params.1, "shape=1.2, scale=30");
    }

    #[test]
    fn one_line_errors_for_bad_parameters() {
        let e = error(published("weibul", &["shape=1"], Some("days")));
        assert!(e.contains("did you mean \"weibull\""), "{e}");
        let e = error(published("weibull", &["shap=1", "scale=2"], Some("days")));
        assert!(e.contains("did you mean \"shape\""), "{e}");
        let e = error(published("weibull", &["shape=1"], Some("days")));
        assert!(e.contains("missing: scale"), "{e}");
        let e = error(published("weibull", &["shape=1", "scale=-4"], Some("days")));
        assert!(e.contains("scale must be a positive"), "{e}");
        let e = error(published(
            "weibull",
            &["shape=1", "scale=4"],
            Some("monhts"),
        ));
        assert!(e.contains("did you mean \"months\""), "{e}");
        let e = error(published("weibull", &["shape=1", "scale=4"], None));
        assert!(e.contains("--time-unit is required"), "{e}");
        let e = error(published("weibull", &["shape"], Some("days")));
        assert!(e.contains("NAME=VALUE"), "{e}");
        assert!(!e.contains('\n'));
    }
}
