//! The curve options shared by `tunnels`, `horizon` and `draws`: one clap struct, flattened
//! into each command, that turns either a fit file or published parameters into a curve plus
//! the metadata lines describing where it came from.
//!
//! Adding an adjustment is a field here, a setting in [`CurveArgs::adjustments`] and a step in
//! [`crate::adjust::Adjuster::adjust`], the one function from a parametric curve to the
//! adjusted curve (so the point estimate and every draw get it alike).

use crate::adjust::background::BeyondTable;
use crate::adjust::lifetable::Sex;
use crate::adjust::{
    AdjustedCurve, Adjuster, Adjustments, BackgroundMode, BackgroundSettings, Waning,
};
use crate::cmd::fit::parse_durations;
use crate::curve::Curve;
use crate::curve::ParametricCurve;
use crate::effects::curve::JointSource;
use crate::effects::joint::Model;
use crate::error::{Error, Result};
use crate::export::number_text;
use crate::families::{self, Family, FamilyOptions};
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
    /// Cut points of a published piecewise curve, comma-separated durations (e.g. "6 months,12
    /// months"), the same cut points that name its `rate[a,b)` parameters; with --param only.
    #[arg(long, value_name = "DURATIONS", help_heading = "Curve")]
    pub cuts: Option<String>,
    /// All K + 2 knots of a published spline curve, comma-separated durations (not log times),
    /// boundary knots first and last (e.g. "2 months,1 year,5 years"); with --param only.
    #[arg(long, value_name = "DURATIONS", help_heading = "Curve")]
    pub knots: Option<String>,
    /// Take the arm's curve from the joint model across arms of this kind (ph or aft; family from
    /// --family, arm from --arm), fitted by `fit --effects`.
    #[arg(long, value_name = "ph|aft", help_heading = "Curve")]
    pub model: Option<String>,
    /// With --model and covariates: fix them, e.g. --at age=60,stage=II (text covariates by
    /// level); without --at the curve is the mean of the arm's patients' curves (standardised).
    #[arg(long, value_name = "NAME=VALUE,...", help_heading = "Curve")]
    pub at: Option<String>,
    /// Use a fit that the fitter marked as not converged (refused by default; recorded in the output).
    #[arg(long, help_heading = "Curve")]
    pub allow_unconverged: bool,
    /// Hazard ratio X applied to the curve: cumulative hazard times X, survival S(t)^X.
    #[arg(
        long,
        value_name = "X",
        help_heading = "Adjustments",
        allow_negative_numbers = true
    )]
    pub hazard_ratio: Option<String>,
    /// Acceleration factor X applied to the curve: survival S(t/X) (X > 1 lengthens survival).
    #[arg(
        long,
        value_name = "X",
        help_heading = "Adjustments",
        allow_negative_numbers = true
    )]
    pub acceleration_factor: Option<String>,
    /// The log hazard ratio falls linearly to 0 between two durations since entry, e.g. "1 year..3 years".
    #[arg(long, value_name = "START..END", help_heading = "Adjustments")]
    pub waning: Option<String>,
    /// Life table CSV (age plus qx, or qx_female and qx_male) for background mortality.
    #[arg(
        long,
        value_name = "LIFETABLE.csv",
        help_heading = "Background mortality"
    )]
    pub background: Option<PathBuf>,
    /// Age in years at entry to the first tunnel (may be fractional, e.g. 63.5).
    #[arg(
        long,
        value_name = "A",
        help_heading = "Background mortality",
        allow_negative_numbers = true
    )]
    pub start_age: Option<String>,
    /// Column of a two-sex life table: female or male.
    #[arg(long, value_name = "SEX", help_heading = "Background mortality")]
    pub sex: Option<String>,
    /// add: the curve is disease-specific, hazards add; floor: the curve is all-cause, its hazard is never below the background's [default: floor].
    #[arg(long, value_name = "MODE", help_heading = "Background mortality")]
    pub background_mode: Option<String>,
    /// Past the table's last age: error, or hold-last (keep the last age's hazard) [default: error].
    #[arg(long, value_name = "RULE", help_heading = "Background mortality")]
    pub beyond_table: Option<String>,
}

