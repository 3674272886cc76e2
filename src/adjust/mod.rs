//! Adjusting a fitted or published curve before it is discretised: a relative treatment effect
//! (hazard ratio, acceleration factor, waning hazard ratio) and background mortality from a
//! life table (added as a competing cause, or as a floor under an all-cause hazard).
//!
//! The order is fixed: the treatment effect acts on the reference curve, then background
//! mortality is combined with the treated curve. [`apply`] checks the settings, builds the
//! adjusted curve and returns it with its warnings and the metadata every output records.
//! Conventions and exactness are described in `docs/adjustments.md`.

pub mod add;
pub mod background;
pub mod effects;
pub mod floor;
pub mod lifetable;
pub mod plausible;

use crate::curve::{Curve, ParametricCurve};
use crate::error::{Error, Result};
use crate::units::{Duration, TimeUnit};
use add::AddedCurve;
use background::{BackgroundHazard, BeyondTable};
use effects::{AccelerationCurve, HazardRatioCurve, WaningCurve};
use floor::FlooredCurve;
use lifetable::{LifeTable, Sex};
use std::path::PathBuf;

/// How background mortality is combined with the curve.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum BackgroundMode {
    /// The curve is disease-specific: hazards add (two competing causes).
    Add,
    /// The curve is all-cause: its hazard is never below the background hazard.
    Floor,
}

impl BackgroundMode {
    /// Name as written on the command line and in outputs.
    pub fn name(self) -> &'static str {
        match self {
            BackgroundMode::Add => "add",
            BackgroundMode::Floor => "floor",
        }
    }
}

/// The waning window: the log hazard ratio moves linearly to 0 between `start` and `end`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Waning {
    /// Duration since entry at which waning begins (may be 0).
    pub start: Duration,
    /// Duration since entry from which the effect is gone.
    pub end: Duration,
}

impl std::fmt::Display for Waning {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}..{}", self.start, self.end)
    }
}

impl std::str::FromStr for Waning {
    type Err = String;

    /// Parses `START..END`, each a duration such as `"1 year"` (START may be `0`).
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        let Some((start, end)) = s.split_once("..") else {
            return Err(format!(
                "waning \"{}\" must be written START..END, e.g. \"1 year..3 years\"",
                s.trim()
            ));
        };
        let end: Duration = end.parse()?;
        let start_text = start.trim();
        // Duration parsing refuses 0, which is a natural START ("0..2 years", "0 months..2 years").
        let split = start_text
            .find(|c: char| c.is_ascii_alphabetic() && c != 'e' && c != 'E')
            .unwrap_or(start_text.len());
        let (number, unit) = start_text.split_at(split);
        let start = if number.trim().parse::<f64>() == Ok(0.0) {
            let unit = if unit.trim().is_empty() {
                end.unit
            } else {
                unit.parse()?
            };
            Duration { value: 0.0, unit }
        } else {
            start_text.parse()?
        };
        Ok(Waning { start, end })
    }
}

/// Background mortality settings as given on the command line (the table is read by [`apply`]).
#[derive(Debug, Clone, PartialEq)]
pub struct BackgroundSettings {
    /// Life table CSV.
    pub path: PathBuf,
    /// Age at entry in years (may be fractional).
    pub start_age: f64,
    /// Column of a two-sex table.
    pub sex: Option<Sex>,
    /// How background mortality is combined with the curve.
    pub mode: BackgroundMode,
    /// What to do beyond the table's last age.
    pub beyond: BeyondTable,
}

/// Every adjustment of a curve; the default adjusts nothing.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Adjustments {
    /// Hazard ratio X (cumulative hazard times X).
    pub hazard_ratio: Option<f64>,
    /// Acceleration factor X (survival at time t/X).
    pub acceleration_factor: Option<f64>,
    /// Waning of the hazard ratio.
    pub waning: Option<Waning>,
    /// Background mortality.
    pub background: Option<BackgroundSettings>,
}

impl Adjustments {
    /// Whether anything is adjusted.
    pub fn is_empty(&self) -> bool {
        *self == Adjustments::default()
    }

