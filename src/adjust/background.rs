//! Background (general-population) mortality over a cohort's time since entry: a life table,
//! a start age and what to do beyond the table's last age.
//!
//! The hazard is constant within each year of age at -ln(1 - qx) (common practice), so the
//! cumulative hazard between two ages is a sum of exact pieces split at whole-year boundaries,
//! never an average over a cycle. A closing qx = 1 is the limit of that rule: an infinite
//! hazard from that age on, so survival drops to 0 on reaching it; it appears in outputs only
//! as a survival of 0 and an exit probability of 1, never as an infinity.

use super::lifetable::LifeTable;
use crate::curve::PiecewiseHazard;
use crate::error::{Error, Result};
use crate::units::TimeUnit;

/// What to do when the cohort outlives the life table.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum BeyondTable {
    /// Refuse any horizon past the table's last age.
    Error,
    /// Keep the last age's hazard for every later age.
    HoldLast,
}

impl BeyondTable {
    /// Name as written on the command line and in outputs.
    pub fn name(self) -> &'static str {
        match self {
            BeyondTable::Error => "error",
            BeyondTable::HoldLast => "hold-last",
        }
    }
}

/// Background hazard as a function of time since entry, in the time unit of the curve it
/// is combined with.
#[derive(Debug, Clone)]
pub struct BackgroundHazard {
    /// The validated table.
    pub table: LifeTable,
    /// Age at entry (years; may be fractional).
    pub start_age: f64,
    /// Policy beyond the table's last age.
    pub beyond: BeyondTable,
    /// Time unit of `t` in the methods below.
    pub unit: TimeUnit,
    /// Years per unit of `unit`.
    years_per_unit: f64,
    /// Hazard per year for each age of the table (+∞ where qx = 1).
    hazards: Vec<f64>,
    /// Cumulative hazard from `first_age` to each whole age `first_age + i` (length = ages + 1;
    /// +∞ past a closing qx = 1).
    cumulative: Vec<f64>,
}

impl BackgroundHazard {
    /// Background hazard for a cohort entering at `start_age`; the start age must lie in the table.
    pub fn new(
        table: LifeTable,
        start_age: f64,
        beyond: BeyondTable,
        unit: TimeUnit,
    ) -> Result<Self> {
        let first = f64::from(table.first_age);
        if !start_age.is_finite() || start_age < first || start_age >= table.end_age() {
            return Err(Error::Usage(format!(
                "--start-age {start_age} is outside the life table {} (ages {} to {}, each row covering one year)",
                table.file,
                table.first_age,
                table.end_age() - 1.0
            )));
        }
        let hazards = table.hazards();
        let mut cumulative = Vec::with_capacity(hazards.len() + 1);
        cumulative.push(0.0);
        for h in &hazards {
            cumulative.push(cumulative.last().unwrap() + h);
        }
        Ok(BackgroundHazard {
            years_per_unit: unit.factor_to(TimeUnit::Years),
            table,
            start_age,
            beyond,
            unit,
            hazards,
            cumulative,
        })
    }

    /// Age in years at time `t` since entry.
    pub fn age_at(&self, t: f64) -> f64 {
        self.start_age + t * self.years_per_unit
    }

    /// Time since entry at which the cohort reaches `age`.
    pub fn time_at_age(&self, age: f64) -> f64 {
        (age - self.start_age) / self.years_per_unit
    }

    /// Hazard per year at `age` (held at the last age's value beyond the table).
    pub fn hazard_per_year_at_age(&self, age: f64) -> f64 {
        let index = (age - f64::from(self.table.first_age)).floor().max(0.0) as usize;
        self.hazards[index.min(self.hazards.len() - 1)]
    }

    /// Hazard at time `t` since entry, per unit of [`BackgroundHazard::unit`].
    pub fn hazard(&self, t: f64) -> f64 {
        self.hazard_per_year_at_age(self.age_at(t)) * self.years_per_unit
    }

    /// Cumulative hazard from the table's first age to `age` (exact, piecewise; may be +∞).
    fn cumulative_to_age(&self, age: f64) -> f64 {
        let offset = (age - f64::from(self.table.first_age)).max(0.0);
        let last = self.hazards.len();
        let whole = offset.floor() as usize;
        if whole >= last {
            let beyond = offset - last as f64;
            let tail = if beyond > 0.0 {
                self.hazards[last - 1] * beyond
            } else {
                0.0
            };
            return self.cumulative[last] + tail;
        }
        let part = offset - whole as f64;
        let h = self.hazards[whole];
        // An infinite hazard contributes nothing over a zero-length piece (age exactly at the boundary).
        let within = if part > 0.0 { h * part } else { 0.0 };
        self.cumulative[whole] + within
    }

    /// Cumulative background hazard between ages `a0` ≤ `a1` (exact; +∞ once a closing qx = 1 is
    /// reached, never NaN).
    pub fn cumulative_between_ages(&self, a0: f64, a1: f64) -> f64 {
        if a1 <= a0 {
            return 0.0;
        }
        let upper = self.cumulative_to_age(a1);
        if upper == f64::INFINITY {
            return f64::INFINITY;
        }
        upper - self.cumulative_to_age(a0)
    }

