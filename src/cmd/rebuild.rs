//! `tunnelcast rebuild`: patient-level data rebuilt from a digitised Kaplan–Meier figure
//! (Guyot et al., 2012), written as `time,event` for `fit`, with a report of how well the
//! rebuild reproduces the figure.

use crate::error::{Error, Result};
use crate::export::{Document, Table, Target};
use crate::format::{fixed, sig, table_aligned};
use crate::km::KaplanMeier;
use crate::output;
use crate::plot::{self, RebuildPlot, RebuildPlotArm};
use crate::rebuild::{
    self, assess, read_curves, read_risk_tables, CensoringRule, Cleaning, DigitisedCurve,
    IntervalSummary, Quality, Rebuilt, RiskRow, TOLERANCE,
};
use crate::units::TimeUnit;
use clap::Args;
use std::path::{Path, PathBuf};

/// Options of `rebuild`.
#[derive(Debug, Args)]
#[command(after_help = concat!(
    "Example:\n  tunnelcast rebuild --curve data/demo_digitised.csv --at-risk data/demo_at_risk.csv \\\n",
    "      --arm-col arm --events veltranib=137,standard=155 --out rebuilt.csv --plot rebuilt.svg\n  tunnelcast fit rebuilt.csv --arm-col arm --time-unit months\n\n",
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
    /// Overlay plot of the digitised points over the rebuilt Kaplan–Meier curve (`.svg` or `.png`).
    #[arg(long, value_name = "FILE")]
    pub plot: Option<PathBuf>,
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
fn check_events(option: &str, total: u64, patients: u64, curve: &DigitisedCurve) -> Result<()> {
    let last = curve.points.last().map(|p| p.survival).unwrap_or(1.0);
    let most = (patients as f64 * (1.0 - last + TOLERANCE))
        .ceil()
        .min(patients as f64) as u64;
    if total > most {
        return Err(Error::Usage(format!(
            "{option} {total}{} is more than the curve allows: {patients} patients falling to survival {} can have at most about {most} events",
            for_arm(&curve.arm),
            fixed(last, 3)
        )));
    }
    if total == 0 && last < 1.0 - TOLERANCE {
        return Err(Error::Usage(format!(
            "{option} 0{} contradicts the curve, which falls to {}",
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

/// The cleaning actions applied to a digitised curve, in words ("none needed" when none).
pub fn cleaning_text(c: &Cleaning) -> String {
    let mut cleaned = Vec::new();
    if c.reordered {
        cleaned.push("rows sorted by time".to_string());
    }
    if c.jitter_moved > 0 {
        cleaned.push(format!(
            "{} point(s) reordered top first among clicks less than {} apart in time",
            c.jitter_moved,
            sig(c.time_tolerance, 2)
        ));
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
    if cleaned.is_empty() {
        "none needed".to_string()
    } else {
        cleaned.join("; ")
    }
}

/// How an interval's censoring count was settled, in words.
pub fn rule_text(iv: &IntervalSummary) -> String {
    match iv.rule {
        CensoringRule::MatchRiskTable => format!("matched table ({})", passes(iv.passes)),
        CensoringRule::MatchTotalEvents => {
            format!("matched total events ({})", passes(iv.passes))
        }
        CensoringRule::EarlierRate(r) => {
            format!("earlier censoring rate {} per unit time", sig(r, 3))
        }
        CensoringRule::NoneBeforeEnd => "no censoring assumed".into(),
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
    out.push_str(&format!(
        "digitised points: {} row(s); cleaning: {}\n",
        curve.cleaning.rows,
        cleaning_text(&curve.cleaning)
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
                rule_text(iv),
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

/// Renders the rebuilt records as CSV (`time,event` and the arm column), laid out as every
/// CSV file of the tool (RFC 4180, CRLF line ends).
fn render_csv(arm_col: Option<&str>, arms: &[RebuiltArm]) -> Result<Vec<u8>> {
    let mut writer = csv::WriterBuilder::new()
        .terminator(csv::Terminator::CRLF)
        .from_writer(Vec::new());
    let fail = |e: csv::Error| Error::Computation(format!("cannot format the output: {e}"));
    let mut header = vec!["time", "event"];
    if let Some(name) = arm_col {
        header.push(name);
    }
    writer.write_record(&header).map_err(fail)?;
    for RebuiltArm { curve, rebuilt, .. } in arms {
        let arm = &curve.arm;
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

/// The document describing rebuilt records written by [`render_csv`] (for their descriptor):
/// `metadata` and the file's columns, `time`, `event` and the arm column. No rows: the file's
/// bytes come from [`RebuildOutcome::csv`].
pub fn rebuilt_document(arm_col: Option<&str>, metadata: Vec<(String, String)>) -> Document {
    let mut columns = vec!["time".to_string(), "event".to_string()];
    columns.extend(arm_col.map(str::to_string));
    Document {
        metadata,
        tables: vec![Table {
            name: "rebuilt".into(),
            columns,
            rows: Vec::new(),
        }],
    }
}

/// What the descriptor of `rebuild --out` records: the tool, the inputs and their SHA-256,
/// the numbers given, the method, the time unit (the figure's) and the cautions.
fn command_metadata(
    args: &RebuildArgs,
    curve_name: &str,
    risk_name: Option<&str>,
    outcome: &RebuildOutcome,
) -> Vec<(String, String)> {
    let mut metadata = vec![
        ("tool_version".to_string(), crate::VERSION.to_string()),
        ("curve_file".into(), curve_name.to_string()),
        ("curve_sha256".into(), outcome.curve_sha256.clone()),
    ];
    if let (Some(name), Some(sha)) = (risk_name, &outcome.at_risk_sha256) {
        metadata.push(("at_risk_file".into(), name.to_string()));
        metadata.push(("at_risk_sha256".into(), sha.clone()));
    }
    if !args.patients.is_empty() {
        metadata.push(("patients".into(), args.patients.join(",")));
    }
    if !args.events.is_empty() {
        metadata.push(("events".into(), args.events.join(",")));
    }
    if let Some(arm) = &args.arm_col {
        metadata.push(("arm_column".into(), arm.clone()));
    }
    metadata.extend([
        (
            "method".into(),
            "Guyot, Ades, Ouwens and Welton (2012); choices in docs/rebuild.md".into(),
        ),
        (
            "time_unit".into(),
            "the digitised figure's (not recorded in the inputs; give it to tunnelcast fit with --time-unit)".into(),
        ),
        (
            "rebuild_caution".into(),
            crate::cmd::run::REBUILD_CAUTION.into(),
        ),
        ("caution".into(), crate::CAUTION.into()),
    ]);
    metadata
}

/// How the inputs of a rebuild are named in messages: the command's options, or the keys of
/// an analysis file's `[data]` table.
#[derive(Debug, Clone, Copy)]
pub struct InputNames {
    /// Name of the risk table (`--at-risk`).
    pub at_risk: &'static str,
    /// Name of the number of patients (`--patients`).
    pub patients: &'static str,
    /// Name of the total events (`--events`).
    pub events: &'static str,
}

impl InputNames {
    /// The options of the `rebuild` command.
    pub const OPTIONS: InputNames = InputNames {
        at_risk: "--at-risk",
        patients: "--patients",
        events: "--events",
    };
}

/// The inputs of a rebuild, the files already read: the one description shared by the
/// `rebuild` command and `run` analysis files that start from a digitised curve.
#[derive(Debug, Clone, Copy)]
pub struct RebuildInputs<'a> {
    /// Name of the digitised points file (as it should appear in messages).
    pub curve_name: &'a str,
    /// Its bytes.
    pub curve_bytes: &'a [u8],
    /// Name and bytes of the risk table, if one is given.
    pub at_risk: Option<(&'a str, &'a [u8])>,
    /// Number of patients without a risk table: `N` or `ARM=N` items.
    pub patients: &'a [String],
    /// Published total events: `N` or `ARM=N` items.
    pub events: &'a [String],
    /// Arm column of both files.
    pub arm_col: Option<&'a str>,
    /// How the inputs are named in messages.
    pub names: InputNames,
}

/// One rebuilt arm with what went into it and how well it reproduces the figure.
#[derive(Debug, Clone)]
pub struct RebuiltArm {
    /// The cleaned digitised curve.
    pub curve: DigitisedCurve,
    /// The risk table used (one row at time 0 when only the number of patients was given).
    pub risk: Vec<RiskRow>,
    /// Published total events, if given.
    pub events_given: Option<u64>,
    /// The rebuilt records.
    pub rebuilt: Rebuilt,
    /// Fit-quality figures.
    pub quality: Quality,
}

/// A finished rebuild: every arm, the printed report and the rebuilt CSV bytes.
#[derive(Debug, Clone)]
pub struct RebuildOutcome {
    /// Arms in the order of the digitised points file.
    pub arms: Vec<RebuiltArm>,
    /// Whether a risk table was given.
    pub with_risk_table: bool,
    /// The report as printed by `rebuild` (cleaning, quality figures, intervals).
    pub report: String,
    /// The rebuilt records as CSV: `time,event` and the arm column.
    pub csv: Vec<u8>,
    /// SHA-256 of the digitised points file.
    pub curve_sha256: String,
    /// SHA-256 of the risk-table file, if given.
    pub at_risk_sha256: Option<String>,
}

/// Rebuilds every arm from inputs already read; nothing is written. The `rebuild` command and
/// `run` both call this, so an analysis file rebuilds exactly what the command does.
pub fn rebuild_inputs(inputs: &RebuildInputs) -> Result<RebuildOutcome> {
    let names = inputs.names;
    if inputs.at_risk.is_none() && inputs.patients.is_empty() {
        return Err(Error::Usage(format!(
            "give {} (the published numbers at risk) or, without one, {} N",
            names.at_risk, names.patients
        )));
    }
    let arm_col = inputs.arm_col;
    let curve_name = inputs.curve_name;
    let curves = read_curves(curve_name, inputs.curve_bytes, arm_col)?;
    let arms: Vec<Option<String>> = curves.iter().map(|c| c.arm.clone()).collect();
    let risks: Vec<Vec<RiskRow>> = match inputs.at_risk {
        Some((risk_name, risk_bytes)) => {
            let tables = read_risk_tables(risk_name, risk_bytes, arm_col)?;
            for table in &tables {
                if !arms.contains(&table.arm) {
                    let first = table.rows.iter().map(|r| r.line).min().unwrap_or(1);
                    return Err(Error::at(
                        risk_name,
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
                        risk_name,
                        format!("no risk-table rows{}", for_arm(&curve.arm)),
                    )
                })?;
                rebuild::read::check_risk_within_curve(risk_name, table, curve)?;
                out.push(table.rows.clone());
            }
            out
        }
        None => per_arm(names.patients, inputs.patients, &arms)?
            .into_iter()
            .zip(&arms)
            .map(|(n, arm)| match n {
                Some(n) if n > 0 => Ok(vec![RiskRow {
                    time: 0.0,
                    at_risk: n,
                    line: 0,
                }]),
                Some(_) => Err(Error::Usage(format!(
                    "{} must be at least 1",
                    names.patients
                ))),
                None => Err(Error::Usage(format!(
                    "{} missing{}",
                    names.patients,
                    for_arm(arm)
                ))),
            })
            .collect::<Result<_>>()?,
    };
    let events = per_arm(names.events, inputs.events, &arms)?;
    for ((curve, risk), total) in curves.iter().zip(&risks).zip(&events) {
        if let Some(total) = total {
            check_events(names.events, *total, risk[0].at_risk, curve)?;
        }
    }
    let mut text = format!(
        "rebuilt from digitised points {curve_name}{} (method of Guyot et al., 2012)\n",
        inputs
            .at_risk
            .map(|(name, _)| format!(" and risk table {name}"))
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
    for ((curve, risk), total) in curves.into_iter().zip(risks).zip(events) {
        let rebuilt = rebuild::rebuild(&curve.points, &risk, total).map_err(|e| match e {
            Error::Usage(m) => Error::Usage(format!(
                "{}{}",
                m.replace("--events", names.events),
                for_arm(&curve.arm)
            )),
            other => other,
        })?;
        let quality = assess(&curve.points, &risk, &rebuilt.records, total);
        text.push_str(&render_arm(&curve, &rebuilt, &quality));
        results.push(RebuiltArm {
            curve,
            risk,
            events_given: total,
            rebuilt,
            quality,
        });
    }
    let csv = render_csv(arm_col, &results)?;
    Ok(RebuildOutcome {
        arms: results,
        with_risk_table: inputs.at_risk.is_some(),
        report: text,
        csv,
        curve_sha256: crate::input::sha256_hex(inputs.curve_bytes),
        at_risk_sha256: inputs.at_risk.map(|(_, b)| crate::input::sha256_hex(b)),
    })
}

/// The overlay plot of a finished rebuild: digitised points over the rebuilt Kaplan–Meier
/// curve of every arm, with published and rebuilt numbers at risk under the plot.
pub fn overlay_plot(outcome: &RebuildOutcome, unit: Option<TimeUnit>) -> RebuildPlot {
    RebuildPlot {
        title: "Digitised points and rebuilt Kaplan–Meier".into(),
        unit,
        arms: outcome
            .arms
            .iter()
            .map(|a| RebuildPlotArm {
                label: a.curve.arm.clone(),
                points: a
                    .curve
                    .points
                    .iter()
                    .map(|p| (p.time, p.survival))
                    .collect(),
                km: KaplanMeier::from_records(&a.rebuilt.records),
                at_risk: if outcome.with_risk_table {
                    a.quality.at_risk.clone()
                } else {
                    Vec::new()
                },
            })
            .collect(),
    }
}

/// Runs `rebuild`.
pub fn run(args: RebuildArgs) -> Result<()> {
    // Whatever its extension, the output is CSV, described beside it.
    let target = Target::new(&args.out, Some("csv"), args.force)?;
    if let Some(plot) = &args.plot {
        plot::check_plot_path(plot, "--plot")?;
        output::check_writable(plot, args.force)?;
        if target.paths().contains(plot) {
            return Err(Error::Usage("--plot and --out name the same file".into()));
        }
    }
    let (curve_name, curve_bytes) = read_file(&args.curve)?;
    let risk = match &args.at_risk {
        Some(path) => Some(read_file(path)?),
        None => None,
    };
    let outcome = rebuild_inputs(&RebuildInputs {
        curve_name: &curve_name,
        curve_bytes: &curve_bytes,
        at_risk: risk.as_ref().map(|(n, b)| (n.as_str(), b.as_slice())),
        patients: &args.patients,
        events: &args.events,
        arm_col: args.arm_col.as_deref(),
        names: InputNames::OPTIONS,
    })?;
    let plot_bytes = match &args.plot {
        Some(path) => Some(plot::render_to(path, &overlay_plot(&outcome, None))?),
        None => None,
    };
    let metadata = command_metadata(
        &args,
        &curve_name,
        risk.as_ref().map(|(n, _)| n.as_str()),
        &outcome,
    );
    let document = rebuilt_document(args.arm_col.as_deref(), metadata);
    target.write_rendered(&document, &outcome.csv)?;
    let mut text = outcome.report;
    text.push_str(&format!(
        "\nwrote {} (time in the figure's unit; pass it to `tunnelcast fit` with --time-unit)\n",
        args.out.display()
    ));
    for descriptor in target.paths().iter().skip(1) {
        text.push_str(&format!(
            "wrote {} (its columns and provenance)\n",
            descriptor.display()
        ));
    }
    if let (Some(path), Some(bytes)) = (&args.plot, plot_bytes) {
        output::write_atomic(path, &bytes)?;
        text.push_str(&format!(
            "wrote {} (digitised points over the rebuilt Kaplan–Meier curve)\n",
            path.display()
        ));
    }
    text.push_str(
        "caution: rebuilt data approximate the trial's; when patients were censored within each \
         interval is assumed, not known. See docs/rebuild.md.\n",
    );
    output::print(&text);
    Ok(())
}
