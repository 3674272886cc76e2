//! Command-line tests of the adjustments (issue 4): treatment effects and background mortality
//! through `tunnels` and `horizon`, outputs read back with serde, and bad input refused with a
//! one-line error, exit status 2 and nothing written.

use std::collections::BTreeMap;
use std::path::Path;

#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct Document {
    metadata: BTreeMap<String, String>,
    tables: Vec<Table>,
}

#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct Table {
    #[allow(dead_code)]
    name: String,
    columns: Vec<String>,
    rows: Vec<Vec<serde_json::Value>>,
}

impl Table {
    fn column(&self, name: &str) -> Vec<f64> {
        let i = self
            .columns
            .iter()
            .position(|c| c == name)
            .unwrap_or_else(|| panic!("no column {name} in {:?}", self.columns));
        self.rows.iter().map(|r| r[i].as_f64().unwrap()).collect()
    }
}

fn tunnelcast() -> assert_cmd::Command {
    assert_cmd::cargo::cargo_bin_cmd!("tunnelcast")
}

/// Runs `tunnels` with `args` plus `--out out.json` in `dir` and reads the file back.
fn tunnels_json(dir: &Path, args: &[&str]) -> Document {
    let out = dir.join("out.json");
    let _ = std::fs::remove_file(&out);
    tunnelcast()
        .current_dir(dir)
        .arg("tunnels")
        .args(args)
        .args(["--out", "out.json"])
        .assert()
        .success();
    serde_json::from_slice(&std::fs::read(out).unwrap()).unwrap()
}

/// Probability of dying of background causes alone over [t0, t1] years since entry at
/// `start_age`, by the rule P = 1 - Π (1 - qx)^(years spent at age x) (common practice),
/// computed here independently of the library.
fn background_probability(qx: &[(u32, f64)], start_age: f64, t0: f64, t1: f64) -> f64 {
    let (a0, a1) = (start_age + t0, start_age + t1);
    let mut log_stay = 0.0;
    for &(age, q) in qx {
        let lo = a0.max(age as f64);
        let hi = a1.min(age as f64 + 1.0);
        if hi > lo {
            log_stay += (hi - lo) * (1.0 - q).ln();
        }
    }
    1.0 - log_stay.exp()
}

fn write_table(dir: &Path, name: &str, rows: &[(u32, f64)]) {
    let mut text = String::from("age,qx\n");
    for (age, q) in rows {
        text.push_str(&format!("{age},{q}\n"));
    }
    std::fs::write(dir.join(name), text).unwrap();
}

/// A constant disease hazard (0.02 a month) with background mortality added from a table of
/// constant qx = 0.03 (`life.csv`, ages 40–59) from age 41.3: two constant competing hazards.
/// The first 8 words give the curve and cycle alone.
const TWO_CONSTANT_HAZARDS: [&str; 14] = [
    "--family",
    "exponential",
    "--param",
    "rate=0.02",
    "--time-unit",
    "months",
    "--cycle",
    "1 month",
    "--background",
    "life.csv",
    "--start-age",
    "41.3",
    "--background-mode",
    "add",
];

#[test]
fn add_mode_splits_two_constant_hazards_by_the_competing_risks_formula() {
    // Two constant hazards: P(cause j within Δ) = h_j/(h_1 + h_2)·(1 - e^-(h_1+h_2)Δ)
    // (standard competing-risks result, from memory); causes sum to p_exit to 1e-12.
    let dir = tempfile::tempdir().unwrap();
    let rows: Vec<(u32, f64)> = (40..60).map(|a| (a, 0.03)).collect();
    write_table(dir.path(), "life.csv", &rows);
    let mut args = TWO_CONSTANT_HAZARDS.to_vec();
    args.extend(["--count", "120"]);
    let doc = tunnels_json(dir.path(), &args);
    assert_eq!(doc.metadata["background_mode"], "add");
    assert_eq!(doc.metadata["start_age"], "41.3");
    assert_eq!(doc.metadata["background_table"], "life.csv");
    let table = &doc.tables[0];
    let (p, d, b) = (
        table.column("p_exit"),
        table.column("p_exit_disease"),
        table.column("p_exit_background"),
    );
    let h_d = 0.02;
    let h_b = -(0.97f64.ln()) / 12.0;
    let total = 1.0 - (-(h_d + h_b)).exp();
    for i in 0..p.len() {
        assert!((p[i] - total).abs() < 1e-12, "tunnel {}", i + 1);
        assert!((d[i] - h_d / (h_d + h_b) * total).abs() < 1e-12);
        assert!((b[i] - h_b / (h_d + h_b) * total).abs() < 1e-12);
        assert!((d[i] + b[i] - p[i]).abs() < 1e-12);
    }
}

