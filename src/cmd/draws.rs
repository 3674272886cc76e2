//! `tunnelcast draws`: uncertainty draws of a tunnel table for probabilistic sensitivity
//! analysis, written in the long or wide layout with a per-tunnel summary of `p_exit`.
//!
//! Order of work: every option and output path is checked, the curve is built, all random
//! numbers are drawn, and only then are the tables computed (in parallel, in chunks) and
//! written, the long CSV streamed to a temporary file renamed into place at the end.

use crate::cmd::curve_args::{Base, BuiltCurve, CurveArgs};
use crate::cmd::tunnels::{header, parse_count, parse_duration};
use crate::curve::Curve;
use crate::discretise::{count_until, tunnel_table, TunnelTable};
use crate::draws::{self, Bootstrap, CurveBuilder, Sampler, SummaryBuilder, SummaryRow};
use crate::error::{Error, Result};
use crate::export::tunnel::{draw_columns, draw_rows, Layout};
use crate::export::{xlsx, Cell, Document, Table, Target};
use crate::fit::FitFile;
use crate::format::{counted, readable, sig};
use crate::input::{self, InputOptions, Record};
use crate::output;
use crate::progress::LongRun;
use crate::units::{Duration, TimeUnit};
use clap::{Args, ValueEnum};
use std::io::Write as _;
use std::path::{Path, PathBuf};

/// Layout of the draws file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum DrawLayout {
    /// One row per draw and tunnel: `draw`, then the long-layout columns of `tunnels`.
    Long,
    /// One row per tunnel (`tunnel`, `t_start`, `t_end`), then one `p_exit` column per draw.
    Wide,
}

impl DrawLayout {
    /// Name as written on the command line and in headers.
    pub fn name(self) -> &'static str {
        match self {
            DrawLayout::Long => "long",
            DrawLayout::Wide => "wide",
        }
    }
}

/// Options of `draws`.
#[derive(Debug, Args)]
#[command(after_help = concat!(
    "Examples:\n",
    "  tunnelcast draws --fit fit.json --family weibull --arm active --cycle \"1 month\" --count 120 --draws 1000 --seed 42 --out draws.csv --summary-out summary.csv\n",
    "  tunnelcast draws --fit fit.json --family lognormal --arm active --cycle \"1 month\" --count 60 --draws 200 --layout wide --out draws.xlsx\n",
    "  tunnelcast draws --fit fit.json --family weibull --arm active --cycle \"1 month\" --count 60 --draws 500 --bootstrap --arm-col arm --out boot.csv\n\n",
    "Draws come from the multivariate normal approximation of the estimates on the estimation scale \
(logs of positive parameters), using the fit file's covariance; --bootstrap resamples subjects and \
refits instead. The same seed and tool version give an identical file, whatever the number of threads.\n\n",
    "Caution: extrapolated survival is an assumption, not an observation. Check every extrapolation \
against clinical opinion and external data. tunnelcast does not replace local HTA guidance or qualified review."
))]
pub struct DrawsArgs {
    #[command(flatten)]
    pub curve: CurveArgs,
    /// Cycle length, e.g. "1 month", "28 days", "0.25 years".
    #[arg(long, value_name = "DURATION")]
    pub cycle: String,
    /// Number of tunnel states (the last repeats its own probability for every later cycle).
    #[arg(
        long,
        value_name = "N",
        conflicts_with = "until",
        required_unless_present = "until"
    )]
    pub count: Option<String>,
    /// Enough tunnel states to reach this time since entry (rounded up to whole cycles).
    #[arg(long, value_name = "DURATION")]
    pub until: Option<String>,
    /// Time unit of t_start and t_end (default: the cycle's unit).
    #[arg(long, value_name = "UNIT")]
    pub table_unit: Option<String>,
    /// Number of draws (bootstrap: number of resamples).
    #[arg(long, value_name = "N", default_value = "1000")]
    pub draws: String,
    /// Seed of the random number generator (recorded in every output).
    #[arg(long, value_name = "S", default_value_t = 1)]
    pub seed: u64,
    /// Layout of the draws file.
    #[arg(long, value_enum, default_value = "long")]
    pub layout: DrawLayout,
    /// Write the draws to this file (format from the extension: .csv, .json, .xlsx).
    #[arg(long, value_name = "FILE")]
    pub out: Option<PathBuf>,
    /// Output format of --out, overriding the extension (csv, json, xlsx).
    #[arg(long, value_name = "FORMAT", requires = "out")]
    pub format: Option<String>,
    /// Write the per-tunnel summary (mean, 2.5% and 97.5% percentiles of p_exit) to this file.
    #[arg(long, value_name = "FILE")]
    pub summary_out: Option<PathBuf>,
    /// Replace existing output files.
    #[arg(long)]
    pub force: bool,
    /// No progress bar.
    #[arg(long)]
    pub quiet: bool,
    /// Nonparametric bootstrap: resample subjects with replacement and refit the family.
    #[arg(long, help_heading = "Bootstrap")]
    pub bootstrap: bool,
    /// Data file to resample (default: the file recorded in the fit file, looked up as written
    /// and then beside the fit file; its SHA-256 must match the one recorded).
    #[arg(long, value_name = "DATA.csv", help_heading = "Bootstrap")]
    pub data: Option<PathBuf>,
    /// Time column of the data file.
    #[arg(
        long,
        value_name = "NAME",
        default_value = "time",
        help_heading = "Bootstrap"
    )]
    pub time_col: String,
    /// Event column of the data file (1 = event, 0 = censored).
    #[arg(
        long,
        value_name = "NAME",
        default_value = "event",
        help_heading = "Bootstrap"
    )]
    pub event_col: String,
    /// Arm column of the data file (needed when the fit is for one arm).
    #[arg(long, value_name = "NAME", help_heading = "Bootstrap")]
    pub arm_col: Option<String>,
    /// Payoff schedule CSV (payoff,kind,from,amount,per): adds the payoff_NAME columns of each
    /// draw's table (long layout), computed from that draw's curve.
    #[arg(long, value_name = "FILE", help_heading = "Payoffs")]
    pub payoffs: Option<PathBuf>,
    /// Annual discount rate applied to the payoff columns within each cycle, from its start.
    #[arg(
        long,
        value_name = "RATE",
        default_value = "0",
        requires = "payoffs",
        help_heading = "Payoffs"
    )]
    pub discount: String,
}

