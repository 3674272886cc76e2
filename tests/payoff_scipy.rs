//! Payoffs of the command-line outputs against independent quadrature by SciPy
//! (`tests/reference/payoff_scipy_reference.py`, fixture `payoff_scipy_reference.json`): the
//! log-normal, log-logistic, Gompertz (growing and levelling off) and generalized gamma curves
//! with a stepped schedule, per tunnel and to the horizon by every method, discounted and not;
//! and `tunnels --entry-cycles` with the (invented) demo life table added.

mod shell;
use shell::{read_csv_table, read_table, tunnelcast};
use std::collections::BTreeMap;
use std::path::Path;

#[derive(serde::Deserialize)]
struct Reference {
    rows: Vec<[String; 5]>,
    cases: Vec<Case>,
    entry: Entry,
}

#[derive(serde::Deserialize)]
struct Case {
    name: String,
    family: String,
    params: BTreeMap<String, f64>,
    cycle_months: f64,
    cycles: usize,
    discount: f64,
    p_exit: Vec<f64>,
    tunnels: BTreeMap<String, Pair<Vec<f64>>>,
    methods: BTreeMap<String, Pair<Totals>>,
}

#[derive(serde::Deserialize)]
struct Pair<T> {
    plain: T,
    discounted: T,
}

#[derive(serde::Deserialize)]
struct Totals {
    exact: f64,
    totals: BTreeMap<String, f64>,
}

#[derive(serde::Deserialize)]
struct Entry {
    params: BTreeMap<String, f64>,
    cycle_months: f64,
    count: usize,
    entry_cycles: usize,
    start_age: f64,
    discount: f64,
    rows: Vec<EntryRow>,
}

#[derive(serde::Deserialize)]
struct EntryRow {
    entry_cycle: usize,
    entry_age: f64,
    tunnel: usize,
    p_exit: f64,
    payoff_cost: f64,
    payoff_qol: f64,
}

fn reference() -> Reference {
    serde_json::from_str(include_str!("reference/payoff_scipy_reference.json")).unwrap()
}

fn setup(d: &Path, rows: &[[String; 5]]) {
    let mut text = String::from("payoff,kind,from,amount,per\n");
    for r in rows {
        text.push_str(&r.join(","));
        text.push('\n');
    }
    std::fs::write(d.join("payoffs.csv"), text).unwrap();
    std::fs::copy(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("data/demo_lifetable.csv"),
        d.join("life.csv"),
    )
    .unwrap();
}

fn curve(family: &str, params: &BTreeMap<String, f64>) -> Vec<String> {
    let mut a = vec!["--family".to_string(), family.to_string()];
    for (k, v) in params {
        a.extend(["--param".to_string(), format!("{k}={v}")]);
    }
    a.extend(["--time-unit".into(), "months".into()]);
    a
}

fn close(a: f64, b: f64, rel: f64, what: &str) {
    assert!(
        (a - b).abs() <= rel * b.abs() + 1e-13,
        "{what}: {a} against SciPy {b}"
    );
}

/// Quadrature tolerance of both sides (1e-12 and 1e-13 relative per piece), with room for the
/// survival functions' own rounding.
const TOLERANCE: f64 = 1e-9;

#[test]
fn tunnel_payoffs_match_scipy_for_every_family_discounted_and_not() {
    let r = reference();
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    setup(d, &r.rows);
    for case in &r.cases {
        for (discount, discounted) in [(case.discount, true), (0.0, false)] {
            let out = format!("{}-{discounted}.csv", case.name);
            tunnelcast(d)
                .arg("tunnels")
                .args(curve(&case.family, &case.params))
                .args(["--cycle", &format!("{} months", case.cycle_months)])
                .args(["--count", &case.cycles.to_string()])
                .args([
                    "--payoffs",
                    "payoffs.csv",
                    "--discount",
                    &discount.to_string(),
                ])
                .args(["--out", &out])
                .assert()
                .success();
            let t = read_csv_table(&d.join(&out));
            for (k, p) in case.p_exit.iter().enumerate() {
                close(
                    t.number(k, "p_exit"),
                    *p,
                    TOLERANCE,
                    &format!("{out} p_exit {k}"),
                );
            }
            for (name, pair) in &case.tunnels {
                let expected = if discounted {
                    &pair.discounted
                } else {
                    &pair.plain
                };
                for (k, e) in expected.iter().enumerate() {
                    close(
                        t.number(k, &format!("payoff_{name}")),
                        *e,
                        TOLERANCE,
                        &format!("{out} payoff_{name} tunnel {}", k + 1),
                    );
                }
            }
        }
    }
}

