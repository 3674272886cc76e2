//! Benchmark: 10,000 tunnel tables of 1,200 weekly cycles (about 23 years) each, from varying
//! Weibull, log-normal, log-logistic and Gompertz parameters. Run with
//! `cargo bench --bench tunnels`; results go to `docs/benchmarks.md` by hand.

use rayon::prelude::*;
use std::time::Instant;
use tunnelcast::curve::ParametricCurve;
use tunnelcast::discretise::tunnel_table;
use tunnelcast::families::{Gompertz, LogLogistic, LogNormal, Weibull};
use tunnelcast::units::{Duration, TimeUnit};

const TABLES: usize = 10_000;
const CYCLES: usize = 1_200;

/// CPU seconds used by this process so far (Linux `/proc/self/stat`, 100 ticks a second);
/// on a shared, loaded machine this is a steadier measure than wall-clock time.
fn cpu_seconds() -> f64 {
    let stat = std::fs::read_to_string("/proc/self/stat").unwrap_or_default();
    let after_name = stat.rsplit(')').next().unwrap_or("");
    let fields: Vec<&str> = after_name.split_whitespace().collect();
    let ticks = |i: usize| {
        fields
            .get(i)
            .and_then(|f| f.parse::<f64>().ok())
            .unwrap_or(f64::NAN)
    };
    // utime and stime are fields 14 and 15 of the line, 12 and 13 after the name.
    (ticks(11) + ticks(12)) / 100.0
}

/// The i-th curve: families in turn, parameters spread deterministically.
fn curve(i: usize) -> ParametricCurve {
    let u = (i as f64 * 0.618_033_988_75).fract();
    let unit = TimeUnit::Months;
    match i % 4 {
        0 => ParametricCurve::new(&Weibull, vec![0.5 + 2.0 * u, 10.0 + 100.0 * u], unit),
        1 => ParametricCurve::new(&LogNormal, vec![1.0 + 3.0 * u, 0.3 + 1.5 * u], unit),
        2 => ParametricCurve::new(&LogLogistic, vec![0.8 + 3.0 * u, 5.0 + 60.0 * u], unit),
        _ => ParametricCurve::new(&Gompertz, vec![-0.05 + 0.1 * u, 0.005 + 0.05 * u], unit),
    }
    .expect("benchmark parameters are in range")
}

fn main() {
    let cycle = Duration {
        value: 1.0,
        unit: TimeUnit::Weeks,
    };
    let curves: Vec<ParametricCurve> = (0..TABLES).map(curve).collect();
    // Warm-up, then the best of three runs of each variant.
    let checksum = |v: &[f64]| v.iter().sum::<f64>();
    let mut best_parallel = f64::INFINITY;
    let mut best_serial = f64::INFINITY;
    let mut best_serial_cpu = f64::INFINITY;
    let mut sums = Vec::new();
    for run in 0..4 {
        let start = Instant::now();
        let last: Vec<f64> = curves
            .par_iter()
            .map(|c| tunnel_table(c, cycle, CYCLES).rows[CYCLES - 1].p_exit)
            .collect();
        let parallel = start.elapsed().as_secs_f64();
        let start = Instant::now();
        let cpu = cpu_seconds();
        let serial_last: Vec<f64> = curves
            .iter()
            .map(|c| tunnel_table(c, cycle, CYCLES).rows[CYCLES - 1].p_exit)
            .collect();
        let serial = start.elapsed().as_secs_f64();
        let serial_cpu = cpu_seconds() - cpu;
        if run > 0 {
            best_parallel = best_parallel.min(parallel);
            best_serial = best_serial.min(serial);
            best_serial_cpu = best_serial_cpu.min(serial_cpu);
        }
        sums.push((checksum(&last), checksum(&serial_last)));
    }
    println!(
        "tunnel tables: {TABLES} x {CYCLES} weekly cycles; rayon threads: {}",
        rayon::current_num_threads()
    );
    println!("parallel (rayon), best of 3: {best_parallel:.3} s");
    println!("serial, best of 3:           {best_serial:.3} s wall, {best_serial_cpu:.2} s CPU");
    println!("checksum of last-tunnel p_exit: {:.12}", sums[0].0);
    for (k, name) in ["weibull", "lognormal", "loglogistic", "gompertz"]
        .iter()
        .enumerate()
    {
        let start = Instant::now();
        let n = curves
            .iter()
            .skip(k)
            .step_by(4)
            .map(|c| tunnel_table(c, cycle, CYCLES).rows.len())
            .sum::<usize>();
        println!(
            "  serial, {name} only ({} tables): {:.3} s",
            n / CYCLES,
            start.elapsed().as_secs_f64()
        );
    }
    assert!(
        sums.iter().all(|(a, b)| a == b),
        "results differ between runs"
    );
}
