//! Plain files for other programs (issue 14): every CSV file the tool writes is plain RFC 4180
//! (read by the `csv` crate with no comment character, the header first) and has a Frictionless
//! descriptor beside it whose fields are the header and whose provenance holds the inputs'
//! SHA-256 (computed here with the `sha2` crate); reruns give byte-identical files, and no file
//! holds the time unless `SOURCE_DATE_EPOCH` sets it (XLSX properties read back with a zip
//! reader and an XML parser, the notes sheet with calamine).

mod shell;
use shell::{listing, read_csv_records, read_descriptor, read_package, tunnelcast};

use calamine::{Reader, Xlsx};
use sha2::Digest;
use std::path::Path;

/// SHA-256 (FIPS 180-4) of a file, by the sha2 crate, as lower-case hex.
fn sha256(path: &Path) -> String {
    sha2::Sha256::digest(std::fs::read(path).unwrap())
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

/// Invented two-arm trial (no external source): times from a fixed rule, and its fit file.
fn write_fit(dir: &Path) {
    let mut csv = String::from("time,event,arm\n");
    for (i, arm) in ["north", "south"].iter().enumerate() {
        for k in 1..=50 {
            let t = (k as f64 * 0.7 + (k * 5 % 9) as f64 * 0.4) * (1.0 + 0.25 * i as f64);
            csv.push_str(&format!("{t:.2},{},{arm}\n", u8::from(k % 5 != 0)));
        }
    }
    std::fs::write(dir.join("trial.csv"), csv).unwrap();
    let life = std::fs::read(Path::new(env!("CARGO_MANIFEST_DIR")).join("data/demo_lifetable.csv"))
        .unwrap();
    std::fs::write(dir.join("life.csv"), life).unwrap();
    tunnelcast(dir)
        .args([
            "fit",
            "trial.csv",
            "--time-unit",
            "months",
            "--arm-col",
            "arm",
        ])
        .args(["--families", "weibull,exponential", "--json", "fit.json"])
        .assert()
        .success();
}

const CURVE: [&str; 9] = [
    "--fit", "fit.json", "--family", "weibull", "--arm", "north", "--cycle", "1 month", "--count",
];

/// Runs `tunnelcast ARGS` in `dir` and expects success.
fn ok(dir: &Path, args: &[&str]) {
    tunnelcast(dir).args(args).assert().success();
}

/// The text of the element `tag` in `docProps/core.xml` of an XLSX file, read with the zip
/// crate and roxmltree (independent of the writer, rust_xlsxwriter).
fn core_property(path: &Path, tag: &str) -> String {
    let mut archive = zip::ZipArchive::new(std::fs::File::open(path).unwrap()).unwrap();
    let mut xml = String::new();
    std::io::Read::read_to_string(&mut archive.by_name("docProps/core.xml").unwrap(), &mut xml)
        .unwrap();
    let doc = roxmltree::Document::parse(&xml).unwrap();
    doc.descendants()
        .find(|n| n.tag_name().name() == tag)
        .and_then(|n| n.text())
        .unwrap_or_else(|| panic!("no {tag} in {xml}"))
        .to_string()
}

/// The `notes` sheet of an XLSX file as (item, value) pairs, read with calamine.
fn notes(path: &Path) -> Vec<(String, String)> {
    let mut book: Xlsx<_> = calamine::open_workbook(path).unwrap();
    let range = book.worksheet_range("notes").unwrap();
    range
        .rows()
        .skip(1)
        .map(|r| (r[0].to_string(), r[1].to_string()))
        .collect()
}

#[test]
fn every_csv_each_command_writes_is_plain_and_described() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_fit(d);
    let data_sha = sha256(&d.join("trial.csv"));
    let fit_sha = sha256(&d.join("fit.json"));
    let life_sha = sha256(&d.join("life.csv"));
    let with = |extra: &[&'static str]| {
        let mut a: Vec<&str> = CURVE.to_vec();
        a.extend(extra);
        a
    };
    let background = [
        "--background",
        "life.csv",
        "--start-age",
        "60",
        "--sex",
        "female",
        "--background-mode",
        "add",
    ];

    let mut tunnels = vec!["tunnels"];
    tunnels.extend(with(&["12", "--out", "long.csv"]));
    ok(d, &tunnels);
    let mut matrix = vec!["tunnels"];
    matrix.extend(with(&["6", "--layout", "matrix", "--out", "matrix.csv"]));
    ok(d, &matrix);
    let mut by_cause = vec!["tunnels"];
    by_cause.extend(with(&[
        "6",
        "--layout",
        "matrix-by-cause",
        "--out",
        "cause.csv",
    ]));
    by_cause.extend(background);
    ok(d, &by_cause);
    let mut added = vec!["tunnels"];
    added.extend(with(&["6", "--out", "added.csv"]));
    added.extend(background);
    ok(d, &added);
    let mut draws = vec!["draws", "--quiet", "--draws", "20", "--seed", "9"];
    draws.extend(with(&[
        "6",
        "--out",
        "draws.csv",
        "--summary-out",
        "summary.csv",
    ]));
    ok(d, &draws);
    let mut wide = vec!["draws", "--quiet", "--draws", "20", "--seed", "9"];
    wide.extend(with(&["6", "--layout", "wide", "--out", "wide.csv"]));
    ok(d, &wide);
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    std::fs::copy(root.join("data/demo_digitised.csv"), d.join("points.csv")).unwrap();
    std::fs::copy(root.join("data/demo_at_risk.csv"), d.join("risk.csv")).unwrap();
    ok(
        d,
        &[
            "rebuild",
            "--curve",
            "points.csv",
            "--at-risk",
            "risk.csv",
            "--arm-col",
            "arm",
            "--out",
            "rebuilt.csv",
        ],
    );

    // Expected first columns of each file (interface contract and docs/interface-additions.md).
    for (file, first) in [
        ("long.csv", "tunnel,t_start,t_end,surv_start,surv_end,p_exit,p_next"),
        ("matrix.csv", "from,tunnel_1"),
        ("cause.csv", "from,tunnel_1"),
        ("added.csv", "tunnel,t_start,t_end,surv_start,surv_end,p_exit,p_next,p_exit_disease,p_exit_background"),
        ("draws.csv", "draw,tunnel,t_start,t_end,surv_start,surv_end,p_exit,p_next"),
        ("summary.csv", "tunnel,t_start,t_end,p_exit_point,p_exit_mean,p_exit_pct2_5,p_exit_pct97_5"),
        ("wide.csv", "tunnel,t_start,t_end,draw_1"),
        ("rebuilt.csv", "time,event,arm"),
    ] {
        let path = d.join(file);
        // Header on the first line, checked on the raw bytes.
        let bytes = std::fs::read(&path).unwrap();
        assert!(bytes.starts_with(first.as_bytes()), "{file} starts {:?}", &bytes[..40]);
        // Strict reading, and the descriptor against the header, size and cell types.
        let (header, records) = read_csv_records(&path);
        assert!(!records.is_empty(), "{file}");
        let descriptor = read_descriptor(&path);
        let names: Vec<&str> = descriptor["schema"]["fields"]
            .as_array()
            .unwrap()
            .iter()
            .map(|f| f["name"].as_str().unwrap())
            .collect();
        assert_eq!(names, header, "{file}");
        assert_eq!(descriptor["path"], file);
        let provenance = &descriptor["tunnelcast"];
        assert_eq!(provenance["tool_version"], env!("CARGO_PKG_VERSION"), "{file}");
        assert!(provenance["caution"].as_str().unwrap().contains("assumption"), "{file}");
        if file == "rebuilt.csv" {
            assert_eq!(provenance["curve_sha256"], sha256(&d.join("points.csv")).as_str());
            assert_eq!(provenance["at_risk_sha256"], sha256(&d.join("risk.csv")).as_str());
            continue;
        }
        assert_eq!(provenance["data_sha256"], data_sha.as_str(), "{file}");
        assert_eq!(provenance["fit_file_sha256"], fit_sha.as_str(), "{file}");
        assert_eq!(provenance["family"], "weibull", "{file}");
        assert_eq!(provenance["time_unit"], "months", "{file}");
        if file == "cause.csv" || file == "added.csv" {
            assert_eq!(provenance["background_sha256"], life_sha.as_str(), "{file}");
        }
        if file.starts_with("draws") || file == "summary.csv" || file == "wide.csv" {
            assert_eq!(provenance["seed"], "9", "{file}");
        }
    }
    // Units where a column has one: the cycle bounds in the table's unit.
    let long = read_descriptor(&d.join("long.csv"));
    let fields = long["schema"]["fields"].as_array().unwrap();
    assert_eq!(fields[1]["tunnelcast"]["unit"], "months");
    assert!(fields[5].get("tunnelcast").is_none(), "p_exit has no unit");
    assert_eq!(fields[0]["type"], "integer");
    // The matrix rows still sum to 1 when read strictly (Markov chain: common practice).
    let (_, rows) = read_csv_records(&d.join("cause.csv"));
    for row in rows {
        let sum: f64 = row.iter().skip(1).map(|c| c.parse::<f64>().unwrap()).sum();
        assert!((sum - 1.0).abs() < 1e-12, "{sum}");
    }
}

