//! Kaplan–Meier estimate with Greenwood variance, log-log 95% intervals, numbers at risk,
//! and the median with its interval.
//!
//! Conventions: censorings tied with events at the same time are counted at risk for those
//! events (common practice); the interval for S uses ln(-ln S) (Kalbfleisch and Prentice,
//! 2002, section 1.4); the median is the first time with S ≤ 0.5, and its interval inverts the
//! pointwise band (the first times the upper and lower limits fall to 0.5 or below).

use crate::input::Record;
use serde::{Deserialize, Serialize};

/// z for a two-sided 95% interval.
const Z95: f64 = 1.959_963_984_540_054;

/// The estimate just after one distinct time.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct KmStep {
    /// Distinct time (data's unit).
    pub time: f64,
    /// Number at risk just before `time`.
    pub at_risk: usize,
    /// Events at `time`.
    pub events: usize,
    /// Censorings at `time`.
    pub censored: usize,
    /// S just after `time`.
    pub survival: f64,
    /// Greenwood standard error of `survival`.
    pub std_err: f64,
    /// Lower 95% limit (log-log).
    pub lower: f64,
    /// Upper 95% limit (log-log).
    pub upper: f64,
}

/// Kaplan–Meier estimate over the distinct times of one arm.
#[derive(Debug, Clone)]
pub struct KaplanMeier {
    /// One step per distinct time (with events or censorings), in time order.
    pub steps: Vec<KmStep>,
    /// Number of subjects.
    pub n: usize,
}

/// Median survival with its 95% interval; `None` where not reached.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct MedianEstimate {
    /// First time with S ≤ 0.5.
    pub median: Option<f64>,
    /// First time with the band's lower limit ≤ 0.5.
    pub lower: Option<f64>,
    /// First time with the band's upper limit ≤ 0.5 (`None`: not reached).
    pub upper: Option<f64>,
}

impl KaplanMeier {
    /// Estimates from records sorted by time (as a validated dataset holds them).
    pub fn from_records(records: &[Record]) -> KaplanMeier {
        let n = records.len();
        let mut steps = Vec::new();
        let mut at_risk = n;
        let mut survival = 1.0;
        let mut greenwood = 0.0;
        let mut i = 0;
        while i < n {
            let time = records[i].time;
            let mut events = 0;
            let mut censored = 0;
            while i < n && records[i].time == time {
                if records[i].event {
                    events += 1;
                } else {
                    censored += 1;
                }
                i += 1;
            }
            if events > 0 {
                survival *= 1.0 - events as f64 / at_risk as f64;
                if events < at_risk {
                    greenwood += events as f64 / (at_risk as f64 * (at_risk - events) as f64);
                }
            }
            let std_err = survival * greenwood.sqrt();
            let (lower, upper) = log_log_interval(survival, greenwood);
            steps.push(KmStep {
                time,
                at_risk,
                events,
                censored,
                survival,
                std_err,
                lower,
                upper,
            });
            at_risk -= events + censored;
        }
        KaplanMeier { steps, n }
    }

    /// S(t): the estimate just after the last distinct time ≤ t (1 before the first).
    pub fn survival_at(&self, t: f64) -> f64 {
        let idx = self.steps.partition_point(|s| s.time <= t);
        if idx == 0 {
            1.0
        } else {
            self.steps[idx - 1].survival
        }
    }

    /// Number at risk at time t: subjects whose time is ≥ t.
    pub fn at_risk_at(&self, t: f64) -> usize {
        let idx = self.steps.partition_point(|s| s.time < t);
        self.steps.get(idx).map(|s| s.at_risk).unwrap_or(0)
    }

    /// Median survival and its 95% interval.
    pub fn median(&self) -> MedianEstimate {
        let first = |pick: fn(&KmStep) -> f64| {
            self.steps
                .iter()
                .find(|s| s.events > 0 && pick(s) <= 0.5)
                .map(|s| s.time)
        };
        MedianEstimate {
            median: first(|s| s.survival),
            lower: first(|s| s.lower),
            upper: first(|s| s.upper),
        }
    }
}

/// Log-log 95% interval for S given the Greenwood sum Σ d/(n(n-d)).
fn log_log_interval(survival: f64, greenwood: f64) -> (f64, f64) {
    if survival <= 0.0 {
        return (0.0, 0.0);
    }
    if survival >= 1.0 || greenwood <= 0.0 {
        return (survival, survival);
    }
    let se = greenwood.sqrt() / survival.ln().abs();
    (
        survival.powf((Z95 * se).exp()),
        survival.powf((-Z95 * se).exp()),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    /// 6-MP arm of the leukaemia remission trial (Freireich et al., 1963), weeks; `false` = censored.
    pub fn six_mp() -> Vec<Record> {
        let raw = [
            (6.0, true),
            (6.0, true),
            (6.0, true),
            (6.0, false),
            (7.0, true),
            (9.0, false),
            (10.0, true),
            (10.0, false),
            (11.0, false),
            (13.0, true),
            (16.0, true),
            (17.0, false),
            (19.0, false),
            (20.0, false),
            (22.0, true),
            (23.0, true),
            (25.0, false),
            (32.0, false),
            (32.0, false),
            (34.0, false),
            (35.0, false),
        ];
        raw.iter()
            .map(|&(time, event)| Record { time, event })
            .collect()
    }

    #[test]
    fn six_mp_estimates_match_textbook_table() {
        // Kaplan–Meier estimates and Greenwood standard errors for the 6-MP arm as printed
        // (rounded to three decimals) in survival textbooks, e.g. Klein and Moeschberger (2003),
        // Table 4.1A — values from memory.
        let expected = [
            (6.0, 0.857, 0.076),
            (7.0, 0.807, 0.087),
            (10.0, 0.753, 0.096),
            (13.0, 0.690, 0.107),
            (16.0, 0.627, 0.114),
            (22.0, 0.538, 0.128),
            (23.0, 0.448, 0.135),
        ];
        let km = KaplanMeier::from_records(&six_mp());
        for (t, s, se) in expected {
            let step = km.steps.iter().find(|x| x.time == t).unwrap();
            assert!(
                (step.survival - s).abs() < 0.0005,
                "S({t}) = {}",
                step.survival
            );
            assert!(
                (step.std_err - se).abs() < 0.0005,
                "se({t}) = {}",
                step.std_err
            );
        }
        assert_eq!(km.at_risk_at(10.0), 15);
        assert_eq!(km.at_risk_at(0.0), 21);
        assert_eq!(km.at_risk_at(36.0), 0);
        // Median: first time with S ≤ 0.5 is week 23 (textbook, from memory).
        assert_eq!(km.median().median, Some(23.0));
    }

    #[test]
    fn exact_products_on_a_small_example() {
        // Hand computation: n = 4, deaths at 1 and 3, censoring at 2 → S = 3/4, then 3/4 · 1/2.
        let recs: Vec<Record> = [(1.0, true), (2.0, false), (3.0, true), (4.0, false)]
            .iter()
            .map(|&(time, event)| Record { time, event })
            .collect();
        let km = KaplanMeier::from_records(&recs);
        assert_eq!(km.survival_at(0.5), 1.0);
        assert_eq!(km.survival_at(1.0), 0.75);
        assert_eq!(km.survival_at(3.5), 0.375);
        // Greenwood: S² Σ d/(n(n-d)) = 0.375² (1/12 + 1/2).
        let se = 0.375 * (1.0f64 / 12.0 + 0.5).sqrt();
        assert!((km.steps[2].std_err - se).abs() < 1e-15);
    }
}
