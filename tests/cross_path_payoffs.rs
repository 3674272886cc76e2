//! Cross-path consistency, payoff leg: one curve (the invented Weibull of
//! `tests/scenario/mod.rs`), each adjustment, a stepped payoff schedule with one-offs, and every
//! path that writes payoffs: `tunnels` (CSV, JSON, XLSX long layout, the matrix layout's CSV
//! companion, from published parameters and from a fit file), `horizon` (the exact discounted
//! total and the cycle-integrated one), `draws` (each draw's payoff columns, CSV streamed and
//! JSON) and `run` with `[payoffs]`. Expectations come from the closed-form survival of
//! `tests/closed_form/mod.rs` integrated here by composite Gauss–Legendre quadrature (split
//! where the hazard has a kink), without the library.

mod closed_form;
mod scenario;
mod shell;

use closed_form::{background_hazard, crossing, survival, Adjust, Weibull};
use scenario::{
    adjust_args, adjust_toml, read_xlsx, write_fit, write_lifetable, write_trial, JsonTables,
    ADJUSTMENTS, CURVE, FROM_FIT, PUBLISHED,
};
use shell::{read_csv_table, tunnelcast};
use std::path::Path;

const COUNT: usize = 36;
const DISCOUNT: f64 = 0.035;
const REL: f64 = 1e-9;
const SCHEDULE: &str = "payoff,kind,from,amount,per\ncost,rate,0,800,1 month\ncost,rate,6 months,200,1 month\ncost,at_entry,,1000,\ncost,at_exit,,4000,\nqol,rate,0,0.7,1 year\nqol,rate,3 months,0.85,1 year\n";

/// Rate per month of each payoff at time t (months) since entry, and its one-offs.
fn rate(payoff: &str, t: f64) -> f64 {
    match payoff {
        "cost" => {
            if t < 6.0 {
                800.0
            } else {
                200.0
            }
        }
        _ => {
            if t < 3.0 {
                0.7 / 12.0
            } else {
                0.85 / 12.0
            }
        }
    }
}

fn one_offs(payoff: &str) -> (f64, f64) {
    if payoff == "cost" {
        (1000.0, 4000.0)
    } else {
        (0.0, 0.0)
    }
}

/// 10-point Gauss–Legendre nodes and weights on [-1, 1] (Abramowitz and Stegun, 1964, table 25.4).
const GL: [(f64, f64); 5] = [
    (0.148_874_338_981_631_2, 0.295_524_224_714_752_9),
    (0.433_395_394_129_247_2, 0.269_266_719_309_996_4),
    (0.679_409_568_299_024_4, 0.219_086_362_515_982),
    (0.865_063_366_688_984_5, 0.149_451_349_150_580_6),
    (0.973_906_528_517_171_7, 0.066_671_344_308_688_1),
];

/// ∫ f over [a, b], composite 10-point Gauss–Legendre on 16 panels, split at `kinks`.
fn integrate(f: &dyn Fn(f64) -> f64, a: f64, b: f64, kinks: &[f64]) -> f64 {
    let mut edges = vec![a];
    edges.extend(kinks.iter().copied().filter(|k| *k > a && *k < b));
    edges.push(b);
    let mut total = 0.0;
    for e in edges.windows(2) {
        let width = (e[1] - e[0]) / 16.0;
        for p in 0..16 {
            let mid = e[0] + (p as f64 + 0.5) * width;
            let half = 0.5 * width;
            for (x, w) in GL {
                total += w * half * (f(mid - half * x) + f(mid + half * x));
            }
        }
    }
    total
}

/// Where the hazard has a kink: the floor's crossing.
fn kinks(w: Weibull, adjust: Adjust) -> Vec<f64> {
    match adjust {
        Adjust::Floor { qx } => vec![crossing(w, background_hazard(qx))],
        _ => Vec::new(),
    }
}

