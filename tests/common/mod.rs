//! Seeded simulation helpers shared by the rebuild round-trip tests and the rebuild benchmark:
//! invented trials, their exact Kaplan–Meier curves and risk tables, and digitising-like points.
#![allow(dead_code)]

use tunnelcast::input::Record;
use tunnelcast::km::KaplanMeier;
use tunnelcast::rebuild::{read_curves, Point, RiskRow};

/// SplitMix64: a small, well-known seeded generator (Steele, Lea and Flood, 2014), enough for
/// reproducible test data without a dependency.
pub struct Rng(u64);

impl Rng {
    pub fn new(seed: u64) -> Rng {
        Rng(seed)
    }

    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform on (0, 1).
    pub fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
}

/// Records sorted as a validated data set holds them: by time, events first at a tie.
pub fn sorted(mut records: Vec<Record>) -> Vec<Record> {
    records.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
    records
}

/// An invented trial: Weibull(shape, scale) event times, uniform entry over `accrual` with a
/// cut-off at `cutoff`, exponential dropout at `dropout` per unit time; times rounded to 0.01.
pub fn weibull_trial(
    seed: u64,
    n: usize,
    shape: f64,
    scale: f64,
    accrual: f64,
    cutoff: f64,
    dropout: f64,
) -> Vec<Record> {
    let mut rng = Rng::new(seed);
    let records = (0..n)
        .map(|_| {
            let event = scale * (-rng.uniform().ln()).powf(1.0 / shape);
            let follow = cutoff - accrual * rng.uniform();
            let drop = -rng.uniform().ln() / dropout;
            let censor = follow.min(drop);
            let (t, e) = if event <= censor {
                (event, true)
            } else {
                (censor, false)
            };
            Record {
                time: ((t * 100.0).round() / 100.0).max(0.01),
                event: e,
            }
        })
        .collect();
    sorted(records)
}

/// The published risk table: numbers at risk (time ≥ t) every `every` units from 0 up to the
/// last follow-up time.
pub fn risk_table(records: &[Record], every: f64) -> Vec<RiskRow> {
    let last = records.last().map(|r| r.time).unwrap_or(0.0);
    let mut rows = Vec::new();
    let mut k = 0;
    loop {
        let time = k as f64 * every;
        if time > last {
            break;
        }
        rows.push(RiskRow {
            time,
            at_risk: records.iter().filter(|r| r.time >= time).count() as u64,
            line: 0,
        });
        k += 1;
    }
    rows
}

/// Digitising-like points of the exact Kaplan–Meier curve, as CSV text (`time,survival`):
/// the bottom corner of every step clicked (the method asks for a point at every step,
/// Guyot et al., 2012, from memory), the top corner with chance `click`, survival read with a
/// uniform error of ±`surv_noise`, time with ±`time_noise` (clicks still follow the curve from
/// left to right), and the end of follow-up clicked last.
pub fn digitise(
    records: &[Record],
    seed: u64,
    click: f64,
    surv_noise: f64,
    time_noise: f64,
) -> String {
    let mut rng = Rng::new(seed);
    let km = KaplanMeier::from_records(records);
    let mut points = vec![(0.0f64, 1.0f64)];
    let mut before = 1.0;
    for step in km.steps.iter().filter(|s| s.events > 0) {
        for (s, chance) in [(before, click), (step.survival, 1.0)] {
            if rng.uniform() < chance {
                let jitter = time_noise * (2.0 * rng.uniform() - 1.0);
                let t = (step.time + jitter).max(points.last().unwrap().0);
                let v = s + surv_noise * (2.0 * rng.uniform() - 1.0);
                points.push((t, v));
            }
        }
        before = step.survival;
    }
    points.push((records.last().unwrap().time, before));
    let mut text = String::from("time,survival\n");
    for (t, s) in points {
        text.push_str(&format!("{t},{s}\n"));
    }
    text
}