#[test]
fn matrix_by_cause_sends_each_cause_to_its_own_exit_state() {
    // Two constant hazards again: a cohort pushed through the matrix for k cycles has left by
    // cause j with probability h_j/(h_1 + h_2)·(1 - e^-(h_1+h_2)k) (competing risks with
    // constant hazards, from memory); rows sum to 1 within 1e-12.
    let dir = tempfile::tempdir().unwrap();
    let rows: Vec<(u32, f64)> = (40..60).map(|a| (a, 0.03)).collect();
    write_table(dir.path(), "life.csv", &rows);
    let mut with_layout = TWO_CONSTANT_HAZARDS.to_vec();
    with_layout.extend(["--count", "24", "--layout", "matrix-by-cause"]);
    let doc = tunnels_json(dir.path(), &with_layout);
    assert_eq!(doc.metadata["layout"], "matrix-by-cause");
    let table = &doc.tables[0];
    let n = 24;
    assert_eq!(table.columns.len(), 1 + n + 2);
    assert_eq!(table.columns[n + 1], "exit_disease");
    assert_eq!(table.columns[n + 2], "exit_background");
    let matrix: Vec<Vec<f64>> = table
        .rows
        .iter()
        .map(|r| r[1..].iter().map(|v| v.as_f64().unwrap()).collect())
        .collect();
    for (i, row) in matrix.iter().enumerate() {
        let sum: f64 = row.iter().sum();
        assert!((sum - 1.0).abs() < 1e-12, "row {i} sums to {sum}");
    }
    let h_d = 0.02;
    let h_b = -(0.97f64.ln()) / 12.0;
    let mut cohort = vec![0.0; n + 2];
    cohort[0] = 1.0;
    for k in 1..=n + 10 {
        let mut next = vec![0.0; n + 2];
        for (from, share) in cohort.iter().enumerate() {
            for (to, p) in matrix[from].iter().enumerate() {
                next[to] += share * p;
            }
        }
        cohort = next;
        let left = 1.0 - (-(h_d + h_b) * k as f64).exp();
        let disease = h_d / (h_d + h_b) * left;
        let background = h_b / (h_d + h_b) * left;
        assert!((cohort[n] - disease).abs() < 1e-12, "cycle {k}");
        assert!((cohort[n + 1] - background).abs() < 1e-12, "cycle {k}");
    }
    // Without a cause split the layout is refused: exit 2, one line, nothing written.
    let out = tunnelcast()
        .current_dir(dir.path())
        .args(["tunnels"])
        .args(&TWO_CONSTANT_HAZARDS[..8])
        .args([
            "--count",
            "24",
            "--layout",
            "matrix-by-cause",
            "--out",
            "m.csv",
        ])
        .assert()
        .code(2)
        .get_output()
        .clone();
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    assert!(stderr.contains("--background-mode add"), "{stderr}");
    assert!(!dir.path().join("m.csv").exists());
}