/// A curve ready for use, with what every output header says about it.
pub struct BuiltCurve {
    /// The curve downstream code works on: `adjuster.adjust(base)`.
    pub curve: AdjustedCurve,
    /// The checked adjustments with the life table read once: the one way from a parametric
    /// curve to the adjusted curve, used again for every draw.
    pub adjuster: Adjuster,
    /// The curve before any adjustment (for draws and parameter listings).
    pub base: Base,
    /// The fit it came from, when it came from a fit file (covariance for draws).
    pub fit: Option<FamilyFit>,
    /// Ordered metadata lines: source, file hashes, family, parameters, their time unit, settings.
    pub metadata: Vec<(String, String)>,
    /// Warnings to print on stderr (also recorded in `metadata`).
    pub warnings: Vec<String>,
}

impl BuiltCurve {
    /// Checks that the background life table covers the cohort up to `t_end` (curve's time
    /// unit); call before computing with the last time the command will evaluate.
    pub fn check_horizon(&self, t_end: f64) -> Result<()> {
        self.curve.check_horizon(t_end)
    }

    /// Metadata lines on where a background-mortality floor binds among `count` cycles of
    /// length `cycle` (curve's time unit); empty unless the floor mode is used.
    pub fn floor_report(&self, cycle: f64, count: usize) -> Vec<(String, String)> {
        self.curve.floor_report(cycle, count)
    }
}

/// The curve before adjustments: a family's curve, or an arm's curve from a joint model.
#[derive(Clone)]
pub enum Base {
    /// A fitted or published parametric curve.
    Parametric(ParametricCurve),
    /// An arm's curve from a joint model across arms (with the model's covariance, for draws).
    Joint(Box<JointSource>),
}

impl Base {
    /// The family (of the reference curve, for a joint model).
    pub fn family(&self) -> &'static dyn Family {
        match self {
            Base::Parametric(p) => p.family,
            Base::Joint(j) => j.family,
        }
    }

    /// Time unit of the parameters.
    pub fn unit(&self) -> TimeUnit {
        match self {
            Base::Parametric(p) => p.unit,
            Base::Joint(j) => j.curve.unit,
        }
    }

    /// The parametric curve, unless the curve comes from a joint model.
    pub fn parametric(&self) -> Option<&ParametricCurve> {
        match self {
            Base::Parametric(p) => Some(p),
            Base::Joint(_) => None,
        }
    }

    /// The adjusted curve of this base.
    pub fn adjust(&self, adjuster: &Adjuster) -> Result<AdjustedCurve> {
        match self {
            Base::Parametric(p) => adjuster.adjust(p.clone()),
            Base::Joint(j) => adjuster.adjust_curve(Box::new(j.curve.clone()), j.family),
        }
    }

    /// The adjusted curve of one draw `p`: natural parameters of a family, or all the joint
    /// model's parameters on the estimation scale (the arm's curve at the draw). Every path
    /// that draws (`draws`, `run`) builds its curves here, as the point estimate is built.
    pub fn adjust_draw(
        &self,
        adjuster: &Adjuster,
        p: &[f64],
    ) -> std::result::Result<AdjustedCurve, String> {
        match self {
            Base::Parametric(c) => adjuster.adjust_params(c.family, p, c.unit),
            Base::Joint(j) => adjuster
                .adjust_curve(Box::new(j.curve.with_theta(p)), j.family)
                .map_err(|e| e.to_string()),
        }
    }

    /// Names of the drawn parameters, in the order [`Base::adjust_draw`] takes them.
    pub fn draw_names(&self) -> Vec<String> {
        match self {
            Base::Parametric(c) => c
                .family
                .param_names()
                .iter()
                .map(|s| s.to_string())
                .collect(),
            Base::Joint(j) => j.names.clone(),
        }
    }

    /// Parameter names, values and unit labels for listings: natural parameters of a family,
    /// the estimation-scale parameters of a joint model.
    pub fn parameter_rows(&self) -> Vec<(String, f64, String)> {
        match self {
            Base::Parametric(p) => p
                .family
                .param_names()
                .iter()
                .zip(&p.params)
                .zip(p.family.param_units())
                .map(|((n, v), kind)| (n.to_string(), *v, kind.label(p.unit)))
                .collect(),
            Base::Joint(j) => j
                .names
                .iter()
                .zip(&j.curve.theta)
                .map(|(n, v)| (n.clone(), *v, "estimation scale".to_string()))
                .collect(),
        }
    }
}

