//! Benchmark of `tunnelcast draws`: 10,000 draws × 480 monthly cycles for each of the five
//! standard families, written as long CSV files. Run with `cargo bench --bench draws`; the
//! results (printed on standard error) go into `docs/benchmarks.md`.
//!
//! The data are invented here from a seeded generator (Weibull event times, uniform censoring),
//! fitted with the library, and the command is run in-process exactly as from the shell.

use clap::Parser;
use std::time::Instant;
use tunnelcast::draws::NormalStream;
use tunnelcast::input::{ArmData, Dataset, Record};
use tunnelcast::units::TimeUnit;

fn main() {
    let dir = tempfile::tempdir().expect("temporary folder");
    // Invented trial: 400 subjects, Weibull(shape 1.3, scale 20 months) event times,
    // censoring uniform on 6–48 months.
    let mut stream = NormalStream::new(2026);
    let mut uniform = || tunnelcast::numeric::normal_sf(stream.next_normal());
    let mut records: Vec<Record> = (0..400)
        .map(|_| {
            let t = 20.0 * (-uniform().ln()).powf(1.0 / 1.3);
            let c = 6.0 + 42.0 * uniform();
            Record {
                time: (t.min(c) * 100.0).round().max(1.0) / 100.0,
                event: t <= c,
            }
        })
        .collect();
    records.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
    let data = Dataset {
        file: "invented.csv".into(),
        sha256: "not-a-file".into(),
        arms: vec![ArmData { arm: None, records }],
        zero_times_replaced: 0,
    };
    let fits = tunnelcast::fit::fit_dataset(
        &data,
        tunnelcast::families::STANDARD.as_ref(),
        TimeUnit::Months,
        None,
    );
    let fit_path = dir.path().join("fit.json");
    std::fs::write(&fit_path, serde_json::to_vec(&fits).unwrap()).unwrap();

    let threads = rayon::current_num_threads();
    eprintln!("draws benchmark: 10,000 draws × 480 monthly cycles, long CSV, {threads} threads");
    eprintln!("| family | seconds | output size (MB) |\n|---|---|---|");
    let mut total_seconds = 0.0;
    let mut total_bytes = 0u64;
    for family in [
        "exponential",
        "weibull",
        "lognormal",
        "loglogistic",
        "gompertz",
    ] {
        let out = dir.path().join(format!("{family}.csv"));
        let args = [
            "tunnelcast",
            "draws",
            "--fit",
            fit_path.to_str().unwrap(),
            "--family",
            family,
            "--cycle",
            "1 month",
            "--count",
            "480",
            "--draws",
            "10000",
            "--seed",
            "1",
            "--quiet",
            "--out",
            out.to_str().unwrap(),
        ];
        let cli = tunnelcast::cli::Cli::try_parse_from(args).expect("arguments");
        let start = Instant::now();
        // The command prints its summary on standard output; the timing goes to standard error.
        tunnelcast::cli::run(cli).expect("draws run");
        let seconds = start.elapsed().as_secs_f64();
        let bytes = std::fs::metadata(&out).unwrap().len();
        std::fs::remove_file(&out).unwrap();
        total_seconds += seconds;
        total_bytes += bytes;
        eprintln!("| {family} | {seconds:.2} | {:.0} |", bytes as f64 / 1e6);
    }
    eprintln!(
        "| all five | {total_seconds:.2} | {:.0} |",
        total_bytes as f64 / 1e6
    );
}
