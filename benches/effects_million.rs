//! Models across arms on 1,000,000 records: the eight joint models of `fit --effects` (PH
//! exponential, Weibull, Gompertz; AFT exponential, Weibull, log-normal, log-logistic,
//! generalized gamma) and the Cox model, timed one by one in-process, with one continuous
//! covariate (every patient a covariate pattern of its own) and without covariates (two
//! patterns, tied times collapsed); then the whole `tunnelcast fit --effects` command.
//!
//! `cargo bench --bench effects_million` (`BENCH_RUNS=N` timed runs, default 3). Results go to
//! stdout as Markdown for `docs/benchmarks.md`, with the load average read before and after.
//!
//! Data (written once to `target/bench-data/effects_million.csv`, invented and seeded): a
//! fictional two-arm trial, arms "north" (hazard ratio 0.75) and "south"; age normal(62, 9)
//! years unrounded, hazard ratio 1.02 per year above 62; Weibull times (shape 1.3, scale 20
//! months); censoring uniform on 6–48 months; times rounded to 0.001 month, as in
//! `scripts/make_effects_benchmark_data.py`.

#[path = "../tests/support/mod.rs"]
mod support;

use std::io::Write;
use std::path::{Path, PathBuf};
use std::time::Instant;
use tunnelcast::effects::cox;
use tunnelcast::effects::design::{parse, Design, DesignOptions};
use tunnelcast::effects::joint::{all, fit_patterns, loglik_gradient, Model, Patterns};

/// Records in the benchmark file.
const N: usize = 1_000_000;

