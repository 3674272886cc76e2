//! The plausibility options of `fit` (landmarks, mean horizon, interval method, targets and a
//! general-population life table), turned into checked [`plausibility::Settings`].

use crate::adjust::background::{BackgroundHazard, BeyondTable};
use crate::adjust::lifetable::{self, Sex};
use crate::cmd::curve_args::{choose, option_number};
use crate::error::{Error, Result};
use crate::plausibility::{self, IntervalMethod, Settings};
use crate::units::TimeUnit;
use clap::Args;
use std::path::PathBuf;

/// Largest `--landmark-draws` accepted.
pub const MAX_LANDMARK_DRAWS: usize = 1_000_000;

/// Options of the plausibility checks.
#[derive(Debug, Args, Default, Clone)]
pub struct PlausibilityArgs {
    /// Landmark durations for survival with 95% intervals, comma-separated.
    #[arg(long, value_name = "DURATIONS", default_value = plausibility::DEFAULT_LANDMARKS)]
    pub landmarks: Option<String>,
    /// Horizon of the mean survival (restricted mean to this time since entry).
    #[arg(long, value_name = "DURATION", default_value = "60 years")]
    pub mean_horizon: Option<String>,
    /// Landmark intervals from this many parameter draws (2.5 and 97.5 percentiles) instead
    /// of the delta method; needs --seed.
    #[arg(long, value_name = "N")]
    pub landmark_draws: Option<usize>,
    /// Seed of the landmark draws.
    #[arg(long, value_name = "S")]
    pub seed: Option<u64>,
    /// External targets CSV: time (duration), lower, upper (survival), optional arm, source.
    #[arg(long, value_name = "FILE")]
    pub targets: Option<PathBuf>,
    /// General-population life table CSV (age plus qx, or qx_female and qx_male), to find
    /// where each fit's hazard falls below the population's.
    #[arg(long, value_name = "LIFETABLE")]
    pub background: Option<PathBuf>,
    /// Age in years at entry (with --background).
    #[arg(long, value_name = "A")]
    pub start_age: Option<String>,
    /// Column of a two-sex life table: female or male.
    #[arg(long)]
    pub sex: Option<String>,
}

impl PlausibilityArgs {
    /// Checked settings; reads the targets and the life table. Past the life table's last age
    /// the population comparison holds the last age's hazard (said in the printed output).
    pub fn build(&self) -> Result<Settings> {
        let mut settings = Settings::default();
        if let Some(text) = &self.landmarks {
            settings.landmarks_years = plausibility::parse_landmarks(text).map_err(Error::Usage)?;
        }
        if let Some(text) = &self.mean_horizon {
            settings.mean_horizon_years =
                plausibility::parse_mean_horizon(text).map_err(Error::Usage)?;
        }
        settings.interval =
            match (self.landmark_draws, self.seed) {
                (Some(n), Some(seed)) => {
                    if !(2..=MAX_LANDMARK_DRAWS).contains(&n) {
                        return Err(Error::Usage(format!(
                            "--landmark-draws must be from 2 to {MAX_LANDMARK_DRAWS}, got {n}"
                        )));
                    }
                    IntervalMethod::Draws { count: n, seed }
                }
                (Some(_), None) => return Err(Error::Usage(
                    "--landmark-draws needs --seed S, so that a re-run gives the same intervals"
                        .into(),
                )),
                (None, Some(_)) => return Err(Error::Usage(
                    "--seed is for --landmark-draws N (the delta-method intervals need no seed)"
                        .into(),
                )),
                (None, None) => IntervalMethod::Delta,
            };
        if let Some(path) = &self.targets {
            settings.targets = plausibility::targets::load(path)?;
            settings.targets_file = Some(path.display().to_string());
        }
        settings.population = match (&self.background, &self.start_age) {
            (Some(path), Some(age)) => {
                let sex = match &self.sex {
                    Some(s) => Some(choose(
                        "--sex",
                        s,
                        &[("female", Sex::Female), ("male", Sex::Male)],
                    )?),
                    None => None,
                };
                let age = option_number("--start-age", age)?;
                let table = lifetable::load(path, sex)?;
                Some(BackgroundHazard::new(
                    table,
                    age,
                    BeyondTable::HoldLast,
                    TimeUnit::Years,
                )?)
            }
            (Some(_), None) => {
                return Err(Error::Usage(
                    "--background needs --start-age (age in years at entry)".into(),
                ))
            }
            (None, _) => {
                for (given, name) in [
                    (self.start_age.is_some(), "--start-age"),
                    (self.sex.is_some(), "--sex"),
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
        Ok(settings)
    }
}