#[test]
fn reruns_are_byte_identical_and_hold_no_time() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_fit(d);
    let mut tunnels = vec!["tunnels"];
    tunnels.extend(CURVE);
    tunnels.extend(["12", "--out"]);
    let mut draws = vec!["draws", "--quiet", "--draws", "15", "--seed", "3"];
    draws.extend(CURVE);
    draws.extend(["5", "--out"]);
    for name in ["a", "b"] {
        std::fs::create_dir(d.join(name)).unwrap();
        for (args, file) in [(&tunnels, "t.xlsx"), (&draws, "d.xlsx"), (&draws, "d.csv")] {
            let mut a = args.clone();
            let out = format!("{name}/{file}");
            a.push(&out);
            ok(d, &a);
        }
        // The clock moves on between the two runs: a time written into a file would differ.
        std::thread::sleep(std::time::Duration::from_millis(1100));
    }
    for file in ["t.xlsx", "d.xlsx", "d.csv", "d.resource.json"] {
        assert!(
            std::fs::read(d.join("a").join(file)).unwrap()
                == std::fs::read(d.join("b").join(file)).unwrap(),
            "{file} differs between runs"
        );
    }
    // The workbook's properties hold a fixed date, not the time it was written.
    for tag in ["created", "modified"] {
        assert_eq!(
            core_property(&d.join("a/t.xlsx"), tag),
            "1980-01-01T00:00:00Z"
        );
    }
    // The notes sheet holds the provenance, as the descriptor of the CSV file does.
    let notes = notes(&d.join("a/d.xlsx"));
    let provenance = &read_descriptor(&d.join("a/d.csv"))["tunnelcast"];
    for (item, value) in &notes {
        assert_eq!(provenance[item.as_str()], value.as_str(), "{item}");
    }
    assert!(notes
        .iter()
        .any(|(k, v)| k == "data_sha256" && *v == sha256(&d.join("trial.csv"))));
}