/// The curve before adjustments is a curve (the chosen curve of `run`, unadjusted).
impl Curve for Base {
    fn log_survival(&self, t: f64) -> f64 {
        match self {
            Base::Parametric(p) => p.log_survival(t),
            Base::Joint(j) => j.curve.log_survival(t),
        }
    }
    fn hazard(&self, t: f64) -> f64 {
        match self {
            Base::Parametric(p) => p.hazard(t),
            Base::Joint(j) => j.curve.hazard(t),
        }
    }
    fn time_unit(&self) -> TimeUnit {
        self.unit()
    }
    fn describe(&self) -> String {
        match self {
            Base::Parametric(p) => p.describe(),
            Base::Joint(j) => j.curve.describe(),
        }
    }
    fn restricted_mean(&self, horizon: f64) -> f64 {
        match self {
            Base::Parametric(p) => p.restricted_mean(horizon),
            Base::Joint(j) => j.curve.restricted_mean(horizon),
        }
    }
    fn piecewise_hazard(&self, until: f64) -> Option<crate::curve::PiecewiseHazard> {
        match self {
            Base::Parametric(p) => p.piecewise_hazard(until),
            Base::Joint(j) => j.curve.piecewise_hazard(until),
        }
    }
}

/// `--model` and `--at` as given: the joint model kind, or none; `--at` without `--model` is
/// refused. The rule the curve options and `run`'s `[choice]` keys share.
pub fn joint_model(model: Option<&str>, at: Option<&str>) -> Result<Option<Model>> {
    match model {
        Some(m) => Ok(Some(crate::effects::curve::parse_model(m)?)),
        None if at.is_some() => Err(Error::Usage(
            "--at fixes the covariates of a joint model; add --model ph|aft".into(),
        )),
        None => Ok(None),
    }
}

/// Where a curve came from, before any adjustment.
struct Source {
    base: Base,
    fit: Option<FamilyFit>,
    metadata: Vec<(String, String)>,
    warnings: Vec<String>,
}

/// One of a fixed set of words, case-insensitive, with a suggestion on a typo.
pub(crate) fn choose<T: Copy>(option: &str, text: &str, choices: &[(&str, T)]) -> Result<T> {
    let lower = text.trim().to_ascii_lowercase();
    if let Some((_, value)) = choices.iter().find(|(name, _)| *name == lower) {
        return Ok(*value);
    }
    let names: Vec<&str> = choices.iter().map(|(n, _)| *n).collect();
    let hint = crate::units::nearest(&lower, &names)
        .map(|n| format!(" (did you mean \"{n}\"?)"))
        .unwrap_or_default();
    Err(Error::Usage(format!(
        "{option} {}: unknown value{hint}; choose one of {}",
        text.trim(),
        names.join(", ")
    )))
}

