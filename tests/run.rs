//! `tunnelcast run` and `tunnelcast demo`: the output folder, the report's structure and
//! numbers (read back and compared with the JSON outputs), re-run stability, and bad input.

mod closed_form;
mod shell;
use shell::{listing, read_package, read_table, tunnelcast};

use std::path::Path;

const DATA: &str = include_str!("../data/demo_trial.csv");
const ANALYSIS: &str = include_str!("../data/demo_analysis.toml");
const LIFETABLE: &str = include_str!("../data/demo_lifetable.csv");
const PAYOFFS: &str = include_str!("../data/demo_payoffs.csv");

/// Writes the demo analysis and its data into `dir` (with `edit` applied to the analysis).
fn setup(dir: &Path, edit: impl Fn(&str) -> String) {
    std::fs::write(dir.join("demo_trial.csv"), DATA).unwrap();
    std::fs::write(dir.join("demo_lifetable.csv"), LIFETABLE).unwrap();
    std::fs::write(dir.join("demo_payoffs.csv"), PAYOFFS).unwrap();
    std::fs::write(dir.join("analysis.toml"), edit(ANALYSIS)).unwrap();
}

/// Cells of the HTML table with `id`, row by row.
fn html_rows(doc: &roxmltree::Document, id: &str) -> Vec<Vec<String>> {
    let table = doc
        .descendants()
        .find(|n| n.has_tag_name("table") && n.attribute("id") == Some(id))
        .unwrap_or_else(|| panic!("table {id} missing"));
    table
        .descendants()
        .filter(|n| n.has_tag_name("tbody"))
        .flat_map(|b| b.children().filter(|n| n.has_tag_name("tr")))
        .map(|tr| {
            tr.children()
                .filter(|n| n.has_tag_name("td"))
                .map(|td| td.text().unwrap_or("").to_string())
                .collect()
        })
        .collect()
}

/// The report shows numbers at 6 significant digits; equal within that rounding.
fn close(shown: &str, exact: f64) -> bool {
    let x: f64 = shown.parse().unwrap_or(f64::NAN);
    (x - exact).abs() <= 1e-5 * exact.abs().max(1e-300) + 1e-300
}