/// The payoff columns of each draw's table: the schedule and discount, and the way from a
/// draw's parameters to its curve.
pub(crate) struct DrawPayoffs<'a> {
    schedule: &'a crate::payoff::Schedule,
    discount: crate::payoff::Discount,
    cycle: Duration,
    build: &'a CurveBuilder<'a>,
    params: &'a [Vec<f64>],
}

impl DrawPayoffs<'_> {
    /// Appends the payoff columns to the tables of draws `first`, `first + 1`, … (0-based).
    fn append(&self, first: usize, tables: &mut [TunnelTable]) -> Result<()> {
        for (i, table) in tables.iter_mut().enumerate() {
            let curve = (self.build)(&self.params[first + i])
                .map_err(|e| Error::Computation(format!("draw {}: {e}", first + i + 1)))?;
            crate::payoff::tunnel_payoffs(
                curve.as_ref(),
                self.schedule,
                self.cycle,
                table.rows.len(),
                self.discount,
            )
            .append_to(table);
        }
        Ok(())
    }
}

/// Parses `--draws`: a whole number, at least 1.
fn parse_draws(text: &str) -> Result<usize> {
    match text.trim().parse::<usize>() {
        Ok(0) => Err(Error::Usage(
            "--draws 0: at least one draw is needed".into(),
        )),
        Ok(n) => Ok(n),
        Err(_) => Err(Error::Usage(format!(
            "--draws {}: not a whole number of draws (1 or more)",
            text.trim()
        ))),
    }
}

/// The wide layout from `p_exit` per tunnel (in draw order).
fn wide_table(point: &TunnelTable, by_tunnel: &[Vec<f64>]) -> Table {
    let draws = by_tunnel.first().map_or(0, Vec::len);
    let mut columns: Vec<String> = ["tunnel", "t_start", "t_end"]
        .iter()
        .map(|s| s.to_string())
        .collect();
    columns.extend((1..=draws).map(|d| format!("draw_{d}")));
    let rows = point
        .rows
        .iter()
        .zip(by_tunnel)
        .map(|(r, values)| {
            let mut cells = vec![
                Cell::Int(r.tunnel as i64),
                Cell::Number(r.t_start),
                Cell::Number(r.t_end),
            ];
            cells.extend(values.iter().map(|p| Cell::Number(*p)));
            cells
        })
        .collect();
    Table {
        name: "draws_wide".into(),
        columns,
        rows,
    }
}

