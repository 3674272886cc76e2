//! The analysis file read by `tunnelcast run`: one TOML file naming the data, the families,
//! the chosen curve, the cycle and the outputs, so a whole analysis reruns from one command.
//!
//! This is the one place where the file is checked: TOML syntax errors and unknown keys
//! (with the nearest valid key suggested) are reported with line and column; values are
//! parsed into [`Analysis`], which later code trusts. Relative paths resolve against the
//! folder of the analysis file. See `docs/report.md` for every key.

use crate::adjust::Adjustments;
use crate::cmd::curve_args::CurveArgs;
use crate::error::{Error, Result};
use crate::families::{self, Family};
use crate::units::{Duration, TimeUnit};
use serde::Deserialize;
use std::path::{Path, PathBuf};
use toml::Spanned;

/// `[data]`: where the time-to-event records are and how to read them: a patient-level
/// `file`, or a digitised Kaplan–Meier `curve` (with `at_risk`, `events`, `patients`) that is
/// rebuilt into patient-level data first.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawData {
    file: Option<Spanned<String>>,
    curve: Option<Spanned<String>>,
    at_risk: Option<Spanned<String>>,
    events: Option<Spanned<toml::Value>>,
    patients: Option<Spanned<toml::Value>>,
    time_column: Option<String>,
    event_column: Option<String>,
    arm_column: Option<String>,
    time_unit: Option<Spanned<String>>,
}

/// `[fit]`: families to fit and which curve to carry forward.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFit {
    families: Option<Spanned<Vec<String>>>,
    choose: Option<Spanned<String>>,
    arm: Option<Spanned<String>>,
}

/// `[tunnels]`: the cycle, the number of tunnel states and the horizon checks.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawTunnels {
    cycle: Spanned<String>,
    count: Option<Spanned<toml::Value>>,
    horizon: Option<Spanned<String>>,
    tolerance: Option<Spanned<f64>>,
    discount: Option<Spanned<f64>>,
}

/// `[output]`: the folder and the table formats.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawOutput {
    folder: Option<String>,
    formats: Option<Spanned<Vec<String>>>,
}

/// `[adjust]`: the adjustments of the chosen curve, as the curve options of the other commands.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawAdjust {
    hazard_ratio: Option<f64>,
    acceleration_factor: Option<f64>,
    waning: Option<String>,
    background: Option<String>,
    start_age: Option<f64>,
    sex: Option<String>,
    background_mode: Option<String>,
    beyond_table: Option<String>,
}

/// `[draws]`: parameter draws of the chosen curve for the uncertainty summary.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDraws {
    count: Spanned<i64>,
    seed: Option<u64>,
    per_draw: Option<bool>,
}

/// `[payoffs]`: a payoff schedule (costs, utilities by time since entry) and its discount rate.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPayoffs {
    file: Spanned<String>,
    discount: Option<Spanned<f64>>,
}

/// `[plausibility]`: the long-run checks of every fit (landmarks, means, targets, population).
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPlausibility {
    landmarks: Option<Spanned<toml::Value>>,
    mean_horizon: Option<Spanned<String>>,
    targets: Option<Spanned<String>>,
    background: Option<Spanned<String>>,
    start_age: Option<Spanned<f64>>,
    sex: Option<Spanned<String>>,
}

/// `[choice]`: why the chosen family was chosen, and whether the chosen curve is an arm's
/// curve from a joint model across arms (`model`, `arm`, `at`, as the curve options
/// `--model`, `--arm`, `--at`).
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawChoice {
    reason: Option<Spanned<String>>,
    model: Option<Spanned<String>>,
    arm: Option<Spanned<String>>,
    at: Option<Spanned<toml::Value>>,
}

/// `[effects]`: the models across arms of `fit --effects` (Cox model, test of proportional
/// hazards, joint models), fitted beside the separate fits and listed in the report.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawEffects {
    reference: Option<String>,
    covariates: Option<Vec<String>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawAnalysis {
    title: Option<String>,
    data: Spanned<RawData>,
    fit: Option<RawFit>,
    tunnels: RawTunnels,
    output: Option<RawOutput>,
    adjust: Option<Spanned<RawAdjust>>,
    draws: Option<Spanned<RawDraws>>,
    payoffs: Option<RawPayoffs>,
    plausibility: Option<RawPlausibility>,
    choice: Option<Spanned<RawChoice>>,
    effects: Option<RawEffects>,
}

/// The general population the fits are compared with: a life table, the age at entry and
/// the sex column, from `[plausibility]` or else from `[adjust]`.
#[derive(Debug, Clone, PartialEq)]
pub struct PopulationSource {
    /// The life table as the analysis file names it, resolved, and where it is named.
    pub file: NamedFile,
    /// Age in years at entry.
    pub start_age: f64,
    /// Column of a two-sex table.
    pub sex: Option<crate::adjust::lifetable::Sex>,
    /// Whether this is the `[adjust] background` table (the demo compiles its bytes in).
    pub from_adjust: bool,
}

/// `[plausibility]` settings (defaults as for `fit`).
#[derive(Debug, Clone, PartialEq)]
pub struct PlausibilitySettings {
    /// Landmark durations, years, increasing.
    pub landmarks_years: Vec<f64>,
    /// Horizon of the mean, years.
    pub mean_horizon_years: f64,
    /// External targets file, when given.
    pub targets: Option<NamedFile>,
    /// The general population, when a life table and a start age are given.
    pub population: Option<PopulationSource>,
}

/// `[choice] reason`: why the chosen family was chosen, and where it is written.
#[derive(Debug, Clone, PartialEq)]
pub struct ChoiceReason {
    /// The reason, as written.
    pub text: String,
    /// Where `[choice]` is written.
    pub place: Place,
}

/// `[choice] model`, `arm`, `at`: the chosen curve is an arm's curve from the joint model of
/// `[fit] choose`'s family (or the lowest AIC among the joint models of this kind), taken as
/// the curve options `--model`, `--arm`, `--at` take it.
#[derive(Debug, Clone, PartialEq)]
pub struct JointChoice {
    /// PH or AFT.
    pub model: crate::effects::joint::Model,
    /// Where `[choice] model` is written.
    pub model_place: Place,
    /// The arm level: `[choice] arm`, else `[fit] arm` (checked against the data when the
    /// joint model is chosen).
    pub arm: Option<String>,
    /// Where the arm is written (`[choice] arm` or `[fit] arm`), else `[choice] model`.
    pub arm_place: Place,
    /// The key the arm comes from: `[choice] arm` or `[fit] arm`.
    pub arm_key: &'static str,
    /// `[choice] at` as `--at` takes it (`NAME=VALUE,...`), when given.
    pub at: Option<String>,
    /// Where `[choice] at` is written, else `[choice] model`.
    pub at_place: Place,
}