#[test]
fn run_writes_every_output_and_the_report_matches_the_json() {
    let dir = tempfile::tempdir().unwrap();
    setup(dir.path(), |a| a.to_string());
    tunnelcast(dir.path())
        .args(["run", "analysis.toml", "--out", "out"])
        .assert()
        .success();
    let out = dir.path().join("out");
    let names = listing(&out);
    for expected in [
        "analysis.toml",
        "fit.json",
        "report.html",
        "tunnels.csv",
        "tunnels.json",
        "truncation.csv",
        "truncation.json",
        "within_cycle.csv",
        "within_cycle.json",
        "survival-veltranib.svg",
        "survival-veltranib.png",
        "hazard-standard-care.svg",
        "diagnostics-standard-care.png",
        "tunnels.svg",
        "horizon.png",
        "datapackage.json",
        "tunnels.resource.json",
        "truncation.resource.json",
        "within_cycle.resource.json",
        "draws_summary.resource.json",
    ] {
        assert!(
            names.contains(&expected.to_string()),
            "{expected} missing: {names:?}"
        );
    }
    // Every CSV file is plain and described, alone and in the folder's package, which
    // carries the data file's SHA-256 (FIPS 180-4, computed here by the sha2 crate).
    let package = read_package(&out);
    let csv_files: Vec<&String> = names.iter().filter(|n| n.ends_with(".csv")).collect();
    assert_eq!(
        package["resources"].as_array().unwrap().len(),
        csv_files.len()
    );
    use sha2::Digest;
    let sha: String = sha2::Sha256::digest(DATA.as_bytes())
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    assert_eq!(package["tunnelcast"]["data_sha256"], sha.as_str());
    assert!(
        package.get("created").is_none(),
        "a date without SOURCE_DATE_EPOCH"
    );
    // No temporary folder left beside the output.
    assert_eq!(
        listing(dir.path()),
        vec![
            "analysis.toml",
            "demo_lifetable.csv",
            "demo_payoffs.csv",
            "demo_trial.csv",
            "out"
        ]
    );

    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    let doc = shell::parse_report(&html);
    // The reviewer's order (issue 18): the question, the data and Kaplan–Meier curve, the
    // comparison, plausibility, the choice, the adjusted curve, tunnels, horizon checks,
    // uncertainty, reproducibility.
    let order = [
        "question",
        "data",
        "plots",
        "fits",
        "plausibility",
        "chosen",
        "adjustments",
        "tunnels",
        "truncation",
        "within-cycle",
        "draws",
        "caution",
        "reproducibility",
    ];
    let found: Vec<&str> = doc
        .descendants()
        .filter(|n| n.has_tag_name("section"))
        .filter_map(|n| n.attribute("id"))
        .filter(|id| order.contains(id))
        .collect();
    assert_eq!(found, order, "sections missing or out of order");
    // Each of these sections opens with its one-line reading guide.
    for id in [
        "question",
        "data",
        "plots",
        "fits",
        "plausibility",
        "chosen",
        "adjustments",
        "tunnels",
        "truncation",
        "within-cycle",
        "payoffs",
        "draws",
        "caution",
        "reproducibility",
    ] {
        let section = doc
            .descendants()
            .find(|n| n.has_tag_name("section") && n.attribute("id") == Some(id))
            .unwrap();
        let first_paragraph = section.children().find(|n| n.has_tag_name("p"));
        assert_eq!(
            first_paragraph.and_then(|p| p.attribute("class")),
            Some("guide"),
            "section {id} has no reading guide first"
        );
    }
    // The contents list every section, in order, by in-page links.
    let sections: Vec<&str> = doc
        .descendants()
        .filter(|n| n.has_tag_name("section"))
        .filter_map(|n| n.attribute("id"))
        .collect();
    let contents = doc
        .descendants()
        .find(|n| n.attribute("id") == Some("contents"))
        .expect("contents");
    let links: Vec<&str> = contents
        .descendants()
        .filter_map(|n| n.attribute("href"))
        .collect();
    let targets: Vec<String> = sections.iter().map(|id| format!("#{id}")).collect();
    assert_eq!(links, targets);
    // Self-contained: no scripts, no external references; links stay inside the page or name
    // a file written beside the report (the full tables), by its relative name.
    assert!(!doc.descendants().any(|n| n.has_tag_name("script")));
    assert!(!doc.descendants().any(|n| n.attribute("src").is_some()));
    for href in doc.descendants().filter_map(|n| n.attribute("href")) {
        assert!(
            href.starts_with('#') || (!href.contains(['/', ':']) && out.join(href).is_file()),
            "{href}"
        );
    }
    // Every plot of the run is inline.
    let svgs = doc.descendants().filter(|n| n.has_tag_name("svg")).count();
    // Fits per arm (3 each, and the population plot: the demo has a life table), tunnels,
    // horizon and the payoff accrual plot.
    assert_eq!(svgs, 4 * 2 + 3);

    // Tunnel table: every shown cell equals tunnels.json.
    let tunnels = read_table(&out.join("tunnels.json"));
    assert_eq!(tunnels.tables[0].name, "tunnels");
    let shown = html_rows(&doc, "table-tunnels");
    // The rows of the first two years (monthly cycles: t_start < 24 months); the yearly
    // summary and the files hold the rest (tests/report_tables.rs).
    let two_years = tunnels.tables[0]
        .rows
        .iter()
        .filter(|r| r[1].as_f64().unwrap() < 24.0)
        .count();
    assert_eq!(shown.len(), two_years);
    for (html_row, json_row) in shown.iter().zip(&tunnels.tables[0].rows) {
        for (cell, value) in html_row.iter().zip(json_row) {
            assert!(close(cell, value.as_f64().unwrap()), "{cell} vs {value}");
        }
    }
    // Truncation rows: each shown count equals its JSON row.
    let truncation = read_table(&out.join("truncation.json"));
    let suggested: usize = truncation.metadata["suggested_count"].parse().unwrap();
    let rows = html_rows(&doc, "table-truncation");
    assert!(rows.iter().any(|r| r[0] == suggested.to_string()));
    for row in &rows {
        let k: usize = row[0].parse().unwrap();
        let json = &truncation.tables[0].rows[k - 1];
        assert_eq!(json[0].as_u64().unwrap() as usize, k);
        for (cell, value) in row.iter().zip(json).skip(1) {
            assert!(close(cell, value.as_f64().unwrap()), "{cell} vs {value}");
        }
    }
    // The tunnel count is "auto": the suggested count.
    assert_eq!(tunnels.tables[0].rows.len(), suggested);
    // Within-cycle table.
    let within = read_table(&out.join("within_cycle.json"));
    assert_eq!(within.tables[0].columns[0], "method");
    for (row, json) in html_rows(&doc, "table-within-cycle")
        .iter()
        .zip(&within.tables[0].rows)
    {
        assert_eq!(row[0], json[0].as_str().unwrap());
        for (cell, value) in row.iter().zip(json).skip(1) {
            assert!(close(cell, value.as_f64().unwrap()), "{cell} vs {value}");
        }
    }
    // Payoffs: the method table equals payoff_methods.json; the per-tunnel table equals the
    // payoff columns of tunnels.json; cycle-integrated equals exact (docs/payoffs.md).
    let methods = read_table(&out.join("payoff_methods.json"));
    assert_eq!(methods.tables[0].rows.len(), 2 * 6);
    for (row, json) in html_rows(&doc, "table-payoff-methods")
        .iter()
        .zip(&methods.tables[0].rows)
    {
        assert_eq!(row[0], json[0].as_str().unwrap());
        assert_eq!(row[1], json[1].as_str().unwrap());
        for (cell, value) in row.iter().zip(json).skip(2) {
            assert!(close(cell, value.as_f64().unwrap()), "{cell} vs {value}");
        }
        if row[1] == "cycle-integrated" {
            let (total, exact) = (json[6].as_f64().unwrap(), json[7].as_f64().unwrap());
            assert!((total - exact).abs() <= 1e-9 * exact.abs(), "{row:?}");
        }
    }
    let columns = &tunnels.tables[0].columns;
    let payoff_columns: Vec<usize> = (0..columns.len())
        .filter(|&j| columns[j].starts_with("payoff_"))
        .collect();
    assert_eq!(payoff_columns.len(), 2, "{columns:?}");
    for (row, json) in html_rows(&doc, "table-payoff-tunnels")
        .iter()
        .zip(&tunnels.tables[0].rows)
    {
        for (cell, &j) in row.iter().skip(3).zip(&payoff_columns) {
            assert!(close(cell, json[j].as_f64().unwrap()), "{cell}");
        }
    }
    assert!(tunnels.metadata["payoffs"].ends_with("demo_payoffs.csv"));
    // Fit comparison and the chosen curve against fit.json (deserialised by the library's type).
    let fits: tunnelcast::fit::FitFile =
        serde_json::from_slice(&std::fs::read(out.join("fit.json")).unwrap()).unwrap();
    for row in html_rows(&doc, "table-fits-veltranib") {
        let fit = fits
            .fits
            .iter()
            .find(|f| f.family == row[0] && f.arm.as_deref() == Some("veltranib"))
            .unwrap();
        assert!(
            close(&row[3], fit.aic.unwrap()),
            "{} AIC {}",
            row[0],
            row[3]
        );
        assert!(close(&row[2], fit.loglik.unwrap()));
    }
    let best = fits
        .fits
        .iter()
        .filter(|f| f.arm.as_deref() == Some("standard-care") && f.converged)
        .min_by(|a, b| a.aic.unwrap().total_cmp(&b.aic.unwrap()))
        .unwrap();
    assert_eq!(tunnels.metadata["family"], best.family);
    for row in html_rows(&doc, "table-chosen") {
        assert!(close(&row[1], best.params[&row[0]]), "{row:?}");
        assert!(close(&row[2], best.intervals[&row[0]][0]), "{row:?}");
    }
    // Reproducibility block: the data hash and the analysis file verbatim.
    assert!(html.contains(&fits.data.sha256));
    let verbatim = doc
        .descendants()
        .find(|n| n.attribute("id") == Some("analysis-text"))
        .unwrap();
    assert_eq!(verbatim.text().unwrap(), ANALYSIS);
}

