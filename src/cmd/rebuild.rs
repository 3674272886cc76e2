//! `tunnelcast rebuild`: patient-level data rebuilt from a digitised Kaplan–Meier figure
//! (Guyot et al., 2012), written as `time,event` for `fit`, with a report of how well the
//! rebuild reproduces the figure.

use crate::error::{Error, Result};
use crate::format::{fixed, sig, table_aligned};
use crate::output;
use crate::rebuild::{
    self, assess, read_curves, read_risk_tables, CensoringRule, DigitisedCurve, Quality, Rebuilt,
    RiskRow, TOLERANCE,
};
use clap::Args;
use std::path::{Path, PathBuf};

/// Options of `rebuild`.
#[derive(Debug, Args)]
#[command(after_help = concat!(
    "Example:\n  tunnelcast rebuild --curve data/demo_digitised.csv --at-risk data/demo_at_risk.csv \\\n",
    "      --arm-col arm --events veltranib=137,standard=155 --out rebuilt.csv\n  tunnelcast fit rebuilt.csv --arm-col arm --time-unit months\n\n",
    "Rebuilt data are an approximation: the order of events and censorings within each interval is \
assumed, not known. Without a risk table the censoring pattern is guessed and the rebuilt data \
are much less reliable.\n\n",
    "Caution: extrapolated survival is an assumption, not an observation. Check every extrapolation \
against clinical opinion and external data. tunnelcast does not replace local HTA guidance or qualified review."
))]
pub struct RebuildArgs {
    /// Digitised points: CSV with columns `time` and `survival` (proportion or percentage, detected).
    #[arg(long, value_name = "POINTS.csv")]
    pub curve: PathBuf,
    /// Published numbers at risk: CSV with columns `time` and `at_risk`, starting at time 0.
    #[arg(long, value_name = "RISK.csv")]
    pub at_risk: Option<PathBuf>,
    /// Number of patients when there is no risk table: N, or ARM=N for each arm (comma-separated).
    #[arg(
        long,
        value_delimiter = ',',
        conflicts_with = "at_risk",
        value_name = "N|ARM=N"
    )]
    pub patients: Vec<String>,
    /// Total number of events, when published: N, or ARM=N for each arm (comma-separated).
    #[arg(long, value_delimiter = ',', value_name = "N|ARM=N")]
    pub events: Vec<String>,
    /// Rebuilt patient-level data (CSV: time,event and the arm column).
    #[arg(long, value_name = "IPD.csv")]
    pub out: PathBuf,
    /// Column naming the arm in the points and risk-table files; each arm is rebuilt separately.
    #[arg(long, value_name = "NAME")]
    pub arm_col: Option<String>,
    /// Replace an existing output file.
    #[arg(long)]
    pub force: bool,
}

/// Per-arm whole numbers from `N` or `ARM=N` items.
fn per_arm(option: &str, items: &[String], arms: &[Option<String>]) -> Result<Vec<Option<u64>>> {
    let mut out = vec![None; arms.len()];
    for item in items {
        let (arm, number) = match item.split_once('=') {
            Some((a, n)) => (Some(a.trim()), n.trim()),
            None => (None, item.trim()),
        };
        let value: u64 = number.parse().map_err(|_| {
            Error::Usage(format!(
                "{option} {item}: expected a whole number (or ARM=N), got \"{number}\""
            ))
        })?;
        let slot = match arm {
            None if arms.len() == 1 => 0,
            None => {
                return Err(Error::Usage(format!(
                    "{option} {item}: the curve has {} arms; give ARM=N for each",
                    arms.len()
                )))
            }
            Some(name) => arms
                .iter()
                .position(|a| a.as_deref() == Some(name))
                .ok_or_else(|| {
                    let known: Vec<&str> = arms.iter().filter_map(|a| a.as_deref()).collect();
                    Error::Usage(format!(
                        "{option} {item}: no arm \"{name}\" in the curve (arms: {})",
                        if known.is_empty() {
                            "none; --arm-col not given".to_string()
                        } else {
                            known.join(", ")
                        }
                    ))
                })?,
        };
        out[slot] = Some(value);
    }
    Ok(out)
}

fn read_file(path: &Path) -> Result<(String, Vec<u8>)> {
    let name = path.display().to_string();
    let bytes =
        std::fs::read(path).map_err(|e| Error::input(&name, format!("cannot read: {e}")))?;
    Ok((name, bytes))
}

/// `x` with 4 significant digits, trailing zeros dropped (6 rather than 6.000).
fn short(x: f64) -> String {
    let text = sig(x, 4);
    if text.contains('.') && !text.contains('e') {
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        text
    }
}

/// " for arm X" for messages, empty without arms.
fn for_arm(arm: &Option<String>) -> String {
    arm.as_ref()
        .map(|a| format!(" for arm \"{a}\""))
        .unwrap_or_default()
}