/// The summary table: point estimate, mean and 2.5%/97.5% percentiles of `p_exit` per tunnel.
pub(crate) fn summary_table(rows: &[SummaryRow]) -> Table {
    Table {
        name: "summary".into(),
        columns: [
            "tunnel",
            "t_start",
            "t_end",
            "p_exit_point",
            "p_exit_mean",
            "p_exit_pct2_5",
            "p_exit_pct97_5",
        ]
        .iter()
        .map(|s| s.to_string())
        .collect(),
        rows: rows
            .iter()
            .map(|r| {
                vec![
                    Cell::Int(r.tunnel as i64),
                    Cell::Number(r.t_start),
                    Cell::Number(r.t_end),
                    Cell::Number(r.point),
                    Cell::Number(r.mean),
                    Cell::Number(r.lower),
                    Cell::Number(r.upper),
                ]
            })
            .collect(),
    }
}

/// The drawn natural parameters, one row per draw.
fn parameter_table(names: &[String], params: &[Vec<f64>]) -> Table {
    let mut columns = vec!["draw".to_string()];
    columns.extend(names.iter().cloned());
    Table {
        name: "parameters".into(),
        columns,
        rows: params
            .iter()
            .enumerate()
            .map(|(i, p)| {
                let mut row = vec![Cell::Int(i as i64 + 1)];
                row.extend(p.iter().map(|x| Cell::Number(*x)));
                row
            })
            .collect(),
    }
}

/// The aligned summary printed on standard output.
fn render_summary(point: &TunnelTable, rows: &[SummaryRow], draws: usize) -> String {
    let unit = point.time_unit;
    let mut out = format!(
        "curve: {}\ncycle: {} {}; {}; {}; times in {unit}\n",
        point.curve,
        readable(point.cycle),
        unit.name_for(point.cycle),
        counted(point.rows.len(), "tunnel state"),
        counted(draws, "draw")
    );
    let text: Vec<Vec<String>> = rows
        .iter()
        .map(|r| {
            vec![
                r.tunnel.to_string(),
                sig(r.t_start, 6),
                sig(r.t_end, 6),
                sig(r.point, 5),
                sig(r.mean, 5),
                sig(r.lower, 5),
                sig(r.upper, 5),
            ]
        })
        .collect();
    out.push_str(&crate::format::table_aligned(
        &[
            "tunnel",
            &format!("t_start ({unit})"),
            &format!("t_end ({unit})"),
            "p_exit (point)",
            "mean",
            "2.5%",
            "97.5%",
        ],
        &text,
        0,
    ));
    out
}

/// Finds the data file to resample: `--data`, else the fit file's record of it (as written,
/// then beside the fit file); its SHA-256 must match the fit file's.
fn bootstrap_records(
    args: &DrawsArgs,
    fit_path: &Path,
    file: &FitFile,
    arm: Option<&str>,
) -> Result<(String, Vec<Record>)> {
    let recorded = PathBuf::from(&file.data.file);
    let path = match &args.data {
        Some(p) => p.clone(),
        None => {
            let beside = fit_path
                .parent()
                .map(|d| d.join(&recorded))
                .unwrap_or_else(|| recorded.clone());
            if recorded.is_file() {
                recorded
            } else if beside.is_file() {
                beside
            } else {
                return Err(Error::input(
                    &fit_path.display().to_string(),
                    format!(
                        "--bootstrap needs the fitted data file {}, which is neither in the current folder nor beside the fit file; give it with --data",
                        file.data.file
                    ),
                ));
            }
        }
    };
    let name = path.display().to_string();
    let bytes =
        std::fs::read(&path).map_err(|e| Error::input(&name, format!("cannot read: {e}")))?;
    if input::sha256_hex(&bytes) != file.data.sha256 {
        return Err(Error::input(
            &name,
            "differs from the data the fit file was made from (SHA-256 does not match); bootstrap the file that was fitted",
        ));
    }
    if arm.is_some() && args.arm_col.is_none() {
        return Err(Error::Usage(
            "--bootstrap of one arm needs --arm-col (the arm column of the data file)".into(),
        ));
    }
    let options = InputOptions {
        time_col: args.time_col.clone(),
        event_col: args.event_col.clone(),
        arm_col: args.arm_col.clone(),
        delimiter: None,
        zero_time: file.data.zero_time,
    };
    let data = input::parse(&name, &bytes, &options)?;
    let records = data
        .arms
        .into_iter()
        .find(|a| a.arm.as_deref() == arm)
        .map(|a| a.records)
        .ok_or_else(|| {
            Error::input(&name, format!("has no arm \"{}\"", arm.unwrap_or_default()))
        })?;
    Ok((name, records))
}

