//! The report's per-tunnel tables and its numbers at risk, read back from `report.html` and
//! the plots and checked against the exported files and closed forms computed here:
//! - the tunnel table lists exactly the tunnels starting in the first two years since entry,
//!   each row equal to `tunnels.csv`, and links the full file;
//! - the yearly summary equals products of (1 − p_exit) over the rows of `tunnels.csv`
//!   (S(t) = ∏(1 − p_exit) of the tunnels before t; common practice for a tunnel chain);
//! - for a Weibull curve, the yearly summary equals the closed form exp(−(t/scale)^shape) at
//!   whole years (common practice: the Weibull survival function);
//! - under the Kaplan–Meier plot every axis tick has a number at risk, equal to the count of
//!   records of the data file with time ≥ the tick.
//!
//! Numbers are compared at the report's printed precision (6 significant digits): a printed
//! value may differ from the recomputed one by half a unit in its last digit, plus 1e-9
//! relative for floating-point rounding.

mod shell;
use shell::{parse_report, read_csv_table, read_table, tunnelcast};

use std::path::Path;

const DATA: &str = include_str!("../data/demo_trial.csv");

/// Cells of the HTML table with `id`: the header and the rows.
fn html_table(doc: &roxmltree::Document, id: &str) -> (Vec<String>, Vec<Vec<String>>) {
    let table = doc
        .descendants()
        .find(|n| n.has_tag_name("table") && n.attribute("id") == Some(id))
        .unwrap_or_else(|| panic!("table {id} missing"));
    let text = |n: roxmltree::Node| -> String {
        n.descendants()
            .filter(|d| d.is_text())
            .filter_map(|d| d.text())
            .collect::<String>()
            .trim()
            .to_string()
    };
    let header = table
        .descendants()
        .filter(|n| n.has_tag_name("th"))
        .map(text)
        .collect();
    let rows = table
        .descendants()
        .filter(|n| n.has_tag_name("tbody"))
        .flat_map(|b| b.children().filter(|n| n.has_tag_name("tr")))
        .map(|tr| {
            tr.children()
                .filter(|n| n.has_tag_name("td"))
                .map(text)
                .collect()
        })
        .collect();
    (header, rows)
}

/// `shown` (printed at 6 significant digits) equals `exact` to that precision: within half a
/// unit of the sixth significant digit, plus 1e-9 relative.
fn printed_equal(shown: &str, exact: f64) -> bool {
    let x: f64 = shown
        .parse()
        .unwrap_or_else(|_| panic!("{shown:?} is not a number"));
    if exact == 0.0 {
        return x == 0.0;
    }
    let half_unit = 0.5 * 10f64.powi(exact.abs().log10().floor() as i32 - 5);
    (x - exact).abs() <= half_unit + 1e-9 * exact.abs()
}

/// Length of a year in a table's time unit, from the interface contract (a year is 365.25
/// days, a month a twelfth of a year, a week 7 days).
fn year_in(unit: &str) -> f64 {
    match unit {
        "days" => 365.25,
        "weeks" => 365.25 / 7.0,
        "months" => 12.0,
        "years" => 1.0,
        other => panic!("unknown time unit {other}"),
    }
}

/// What `out` holds, read back: the report, the tunnel CSV as numbers and the year's length
/// in the table's unit.
struct Output {
    html: String,
    tunnels: Vec<Vec<f64>>,
    columns: Vec<String>,
    year: f64,
}

fn read_output(out: &Path) -> Output {
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    let csv = read_csv_table(&out.join("tunnels.csv"));
    let unit = read_table(&out.join("tunnels.json")).metadata["time_unit"].clone();
    Output {
        html,
        tunnels: csv.numbers(),
        columns: csv.columns,
        year: year_in(&unit),
    }
}