/// A curve-option message (`--model`, `--arm`, `--at`) in the words of the analysis file's
/// `[choice]` keys, so the analysis file and the curve options share one set of rules.
pub fn choice_message(message: &str) -> String {
    let mut m = message.to_string();
    for (option, key) in [
        ("--model ph|aft", "model = \"ph\" or \"aft\""),
        ("--arm LEVEL", "arm = \"LEVEL\""),
        ("--model", "model"),
        ("--arm", "arm"),
        ("--at", "at"),
    ] {
        m = m.replace(option, key);
    }
    format!("[choice] {m}")
}

/// `[choice] at = { NAME = VALUE, ... }` as the text `--at` takes (`NAME=VALUE,...`): numbers
/// as TOML reads them (shortest form that reads back exactly), text levels as written.
fn at_text(value: &toml::Value) -> std::result::Result<String, String> {
    let toml::Value::Table(table) = value else {
        return Err(format!(
            "[choice] at: {value} is not a table of covariate values; write e.g. at = {{ age = 60, stage = \"II\" }}"
        ));
    };
    let mut items = Vec::new();
    for (name, v) in table {
        let text = match v {
            toml::Value::Integer(n) => n.to_string(),
            toml::Value::Float(x) => format!("{x:?}"),
            toml::Value::String(level) => level.clone(),
            other => {
                return Err(format!(
                    "[choice] at: {name} = {other} is neither a number nor a level (text)"
                ))
            }
        };
        if name.contains([',', '=']) || text.contains([',', '=']) {
            return Err(format!(
                "[choice] at: {name} = {v}: a name or level with \",\" or \"=\" cannot be given"
            ));
        }
        items.push(format!("{name}={text}"));
    }
    Ok(items.join(","))
}

/// `[payoffs]` settings: the payoff file and the annual discount rate of its figures.
#[derive(Debug, Clone)]
pub struct PayoffSettings {
    /// The payoff file as the analysis file names it, its resolved path and where it is named.
    pub file: NamedFile,
    /// Annual discount rate (default: `[tunnels] discount`).
    pub discount: f64,
    /// The file's bytes when they are compiled in (the demo); read from `file.path` otherwise.
    pub bytes: Option<&'static [u8]>,
}

/// `[draws]` settings: how many parameter draws and the seed of the random stream.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct DrawSettings {
    /// Number of draws.
    pub count: usize,
    /// Seed (required, so a re-run is identical).
    pub seed: u64,
    /// Whether the per-draw tunnel table `draws.csv` is written (`per_draw`, default on).
    pub per_draw: bool,
}

/// Largest `[draws] count` accepted (the run stays quick and the summary stable).
pub const MAX_DRAWS: usize = 100_000;

/// Name under which data rebuilt from a digitised curve are written and fitted.
pub const REBUILT_FILE: &str = "rebuilt.csv";

/// A file named in the analysis file: as written, resolved, and where it is written.
#[derive(Debug, Clone, PartialEq)]
pub struct NamedFile {
    /// As written in the analysis file (names it in outputs, whatever the working folder).
    pub name: String,
    /// Resolved against the analysis file's folder.
    pub path: PathBuf,
    /// Where it is written in the analysis file.
    pub place: Place,
}

/// `[data] curve = ...`: the analysis starts from a digitised Kaplan–Meier figure, rebuilt
/// into patient-level data by the same code as `tunnelcast rebuild`.
#[derive(Debug, Clone, PartialEq)]
pub struct CurveSource {
    /// Digitised points (`time,survival`).
    pub curve: NamedFile,
    /// Published numbers at risk (`time,at_risk`), if given.
    pub at_risk: Option<NamedFile>,
    /// Number of patients without a risk table: `N` or `ARM=N` items, as `--patients` takes them.
    pub patients: Vec<String>,
    /// Where `[data] patients` is written.
    pub patients_place: Place,
    /// Published total events: `N` or `ARM=N` items, as `--events` takes them.
    pub events: Vec<String>,
    /// Where `[data] events` is written.
    pub events_place: Place,
}

/// `[data] events` or `patients`: a whole number, or a table of whole numbers by arm, as the
/// `N` / `ARM=N` items of the `rebuild` options.
fn counts(key: &str, value: &toml::Value) -> std::result::Result<Vec<String>, String> {
    let whole = |v: &toml::Value| match v {
        toml::Value::Integer(n) if *n >= 0 => Ok(n.to_string()),
        other => Err(format!(
            "[data] {key}: {other} is not a whole number (give N, or {{ ARM = N, ... }} by arm)"
        )),
    };
    match value {
        toml::Value::Table(t) => {
            if t.is_empty() {
                return Err(format!("[data] {key} is empty"));
            }
            t.iter()
                .map(|(arm, v)| Ok(format!("{arm}={}", whole(v)?)))
                .collect()
        }
        other => Ok(vec![whole(other)?]),
    }
}

/// Which fitted family is carried forward to the tunnel table.
#[derive(Clone, Copy)]
pub enum Choice {
    /// The converged family with the smallest AIC in the chosen arm.
    BestAic,
    /// A named family.
    Family(&'static dyn Family),
}

impl Choice {
    /// As written in the analysis file: `best-aic` or the family name.
    pub fn name(&self) -> &'static str {
        match self {
            Choice::BestAic => "best-aic",
            Choice::Family(f) => f.name(),
        }
    }
}

impl std::fmt::Debug for Choice {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

impl PartialEq for Choice {
    fn eq(&self, other: &Self) -> bool {
        self.name() == other.name()
    }
}

/// How many tunnel states the table gets.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Count {
    /// The suggested count of the truncation check.
    Auto,
    /// A fixed number.
    Fixed(usize),
}

/// A place in the analysis file, for errors found after parsing (e.g. a missing data file).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Place {
    /// 1-based line.
    pub line: u64,
    /// 1-based column (characters).
    pub column: usize,
}

