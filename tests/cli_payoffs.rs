//! Command-line tests of payoffs by time since entry (`tunnels --payoffs`, `horizon --payoffs`):
//! every format and layout read back by independent readers (csv, serde_json, calamine) and
//! compared with values the library under test did not compute: the mpmath fixture
//! `tests/reference/payoff_reference.json` (from `tests/reference/payoff_reference.py`, the
//! contract's definitions integrated at 30 digits) and closed forms of the exponential curve under
//! each adjustment. Bad payoff files: exit 2, one line naming file, line and column, no output.

mod shell;
use calamine::{Data, Reader, Xlsx};
use shell::{listing, read_csv_table, read_table, tunnelcast};
use std::collections::BTreeMap;
use std::path::Path;

#[derive(serde::Deserialize)]
struct Reference {
    rows: Vec<[String; 5]>,
    cases: Vec<Case>,
}

#[derive(serde::Deserialize)]
struct Case {
    name: String,
    family: String,
    params: Vec<f64>,
    cuts: Vec<f64>,
    time_unit: String,
    cycle: String,
    cycles: usize,
    discount: f64,
    tunnels: BTreeMap<String, Pair<Vec<f64>>>,
    methods: BTreeMap<String, Pair<Totals>>,
    truncation: BTreeMap<String, Vec<f64>>,
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

fn reference() -> Reference {
    serde_json::from_str(include_str!("reference/payoff_reference.json")).unwrap()
}

/// The payoff file of the fixture's rows.
fn payoff_csv(rows: &[[String; 5]]) -> String {
    let mut text = String::from("payoff,kind,from,amount,per\n");
    for r in rows {
        text.push_str(&format!("{},{},{},{},{}\n", r[0], r[1], r[2], r[3], r[4]));
    }
    text
}

/// The curve options of a fixture case (published parameters).
fn curve_args(case: &Case) -> Vec<String> {
    let mut a: Vec<String> = vec!["--family".into(), case.family.clone()];
    let params: Vec<String> = match case.family.as_str() {
        "exponential" => vec![format!("rate={}", case.params[0])],
        "weibull" => vec![
            format!("shape={}", case.params[0]),
            format!("scale={}", case.params[1]),
        ],
        "piecewise" => {
            let mut bounds: Vec<String> = vec!["0".into()];
            bounds.extend(case.cuts.iter().map(|c| c.to_string()));
            bounds.push("inf".into());
            a.extend([
                "--cuts".into(),
                case.cuts
                    .iter()
                    .map(|c| format!("{c} {}", case.time_unit))
                    .collect::<Vec<_>>()
                    .join(","),
            ]);
            case.params
                .iter()
                .enumerate()
                .map(|(i, r)| format!("rate[{},{})={r}", bounds[i], bounds[i + 1]))
                .collect()
        }
        other => panic!("no CLI form for {other}"),
    };
    for p in params {
        a.extend(["--param".into(), p]);
    }
    a.extend(["--time-unit".into(), case.time_unit.clone()]);
    a
}

/// |a - b| within `rel` of |b| (or 1e-12 absolute near 0).
fn close(a: f64, b: f64, rel: f64, what: &str) {
    assert!(
        (a - b).abs() <= rel * b.abs() + 1e-12,
        "{what}: {a} against {b} (relative {:e})",
        ((a - b) / b).abs()
    );
}

fn number(c: &Data) -> f64 {
    match c {
        Data::Float(x) => *x,
        Data::Int(i) => *i as f64,
        other => panic!("expected a number, got {other:?}"),
    }
}

/// Columns `payoff_NAME` of an XLSX sheet.
fn xlsx_columns(path: &Path, sheet: &str) -> BTreeMap<String, Vec<f64>> {
    let mut book: Xlsx<_> = calamine::open_workbook(path).unwrap();
    let range = book.worksheet_range(sheet).unwrap();
    let mut rows = range.rows();
    let header: Vec<String> = rows.next().unwrap().iter().map(|c| c.to_string()).collect();
    let body: Vec<&[Data]> = rows.collect();
    header
        .iter()
        .enumerate()
        .filter(|(_, h)| h.starts_with("payoff_"))
        .map(|(j, h)| (h.clone(), body.iter().map(|r| number(&r[j])).collect()))
        .collect()
}

#[test]
fn tunnel_payoff_columns_match_the_mpmath_reference_in_every_format_and_layout() {
    let reference = reference();
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    std::fs::write(d.join("payoffs.csv"), payoff_csv(&reference.rows)).unwrap();
    for case in &reference.cases {
        for (discount, discounted) in [(case.discount, true), (0.0, false)] {
            let tag = format!("{}-{discounted}", case.name);
            let mut base = vec!["tunnels".to_string()];
            base.extend(curve_args(case));
            base.extend([
                "--cycle".into(),
                case.cycle.clone(),
                "--count".into(),
                case.cycles.to_string(),
                "--payoffs".into(),
                "payoffs.csv".into(),
                "--discount".into(),
                discount.to_string(),
            ]);
            for (layout, ext) in [
                ("long", "csv"),
                ("long", "json"),
                ("long", "xlsx"),
                ("matrix", "csv"),
                ("matrix", "json"),
                ("matrix", "xlsx"),
            ] {
                let out = format!("{tag}-{layout}.{ext}");
                let mut a = base.clone();
                a.extend([
                    "--layout".into(),
                    layout.into(),
                    "--out".into(),
                    out.clone(),
                ]);
                tunnelcast(d).args(&a).assert().success();
                let got: BTreeMap<String, Vec<f64>> = match (layout, ext) {
                    ("long", "csv") => {
                        let t = read_csv_table(&d.join(&out));
                        let c = t.numbers();
                        t.columns
                            .iter()
                            .enumerate()
                            .filter(|(_, n)| n.starts_with("payoff_"))
                            .map(|(j, n)| (n.clone(), c.iter().map(|r| r[j]).collect()))
                            .collect()
                    }
                    ("matrix", "csv") => {
                        let side = d.join(format!("{tag}-{layout}.payoffs.csv"));
                        let t = read_csv_table(&side);
                        assert_eq!(t.columns[0], "tunnel");
                        let c = t.numbers();
                        t.columns
                            .iter()
                            .enumerate()
                            .skip(1)
                            .map(|(j, n)| (n.clone(), c.iter().map(|r| r[j]).collect()))
                            .collect()
                    }
                    (_, "json") => {
                        let file = read_table(&d.join(&out));
                        let name = if layout == "long" {
                            "tunnels"
                        } else {
                            "payoffs"
                        };
                        let t = file.tables.iter().find(|t| t.name == name).unwrap();
                        assert_eq!(
                            file.metadata["payoffs"], "payoffs.csv",
                            "metadata names the payoff file"
                        );
                        t.columns
                            .iter()
                            .enumerate()
                            .filter(|(_, n)| n.starts_with("payoff_"))
                            .map(|(j, n)| {
                                (
                                    n.clone(),
                                    t.rows.iter().map(|r| r[j].as_f64().unwrap()).collect(),
                                )
                            })
                            .collect()
                    }
                    (_, "xlsx") => {
                        let sheet = if layout == "long" {
                            "tunnels"
                        } else {
                            "payoffs"
                        };
                        xlsx_columns(&d.join(&out), sheet)
                    }
                    _ => unreachable!(),
                };
                assert_eq!(
                    got.len(),
                    case.tunnels.len(),
                    "{out}: one column per payoff"
                );
                for (name, expected) in &case.tunnels {
                    let expected = if discounted {
                        &expected.discounted
                    } else {
                        &expected.plain
                    };
                    let column = &got[&format!("payoff_{name}")];
                    assert_eq!(column.len(), expected.len(), "{out} {name}");
                    for (k, (a, b)) in column.iter().zip(expected).enumerate() {
                        close(
                            *a,
                            *b,
                            1e-10,
                            &format!("{out} payoff_{name} tunnel {}", k + 1),
                        );
                    }
                }
            }
        }
    }
}

#[derive(serde::Deserialize)]
struct HorizonJson {
    suggested_count: usize,
    suggested_count_without_payoffs: usize,
    truncation: Vec<BTreeMap<String, f64>>,
    payoffs: Vec<MethodRow>,
}

#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct MethodRow {
    payoff: String,
    method: String,
    total: f64,
    exact: f64,
    error: f64,
    rel_error: Option<f64>,
    disc_total: f64,
    disc_exact: f64,
    disc_error: f64,
    disc_rel_error: Option<f64>,
}