#[test]
fn floor_is_never_below_background_on_any_cycle() {
    // Floor property (issue 4): on every cycle p_exit ≥ the background probability alone,
    // computed independently from the bundled synthetic table; cycles of 3 months crossing birthdays.
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("data/demo_lifetable.csv"),
    )
    .unwrap();
    std::fs::write(dir.path().join("life.csv"), &text).unwrap();
    let male: Vec<(u32, f64)> = text
        .lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with("age"))
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (f[0].parse().unwrap(), f[2].parse().unwrap())
        })
        .collect();
    let doc = tunnels_json(
        dir.path(),
        &[
            "--family",
            "loglogistic",
            "--param",
            "shape=1.4",
            "--param",
            "scale=2",
            "--time-unit",
            "years",
            "--cycle",
            "3 months",
            "--count",
            "160",
            "--background",
            "life.csv",
            "--start-age",
            "58.6",
            "--sex",
            "male",
        ],
    );
    assert_eq!(doc.metadata["background_mode"], "floor");
    assert_eq!(doc.metadata["background_column"], "qx_male");
    let table = &doc.tables[0];
    let (t0, t1, p, share) = (
        table.column("t_start"),
        table.column("t_end"),
        table.column("p_exit"),
        table.column("floor_share"),
    );
    for i in 0..p.len() {
        let bg = background_probability(&male, 58.6, t0[i] / 12.0, t1[i] / 12.0);
        assert!(p[i] >= bg - 1e-13, "tunnel {}: {} < {bg}", i + 1, p[i]);
        if share[i] == 1.0 {
            // The floor binds throughout: p_exit is the background probability.
            assert!((p[i] - bg).abs() < 1e-12, "tunnel {}", i + 1);
        }
    }
    assert!(share.contains(&1.0));
    assert_ne!(doc.metadata["floor_binds_in_tunnels"], "none");
    let age: f64 = doc.metadata["floor_first_binds_at_age"].parse().unwrap();
    assert!((58.6..98.6).contains(&age));
}

#[test]
fn a_floor_binding_for_a_sliver_of_tunnel_1_is_not_reported_as_binding() {
    // A Weibull with shape 1.3 has hazard 0 at entry, so a constant background hazard h_b is
    // the larger for t < t* = s·(h_b·s/k)^(1/(k-1)) (a millionth of a month here) and never
    // again. The floor adds h_b·t* - (t*/s)^k = h_b·t*·(1 - 1/k) to tunnel 1's cumulative hazard
    // (calculus on the Weibull hazard), far below the 0.1% materiality threshold.
    let dir = tempfile::tempdir().unwrap();
    let mut table = String::from("age,qx\n");
    for age in 60..=110 {
        table.push_str(&format!("{age},0.01\n"));
    }
    std::fs::write(dir.path().join("flat.csv"), table).unwrap();
    let doc = tunnels_json(
        dir.path(),
        &[
            "--family",
            "weibull",
            "--param",
            "shape=1.3",
            "--param",
            "scale=15",
            "--time-unit",
            "months",
            "--cycle",
            "1 month",
            "--count",
            "120",
            "--background",
            "flat.csv",
            "--start-age",
            "60",
            "--background-mode",
            "floor",
        ],
    );
    let (k, s) = (1.3f64, 15.0f64);
    let h_b = -(1.0f64 - 0.01).ln() / 12.0; // per month (interface: -ln(1 - qx) a year)
    let t_star = s * (h_b * s / k).powf(1.0 / (k - 1.0));
    let h1 = (1.0 / s).powf(k);
    let alone = -(-h1).exp_m1();
    let floored = -(-(h1 + h_b * t_star * (1.0 - 1.0 / k))).exp_m1();
    let rise = floored / alone - 1.0;
    assert!(rise > 0.0 && rise < 1e-6, "{rise}");
    assert_eq!(doc.metadata["floor_binds_in_tunnels"], "none");
    assert_eq!(
        doc.metadata["floor_first_binds_at_age"],
        "not material in tunnels 1–120"
    );
    // The largest change is the one in tunnel 1, shown in percent at 3 significant digits.
    let largest = &doc.metadata["floor_largest_change"];
    let (lead, rest) = largest.split_once("% in tunnel ").unwrap();
    let shown: f64 = lead.trim_start_matches('+').parse().unwrap();
    assert!(
        (shown - 100.0 * rise).abs() <= 0.01 * 100.0 * rise,
        "{largest} vs {rise}"
    );
    assert!(rest.starts_with("1 "), "{largest}");
    assert!(doc.metadata["floor_materiality"].contains("0.1%"));
    // The share of tunnel 1 under the floor is still shown as what it is.
    let share = doc.tables[0].column("floor_share");
    assert!((share[0] - t_star).abs() < 1e-9, "{} vs {t_star}", share[0]);
    assert!(share[1..].iter().all(|x| *x == 0.0));
}

