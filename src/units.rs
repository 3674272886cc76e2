//! Time units and durations: parsing `"3 months"`, and exact conversion between units.
//!
//! A year is 365.25 days, a month a twelfth of a year, a week 7 days (interface contract).

use std::fmt;
use std::str::FromStr;

/// A unit of time in which data, curves and tables are expressed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum TimeUnit {
    Days,
    Weeks,
    Months,
    Years,
}

/// Every unit, in increasing length; used for parsing and suggestions.
pub const ALL_UNITS: [TimeUnit; 4] = [
    TimeUnit::Days,
    TimeUnit::Weeks,
    TimeUnit::Months,
    TimeUnit::Years,
];

impl TimeUnit {
    /// Length of one unit in days.
    pub fn days(self) -> f64 {
        match self {
            TimeUnit::Days => 1.0,
            TimeUnit::Weeks => 7.0,
            TimeUnit::Months => 365.25 / 12.0,
            TimeUnit::Years => 365.25,
        }
    }

    /// Plural name as written in tables and files.
    pub fn name(self) -> &'static str {
        match self {
            TimeUnit::Days => "days",
            TimeUnit::Weeks => "weeks",
            TimeUnit::Months => "months",
            TimeUnit::Years => "years",
        }
    }

    /// The unit's name to follow `value`: singular for exactly 1 ("1 month"), else plural.
    pub fn name_for(self, value: f64) -> &'static str {
        let plural = self.name();
        if value == 1.0 {
            &plural[..plural.len() - 1]
        } else {
            plural
        }
    }

    /// Factor c such that a time of 1 in `self` equals c in `to` (t_to = c · t_self).
    pub fn factor_to(self, to: TimeUnit) -> f64 {
        if self == to {
            1.0
        } else {
            self.days() / to.days()
        }
    }

    /// Converts a time (or duration) from this unit to another.
    pub fn convert(self, value: f64, to: TimeUnit) -> f64 {
        value * self.factor_to(to)
    }
}

impl fmt::Display for TimeUnit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for TimeUnit {
    type Err = String;

    /// Accepts plural and singular forms, any case; suggests the nearest unit on a typo.
    fn from_str(s: &str) -> Result<Self, String> {
        let lower = s.trim().to_ascii_lowercase();
        for unit in ALL_UNITS {
            let plural = unit.name();
            let singular = &plural[..plural.len() - 1];
            if lower == plural || lower == singular {
                return Ok(unit);
            }
        }
        let names: Vec<&str> = ALL_UNITS.iter().map(|u| u.name()).collect();
        match nearest(&lower, &names) {
            Some(best) => Err(format!(
                "unknown time unit \"{}\" (did you mean \"{best}\"? units: days, weeks, months, years)",
                crate::format::shown(s.trim())
            )),
            None => Err(format!(
                "unknown time unit \"{}\" (units: days, weeks, months, years)",
                crate::format::shown(s.trim())
            )),
        }
    }
}

/// A length of time with its unit, e.g. `3 months`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Duration {
    /// Amount, in `unit`.
    pub value: f64,
    /// Unit of `value`.
    pub unit: TimeUnit,
}

impl Duration {
    /// The duration expressed in another unit.
    pub fn in_unit(&self, unit: TimeUnit) -> f64 {
        self.unit.convert(self.value, unit)
    }
}

impl fmt::Display for Duration {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{} {}", self.value, self.unit.name_for(self.value))
    }
}

impl FromStr for Duration {
    type Err = String;

