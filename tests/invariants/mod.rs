//! Invariants every input path must keep, shared by the fuzz targets (`fuzz/fuzz_targets/`,
//! which include this file by path) and by `tests/fuzz_regressions.rs`, which replays the
//! committed fuzz corpus and every crash the fuzzers found through them.
//!
//! Accepted input must give finite, positive, sorted, validated records; rejected input must
//! give an error value with a one-line message and the bad-input exit status, never a panic.

#![allow(dead_code)]

use tunnelcast::fit::FamilyFit;
use tunnelcast::input::{self, Dataset, InputOptions};
use tunnelcast::units::{Duration, ALL_UNITS};
use tunnelcast::Error;

/// Longest error message accepted (file name, a few values cut to 40 characters, fixed text).
const LONGEST_MESSAGE: usize = 1500;

/// A rejected input: one clean line, the bad-input exit status.
pub fn check_error(error: &Error) {
    let message = error.to_string();
    assert!(!message.is_empty());
    assert!(
        !message.chars().any(char::is_control),
        "control character in {message:?}"
    );
    assert!(message.len() <= LONGEST_MESSAGE, "{} bytes", message.len());
    assert_eq!(error.exit_code(), 2, "{message}");
}

/// A rejected file read through the shared reading discipline (`src/csv_read.rs`): the error
/// names the file, and a place in it is a real one (line 1 up to the file's last physical line,
/// counting LF, CRLF and lone CR; column 1 or more), or it is about the file as a whole.
pub fn check_reader_error(error: &Error, body: &[u8]) {
    check_error(error);
    let lines = 1 + body
        .iter()
        .enumerate()
        .filter(|&(i, &b)| b == b'\n' || (b == b'\r' && body.get(i + 1) != Some(&b'\n')))
        .count() as u64;
    match error {
        Error::InputAt {
            file, line, column, ..
        } => {
            assert_eq!(file, "fuzz.csv");
            assert!((1..=lines).contains(line), "line {line} of {lines}");
            let number: usize = column
                .split(' ')
                .next()
                .and_then(|n| n.parse().ok())
                .unwrap_or_else(|| panic!("column {column:?}"));
            assert!(number >= 1, "{column}");
        }
        Error::Input { file, .. } => assert_eq!(file, "fuzz.csv"),
        // The life table's --sex mismatch names the file in a usage error.
        Error::Usage(message) => assert!(message.contains("fuzz.csv"), "{message}"),
        other => panic!("unexpected error {other:?}"),
    }
}

/// An accepted time-to-event file: every arm non-empty with an event, records finite, positive,
/// sorted by time with events first at ties, arms distinct.
pub fn check_dataset(data: &Dataset) {
    assert!(!data.arms.is_empty());
    assert_eq!(data.sha256.len(), 64);
    for (i, arm) in data.arms.iter().enumerate() {
        assert!(!arm.records.is_empty());
        assert!(arm.events() > 0, "arm without events accepted");
        assert!(data.arms[..i].iter().all(|other| other.arm != arm.arm));
        for r in &arm.records {
            assert!(r.time.is_finite() && r.time > 0.0, "time {}", r.time);
        }
        for pair in arm.records.windows(2) {
            let (a, b) = (pair[0], pair[1]);
            assert!(a.time < b.time || (a.time == b.time && (a.event || !b.event)));
        }
    }
    assert!(data.arms.len() <= input::MAX_ARMS);
}

/// Options for one fuzz input, chosen by its first byte so that the arm column, the zero-time
/// replacement and a forced delimiter are exercised too. Returns the options and the file bytes.
pub fn options_from(bytes: &[u8]) -> (InputOptions, &[u8]) {
    let Some((&selector, rest)) = bytes.split_first() else {
        return (InputOptions::default(), bytes);
    };
    let options = InputOptions {
        arm_col: (selector & 1 == 1).then(|| "arm".to_string()),
        zero_time: (selector & 2 == 2).then_some(0.5),
        delimiter: match (selector >> 2) & 3 {
            1 => Some(b';'),
            2 => Some(b'\t'),
            _ => None,
        },
        ..InputOptions::default()
    };
    (options, rest)
}