    /// Checks the option values and combinations (no file is read).
    pub fn validate(&self) -> Result<()> {
        let positive = |name: &str, x: Option<f64>| match x {
            Some(v) if !(v.is_finite() && v > 0.0) => Err(Error::Usage(format!(
                "--{name} must be a positive finite number, got {v}"
            ))),
            _ => Ok(()),
        };
        positive("hazard-ratio", self.hazard_ratio)?;
        positive("acceleration-factor", self.acceleration_factor)?;
        if self.hazard_ratio.is_some() && self.acceleration_factor.is_some() {
            return Err(Error::Usage(
                "give either --hazard-ratio or --acceleration-factor, not both (they assume different models of the treatment effect)".into(),
            ));
        }
        if let Some(w) = &self.waning {
            if self.hazard_ratio.is_none() {
                return Err(Error::Usage(
                    "--waning needs --hazard-ratio (it moves the log hazard ratio to 0)".into(),
                ));
            }
            let (start, end) = (
                w.start.in_unit(TimeUnit::Days),
                w.end.in_unit(TimeUnit::Days),
            );
            if start >= end {
                return Err(Error::Usage(format!(
                    "--waning {w}: START must be shorter than END"
                )));
            }
        }
        if let Some(b) = &self.background {
            if !b.start_age.is_finite() || b.start_age < 0.0 {
                return Err(Error::Usage(format!(
                    "--start-age must be a non-negative number of years, got {}",
                    b.start_age
                )));
            }
            if b.start_age > plausible::START_AGE_POSSIBLE {
                return Err(Error::Usage(format!(
                    "--start-age {} is impossible: nobody is known to have lived past {} years",
                    b.start_age,
                    plausible::START_AGE_POSSIBLE
                )));
            }
        }
        Ok(())
    }
}

/// The final curve: the treated curve alone, or combined with background mortality.
enum Combined {
    Alone(Box<dyn Curve>),
    Added(AddedCurve),
    Floored(FlooredCurve),
}

/// An adjusted curve with the warnings raised while building it and the settings to record.
pub struct AdjustedCurve {
    combined: Combined,
    /// Warnings that did not stop the computation (print to stderr and record in outputs).
    pub warnings: Vec<String>,
    /// Adjustment settings as ordered key–value pairs for output metadata.
    pub metadata: Vec<(String, String)>,
    /// The settings the curve was built with (to rebuild it on another base curve).
    settings: Adjustments,
}

impl AdjustedCurve {
    fn inner(&self) -> &dyn Curve {
        match &self.combined {
            Combined::Alone(c) => c.as_ref(),
            Combined::Added(c) => c,
            Combined::Floored(c) => c,
        }
    }

    /// The same adjustments on another base curve (e.g. a parameter draw), reusing the life
    /// table already read and checked.
    pub fn rebuild(&self, base: ParametricCurve) -> Result<AdjustedCurve> {
        build(
            base,
            &self.settings,
            self.background().map(|b| b.table.clone()),
        )
    }

    /// The background hazard, when there is one.
    pub fn background(&self) -> Option<&BackgroundHazard> {
        match &self.combined {
            Combined::Alone(_) => None,
            Combined::Added(c) => Some(&c.background),
            Combined::Floored(c) => Some(&c.background),
        }
    }

    /// Checks that the life table covers the cohort up to `t_end` (curve's time unit); call it
    /// with the last time a command will evaluate, before computing.
    pub fn check_horizon(&self, t_end: f64) -> Result<()> {
        match self.background() {
            Some(b) => b.check_covers(t_end),
            None => Ok(()),
        }
    }

    /// For the floor mode: metadata saying where the floor binds among `count` cycles of
    /// length `cycle` (curve's time unit): the tunnels affected and the age at which it first binds.
    pub fn floor_report(&self, cycle: f64, count: usize) -> Vec<(String, String)> {
        let Combined::Floored(floored) = &self.combined else {
            return Vec::new();
        };
        let binding: Vec<usize> = (1..=count)
            .filter(|k| floored.binding_time((k - 1) as f64 * cycle, *k as f64 * cycle) > 0.0)
            .collect();
        let first = floored.first_binding(count as f64 * cycle);
        vec![
            (
                "floor_binds_in_tunnels".into(),
                if binding.is_empty() {
                    "none".into()
                } else {
                    ranges(&binding)
                },
            ),
            (
                "floor_first_binds_at_age".into(),
                match first {
                    Some(t) => format!("{}", round_age(floored.background.age_at(t))),
                    None => "never within the table".into(),
                },
            ),
        ]
    }
}

/// Age rounded to 4 decimals (about an hour), for reports.
fn round_age(age: f64) -> f64 {
    (age * 1e4).round() / 1e4
}

/// Compact list of 1-based indices, e.g. `3, 5–9`.
fn ranges(values: &[usize]) -> String {
    let mut parts = Vec::new();
    let mut i = 0;
    while i < values.len() {
        let mut j = i;
        while j + 1 < values.len() && values[j + 1] == values[j] + 1 {
            j += 1;
        }
        parts.push(if i == j {
            values[i].to_string()
        } else {
            format!("{}–{}", values[i], values[j])
        });
        i = j + 1;
    }
    parts.join(", ")
}