/// Rows of a CSV output, header first, skipping any leading `#` comment lines.
fn csv_rows(path: &Path) -> Vec<Vec<String>> {
    std::fs::read_to_string(path)
        .unwrap()
        .lines()
        .skip_while(|l| l.starts_with('#'))
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect()
}

#[test]
fn life_years_of_a_monthly_analysis_are_in_years_in_every_output() {
    // One arm, the exponential family, monthly data and cycles, 5 years: the exact restricted
    // mean is (1 - e^(-60·rate))/rate months (calculus) = that / 12 years (a month is a twelfth
    // of a year, interface), with the rate read from fit.json.
    let dir = tempfile::tempdir().unwrap();
    let one_arm: String = DATA
        .lines()
        .enumerate()
        .filter(|(i, l)| *i == 0 || l.contains("standard-care"))
        .map(|(_, l)| format!("{l}\n"))
        .collect();
    std::fs::write(dir.path().join("trial.csv"), one_arm).unwrap();
    std::fs::write(
        dir.path().join("analysis.toml"),
        "[data]\nfile = \"trial.csv\"\ntime_unit = \"months\"\n\n[fit]\nfamilies = [\"exponential\"]\nchoose = \"exponential\"\n\n[tunnels]\ncycle = \"1 month\"\ncount = 12\nhorizon = \"5 years\"\n",
    )
    .unwrap();
    let printed = tunnelcast(dir.path())
        .args(["run", "analysis.toml", "--out", "out"])
        .output()
        .unwrap();
    assert!(
        printed.status.success(),
        "{}",
        String::from_utf8_lossy(&printed.stderr)
    );
    let out = dir.path().join("out");
    let fits: tunnelcast::fit::FitFile =
        serde_json::from_slice(&std::fs::read(out.join("fit.json")).unwrap()).unwrap();
    let rate = fits.fits[0].params["rate"];
    let expected = (1.0 - (-60.0 * rate).exp()) / rate / 12.0;
    let within = read_table(&out.join("within_cycle.json"));
    assert_eq!(within.metadata["life_years_unit"], "years");
    let exact = within.tables[0]
        .columns
        .iter()
        .position(|c| c == "exact")
        .unwrap();
    for row in &within.tables[0].rows {
        let got = row[exact].as_f64().unwrap();
        assert!(
            (got - expected).abs() < 1e-9 * expected,
            "{got} vs {expected} years"
        );
    }
    let csv = csv_rows(&out.join("within_cycle.csv"));
    let column = csv[0].iter().position(|c| c == "exact").unwrap();
    let got: f64 = csv[1][column].parse().unwrap();
    assert!((got - expected).abs() < 1e-9 * expected);
    // The report's within-cycle table shows the same years, and says so.
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(html.contains("Life-years, in years,"));
    // Columns holding times in another unit say so in their heading.
    // (Headings may break after an underscore: `<wbr/>`.)
    assert!(html.contains("<th>t_<wbr/>start (months)</th><th>t_<wbr/>end (months)</th>"));
    let doc = shell::parse_report(&html);
    for row in html_rows(&doc, "table-within-cycle") {
        assert!(close(&row[exact], expected), "{row:?}");
    }
    // A constant hazard is stable from the first tunnel.
    let truncation = read_table(&out.join("truncation.json"));
    assert_eq!(truncation.metadata["stable_count"], "1");
    let text = String::from_utf8(printed.stdout).unwrap();
    assert!(text.contains("12 tunnel states of 1 month "), "{text}");
    assert!(text.contains("p_exit stable from tunnel 1 "), "{text}");
}

