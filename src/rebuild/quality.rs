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