/// Checks that the tables of the draws from `first` (0-based) carry the point estimate's extra
/// columns, in its order: every row of a draws file then has its header's fields.
fn same_columns(point: &TunnelTable, first: usize, tables: &[TunnelTable]) -> Result<()> {
    let names = |t: &TunnelTable| t.extra.iter().map(|(n, _)| n.clone()).collect::<Vec<_>>();
    let expected = names(point);
    for (i, table) in tables.iter().enumerate() {
        let got = names(table);
        if got != expected {
            return Err(Error::Computation(format!(
                "draw {}: its table has the extra columns [{}], the point estimate's [{}]",
                first + i + 1,
                got.join(", "),
                expected.join(", ")
            )));
        }
    }
    Ok(())
}

/// Ordered metadata lines of an output file.
type Metadata = Vec<(String, String)>;

/// Parameter sets for the draws and the metadata lines saying how they were made.
fn draw_parameters(
    args: &DrawsArgs,
    built: &BuiltCurve,
    n: usize,
    run: &LongRun,
) -> Result<(Vec<Vec<f64>>, Metadata)> {
    let family = built.base.family();
    let fit_path = args.curve.fit.as_deref().ok_or_else(|| {
        Error::Usage(
            "draws need --fit FIT.json: published parameters (--param) carry no covariance to draw from"
                .into(),
        )
    })?;
    let fit_name = fit_path.display().to_string();
    if let Base::Joint(joint) = &built.base {
        if args.bootstrap {
            return Err(Error::Usage(
                "--bootstrap refits one family to one arm; with --model the draws come from the joint model's covariance (leave out --bootstrap)".into(),
            ));
        }
        let sampler = joint.sampler().map_err(|e| Error::input(&fit_name, e))?;
        let metadata = vec![
            (
                "method".to_string(),
                "multivariate normal on the estimation scale over all the joint model's parameters together (reference curve and effects; estimates and covariance from the fit file)".to_string(),
            ),
            ("estimation_names".to_string(), joint.names.join(", ")),
        ];
        return Ok((sampler.draw(n, args.seed), metadata));
    }
    let fit = built
        .fit
        .as_ref()
        .ok_or_else(|| Error::input(&fit_name, "no fit for this family"))?;
    if !args.bootstrap {
        let sampler = Sampler::from_fit(family, fit).map_err(|e| Error::input(&fit_name, e))?;
        let params = sampler.draw_natural(n, args.seed);
        let metadata = vec![
            (
                "method".to_string(),
                "multivariate normal on the estimation scale (estimates and covariance from the fit file), transformed back to natural parameters".to_string(),
            ),
            ("estimation_names".to_string(), family.estimation_names().join(", ")),
        ];
        return Ok((params, metadata));
    }
    let file = FitFile::load(fit_path)?;
    let (data_name, records) = bootstrap_records(args, fit_path, &file, fit.arm.as_deref())?;
    let Bootstrap { params, failed } =
        draws::bootstrap(family, &records, n, args.seed, &run.control())?;
    if params.is_empty() {
        return Err(Error::Computation(format!(
            "every one of the {n} bootstrap refits of {} failed (first: {})",
            family.name(),
            failed.first().map(|f| f.1.as_str()).unwrap_or("")
        )));
    }
    if !failed.is_empty() {
        eprintln!(
            "warning: {} of {n} bootstrap refits failed and were left out (first: resample {}: {})",
            failed.len(),
            failed[0].0,
            failed[0].1
        );
    }
    let mut metadata = vec![
        (
            "method".to_string(),
            "nonparametric bootstrap: subjects resampled with replacement, family refitted by maximum likelihood".to_string(),
        ),
        ("bootstrap_data_file".to_string(), data_name),
        ("bootstrap_resamples".to_string(), n.to_string()),
        ("bootstrap_failed".to_string(), failed.len().to_string()),
    ];
    if !failed.is_empty() {
        let list: Vec<String> = failed.iter().map(|(i, _)| i.to_string()).collect();
        metadata.push(("bootstrap_failed_resamples".to_string(), list.join(" ")));
    }
    Ok((params, metadata))
}