/// A checked analysis: every value parsed, every path resolved.
#[derive(Clone)]
pub struct Analysis {
    /// The analysis file as given on the command line.
    pub file: String,
    /// The file's text, verbatim (it goes into the report).
    pub text: String,
    /// Optional title for the report.
    pub title: Option<String>,
    /// Data file as written in the analysis file (names it in every output, whatever the
    /// working folder); [`REBUILT_FILE`] when the data are rebuilt from a digitised curve.
    pub data_name: String,
    /// Data file resolved against the analysis file's folder (the curve file with `curve`).
    pub data_path: PathBuf,
    /// Where `[data] file` (or `curve`) is written, for errors about the file itself.
    pub data_place: Place,
    /// The digitised curve the data are rebuilt from, when `[data] curve` is given.
    pub rebuild: Option<CurveSource>,
    /// Time column (default `time`).
    pub time_column: String,
    /// Event column (default `event`).
    pub event_column: String,
    /// Arm column, if any.
    pub arm_column: Option<String>,
    /// Time unit of the data (default days).
    pub time_unit: TimeUnit,
    /// Families to fit (default: the standard families).
    pub families: Vec<&'static dyn Family>,
    /// Curve carried forward.
    pub choose: Choice,
    /// Where `[fit] choose` is written (or `[fit]`), for errors about the chosen fit.
    pub choose_place: Place,
    /// Arm the chosen curve comes from (required when the data have several arms).
    pub arm: Option<String>,
    /// Where `[fit] arm` is written, for errors about the arm.
    pub arm_place: Place,
    /// Cycle length.
    pub cycle: Duration,
    /// Number of tunnel states.
    pub count: Count,
    /// Horizon of the truncation and within-cycle checks (`None`: the default rule).
    pub horizon: Option<Duration>,
    /// Tolerance of the truncation errors (default 0.001).
    pub tolerance: f64,
    /// Annual discount rate of the within-cycle table (default 0.035).
    pub discount: f64,
    /// Output folder from `[output] folder`, resolved against the analysis file's folder.
    pub folder: Option<PathBuf>,
    /// Table formats (extensions), default `csv` and `json`.
    pub formats: Vec<String>,
    /// Adjustments of the chosen curve from `[adjust]` (default: none).
    pub adjustments: Adjustments,
    /// Where `[adjust]` is written, for errors found when the adjustments are applied.
    pub adjust_place: Place,
    /// The life table of `[adjust] background` as written in the analysis file (relative to
    /// it): names the table in every output, message and warning, as the other commands name
    /// it as given on the command line (the file is read from `adjustments`' resolved path).
    pub background_name: Option<String>,
    /// Models across arms from `[effects]`, if any (as `fit --effects` options).
    pub effects: Option<crate::cmd::fit_effects::EffectsArgs>,
    /// Uncertainty draws from `[draws]`, if any.
    pub draws: Option<DrawSettings>,
    /// `[payoffs]` settings, when given.
    pub payoffs: Option<PayoffSettings>,
    /// `[plausibility]` settings (defaults when the table is absent).
    pub plausibility: PlausibilitySettings,
    /// `[choice] reason`, required when the chosen family is not the lowest AIC.
    pub reason: Option<ChoiceReason>,
    /// `[choice] model`, `arm`, `at`: the chosen curve from a joint model across arms.
    pub joint: Option<JointChoice>,
}

impl std::fmt::Debug for Analysis {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "Analysis({}: data {})", self.file, self.data_name)
    }
}

/// Line and column (1-based, in characters) of a byte offset.
fn place_of(text: &str, offset: usize) -> Place {
    let offset = offset.min(text.len());
    let before = &text[..offset];
    let line = before.matches('\n').count() as u64 + 1;
    let line_start = before.rfind('\n').map_or(0, |i| i + 1);
    Place {
        line,
        column: text[line_start..offset].chars().count() + 1,
    }
}

/// An error at a place in the analysis file.
fn error_at(file: &str, place: Place, message: impl Into<String>) -> Error {
    Error::InputAt {
        file: file.to_string(),
        line: place.line,
        column: place.column.to_string(),
        message: message.into(),
    }
}

/// Rewrites serde's "unknown field `x`, expected one of `a`, `b`" as a suggestion.
fn explain(message: &str) -> String {
    let message = message.trim();
    let Some(rest) = message.strip_prefix("unknown field `") else {
        return message.replace('\n', " ");
    };
    let Some((key, expected)) = rest.split_once('`') else {
        return message.to_string();
    };
    let valid: Vec<&str> = expected.split('`').skip(1).step_by(2).collect();
    let hint = crate::units::nearest(key, &valid)
        .map(|n| format!(" (did you mean \"{n}\"?)"))
        .unwrap_or_default();
    format!(
        "unknown key \"{key}\"{hint}; valid keys here: {}",
        valid.join(", ")
    )
}

/// The `[adjust]` table as [`Adjustments`], checked by the same code as the curve options of
/// the other commands; errors name the analysis file keys instead of the options.
fn adjustments(file: &str, place: Place, raw: &RawAdjust, base: &Path) -> Result<Adjustments> {
    let args = CurveArgs {
        fit: None,
        family: String::new(),
        arm: None,
        params: Vec::new(),
        time_unit: None,
        cuts: None,
        knots: None,
        model: None,
        at: None,
        allow_unconverged: false,
        hazard_ratio: raw.hazard_ratio.map(|x| x.to_string()),
        acceleration_factor: raw.acceleration_factor.map(|x| x.to_string()),
        waning: raw.waning.clone(),
        background: raw.background.as_ref().map(|b| base.join(b)),
        start_age: raw.start_age.map(|x| x.to_string()),
        sex: raw.sex.clone(),
        background_mode: raw.background_mode.clone(),
        beyond_table: raw.beyond_table.clone(),
    };
    args.adjustments().map_err(|e| {
        let mut message = match e {
            Error::Usage(m) => m,
            other => other.to_string(),
        };
        for key in [
            "hazard-ratio",
            "acceleration-factor",
            "waning",
            "background-mode",
            "background",
            "start-age",
            "sex",
            "beyond-table",
        ] {
            message = message.replace(&format!("--{key}"), &key.replace('-', "_"));
        }
        error_at(
            file,
            place,
            format!("[adjust] {}", message.replace(" LIFETABLE.csv", "")),
        )
    })
}