/// Checks a published total against what the curve allows: at most n·(1 − S at the last point)
/// (equality without censoring; censoring only lowers it), widened by the digitising tolerance.
fn check_events(total: u64, patients: u64, curve: &DigitisedCurve) -> Result<()> {
    let last = curve.points.last().map(|p| p.survival).unwrap_or(1.0);
    let most = (patients as f64 * (1.0 - last + TOLERANCE))
        .ceil()
        .min(patients as f64) as u64;
    if total > most {
        return Err(Error::Usage(format!(
            "--events {total}{} is more than the curve allows: {patients} patients falling to survival {} can have at most about {most} events",
            for_arm(&curve.arm),
            fixed(last, 3)
        )));
    }
    if total == 0 && last < 1.0 - TOLERANCE {
        return Err(Error::Usage(format!(
            "--events 0{} contradicts the curve, which falls to {}",
            for_arm(&curve.arm),
            fixed(last, 3)
        )));
    }
    Ok(())
}

fn passes(n: usize) -> String {
    if n == 1 {
        "1 pass".into()
    } else {
        format!("{n} passes")
    }
}

/// Renders the report of one arm.
fn render_arm(curve: &DigitisedCurve, rebuilt: &Rebuilt, quality: &Quality) -> String {
    let mut out = String::new();
    if let Some(arm) = &curve.arm {
        out.push_str(&format!("\narm {arm}\n"));
    } else {
        out.push('\n');
    }
    let c = &curve.cleaning;
    let mut cleaned = Vec::new();
    if c.reordered {
        cleaned.push("rows sorted by time".to_string());
    }
    if c.above_one > 0 {
        cleaned.push(format!("{} value(s) above 1 set to 1", c.above_one));
    }
    if c.below_zero > 0 {
        cleaned.push(format!("{} value(s) below 0 set to 0", c.below_zero));
    }
    if c.time_zero_set > 0 {
        cleaned.push(format!("{} value(s) at time 0 set to 1", c.time_zero_set));
    }
    if c.start_added {
        cleaned.push("point (0, 1) added".to_string());
    }
    if c.monotone_changed > 0 {
        cleaned.push(format!(
            "{} point(s) moved to make the curve non-increasing (largest move {})",
            c.monotone_changed,
            sig(c.monotone_largest, 2)
        ));
    }
    out.push_str(&format!(
        "digitised points: {} row(s); cleaning: {}\n",
        c.rows,
        if cleaned.is_empty() {
            "none needed".to_string()
        } else {
            cleaned.join("; ")
        }
    ));
    out.push_str(&format!(
        "rebuilt: {} patients, {} events{}, {} censored ({} still at risk at the last time {})\n",
        quality.patients,
        quality.events,
        quality
            .events_given
            .map(|g| format!(" (published {g})"))
            .unwrap_or_default(),
        quality.patients - quality.events,
        rebuilt.censored_at_end,
        short(curve.points.last().map(|p| p.time).unwrap_or(0.0))
    ));
    out.push_str(&format!(
        "rebuilt Kaplan–Meier vs the {} cleaned points: max |difference| {} (at time {}), mean {}\n",
        quality.points,
        fixed(quality.max_abs_diff, 4),
        short(quality.max_abs_at),
        fixed(quality.mean_abs_diff, 4)
    ));
    let rows: Vec<Vec<String>> = rebuilt
        .intervals
        .iter()
        .map(|iv| {
            vec![
                format!("{}–{}", short(iv.start), short(iv.end)),
                iv.at_risk_start.to_string(),
                iv.events.to_string(),
                iv.censored.to_string(),
                iv.published_end
                    .map(|p| p.to_string())
                    .unwrap_or_else(|| "–".into()),
                iv.rebuilt_end.to_string(),
                match iv.rule {
                    CensoringRule::MatchRiskTable => {
                        format!("matched table ({})", passes(iv.passes))
                    }
                    CensoringRule::MatchTotalEvents => {
                        format!("matched total events ({})", passes(iv.passes))
                    }
                    CensoringRule::EarlierRate(r) => {
                        format!("earlier censoring rate {} per unit time", sig(r, 3))
                    }
                    CensoringRule::NoneBeforeEnd => "no censoring assumed".into(),
                },
            ]
        })
        .collect();
    out.push_str(&table_aligned(
        &[
            "interval",
            "at risk",
            "events",
            "censored",
            "published at end",
            "rebuilt at end",
            "censoring rule",
        ],
        &rows,
        1,
    ));
    let off: Vec<String> = quality
        .at_risk
        .iter()
        .filter(|a| a.published != a.rebuilt)
        .map(|a| {
            format!(
                "time {}: published {}, rebuilt {}",
                short(a.time),
                a.published,
                a.rebuilt
            )
        })
        .collect();
    if quality.at_risk.len() > 1 {
        out.push_str(&if off.is_empty() {
            "numbers at risk: rebuilt equal published at every table time\n".to_string()
        } else {
            format!(
                "numbers at risk differ from the table at {}\n",
                off.join("; ")
            )
        });
    } else {
        out.push_str(
            "note: no risk table beyond time 0: the censoring pattern is assumed, so hazards, \
             events and precision are much less reliable than with a table\n",
        );
    }
    out
}