#[test]
fn horizon_payoff_table_and_truncation_match_the_mpmath_reference() {
    let reference = reference();
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    std::fs::write(d.join("payoffs.csv"), payoff_csv(&reference.rows)).unwrap();
    for case in &reference.cases {
        let json = format!("{}.json", case.name);
        let mut a = vec!["horizon".to_string()];
        a.extend(curve_args(case));
        // The horizon in the cycle's unit: N whole cycles.
        let cycle: Vec<&str> = case.cycle.split_whitespace().collect();
        let value: f64 = cycle[0].parse().unwrap();
        a.extend([
            "--cycle".into(),
            case.cycle.clone(),
            "--horizon".into(),
            format!("{} {}", value * case.cycles as f64, cycle[1]),
            "--discount".into(),
            case.discount.to_string(),
            "--payoffs".into(),
            "payoffs.csv".into(),
            "--json".into(),
            json.clone(),
        ]);
        let out = tunnelcast(d).args(&a).assert().success();
        let text = String::from_utf8(out.get_output().stdout.clone()).unwrap();
        assert!(text.contains("cycle-integrated"), "{text}");
        let h: HorizonJson =
            serde_json::from_slice(&std::fs::read(d.join(&json)).unwrap()).unwrap();
        assert_eq!(h.payoffs.len(), 6 * case.methods.len());
        for row in &h.payoffs {
            let what = format!("{} {} {}", case.name, row.payoff, row.method);
            let m = &case.methods[&row.payoff];
            close(row.exact, m.plain.exact, 1e-10, &what);
            close(row.disc_exact, m.discounted.exact, 1e-10, &what);
            close(row.total, m.plain.totals[&row.method], 1e-10, &what);
            close(
                row.disc_total,
                m.discounted.totals[&row.method],
                1e-10,
                &what,
            );
            // Errors are total - exact, relative errors against |exact|.
            close(row.error, row.total - row.exact, 1e-9, &what);
            close(row.disc_error, row.disc_total - row.disc_exact, 1e-9, &what);
            close(
                row.rel_error.unwrap(),
                row.error / row.exact.abs(),
                1e-9,
                &what,
            );
            close(
                row.disc_rel_error.unwrap(),
                row.disc_error / row.disc_exact.abs(),
                1e-9,
                &what,
            );
        }
        assert_eq!(h.truncation.len(), case.cycles);
        for (name, expected) in &case.truncation {
            for (k, e) in expected.iter().enumerate() {
                let got = h.truncation[k][&format!("payoff_rel_error_{name}")];
                assert!(
                    (got - e).abs() <= 1e-8 * e.abs() + 1e-12,
                    "{} {name} K={}: {got} against {e}",
                    case.name,
                    k + 1
                );
            }
        }
        // The suggested count is the smallest K meeting every criterion (checked here from the
        // JSON's own columns), and never below the count without the payoffs.
        let meets = |r: &BTreeMap<String, f64>| {
            r.iter().all(|(k, v)| {
                !(k == "max_surv_gap" || k == "ly_rel_error" || k.starts_with("payoff_rel_error_"))
                    || *v <= 0.001
            })
        };
        let first = h
            .truncation
            .iter()
            .position(meets)
            .map_or(case.cycles, |i| i + 1);
        assert_eq!(h.suggested_count, first, "{}", case.name);
        assert!(h.suggested_count >= h.suggested_count_without_payoffs);
    }
}

