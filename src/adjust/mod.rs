//! Adjusting a fitted or published curve before it is discretised: a relative treatment effect
//! (hazard ratio, acceleration factor, waning hazard ratio) and background mortality from a
//! life table (added as a competing cause, or as a floor under an all-cause hazard).
//!
//! The order is fixed: the treatment effect acts on the reference curve, then background
//! mortality is combined with the treated curve. An [`Adjuster`] holds the checked settings
//! with the life table read once; [`Adjuster::adjust`] is the one way from a parametric curve
//! to the curve every command works on (point estimate and every draw alike), returned with
//! its warnings and the metadata every output records.
//! Conventions and exactness are described in `docs/adjustments.md`.

pub mod add;
pub mod background;
pub mod effects;
pub mod floor;
pub mod lifetable;
pub mod plausible;

use crate::curve::{Curve, ParametricCurve};
use crate::error::{Error, Result};
use crate::export::number_text;
use crate::families::Family;
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
}

impl AdjustedCurve {
    fn inner(&self) -> &dyn Curve {
        match &self.combined {
            Combined::Alone(c) => c.as_ref(),
            Combined::Added(c) => c,
            Combined::Floored(c) => c,
        }
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

    /// For the floor mode: metadata saying where the floor changes p_exit materially among
    /// `count` cycles of length `cycle` (curve's time unit), by how much at most, and the age
    /// at which it first binds in the first such tunnel. A tunnel counts when the floor raises
    /// its p_exit by at least [`FLOOR_MATERIAL`] relative to the curve alone; a floor that
    /// binds for a sliver of a cycle (a hazard rising from 0 at entry) does not.
    pub fn floor_report(&self, cycle: f64, count: usize) -> Vec<(String, String)> {
        let Combined::Floored(floored) = &self.combined else {
            return Vec::new();
        };
        let changes = floor_changes(floored, cycle, count);
        let material: Vec<usize> = changes
            .iter()
            .filter(|c| c.relative >= FLOOR_MATERIAL)
            .map(|c| c.tunnel)
            .collect();
        let largest = changes
            .iter()
            .filter(|c| c.relative > 0.0)
            .max_by(|a, b| a.relative.total_cmp(&b.relative));
        let first_age = material.first().and_then(|k| {
            let from = (k - 1) as f64 * cycle;
            floored
                .first_binding_from(from, count as f64 * cycle)
                .map(|t| floored.background.age_at(t))
        });
        vec![
            (
                "floor_binds_in_tunnels".into(),
                if material.is_empty() {
                    "none".into()
                } else {
                    ranges(&material)
                },
            ),
            (
                "floor_largest_change".into(),
                match largest {
                    Some(c) => c.text(),
                    None => "none: the curve's hazard is at or above the background hazard throughout".into(),
                },
            ),
            (
                "floor_materiality".into(),
                format!(
                    "a tunnel counts when the floor raises its p_exit by at least {}% relative to the curve alone",
                    crate::format::readable(100.0 * FLOOR_MATERIAL)
                ),
            ),
            (
                "floor_first_binds_at_age".into(),
                match first_age {
                    Some(age) => format!("{}", round_age(age)),
                    None => format!(
                        "not material in tunnels 1–{count}"
                    ),
                },
            ),
        ]
    }
}

/// Smallest relative rise of a tunnel's p_exit, floored against the curve alone, reported as
/// the floor binding there (0.1%: well above rounding, well below any change a reviewer would
/// act on).
pub const FLOOR_MATERIAL: f64 = 1e-3;

/// What the floor does to one tunnel's exit probability.
#[derive(Debug, Clone, Copy, PartialEq)]
struct FloorChange {
    tunnel: usize,
    /// p_exit with the floor.
    floored: f64,
    /// p_exit of the curve alone.
    alone: f64,
    /// floored / alone - 1 (∞ when the curve alone has p_exit 0 and the floor does not).
    relative: f64,
}

impl FloorChange {
    fn text(&self) -> String {
        let what = if self.relative.is_finite() {
            format!("+{}%", crate::format::sig(100.0 * self.relative, 3))
        } else {
            "from 0".to_string()
        };
        format!(
            "{what} in tunnel {} (p_exit {} with the floor, {} without)",
            self.tunnel,
            crate::format::sig(self.floored, 6),
            crate::format::sig(self.alone, 6)
        )
    }
}

/// p_exit of every tunnel with the floor and of the curve alone; the change is 0 in a tunnel
/// where the floor does not bind at all (so that rounding is never reported as a change).
fn floor_changes(floored: &FlooredCurve, cycle: f64, count: usize) -> Vec<FloorChange> {
    let log_s = |curve: &dyn Curve| -> Vec<f64> {
        (0..=count)
            .map(|j| curve.log_survival(j as f64 * cycle))
            .collect()
    };
    let with = log_s(floored);
    let alone = log_s(floored.curve.as_ref());
    (1..=count)
        .map(|k| {
            let p = crate::discretise::exit_probability(with[k - 1], with[k]);
            let q = crate::discretise::exit_probability(alone[k - 1], alone[k]);
            let binds = floored.binding_time((k - 1) as f64 * cycle, k as f64 * cycle) > 0.0;
            let relative = if !binds {
                0.0
            } else if q > 0.0 {
                (p / q - 1.0).max(0.0)
            } else if p > 0.0 {
                f64::INFINITY
            } else {
                0.0
            };
            FloorChange {
                tunnel: k,
                floored: p,
                alone: q,
                relative,
            }
        })
        .collect()
}

/// Age rounded to 4 decimals (about an hour), for reports.
fn round_age(age: f64) -> f64 {
    (age * 1e4).round() / 1e4
}

/// Compact list of 1-based indices, e.g. `3, 5–9`.
pub(crate) fn ranges(values: &[usize]) -> String {
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
    fn survival(&self, t: f64) -> f64 {
        self.inner().survival(t)
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
    fn piecewise_hazard(&self, until: f64) -> Option<crate::curve::PiecewiseHazard> {
        self.inner().piecewise_hazard(until)
    }
}

/// Checked adjustment settings with the life table read once: [`Adjuster::adjust`] is the one
/// function from a parametric curve to the adjusted curve, used by `tunnels`, `horizon`, `draws`
/// (point estimate, every draw and every bootstrap refit) and `run`, so the paths cannot diverge.
#[derive(Clone, Default)]
pub struct Adjuster {
    settings: Adjustments,
    table: Option<LifeTable>,
}

impl Adjuster {
    /// Checks `settings` and keeps them with the life table already read (needed exactly when
    /// background mortality is asked for).
    pub fn new(settings: Adjustments, table: Option<LifeTable>) -> Result<Adjuster> {
        settings.validate()?;
        match (&settings.background, table) {
            (Some(b), None) => Err(Error::Usage(format!(
                "the life table {} was not read",
                b.path.display()
            ))),
            (None, Some(t)) => Err(Error::Computation(format!(
                "the life table {} was read but no background mortality was asked for",
                t.file
            ))),
            (_, table) => Ok(Adjuster { settings, table }),
        }
    }

    /// Checks `settings` and reads the life table, if any, from its path.
    pub fn load(settings: Adjustments) -> Result<Adjuster> {
        settings.validate()?;
        let table = match &settings.background {
            Some(b) => Some(lifetable::load(&b.path, b.sex)?),
            None => None,
        };
        Adjuster::new(settings, table)
    }

    /// The same adjustments for a cohort entering at `start_age` (years) instead: entry at a
    /// later model cycle (`tunnels --entry-cycles`). An error without background mortality, or
    /// when the age lies outside the life table.
    pub fn with_start_age(&self, start_age: f64) -> Result<Adjuster> {
        let mut settings = self.settings.clone();
        match settings.background.as_mut() {
            Some(b) => b.start_age = start_age,
            None => {
                return Err(Error::Usage(
                    "entry at a later age needs background mortality (--background LIFETABLE.csv --start-age A)".into(),
                ))
            }
        }
        Adjuster::new(settings, self.table.clone())
    }

    /// The settings.
    pub fn settings(&self) -> &Adjustments {
        &self.settings
    }

    /// Whether anything is adjusted.
    pub fn is_empty(&self) -> bool {
        self.settings.is_empty()
    }

    /// The adjusted curve of `base` (the parametric curve itself, behind the same type, when
    /// nothing is adjusted).
    pub fn adjust(&self, base: ParametricCurve) -> Result<AdjustedCurve> {
        build(base, &self.settings, self.table.clone())
    }

    /// The adjusted curve of any base curve (e.g. an arm's curve from a joint model across
    /// arms); `family` is the base's family, for the warnings on effects outside it.
    pub fn adjust_curve(
        &self,
        base: Box<dyn Curve>,
        family: &'static dyn Family,
    ) -> Result<AdjustedCurve> {
        build_curve(base, family, &self.settings, self.table.clone())
    }

    /// The adjusted curve of natural parameters `params` of `family` in `unit`: what an
    /// uncertainty draw or a bootstrap refit becomes (errors as text, for the draw's message).
    pub fn adjust_params(
        &self,
        family: &'static dyn Family,
        params: &[f64],
        unit: TimeUnit,
    ) -> std::result::Result<AdjustedCurve, String> {
        let base = ParametricCurve::new(family, params.to_vec(), unit)?;
        self.adjust(base).map_err(|e| e.to_string())
    }
}

/// Builds the adjusted curve from checked settings and an already-read life table.
fn build(
    base: ParametricCurve,
    adjustments: &Adjustments,
    table: Option<LifeTable>,
) -> Result<AdjustedCurve> {
    let family = base.family;
    build_curve(Box::new(base), family, adjustments, table)
}

/// [`build`] for any base curve of `family`.
fn build_curve(
    base: Box<dyn Curve>,
    family: &'static dyn Family,
    adjustments: &Adjustments,
    table: Option<LifeTable>,
) -> Result<AdjustedCurve> {
    adjustments.validate()?;
    let unit = base.time_unit();
    let mut warnings = plausible::effect_warnings(adjustments);
    let mut metadata = Vec::new();
    let mut curve: Box<dyn Curve> = base;
    if let Some(ratio) = adjustments.hazard_ratio {
        if !family.proportional_hazards() {
            warnings.push(format!(
                "a hazard ratio was applied to the {} family, which is not a proportional-hazards family: the treated curve is no longer {} (computed anyway)",
                family.name(),
                family.name()
            ));
        }
        metadata.push(("hazard_ratio".into(), number_text(ratio)));
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
        metadata.push(("acceleration_factor".into(), number_text(factor)));
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
                ("start_age".to_string(), number_text(settings.start_age)),
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
    fn each_draw_gets_its_own_adjusted_curve() {
        // A draw's adjusted curve is the adjusted curve of its own parameters: with a hazard
        // ratio X (no waning, no background) S = S0^X, so ln S = X·ln S0 at the draw's
        // parameters (the definition of a hazard ratio, common practice).
        let table =
            lifetable::parse("life.csv", b"age,qx\n60,0.02\n61,0.03\n62,0.05\n", None).unwrap();
        let background = BackgroundSettings {
            path: "life.csv".into(),
            start_age: 60.5,
            sex: None,
            mode: BackgroundMode::Add,
            beyond: BeyondTable::HoldLast,
        };
        let settings = Adjustments {
            hazard_ratio: Some(0.8),
            ..Default::default()
        };
        let adjuster = Adjuster::new(settings, None).unwrap();
        let point = adjuster.adjust(weibull()).unwrap();
        let drawn = adjuster
            .adjust_params(&Weibull, &[1.1, 26.0], TimeUnit::Months)
            .unwrap();
        let base = ParametricCurve::new(&Weibull, vec![1.1, 26.0], TimeUnit::Months).unwrap();
        for t in [0.5, 6.0, 18.0, 40.0] {
            let expected = 0.8 * base.log_survival(t);
            assert!((drawn.log_survival(t) - expected).abs() <= 1e-15 * expected.abs());
            assert_ne!(drawn.log_survival(t), point.log_survival(t));
        }
        assert_eq!(drawn.metadata, point.metadata);
        // Background mortality needs its life table, and a table needs background settings.
        let with_background = Adjustments {
            background: Some(background),
            ..Default::default()
        };
        assert!(Adjuster::new(with_background.clone(), None).is_err());
        assert!(Adjuster::new(Adjustments::default(), Some(table.clone())).is_err());
        let added = Adjuster::new(with_background, Some(table)).unwrap();
        assert!(added.adjust(weibull()).unwrap().background().is_some());
        // Nothing adjusted: the parametric curve itself.
        let plain = Adjuster::default().adjust(weibull()).unwrap();
        assert_eq!(plain.log_survival(17.0), weibull().log_survival(17.0));
        assert!(plain.metadata.is_empty() && plain.warnings.is_empty());
    }

    #[test]
    fn ranges_are_compact() {
        assert_eq!(ranges(&[3, 5, 6, 7, 9]), "3, 5–7, 9");
        assert_eq!(ranges(&[1]), "1");
    }
}