/// Runs the time-to-event loader on fuzz bytes and checks the invariants either way.
pub fn time_to_event_csv(bytes: &[u8]) -> Option<Dataset> {
    let (options, body) = options_from(bytes);
    match input::parse("fuzz.csv", body, &options) {
        Ok(data) => {
            check_dataset(&data);
            Some(data)
        }
        Err(e) => {
            check_reader_error(&e, body);
            None
        }
    }
}

/// Runs the duration parser and checks: accepted durations are positive and finite in every unit.
pub fn duration(bytes: &[u8]) {
    let Ok(text) = std::str::from_utf8(bytes) else {
        return;
    };
    match text.parse::<Duration>() {
        Ok(d) => {
            for unit in ALL_UNITS {
                let v = d.in_unit(unit);
                assert!(v.is_finite() && v > 0.0, "{text:?} is {v} {unit}");
            }
        }
        Err(message) => {
            assert!(!message.is_empty());
            assert!(!message.chars().any(char::is_control), "{message:?}");
            assert!(message.len() <= LONGEST_MESSAGE, "{} bytes", message.len());
        }
    }
}

/// A family fit as written to the fit file: a converged fit has finite parameters and
/// criteria; nothing non-finite is ever written.
pub fn check_fit(fit: &FamilyFit) {
    assert!(fit.params.values().all(|v| v.is_finite()));
    assert!(fit.estimates.iter().all(|v| v.is_finite()));
    if fit.converged {
        assert!(fit.loglik.is_some_and(f64::is_finite), "{}", fit.family);
        assert!(fit.aic.is_some_and(f64::is_finite));
        assert!(fit.covariance.is_some());
        assert!(fit.message.is_none());
    } else {
        assert!(fit.message.is_some(), "{} without a reason", fit.family);
    }
}

/// Runs the life-table loader (first byte: no sex, female or male) and checks: accepted →
/// at least one age, every qx in [0, 1] and finite, qx = 1 only at the last age; rejected →
/// a clean error.
pub fn life_table(bytes: &[u8]) {
    use tunnelcast::adjust::lifetable::{parse, Sex};
    let Some((&selector, body)) = bytes.split_first() else {
        return;
    };
    let sex = match selector % 3 {
        1 => Some(Sex::Female),
        2 => Some(Sex::Male),
        _ => None,
    };
    match parse("fuzz.csv", body, sex) {
        Ok(table) => {
            assert!(!table.qx.is_empty());
            assert!(table.qx.iter().all(|q| (0.0..=1.0).contains(q)));
            let last = table.qx.len() - 1;
            assert!(table.qx[..last].iter().all(|&q| q < 1.0));
            assert!(table.end_age().is_finite());
        }
        Err(e) => check_reader_error(&e, body),
    }
}

/// Runs the digitised-curve and risk-table readers of `rebuild` (first byte: arm column or not)
/// and checks: accepted curves start at (0, 1), times ascend, survival never rises and stays in
/// [0, 1]; accepted risk tables start at time 0, times ascend, numbers at risk never rise.
pub fn digitised(bytes: &[u8]) {
    use tunnelcast::rebuild::{read_curves, read_risk_tables};
    let Some((&selector, body)) = bytes.split_first() else {
        return;
    };
    let arm = (selector & 1 == 1).then_some("arm");
    match read_curves("fuzz.csv", body, arm) {
        Ok(curves) => {
            assert!(!curves.is_empty());
            for curve in &curves {
                let p = &curve.points;
                assert!(!p.is_empty());
                assert_eq!((p[0].time, p[0].survival), (0.0, 1.0));
                for pair in p.windows(2) {
                    assert!(pair[0].time <= pair[1].time, "{pair:?}");
                    assert!(pair[1].survival <= pair[0].survival, "{pair:?}");
                }
                assert!(p
                    .iter()
                    .all(|q| q.time.is_finite() && (0.0..=1.0).contains(&q.survival)));
            }
        }
        Err(e) => check_reader_error(&e, body),
    }
    match read_risk_tables("fuzz.csv", body, arm) {
        Ok(tables) => {
            for table in &tables {
                let rows = &table.rows;
                assert!(!rows.is_empty());
                assert_eq!(rows[0].time, 0.0);
                for pair in rows.windows(2) {
                    assert!(pair[0].time < pair[1].time, "{pair:?}");
                    assert!(pair[1].at_risk <= pair[0].at_risk, "{pair:?}");
                }
            }
        }
        Err(e) => check_reader_error(&e, body),
    }
}