    /// Parses `"3 months"`, `"28 days"`, `"1 year"`, `"0.5years"`; the value must be finite and positive.
    fn from_str(s: &str) -> Result<Self, String> {
        let text = s.trim();
        let quoted = crate::format::shown(text);
        let split = text
            .find(|c: char| c.is_ascii_alphabetic() && c != 'e' && c != 'E')
            .or_else(|| {
                // A unit starting with 'e' does not exist, but "1e3 days" must keep its exponent.
                text.find(char::is_whitespace)
            });
        let Some(split) = split else {
            return Err(format!(
                "duration \"{quoted}\" has no unit (write e.g. \"3 months\" or \"28 days\")"
            ));
        };
        let (number, unit) = text.split_at(split);
        let number = number.trim();
        let value: f64 = number.parse().map_err(|_| {
            format!(
                "duration \"{quoted}\": \"{}\" is not a number (write e.g. \"3 months\")",
                crate::format::shown(number)
            )
        })?;
        if !value.is_finite() || value <= 0.0 {
            return Err(format!(
                "duration \"{quoted}\" must be a positive finite number of a unit"
            ));
        }
        let unit: TimeUnit = unit.parse()?;
        let duration = Duration { value, unit };
        // 1e308 years overflows in days, 5e-324 days underflows to 0 in years.
        if !ALL_UNITS.iter().all(|&u| {
            let v = duration.in_unit(u);
            v.is_finite() && v > 0.0
        }) {
            return Err(format!(
                "duration \"{quoted}\" is out of range (it must be positive and finite in every unit)"
            ));
        }
        Ok(duration)
    }
}

/// Levenshtein distance, for "did you mean" suggestions.
pub fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut row: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut prev = row[0];
        row[0] = i + 1;
        for (j, cb) in b.iter().enumerate() {
            let cur = row[j + 1];
            row[j + 1] = if ca == *cb {
                prev
            } else {
                1 + prev.min(row[j]).min(row[j + 1])
            };
            prev = cur;
        }
    }
    row[b.len()]
}

/// The candidate closest to `word` by edit distance, if it is reasonably close.
pub fn nearest<'a>(word: &str, candidates: &[&'a str]) -> Option<&'a str> {
    candidates
        .iter()
        .map(|c| (edit_distance(word, c), *c))
        .min()
        .filter(|(d, c)| *d <= 2.max(c.len() / 3))
        .map(|(_, c)| c)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_durations_in_every_unit() {
        let d: Duration = "3 months".parse().unwrap();
        assert_eq!(d.unit, TimeUnit::Months);
        assert_eq!(d.value, 3.0);
        let d: Duration = "28 days".parse().unwrap();
        assert_eq!(d.in_unit(TimeUnit::Weeks), 4.0);
        let d: Duration = "1 year".parse().unwrap();
        // Interface contract: a year is 365.25 days.
        assert_eq!(d.in_unit(TimeUnit::Days), 365.25);
        let d: Duration = "0.5years".parse().unwrap();
        assert_eq!(d.in_unit(TimeUnit::Months), 6.0);
        let d: Duration = "1e1 days".parse().unwrap();
        assert_eq!(d.value, 10.0);
    }

    #[test]
    fn durations_print_singular_for_one_and_read_back() {
        // English usage (common practice): "1 month", "0.5 months", "3 weeks".
        for (text, shown) in [
            ("1 month", "1 month"),
            ("1 years", "1 year"),
            ("0.5 month", "0.5 months"),
            ("3 week", "3 weeks"),
            ("1 days", "1 day"),
        ] {
            let d: Duration = text.parse().unwrap();
            assert_eq!(d.to_string(), shown);
            assert_eq!(shown.parse::<Duration>().unwrap(), d);
        }
    }

    #[test]
    fn rejects_bad_durations_with_suggestion() {
        assert!("3".parse::<Duration>().is_err());
        assert!("-1 days".parse::<Duration>().is_err());
        assert!("0 days".parse::<Duration>().is_err());
        assert!("nan days".parse::<Duration>().is_err());
        let err = "3 monhts".parse::<Duration>().unwrap_err();
        assert!(err.contains("did you mean \"months\""), "{err}");
    }

    #[test]
    fn durations_overflowing_or_underflowing_another_unit_are_refused() {
        // Found by the duration fuzz target's invariant (positive and finite in every unit).
        assert!("1e308 years".parse::<Duration>().is_err());
        assert!("5e-324 days".parse::<Duration>().is_err());
        assert!("1e300 years".parse::<Duration>().is_ok());
    }

    #[test]
    fn month_is_a_twelfth_of_a_year() {
        assert!((TimeUnit::Months.convert(12.0, TimeUnit::Years) - 1.0).abs() < 1e-15);
        assert!((TimeUnit::Years.convert(1.0, TimeUnit::Days) - 365.25).abs() < 1e-12);
    }
}
