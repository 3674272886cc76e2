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
        let steps = Tallies::new(records)
            .map(|t| {
                let (lower, upper) = log_log_interval(t.survival, t.greenwood);
                KmStep {
                    time: t.time,
                    at_risk: t.at_risk,
                    events: t.events,
                    censored: t.censored,
                    survival: t.survival,
                    std_err: t.survival * t.greenwood.sqrt(),
                    lower,
                    upper,
                }
            })
            .collect();
        KaplanMeier {
            steps,
            n: records.len(),
        }
    }

    /// The median and its interval of [`Self::from_records`]`(records)`, without a step per
    /// distinct time: limits are worked out at event times only, in parallel batches, and only
    /// until each is found (the upper limit only where S ≤ 0.5, since it is never below S).
    /// On a million records this is one pass of arithmetic instead of a million intervals.
    pub fn median_of(records: &[Record]) -> MedianEstimate {
        use rayon::prelude::*;
        const BATCH: usize = 1 << 15;
        let mut out = MedianEstimate {
            median: None,
            lower: None,
            upper: None,
        };
        // Time, S and the Greenwood sum at event times.
        let mut batch: Vec<(f64, f64, f64)> = Vec::with_capacity(BATCH);
        let mut tallies = Tallies::new(records).peekable();
        while tallies.peek().is_some() {
            batch.clear();
            batch.extend(
                tallies
                    .by_ref()
                    .filter(|t| t.events > 0)
                    .take(BATCH)
                    .map(|t| (t.time, t.survival, t.greenwood)),
            );
            let first = |pick: &(dyn Fn(f64, f64) -> bool + Sync)| {
                batch
                    .par_iter()
                    .find_first(|&&(_, s, g)| pick(s, g))
                    .map(|b| b.0)
            };
            out.median = out.median.or_else(|| first(&|s, _| s <= 0.5));
            out.lower = out
                .lower
                .or_else(|| first(&|s, g| log_log_interval(s, g).0 <= 0.5));
            out.upper = out
                .upper
                .or_else(|| first(&|s, g| s <= 0.5 && log_log_interval(s, g).1 <= 0.5));
            if out.upper.is_some() && out.lower.is_some() && out.median.is_some() {
                break;
            }
        }
        out
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

/// Counts and running estimates at one distinct time.
struct Tally {
    time: f64,
    at_risk: usize,
    events: usize,
    censored: usize,
    /// S just after `time`.
    survival: f64,
    /// Greenwood sum Σ d/(n(n-d)) up to `time`.
    greenwood: f64,
}

/// The distinct times of records sorted by time, with the product-limit estimate and the
/// Greenwood sum carried along.
struct Tallies<'a> {
    records: &'a [Record],
    i: usize,
    at_risk: usize,
    survival: f64,
    greenwood: f64,
}

impl<'a> Tallies<'a> {
    fn new(records: &'a [Record]) -> Self {
        Tallies {
            records,
            i: 0,
            at_risk: records.len(),
            survival: 1.0,
            greenwood: 0.0,
        }
    }
}

impl Iterator for Tallies<'_> {
    type Item = Tally;

    fn next(&mut self) -> Option<Tally> {
        let records = self.records;
        let time = records.get(self.i)?.time;
        let (mut events, mut censored) = (0, 0);
        while let Some(r) = records.get(self.i).filter(|r| r.time == time) {
            if r.event {
                events += 1;
            } else {
                censored += 1;
            }
            self.i += 1;
        }
        let at_risk = self.at_risk;
        if events > 0 {
            self.survival *= 1.0 - events as f64 / at_risk as f64;
            if events < at_risk {
                self.greenwood += events as f64 / (at_risk as f64 * (at_risk - events) as f64);
            }
        }
        self.at_risk -= events + censored;
        Some(Tally {
            time,
            at_risk,
            events,
            censored,
            survival: self.survival,
            greenwood: self.greenwood,
        })
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
        assert_eq!(KaplanMeier::median_of(&six_mp()), km.median());
    }

    #[test]
    fn median_without_steps_equals_the_median_of_the_steps() {
        // Seeded records (splitmix64, Steele, Lea and Flood 2014) with ties and heavy
        // censoring, some never reaching S = 0.5 and some with more event times than a batch,
        // so the limits cross in a later batch.
        let mut state = 7u64;
        let mut next = move || {
            state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
            let mut z = state;
            z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
            z ^ (z >> 31)
        };
        for (n, distinct, event_percent) in [
            (1, 1, 100),
            (5, 3, 50),
            (200, 40, 30),
            (200, 1000, 10),
            (3000, 50, 60),
            (200_000, 1 << 40, 70),
            (200_000, 1 << 40, 8),
        ] {
            let mut records: Vec<Record> = (0..n)
                .map(|_| Record {
                    time: 1.0 + (next() % distinct) as f64,
                    event: next() % 100 < event_percent,
                })
                .collect();
            records.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
            let full = KaplanMeier::from_records(&records).median();
            assert_eq!(
                KaplanMeier::median_of(&records),
                full,
                "n {n} events {event_percent}%"
            );
        }
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