#[test]
fn rerun_writes_byte_identical_tables_and_needs_force() {
    let dir = tempfile::tempdir().unwrap();
    setup(dir.path(), |a| {
        a.replace("horizon = \"20 years\"", "horizon = \"10 years\"")
    });
    tunnelcast(dir.path())
        .args(["run", "analysis.toml", "--out", "a"])
        .assert()
        .success();
    // The same analysis from another working folder, into another output folder.
    let sub = dir.path().join("sub");
    std::fs::create_dir(&sub).unwrap();
    tunnelcast(&sub)
        .args(["run", "../analysis.toml", "--out", "../b"])
        .assert()
        .success();
    // Every file, the report and the plots included.
    let names = listing(&dir.path().join("a"));
    assert_eq!(names, listing(&dir.path().join("b")));
    for name in &names {
        assert!(
            std::fs::read(dir.path().join("a").join(name)).unwrap()
                == std::fs::read(dir.path().join("b").join(name)).unwrap(),
            "{name} differs between runs"
        );
    }
    let out = tunnelcast(dir.path())
        .args(["run", "analysis.toml", "--out", "a"])
        .assert()
        .code(2)
        .get_output()
        .clone();
    assert!(String::from_utf8_lossy(&out.stderr).contains("--force"));
    tunnelcast(dir.path())
        .args(["run", "analysis.toml", "--out", "a", "--force"])
        .assert()
        .success();
}