#[test]
fn hazard_ratio_on_weibull_equals_weibull_with_rescaled_scale() {
    // Weibull with hazard ratio X = Weibull with scale·X^(-1/shape) (Weibull proportional-hazards
    // property, as in Collett, Modelling Survival Data in Medical Research; from memory).
    let dir = tempfile::tempdir().unwrap();
    let common = [
        "--cycle",
        "1 month",
        "--count",
        "60",
        "--time-unit",
        "months",
    ];
    let mut treated_args = vec![
        "--family",
        "weibull",
        "--param",
        "shape=1.6",
        "--param",
        "scale=20",
        "--hazard-ratio",
        "0.6",
    ];
    treated_args.extend(common);
    let treated = tunnels_json(dir.path(), &treated_args);
    assert_eq!(treated.metadata["hazard_ratio"], "0.6");
    let scale = format!("scale={}", 20.0 * 0.6f64.powf(-1.0 / 1.6));
    let mut closed_args = vec!["--family", "weibull", "--param", "shape=1.6", "--param"];
    closed_args.push(&scale);
    closed_args.extend(common);
    let closed = tunnels_json(dir.path(), &closed_args);
    let (a, b) = (
        treated.tables[0].column("p_exit"),
        closed.tables[0].column("p_exit"),
    );
    for (x, y) in a.iter().zip(&b) {
        assert!((x - y).abs() < 1e-12);
    }
}

#[test]
fn waning_is_recorded_and_lies_between_treated_and_untreated() {
    // With X < 1 waning over [12, 36] months, each cycle's p_exit lies between the fully treated
    // and the untreated one, equal to the treated before 12 and the untreated after 36 months
    // (definition of waning in issue 4).
    let dir = tempfile::tempdir().unwrap();
    let base = [
        "--family",
        "gompertz",
        "--param",
        "shape=0.03",
        "--param",
        "rate=0.01",
        "--time-unit",
        "months",
        "--cycle",
        "1 month",
        "--count",
        "48",
    ];
    let run = |extra: &[&str]| {
        let mut args = base.to_vec();
        args.extend(extra);
        tunnels_json(dir.path(), &args)
    };
    let waning = run(&["--hazard-ratio", "0.5", "--waning", "12 months..3 years"]);
    assert_eq!(waning.metadata["waning"], "12 months..3 years");
    let treated = run(&["--hazard-ratio", "0.5"]).tables[0].column("p_exit");
    let untreated = run(&[]).tables[0].column("p_exit");
    let p = waning.tables[0].column("p_exit");
    for k in 0..48 {
        if k < 12 {
            assert!((p[k] - treated[k]).abs() < 1e-13);
        } else if k >= 36 {
            assert!((p[k] - untreated[k]).abs() < 1e-12);
        } else {
            assert!(treated[k] < p[k] && p[k] < untreated[k], "tunnel {}", k + 1);
        }
    }
}

#[test]
fn hazard_ratio_on_a_non_proportional_family_warns_and_computes() {
    let dir = tempfile::tempdir().unwrap();
    let assert = tunnelcast()
        .current_dir(dir.path())
        .args([
            "tunnels",
            "--family",
            "lognormal",
            "--param",
            "mu=2",
            "--param",
            "sigma=1",
            "--time-unit",
            "months",
            "--cycle",
            "1 month",
            "--count",
            "5",
            "--hazard-ratio",
            "0.8",
            "--out",
            "t.json",
        ])
        .assert()
        .success();
    let stderr = String::from_utf8_lossy(&assert.get_output().stderr).into_owned();
    assert!(stderr.contains("warning:") && stderr.contains("proportional-hazards"));
    let doc: Document =
        serde_json::from_slice(&std::fs::read(dir.path().join("t.json")).unwrap()).unwrap();
    assert!(doc.metadata["warning"].contains("lognormal"));
}

