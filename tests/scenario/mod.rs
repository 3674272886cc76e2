//! The invented scenario shared by the cross-path and draws-adjustment tests: a Weibull curve
//! given by published parameters and by a fit file with the same estimates and a small
//! covariance, an invented trial, a life table whose qx is the same at every age (so the
//! adjusted curves have closed forms, `tests/closed_form/mod.rs`), and each adjustment as
//! command-line options and as an analysis file's `[adjust]` table.
#![allow(dead_code)]

use crate::closed_form::{Adjust, Weibull};
use crate::shell::tunnelcast;
use calamine::{Data, Reader, Xlsx};
use std::path::Path;

/// The curve of the scenario: Weibull shape 1.5, scale 60 months (invented).
pub const CURVE: Weibull = Weibull {
    shape: 1.5,
    scale: 60.0,
};

/// [`CURVE`] as published parameters.
pub const PUBLISHED: [&str; 8] = [
    "--family",
    "weibull",
    "--param",
    "shape=1.5",
    "--param",
    "scale=60",
    "--time-unit",
    "months",
];

/// [`CURVE`] from the fit file written by [`write_fit`].
pub const FROM_FIT: [&str; 4] = ["--fit", "fit.json", "--family", "weibull"];

/// Covariance of (ln shape, ln scale) in the fit file: standard deviations 0.02 and 0.03,
/// correlation -1/6 (invented, small so that the draws stay close to the curve).
pub const COVARIANCE: [[f64; 2]; 2] = [[0.0004, -0.0001], [-0.0001, 0.0009]];

/// Annual qx of the invented life table, the same at every age 40–100.
pub const QX: f64 = 0.1;

/// Age at entry.
pub const START_AGE: &str = "60";

/// The adjustments the tests go through, each with a name for messages. The floor binds in
/// the first tunnels: the Weibull hazard rises through -ln(0.9)/12 per month at about 7.4 months.
pub const ADJUSTMENTS: [(&str, Adjust); 6] = [
    ("none", Adjust::None),
    ("hazard ratio", Adjust::HazardRatio(0.5)),
    ("acceleration factor", Adjust::Acceleration(1.4)),
    (
        "waning",
        Adjust::Waning {
            ratio: 0.5,
            start: 12.0,
            end: 24.0,
        },
    ),
    ("add", Adjust::Add { qx: QX }),
    ("floor", Adjust::Floor { qx: QX }),
];

/// The command-line options of `adjust` (life table `life.csv` in the working folder).
pub fn adjust_args(adjust: Adjust) -> Vec<String> {
    let background = |mode: &str| {
        [
            "--background",
            "life.csv",
            "--start-age",
            START_AGE,
            "--background-mode",
            mode,
        ]
        .iter()
        .map(|s| s.to_string())
        .collect()
    };
    match adjust {
        Adjust::None => Vec::new(),
        Adjust::HazardRatio(x) => vec!["--hazard-ratio".into(), x.to_string()],
        Adjust::Acceleration(x) => vec!["--acceleration-factor".into(), x.to_string()],
        Adjust::Waning { ratio, start, end } => vec![
            "--hazard-ratio".into(),
            ratio.to_string(),
            "--waning".into(),
            format!("{start} months..{end} months"),
        ],
        Adjust::Add { .. } => background("add"),
        Adjust::Floor { .. } => background("floor"),
    }
}

/// The `[adjust]` table of an analysis file for `adjust` (empty when nothing is adjusted).
pub fn adjust_toml(adjust: Adjust) -> String {
    let background = |mode: &str| {
        format!("[adjust]\nbackground = \"life.csv\"\nstart_age = {START_AGE}\nbackground_mode = \"{mode}\"\n")
    };
    match adjust {
        Adjust::None => String::new(),
        Adjust::HazardRatio(x) => format!("[adjust]\nhazard_ratio = {x}\n"),
        Adjust::Acceleration(x) => format!("[adjust]\nacceleration_factor = {x}\n"),
        Adjust::Waning { ratio, start, end } => {
            format!("[adjust]\nhazard_ratio = {ratio}\nwaning = \"{start} months..{end} months\"\n")
        }
        Adjust::Add { .. } => background("add"),
        Adjust::Floor { .. } => background("floor"),
    }
}

/// Writes `life.csv`: ages 40 to 100, qx = [`QX`] at every age (invented).
pub fn write_lifetable(dir: &Path) {
    let mut text = String::from("age,qx\n");
    for age in 40..=100 {
        text.push_str(&format!("{age},{QX}\n"));
    }
    std::fs::write(dir.join("life.csv"), text).unwrap();
}