/// Runs a broken analysis: exit 2, one line on stderr starting `error: `, nothing written.
fn fails(edit: impl Fn(&str) -> String, data: Option<&str>) -> String {
    let dir = tempfile::tempdir().unwrap();
    setup(dir.path(), edit);
    if let Some(d) = data {
        std::fs::write(dir.path().join("demo_trial.csv"), d).unwrap();
    }
    let before = listing(dir.path());
    let out = tunnelcast(dir.path())
        .args(["run", "analysis.toml", "--out", "out"])
        .assert()
        .code(2)
        .get_output()
        .clone();
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    assert!(stderr.starts_with("error: "), "{stderr}");
    assert!(!stderr.contains("panicked"));
    assert_eq!(
        listing(dir.path()),
        before,
        "no output folder, no temporary folder"
    );
    stderr
}

#[test]
fn bad_analysis_files_give_one_line_errors_and_no_folder() {
    let e = fails(
        |a| a.replace("cycle = \"1 month\"", "cycle = \"1 month"),
        None,
    );
    assert!(e.starts_with("error: analysis.toml line 18 column "), "{e}");
    let e = fails(|a| a.replace("tolerance =", "tolerence ="), None);
    // [adjust] keys are checked the same way.
    let a = fails(|a| a.replace("start_age =", "start_aeg ="), None);
    assert!(a.contains("did you mean \"start_age\""), "{a}");
    assert!(
        e.contains("line 21 column 1") && e.contains("did you mean \"tolerance\""),
        "{e}"
    );
    let e = fails(|a| a.replace("\"demo_trial.csv\"", "\"missing.csv\""), None);
    assert!(
        e.contains("line 6 column 8") && e.contains("missing.csv"),
        "{e}"
    );
    let e = fails(
        |a| a.replace("arm = \"standard-care\"", "arm = \"placebo\""),
        None,
    );
    assert!(e.contains("no arm \"placebo\""), "{e}");
}

#[test]
fn a_chosen_family_that_failed_to_fit_is_an_error() {
    // Six events at the same time: the log-normal's sigma runs to its boundary (the fitter
    // reports it as not converged). With two distinct times its MLE would be finite (sigma =
    // the standard deviation of the log times), so the times must all tie.
    let data = "time,event,arm\n2,1,standard-care\n2,1,standard-care\n2,1,standard-care\n2,1,standard-care\n2,1,standard-care\n2,1,standard-care\n";
    let e = fails(
        |a| a.replace("choose = \"best-aic\"", "choose = \"lognormal\""),
        Some(data),
    );
    assert!(e.contains("[fit] choose: the lognormal fit failed"), "{e}");
}