/// Digitising-like points of the exact Kaplan–Meier curve as a careful user clicks a printed
/// figure, as CSV text in clicking order: both corners of every drop (top, then bottom), each
/// click's time off by a uniform error of ±`time_jitter` on its own (so at a drop the top corner
/// lands after the bottom one about half the time), survival read to ±`surv_noise`, and the end
/// of follow-up clicked last.
pub fn digitise_jittered(
    records: &[Record],
    seed: u64,
    surv_noise: f64,
    time_jitter: f64,
) -> String {
    let mut rng = Rng::new(seed);
    let km = KaplanMeier::from_records(records);
    let mut text = String::from("time,survival\n0,1\n");
    let mut before = 1.0;
    for step in km.steps.iter().filter(|s| s.events > 0) {
        for s in [before, step.survival] {
            let t = (step.time + time_jitter * (2.0 * rng.uniform() - 1.0)).max(0.0);
            let v = s + surv_noise * (2.0 * rng.uniform() - 1.0);
            text.push_str(&format!("{t},{v}\n"));
        }
        before = step.survival;
    }
    text.push_str(&format!("{},{before}\n", records.last().unwrap().time));
    text
}

/// Whether the cleaning rule before the sideways tolerance would refuse `text`: sorted by time
/// (ties top first), some point lies more than `tolerance` above the lowest earlier one.
pub fn refused_without_sideways_tolerance(text: &str, tolerance: f64) -> bool {
    let mut pts: Vec<(f64, f64)> = text
        .lines()
        .skip(1)
        .map(|l| {
            let (t, s) = l.split_once(',').unwrap();
            (t.parse().unwrap(), s.parse().unwrap())
        })
        .collect();
    pts.sort_by(|a, b| a.0.total_cmp(&b.0).then(b.1.total_cmp(&a.1)));
    let mut lowest = f64::INFINITY;
    pts.iter().any(|&(_, s)| {
        let rise = s > lowest + tolerance;
        lowest = lowest.min(s);
        rise
    })
}

/// Digitised text read and cleaned by the tool's own reader.
pub fn clean(text: &str) -> Vec<Point> {
    read_curves("digitised.csv", text.as_bytes(), None)
        .expect("simulated points are valid")
        .remove(0)
        .points
}

/// Largest absolute difference between two Kaplan–Meier step functions, allowing each curve
/// to be read up to `time_error` earlier or later (the digitiser's reading error in time, which
/// no rebuild can undo): at each time t the other curve may take any value it has within
/// [t - time_error, t + time_error]. Both curves are constant between jumps, so the supremum is
/// reached at a jump time or just before one.
pub fn sup_distance(a: &KaplanMeier, b: &KaplanMeier, time_error: f64) -> f64 {
    sup_distance_until(a, b, time_error, f64::INFINITY)
}

/// [`sup_distance`] over the times up to `until` only (for a tail too thin to compare).
pub fn sup_distance_until(a: &KaplanMeier, b: &KaplanMeier, time_error: f64, until: f64) -> f64 {
    one_way(a, b, time_error, until).max(one_way(b, a, time_error, until))
}

fn one_way(a: &KaplanMeier, b: &KaplanMeier, time_error: f64, until: f64) -> f64 {
    let left_limit = |km: &KaplanMeier, t: f64| {
        let idx = km.steps.partition_point(|s| s.time < t);
        if idx == 0 {
            1.0
        } else {
            km.steps[idx - 1].survival
        }
    };
    let mut worst: f64 = 0.0;
    for t in a
        .steps
        .iter()
        .chain(&b.steps)
        .map(|s| s.time)
        .filter(|&t| t <= until)
    {
        for (value, at) in [(a.survival_at(t), t), (left_limit(a, t), t)] {
            // Values of b over the window around `at`, b being non-increasing.
            let high = if time_error > 0.0 {
                left_limit(b, at - time_error).max(b.survival_at(at - time_error))
            } else {
                b.survival_at(at).max(left_limit(b, at))
            };
            let low = b.survival_at(at + time_error);
            let distance = if value > high {
                value - high
            } else if value < low {
                low - value
            } else {
                0.0
            };
            worst = worst.max(distance);
        }
    }
    worst
}