/// Writes `trial.csv`: 160 invented subjects at the quantiles (i - 1/2)/160 of [`CURVE`],
/// every seventh censored at four fifths of its time, everyone still in follow-up censored at
/// 48 months.
pub fn write_trial(dir: &Path) {
    let n = 160;
    let mut text = String::from("time,event\n");
    for i in 1..=n {
        let u = (i as f64 - 0.5) / n as f64;
        let t = CURVE.scale * (-(1.0 - u).ln()).powf(1.0 / CURVE.shape);
        let (t, event) = if t > 48.0 {
            (48.0, 0)
        } else if i % 7 == 0 {
            (0.8 * t, 0)
        } else {
            (t, 1)
        };
        text.push_str(&format!("{t:.3},{event}\n"));
    }
    std::fs::write(dir.join("trial.csv"), text).unwrap();
}

/// Writes `trial.csv`, fits it (`fitted.json`, as the tool wrote it) and `fit.json`: the same
/// file with the Weibull estimates set to [`CURVE`] and its covariance to [`COVARIANCE`], so
/// that the point estimate and the distribution of the draws are known exactly.
pub fn write_fit(dir: &Path) {
    write_trial(dir);
    tunnelcast(dir)
        .args(["fit", "trial.csv", "--time-unit", "months"])
        .args(["--families", "weibull", "--json", "fitted.json"])
        .assert()
        .success();
    let mut fit: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.join("fitted.json")).unwrap()).unwrap();
    let weibull = fit["fits"]
        .as_array_mut()
        .unwrap()
        .iter_mut()
        .find(|f| f["family"] == "weibull")
        .unwrap();
    weibull["params"] = serde_json::json!({"shape": CURVE.shape, "scale": CURVE.scale});
    weibull["estimates"] = serde_json::json!([CURVE.shape.ln(), CURVE.scale.ln()]);
    assert_eq!(
        weibull["covariance"]["names"],
        serde_json::json!(["ln_shape", "ln_scale"])
    );
    weibull["covariance"]["matrix"] = serde_json::json!(COVARIANCE);
    std::fs::write(
        dir.join("fit.json"),
        serde_json::to_vec_pretty(&fit).unwrap(),
    )
    .unwrap();
}

/// A JSON table output (`tunnels`, `draws`, `run`): its tables by name, cells as numbers
/// (NaN for null or text).
pub struct JsonTables {
    pub value: serde_json::Value,
}

impl JsonTables {
    /// Reads a JSON output.
    pub fn read(path: &Path) -> JsonTables {
        JsonTables {
            value: serde_json::from_slice(&std::fs::read(path).unwrap()).unwrap(),
        }
    }

    /// Column names of table `name`.
    pub fn columns(&self, name: &str) -> Vec<String> {
        self.table(name)["columns"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| c.as_str().unwrap().to_string())
            .collect()
    }

    /// Rows of table `name` as numbers.
    pub fn rows(&self, name: &str) -> Vec<Vec<f64>> {
        self.table(name)["rows"]
            .as_array()
            .unwrap()
            .iter()
            .map(|r| {
                r.as_array()
                    .unwrap()
                    .iter()
                    .map(|c| c.as_f64().unwrap_or(f64::NAN))
                    .collect()
            })
            .collect()
    }

    /// A metadata value.
    pub fn metadata(&self, key: &str) -> String {
        self.value["metadata"][key]
            .as_str()
            .unwrap_or_else(|| panic!("no metadata {key}"))
            .to_string()
    }

    fn table(&self, name: &str) -> &serde_json::Value {
        self.value["tables"]
            .as_array()
            .unwrap()
            .iter()
            .find(|t| t["name"] == name)
            .unwrap_or_else(|| panic!("no table {name}"))
    }
}

/// The sheet named `sheet` of an XLSX file, read by calamine: header and numeric rows.
pub fn read_xlsx(path: &Path, sheet: &str) -> (Vec<String>, Vec<Vec<f64>>) {
    let mut book: Xlsx<_> = calamine::open_workbook(path).unwrap();
    let range = book.worksheet_range(sheet).unwrap();
    let mut rows = range.rows();
    let columns = rows.next().unwrap().iter().map(|c| c.to_string()).collect();
    let values = rows
        .map(|r| {
            r.iter()
                .map(|c| match c {
                    Data::Float(x) => *x,
                    Data::Int(i) => *i as f64,
                    Data::Empty => f64::NAN,
                    other => panic!("{}: unexpected cell {other:?}", path.display()),
                })
                .collect()
        })
        .collect();
    (columns, values)
}