    /// Cumulative background hazard over [t0, t1] since entry.
    pub fn cumulative(&self, t0: f64, t1: f64) -> f64 {
        self.cumulative_between_ages(self.age_at(t0), self.age_at(t1))
    }

    /// Times in (t0, t1) at which the age crosses a whole year (where the hazard may jump).
    pub fn breakpoints(&self, t0: f64, t1: f64) -> Vec<f64> {
        let (a0, a1) = (self.age_at(t0), self.age_at(t1));
        let mut points = Vec::new();
        let mut age = a0.floor() + 1.0;
        while age < a1 {
            points.push(self.time_at_age(age));
            age += 1.0;
        }
        points
    }

    /// The hazard as constant pieces from entry to `until` (a cut at each birthday in between;
    /// the last piece's rate continues past `until`), rates per unit of [`BackgroundHazard::unit`]
    /// (+∞ from a closing qx = 1). Each year's rate is read by age, not by a time that rounding
    /// could put just before its birthday.
    pub fn piecewise(&self, until: f64) -> PiecewiseHazard {
        let cuts = self.breakpoints(0.0, until);
        let first_birthday = self.start_age.floor() + 1.0;
        let rates = std::iter::once(self.start_age)
            .chain((0..cuts.len()).map(|i| first_birthday + i as f64))
            .map(|age| self.hazard_per_year_at_age(age) * self.years_per_unit)
            .collect();
        PiecewiseHazard {
            cuts,
            rates,
            unit: self.unit,
        }
    }

    /// Checks that the background covers times up to `t_end`: fine with `hold-last`, or when the
    /// table closes with qx = 1; otherwise the last age reached must lie within the table.
    pub fn check_covers(&self, t_end: f64) -> Result<()> {
        let reached = self.age_at(t_end);
        if self.beyond == BeyondTable::HoldLast
            || self.table.closes_with_certain_death()
            || reached <= self.table.end_age()
        {
            return Ok(());
        }
        Err(Error::Usage(format!(
            "starting at age {} the cohort reaches age {} by time {t_end} {}, beyond the life table {} (last age {}); extend the table or add --beyond-table hold-last",
            self.start_age,
            crate::format::sig(reached, 4),
            self.unit,
            self.table.file,
            self.table.end_age() - 1.0
        )))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::adjust::lifetable::parse;

    fn table(text: &str) -> LifeTable {
        parse("life.csv", text.as_bytes(), None).unwrap()
    }

    #[test]
    fn cycle_probability_is_one_minus_survival_power() {
        // Constant hazard over a year: P(death within Δ years) = 1 - (1 - qx)^Δ (common practice).
        let t = table("age,qx\n70,0.03\n71,0.04\n72,0.05\n");
        let bg = BackgroundHazard::new(t, 70.25, BeyondTable::Error, TimeUnit::Months).unwrap();
        // Three months within age 70.
        let p = -(-bg.cumulative(0.0, 3.0)).exp_m1();
        assert!((p - (1.0 - 0.97f64.powf(0.25))).abs() < 1e-14);
        // A cycle crossing the birthday at 71: nine months at 0.03 then three at 0.04.
        let p = -(-bg.cumulative(0.0, 12.0)).exp_m1();
        let expected = 1.0 - 0.97f64.powf(0.75) * 0.96f64.powf(0.25);
        assert!((p - expected).abs() < 1e-14, "{p} vs {expected}");
        assert_eq!(bg.breakpoints(0.0, 24.0).len(), 2);
    }

    #[test]
    fn closing_certain_death_gives_infinite_hazard_but_no_nan() {
        let t = table("age,qx\n99,0.4\n100,1\n");
        let bg = BackgroundHazard::new(t, 99.5, BeyondTable::Error, TimeUnit::Years).unwrap();
        let before = bg.cumulative(0.0, 0.5);
        assert!((before - 0.5 * -(0.6f64.ln())).abs() < 1e-15);
        assert_eq!(bg.cumulative(0.0, 0.75), f64::INFINITY);
        assert_eq!(bg.cumulative(0.75, 3.0), f64::INFINITY);
        assert!(bg.check_covers(50.0).is_ok());
    }

    #[test]
    fn refuses_start_age_and_horizon_outside_the_table() {
        let t = table("age,qx\n60,0.01\n61,0.02\n");
        assert!(
            BackgroundHazard::new(t.clone(), 59.9, BeyondTable::Error, TimeUnit::Years).is_err()
        );
        assert!(
            BackgroundHazard::new(t.clone(), 62.0, BeyondTable::Error, TimeUnit::Years).is_err()
        );
        let bg =
            BackgroundHazard::new(t.clone(), 60.5, BeyondTable::Error, TimeUnit::Years).unwrap();
        assert!(bg.check_covers(1.5).is_ok());
        assert!(bg.check_covers(1.6).is_err());
        let held = BackgroundHazard::new(t, 60.5, BeyondTable::HoldLast, TimeUnit::Years).unwrap();
        assert!(held.check_covers(100.0).is_ok());
        // Beyond the table the last hazard is held: two more years at -ln(0.98).
        let extra = held.cumulative(1.5, 3.5);
        assert!((extra - 2.0 * -(0.98f64.ln())).abs() < 1e-14);
    }
}