/// (1 - e^(-x h)) / x, the integral of e^(-x u) over [0, h].
fn decay(x: f64, h: f64) -> f64 {
    -(-x * h).exp_m1() / x
}

#[test]
fn adjusted_exponential_payoffs_follow_the_adjusted_hazard() {
    // Exponential, 0.04 a month; a rate of 100 a month and 1,000 on exit; monthly cycles,
    // discount 3.5% a year. Per tunnel (closed form, common practice for a constant hazard Λ and
    // continuous discount δ): 100·(1 - e^(-(Λ+δ)h))/(Λ+δ) + 1000·Λ·(same), the same in every
    // tunnel. Λ for each adjustment: hazard ratio X: 0.04·X; acceleration factor X: 0.04/X;
    // background `add` of a constant qx: 0.04 + μ; `floor`: max(0.04, μ), μ = -ln(1 - qx)/12.
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    std::fs::write(
        d.join("payoffs.csv"),
        "payoff,kind,from,amount,per\ncare,rate,0,100,1 month\ncare,at_exit,,1000,\n",
    )
    .unwrap();
    let mut table = String::from("age,qx\n");
    for age in 40..=100 {
        table.push_str(&format!("{age},0.3\n"));
    }
    std::fs::write(d.join("life.csv"), table).unwrap();
    let lambda = 0.04;
    let mu = -(1.0f64 - 0.3).ln() / 12.0;
    let delta = 1.035f64.ln() / 12.0;
    let cases: Vec<(Vec<&str>, f64)> = vec![
        (vec![], lambda),
        (vec!["--hazard-ratio", "0.6"], lambda * 0.6),
        (vec!["--acceleration-factor", "1.5"], lambda / 1.5),
        (
            vec![
                "--background",
                "life.csv",
                "--start-age",
                "50",
                "--background-mode",
                "add",
            ],
            lambda + mu,
        ),
        (
            vec![
                "--background",
                "life.csv",
                "--start-age",
                "50",
                "--background-mode",
                "floor",
            ],
            lambda.max(mu),
        ),
    ];
    for (i, (extra, hazard)) in cases.iter().enumerate() {
        let out = format!("t{i}.csv");
        tunnelcast(d)
            .args([
                "tunnels",
                "--family",
                "exponential",
                "--param",
                "rate=0.04",
                "--time-unit",
                "months",
                "--cycle",
                "1 month",
                "--count",
                "24",
                "--payoffs",
                "payoffs.csv",
                "--discount",
                "0.035",
                "--out",
                &out,
            ])
            .args(extra)
            .assert()
            .success();
        let t = read_csv_table(&d.join(&out));
        let expected = (100.0 + 1000.0 * hazard) * decay(hazard + delta, 1.0);
        for k in 0..24 {
            close(
                t.number(k, "payoff_care"),
                expected,
                1e-10,
                &format!("{extra:?} tunnel {}", k + 1),
            );
        }
    }
}