impl Curve for AdjustedCurve {
    fn log_survival(&self, t: f64) -> f64 {
        self.inner().log_survival(t)
    }
    fn hazard(&self, t: f64) -> f64 {
        self.inner().hazard(t)
    }
    fn time_unit(&self) -> TimeUnit {
        self.inner().time_unit()
    }
    fn exit_by_cause(&self, t0: f64, t1: f64) -> Option<Vec<(&'static str, f64)>> {
        self.inner().exit_by_cause(t0, t1)
    }
    fn cycle_columns(&self, t0: f64, t1: f64) -> Vec<(&'static str, f64)> {
        self.inner().cycle_columns(t0, t1)
    }
    fn describe(&self) -> String {
        self.inner().describe()
    }
    fn restricted_mean(&self, horizon: f64) -> f64 {
        self.inner().restricted_mean(horizon)
    }
}

/// Checks `adjustments`, reads the life table if any, and builds the adjusted curve.
pub fn apply(base: ParametricCurve, adjustments: &Adjustments) -> Result<AdjustedCurve> {
    adjustments.validate()?;
    let table = match &adjustments.background {
        Some(b) => Some(lifetable::load(&b.path, b.sex)?),
        None => None,
    };
    build(base, adjustments, table)
}

/// Builds the adjusted curve from checked settings and an already-read life table.
pub fn build(
    base: ParametricCurve,
    adjustments: &Adjustments,
    table: Option<LifeTable>,
) -> Result<AdjustedCurve> {
    adjustments.validate()?;
    let family = base.family;
    let unit = base.unit;
    let mut warnings = plausible::effect_warnings(adjustments);
    let mut metadata = Vec::new();
    let mut curve: Box<dyn Curve> = Box::new(base);
    if let Some(ratio) = adjustments.hazard_ratio {
        if !family.proportional_hazards() {
            warnings.push(format!(
                "a hazard ratio was applied to the {} family, which is not a proportional-hazards family: the treated curve is no longer {} (computed anyway)",
                family.name(),
                family.name()
            ));
        }
        metadata.push(("hazard_ratio".into(), ratio.to_string()));
        curve = match adjustments.waning {
            Some(w) => {
                metadata.push(("waning".into(), w.to_string()));
                Box::new(WaningCurve::new(
                    curve,
                    ratio,
                    w.start.in_unit(unit),
                    w.end.in_unit(unit),
                    w.to_string(),
                ))
            }
            None => Box::new(HazardRatioCurve { base: curve, ratio }),
        };
    }
    if let Some(factor) = adjustments.acceleration_factor {
        if !family.accelerated_failure_time() {
            warnings.push(format!(
                "an acceleration factor was applied to the {} family, which is not an accelerated-failure-time family: the treated curve is no longer {} (computed anyway)",
                family.name(),
                family.name()
            ));
        }
        metadata.push(("acceleration_factor".into(), factor.to_string()));
        curve = Box::new(AccelerationCurve {
            base: curve,
            factor,
        });
    }
    let combined = match (&adjustments.background, table) {
        (Some(settings), Some(table)) => {
            warnings.extend(plausible::start_age_warnings(settings.start_age));
            warnings.extend(plausible::life_table_warnings(&table));
            metadata.extend([
                ("background_table".to_string(), table.file.clone()),
                ("background_sha256".to_string(), table.sha256.clone()),
                ("background_column".to_string(), table.column.clone()),
                ("start_age".to_string(), settings.start_age.to_string()),
                (
                    "background_mode".to_string(),
                    settings.mode.name().to_string(),
                ),
                (
                    "beyond_table".to_string(),
                    settings.beyond.name().to_string(),
                ),
            ]);
            let background =
                BackgroundHazard::new(table, settings.start_age, settings.beyond, unit)?;
            match settings.mode {
                BackgroundMode::Add => Combined::Added(AddedCurve {
                    disease: curve,
                    background,
                }),
                BackgroundMode::Floor => Combined::Floored(FlooredCurve::new(curve, background)),
            }
        }
        (Some(settings), None) => {
            return Err(Error::Usage(format!(
                "the life table {} was not read",
                settings.path.display()
            )))
        }
        (None, _) => Combined::Alone(curve),
    };
    Ok(AdjustedCurve {
        combined,
        warnings,
        metadata,
        settings: adjustments.clone(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::families::{Gompertz, LogNormal, Weibull};

    fn weibull() -> ParametricCurve {
        ParametricCurve::new(&Weibull, vec![1.2, 30.0], TimeUnit::Months).unwrap()
    }

    #[test]
    fn refuses_bad_combinations_and_values() {
        let err = |a: Adjustments| build(weibull(), &a, None).err().unwrap().to_string();
        assert!(err(Adjustments {
            hazard_ratio: Some(0.7),
            acceleration_factor: Some(1.2),
            ..Default::default()
        })
        .contains("not both"));
        for bad in [0.0, -0.5, f64::NAN, f64::INFINITY] {
            assert!(err(Adjustments {
                hazard_ratio: Some(bad),
                ..Default::default()
            })
            .contains("--hazard-ratio"));
        }
        let waning = |s: &str| s.parse::<Waning>().unwrap();
        assert!(err(Adjustments {
            hazard_ratio: Some(0.7),
            waning: Some(waning("2 years..12 months")),
            ..Default::default()
        })
        .contains("START must be shorter than END"));
        assert!(err(Adjustments {
            waning: Some(waning("0..1 year")),
            ..Default::default()
        })
        .contains("needs --hazard-ratio"));
    }

    #[test]
    fn parses_waning_windows() {
        let w: Waning = "0..2 years".parse().unwrap();
        assert_eq!(w.start.value, 0.0);
        assert_eq!(w.end.in_unit(TimeUnit::Months), 24.0);
        let w: Waning = " 6 months .. 3 years ".parse().unwrap();
        assert_eq!(w.start.in_unit(TimeUnit::Months), 6.0);
        assert!("6 months-2 years".parse::<Waning>().is_err());
        assert!("6 months..".parse::<Waning>().is_err());
        assert!("-1 months..2 years".parse::<Waning>().is_err());
    }

    #[test]
    fn warns_outside_the_proportional_or_accelerated_families_and_still_computes() {
        let lognormal = ParametricCurve::new(&LogNormal, vec![3.0, 1.0], TimeUnit::Months).unwrap();
        let adjusted = build(
            lognormal.clone(),
            &Adjustments {
                hazard_ratio: Some(0.5),
                ..Default::default()
            },
            None,
        )
        .unwrap();
        assert_eq!(adjusted.warnings.len(), 1);
        assert!(adjusted.warnings[0].contains("lognormal"));
        // Still S^X (the definition of the hazard ratio).
        let t = 17.0;
        assert!((adjusted.log_survival(t) - 0.5 * lognormal.log_survival(t)).abs() < 1e-15);
        let gompertz = ParametricCurve::new(&Gompertz, vec![0.05, 0.02], TimeUnit::Months).unwrap();
        let adjusted = build(
            gompertz,
            &Adjustments {
                acceleration_factor: Some(1.5),
                ..Default::default()
            },
            None,
        )
        .unwrap();
        assert!(adjusted.warnings[0].contains("accelerated-failure-time"));
        let quiet = build(
            weibull(),
            &Adjustments {
                hazard_ratio: Some(0.5),
                ..Default::default()
            },
            None,
        )
        .unwrap();
        assert!(quiet.warnings.is_empty());
    }

    #[test]
    fn rebuild_on_a_draw_equals_a_fresh_build() {
        // Rebuilding must give exactly what building from scratch gives (consistency, common practice).
        let table =
            lifetable::parse("life.csv", b"age,qx\n60,0.02\n61,0.03\n62,0.05\n", None).unwrap();
        let settings = Adjustments {
            hazard_ratio: Some(0.8),
            waning: Some("3 months..1 year".parse().unwrap()),
            background: Some(BackgroundSettings {
                path: "life.csv".into(),
                start_age: 60.5,
                sex: None,
                mode: BackgroundMode::Add,
                beyond: BeyondTable::HoldLast,
            }),
            ..Default::default()
        };
        let adjusted = build(weibull(), &settings, Some(table.clone())).unwrap();
        let draw = ParametricCurve::new(&Weibull, vec![1.1, 26.0], TimeUnit::Months).unwrap();
        let rebuilt = adjusted.rebuild(draw.clone()).unwrap();
        let fresh = build(draw, &settings, Some(table)).unwrap();
        for t in [0.5, 6.0, 18.0, 40.0] {
            assert_eq!(rebuilt.log_survival(t), fresh.log_survival(t));
            assert_ne!(rebuilt.log_survival(t), adjusted.log_survival(t));
        }
        assert_eq!(rebuilt.metadata, fresh.metadata);
    }

    #[test]
    fn ranges_are_compact() {
        assert_eq!(ranges(&[3, 5, 6, 7, 9]), "3, 5–7, 9");
        assert_eq!(ranges(&[1]), "1");
    }
}