/// Per-tunnel payoff of tunnel k (1-based), monthly cycles, by the contract's definition;
/// the exit term by parts: ∫ f/S0 e^(-δ(u-t0)) = 1 - S1/S0 e^(-δΔ) - δ ∫ S/S0 e^(-δ(u-t0)).
fn expected(w: Weibull, adjust: Adjust, payoff: &str, k: usize, discount: f64) -> f64 {
    let delta = (1.0 + discount).ln() / 12.0;
    let (t0, t1) = ((k - 1) as f64, k as f64);
    let s0 = survival(w, adjust, t0);
    let kinks = kinks(w, adjust);
    let stay = |u: f64| survival(w, adjust, u) / s0 * (-delta * (u - t0)).exp();
    let accrued = integrate(&|u| rate(payoff, u) * stay(u), t0, t1, &kinks);
    let (entry, exit) = one_offs(payoff);
    let exit_part = if exit == 0.0 {
        0.0
    } else {
        let leave = 1.0
            - survival(w, adjust, t1) / s0 * (-delta).exp()
            - delta * integrate(&stay, t0, t1, &kinks);
        exit * leave
    };
    accrued + exit_part + if k == 1 { entry } else { 0.0 }
}

fn check_columns(what: &str, columns: &[String], rows: &[Vec<f64>], w: Weibull, adjust: Adjust) {
    for payoff in ["cost", "qol"] {
        let j = columns
            .iter()
            .position(|c| *c == format!("payoff_{payoff}"))
            .unwrap_or_else(|| panic!("{what}: no payoff_{payoff} in {columns:?}"));
        assert_eq!(rows.len(), COUNT, "{what}");
        for (i, row) in rows.iter().enumerate() {
            let want = expected(w, adjust, payoff, i + 1, DISCOUNT);
            assert!(
                (row[j] - want).abs() <= REL * want.abs(),
                "{what} {adjust:?} payoff_{payoff} tunnel {}: {} against {want}",
                i + 1,
                row[j]
            );
        }
    }
}

fn cli(d: &Path, command: &str, curve: &[&str], adjust: Adjust, extra: &[&str]) {
    tunnelcast(d)
        .arg(command)
        .args(curve)
        .args(adjust_args(adjust))
        .args(["--cycle", "1 month", "--payoffs", "p.csv"])
        .args(["--discount", &DISCOUNT.to_string()])
        .args(extra)
        .assert()
        .success();
}

