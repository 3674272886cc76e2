//! Plausible ranges for adjustment settings and life tables. A value outside them is used, but
//! with a warning (printed and recorded as `warning` in every output's metadata), because it is
//! far more often a slip (a percentage for a ratio, a table per 1,000 people) than a real
//! setting; only impossible values are refused, elsewhere (`Adjustments::validate`, the life
//! table reader). The ranges and their reasons are in `docs/adjustments.md`.

use super::lifetable::LifeTable;
use super::Adjustments;

/// Hazard ratios and acceleration factors from 1/10 to 10 are plausible: relative effects
/// outside that range are rarely reported for a treatment (common practice).
pub const EFFECT_RANGE: (f64, f64) = (0.1, 10.0);

/// Start ages above 100 years are implausible for a cohort entering a model (common practice).
pub const START_AGE_PLAUSIBLE: f64 = 100.0;

/// Start ages above 125 years are impossible: no person is documented to have lived to 123
/// (from memory).
pub const START_AGE_POSSIBLE: f64 = 125.0;

/// Below this age, a probability of death above [`QX_HIGH`] suggests a table in per cent.
pub const QX_HIGH_BEFORE_AGE: u32 = 90;

/// Annual probability of death above which a general-population table is implausible before
/// [`QX_HIGH_BEFORE_AGE`] (national period life tables reach 0.5 only past 100; common practice).
pub const QX_HIGH: f64 = 0.5;

/// Warnings on the treatment effect: a ratio or factor outside [`EFFECT_RANGE`].
pub fn effect_warnings(adjustments: &Adjustments) -> Vec<String> {
    let mut out = Vec::new();
    for (what, value) in [
        ("hazard ratio", adjustments.hazard_ratio),
        ("acceleration factor", adjustments.acceleration_factor),
    ] {
        let Some(x) = value else { continue };
        let (low, high) = EFFECT_RANGE;
        if (low..=high).contains(&x) {
            continue;
        }
        let hint = if x > high && x <= 100.0 {
            format!(
                "; if {x} is a percentage, write {}",
                crate::export::number_text(x / 100.0)
            )
        } else {
            String::new()
        };
        out.push(format!(
            "the {what} {x} is outside the plausible range {low} to {high} for a treatment effect{hint} (used as given)"
        ));
    }
    out
}

/// Warnings on the age at entry: above [`START_AGE_PLAUSIBLE`].
pub fn start_age_warnings(start_age: f64) -> Vec<String> {
    if start_age > START_AGE_PLAUSIBLE {
        vec![format!(
            "the start age {start_age} is above {START_AGE_PLAUSIBLE} years: is it the age in years at entry? (used as given)"
        )]
    } else {
        Vec::new()
    }
}

/// Warnings on a life table's probabilities: zeros after the first year of life (a decimal
/// comma shifted into another column reads as 0; no general population is free of death), and
/// values above [`QX_HIGH`] before [`QX_HIGH_BEFORE_AGE`] (a table in per cent).
pub fn life_table_warnings(table: &LifeTable) -> Vec<String> {
    let ages = |pick: &dyn Fn(u32, f64) -> bool| -> Vec<u32> {
        table
            .qx
            .iter()
            .enumerate()
            .map(|(i, &q)| (table.first_age + i as u32, q))
            .filter(|&(age, q)| pick(age, q))
            .map(|(age, _)| age)
            .collect()
    };
    let describe = |list: &[u32]| match list {
        [one] => format!("age {one}"),
        [first, .., last] => format!("{} ages from {first} to {last}", list.len()),
        [] => String::new(),
    };
    let mut out = Vec::new();
    let zero = ages(&|age, q| age >= 1 && q == 0.0);
    if !zero.is_empty() {
        out.push(format!(
            "{} ({}): {} is 0 at {}; no general population is free of death after infancy: check the decimal marks and columns (a decimal comma in a comma-separated file can shift a value into the next column) (used as given)",
            table.file,
            table.column,
            table.column,
            describe(&zero)
        ));
    }
    let high = ages(&|age, q| age < QX_HIGH_BEFORE_AGE && q > QX_HIGH && q < 1.0);
    if !high.is_empty() {
        out.push(format!(
            "{} ({}): {} is above {QX_HIGH} at {}, before age {QX_HIGH_BEFORE_AGE}: is the table in per cent? qx is a probability (0.004787, not 0.4787) (used as given)",
            table.file,
            table.column,
            table.column,
            describe(&high)
        ));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn table(first_age: u32, qx: Vec<f64>) -> LifeTable {
        LifeTable {
            file: "life.csv".into(),
            sha256: String::new(),
            column: "qx".into(),
            first_age,
            qx,
        }
    }

    #[test]
    fn effects_outside_one_tenth_to_ten_are_warned_about() {
        let warn = |hr: Option<f64>, af: Option<f64>| {
            effect_warnings(&Adjustments {
                hazard_ratio: hr,
                acceleration_factor: af,
                ..Default::default()
            })
        };
        assert!(warn(Some(0.75), None).is_empty());
        assert!(warn(Some(0.1), None).is_empty());
        assert!(warn(Some(10.0), None).is_empty());
        let w = warn(Some(75.0), None);
        assert_eq!(w.len(), 1);
        assert!(
            w[0].contains("hazard ratio 75") && w[0].contains("write 0.75"),
            "{w:?}"
        );
        let w = warn(None, Some(1e9));
        assert!(
            w[0].contains("acceleration factor 1000000000") && !w[0].contains("percentage"),
            "{w:?}"
        );
        assert_eq!(warn(Some(0.05), None).len(), 1);
    }

    #[test]
    fn start_ages_above_one_hundred_are_warned_about() {
        assert!(start_age_warnings(100.0).is_empty());
        assert!(start_age_warnings(101.5)[0].contains("start age 101.5"));
    }

    #[test]
    fn zero_and_per_cent_probabilities_are_warned_about() {
        // Infant mortality may be recorded as 0 in a small population: only ages 1 and up count.
        assert!(life_table_warnings(&table(0, vec![0.0, 0.001, 0.002])).is_empty());
        let w = life_table_warnings(&table(50, vec![0.0, 0.0, 0.0057]));
        assert_eq!(w.len(), 1);
        assert!(w[0].contains("qx is 0 at 2 ages from 50 to 51"), "{w:?}");
        let w = life_table_warnings(&table(52, vec![0.4787, 0.52, 0.56]));
        assert_eq!(w.len(), 1);
        assert!(w[0].contains("above 0.5 at 2 ages from 53 to 54"), "{w:?}");
        // A closing qx = 1 and old-age values above 0.5 are normal.
        assert!(life_table_warnings(&table(95, vec![0.3, 0.55, 1.0])).is_empty());
    }
}
