//! Plausibility of the extrapolation: what each fitted curve implies in the long run, in years.
//!
//! For every fit: survival at landmark durations with 95% intervals, the restricted mean to
//! the end of follow-up and the mean to a long horizon (`landmarks.rs`); external targets
//! (`targets.rs`); and the comparison with the general population (`population.rs`). The
//! results are written into each [`FamilyFit`] of a [`FitFile`] by [`annotate`], so `fit`,
//! `run` and the report read the same numbers. Method and choices: `docs/plausibility.md`.

pub mod comparison;
pub mod landmarks;
pub mod population;
pub mod targets;

use crate::adjust::background::BackgroundHazard;
use crate::fit::{FamilyFit, FitFile};
use crate::units::{Duration, TimeUnit};
use serde::{Deserialize, Serialize};

pub use landmarks::{IntervalMethod, Landmark};
pub use targets::{Target, TargetCheck};

/// Default landmark durations (the contract's default).
pub const DEFAULT_LANDMARKS: &str = "1 year,2 years,5 years,10 years,20 years";

/// Default horizon of the mean, years (the contract's default).
pub const DEFAULT_MEAN_HORIZON_YEARS: f64 = 60.0;

/// Everything the plausibility checks need besides the fits.
#[derive(Debug, Clone)]
pub struct Settings {
    /// Landmark durations, years, increasing.
    pub landmarks_years: Vec<f64>,
    /// Horizon of the mean, years.
    pub mean_horizon_years: f64,
    /// How the landmark intervals are made.
    pub interval: IntervalMethod,
    /// External targets (empty without `--targets`).
    pub targets: Vec<Target>,
    /// File the targets came from, as given.
    pub targets_file: Option<String>,
    /// General-population hazard from entry, in years (without a life table: `None`).
    pub population: Option<BackgroundHazard>,
}

impl Default for Settings {
    fn default() -> Self {
        Settings {
            landmarks_years: parse_landmarks(DEFAULT_LANDMARKS).expect("default landmarks parse"),
            mean_horizon_years: DEFAULT_MEAN_HORIZON_YEARS,
            interval: IntervalMethod::Delta,
            targets: Vec::new(),
            targets_file: None,
            population: None,
        }
    }
}

/// Parses `--landmarks`: comma-separated durations, returned in years, sorted, repeats dropped.
pub fn parse_landmarks(text: &str) -> std::result::Result<Vec<f64>, String> {
    let mut years = Vec::new();
    for part in text.split(',') {
        let d: Duration = part
            .trim()
            .parse()
            .map_err(|e| format!("--landmarks: {e}"))?;
        years.push(d.in_unit(TimeUnit::Years));
    }
    years.sort_by(f64::total_cmp);
    years.dedup();
    Ok(years)
}

/// Parses `--mean-horizon` (a duration), in years.
pub fn parse_mean_horizon(text: &str) -> std::result::Result<f64, String> {
    let d: Duration = text.parse().map_err(|e| format!("--mean-horizon: {e}"))?;
    Ok(d.in_unit(TimeUnit::Years))
}

/// What the plausibility checks were made with, written once in the fit file.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Record {
    /// Landmark durations, years.
    pub landmarks_years: Vec<f64>,
    /// Horizon of `mean_years`, years.
    pub mean_horizon_years: f64,
    /// `delta` (delta method on the complementary log-log scale of S, gradient on the
    /// estimation scale) or `draws` (2.5 and 97.5 percentiles of S over parameter draws).
    pub interval: String,
    /// Number of parameter draws behind percentile intervals.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub draws: Option<usize>,
    /// Seed of those draws.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub seed: Option<u64>,
    /// Targets file, as given.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub targets_file: Option<String>,
    /// The targets read from it.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub targets: Vec<Target>,
    /// The general population compared with, when a life table was given.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub population: Option<PopulationRecord>,
}