#[test]
fn horizon_records_background_and_refuses_ages_past_the_table() {
    let dir = tempfile::tempdir().unwrap();
    let rows: Vec<(u32, f64)> = (60..80)
        .map(|a| (a, 0.01 + 0.004 * (a - 60) as f64))
        .collect();
    write_table(dir.path(), "life.csv", &rows);
    let curve = [
        "horizon",
        "--family",
        "exponential",
        "--param",
        "rate=0.01",
        "--time-unit",
        "months",
        "--cycle",
        "1 month",
        "--background",
        "life.csv",
        "--start-age",
        "65",
    ];
    // 15 years from 65 stays inside the table (last age 79).
    tunnelcast()
        .current_dir(dir.path())
        .args(curve)
        .args(["--horizon", "15 years", "--json", "h.json"])
        .assert()
        .success();
    let report: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("h.json")).unwrap()).unwrap();
    assert_eq!(report["metadata"]["beyond_table"], "error");
    assert_eq!(report["metadata"]["start_age"], "65");
    // 20 years would reach 85: refused unless the last hazard is held.
    let assert = tunnelcast()
        .current_dir(dir.path())
        .args(curve)
        .args(["--horizon", "20 years", "--json", "h2.json"])
        .assert()
        .code(2);
    let stderr = String::from_utf8_lossy(&assert.get_output().stderr).into_owned();
    assert!(stderr.contains("--beyond-table hold-last"), "{stderr}");
    assert!(!dir.path().join("h2.json").exists());
    tunnelcast()
        .current_dir(dir.path())
        .args(curve)
        .args(["--horizon", "20 years", "--beyond-table", "hold-last"])
        .assert()
        .success();
}

/// Every bad-input case of issue 4: exit 2, one line on stderr naming the problem, no panic,
/// and no output file left behind.
#[test]
fn bad_adjustment_input_is_refused_with_one_line_and_nothing_written() {
    let dir = tempfile::tempdir().unwrap();
    let files = [
        ("gap.csv", "age,qx\n60,0.01\n61,0.02\n63,0.03\n"),
        ("above.csv", "age,qx\n60,0.01\n61,1.5\n"),
        ("negative.csv", "age,qx\n60,0.01\n61,-0.02\n"),
        ("noage.csv", "years,qx\n60,0.01\n"),
        ("good.csv", "age,qx\n60,0.01\n61,0.02\n62,0.03\n"),
    ];
    for (name, text) in files {
        std::fs::write(dir.path().join(name), text).unwrap();
    }
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (
            vec!["--background", "gap.csv", "--start-age", "60"],
            "gap.csv line 4 column 1",
        ),
        (
            vec!["--background", "above.csv", "--start-age", "60"],
            "above.csv line 3 column 2",
        ),
        (
            vec!["--background", "negative.csv", "--start-age", "60"],
            "negative.csv line 3 column 2",
        ),
        (
            vec!["--background", "noage.csv", "--start-age", "60"],
            "noage.csv line 1",
        ),
        (
            vec!["--background", "good.csv", "--start-age", "70"],
            "outside the life table",
        ),
        (
            vec!["--background", "good.csv", "--start-age", "59.5"],
            "outside the life table",
        ),
        (vec!["--background", "good.csv"], "needs --start-age"),
        (vec!["--hazard-ratio", "0"], "--hazard-ratio"),
        (vec!["--hazard-ratio", "-0.5"], "--hazard-ratio"),
        (vec!["--hazard-ratio", "abc"], "--hazard-ratio"),
        (vec!["--acceleration-factor", "0"], "--acceleration-factor"),
        (
            vec!["--hazard-ratio", "0.7", "--waning", "2 years..1 year"],
            "START must be shorter",
        ),
        (
            vec!["--hazard-ratio", "0.7", "--waning", "1 year..1 year"],
            "START must be shorter",
        ),
        (
            vec!["--hazard-ratio", "0.7", "--acceleration-factor", "1.3"],
            "not both",
        ),
        (
            vec![
                "--background",
                "good.csv",
                "--start-age",
                "60",
                "--sex",
                "female",
            ],
            "single qx column",
        ),
        (
            vec![
                "--background",
                "good.csv",
                "--start-age",
                "60",
                "--background-mode",
                "flor",
            ],
            "did you mean \"floor\"",
        ),
    ];
    for (extra, expected) in cases {
        let assert = tunnelcast()
            .current_dir(dir.path())
            .args([
                "tunnels",
                "--family",
                "exponential",
                "--param",
                "rate=0.01",
                "--time-unit",
                "months",
                "--cycle",
                "1 month",
                "--count",
                "12",
                "--out",
                "out.csv",
            ])
            .args(&extra)
            .assert()
            .code(2);
        let stderr = String::from_utf8_lossy(&assert.get_output().stderr).into_owned();
        assert!(stderr.starts_with("error: "), "{extra:?}: {stderr}");
        assert_eq!(stderr.trim_end().lines().count(), 1, "{extra:?}: {stderr}");
        assert!(stderr.contains(expected), "{extra:?}: {stderr}");
        assert!(!stderr.contains("panicked"));
        assert!(
            !dir.path().join("out.csv").exists(),
            "{extra:?} wrote a file"
        );
        let leftovers: Vec<_> = std::fs::read_dir(dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().into_string().unwrap())
            .filter(|n| n.contains("out"))
            .collect();
        assert!(leftovers.is_empty(), "{extra:?}: {leftovers:?}");
    }
}