/// The `[plausibility]` table checked: landmarks, mean horizon, targets file and the general
/// population (its own `background`, `start_age`, `sex`, else those of `[adjust]`).
fn plausibility_settings(
    raw: Option<&RawPlausibility>,
    adjustments: &Adjustments,
    adjust_background: Option<String>,
    adjust_place: Place,
    base: &Path,
    text: &str,
    file: &str,
) -> Result<PlausibilitySettings> {
    let at = |span: std::ops::Range<usize>| place_of(text, span.start);
    let bad = |span: std::ops::Range<usize>, message: String| error_at(file, at(span), message);
    let mut settings = PlausibilitySettings {
        landmarks_years: crate::plausibility::parse_landmarks(
            crate::plausibility::DEFAULT_LANDMARKS,
        )
        .expect("default landmarks parse"),
        mean_horizon_years: crate::plausibility::DEFAULT_MEAN_HORIZON_YEARS,
        targets: None,
        population: None,
    };
    let from_adjust = || {
        let b = adjustments.background.as_ref()?;
        Some(PopulationSource {
            file: NamedFile {
                name: adjust_background
                    .clone()
                    .unwrap_or_else(|| b.path.display().to_string()),
                path: b.path.clone(),
                place: adjust_place,
            },
            start_age: b.start_age,
            sex: b.sex,
            from_adjust: true,
        })
    };
    let Some(raw) = raw else {
        settings.population = from_adjust();
        return Ok(settings);
    };
    if let Some(l) = &raw.landmarks {
        let list = match l.get_ref() {
            toml::Value::String(s) => s.clone(),
            toml::Value::Array(items) => {
                let mut parts = Vec::new();
                for item in items {
                    match item {
                        toml::Value::String(s) => parts.push(s.clone()),
                        other => {
                            return Err(bad(
                                l.span(),
                                format!("[plausibility] landmarks: {other} is not a duration such as \"5 years\""),
                            ))
                        }
                    }
                }
                parts.join(",")
            }
            other => {
                return Err(bad(
                    l.span(),
                    format!("[plausibility] landmarks: {other} is not a list of durations such as [\"1 year\", \"5 years\"]"),
                ))
            }
        };
        if list.trim().is_empty() {
            return Err(bad(l.span(), "[plausibility] landmarks is empty".into()));
        }
        settings.landmarks_years = crate::plausibility::parse_landmarks(&list).map_err(|e| {
            bad(
                l.span(),
                format!("[plausibility] {}", e.replace("--landmarks", "landmarks")),
            )
        })?;
        if settings
            .landmarks_years
            .iter()
            .any(|y| !(y.is_finite() && *y > 0.0))
        {
            return Err(bad(
                l.span(),
                "[plausibility] landmarks must be positive durations".into(),
            ));
        }
    }
    if let Some(h) = &raw.mean_horizon {
        let years = crate::plausibility::parse_mean_horizon(h.get_ref()).map_err(|e| {
            bad(
                h.span(),
                format!(
                    "[plausibility] {}",
                    e.replace("--mean-horizon", "mean_horizon")
                ),
            )
        })?;
        if !(years.is_finite() && years > 0.0) {
            return Err(bad(
                h.span(),
                "[plausibility] mean_horizon must be a positive duration".into(),
            ));
        }
        settings.mean_horizon_years = years;
    }
    if let Some(t) = &raw.targets {
        if t.get_ref().trim().is_empty() {
            return Err(bad(t.span(), "[plausibility] targets is empty".into()));
        }
        settings.targets = Some(NamedFile {
            name: t.get_ref().clone(),
            path: base.join(t.get_ref()),
            place: at(t.span()),
        });
    }
    let sex = match &raw.sex {
        None => None,
        Some(s) => Some(match s.get_ref().trim() {
            "female" => crate::adjust::lifetable::Sex::Female,
            "male" => crate::adjust::lifetable::Sex::Male,
            other => {
                return Err(bad(
                    s.span(),
                    format!("[plausibility] sex: \"{other}\" is neither \"female\" nor \"male\""),
                ))
            }
        }),
    };
    settings.population = match (&raw.background, &raw.start_age) {
        (Some(b), Some(age)) => {
            if b.get_ref().trim().is_empty() {
                return Err(bad(b.span(), "[plausibility] background is empty".into()));
            }
            if !age.get_ref().is_finite() || *age.get_ref() < 0.0 {
                return Err(bad(
                    age.span(),
                    format!(
                        "[plausibility] start_age: {} is not an age in years",
                        age.get_ref()
                    ),
                ));
            }
            Some(PopulationSource {
                file: NamedFile {
                    name: b.get_ref().clone(),
                    path: base.join(b.get_ref()),
                    place: at(b.span()),
                },
                start_age: *age.get_ref(),
                sex,
                from_adjust: false,
            })
        }
        (Some(b), None) => {
            return Err(bad(
                b.span(),
                "[plausibility] background needs start_age (age in years at entry)".into(),
            ))
        }
        (None, Some(age)) => {
            return Err(bad(
                age.span(),
                "[plausibility] start_age needs background = \"LIFETABLE.csv\"".into(),
            ))
        }
        (None, None) => {
            if let Some(s) = &raw.sex {
                return Err(bad(
                    s.span(),
                    "[plausibility] sex needs background = \"LIFETABLE.csv\" and start_age".into(),
                ));
            }
            from_adjust()
        }
    };
    Ok(settings)
}

impl Analysis {
    /// Reads and checks an analysis file.
    pub fn load(path: &Path) -> Result<Analysis> {
        let name = path.display().to_string();
        let text = std::fs::read_to_string(path)
            .map_err(|e| Error::input(&name, format!("cannot read: {e}")))?;
        let base = match path.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        Analysis::parse(&name, &text, &base)
    }

