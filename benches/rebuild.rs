//! Benchmark of the rebuild (issue target: 2,000 digitised points, a 20-row risk table and
//! 1,000 patients in under 50 ms): reading and cleaning the points from CSV bytes, the
//! reconstruction, and the fit-quality figures, timed together over repeated runs.
//! Run: `cargo bench --bench rebuild`. Results are recorded in `docs/benchmarks.md`.

#[path = "../tests/common/mod.rs"]
mod common;

use std::time::Instant;
use tunnelcast::rebuild::{assess, read_curves, rebuild, RiskRow};

const POINTS: usize = 2000;
const RISK_ROWS: usize = 20;
const PATIENTS: usize = 1000;
const RUNS: usize = 200;

/// The invented benchmark figure as CSV text with exactly [`POINTS`] rows, and its risk table.
fn figure() -> (String, Vec<RiskRow>, u64) {
    let truth = common::weibull_trial(5, PATIENTS, 1.2, 10.0, 12.0, 36.0, 0.01);
    let events = truth.iter().filter(|r| r.event).count() as u64;
    let mut points = common::clean(&common::digitise(&truth, 6, 1.0, 0.003, 0.01));
    // Extra clicks along the flat parts, or fewer top corners, to reach exactly POINTS rows.
    let mut k = 0;
    while points.len() < POINTS {
        let (a, b) = (points[k], points[k + 1]);
        if b.time > a.time {
            points.insert(
                k + 1,
                tunnelcast::rebuild::Point {
                    time: 0.5 * (a.time + b.time),
                    survival: a.survival,
                },
            );
            k += 1;
        }
        k = (k + 1) % (points.len() - 1);
    }
    points.truncate(POINTS - 1);
    let last = truth.last().unwrap();
    points.push(tunnelcast::rebuild::Point {
        time: last.time,
        survival: points.last().unwrap().survival,
    });
    let mut text = String::from("time,survival\n");
    for p in &points {
        text.push_str(&format!("{},{}\n", p.time, p.survival));
    }
    let every = points.last().unwrap().time / RISK_ROWS as f64;
    let risk = (0..RISK_ROWS)
        .map(|i| {
            let time = i as f64 * every;
            RiskRow {
                time,
                at_risk: truth.iter().filter(|r| r.time >= time).count() as u64,
                line: 0,
            }
        })
        .collect();
    (text, risk, events)
}

fn main() {
    let (text, risk, events) = figure();
    let mut times = Vec::with_capacity(RUNS);
    let mut patients = 0;
    for _ in 0..RUNS {
        let start = Instant::now();
        let curve = read_curves("bench.csv", text.as_bytes(), None)
            .unwrap()
            .remove(0);
        let rebuilt = rebuild(&curve.points, &risk, Some(events)).unwrap();
        let quality = assess(&curve.points, &risk, &rebuilt.records, Some(events));
        times.push(start.elapsed().as_secs_f64() * 1e3);
        patients = quality.patients;
        assert_eq!(curve.points.len(), POINTS);
    }
    times.sort_by(f64::total_cmp);
    println!(
        "rebuild: {POINTS} points, {RISK_ROWS}-row risk table, {patients} patients, {RUNS} runs: \
         median {:.2} ms, 90th percentile {:.2} ms, max {:.2} ms (target < 50 ms)",
        times[RUNS / 2],
        times[RUNS * 9 / 10],
        times[RUNS - 1]
    );
}