fn ensure_data(path: &Path) {
    if path.exists() {
        return;
    }
    std::fs::create_dir_all(path.parent().unwrap()).unwrap();
    let mut rng = support::SplitMix64::new(20_261_204);
    let tmp = path.with_extension("tmp");
    let mut out = std::io::BufWriter::new(std::fs::File::create(&tmp).unwrap());
    writeln!(out, "time,event,arm,age").unwrap();
    for _ in 0..N {
        let north = rng.next_u64() % 2 == 0;
        // Box–Muller.
        let (u1, u2) = (rng.uniform(), rng.uniform());
        let age = 62.0 + 9.0 * (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos();
        let lp = if north { 0.75f64.ln() } else { 0.0 } + 0.02 * (age - 62.0);
        let t = 20.0 * (-rng.uniform().ln() / lp.exp()).powf(1.0 / 1.3);
        let c = 6.0 + 42.0 * rng.uniform();
        let time = ((t.min(c) * 1000.0).round() / 1000.0).max(0.001);
        let arm = if north { "north" } else { "south" };
        writeln!(out, "{time},{},{arm},{age}", u8::from(t <= c)).unwrap();
    }
    out.flush().unwrap();
    drop(out);
    std::fs::rename(tmp, path).unwrap();
}

fn design(bytes: &[u8], covariates: &[&str]) -> Design {
    let options = DesignOptions {
        time_col: "time".into(),
        event_col: "event".into(),
        arm_col: "arm".into(),
        reference: None,
        covariates: covariates.iter().map(|c| c.to_string()).collect(),
        delimiter: None,
        zero_time: None,
    };
    parse("effects_million.csv", bytes, &options).unwrap()
}

fn median(v: &[f64]) -> f64 {
    let mut v = v.to_vec();
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn load_average() -> String {
    std::fs::read_to_string("/proc/loadavg")
        .map(|s| s.split_whitespace().take(3).collect::<Vec<_>>().join(" "))
        .unwrap_or_else(|_| "unknown".into())
}

fn main() {
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR"));
    let path = root.join("target/bench-data/effects_million.csv");
    ensure_data(&path);
    let runs: usize = std::env::var("BENCH_RUNS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(3);
    let bytes = std::fs::read(&path).unwrap();
    println!(
        "load average before: {} ({} rayon threads)",
        load_average(),
        rayon::current_num_threads()
    );
    for (label, covariates) in [("age (continuous)", &["age"][..]), ("none", &[][..])] {
        let mut rows: Vec<(String, Vec<f64>, String)> = Vec::new();
        let record =
            |rows: &mut Vec<(String, Vec<f64>, String)>, name: &str, s: f64, what: String| {
                match rows.iter_mut().find(|r| r.0 == name) {
                    Some(r) => r.1.push(s),
                    None => rows.push((name.to_string(), vec![s], what)),
                }
            };
        for _ in 0..runs {
            let clock = Instant::now();
            let design = design(&bytes, covariates);
            record(
                &mut rows,
                "read design",
                clock.elapsed().as_secs_f64(),
                String::new(),
            );
            let clock = Instant::now();
            let patterns = Patterns::new(&design);
            let what = format!(
                "{} patterns, {} records",
                patterns.len(),
                patterns.records()
            );
            record(&mut rows, "collapse", clock.elapsed().as_secs_f64(), what);
            let weibull = tunnelcast::effects::joint::by_name("weibull").unwrap();
            let mut theta = vec![0.25, 3.0];
            theta.resize(2 + design.p(), 0.1);
            let clock = Instant::now();
            let (ll, _) = loglik_gradient(weibull, Model::Ph, &patterns, &theta);
            assert!(ll.is_finite());
            let s = clock.elapsed().as_secs_f64();
            record(
                &mut rows,
                "one likelihood and gradient pass (Weibull PH)",
                s,
                String::new(),
            );
            for (family, model) in all() {
                let clock = Instant::now();
                let fit = fit_patterns(family, model, &patterns);
                let s = clock.elapsed().as_secs_f64();
                let what = match fit {
                    Some(f) => format!(
                        "loglik {:.3}, converged {}, coefficients {:?}",
                        f.loglik,
                        f.converged,
                        f.theta[f.theta.len() - design.p()..]
                            .iter()
                            .map(|v| format!("{v:.5}"))
                            .collect::<Vec<_>>()
                    ),
                    None => "no fit".into(),
                };
                let name = format!("{} {}", family.family().name(), model.name());
                record(&mut rows, &name, s, what);
            }
            let clock = Instant::now();
            let fit = cox::fit(&design);
            let what = format!(
                "loglik {:.3}, {} iterations, coefficients {:?}",
                fit.loglik,
                fit.iterations,
                fit.coef
                    .iter()
                    .map(|v| format!("{v:.5}"))
                    .collect::<Vec<_>>()
            );
            record(&mut rows, "cox", clock.elapsed().as_secs_f64(), what);
        }
        let exe = env!("CARGO_BIN_EXE_tunnelcast");
        let out = std::env::temp_dir().join("tunnelcast_effects_million.json");
        for _ in 0..runs {
            let mut command = std::process::Command::new(exe);
            command.arg("fit").arg(&path).args([
                "--time-unit",
                "months",
                "--arm-col",
                "arm",
                "--families",
                "exponential",
                "--effects",
                "--force",
                "--json",
            ]);
            command.arg(&out);
            if !covariates.is_empty() {
                command.args(["--covariates", &covariates.join(",")]);
            }
            let clock = Instant::now();
            let status = command
                .stdout(std::process::Stdio::null())
                .status()
                .unwrap();
            assert!(status.success());
            record(
                &mut rows,
                "`tunnelcast fit --effects` (whole command)",
                clock.elapsed().as_secs_f64(),
                String::new(),
            );
        }
        let _ = std::fs::remove_file(&out);
        println!(
            "\ncovariates: {label}; {runs} runs; load average now {}",
            load_average()
        );
        println!("| step | median s | runs s | result |\n|---|---|---|---|");
        let joint_total: Vec<f64> = (0..runs)
            .map(|r| {
                rows.iter()
                    .filter(|row| row.0.ends_with(" ph") || row.0.ends_with(" aft"))
                    .map(|row| row.1[r])
                    .sum()
            })
            .collect();
        for (name, times, what) in &rows {
            let list: Vec<String> = times.iter().map(|t| format!("{t:.2}")).collect();
            println!(
                "| {name} | {:.2} | {} | {what} |",
                median(times),
                list.join(", ")
            );
        }
        let list: Vec<String> = joint_total.iter().map(|t| format!("{t:.2}")).collect();
        println!(
            "| eight joint models together | {:.2} | {} | |",
            median(&joint_total),
            list.join(", ")
        );
    }
}