/// Runs `draws`.
pub fn run(args: DrawsArgs) -> Result<()> {
    let cycle = parse_duration("--cycle", &args.cycle)?;
    let table_unit: TimeUnit = match &args.table_unit {
        Some(u) => crate::cmd::curve_args::parse_unit("--table-unit", u)?,
        None => cycle.unit,
    };
    let count = match (&args.count, &args.until) {
        (Some(c), _) => parse_count(c)?,
        (None, Some(u)) => {
            let until = parse_duration("--until", u)?;
            count_until(cycle, until).map_err(Error::Usage)?
        }
        (None, None) => return Err(Error::Usage("give --count N or --until DURATION".into())),
    };
    let n = parse_draws(&args.draws)?;
    if args.data.is_some() && !args.bootstrap {
        return Err(Error::Usage("--data is used only with --bootstrap".into()));
    }
    let out = match &args.out {
        Some(p) => Some(Target::new(p, args.format.as_deref(), args.force)?),
        None => None,
    };
    let summary_out = match &args.summary_out {
        Some(p) => Some(Target::new(p, None, args.force)?),
        None => None,
    };
    if let (Some(a), Some(b)) = (&out, &summary_out) {
        if a.path == b.path {
            return Err(Error::Usage(
                "--out and --summary-out name the same file".into(),
            ));
        }
        if let Some(shared) = a.paths().iter().find(|p| b.paths().contains(p)) {
            return Err(Error::Usage(format!(
                "--out and --summary-out would both write {} (a file or its descriptor)",
                shared.display()
            )));
        }
    }
    for t in out.iter() {
        if t.exporter.extension() == "xlsx" {
            match args.layout {
                DrawLayout::Long => xlsx::check_fits("draws", n * count, 8)?,
                DrawLayout::Wide => xlsx::check_fits("draws_wide", count, 3 + n)?,
            }
        }
    }
    let discount = crate::cmd::payoff_args::parse_discount("--discount", &args.discount)?;
    let payoff_file = match &args.payoffs {
        Some(path) => Some(crate::payoff::schedule::load(path)?),
        None => None,
    };
    let built = args.curve.build()?;
    for w in &built.warnings {
        eprintln!("warning: {w}");
    }
    let cycle_in_table = Duration {
        value: cycle.in_unit(table_unit),
        unit: table_unit,
    };
    let cycle_in_curve = cycle.in_unit(built.curve.time_unit());
    built.check_horizon(count as f64 * cycle_in_curve)?;
    let mut point = tunnel_table(&built.curve, cycle_in_table, count);
    let point_payoffs = payoff_file
        .as_ref()
        .map(|f| crate::payoff::tunnel_payoffs(&built.curve, &f.schedule, cycle, count, discount));
    if let Some(p) = &point_payoffs {
        for w in &p.warnings {
            eprintln!("warning: {w}");
        }
        p.append_to(&mut point);
    }
    // What the floor does to the point estimate's table, as `tunnels` records it for the same
    // curve and count.
    let floor = built.floor_report(cycle_in_curve, count);

    // Every draw goes through the adjuster that made the point estimate's curve.
    let base = &built.base;
    let adjuster = &built.adjuster;
    // A draw of all the joint model's parameters is the arm's curve at the draw.
    let build = move |p: &[f64]| -> std::result::Result<Box<dyn Curve>, String> {
        Ok(Box::new(base.adjust_draw(adjuster, p)?))
    };
    let parameter_names = base.draw_names();

    let label = if args.bootstrap { "refits" } else { "draws" };
    let run = LongRun::start(n as u64, label, args.quiet)?;
    let (params, method) = draw_parameters(&args, &built, n, &run)?;
    drop(run);

    let draw_payoffs = payoff_file.as_ref().map(|f| DrawPayoffs {
        schedule: &f.schedule,
        discount,
        cycle,
        build: &build,
        params: &params,
    });
    let mut curve_metadata = built.metadata.clone();
    curve_metadata.extend(floor.iter().cloned());
    if let (Some(f), Some(p)) = (&payoff_file, &point_payoffs) {
        curve_metadata.extend(crate::cmd::payoff_args::payoff_metadata(
            f,
            p.discount,
            p.exactness,
        ));
    }
    let mut metadata = header(&point, &curve_metadata, Layout::Long);
    for (key, value) in metadata.iter_mut() {
        if key == "layout" {
            *value = args.layout.name().to_string();
        }
    }
    let caution = metadata.pop();
    metadata.extend(method);
    metadata.extend([
        ("draws".to_string(), params.len().to_string()),
        ("seed".to_string(), args.seed.to_string()),
        ("generator".to_string(), draws::GENERATOR.to_string()),
    ]);
    if args.layout == DrawLayout::Wide {
        metadata.push((
            "wide_layout".to_string(),
            "one row per tunnel; column draw_d holds p_exit of draw d".to_string(),
        ));
    }
    metadata.extend(caution);

    let run = LongRun::start(params.len() as u64, "tables", args.quiet)?;
    let mut summary = SummaryBuilder::new(point.clone(), params.len());
    let streaming = out
        .as_ref()
        .filter(|t| args.layout == DrawLayout::Long && t.exporter.render_more_rows(&[]).is_some());
    let rows = match streaming {
        Some(t) => write_streaming(
            t,
            &point,
            &metadata,
            &params,
            &build,
            cycle_in_table,
            summary,
            &run,
            draw_payoffs.as_ref(),
        )?,
        None => {
            let mut long = Vec::new();
            let keep_long = out.is_some() && args.layout == DrawLayout::Long;
            draws::tables_in_chunks(
                &params,
                &build,
                cycle_in_table,
                count,
                &run.control(),
                |first, mut tables| {
                    if let Some(p) = &draw_payoffs {
                        p.append(first, &mut tables)?;
                    }
                    same_columns(&point, first, &tables)?;
                    for (i, table) in tables.iter().enumerate() {
                        summary.add(table);
                        if keep_long {
                            long.extend(draw_rows(first + i + 1, table));
                        }
                    }
                    Ok(())
                },
            )?;
            if let Some(e) = run.interrupted() {
                return Err(e);
            }
            let main = out.as_ref().map(|_| match args.layout {
                DrawLayout::Long => Table {
                    name: "draws".into(),
                    columns: draw_columns(&point),
                    rows: long,
                },
                DrawLayout::Wide => wide_table(&point, &summary.values()),
            });
            let rows = summary.finish();
            if let (Some(t), Some(main)) = (&out, main) {
                let mut tables = vec![main];
                if t.exporter.holds_several_tables() || t.exporter.extension() == "json" {
                    tables.push(summary_table(&rows));
                    tables.push(parameter_table(&parameter_names, &params));
                }
                let document = Document {
                    metadata: metadata.clone(),
                    tables,
                };
                let bytes = t.exporter.render(&document)?;
                if let Some(e) = run.interrupted() {
                    return Err(e);
                }
                t.write_rendered(&document, &bytes)?;
            }
            rows
        }
    };
    drop(run);
    if let Some(t) = &summary_out {
        let mut summary_metadata = metadata.clone();
        summary_metadata.retain(|(k, _)| k != "layout" && k != "wide_layout");
        let document = Document {
            metadata: summary_metadata,
            tables: vec![summary_table(&rows)],
        };
        t.write(&document)?;
    }
    let mut text = render_summary(&point, &rows, params.len());
    for (key, value) in &floor {
        text.push_str(&format!("{}: {value}\n", key.replace('_', " ")));
    }
    for t in out.iter().chain(summary_out.iter()) {
        text.push_str(&format!("wrote {}\n", t.path.display()));
        if let Some(descriptor) = t.exporter.descriptor_path(&t.path) {
            text.push_str(&format!(
                "wrote {} (its columns, units and provenance)\n",
                descriptor.display()
            ));
        }
    }
    output::print(&text);
    Ok(())
}