#[test]
fn demo_runs_in_a_fresh_folder_and_replaces_only_its_own_output() {
    let dir = tempfile::tempdir().unwrap();
    let out = tunnelcast(dir.path())
        .arg("demo")
        .assert()
        .success()
        .get_output()
        .clone();
    let stdout = String::from_utf8(out.stdout).unwrap();
    assert!(stdout.contains("tunnelcast-demo/report.html"), "{stdout}");
    assert!(stdout.contains("Caution"));
    // The one-screen summary says what the tunnel table adds to the chosen curve (the demo's
    // analysis file: hazard ratio 0.6 waning over 3–6 years, background mortality added).
    let adjustments = stdout
        .lines()
        .find(|l| l.starts_with("adjustments (in the tunnel table and the checks): "))
        .unwrap_or_else(|| panic!("no adjustments line in {stdout}"));
    assert!(adjustments.contains("hazard ratio 0.6"), "{adjustments}");
    assert!(
        adjustments.contains("background mortality added"),
        "{adjustments}"
    );
    assert!(!adjustments.contains("shape="), "{adjustments}");
    assert!(dir.path().join("tunnelcast-demo/report.html").is_file());
    // Rerunnable: it replaces its own earlier output.
    tunnelcast(dir.path()).arg("demo").assert().success();
    // But never a folder of the user's.
    std::fs::create_dir(dir.path().join("mine")).unwrap();
    std::fs::write(dir.path().join("mine/notes.txt"), "keep").unwrap();
    tunnelcast(dir.path())
        .args(["demo", "--out", "mine"])
        .assert()
        .code(2);
    assert_eq!(listing(&dir.path().join("mine")), vec!["notes.txt"]);
}

