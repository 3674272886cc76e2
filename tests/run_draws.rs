//! `tunnelcast run` with `[draws]`: the per-draw tunnel table `draws.csv` beside the summary,
//! the same bytes as `tunnelcast draws --layout long` writes for the run's fit and options,
//! its mean agreeing with the summary, its place in the package and the report, and
//! `per_draw = false` leaving it out.

mod shell;
use shell::{read_csv_table, read_package, read_table, tunnelcast};

use std::path::Path;

const DATA: &str = include_str!("../data/demo_trial.csv");
const ANALYSIS: &str = include_str!("../data/demo_analysis.toml");
const LIFETABLE: &str = include_str!("../data/demo_lifetable.csv");
const PAYOFFS: &str = include_str!("../data/demo_payoffs.csv");

/// Writes the demo analysis (20 monthly tunnels, 10-year horizon, 30 draws, `extra` appended
/// to its `[draws]` table) and its data into `dir`, runs it into `dir/a` and returns the folder.
fn run_demo(dir: &Path, extra: &str) -> std::path::PathBuf {
    std::fs::write(dir.join("demo_trial.csv"), DATA).unwrap();
    std::fs::write(dir.join("demo_lifetable.csv"), LIFETABLE).unwrap();
    std::fs::write(dir.join("demo_payoffs.csv"), PAYOFFS).unwrap();
    let analysis = ANALYSIS
        .replace("count = \"auto\"", "count = 20")
        .replace("horizon = \"20 years\"", "horizon = \"10 years\"")
        .replace(
            "[draws]\ncount = 200\n",
            &format!("[draws]\ncount = 30\n{extra}"),
        );
    assert!(analysis.contains("[draws]\ncount = 30\n"), "{analysis}");
    std::fs::write(dir.join("analysis.toml"), analysis).unwrap();
    tunnelcast(dir)
        .args(["run", "analysis.toml", "--out", "a"])
        .assert()
        .success();
    dir.join("a")
}

/// The `href` of every link of the report in `folder`.
fn report_links(folder: &Path) -> Vec<String> {
    let html = std::fs::read_to_string(folder.join("report.html")).unwrap();
    let doc = shell::parse_report(&html);
    doc.descendants()
        .filter(|n| n.has_tag_name("a"))
        .filter_map(|n| n.attribute("href").map(str::to_string))
        .collect()
}

/// The text of the report's draws section in `folder`.
fn draws_section(folder: &Path) -> String {
    let html = std::fs::read_to_string(folder.join("report.html")).unwrap();
    let doc = shell::parse_report(&html);
    let node = doc
        .descendants()
        .find(|n| n.has_tag_name("section") && n.attribute("id") == Some("draws"))
        .unwrap();
    node.descendants().filter_map(|n| n.text()).collect()
}

#[test]
fn the_run_writes_each_draws_table_as_the_draws_command_does() {
    let dir = tempfile::tempdir().unwrap();
    let out = run_demo(dir.path(), "");
    let tunnels = read_table(&out.join("tunnels.json"));
    let family = tunnels.metadata["family"].clone();
    let count = tunnels.tables[0].rows.len();
    assert_eq!(count, 20);

    // (a) The same draws through `tunnelcast draws` with the run's fit, arm, adjustments
    // (the demo's [adjust]), cycle, count, number of draws and seed: the same bytes.
    tunnelcast(dir.path())
        .args(["draws", "--fit", "a/fit.json", "--family", &family])
        .args(["--arm", "standard-care", "--hazard-ratio", "0.6"])
        .args(["--waning", "3 years..6 years"])
        .args(["--background", "demo_lifetable.csv", "--start-age", "62"])
        .args(["--sex", "female", "--background-mode", "add"])
        .args(["--cycle", "1 month", "--count", &count.to_string()])
        .args(["--draws", "30", "--seed", "20261202", "--layout", "long"])
        .args(["--quiet", "--out", "d.csv"])
        .assert()
        .success();
    let run_bytes = std::fs::read(out.join("draws.csv")).unwrap();
    let cmd_bytes = std::fs::read(dir.path().join("d.csv")).unwrap();
    assert!(
        run_bytes == cmd_bytes,
        "draws.csv differs from `draws` output"
    );

    // The file read strictly (its descriptor checked against it) and listed in the package.
    let per_draw = read_csv_table(&out.join("draws.csv"));
    assert_eq!(per_draw.rows.len(), 30 * count);
    let package = read_package(&out);
    assert!(package["resources"]
        .as_array()
        .unwrap()
        .iter()
        .any(|r| r["path"] == "draws.csv"));

    // (b) The mean over the draws of p_exit per tunnel, recomputed from draws.csv, is the
    // summary's mean (definition of the mean; the summary is the tool's own, this is not).
    let (draw, tunnel, p_exit) = (
        per_draw.column("draw"),
        per_draw.column("tunnel"),
        per_draw.column("p_exit"),
    );
    let mut sums = vec![0.0; count];
    let mut seen = vec![0usize; count];
    for (i, row) in per_draw.rows.iter().enumerate() {
        let k: usize = row[tunnel].parse().unwrap();
        let d: usize = row[draw].parse().unwrap();
        assert_eq!((d, k), (i / count + 1, i % count + 1), "row order");
        sums[k - 1] += row[p_exit].parse::<f64>().unwrap();
        seen[k - 1] += 1;
    }
    let summary = read_csv_table(&out.join("draws_summary.csv"));
    assert_eq!(summary.rows.len(), count);
    for k in 0..count {
        assert_eq!(seen[k], 30);
        let mean = sums[k] / 30.0;
        let written = summary.number(k, "p_exit_mean");
        assert!(
            (written - mean).abs() <= 1e-12 * mean.abs(),
            "tunnel {}: summary {written} vs recomputed {mean}",
            k + 1
        );
    }

    // (d) The report links the file by a relative name that exists, and says what it holds.
    let links = report_links(&out);
    let link = links
        .iter()
        .find(|h| h.ends_with("draws.csv") && !h.contains("summary"))
        .expect("the report links draws.csv");
    assert!(!link.starts_with('/') && !link.contains(':'), "{link}");
    assert!(out.join(link).is_file(), "{link} missing");
    let text = draws_section(&out);
    assert!(text.contains("30 draws × 20 tunnels = 600 rows"), "{text}");
    // Nothing per-draw is inlined: the section's only table is the summary.
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(!html.contains("table-draws-per"));
}