/// Whether `text` holds anything shaped like an ISO date, `dddd-dd-dd`.
fn holds_a_date(text: &str) -> bool {
    let b = text.as_bytes();
    b.windows(10).any(|w| {
        let d = |i: usize| w[i].is_ascii_digit();
        d(0) && d(1) && d(2) && d(3) && w[4] == b'-' && d(5) && d(6) && w[7] == b'-' && d(8) && d(9)
    })
}

/// Writes the demo analysis, made lighter (fewer draws, a shorter horizon), into `dir`.
fn setup_analysis(dir: &Path) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    for name in ["demo_trial.csv", "demo_lifetable.csv", "demo_payoffs.csv"] {
        std::fs::copy(root.join("data").join(name), dir.join(name)).unwrap();
    }
    let analysis = std::fs::read_to_string(root.join("data/demo_analysis.toml"))
        .unwrap()
        .replace("count = 200", "count = 40")
        .replace("horizon = \"20 years\"", "horizon = \"8 years\"")
        .replace(
            "formats = [\"csv\", \"json\"]",
            "formats = [\"csv\", \"json\", \"xlsx\"]",
        );
    assert!(analysis.contains("\"xlsx\""));
    std::fs::write(dir.join("analysis.toml"), analysis).unwrap();
}

#[test]
fn source_date_epoch_is_the_only_time_a_file_records() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    setup_analysis(d);
    tunnelcast(d)
        .args(["run", "analysis.toml", "--out", "undated"])
        .assert()
        .success();
    // 951782400 s = 11,016 days after 1970-01-01 = 2000-02-29, a leap day (10,957 days to
    // 2000-01-01, then 31 + 28); the reproducible-builds SOURCE_DATE_EPOCH convention.
    tunnelcast(d)
        .env("SOURCE_DATE_EPOCH", "951782400")
        .args(["run", "analysis.toml", "--out", "dated"])
        .assert()
        .success();
    let undated = d.join("undated");
    let dated = d.join("dated");
    let report = std::fs::read_to_string(undated.join("report.html")).unwrap();
    assert!(!holds_a_date(&report), "the report holds a date");
    assert!(report.contains("not recorded (set SOURCE_DATE_EPOCH"));
    let report = std::fs::read_to_string(dated.join("report.html")).unwrap();
    assert!(report.contains("2000-02-29 00:00 UTC"));
    for tag in ["created", "modified"] {
        assert_eq!(
            core_property(&dated.join("tunnels.xlsx"), tag),
            "2000-02-29T00:00:00Z"
        );
        assert_eq!(
            core_property(&undated.join("tunnels.xlsx"), tag),
            "1980-01-01T00:00:00Z"
        );
    }
    let package = read_package(&dated);
    assert_eq!(package["created"], "2000-02-29T00:00:00Z");
    assert!(read_package(&undated).get("created").is_none());
    // Everything else is the same file.
    let names = listing(&undated);
    assert_eq!(names, listing(&dated));
    let differ: Vec<&String> = names
        .iter()
        .filter(|n| {
            std::fs::read(undated.join(n)).unwrap() != std::fs::read(dated.join(n)).unwrap()
        })
        .collect();
    assert!(
        differ
            .iter()
            .all(|n| n.ends_with(".xlsx") || *n == "report.html" || *n == "datapackage.json"),
        "{differ:?}"
    );
    assert!(differ.len() >= 3, "{differ:?}");
}

#[test]
fn a_malformed_source_date_epoch_is_refused_before_any_work() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_fit(d);
    let before = listing(d);
    for value in ["yesterday", "-5", "1.5e9", "99999999999999"] {
        let mut args = vec!["tunnels"];
        args.extend(CURVE);
        args.extend(["3", "--out", "t.xlsx"]);
        let out = tunnelcast(d)
            .env("SOURCE_DATE_EPOCH", value)
            .args(&args)
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{value}: {stderr}");
        assert_eq!(stderr.lines().count(), 1, "{stderr}");
        assert!(stderr.starts_with("error: SOURCE_DATE_EPOCH="), "{stderr}");
        assert_eq!(listing(d), before, "{value}: something was written");
    }
}

#[test]
fn draws_outputs_may_not_share_a_descriptor() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_fit(d);
    let before = listing(d);
    let mut args = vec!["draws", "--quiet", "--draws", "5"];
    args.extend(CURVE);
    args.extend(["3", "--out", "a.csv", "--summary-out", "a.resource.json"]);
    let out = tunnelcast(d).args(&args).output().unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(stderr.contains("a.resource.json"), "{stderr}");
    assert_eq!(listing(d), before);
}