#[test]
fn bad_payoff_files_are_refused_in_one_line_with_no_output() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let cases = [
        (
            "payoff,kind,from,amount,per\ncost,rate,0,500,1 month\ncost,rates,1 year,50,1 month\n",
            "line 3 column 2",
        ),
        (
            "payoff,kind,from,amount,per\ncost,rate,1 month,500,1 month\n",
            "line 2 column 3",
        ),
        (
            "payoff,kind,from,amount,per\ncost,rate,0,500,1 month\ncost,rate,0 years,50,1 month\n",
            "line 3 column 3",
        ),
        (
            "payoff,kind,from,amount,per\ncost,rate,0,500,1 month\ncost,rate,12 months,50,1 month\ncost,rate,6 months,5,1 month\n",
            "line 4 column 3",
        ),
        (
            "payoff,kind,from,amount,per\ncost,rate,0,500,fortnightly\n",
            "line 2 column 5",
        ),
        (
            "payoff;kind;from;amount;per\ncost;rate;0;500,5;1 month\n",
            "line 2 column 4",
        ),
        ("payoff,kind,from,amount\ncost,at_entry,,5\n", "line 1"),
    ];
    for (i, (text, place)) in cases.iter().enumerate() {
        let file = format!("bad{i}.csv");
        std::fs::write(d.join(&file), text).unwrap();
        let before = listing(d);
        for command in ["tunnels", "horizon"] {
            let mut a = vec![
                command,
                "--family",
                "exponential",
                "--param",
                "rate=0.04",
                "--time-unit",
                "months",
                "--cycle",
                "1 month",
                "--payoffs",
                &file,
            ];
            if command == "tunnels" {
                a.extend(["--count", "3", "--out", "out.csv"]);
            } else {
                a.extend(["--json", "out.json"]);
            }
            let out = tunnelcast(d).args(&a).assert().code(2);
            let stderr = String::from_utf8(out.get_output().stderr.clone()).unwrap();
            assert_eq!(stderr.trim_end().lines().count(), 1, "{stderr}");
            assert!(
                stderr.starts_with(&format!("error: {file} {place}")),
                "{i}: {stderr}"
            );
            assert!(!stderr.contains("panicked"));
            assert_eq!(listing(d), before, "no output for {file}");
        }
    }
}

#[test]
fn matrix_csv_with_payoffs_writes_the_payoff_table_beside_it_with_its_descriptor() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    std::fs::write(
        d.join("p.csv"),
        "payoff,kind,from,amount,per\nqaly,rate,0,0.7,1 year\n",
    )
    .unwrap();
    let base = [
        "tunnels",
        "--family",
        "exponential",
        "--param",
        "rate=0.04",
        "--time-unit",
        "months",
        "--cycle",
        "1 month",
        "--count",
        "5",
        "--payoffs",
        "p.csv",
        "--layout",
        "matrix",
        "--out",
        "m.csv",
    ];
    tunnelcast(d).args(base).assert().success();
    assert_eq!(
        listing(d),
        [
            "m.csv",
            "m.payoffs.csv",
            "m.payoffs.resource.json",
            "m.resource.json",
            "p.csv"
        ]
    );
    let side = read_csv_table(&d.join("m.payoffs.csv"));
    assert_eq!(side.columns, ["tunnel", "payoff_qaly"]);
    // 0.7/12 a month on a constant hazard of 0.04 a month, undiscounted.
    for k in 0..5 {
        close(
            side.number(k, "payoff_qaly"),
            0.7 / 12.0 * decay(0.04, 1.0),
            1e-12,
            "qaly",
        );
    }
    // Neither file is replaced without --force, and the refusal names the companion.
    std::fs::remove_file(d.join("m.csv")).unwrap();
    std::fs::remove_file(d.join("m.resource.json")).unwrap();
    let out = tunnelcast(d).args(base).assert().code(2);
    let stderr = String::from_utf8(out.get_output().stderr.clone()).unwrap();
    assert!(stderr.contains("m.payoffs"), "{stderr}");
    assert!(!d.join("m.csv").exists());
}