#[test]
fn per_draw_false_writes_only_the_summary() {
    let dir = tempfile::tempdir().unwrap();
    let out = run_demo(dir.path(), "per_draw = false\n");
    // (c) No per-draw file, no descriptor, no package entry and no link; the summary stays.
    assert!(!out.join("draws.csv").exists());
    assert!(!out.join("draws.resource.json").exists());
    assert!(out.join("draws_summary.csv").is_file());
    let package = read_package(&out);
    assert!(!package["resources"]
        .as_array()
        .unwrap()
        .iter()
        .any(|r| r["path"] == "draws.csv"));
    assert!(report_links(&out)
        .iter()
        .all(|h| !h.ends_with("/draws.csv") && h != "draws.csv"));
    assert!(report_links(&out).iter().any(|h| h == "draws_summary.csv"));
    assert!(!draws_section(&out).contains("rows, one per draw"));
}

#[test]
fn per_draw_on_and_off_give_the_same_summary() {
    // The summary made while streaming draws.csv equals the one made without it (same draws).
    let on = tempfile::tempdir().unwrap();
    let off = tempfile::tempdir().unwrap();
    let a = run_demo(on.path(), "");
    let b = run_demo(off.path(), "per_draw = false\n");
    assert_eq!(
        std::fs::read(a.join("draws_summary.csv")).unwrap(),
        std::fs::read(b.join("draws_summary.csv")).unwrap()
    );
}

/// A joint model's arm curve (Weibull PH on the Veterans' Administration lung cancer trial,
/// Kalbfleisch and Prentice, 1980, the copy in `tests/reference/va_lung.csv`, standardised over
/// arm test's Karnofsky scores, a further hazard ratio on top): the run's draws.csv is the same
/// bytes as `draws --model ph --arm test` on the run's fit file (cross-path, as
/// tests/run_joint.rs checks the summary).
#[test]
fn a_joint_choice_writes_the_same_per_draw_table_as_the_draws_command() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let data = format!("{}/tests/reference/va_lung.csv", env!("CARGO_MANIFEST_DIR"));
    std::fs::copy(data, d.join("va.csv")).unwrap();
    std::fs::write(
        d.join("analysis.toml"),
        "[data]\nfile = \"va.csv\"\ntime_unit = \"days\"\narm_column = \"arm\"\n\n\
         [fit]\nfamilies = [\"weibull\"]\nchoose = \"weibull\"\n\n\
         [tunnels]\ncycle = \"30 days\"\ncount = 6\nhorizon = \"3 years\"\n\n\
         [output]\nformats = [\"json\"]\n\n\
         [adjust]\nhazard_ratio = 0.8\n\n[draws]\ncount = 40\nseed = 11\n\n\
         [effects]\ncovariates = [\"karnofsky\"]\n\n\
         [choice]\nmodel = \"ph\"\narm = \"test\"\n\
         reason = \"proportional hazards across arms, as the trial was analysed\"\n",
    )
    .unwrap();
    tunnelcast(d)
        .args(["run", "analysis.toml", "--out", "out"])
        .assert()
        .success();
    tunnelcast(d)
        .arg("draws")
        .args([
            "--fit",
            "out/fit.json",
            "--family",
            "weibull",
            "--model",
            "ph",
        ])
        .args(["--arm", "test", "--hazard-ratio", "0.8"])
        .args(["--cycle", "30 days", "--count", "6", "--draws", "40"])
        .args([
            "--seed", "11", "--layout", "long", "--quiet", "--out", "d.csv",
        ])
        .assert()
        .success();
    let run_bytes = std::fs::read(d.join("out/draws.csv")).unwrap();
    assert!(run_bytes == std::fs::read(d.join("d.csv")).unwrap());
    assert_eq!(read_csv_table(&d.join("out/draws.csv")).rows.len(), 40 * 6);
    // Formats without CSV: draws.csv is still CSV, and the package lists it alone.
    let package = read_package(&d.join("out"));
    let paths: Vec<&str> = package["resources"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["path"].as_str().unwrap())
        .collect();
    assert_eq!(paths, ["draws.csv"]);
}
