//! Replays the committed fuzz seeds and corpus (`fuzz/seeds/<target>/`, `fuzz/corpus/<target>/`)
//! and every input a fuzzer ever crashed on (`fuzz/regressions/<target>/`) through the same
//! invariant checks the fuzz targets use (`tests/invariants/mod.rs`), so the normal
//! `cargo test --release` guards against their return without a nightly toolchain.

mod invariants;

use std::path::{Path, PathBuf};

/// Every file of the corpus and the regression folder of one target, sorted.
fn inputs(target: &str) -> Vec<PathBuf> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fuzz");
    let mut files = Vec::new();
    for folder in ["seeds", "corpus", "regressions"] {
        let Ok(entries) = std::fs::read_dir(root.join(folder).join(target)) else {
            continue;
        };
        files.extend(entries.map(|e| e.unwrap().path()).filter(|p| p.is_file()));
    }
    files.sort();
    files
}

/// Runs `check` on every input of `target`, naming the file when an invariant fails.
fn replay(target: &str, check: impl Fn(&[u8]) + std::panic::RefUnwindSafe) -> usize {
    let files = inputs(target);
    for path in &files {
        let bytes = std::fs::read(path).unwrap();
        if std::panic::catch_unwind(|| check(&bytes)).is_err() {
            panic!("fuzz input {} breaks an invariant", path.display());
        }
    }
    files.len()
}

#[test]
fn time_to_event_csv_corpus_and_regressions_keep_the_invariants() {
    let n = replay("time_to_event_csv", |b| {
        invariants::time_to_event_csv(b);
    });
    assert!(n >= 20, "only {n} inputs: is the corpus committed?");
}

#[test]
fn duration_corpus_and_regressions_keep_the_invariants() {
    let n = replay("duration", invariants::duration);
    assert!(n >= 10, "only {n} inputs: is the corpus committed?");
}

#[test]
fn life_table_corpus_and_regressions_keep_the_invariants() {
    let n = replay("life_table", invariants::life_table);
    assert!(n >= 10, "only {n} inputs: is the corpus committed?");
}

#[test]
fn digitised_corpus_and_regressions_keep_the_invariants() {
    let n = replay("digitised", invariants::digitised);
    assert!(n >= 10, "only {n} inputs: is the corpus committed?");
}

#[test]
fn fit_small_seeds_and_regressions_keep_the_invariants() {
    // Seeds and crash cases only: the minimised fit corpus is large and each input runs five fits.
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fuzz");
    let mut n = 0;
    for folder in ["seeds", "regressions"] {
        let Ok(entries) = std::fs::read_dir(root.join(folder).join("fit_small")) else {
            continue;
        };
        for path in entries.map(|e| e.unwrap().path()) {
            let bytes = std::fs::read(&path).unwrap();
            n += 1;
            if let Some(data) = invariants::time_to_event_csv(&bytes) {
                for arm in &data.arms {
                    let fits = tunnelcast::fit::fit_arm(
                        &tunnelcast::families::STANDARD,
                        &arm.records,
                        arm.arm.as_deref(),
                    );
                    fits.iter().for_each(invariants::check_fit);
                }
            }
        }
    }
    assert!(n >= 5, "only {n} inputs: are the seeds committed?");
}