    /// Checks the text of an analysis file named `file`; relative paths resolve against `base`.
    pub fn parse(file: &str, text: &str, base: &Path) -> Result<Analysis> {
        let raw: RawAnalysis = toml::from_str(text).map_err(|e| {
            let place = place_of(text, e.span().map_or(0, |s| s.start));
            error_at(file, place, explain(e.message()))
        })?;
        let at = |span: std::ops::Range<usize>| place_of(text, span.start);
        let bad = |span: std::ops::Range<usize>, message: String| error_at(file, at(span), message);

        let data_span = raw.data.span();
        let data = raw.data.into_inner();
        let named = |key: &str, value: &Spanned<String>| -> Result<NamedFile> {
            if value.get_ref().trim().is_empty() {
                return Err(bad(value.span(), format!("[data] {key} is empty")));
            }
            Ok(NamedFile {
                name: value.get_ref().clone(),
                path: base.join(value.get_ref()),
                place: at(value.span()),
            })
        };
        let (data_name, data_path, data_place, rebuild) = match (&data.file, &data.curve) {
            (Some(_), Some(curve)) => {
                return Err(bad(
                    curve.span(),
                    "[data] file and curve are both given: use file = \"...\" for patient-level data or curve = \"...\" for a digitised Kaplan–Meier curve, not both".into(),
                ))
            }
            (None, None) => {
                return Err(bad(
                    data_span,
                    "[data] needs file = \"...\" (patient-level data) or curve = \"...\" (a digitised Kaplan–Meier curve)".into(),
                ))
            }
            (Some(file), None) => {
                let only_with_curve = [
                    ("at_risk", data.at_risk.as_ref().map(Spanned::span)),
                    ("events", data.events.as_ref().map(Spanned::span)),
                    ("patients", data.patients.as_ref().map(Spanned::span)),
                ];
                if let Some((key, Some(span))) = only_with_curve.into_iter().find(|(_, s)| s.is_some()) {
                    return Err(bad(
                        span,
                        format!("[data] {key} belongs to a digitised curve (curve = \"...\"), not to a patient-level file"),
                    ));
                }
                let file = named("file", file)?;
                (file.name, file.path, file.place, None)
            }
            (None, Some(curve)) => {
                for (key, value) in [
                    ("time_column", data.time_column.is_some()),
                    ("event_column", data.event_column.is_some()),
                ] {
                    if value {
                        return Err(bad(
                            curve.span(),
                            format!("[data] {key} applies to a patient-level file; data rebuilt from a curve have the columns time and event"),
                        ));
                    }
                }
                let curve = named("curve", curve)?;
                let at_risk = data.at_risk.as_ref().map(|r| named("at_risk", r)).transpose()?;
                let list = |key: &str, value: &Option<Spanned<toml::Value>>| -> Result<(Vec<String>, Place)> {
                    match value {
                        None => Ok((Vec::new(), curve.place)),
                        Some(v) => Ok((
                            counts(key, v.get_ref()).map_err(|m| bad(v.span(), m))?,
                            at(v.span()),
                        )),
                    }
                };
                let (events, events_place) = list("events", &data.events)?;
                let (patients, patients_place) = list("patients", &data.patients)?;
                if at_risk.is_some() && !patients.is_empty() {
                    return Err(error_at(
                        file,
                        patients_place,
                        "[data] patients is for a curve without a risk table; with at_risk the table gives the number of patients",
                    ));
                }
                if at_risk.is_none() && patients.is_empty() {
                    return Err(error_at(
                        file,
                        curve.place,
                        "[data] curve needs at_risk = \"...\" (the published numbers at risk) or, without one, patients = N",
                    ));
                }
                (
                    REBUILT_FILE.to_string(),
                    curve.path.clone(),
                    curve.place,
                    Some(CurveSource {
                        curve,
                        at_risk,
                        patients,
                        patients_place,
                        events,
                        events_place,
                    }),
                )
            }
        };
        let time_unit = match &data.time_unit {
            Some(u) => u
                .get_ref()
                .parse()
                .map_err(|e: String| bad(u.span(), format!("[data] time_unit: {e}")))?,
            None => {
                // Said with the range of the times when the file can be read (best effort; a
                // bad file is reported in full once the unit is given).
                let (shown_file, column) = match (&data.file, &data.curve) {
                    (Some(f), _) => (
                        f.get_ref().clone(),
                        data.time_column.as_deref().unwrap_or("time"),
                    ),
                    (_, Some(c)) => (c.get_ref().clone(), "time"),
                    _ => (String::new(), "time"),
                };
                let range = std::fs::read(&data_path)
                    .ok()
                    .and_then(|bytes| crate::input::column_range(&bytes, column));
                return Err(bad(
                    data_span,
                    crate::input::time_unit_needed("[data] time_unit", &shown_file, range),
                ));
            }
        };

        let fit = raw.fit.unwrap_or(RawFit {
            families: None,
            choose: None,
            arm: None,
        });
        let families = match &fit.families {
            None => families::defaults(),
            Some(list) => {
                if list.get_ref().is_empty() {
                    return Err(bad(list.span(), "[fit] families is empty".into()));
                }
                let mut out: Vec<&'static dyn Family> = Vec::new();
                for name in list.get_ref() {
                    let family = families::by_name(name)
                        .map_err(|e| bad(list.span(), format!("[fit] families: {e}")))?;
                    if !out.iter().any(|f| f.name() == family.name()) {
                        out.push(family);
                    }
                }
                out
            }
        };
        let choice = raw.choice.as_ref().map(|c| (c.get_ref(), at(c.span())));
        // `model` and `at` by the curve options' own rule (`--at` needs `--model`).
        let model = match choice {
            None => None,
            Some((c, place)) => {
                let at_given = c.at.as_ref().map(|_| "");
                let model_text = c.model.as_ref().map(|m| m.get_ref().as_str());
                let parsed =
                    crate::cmd::curve_args::joint_model(model_text, at_given).map_err(|e| {
                        let span_place = match (&c.model, &c.at) {
                            (Some(m), _) => at(m.span()),
                            (None, Some(a)) => at(a.span()),
                            _ => place,
                        };
                        error_at(file, span_place, choice_message(&e.to_string()))
                    })?;
                parsed.map(|m| (m, c))
            }
        };
        if let Some((c, place)) = choice {
            if c.reason.is_none() && c.model.is_none() && c.arm.is_none() && c.at.is_none() {
                return Err(error_at(
                    file,
                    place,
                    "[choice] is empty: give reason = \"...\" (why the chosen curve), or model = \"ph\" or \"aft\" with arm (an arm's curve from a joint model)",
                ));
            }
            if let (Some(a), None) = (&c.arm, &c.model) {
                return Err(bad(
                    a.span(),
                    "[choice] arm takes an arm's curve from a joint model; add model = \"ph\" or \"aft\" (the arm of a separate fit is [fit] arm)".into(),
                ));
            }
        }
        let (choose, choose_place) = match &fit.choose {
            None => (Choice::BestAic, Place { line: 1, column: 1 }),
            Some(c) if c.get_ref().trim() == "best-aic" => (Choice::BestAic, at(c.span())),
            Some(c) => {
                let family = families::by_name(c.get_ref())
                    .map_err(|e| bad(c.span(), format!("[fit] choose: {e} (or \"best-aic\")")))?;
                // Joint models are fitted for every family with a joint form, whatever
                // `[fit] families` lists.
                if model.is_none() && !families.iter().any(|f| f.name() == family.name()) {
                    return Err(bad(
                        c.span(),
                        format!(
                            "[fit] choose: {} is not among the fitted families ({})",
                            family.name(),
                            families
                                .iter()
                                .map(|f| f.name())
                                .collect::<Vec<_>>()
                                .join(", ")
                        ),
                    ));
                }
                (Choice::Family(family), at(c.span()))
            }
        };
        let (arm, arm_place) = match &fit.arm {
            Some(a) => (Some(a.get_ref().clone()), at(a.span())),
            None => (None, choose_place),
        };
        let joint = match model {
            None => None,
            Some((model, c)) => {
                let model_span = c.model.as_ref().map(Spanned::span).unwrap_or_default();
                let model_place = at(model_span.clone());
                if raw.effects.is_none() {
                    return Err(bad(
                        model_span,
                        "[choice] model takes the chosen curve from a joint model across arms; add [effects] (with [data] arm_column) so the joint models are fitted".into(),
                    ));
                }
                if let Choice::Family(f) = choose {
                    let supported = crate::effects::joint::by_name(f.name())
                        .is_some_and(|j| j.models().contains(&model));
                    if !supported {
                        let with: Vec<&str> = crate::effects::joint::all()
                            .into_iter()
                            .filter(|(_, m)| *m == model)
                            .map(|(j, _)| j.family().name())
                            .collect();
                        return Err(bad(
                            model_span,
                            format!(
                                "[choice] model = \"{0}\": there is no joint {1} {0} model ([fit] choose = \"{1}\"); joint {0} models: {2}",
                                model.name(),
                                f.name(),
                                with.join(", ")
                            ),
                        ));
                    }
                }
                let (joint_arm, joint_arm_place, arm_key) = match (&c.arm, &arm) {
                    (Some(a), Some(fit_arm)) if a.get_ref() != fit_arm => {
                        return Err(bad(
                            a.span(),
                            format!(
                                "[choice] arm \"{}\" differs from [fit] arm \"{fit_arm}\": the tunnel table is for one arm (leave out [fit] arm)",
                                a.get_ref()
                            ),
                        ))
                    }
                    (Some(a), _) => (Some(a.get_ref().clone()), at(a.span()), "[choice] arm"),
                    (None, Some(fit_arm)) => (Some(fit_arm.clone()), arm_place, "[fit] arm"),
                    (None, None) => (None, model_place, "[choice] arm"),
                };
                let (at_value, at_place) = match &c.at {
                    Some(v) => (
                        Some(at_text(v.get_ref()).map_err(|m| bad(v.span(), m))?),
                        at(v.span()),
                    ),
                    None => (None, model_place),
                };
                Some(JointChoice {
                    model,
                    model_place,
                    arm: joint_arm,
                    arm_place: joint_arm_place,
                    arm_key,
                    at: at_value,
                    at_place,
                })
            }
        };
        if arm.is_some() && data.arm_column.is_none() {
            return Err(error_at(
                file,
                arm_place,
                "[fit] arm needs [data] arm_column to say where arms are",
            ));
        }

        let t = &raw.tunnels;
        let cycle: Duration = t
            .cycle
            .get_ref()
            .parse()
            .map_err(|e: String| bad(t.cycle.span(), format!("[tunnels] cycle: {e}")))?;
        let count = match &t.count {
            None => Count::Auto,
            Some(c) => match c.get_ref() {
                toml::Value::String(s) if s == "auto" => Count::Auto,
                toml::Value::Integer(n) if (1..=crate::discretise::MAX_COUNT as i64).contains(n) => {
                    Count::Fixed(*n as usize)
                }
                other => {
                    return Err(bad(
                        c.span(),
                        format!(
                            "[tunnels] count: {other} is neither \"auto\" nor a whole number from 1 to {}",
                            crate::discretise::MAX_COUNT
                        ),
                    ))
                }
            },
        };
        let horizon = match &t.horizon {
            None => None,
            Some(h) => Some(
                h.get_ref()
                    .parse::<Duration>()
                    .map_err(|e| bad(h.span(), format!("[tunnels] horizon: {e}")))?,
            ),
        };
        let tolerance = match &t.tolerance {
            None => 0.001,
            Some(x) if *x.get_ref() > 0.0 && *x.get_ref() < 1.0 => *x.get_ref(),
            Some(x) => {
                return Err(bad(
                    x.span(),
                    format!(
                        "[tunnels] tolerance: {} is not between 0 and 1",
                        x.get_ref()
                    ),
                ))
            }
        };
        let discount = match &t.discount {
            None => 0.035,
            Some(x) if (0.0..1.0).contains(x.get_ref()) => *x.get_ref(),
            Some(x) => {
                return Err(bad(
                    x.span(),
                    format!(
                    "[tunnels] discount: {} is not an annual rate from 0 to below 1 (e.g. 0.035)",
                    x.get_ref()
                ),
                ))
            }
        };

        let output = raw.output.unwrap_or(RawOutput {
            folder: None,
            formats: None,
        });
        let formats = match &output.formats {
            None => vec!["csv".to_string(), "json".to_string()],
            Some(list) => {
                let known = crate::export::known_formats();
                let mut out: Vec<String> = Vec::new();
                for f in list.get_ref() {
                    let f = f.trim().trim_start_matches('.').to_ascii_lowercase();
                    if !known.contains(&f.as_str()) {
                        let hint = crate::units::nearest(&f, &known)
                            .map(|n| format!(" (did you mean \"{n}\"?)"))
                            .unwrap_or_default();
                        return Err(bad(
                            list.span(),
                            format!(
                                "[output] formats: unknown format \"{f}\"{hint}; formats: {}",
                                known.join(", ")
                            ),
                        ));
                    }
                    if !out.contains(&f) {
                        out.push(f);
                    }
                }
                out
            }
        };

        let (adjustments, adjust_place) = match &raw.adjust {
            None => (Adjustments::default(), Place { line: 1, column: 1 }),
            Some(adj) => {
                let place = at(adj.span());
                (adjustments(file, place, adj.get_ref(), base)?, place)
            }
        };
        let draws = match &raw.draws {
            None => None,
            Some(d) => {
                let r = d.get_ref();
                let count = *r.count.get_ref();
                if !(1..=MAX_DRAWS as i64).contains(&count) {
                    return Err(bad(
                        r.count.span(),
                        format!(
                            "[draws] count: {count} is not a whole number from 1 to {MAX_DRAWS}"
                        ),
                    ));
                }
                let Some(seed) = r.seed else {
                    return Err(bad(
                        d.span(),
                        "[draws] needs seed = N (a whole number), so that a re-run gives the same draws".into(),
                    ));
                };
                Some(DrawSettings {
                    count: count as usize,
                    seed,
                    per_draw: r.per_draw.unwrap_or(true),
                })
            }
        };

        let payoffs = match &raw.payoffs {
            None => None,
            Some(p) => {
                if p.file.get_ref().trim().is_empty() {
                    return Err(bad(p.file.span(), "[payoffs] file is empty".into()));
                }
                let rate = match &p.discount {
                    None => discount,
                    Some(x) if (0.0..1.0).contains(x.get_ref()) => *x.get_ref(),
                    Some(x) => {
                        return Err(bad(
                            x.span(),
                            format!(
                                "[payoffs] discount: {} is not an annual rate from 0 to below 1 (e.g. 0.035)",
                                x.get_ref()
                            ),
                        ))
                    }
                };
                Some(PayoffSettings {
                    file: NamedFile {
                        name: p.file.get_ref().clone(),
                        path: base.join(p.file.get_ref()),
                        place: at(p.file.span()),
                    },
                    discount: rate,
                    bytes: None,
                })
            }
        };

        let plausibility = plausibility_settings(
            raw.plausibility.as_ref(),
            &adjustments,
            raw.adjust
                .as_ref()
                .and_then(|a| a.get_ref().background.clone()),
            adjust_place,
            base,
            text,
            file,
        )?;
        let reason = match raw
            .choice
            .as_ref()
            .and_then(|c| Some((c, c.get_ref().reason.as_ref()?)))
        {
            None => None,
            Some((c, reason)) => {
                let r = reason.get_ref().trim();
                if r.is_empty() {
                    return Err(bad(
                        reason.span(),
                        "[choice] reason is empty; say in a sentence why this family was chosen"
                            .into(),
                    ));
                }
                Some(ChoiceReason {
                    text: r.to_string(),
                    place: at(c.span()),
                })
            }
        };

        let effects = match raw.effects {
            None => None,
            Some(_) if data.arm_column.is_none() => {
                return Err(Error::Usage(format!(
                    "{file}: [effects] needs [data] arm_column naming the treatment arm"
                )))
            }
            Some(e) => Some(crate::cmd::fit_effects::EffectsArgs {
                effects: true,
                reference: e.reference,
                covariates: e.covariates.unwrap_or_default(),
            }),
        };
        Ok(Analysis {
            effects,
            file: file.to_string(),
            text: text.to_string(),
            title: raw.title,
            data_place,
            data_name,
            data_path,
            rebuild,
            time_column: data.time_column.unwrap_or_else(|| "time".into()),
            event_column: data.event_column.unwrap_or_else(|| "event".into()),
            arm_column: data.arm_column,
            time_unit,
            families,
            choose,
            choose_place,
            arm,
            arm_place,
            cycle,
            count,
            horizon,
            tolerance,
            discount,
            folder: output.folder.map(|f| base.join(f)),
            formats,
            adjustments,
            adjust_place,
            background_name: raw
                .adjust
                .as_ref()
                .and_then(|a| a.get_ref().background.clone()),
            draws,
            payoffs,
            plausibility,
            reason,
            joint,
        })
    }

