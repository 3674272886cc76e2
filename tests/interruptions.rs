//! SIGINT and SIGTERM while `fit` works on a large file: the process ends with a non-zero
//! status (killed by the signal) and leaves neither the output file nor a temporary file,
//! because output is written only at the end through a temporary file and a rename.
//! Unix only (signals are sent with the `kill` command).
#![cfg(unix)]

use std::io::Write;
use std::os::unix::process::ExitStatusExt;
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// A file whose fit of every family below takes seconds: 3,000,000 distinct times (nothing
/// collapses).
fn write_large(path: &Path) {
    let mut out = std::io::BufWriter::new(std::fs::File::create(path).unwrap());
    writeln!(out, "time,event").unwrap();
    for i in 0..3_000_000u64 {
        // Distinct, irregular times in (0, 1000) days; every fourth subject censored.
        let t = 1000.0 * ((i as f64 * 0.618_033_988_749_895).fract() * 0.999 + 0.0005);
        writeln!(out, "{t:.9},{}", u8::from(i % 4 != 0)).unwrap();
    }
}

fn interrupted_fit_leaves_nothing(signal: &str, number: i32) {
    let dir = tempfile::tempdir().unwrap();
    write_large(&dir.path().join("big.csv"));
    let mut child = Command::new(env!("CARGO_BIN_EXE_tunnelcast"))
        .current_dir(dir.path())
        .args([
            "fit",
            "big.csv",
            "--time-unit",
            "days",
            "--json",
            "out.json",
            // The default families alone take well under a second on a million records; the
            // cure and spline families make the fit last long enough to be interrupted.
            "--families",
            "exponential,weibull,lognormal,loglogistic,gompertz,generalized-gamma,cure-weibull,\
             cure-lognormal,cure-loglogistic,spline-ph-3,spline-po-3,spline-probit-3",
        ])
        // One worker thread: the fit then lasts about as long on a machine with many cores.
        .env("RAYON_NUM_THREADS", "1")
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    // Past the reading of the file, into the fit.
    std::thread::sleep(Duration::from_millis(700));
    assert!(
        child.try_wait().unwrap().is_none(),
        "fit finished before the signal; the test needs a larger file"
    );
    let sent = Command::new("kill")
        .args([format!("-{signal}"), child.id().to_string()])
        .status()
        .unwrap();
    assert!(sent.success());
    let start = Instant::now();
    let status = loop {
        if let Some(status) = child.try_wait().unwrap() {
            break status;
        }
        assert!(
            start.elapsed() < Duration::from_secs(10),
            "still running after {signal}"
        );
        std::thread::sleep(Duration::from_millis(50));
    };
    assert!(!status.success());
    assert!(status.code() != Some(0));
    assert_eq!(
        status.signal().or(status.code().map(|c| c - 128)),
        Some(number)
    );
    let mut stderr = String::new();
    std::io::Read::read_to_string(&mut child.stderr.take().unwrap(), &mut stderr).unwrap();
    assert!(!stderr.contains("panicked at"), "{stderr}");
    let names: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(names, ["big.csv"], "left behind after {signal}");
}

#[test]
fn sigint_during_fit_leaves_no_output() {
    interrupted_fit_leaves_nothing("INT", 2);
}

#[test]
fn sigterm_during_fit_leaves_no_output() {
    interrupted_fit_leaves_nothing("TERM", 15);
}