/// The demo's `[adjust]` (hazard ratio with waning, background mortality added) and `[draws]`:
/// the tunnel table and the draws summary against an independent computation (the Weibull
/// closed form with the waning integral and the life table's piecewise-constant hazard,
/// `tests/closed_form/mod.rs`), and the draws summary equal to what `tunnelcast draws` gives
/// for the same fit, adjustments and seed.
#[test]
fn adjustments_and_draws_of_the_analysis_file_reach_the_outputs() {
    use closed_form::{added_life_table, close, Adjust, LifeTableBackground, Weibull};

    let dir = tempfile::tempdir().unwrap();
    setup(dir.path(), |a| {
        a.replace("count = 200", "count = 20")
            .replace("horizon = \"20 years\"", "horizon = \"10 years\"")
    });
    tunnelcast(dir.path())
        .args(["run", "analysis.toml", "--out", "a"])
        .assert()
        .success();
    let out = dir.path().join("a");
    let tunnels = read_table(&out.join("tunnels.json"));
    assert_eq!(tunnels.metadata["hazard_ratio"], "0.6");
    assert_eq!(tunnels.metadata["background_mode"], "add");
    assert_eq!(tunnels.metadata["seed"], "20261202");
    assert_eq!(tunnels.metadata["family"], "weibull");
    let col = |name: &str| {
        tunnels.tables[0]
            .columns
            .iter()
            .position(|c| c == name)
            .unwrap_or_else(|| panic!("no column {name}"))
    };
    let (p, d, b) = (
        col("p_exit"),
        col("p_exit_disease"),
        col("p_exit_background"),
    );

    // The demo's treated arm: hazard ratio 0.6 waning over 3–6 years on the standard-care
    // Weibull (parameters from the run's fit.json), the female column of the demo life table
    // added from age 62.
    let fits: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("fit.json")).unwrap()).unwrap();
    let fit = fits["fits"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["family"] == "weibull" && f["arm"] == "standard-care")
        .unwrap();
    let curve = |params: &serde_json::Value| Weibull {
        shape: params["shape"].as_f64().unwrap(),
        scale: params["scale"].as_f64().unwrap(),
    };
    let effect = Adjust::Waning {
        ratio: 0.6,
        start: 36.0,
        end: 72.0,
    };
    let table = LifeTableBackground::from_csv(LIFETABLE, "qx_female", 62.0);
    let expected =
        |w: Weibull, k: usize| added_life_table(w, effect, &table, k as f64 - 1.0, k as f64);
    let point = curve(&fit["params"]);
    let count = tunnels.tables[0].rows.len();
    for (k, row) in tunnels.tables[0].rows.iter().enumerate() {
        let x = |i: usize| row[i].as_f64().unwrap();
        // Identity: the two causes of exit partition the exits (common practice).
        assert!((x(d) + x(b) - x(p)).abs() < 1e-12, "{row:?}");
        let (p_exit, background) = expected(point, k + 1);
        assert!(
            close(x(p), p_exit, 1e-9),
            "tunnel {}: {} vs {p_exit}",
            k + 1,
            x(p)
        );
        assert!(
            close(x(b), background, 1e-9),
            "tunnel {}: {} vs {background}",
            k + 1,
            x(b)
        );
    }

    // The same draws through `tunnelcast draws` (same fit, adjustments, seed): the same
    // summary, and drawn parameters whose closed forms give the summary's mean.
    let n = count.to_string();
    tunnelcast(dir.path())
        .args(["draws", "--fit", "a/fit.json", "--family", "weibull"])
        .args(["--arm", "standard-care", "--hazard-ratio", "0.6"])
        .args([
            "--waning",
            "3 years..6 years",
            "--background",
            "demo_lifetable.csv",
        ])
        .args([
            "--start-age",
            "62",
            "--sex",
            "female",
            "--background-mode",
            "add",
        ])
        .args(["--cycle", "1 month", "--count", &n, "--draws", "20"])
        .args(["--seed", "20261202", "--quiet", "--out", "d.json"])
        .args(["--summary-out", "s.json"])
        .assert()
        .success();
    let written = read_table(&out.join("draws_summary.json"));
    let again = read_table(&dir.path().join("s.json"));
    assert_eq!(written.metadata["draws"], "20");
    assert_eq!(written.tables[0].rows, again.tables[0].rows);
    let drawn = read_table(&dir.path().join("d.json"));
    let parameters = drawn
        .tables
        .iter()
        .find(|t| t.name == "parameters")
        .unwrap();
    assert_eq!(parameters.columns, ["draw", "shape", "scale"]);
    let params: Vec<Weibull> = parameters
        .rows
        .iter()
        .map(|r| Weibull {
            shape: r[1].as_f64().unwrap(),
            scale: r[2].as_f64().unwrap(),
        })
        .collect();
    assert_eq!(params.len(), 20);
    assert_eq!(written.tables[0].rows.len(), count);
    for (k, row) in written.tables[0].rows.iter().enumerate() {
        let x = |i: usize| row[i].as_f64().unwrap();
        let values: Vec<f64> = params.iter().map(|w| expected(*w, k + 1).0).collect();
        let mean = values.iter().sum::<f64>() / values.len() as f64;
        assert!(
            close(x(3), expected(point, k + 1).0, 1e-9),
            "point {}",
            k + 1
        );
        assert!(
            close(x(4), mean, 1e-9),
            "mean {}: {} vs {mean}",
            k + 1,
            x(4)
        );
        let (lo, hi) = values
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), v| {
                (l.min(*v), h.max(*v))
            });
        assert!(
            lo <= x(5) && x(5) < x(4) && x(4) < x(6) && x(6) <= hi,
            "{row:?}"
        );
    }
    assert!(out.join("draws_summary.csv").is_file());
    let expected_rows = written.tables[0].rows.len();

    // The report shows both sections.
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    let doc = shell::parse_report(&html);
    let section = |id: &str| {
        let node = doc
            .descendants()
            .find(|n| n.has_tag_name("section") && n.attribute("id") == Some(id))
            .unwrap();
        node.descendants()
            .filter_map(|n| n.text())
            .collect::<String>()
    };
    assert!(!section("adjustments").contains("None:"));
    assert!(section("adjustments").contains("hazard_ratio"));
    assert!(!section("draws").contains("None requested"));
    // The draws of the first two years' tunnels (monthly cycles), the rest in the files.
    assert_eq!(html_rows(&doc, "table-draws").len(), expected_rows.min(24));
    assert!(section("reproducibility").contains("20261202"));
}