/// The life table and cohort behind `below_population_from_years`.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct PopulationRecord {
    /// Life table file, as given.
    pub file: String,
    /// Its SHA-256.
    pub sha256: String,
    /// Column of probabilities used (`qx`, `qx_female`, `qx_male`).
    pub column: String,
    /// Age at entry, years.
    pub start_age: f64,
}

/// Computes landmarks, means, target checks and the population comparison for every fit of
/// `file` (in place), and records the settings in `file.plausibility`. A fit that did not
/// converge gets none of them (its numbers are not estimates).
pub fn annotate(file: &mut FitFile, settings: &Settings) {
    let unit = file.data.time_unit;
    let follow_up: Vec<(Option<String>, f64)> = file
        .data
        .arms
        .iter()
        .map(|a| (a.arm.clone(), a.max_time))
        .collect();
    for fit in &mut file.fits {
        let longest = follow_up
            .iter()
            .find(|(arm, _)| *arm == fit.arm)
            .map(|(_, t)| *t)
            .unwrap_or(0.0);
        annotate_fit(fit, settings, unit, longest);
    }
    let (interval, draws, seed) = match settings.interval {
        IntervalMethod::Delta => ("delta".to_string(), None, None),
        IntervalMethod::Draws { count, seed } => ("draws".to_string(), Some(count), Some(seed)),
    };
    file.plausibility = Some(Record {
        landmarks_years: settings.landmarks_years.clone(),
        mean_horizon_years: settings.mean_horizon_years,
        interval,
        draws,
        seed,
        targets_file: settings.targets_file.clone(),
        targets: settings.targets.clone(),
        population: settings.population.as_ref().map(|p| PopulationRecord {
            file: p.table.file.clone(),
            sha256: p.table.sha256.clone(),
            column: p.table.column.clone(),
            start_age: p.start_age,
        }),
    });
}

/// The checks of one fit; `longest` is its arm's longest follow-up in the data's `unit`.
pub fn annotate_fit(fit: &mut FamilyFit, settings: &Settings, unit: TimeUnit, longest: f64) {
    fit.landmarks.clear();
    fit.targets.clear();
    fit.rmst_followup = None;
    fit.mean_years = None;
    fit.below_population_from_years = None;
    if !fit.converged {
        return;
    }
    let Ok(family) = fit.family() else { return };
    let Some(params) = fit.param_vector(family) else {
        return;
    };
    let years_per_unit = unit.factor_to(TimeUnit::Years);
    let unit_per_year = TimeUnit::Years.factor_to(unit);
    fit.landmarks = landmarks::landmarks(fit, &settings.landmarks_years, unit, settings.interval);
    let finite = |x: f64| x.is_finite().then_some(x);
    fit.rmst_followup = finite(family.restricted_mean(&params, longest) * years_per_unit);
    fit.mean_years = finite(
        family.restricted_mean(&params, settings.mean_horizon_years * unit_per_year)
            * years_per_unit,
    );
    fit.targets = targets::check(&settings.targets, fit.arm.as_deref(), |years| {
        family.survival(&params, years * unit_per_year)
    });
    if let Some(population) = &settings.population {
        let crossing = population::below_population_from(
            |years| family.hazard(&params, years * unit_per_year) * unit_per_year,
            population,
            longest * years_per_unit,
            settings.mean_horizon_years,
        );
        fit.below_population_from_years = Some(crossing);
    }
}

/// Serde helper for a field that is absent (outer `None`), `null` (inner `None`) or a number.
pub mod present_or_null {
    use serde::{Deserialize, Deserializer, Serialize, Serializer};

    /// Writes the inner value (`null` for `None`); call with `skip_serializing_if = "Option::is_none"`.
    pub fn serialize<S: Serializer>(
        value: &Option<Option<f64>>,
        serializer: S,
    ) -> Result<S::Ok, S::Error> {
        value.flatten().serialize(serializer)
    }

    /// A present field, `null` or not, is `Some`.
    pub fn deserialize<'de, D: Deserializer<'de>>(
        deserializer: D,
    ) -> Result<Option<Option<f64>>, D::Error> {
        Option::<f64>::deserialize(deserializer).map(Some)
    }
}