/// Renders the rebuilt records as CSV (`time,event` and the arm column).
fn render_csv(arm_col: Option<&str>, arms: &[(Option<String>, Rebuilt)]) -> Result<Vec<u8>> {
    let mut writer = csv::Writer::from_writer(Vec::new());
    let fail = |e: csv::Error| Error::Computation(format!("cannot format the output: {e}"));
    let mut header = vec!["time", "event"];
    if let Some(name) = arm_col {
        header.push(name);
    }
    writer.write_record(&header).map_err(fail)?;
    for (arm, rebuilt) in arms {
        for r in &rebuilt.records {
            let time = format!("{}", r.time);
            let event = if r.event { "1" } else { "0" };
            match arm {
                Some(a) => writer.write_record([time.as_str(), event, a.as_str()]),
                None => writer.write_record([time.as_str(), event]),
            }
            .map_err(fail)?;
        }
    }
    writer
        .into_inner()
        .map_err(|e| Error::Computation(format!("cannot format the output: {e}")))
}

/// Runs `rebuild`.
pub fn run(args: RebuildArgs) -> Result<()> {
    output::check_writable(&args.out, args.force)?;
    if args.at_risk.is_none() && args.patients.is_empty() {
        return Err(Error::Usage(
            "give --at-risk RISK.csv (the published numbers at risk) or, without one, --patients N"
                .into(),
        ));
    }
    let arm_col = args.arm_col.as_deref();
    let (curve_name, curve_bytes) = read_file(&args.curve)?;
    let curves = read_curves(&curve_name, &curve_bytes, arm_col)?;
    let arms: Vec<Option<String>> = curves.iter().map(|c| c.arm.clone()).collect();
    let risks: Vec<Vec<RiskRow>> = match &args.at_risk {
        Some(path) => {
            let (risk_name, risk_bytes) = read_file(path)?;
            let tables = read_risk_tables(&risk_name, &risk_bytes, arm_col)?;
            for table in &tables {
                if !arms.contains(&table.arm) {
                    let first = table.rows.iter().map(|r| r.line).min().unwrap_or(1);
                    return Err(Error::at(
                        &risk_name,
                        first,
                        1,
                        arm_col.unwrap_or("arm"),
                        format!(
                            "arm \"{}\" is not in the digitised curve {curve_name}",
                            table.arm.as_deref().unwrap_or("")
                        ),
                    ));
                }
            }
            let mut out = Vec::new();
            for curve in &curves {
                let table = tables.iter().find(|t| t.arm == curve.arm).ok_or_else(|| {
                    Error::input(
                        &risk_name,
                        format!("no risk-table rows{}", for_arm(&curve.arm)),
                    )
                })?;
                rebuild::read::check_risk_within_curve(&risk_name, table, curve)?;
                out.push(table.rows.clone());
            }
            out
        }
        None => per_arm("--patients", &args.patients, &arms)?
            .into_iter()
            .zip(&arms)
            .map(|(n, arm)| match n {
                Some(n) if n > 0 => Ok(vec![RiskRow {
                    time: 0.0,
                    at_risk: n,
                    line: 0,
                }]),
                Some(_) => Err(Error::Usage("--patients must be at least 1".into())),
                None => Err(Error::Usage(format!("--patients missing{}", for_arm(arm)))),
            })
            .collect::<Result<_>>()?,
    };
    let events = per_arm("--events", &args.events, &arms)?;
    for ((curve, risk), total) in curves.iter().zip(&risks).zip(&events) {
        if let Some(total) = total {
            check_events(*total, risk[0].at_risk, curve)?;
        }
    }
    let mut text = format!(
        "rebuilt from digitised points {curve_name}{} (method of Guyot et al., 2012)\n",
        args.at_risk
            .as_ref()
            .map(|p| format!(" and risk table {}", p.display()))
            .unwrap_or_else(|| " without a risk table".into())
    );
    let first = &curves[0].cleaning;
    text.push_str(&if first.percentage {
        format!(
            "survival read as percentages (largest value {} exceeds {}) and divided by 100\n",
            first.largest_value,
            rebuild::read::PERCENT_THRESHOLD
        )
    } else {
        format!(
            "survival read as proportions (no value exceeds {})\n",
            rebuild::read::PERCENT_THRESHOLD
        )
    });
    let mut results = Vec::new();
    for ((curve, risk), total) in curves.iter().zip(&risks).zip(&events) {
        let rebuilt = rebuild::rebuild(&curve.points, risk, *total).map_err(|e| match e {
            Error::Usage(m) => Error::Usage(format!("{m}{}", for_arm(&curve.arm))),
            other => other,
        })?;
        let quality = assess(&curve.points, risk, &rebuilt.records, *total);
        text.push_str(&render_arm(curve, &rebuilt, &quality));
        results.push((curve.arm.clone(), rebuilt));
    }
    let bytes = render_csv(arm_col, &results)?;
    output::write_atomic(&args.out, &bytes)?;
    text.push_str(&format!(
        "\nwrote {} (time in the figure's unit; pass it to `tunnelcast fit` with --time-unit)\n",
        args.out.display()
    ));
    text.push_str(
        "caution: rebuilt data approximate the trial's; when patients were censored within each \
         interval is assumed, not known. See docs/rebuild.md.\n",
    );
    output::print(&text);
    Ok(())
}