/// Tunnel rows formatted together by one thread when streaming: about 1.5 MB of CSV, more than
/// the file's buffer, so each group goes to the file without an extra copy (33 draws of 480
/// monthly tunnels; fewer draws per group for longer tables, so memory stays bounded).
const ROWS_PER_GROUP: usize = 16_000;

/// Groups computed ahead of the writing when streaming: enough to keep every core busy while
/// the calling thread writes, few enough to keep memory at a few tens of megabytes.
const GROUPS_IN_FLIGHT: usize = 24;

/// Bytes of the streamed long layout after which the calling thread waits for the disk, where
/// the file system takes no direct writes (see [`output::Staged::settle`]).
const SETTLE_BYTES: usize = 64 << 20;

/// Writes the long layout group by group: the header through [`Exporter::render`], then
/// groups of draws formatted by worker threads ([`Exporter::append_draw_rows`]) and written in
/// draw order by the calling thread, so the disk writes overlap the next groups' tables. The
/// descriptor (for CSV) is made from the same header document once the stream is complete,
/// and both files are put in place together.
///
/// [`Exporter::render`]: crate::export::Exporter::render
/// [`Exporter::append_draw_rows`]: crate::export::Exporter::append_draw_rows
#[allow(clippy::too_many_arguments)]
pub(crate) fn write_streaming(
    target: &Target,
    point: &TunnelTable,
    metadata: &[(String, String)],
    params: &[Vec<f64>],
    build: &CurveBuilder<'_>,
    cycle: Duration,
    mut summary: SummaryBuilder,
    run: &LongRun,
    payoffs: Option<&DrawPayoffs<'_>>,
) -> Result<Vec<SummaryRow>> {
    let head_document = Document {
        metadata: metadata.to_vec(),
        tables: vec![Table {
            name: "draws".into(),
            columns: draw_columns(point),
            rows: Vec::new(),
        }],
    };
    let head = target.exporter.render(&head_document)?;
    let count = point.rows.len();
    let io = |e: std::io::Error| Error::output(&target.path, format!("cannot write: {e}"));
    target.write_streamed(&head_document, |file| {
        file.write_all(&head).map_err(io)?;
        // Written buffers come back for reuse: fresh megabyte buffers for every group would be
        // returned to the system and faulted in again, which costs more than formatting.
        let spare: std::sync::Mutex<Vec<Vec<u8>>> = std::sync::Mutex::new(Vec::new());
        let mut unsettled = 0;
        draws::groups_streamed(
            params,
            ((ROWS_PER_GROUP / count.max(1)).max(1), GROUPS_IN_FLIGHT),
            build,
            (cycle, count),
            &run.control(),
            |first, mut tables| {
                if let Some(p) = payoffs {
                    p.append(first, &mut tables)?;
                }
                same_columns(point, first, &tables)?;
                let reused = spare.lock().ok().and_then(|mut s| s.pop());
                let mut bytes = reused.unwrap_or_default();
                bytes.reserve(100 * count * tables.len());
                if let Some(done) = target
                    .exporter
                    .append_draw_rows(first + 1, &tables, &mut bytes)
                {
                    done?;
                }
                Ok((bytes, draws::p_exit_block(&tables, count)))
            },
            |_, (mut bytes, block)| {
                summary.add_block(&block);
                file.write_all(&bytes).map_err(io)?;
                unsettled += bytes.len();
                // Where the disk takes the bytes through the page cache, it catches up while
                // the tables are computed, not after the end.
                if unsettled >= SETTLE_BYTES {
                    file.settle().map_err(io)?;
                    unsettled = 0;
                }
                bytes.clear();
                if let Ok(mut s) = spare.lock() {
                    s.push(bytes);
                }
                Ok(())
            },
        )?;
        match run.interrupted() {
            Some(e) => Err(e),
            None => Ok(()),
        }
    })?;
    Ok(summary.finish())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn draws_count_must_be_a_positive_whole_number() {
        assert_eq!(parse_draws("25").unwrap(), 25);
        assert!(parse_draws("0")
            .unwrap_err()
            .to_string()
            .contains("at least one"));
        assert!(parse_draws("2.5").is_err());
        assert!(parse_draws("-3").is_err());
    }
}
