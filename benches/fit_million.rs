//! Fitting benchmark: the default families of `fit` (the five standard ones and the generalized
//! gamma) fitted to 1,000,000 simulated right-censored records (continuous times, no ties)
//! read from a CSV file, timed for parse and for fit, and the same fits by SciPy
//! (`scripts/bench_scipy.py`) on the same file in the same run.
//!
//! `cargo bench --bench fit_million` (set `BENCH_SCIPY=0` to skip SciPy, `BENCH_RUNS=N` for
//! the number of timed runs). Results go to stdout as Markdown for `docs/benchmarks.md`.

#[path = "../tests/support/mod.rs"]
mod support;

use std::collections::BTreeMap;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::time::Instant;
use tunnelcast::families::{self, Family};
use tunnelcast::fit::{fit_arm, fit_family, FitData};
use tunnelcast::input::{self, InputOptions};

/// Records in the benchmark file.
const N: usize = 1_000_000;

/// Writes the benchmark file once: Weibull(shape 1.3, scale 400 days) event times, uniform
/// (0, 1000 days) censoring, seed 2026; times in shortest round-trip form so none tie.
fn ensure_data(path: &Path) {
    if path.exists() {
        return;
    }
    std::fs::create_dir_all(path.parent().unwrap()).unwrap();
    let records = support::simulate(&families::Weibull, &[1.3, 400.0], N, 1000.0, 2026);
    let distinct = records.windows(2).all(|w| w[0].time < w[1].time);
    assert!(distinct, "simulated times tie; change the seed");
    let tmp = path.with_extension("tmp");
    let mut out = std::io::BufWriter::new(std::fs::File::create(&tmp).unwrap());
    writeln!(out, "time,event").unwrap();
    // Written in simulation order (not sorted), as a trial export would be.
    let mut rng = support::SplitMix64::new(7);
    let mut order: Vec<usize> = (0..records.len()).collect();
    for i in (1..order.len()).rev() {
        order.swap(i, (rng.next_u64() % (i as u64 + 1)) as usize);
    }
    for i in order {
        let r = records[i];
        writeln!(out, "{},{}", r.time, u8::from(r.event)).unwrap();
    }
    out.flush().unwrap();
    drop(out);
    std::fs::rename(tmp, path).unwrap();
}

fn median(v: &mut [f64]) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

#[derive(serde::Deserialize)]
struct ScipyOut {
    scipy: String,
    numpy: String,
    read_seconds: f64,
    fits: BTreeMap<String, ScipyFit>,
}

#[derive(serde::Deserialize)]
struct ScipyFit {
    seconds: f64,
    loglik: f64,
    params: BTreeMap<String, f64>,
}

