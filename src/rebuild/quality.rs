//! How well a rebuild reproduces what was published: the rebuilt Kaplan–Meier curve against the
//! digitised points, the rebuilt numbers at risk against the table, and the total events.

use super::{Point, RiskRow};
use crate::input::Record;
use crate::km::KaplanMeier;

/// Rebuilt against published numbers at risk at one table time.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AtRiskCheck {
    /// Risk-table time.
    pub time: f64,
    /// Published number at risk.
    pub published: u64,
    /// Rebuilt number at risk (patients whose time is at or after `time`).
    pub rebuilt: u64,
}

/// Fit-quality figures of one rebuilt arm.
#[derive(Debug, Clone, PartialEq)]
pub struct Quality {
    /// Largest absolute difference between the rebuilt curve and a digitised point.
    pub max_abs_diff: f64,
    /// Time of that largest difference.
    pub max_abs_at: f64,
    /// Mean absolute difference over the digitised points.
    pub mean_abs_diff: f64,
    /// Number of digitised points compared (after cleaning).
    pub points: usize,
    /// One check per risk-table row.
    pub at_risk: Vec<AtRiskCheck>,
    /// Rebuilt patients.
    pub patients: u64,
    /// Rebuilt events.
    pub events: u64,
    /// Total events given with `--events`, if any.
    pub events_given: Option<u64>,
}

/// Rebuilt curve value at `t` closest to `survival`, taking either side of a step at `t`: a
/// digitiser clicks both the top and the bottom corner of each drop, and each should be
/// compared with its own side.
pub fn closest_side(km: &KaplanMeier, t: f64, survival: f64) -> f64 {
    let after = km.survival_at(t);
    let idx = km.steps.partition_point(|s| s.time < t);
    let before = if idx == 0 {
        1.0
    } else {
        km.steps[idx - 1].survival
    };
    if (before - survival).abs() < (after - survival).abs() {
        before
    } else {
        after
    }
}

/// Compares a rebuild with the cleaned points, the risk table and the given total.
pub fn assess(
    points: &[Point],
    risk: &[RiskRow],
    records: &[Record],
    events_given: Option<u64>,
) -> Quality {
    let km = KaplanMeier::from_records(records);
    let mut max_abs_diff = 0.0;
    let mut max_abs_at = 0.0;
    let mut sum = 0.0;
    for p in points {
        let diff = (closest_side(&km, p.time, p.survival) - p.survival).abs();
        sum += diff;
        if diff > max_abs_diff {
            max_abs_diff = diff;
            max_abs_at = p.time;
        }
    }
    let at_risk = risk
        .iter()
        .map(|r| AtRiskCheck {
            time: r.time,
            published: r.at_risk,
            rebuilt: km.at_risk_at(r.time) as u64,
        })
        .collect();
    Quality {
        max_abs_diff,
        max_abs_at,
        mean_abs_diff: if points.is_empty() {
            0.0
        } else {
            sum / points.len() as f64
        },
        points: points.len(),
        at_risk,
        patients: records.len() as u64,
        events: records.iter().filter(|r| r.event).count() as u64,
        events_given,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn record(time: f64, event: bool) -> Record {
        Record { time, event }
    }

    #[test]
    fn points_are_compared_with_the_closer_side_of_a_step() {
        // Hand-made: 4 patients, events at 2 and 4 → S = 0.75 on [2, 4), 0.5 from 4.
        let records = vec![
            record(2.0, true),
            record(3.0, false),
            record(4.0, true),
            record(6.0, false),
        ];
        let points = [
            Point {
                time: 0.0,
                survival: 1.0,
            },
            // Top and bottom corners of the drop at 2: each matches its own side exactly.
            Point {
                time: 2.0,
                survival: 1.0,
            },
            Point {
                time: 2.0,
                survival: 0.75,
            },
            // 0.02 below the flat part at 3.
            Point {
                time: 3.0,
                survival: 0.73,
            },
        ];
        let risk = [
            RiskRow {
                time: 0.0,
                at_risk: 4,
                line: 2,
            },
            RiskRow {
                time: 3.0,
                at_risk: 3,
                line: 3,
            },
        ];
        let q = assess(&points, &risk, &records, Some(2));
        assert!((q.max_abs_diff - 0.02).abs() < 1e-12);
        assert_eq!(q.max_abs_at, 3.0);
        assert!((q.mean_abs_diff - 0.005).abs() < 1e-12);
        // At time 3: patients with time ≥ 3 are the censoring at 3 and the two later ones.
        assert_eq!(q.at_risk[1].rebuilt, 3);
        assert_eq!((q.patients, q.events), (4, 2));
    }
}