#[test]
fn horizon_methods_match_scipy_for_every_family() {
    let r = reference();
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    setup(d, &r.rows);
    for case in &r.cases {
        let json = format!("{}.json", case.name);
        tunnelcast(d)
            .arg("horizon")
            .args(curve(&case.family, &case.params))
            .args(["--cycle", &format!("{} months", case.cycle_months)])
            .args([
                "--horizon",
                &format!("{} months", case.cycle_months * case.cycles as f64),
            ])
            .args([
                "--payoffs",
                "payoffs.csv",
                "--discount",
                &case.discount.to_string(),
            ])
            .args(["--json", &json])
            .assert()
            .success();
        let h: serde_json::Value =
            serde_json::from_slice(&std::fs::read(d.join(&json)).unwrap()).unwrap();
        let rows = h["payoffs"].as_array().unwrap();
        assert_eq!(rows.len(), 6 * case.methods.len());
        for row in rows {
            let payoff = row["payoff"].as_str().unwrap();
            let method = row["method"].as_str().unwrap();
            let what = format!("{} {payoff} {method}", case.name);
            let m = &case.methods[payoff];
            let f = |key: &str| row[key].as_f64().unwrap();
            close(f("exact"), m.plain.exact, TOLERANCE, &what);
            close(f("disc_exact"), m.discounted.exact, TOLERANCE, &what);
            close(f("total"), m.plain.totals[method], TOLERANCE, &what);
            close(
                f("disc_total"),
                m.discounted.totals[method],
                TOLERANCE,
                &what,
            );
        }
    }
}

#[test]
fn entry_cycles_match_scipy_with_a_life_table_in_csv_and_json() {
    let r = reference();
    let e = &r.entry;
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    setup(d, &r.rows);
    for out in ["entry.csv", "entry.json"] {
        tunnelcast(d)
            .arg("tunnels")
            .args(curve("lognormal", &e.params))
            .args(["--cycle", &format!("{} months", e.cycle_months)])
            .args(["--count", &e.count.to_string()])
            .args(["--background", "life.csv", "--sex", "female"])
            .args(["--start-age", &e.start_age.to_string()])
            .args(["--background-mode", "add"])
            .args(["--entry-cycles", &e.entry_cycles.to_string()])
            .args([
                "--payoffs",
                "payoffs.csv",
                "--discount",
                &e.discount.to_string(),
            ])
            .args(["--out", out])
            .assert()
            .success();
    }
    let csv = read_csv_table(&d.join("entry.csv"));
    assert_eq!(&csv.columns[..3], ["entry_cycle", "entry_age", "tunnel"]);
    assert_eq!(csv.rows.len(), e.entry_cycles * e.count);
    let json = read_table(&d.join("entry.json"));
    let t = &json.tables[0];
    assert_eq!(t.columns, csv.columns);
    let col = |name: &str| csv.column(name);
    for (i, row) in e.rows.iter().enumerate() {
        let what = format!("entry {} tunnel {}", row.entry_cycle, row.tunnel);
        assert_eq!(csv.number(i, "entry_cycle") as usize, row.entry_cycle);
        assert_eq!(csv.number(i, "tunnel") as usize, row.tunnel);
        close(csv.number(i, "entry_age"), row.entry_age, 1e-12, &what);
        close(csv.number(i, "p_exit"), row.p_exit, TOLERANCE, &what);
        close(
            csv.number(i, "payoff_cost"),
            row.payoff_cost,
            TOLERANCE,
            &what,
        );
        close(
            csv.number(i, "payoff_qol"),
            row.payoff_qol,
            TOLERANCE,
            &what,
        );
        for name in ["p_exit", "payoff_cost", "payoff_qol"] {
            assert_eq!(
                t.rows[i][col(name)].as_f64().unwrap(),
                csv.number(i, name),
                "JSON and CSV agree: {what} {name}"
            );
        }
    }
}