fn main() {
    // `cargo bench` passes `--bench`; nothing else is accepted.
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR"));
    let path = root.join("target/bench-data/million.csv");
    ensure_data(&path);
    let runs: usize = std::env::var("BENCH_RUNS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(5);
    let threads = rayon::current_num_threads();
    let load = std::fs::read_to_string("/proc/loadavg").unwrap_or_default();
    println!("threads: {threads}; load average before: {}", load.trim());

    let mut parse_times = Vec::new();
    let mut fit_times = Vec::new();
    let mut total_times = Vec::new();
    let mut fits = Vec::new();
    for _ in 0..runs {
        let start = Instant::now();
        let data = input::load(&path, &InputOptions::default()).unwrap();
        let parsed = start.elapsed().as_secs_f64();
        fits = fit_arm(&families::defaults(), &data.arms[0].records, None);
        let total = start.elapsed().as_secs_f64();
        eprintln!("run: parse {parsed:.3} s, parse + fit {total:.3} s");
        parse_times.push(parsed);
        fit_times.push(total - parsed);
        total_times.push(total);
    }
    let data = input::load(&path, &InputOptions::default()).unwrap();
    let fit_data = FitData::from_records(&data.arms[0].records);
    // Each family alone (the others idle), for the per-family comparison with SciPy.
    let mut alone: BTreeMap<&str, f64> = BTreeMap::new();
    for family in families::defaults() {
        let start = Instant::now();
        let fit = fit_family(family, &fit_data, None);
        alone.insert(family.name(), start.elapsed().as_secs_f64());
        eprintln!("{} alone: {:.3} s", family.name(), alone[family.name()]);
        assert!(fit.converged, "{} did not converge", family.name());
    }

    println!(
        "\nn = {N} (events {}), {runs} runs: parse median {:.3} s (min {:.3}), fit of the {} \
         default families median {:.3} s (min {:.3}), parse + fit median {:.3} s (min {:.3})",
        data.events(),
        median(&mut parse_times.clone()),
        parse_times.iter().cloned().fold(f64::INFINITY, f64::min),
        families::defaults().len(),
        median(&mut fit_times.clone()),
        fit_times.iter().cloned().fold(f64::INFINITY, f64::min),
        median(&mut total_times.clone()),
        total_times.iter().cloned().fold(f64::INFINITY, f64::min),
    );

    let scipy = if std::env::var("BENCH_SCIPY").as_deref() == Ok("0") {
        None
    } else {
        let script = root.join("scripts/bench_scipy.py");
        match std::process::Command::new("python3")
            .arg(&script)
            .arg(&path)
            .output()
        {
            Ok(out) if out.status.success() => serde_json::from_slice::<ScipyOut>(&out.stdout).ok(),
            Ok(out) => {
                eprintln!(
                    "SciPy comparison skipped: {}",
                    String::from_utf8_lossy(&out.stderr)
                        .lines()
                        .last()
                        .unwrap_or("")
                );
                None
            }
            Err(e) => {
                eprintln!("SciPy comparison skipped: {e}");
                None
            }
        }
    };
    if let Some(s) = &scipy {
        println!(
            "\nSciPy {} / numpy {}: read {:.2} s",
            s.scipy, s.numpy, s.read_seconds
        );
    }
    println!("\n| family | tunnelcast fit alone (s) | SciPy fit (s) | speed-up | loglik tunnelcast | loglik SciPy | tunnelcast − SciPy | parameters tunnelcast | parameters SciPy |");
    println!("|---|---|---|---|---|---|---|---|---|");
    let mut scipy_total = 0.0;
    for family in families::defaults() {
        let fit = fits.iter().find(|f| f.family == family.name()).unwrap();
        let ours = alone[family.name()];
        let ll = fit.loglik.unwrap();
        let params = describe(family, &fit.params);
        match scipy.as_ref().and_then(|s| s.fits.get(family.name())) {
            Some(sf) => {
                scipy_total += sf.seconds;
                println!(
                    "| {} | {:.3} | {:.2} | {:.0}× | {:.4} | {:.4} | {:+.2e} | {} | {} |",
                    family.name(),
                    ours,
                    sf.seconds,
                    sf.seconds / ours,
                    ll,
                    sf.loglik,
                    ll - sf.loglik,
                    params,
                    describe(family, &sf.params)
                );
            }
            None => println!(
                "| {} | {:.3} | – | – | {:.4} | – | – | {} | – |",
                family.name(),
                ours,
                ll,
                params
            ),
        }
    }
    if let Some(s) = &scipy {
        let ours = median(&mut total_times.clone());
        let theirs = s.read_seconds + scipy_total;
        println!(
            "\nWhole run, read/parse included: tunnelcast {ours:.3} s (median, all default families), SciPy {theirs:.1} s (the families it fitted): {:.0}× faster.",
            theirs / ours
        );
    }
}

fn describe(family: &dyn Family, params: &BTreeMap<String, f64>) -> String {
    family
        .param_names()
        .iter()
        .map(|n| format!("{n} {:.6}", params[*n]))
        .collect::<Vec<_>>()
        .join(", ")
}