/// Checks the listed tunnel rows and the yearly summary of `out` against its `tunnels.csv`;
/// returns the summary rows (year, from, to, tunnels, S(start), S(end), leaving) as numbers.
fn check_tunnel_section(out: &Path) -> Vec<Vec<f64>> {
    let o = read_output(out);
    let doc = parse_report(&o.html);
    let col = |name: &str| o.columns.iter().position(|c| c == name).unwrap();
    let (t_start, t_end, p_exit) = (col("t_start"), col("t_end"), col("p_exit"));

    // Listed rows: exactly those with t_start < 2 years, each equal to the file's row.
    let (_, listed) = html_table(&doc, "table-tunnels");
    let expected = o
        .tunnels
        .iter()
        .filter(|r| r[t_start] < 2.0 * o.year)
        .count();
    assert!(
        expected < o.tunnels.len(),
        "the file must be longer than two years"
    );
    assert_eq!(listed.len(), expected);
    for (shown, row) in listed.iter().zip(&o.tunnels) {
        assert_eq!(shown.len(), row.len());
        for (cell, value) in shown.iter().zip(row) {
            assert!(printed_equal(cell, *value), "{cell} vs {value}");
        }
    }
    // The full table is linked by its relative name, and the link's file is beside the report.
    let links: Vec<&str> = doc
        .descendants()
        .filter_map(|n| n.attribute("href"))
        .filter(|h| !h.starts_with('#'))
        .collect();
    assert!(links.contains(&"tunnels.csv"), "{links:?}");
    for link in links {
        assert!(out.join(link).is_file(), "{link} is not beside the report");
    }

    // Yearly summary, recomputed from the file: each tunnel in the year its cycle starts in.
    let (header, summary) = html_table(&doc, "table-tunnels-yearly");
    assert_eq!(
        header,
        [
            "year",
            "from (years)",
            "to (years)",
            "tunnels",
            "S(start)",
            "S(end)",
            "leaving during the year"
        ]
    );
    let last_end = o.tunnels.last().unwrap()[t_end];
    let years = (last_end / o.year - 1e-9).ceil() as usize;
    assert_eq!(summary.len(), years);
    let mut survival = 1.0;
    let mut next = 0;
    let mut numbers = Vec::new();
    for (y, shown) in summary.iter().enumerate() {
        let in_year: Vec<&Vec<f64>> = o
            .tunnels
            .iter()
            .skip(next)
            .take_while(|r| r[t_start] < (y + 1) as f64 * o.year - 1e-9)
            .collect();
        next += in_year.len();
        let staying: f64 = in_year.iter().map(|r| 1.0 - r[p_exit]).product();
        let (start, end) = (survival, survival * staying);
        let from = in_year[0][t_start] / o.year;
        let to = in_year.last().unwrap()[t_end] / o.year;
        assert_eq!(shown[0], (y + 1).to_string());
        assert!(printed_equal(&shown[1], from), "{shown:?} from {from}");
        assert!(printed_equal(&shown[2], to), "{shown:?} to {to}");
        assert_eq!(shown[3], in_year.len().to_string());
        assert!(
            printed_equal(&shown[4], start),
            "{shown:?} S(start) {start}"
        );
        assert!(printed_equal(&shown[5], end), "{shown:?} S(end) {end}");
        assert!(printed_equal(&shown[6], 1.0 - staying), "{shown:?} leaving");
        numbers.push(shown.iter().map(|c| c.parse().unwrap()).collect());
        survival = end;
    }
    assert_eq!(next, o.tunnels.len(), "every tunnel is in one year");
    numbers
}

#[test]
fn the_demo_report_lists_two_years_of_tunnels_and_a_yearly_summary_of_the_file() {
    let dir = tempfile::tempdir().unwrap();
    tunnelcast(dir.path())
        .args(["demo", "--out", "out"])
        .assert()
        .success();
    let out = dir.path().join("out");
    let summary = check_tunnel_section(&out);
    assert!(summary.len() >= 3, "{} years", summary.len());

    // The other per-tunnel tables (payoff columns, draws) list the same two years.
    let o = read_output(&out);
    let doc = parse_report(&o.html);
    let listed = html_table(&doc, "table-tunnels").1.len();
    assert_eq!(html_table(&doc, "table-payoff-tunnels").1.len(), listed);
    let draws = read_csv_table(&out.join("draws_summary.csv"));
    let (_, shown) = html_table(&doc, "table-draws");
    assert_eq!(shown.len(), listed);
    for (row, file) in shown.iter().zip(draws.numbers()) {
        for (cell, value) in row.iter().zip(&file) {
            assert!(printed_equal(cell, *value), "{cell} vs {value}");
        }
    }
    assert!(o.html.contains("href=\"draws_summary.csv\""));
}