    /// An error about a value at `place` of this analysis file (exit 2).
    pub fn error_at(&self, place: Place, message: impl Into<String>) -> Error {
        error_at(&self.file, place, message)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const GOOD: &str = r#"
title = "test"
[data]
file = "trial.csv"
arm_column = "arm"
time_unit = "months"
[fit]
families = ["weibull", "lognormal"]
choose = "best-aic"
arm = "b"
[tunnels]
cycle = "1 month"
count = 24
"#;

    #[test]
    fn reads_a_complete_file_and_resolves_paths() {
        let a = Analysis::parse("a.toml", GOOD, Path::new("/x/y")).unwrap();
        assert_eq!(a.data_path, PathBuf::from("/x/y/trial.csv"));
        assert_eq!(a.data_name, "trial.csv");
        assert_eq!(a.time_unit, TimeUnit::Months);
        assert_eq!(a.families.len(), 2);
        assert_eq!(a.count, Count::Fixed(24));
        assert_eq!(a.choose, Choice::BestAic);
        assert_eq!(a.arm.as_deref(), Some("b"));
        assert_eq!(a.tolerance, 0.001);
        assert_eq!(a.formats, vec!["csv", "json"]);
        assert_eq!(a.data_place, Place { line: 4, column: 8 });
    }

    #[test]
    fn unknown_key_names_line_column_and_nearest_key() {
        let text = GOOD.replace("families =", "famlies =");
        let err = Analysis::parse("a.toml", &text, Path::new(".")).unwrap_err();
        let msg = err.to_string();
        assert!(
            msg.starts_with("a.toml line 8 column 1: unknown key \"famlies\""),
            "{msg}"
        );
        assert!(msg.contains("did you mean \"families\""), "{msg}");
        assert_eq!(err.exit_code(), 2);
    }

    #[test]
    fn syntax_error_names_line_and_column() {
        let text = GOOD.replace("count = 24", "count = = 24");
        let msg = Analysis::parse("a.toml", &text, Path::new("."))
            .unwrap_err()
            .to_string();
        assert!(msg.starts_with("a.toml line 13 column "), "{msg}");
        assert_eq!(msg.lines().count(), 1, "{msg}");
    }

    #[test]
    fn bad_values_point_at_the_value() {
        let text = GOOD.replace("\"1 month\"", "\"1 monht\"");
        let msg = Analysis::parse("a.toml", &text, Path::new("."))
            .unwrap_err()
            .to_string();
        assert!(
            msg.starts_with("a.toml line 12 column 9: [tunnels] cycle"),
            "{msg}"
        );
        let text = GOOD.replace("count = 24", "count = \"all\"");
        let msg = Analysis::parse("a.toml", &text, Path::new("."))
            .unwrap_err()
            .to_string();
        assert!(msg.contains("[tunnels] count"), "{msg}");
        let text = GOOD.replace("choose = \"best-aic\"", "choose = \"gompertz\"");
        let msg = Analysis::parse("a.toml", &text, Path::new("."))
            .unwrap_err()
            .to_string();
        assert!(msg.contains("not among the fitted families"), "{msg}");
    }

    #[test]
    fn choice_reads_a_joint_model_with_the_curve_options_rules() {
        let joint = GOOD.replace("\"weibull\", \"lognormal\"", "\"weibull\"")
            + "[effects]\ncovariates = [\"age\", \"stage\"]\n[choice]\nmodel = \"AFT\"\nat = { stage = \"II\", age = 60.5 }\n";
        let a = Analysis::parse("a.toml", &joint, Path::new(".")).unwrap();
        let j = a.joint.unwrap();
        assert_eq!(j.model, crate::effects::joint::Model::Aft);
        // The arm of [fit] when [choice] names none; `at` as `--at` takes it.
        assert_eq!(j.arm.as_deref(), Some("b"));
        assert_eq!(j.at.as_deref(), Some("age=60.5,stage=II"));
        assert!(a.reason.is_none());
        let err = |text: String| {
            Analysis::parse("a.toml", &text, Path::new("."))
                .unwrap_err()
                .to_string()
        };
        let e = err(joint.replace("model = \"AFT\"\n", ""));
        assert!(
            e.contains(
                "[choice] at fixes the covariates of a joint model; add model = \"ph\" or \"aft\""
            ),
            "{e}"
        );
        let e = err(joint.replace("\"AFT\"", "\"pH model\""));
        assert!(e.contains("[choice] model ph model: unknown model"), "{e}");
        let e = err(joint.replace("at = {", "arm = \"a\"\nat = {"));
        assert!(e.contains("differs from [fit] arm \"b\""), "{e}");
        let e = err(joint.replace("age = 60.5", "age = true"));
        assert!(e.contains("[choice] at: age = true is neither"), "{e}");
        let e = err(joint.replace("[effects]\ncovariates = [\"age\", \"stage\"]\n", ""));
        assert!(e.contains("add [effects]"), "{e}");
        let e = err(joint.replace("choose = \"best-aic\"", "choose = \"gompertz\""));
        assert!(e.contains("there is no joint gompertz aft model"), "{e}");
        // A joint model need not be among the separate fits' families.
        let loglogistic = joint.replace("choose = \"best-aic\"", "choose = \"loglogistic\"");
        assert!(Analysis::parse("a.toml", &loglogistic, Path::new(".")).is_ok());
        let e = err(format!("{GOOD}[choice]\n"));
        assert!(e.contains("[choice] is empty"), "{e}");
        assert_eq!(e.lines().count(), 1);
    }

    const ADJUST: &str = r#"
[adjust]
hazard_ratio = 0.6
waning = "3 years..6 years"
background = "life.csv"
start_age = 62
sex = "male"
background_mode = "add"
beyond_table = "hold-last"
[draws]
count = 50
seed = 7
"#;

    #[test]
    fn reads_adjust_and_draws() {
        let text = format!("{GOOD}{ADJUST}");
        let a = Analysis::parse("a.toml", &text, Path::new("/x")).unwrap();
        let adj = &a.adjustments;
        assert_eq!(adj.hazard_ratio, Some(0.6));
        assert_eq!(adj.acceleration_factor, None);
        let w = adj.waning.unwrap();
        assert_eq!((w.start.value, w.end.value), (3.0, 6.0));
        let b = adj.background.as_ref().unwrap();
        assert_eq!(b.path, PathBuf::from("/x/life.csv"));
        assert_eq!(a.background_name.as_deref(), Some("life.csv"));
        assert_eq!(b.start_age, 62.0);
        assert_eq!(b.sex, Some(crate::adjust::lifetable::Sex::Male));
        assert_eq!(b.mode, crate::adjust::BackgroundMode::Add);
        assert_eq!(b.beyond, crate::adjust::background::BeyondTable::HoldLast);
        assert_eq!(
            a.draws,
            Some(DrawSettings {
                count: 50,
                seed: 7,
                per_draw: true
            })
        );
        let plain = Analysis::parse("a.toml", GOOD, Path::new("/x")).unwrap();
        assert!(plain.adjustments.is_empty() && plain.draws.is_none());
    }

    #[test]
    fn adjust_and_draws_errors_are_one_line_and_name_the_key() {
        let parse = |t: String| {
            Analysis::parse("a.toml", &format!("{GOOD}{t}"), Path::new("."))
                .unwrap_err()
                .to_string()
        };
        let msg = parse(ADJUST.replace("hazard_ratio", "hazard_raito"));
        assert!(msg.contains("did you mean \"hazard_ratio\""), "{msg}");
        assert!(msg.starts_with("a.toml line 16 column 1"), "{msg}");
        let msg = parse(ADJUST.replace("background_mode = \"add\"", "background_mode = \"ad\""));
        assert!(
            msg.contains("[adjust] background_mode") && msg.contains("\"add\""),
            "{msg}"
        );
        let msg = parse(ADJUST.replace("start_age = 62\n", ""));
        assert!(msg.contains("needs start_age"), "{msg}");
        let msg = parse(ADJUST.replace("seed = 7\n", ""));
        assert!(msg.contains("[draws] needs seed"), "{msg}");
        let msg = parse(ADJUST.replace("count = 50", "count = 0"));
        assert!(msg.contains("[draws] count"), "{msg}");
        assert_eq!(msg.lines().count(), 1);
    }
}
