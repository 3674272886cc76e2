//! Benchmark of payoffs by time since entry (issue 16): (a) 3 payoffs on one table of 10,000
//! weekly tunnels, per family (quadrature for Weibull, log-normal, log-logistic, Gompertz,
//! generalized gamma; closed forms for the exponential); (b) the payoff columns of 1,000 draws
//! × 480 monthly tunnels (each draw its own Weibull curve, tunnel table plus 3 payoffs, draws
//! in parallel as `draws` computes them). Run with `cargo bench --bench payoffs`; results go to
//! `docs/benchmarks.md` by hand. The schedule is invented.

use rayon::prelude::*;
use std::time::Instant;
use tunnelcast::curve::ParametricCurve;
use tunnelcast::discretise::tunnel_table;
use tunnelcast::families;
use tunnelcast::payoff::{tunnel_payoffs, Discount, PayoffColumns, PayoffRow, Schedule};
use tunnelcast::units::{Duration, TimeUnit};

fn schedule() -> Schedule {
    let rows = [
        ["cost", "rate", "0", "4000", "1 month"],
        ["cost", "rate", "4 months", "800", "1 month"],
        ["cost", "rate", "2 years", "120", "1 month"],
        ["cost", "at_entry", "", "2500", ""],
        ["cost", "at_exit", "", "7000", ""],
        ["utility", "rate", "0", "0.6", "1 year"],
        ["utility", "rate", "3 months", "0.78", "1 year"],
        ["monitoring", "rate", "0", "150", "1 month"],
        ["monitoring", "rate", "1 year", "60", "1 month"],
    ];
    let rows: Vec<PayoffRow> = rows
        .iter()
        .enumerate()
        .map(|(i, r)| PayoffRow {
            line: i as u64 + 2,
            payoff: r[0].into(),
            kind: r[1].into(),
            from: r[2].into(),
            amount: r[3].into(),
            per: r[4].into(),
        })
        .collect();
    Schedule::from_rows("bench.csv", &PayoffColumns::default(), &rows).unwrap()
}

fn best_of<T>(runs: usize, mut f: impl FnMut() -> T) -> (f64, T) {
    let mut best = f64::INFINITY;
    let mut out = None;
    for _ in 0..runs {
        let start = Instant::now();
        let value = f();
        best = best.min(start.elapsed().as_secs_f64());
        out = Some(value);
    }
    (best, out.unwrap())
}

fn main() {
    let schedule = schedule();
    let discount = Discount::annual(0.035).unwrap();
    let week = Duration {
        value: 1.0,
        unit: TimeUnit::Weeks,
    };
    let month = Duration {
        value: 1.0,
        unit: TimeUnit::Months,
    };
    println!(
        "(a) 3 payoffs, 10,000 weekly tunnels, discount 0.035 ({} threads)",
        rayon::current_num_threads()
    );
    let only = std::env::var("BENCH_FAMILY").ok();
    for (name, params) in [
        ("exponential", vec![0.02]),
        ("weibull", vec![1.3, 30.0]),
        ("lognormal", vec![3.0, 1.1]),
        ("loglogistic", vec![1.6, 24.0]),
        ("gompertz", vec![0.01, 0.02]),
        ("generalized-gamma", vec![3.0, 0.9, 0.5]),
    ] {
        if only.as_deref().is_some_and(|o| o != name) {
            continue;
        }
        let family = families::by_name(name).unwrap();
        let curve = ParametricCurve::new(family, params, TimeUnit::Months).unwrap();
        let (seconds, p) = best_of(3, || {
            tunnel_payoffs(&curve, &schedule, week, 10_000, discount)
        });
        let sum: f64 = p.values.iter().map(|v| v.iter().sum::<f64>()).sum();
        println!(
            "  {name:<18} {seconds:.3} s  ({:?}; checksum {sum:.6e})",
            p.exactness
        );
    }

    println!("(b) 1,000 draws x 480 monthly tunnels, tunnel table + 3 payoffs per draw");
    let curves: Vec<ParametricCurve> = (0..1000)
        .map(|i| {
            let u = (i as f64 * 0.618_033_988_75).fract();
            let family = families::by_name("weibull").unwrap();
            ParametricCurve::new(
                family,
                vec![1.1 + 0.4 * u, 20.0 + 10.0 * u],
                TimeUnit::Months,
            )
            .unwrap()
        })
        .collect();
    let (seconds, sum) = best_of(3, || {
        curves
            .par_iter()
            .map(|c| {
                let mut table = tunnel_table(c, month, 480);
                tunnel_payoffs(c, &schedule, month, 480, discount).append_to(&mut table);
                table.extra.iter().map(|(_, v)| v[0]).sum::<f64>()
            })
            .sum::<f64>()
    });
    println!("  weibull draws      {seconds:.3} s  (checksum {sum:.6e})");
}