#[test]
fn entry_cycles_report_where_the_floor_binds_for_each_entry_age() {
    // A disease hazard of 0.002 a month against a life table with qx = 0.001 below age 65 and
    // 0.05 from 65: the background hazard, -ln(1 - qx)/12 a month (interface), is 8.3e-5 below
    // 65 and 4.27e-3 from 65, so the floor binds exactly in the yearly tunnels that lie past age
    // 65. Entry at age 60 + e: tunnel k covers ages [60 + e + k - 1, 60 + e + k), past 65 from
    // k = 6 - e (hand computation from the interval convention, common practice).
    let dir = tempfile::tempdir().unwrap();
    let rows: Vec<(u32, f64)> = (40..100)
        .map(|a| (a, if a < 65 { 0.001 } else { 0.05 }))
        .collect();
    write_table(dir.path(), "step.csv", &rows);
    let with_mode = |mode: &str| {
        tunnels_json(
            dir.path(),
            &[
                "--family",
                "exponential",
                "--param",
                "rate=0.002",
                "--time-unit",
                "months",
                "--cycle",
                "1 year",
                "--count",
                "10",
                "--background",
                "step.csv",
                "--start-age",
                "60",
                "--background-mode",
                mode,
                "--entry-cycles",
                "3",
            ],
        )
    };
    let doc = with_mode("floor");
    assert_eq!(doc.metadata["floor_binds_in_tunnels"], "6–10");
    assert_eq!(
        doc.metadata["floor_binds_in_tunnels_by_entry"],
        "entry cycle 0: 6–10; entry cycle 1: 5–10; entry cycle 2: 4–10"
    );
    // The table itself agrees: p_exit is the background probability where the floor binds.
    let table = &doc.tables[0];
    let (entry, tunnel, p) = (
        table.column("entry_cycle"),
        table.column("tunnel"),
        table.column("p_exit"),
    );
    let disease = 1.0 - (-0.002f64 * 12.0).exp();
    for i in 0..p.len() {
        let k = tunnel[i] as usize;
        let e = entry[i] as usize;
        let expected = if k + e >= 6 { 0.05 } else { disease };
        assert!(
            (p[i] - expected).abs() < 1e-12,
            "entry {e} tunnel {k}: {} vs {expected}",
            p[i]
        );
    }
    // Without a floor the by-entry key is absent.
    let plain = with_mode("add");
    assert!(!plain
        .metadata
        .contains_key("floor_binds_in_tunnels_by_entry"));
}