fn check_paths(name: &str) {
    let adjust = ADJUSTMENTS.iter().find(|(n, _)| *n == name).unwrap().1;
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_fit(d);
    write_lifetable(d);
    std::fs::write(d.join("p.csv"), SCHEDULE).unwrap();
    let count = ["--count", "36"];

    // tunnels, every format and both curve sources.
    for (curve, tag) in [(&PUBLISHED[..], "pub"), (&FROM_FIT[..], "from-fit")] {
        for ext in ["csv", "json", "xlsx"] {
            let out = format!("{tag}.{ext}");
            let mut extra = count.to_vec();
            extra.extend(["--out", &out]);
            cli(d, "tunnels", curve, adjust, &extra);
            let (columns, rows) = match ext {
                "csv" => {
                    let t = read_csv_table(&d.join(&out));
                    (t.columns.clone(), t.numbers())
                }
                "json" => {
                    let j = JsonTables::read(&d.join(&out));
                    (j.columns("tunnels"), j.rows("tunnels"))
                }
                _ => read_xlsx(&d.join(&out), "tunnels"),
            };
            check_columns(
                &format!("tunnels {tag} {ext}"),
                &columns,
                &rows,
                CURVE,
                adjust,
            );
        }
    }
    let mut extra = count.to_vec();
    extra.extend(["--layout", "matrix", "--out", "m.csv"]);
    cli(d, "tunnels", &PUBLISHED, adjust, &extra);
    let m = read_csv_table(&d.join("m.payoffs.csv"));
    check_columns("matrix companion", &m.columns, &m.numbers(), CURVE, adjust);

    // horizon: exact and cycle-integrated discounted totals to 36 months against the sum of the
    // expected per-tunnel payoffs weighted by S(t_j) (1+R)^-t_j (the contract's definition).
    cli(
        d,
        "horizon",
        &PUBLISHED,
        adjust,
        &["--horizon", "36 months", "--json", "h.json"],
    );
    let h: serde_json::Value =
        serde_json::from_slice(&std::fs::read(d.join("h.json")).unwrap()).unwrap();
    for payoff in ["cost", "qol"] {
        let want: f64 = (0..COUNT)
            .map(|j| {
                survival(CURVE, adjust, j as f64)
                    * (1.0 + DISCOUNT).powf(-(j as f64) / 12.0)
                    * expected(CURVE, adjust, payoff, j + 1, DISCOUNT)
            })
            .sum();
        for row in h["payoffs"].as_array().unwrap() {
            if row["payoff"] != payoff {
                continue;
            }
            if row["method"] == "cycle-integrated" {
                let got = row["disc_total"].as_f64().unwrap();
                assert!(
                    (got - want).abs() <= REL * want,
                    "horizon {payoff} {adjust:?}"
                );
            }
            let exact = row["disc_exact"].as_f64().unwrap();
            assert!(
                (exact - want).abs() <= REL * want,
                "horizon exact {payoff} {adjust:?}"
            );
        }
    }

    // draws: each draw's payoff columns are those of its own parameters (JSON holds them).
    let mut extra = count.to_vec();
    extra.extend(["--draws", "3", "--seed", "5", "--quiet", "--out", "d.json"]);
    cli(d, "draws", &FROM_FIT, adjust, &extra);
    let mut extra = count.to_vec();
    extra.extend(["--draws", "3", "--seed", "5", "--quiet", "--out", "d.csv"]);
    cli(d, "draws", &FROM_FIT, adjust, &extra);
    let json = JsonTables::read(&d.join("d.json"));
    let columns = json.columns("draws");
    let rows = json.rows("draws");
    assert_eq!(
        read_csv_table(&d.join("d.csv")).numbers(),
        rows,
        "draws CSV and JSON"
    );
    let params = json.rows("parameters");
    for (i, p) in params.iter().enumerate() {
        let w = Weibull {
            shape: p[1],
            scale: p[2],
        };
        let own: Vec<Vec<f64>> = rows
            .iter()
            .filter(|r| r[0] as usize == i + 1)
            .map(|r| r[1..].to_vec())
            .collect();
        check_columns(&format!("draw {}", i + 1), &columns[1..], &own, w, adjust);
    }

    // run with [payoffs]: the expectations at the parameters of the fit it wrote.
    write_trial(d);
    let analysis = format!(
        "title = \"cross-path payoffs (invented)\"\n\n[data]\nfile = \"trial.csv\"\ntime_unit = \"months\"\n\n\
         [fit]\nfamilies = [\"weibull\"]\nchoose = \"weibull\"\n\n\
         [tunnels]\ncycle = \"1 month\"\ncount = 36\nhorizon = \"10 years\"\n\n\
         [payoffs]\nfile = \"p.csv\"\ndiscount = {DISCOUNT}\n\n[output]\nformats = [\"csv\", \"json\"]\n\n{}",
        adjust_toml(adjust)
    );
    std::fs::write(d.join("analysis.toml"), analysis).unwrap();
    tunnelcast(d)
        .args(["run", "analysis.toml", "--out", "out"])
        .assert()
        .success();
    let fit: serde_json::Value =
        serde_json::from_slice(&std::fs::read(d.join("out/fit.json")).unwrap()).unwrap();
    let p = &fit["fits"][0]["params"];
    let w = Weibull {
        shape: p["shape"].as_f64().unwrap(),
        scale: p["scale"].as_f64().unwrap(),
    };
    let run = JsonTables::read(&d.join("out/tunnels.json"));
    check_columns(
        "run",
        &run.columns("tunnels"),
        &run.rows("tunnels"),
        w,
        adjust,
    );
    let csv = read_csv_table(&d.join("out/tunnels.csv"));
    assert_eq!(csv.numbers(), run.rows("tunnels"), "run CSV and JSON");
}

#[test]
fn no_adjustment_gives_the_same_payoffs_on_every_path() {
    check_paths("none");
}

#[test]
fn a_hazard_ratio_gives_the_same_payoffs_on_every_path() {
    check_paths("hazard ratio");
}

#[test]
fn an_acceleration_factor_gives_the_same_payoffs_on_every_path() {
    check_paths("acceleration factor");
}

#[test]
fn waning_gives_the_same_payoffs_on_every_path() {
    check_paths("waning");
}

#[test]
fn added_background_mortality_gives_the_same_payoffs_on_every_path() {
    check_paths("add");
}

#[test]
fn a_background_floor_gives_the_same_payoffs_on_every_path() {
    check_paths("floor");
}