#[test]
fn a_monthly_weibull_table_over_20_years_summarises_to_the_closed_form() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("trial.csv"), DATA).unwrap();
    std::fs::write(
        dir.path().join("analysis.toml"),
        "[data]\nfile = \"trial.csv\"\narm_column = \"arm\"\ntime_unit = \"months\"\n\n[fit]\nfamilies = [\"weibull\"]\nchoose = \"weibull\"\narm = \"standard-care\"\n\n[tunnels]\ncycle = \"1 month\"\ncount = 240\nhorizon = \"20 years\"\n",
    )
    .unwrap();
    tunnelcast(dir.path())
        .args(["run", "analysis.toml", "--out", "out"])
        .assert()
        .success();
    let out = dir.path().join("out");
    let summary = check_tunnel_section(&out);
    assert_eq!(summary.len(), 20);
    assert_eq!(
        html_table(&parse_report(&read_output(&out).html), "table-tunnels")
            .1
            .len(),
        24
    );

    // The fitted Weibull parameters (time in months), and S(t) = exp(−(t/scale)^shape).
    let fits: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("fit.json")).unwrap()).unwrap();
    let fit = fits["fits"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["family"] == "weibull" && f["arm"] == "standard-care")
        .unwrap();
    let (shape, scale) = (
        fit["params"]["shape"].as_f64().unwrap(),
        fit["params"]["scale"].as_f64().unwrap(),
    );
    let survival = |years: f64| (-(12.0 * years / scale).powf(shape)).exp();
    for (k, row) in summary.iter().enumerate() {
        let year = (k + 1) as f64;
        assert_eq!(row[1], year - 1.0);
        assert_eq!(row[2], year);
        assert_eq!(row[3], 12.0);
        let (start, end) = (survival(year - 1.0), survival(year));
        let shown = |x: f64| format!("{x}");
        assert!(printed_equal(&shown(row[4]), start), "{row:?} vs {start}");
        assert!(printed_equal(&shown(row[5]), end), "{row:?} vs {end}");
        assert!(
            printed_equal(&shown(row[6]), 1.0 - end / start),
            "{row:?} vs {}",
            1.0 - end / start
        );
    }
}

/// The text elements of an SVG as (x, y, text).
fn svg_texts(svg: &str) -> Vec<(f64, f64, String)> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .map(|n| {
            let at = |a: &str| n.attribute(a).unwrap().parse::<f64>().unwrap();
            let text: String = n
                .descendants()
                .filter(|d| d.is_text())
                .filter_map(|d| d.text())
                .collect();
            (at("x"), at("y"), text.trim().to_string())
        })
        .collect()
}

#[test]
fn every_axis_tick_of_the_kaplan_meier_plot_has_a_number_at_risk_from_the_data() {
    let dir = tempfile::tempdir().unwrap();
    tunnelcast(dir.path())
        .args(["demo", "--out", "out"])
        .assert()
        .success();
    // Records per arm, time in months (the demo's unit).
    let mut times: std::collections::BTreeMap<String, Vec<f64>> = Default::default();
    for line in DATA.lines().skip(1) {
        let fields: Vec<&str> = line.split(',').collect();
        times
            .entry(fields[2].to_string())
            .or_default()
            .push(fields[0].parse().unwrap());
    }
    assert_eq!(times.len(), 2);
    for (arm, times) in &times {
        let svg =
            std::fs::read_to_string(dir.path().join(format!("out/survival-{arm}.svg"))).unwrap();
        let texts = svg_texts(&svg);
        let find = |label: &str| {
            texts
                .iter()
                .find(|t| t.2 == label)
                .unwrap_or_else(|| panic!("no {label:?} in the plot"))
                .clone()
        };
        // The row of times under the plot is labelled with the axis unit, years for the demo
        // (3.5 years of data), the counts beside "at risk".
        let (_, times_y, _) = find("years");
        let (_, counts_y, _) = find("at risk");
        let numeric_at = |y: f64| -> Vec<(f64, String)> {
            texts
                .iter()
                .filter(|t| t.1 == y && t.2.parse::<f64>().is_ok())
                .map(|t| (t.0, t.2.clone()))
                .collect()
        };
        // The axis tick labels: the row of numbers nearest above the times row.
        let axis_y = texts
            .iter()
            .filter(|t| t.1 < times_y && t.2.parse::<f64>().is_ok())
            .map(|t| t.1)
            .fold(f64::NEG_INFINITY, f64::max);
        let ticks = numeric_at(axis_y);
        assert!(ticks.len() >= 5, "{arm}: axis ticks {ticks:?}");
        let counts = numeric_at(counts_y);
        for (x, label) in &ticks {
            let years: f64 = label.parse().unwrap();
            let (_, count) = counts
                .iter()
                .find(|(cx, _)| (cx - x).abs() < 1.0)
                .unwrap_or_else(|| panic!("{arm}: no number at risk under the tick {label}"));
            let expected = times.iter().filter(|t| **t >= 12.0 * years).count();
            assert_eq!(
                count,
                &expected.to_string(),
                "{arm}: at risk at {label} years"
            );
        }
        // Counts between ticks (within follow-up) are also the data's.
        for (x, count) in &counts {
            let (_, label) = numeric_at(times_y)
                .into_iter()
                .find(|(tx, _)| (tx - x).abs() < 1.0)
                .expect("each count has its time above it");
            let years: f64 = label.parse().unwrap();
            let expected = times.iter().filter(|t| **t >= 12.0 * years).count();
            assert_eq!(
                count,
                &expected.to_string(),
                "{arm}: at risk at {label} years"
            );
        }
    }
}