/// A number given as an option value, with a one-line error naming the option.
pub(crate) fn option_number(option: &str, text: &str) -> Result<f64> {
    crate::input::parse_number(text).map_err(|e| Error::Usage(format!("{option}: {e}")))
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
        let Source {
            base,
            fit,
            mut metadata,
            mut warnings,
        } = match &self.fit {
            Some(path) => self.curve_from_fit(path, family)?,
            None => self.curve_from_params(family)?,
        };
        // The curve's own family: for configured families (cut points, knots) the fit file's.
        let family = base.family();
        metadata.push(("family".into(), family.name().into()));
        if let Base::Parametric(p) = &base {
            metadata.push(("parameters".into(), parameter_text(family, &p.params)));
            if let Some(settings) = family.settings() {
                if let Ok(text) = serde_json::to_string(&settings) {
                    metadata.push(("family_settings".into(), text));
                }
            }
        }
        metadata.push(("parameter_time_unit".into(), base.unit().name().into()));
        if let Base::Parametric(p) = &base {
            metadata.push((
                "parameter_units".into(),
                families::parameter_units_text(family, p.unit),
            ));
        }
        let adjuster = Adjuster::load(self.adjustments()?)?;
        let curve = base.adjust(&adjuster)?;
        metadata.extend(curve.metadata.iter().cloned());
        warnings.extend(curve.warnings.iter().cloned());
        for w in &warnings {
            metadata.push(("warning".into(), w.clone()));
        }
        Ok(BuiltCurve {
            curve,
            adjuster,
            base,
            fit,
            metadata,
            warnings,
        })
    }

    /// The adjustment options, parsed and checked (the life table is read later, by [`Adjuster::load`]).
    pub fn adjustments(&self) -> Result<Adjustments> {
        let hazard_ratio = match &self.hazard_ratio {
            Some(x) => Some(option_number("--hazard-ratio", x)?),
            None => None,
        };
        let acceleration_factor = match &self.acceleration_factor {
            Some(x) => Some(option_number("--acceleration-factor", x)?),
            None => None,
        };
        let waning = match &self.waning {
            Some(w) => Some(
                w.parse::<Waning>()
                    .map_err(|e| Error::Usage(format!("--waning: {e}")))?,
            ),
            None => None,
        };
        let background = match (&self.background, &self.start_age) {
            (Some(path), Some(age)) => Some(BackgroundSettings {
                path: path.clone(),
                start_age: option_number("--start-age", age)?,
                sex: match &self.sex {
                    Some(s) => Some(choose(
                        "--sex",
                        s,
                        &[("female", Sex::Female), ("male", Sex::Male)],
                    )?),
                    None => None,
                },
                mode: match &self.background_mode {
                    Some(m) => choose(
                        "--background-mode",
                        m,
                        &[
                            ("add", BackgroundMode::Add),
                            ("floor", BackgroundMode::Floor),
                        ],
                    )?,
                    None => BackgroundMode::Floor,
                },
                beyond: match &self.beyond_table {
                    Some(b) => choose(
                        "--beyond-table",
                        b,
                        &[
                            ("error", BeyondTable::Error),
                            ("hold-last", BeyondTable::HoldLast),
                        ],
                    )?,
                    None => BeyondTable::Error,
                },
            }),
            (Some(_), None) => {
                return Err(Error::Usage(
                    "--background needs --start-age (age in years at entry)".into(),
                ))
            }
            (None, _) => {
                for (given, name) in [
                    (self.start_age.is_some(), "--start-age"),
                    (self.sex.is_some(), "--sex"),
                    (self.background_mode.is_some(), "--background-mode"),
                    (self.beyond_table.is_some(), "--beyond-table"),
                ] {
                    if given {
                        return Err(Error::Usage(format!(
                            "{name} needs --background LIFETABLE.csv"
                        )));
                    }
                }
                None
            }
        };
        let adjustments = Adjustments {
            hazard_ratio,
            acceleration_factor,
            waning,
            background,
        };
        adjustments.validate()?;
        Ok(adjustments)
    }

    fn curve_from_fit(
        &self,
        path: &std::path::Path,
        family: &'static dyn Family,
    ) -> Result<Source> {
        if !self.params.is_empty() || self.time_unit.is_some() {
            return Err(Error::Usage(
                "--param and --time-unit describe published parameters; they cannot be combined with --fit (the fit file fixes both)".into(),
            ));
        }
        for (given, option) in [(&self.cuts, "--cuts"), (&self.knots, "--knots")] {
            if given.is_some() {
                return Err(Error::Usage(format!(
                    "{option} describes a published curve (with --param); the fit file already records the fitted family's settings"
                )));
            }
        }
        let name = path.display().to_string();
        let bytes =
            std::fs::read(path).map_err(|e| Error::input(&name, format!("cannot read: {e}")))?;
        let model = joint_model(self.model.as_deref(), self.at.as_deref())?;
        let file = FitFile::load(path)?;
        let mut metadata = vec![
            ("source".into(), "fit file".into()),
            ("fit_file".into(), name.clone()),
            ("fit_file_sha256".into(), crate::input::sha256_hex(&bytes)),
            ("data_file".into(), file.data.file.clone()),
            ("data_sha256".into(), file.data.sha256.clone()),
        ];
        if let Some(model) = model {
            let joint = crate::effects::curve::select(
                &file,
                &name,
                family,
                model,
                self.arm.as_deref(),
                self.at.as_deref(),
                self.allow_unconverged,
            )?;
            metadata.extend(joint.metadata.iter().cloned());
            return Ok(Source {
                warnings: joint.warnings.clone(),
                base: Base::Joint(Box::new(joint)),
                fit: None,
                metadata,
            });
        }
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
        if let Some(arm) = &fit.arm {
            metadata.push(("arm".into(), arm.clone()));
        }
        Ok(Source {
            base: Base::Parametric(base),
            fit: Some(fit),
            metadata,
            warnings,
        })
    }

    /// The configured family of published parameters: `piecewise` with `--cuts`, a spline
    /// family with all its knots from `--knots`, both as durations in the parameters' `unit`.
    fn configure_published(
        &self,
        family: &'static dyn Family,
        unit: TimeUnit,
    ) -> Result<&'static dyn Family> {
        let name = family.name();
        let piecewise = name == "piecewise";
        let spline = name.starts_with("spline-");
        if self.cuts.is_some() && !piecewise {
            return Err(Error::Usage(format!(
                "--cuts sets the cut points of the piecewise family; {name} takes none"
            )));
        }
        if self.knots.is_some() && !spline {
            return Err(Error::Usage(format!(
                "--knots sets the knots of the spline families; {name} takes none"
            )));
        }
        let cuts = self
            .cuts
            .as_deref()
            .map(|t| parse_durations("--cuts", t, unit))
            .transpose()?;
        let knots = self
            .knots
            .as_deref()
            .map(|t| parse_durations("--knots", t, unit))
            .transpose()?;
        if piecewise && cuts.is_none() {
            return Err(Error::Usage(
                "piecewise needs the cut points of its published rates: give --cuts, e.g. --cuts \"6 months,12 months\"".into(),
            ));
        }
        if spline {
            // Only a fit places boundary knots from data, so published curves give all of them.
            let internal: usize = name
                .rsplit('-')
                .next()
                .and_then(|k| k.parse().ok())
                .unwrap_or(0);
            let given = knots.as_ref().map(Vec::len);
            if given != Some(internal + 2) {
                let got = match given {
                    Some(n) => format!("{n} given"),
                    None => "none given".into(),
                };
                return Err(Error::Usage(format!(
                    "--knots: {name} with --param needs all {} knots as durations ({internal} internal, boundary knots first and last); {got}",
                    internal + 2
                )));
            }
        }
        families::with_options(family, &FamilyOptions { cuts, knots }).map_err(Error::Usage)
    }

    fn curve_from_params(&self, family: &'static dyn Family) -> Result<Source> {
        if self.arm.is_some() {
            return Err(Error::Usage("--arm needs --fit".into()));
        }
        if self.model.is_some() || self.at.is_some() {
            return Err(Error::Usage(
                "--model and --at choose a joint model across arms from a fit file; add --fit FIT.json".into(),
            ));
        }
        if self.params.is_empty() {
            let names = family.param_names();
            let list = if names.is_empty() {
                String::new()
            } else {
                format!(" ({})", names.join(", "))
            };
            return Err(Error::Usage(format!(
                "give either --fit FIT.json or the {} parameters{list} with --param NAME=VALUE and --time-unit",
                family.name(),
            )));
        }
        let Some(unit_text) = &self.time_unit else {
            return Err(Error::Usage(
                "--time-unit is required with --param (the unit the published parameters are in)"
                    .into(),
            ));
        };
        let unit = parse_unit("--time-unit", unit_text)?;
        let family = self.configure_published(family, unit)?;
        let names = family.param_names();
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
        let params: Vec<f64> = values.into_iter().flatten().collect();
        let base = ParametricCurve::new(family, params, unit)
            .map_err(|e| Error::Usage(format!("--param: {e}")))?;
        Ok(Source {
            base: Base::Parametric(base),
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
            cuts: None,
            knots: None,
            model: None,
            at: None,
            allow_unconverged: false,
            hazard_ratio: None,
            acceleration_factor: None,
            waning: None,
            background: None,
            start_age: None,
            sex: None,
            background_mode: None,
            beyond_table: None,
        }
    }

    #[test]
    fn published_spline_knots_are_durations_in_the_parameter_unit() {
        // A month is a twelfth of 365.25 days, a year 365.25 days (interface, common practice).
        let mut args = published(
            "spline-po-1",
            &["c0=-2", "c1=1.1", "c2=0.001"],
            Some("months"),
        );
        args.knots = Some("30.4375 days,1 year,3 years".into());
        let built = args.build().unwrap();
        let knots = built.base.family().settings().unwrap().knots.unwrap();
        assert_eq!(knots, vec![1.0, 12.0, 36.0]);
        let mut args = published(
            "piecewise",
            &["rate[0,0.5)=0.1", "rate[0.5,inf)=0.2"],
            Some("years"),
        );
        args.cuts = Some("6 months".into());
        let built = args.build().unwrap();
        assert_eq!(built.base.parametric().unwrap().params, vec![0.1, 0.2]);
        // S(1 year) = exp(-(0.1·0.5 + 0.2·0.5)) by the piecewise-constant hazard.
        let s = built.curve.log_survival(1.0);
        assert!((s + 0.15).abs() < 1e-15, "{s}");
    }

    fn error(args: CurveArgs) -> String {
        args.build().err().expect("should fail").to_string()
    }

    #[test]
    fn builds_published_curve_with_metadata() {
        let built = published("weibull", &["scale=30", "shape=1.2"], Some("months"))
            .build()
            .unwrap();
        assert_eq!(built.base.parametric().unwrap().params, vec![1.2, 30.0]);
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
