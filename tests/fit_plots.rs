//! `fit --plots DIR`: the folder gets SVG and PNG of plots (a)–(c) per arm, all or nothing.

use assert_cmd::Command;
use std::path::Path;

fn demo_csv() -> &'static Path {
    Path::new(concat!(env!("CARGO_MANIFEST_DIR"), "/data/demo_trial.csv"))
}

#[test]
fn writes_three_plots_per_arm_in_both_formats() {
    let dir = tempfile::tempdir().unwrap();
    let plots = dir.path().join("plots");
    Command::cargo_bin("tunnelcast")
        .unwrap()
        .current_dir(dir.path())
        .args(["fit", demo_csv().to_str().unwrap(), "--time-unit", "months"])
        .args([
            "--arm-col",
            "arm",
            "--families",
            "weibull,lognormal",
            "--plots",
            "plots",
        ])
        .assert()
        .success();
    let mut names: Vec<String> = std::fs::read_dir(&plots)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    let mut expected = Vec::new();
    for plot in ["diagnostics", "hazard", "survival"] {
        for arm in ["standard-care", "veltranib"] {
            for ext in ["png", "svg"] {
                expected.push(format!("{plot}-{arm}.{ext}"));
            }
        }
    }
    expected.sort();
    assert_eq!(names, expected);
    // Nothing else (no temporary folder) is left beside the output.
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
}

#[test]
fn refuses_a_non_empty_folder_without_force() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::create_dir(dir.path().join("plots")).unwrap();
    std::fs::write(dir.path().join("plots/keep.txt"), "mine").unwrap();
    let out = Command::cargo_bin("tunnelcast")
        .unwrap()
        .current_dir(dir.path())
        .args(["fit", demo_csv().to_str().unwrap(), "--time-unit", "months"])
        .args(["--families", "weibull", "--plots", "plots"])
        .assert()
        .code(2)
        .get_output()
        .clone();
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert!(
        stderr.contains("--force") && stderr.lines().count() == 1,
        "{stderr}"
    );
    assert_eq!(
        std::fs::read_to_string(dir.path().join("plots/keep.txt")).unwrap(),
        "mine"
    );
}

/// The `points` of every polyline of `svg` drawn in `stroke` at `width`, as pixel pairs.
fn polylines(svg: &str, stroke: &str, width: &str) -> Vec<Vec<(f64, f64)>> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter(|n| n.has_tag_name("polyline"))
        .filter(|n| {
            n.attribute("stroke") == Some(stroke) && n.attribute("stroke-width") == Some(width)
        })
        .map(|n| {
            n.attribute("points")
                .unwrap()
                .split_whitespace()
                .map(|p| {
                    let (x, y) = p.split_once(',').unwrap();
                    (x.parse().unwrap(), y.parse().unwrap())
                })
                .collect()
        })
        .collect()
}

#[test]
fn with_a_life_table_every_fit_is_drawn_against_the_population() {
    let dir = tempfile::tempdir().unwrap();
    let lifetable = concat!(env!("CARGO_MANIFEST_DIR"), "/data/demo_lifetable.csv");
    Command::cargo_bin("tunnelcast")
        .unwrap()
        .current_dir(dir.path())
        .args(["fit", demo_csv().to_str().unwrap(), "--time-unit", "months"])
        .args([
            "--families",
            "weibull,lognormal,exponential",
            "--plots",
            "plots",
        ])
        .args([
            "--background",
            lifetable,
            "--start-age",
            "62",
            "--sex",
            "female",
        ])
        .assert()
        .success();
    let plots = dir.path().join("plots");
    assert!(plots.join("population.png").exists());
    let svg = std::fs::read_to_string(plots.join("population.svg")).unwrap();
    assert!(
        svg.contains("Time since entry (years)"),
        "years: the data span over two years"
    );
    // One line per fit in its family's colour (and a legend line each).
    for colour in ["#E69A2E", "#8C4BAD", "#3B6FB6"] {
        assert_eq!(polylines(&svg, colour, "2").len(), 2, "{colour}");
    }
    // The population line (thick grey, the longest of its two polylines; the other is the
    // legend's): starts at survival 1 with the fits and only falls (pixel y only grows).
    let population = polylines(&svg, "#707070", "5")
        .into_iter()
        .max_by_key(Vec::len)
        .unwrap();
    let weibull = polylines(&svg, "#E69A2E", "2")
        .into_iter()
        .max_by_key(Vec::len)
        .unwrap();
    assert_eq!(population[0], weibull[0], "both start at (0, 1)");
    assert!(population
        .windows(2)
        .all(|w| w[1].1 >= w[0].1 && w[1].0 >= w[0].0));
    assert!(
        population.last().unwrap().1 > population[0].1 + 100.0,
        "it falls"
    );
    // Without a life table there is no population plot.
    let other = tempfile::tempdir().unwrap();
    Command::cargo_bin("tunnelcast")
        .unwrap()
        .current_dir(other.path())
        .args(["fit", demo_csv().to_str().unwrap(), "--time-unit", "months"])
        .args(["--families", "weibull", "--plots", "plots"])
        .assert()
        .success();
    assert!(!other.path().join("plots/population.svg").exists());
}

#[test]
fn survival_and_hazard_axes_are_in_years_past_two_years_of_data() {
    // Issue 18: axes in years by default where the data span more than two years. The demo
    // trial's follow-up is 41.79 months (3.48 years): survival and hazard in years, the
    // diagnostics (ln t) in the data's months. A file of 300 days stays in days.
    let dir = tempfile::tempdir().unwrap();
    let short: String = std::iter::once("time,event\n".to_string())
        .chain((1..=40).map(|i| format!("{},{}\n", 7 * i + 20, i % 3 != 0)))
        .collect::<String>()
        .replace("true", "1")
        .replace("false", "0");
    std::fs::write(dir.path().join("short.csv"), short).unwrap();
    let plot = |data: &str, unit: &str, out: &str| {
        Command::cargo_bin("tunnelcast")
            .unwrap()
            .current_dir(dir.path())
            .args(["fit", data, "--time-unit", unit])
            .args(["--families", "weibull", "--plots", out])
            .assert()
            .success();
    };
    plot(demo_csv().to_str().unwrap(), "months", "long");
    plot("short.csv", "days", "short");
    let read = |path: &str| std::fs::read_to_string(dir.path().join(path)).unwrap();
    assert!(read("long/survival.svg").contains("Time (years)"));
    assert!(read("long/hazard.svg").contains("Hazard (per year)"));
    assert!(read("long/diagnostics.svg").contains("months"));
    assert!(!read("long/survival.svg").contains("Time (months)"));
    assert!(read("short/survival.svg").contains("Time (days)"));
    assert!(read("short/hazard.svg").contains("Hazard (per day)"));
}
