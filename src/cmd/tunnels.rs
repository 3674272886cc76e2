//! `tunnelcast tunnels`: per-cycle exit probabilities for a chain of tunnel states, printed
//! as an aligned table or written as CSV/JSON in the long or matrix layout.

use crate::cmd::curve_args::{parse_unit, CurveArgs};
use crate::cmd::payoff_args::{
    companion_path, describe_payoff, parse_discount, payoff_metadata, payoff_table,
};
use crate::curve::Curve;
use crate::discretise::{count_until, tunnel_table, TunnelTable, MAX_COUNT};
use crate::error::{Error, Result};
use crate::export::tunnel::{
    long_table, matrix_by_cause_table, matrix_table, tunnel_document, Layout,
};
use crate::export::{number_text, Cell, Table, Target};
use crate::format::{counted, readable, sig};
use crate::output;
use crate::payoff::tunnel_payoffs;
use crate::units::{Duration, TimeUnit};
use clap::Args;
use std::path::PathBuf;

/// Options of `tunnels`.
#[derive(Debug, Args)]
#[command(after_help = concat!(
    "Examples:\n",
    "  tunnelcast tunnels --family weibull --param shape=1.2 --param scale=30 --time-unit months --cycle \"1 month\" --count 24\n",
    "  tunnelcast tunnels --fit fit.json --family lognormal --arm active --cycle \"4 weeks\" --until \"10 years\" --out tunnels.csv\n",
    "  tunnelcast tunnels --family weibull --param shape=1.2 --param scale=30 --time-unit months --cycle \"1 month\" --until \"20 years\" --hazard-ratio 0.7 --waning \"1 year..3 years\" --background data/demo_lifetable.csv --start-age 63.5 --sex female --background-mode add\n\n",
    "Caution: extrapolated survival is an assumption, not an observation. Check every extrapolation \
against clinical opinion and external data. tunnelcast does not replace local HTA guidance or qualified review."
))]
pub struct TunnelsArgs {
    #[command(flatten)]
    pub curve: CurveArgs,
    /// Cycle length, e.g. "1 month", "28 days", "0.25 years".
    #[arg(long, value_name = "DURATION", allow_hyphen_values = true)]
    pub cycle: String,
    /// Number of tunnel states (the last repeats its own probability for every later cycle).
    #[arg(
        long,
        value_name = "N",
        allow_hyphen_values = true,
        conflicts_with = "until",
        required_unless_present = "until"
    )]
    pub count: Option<String>,
    /// Enough tunnel states to reach this time since entry (rounded up to whole cycles).
    #[arg(long, value_name = "DURATION", allow_hyphen_values = true)]
    pub until: Option<String>,
    /// Time unit of t_start and t_end (default: the cycle's unit).
    #[arg(long, value_name = "UNIT")]
    pub table_unit: Option<String>,
    /// Table layout.
    #[arg(long, value_enum, default_value = "long")]
    pub layout: Layout,
    /// Write the table to this file (format from the extension: .csv, .json, .xlsx).
    #[arg(long, value_name = "FILE")]
    pub out: Option<PathBuf>,
    /// Output format, overriding the extension (csv, json, xlsx).
    #[arg(long, value_name = "FORMAT", requires = "out")]
    pub format: Option<String>,
    /// Replace an existing output file.
    #[arg(long)]
    pub force: bool,
    /// Write the long table for entry at the start of each of the first N model cycles (ages at
    /// entry rising by one cycle each; needs --background); leading columns entry_cycle, entry_age.
    #[arg(long, value_name = "N", help_heading = "Background mortality")]
    pub entry_cycles: Option<String>,
    /// Payoff schedule CSV (payoff,kind,from,amount,per): adds a payoff_NAME column per payoff,
    /// the exact expected amount accrued during each tunnel's cycle by a person at its start.
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

/// Parses a duration option with a one-line error naming the option.
pub fn parse_duration(option: &str, text: &str) -> Result<Duration> {
    text.parse()
        .map_err(|e: String| Error::Usage(format!("{option}: {e}")))
}

/// Parses `--count`: a whole number from 1 to [`MAX_COUNT`].
pub fn parse_count(text: &str) -> Result<usize> {
    match text.trim().parse::<usize>() {
        Ok(n) if (1..=MAX_COUNT).contains(&n) => Ok(n),
        Ok(0) => Err(Error::Usage(
            "--count 0: at least one tunnel state is needed".into(),
        )),
        Ok(n) => Err(Error::Usage(format!(
            "--count {n}: at most {MAX_COUNT} tunnel states are allowed"
        ))),
        Err(_) => Err(Error::Usage(format!(
            "--count {}: not a whole number of tunnel states (1 or more)",
            text.trim()
        ))),
    }
}

/// The metadata every tunnel-table output starts with, before the curve's own lines.
pub fn header(
    table: &TunnelTable,
    curve_metadata: &[(String, String)],
    layout: Layout,
) -> Vec<(String, String)> {
    let mut metadata = vec![("tool_version".to_string(), crate::VERSION.to_string())];
    metadata.extend(curve_metadata.iter().cloned());
    metadata.extend([
        ("cycle".to_string(), format!("{} {}", readable(table.cycle), table.time_unit.name_for(table.cycle))),
        ("time_unit".to_string(), table.time_unit.name().to_string()),
        ("count".to_string(), table.rows.len().to_string()),
        ("layout".to_string(), layout.name().to_string()),
        (
            "convention".to_string(),
            "tunnel k covers [(k-1)*cycle, k*cycle) since entry; p_exit = 1 - S(t_end)/S(t_start); the last tunnel repeats its own probability".to_string(),
        ),
        ("caution".to_string(), crate::CAUTION.to_string()),
    ]);
    metadata
}

/// A time with up to 6 significant digits and no trailing zeros (`1`, `30.4375`, `4.33333`).
fn time_text(t: f64) -> String {
    let text = sig(t, 6);
    if text.contains('.') && !text.contains('e') {
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        text
    }
}

/// The aligned text shown on standard output.
pub fn render_text(table: &TunnelTable, layout: Layout) -> String {
    let unit = table.time_unit;
    let mut out = format!(
        "curve: {}\ncycle: {} {}; {}; times in {unit}\n",
        table.curve,
        readable(table.cycle),
        unit.name_for(table.cycle),
        counted(table.rows.len(), "tunnel state")
    );
    match layout {
        Layout::Long => {
            let mut header: Vec<String> = [
                "tunnel",
                &format!("t_start ({unit})"),
                &format!("t_end ({unit})"),
                "surv_start",
                "surv_end",
                "p_exit",
                "p_next",
            ]
            .iter()
            .map(|s| s.to_string())
            .collect();
            header.extend(table.extra.iter().map(|(n, _)| n.clone()));
            let rows: Vec<Vec<String>> = table
                .rows
                .iter()
                .enumerate()
                .map(|(i, r)| {
                    let mut row = vec![
                        r.tunnel.to_string(),
                        time_text(r.t_start),
                        time_text(r.t_end),
                        sig(r.surv_start, 6),
                        sig(r.surv_end, 6),
                        sig(r.p_exit, 6),
                        sig(r.p_next, 6),
                    ];
                    row.extend(
                        table
                            .extra
                            .iter()
                            .map(|(_, v)| v.get(i).map_or(String::new(), |x| sig(*x, 6))),
                    );
                    row
                })
                .collect();
            let header: Vec<&str> = header.iter().map(String::as_str).collect();
            out.push_str(&crate::format::table_aligned(&header, &rows, 0));
        }
        Layout::Matrix | Layout::MatrixByCause => {
            let (names, matrix) = if layout == Layout::Matrix {
                (
                    crate::export::tunnel::state_names(table.rows.len()),
                    crate::discretise::transition_matrix(table),
                )
            } else {
                (
                    crate::export::tunnel::state_names_by_cause(table),
                    crate::discretise::transition_matrix_by_cause(table),
                )
            };
            let mut header = vec!["from"];
            header.extend(names.iter().map(String::as_str));
            let rows: Vec<Vec<String>> = names
                .iter()
                .zip(&matrix)
                .map(|(n, row)| {
                    let mut cells = vec![n.clone()];
                    cells.extend(row.iter().map(|p| sig(*p, 6)));
                    cells
                })
                .collect();
            out.push_str(&crate::format::table_aligned(&header, &rows, 1));
        }
    }
    if let Some(first) = table.rows.iter().find(|r| r.surv_end == 0.0) {
        out.push_str(&format!(
            "note: survival falls below the smallest representable number by the end of tunnel {} (shown as 0); p_exit is still computed from log-survival differences, and is 1 only where survival is exactly 0\n",
            first.tunnel
        ));
    }
    out
}

/// A table of cells as aligned text (numbers to 6 significant digits).
fn render_cells(table: &Table) -> String {
    let rows: Vec<Vec<String>> = table
        .rows
        .iter()
        .map(|row| {
            row.iter()
                .map(|c| match c {
                    Cell::Int(i) => i.to_string(),
                    Cell::Number(x) => sig(*x, 6),
                    Cell::Text(t) => t.clone(),
                    Cell::Missing => String::new(),
                })
                .collect()
        })
        .collect();
    let header: Vec<&str> = table.columns.iter().map(String::as_str).collect();
    crate::format::table_aligned(&header, &rows, 0)
}

/// The extra tables of a several-table format (XLSX): the other layout, the parameters and
/// settings, and the comparison of the fits of the same arm when the curve came from a fit file.
fn workbook_tables(
    table: &TunnelTable,
    layout: Layout,
    built: &crate::cmd::curve_args::BuiltCurve,
    curve: &CurveArgs,
) -> Result<Vec<Table>> {
    let mut other = match layout {
        Layout::Long => vec![matrix_table(table)],
        Layout::Matrix | Layout::MatrixByCause => vec![long_table(table)],
    };
    // A table that splits exit by cause also gets the by-cause matrix (if it is not the main one).
    if layout != Layout::MatrixByCause && !crate::discretise::exit_causes(table).is_empty() {
        other.push(matrix_by_cause_table(table));
    }
    let text = |s: &str| Cell::Text(s.to_string());
    let family = built.base.family();
    let mut rows = vec![vec![text("family"), text(family.name()), Cell::Missing]];
    let unit = built.base.unit();
    for (name, value, label) in built.base.parameter_rows() {
        rows.push(vec![text(&name), Cell::Number(value), text(&label)]);
    }
    if let Some(settings) = built.base.parametric().and_then(|p| p.family.settings()) {
        if let Some(scale) = &settings.scale {
            rows.push(vec![text("spline_scale"), text(scale), Cell::Missing]);
        }
        let times = [("knot", settings.knots), ("cut", settings.cuts)];
        for (what, values) in times {
            for (i, t) in values.iter().flatten().enumerate() {
                rows.push(vec![
                    text(&format!("{what}_{}", i + 1)),
                    Cell::Number(*t),
                    text(unit.name()),
                ]);
            }
        }
    }
    rows.push(vec![
        text("cycle"),
        Cell::Number(table.cycle),
        text(table.time_unit.name()),
    ]);
    rows.push(vec![
        text("count"),
        Cell::Int(table.rows.len() as i64),
        text("tunnel states"),
    ]);
    rows.push(vec![
        text("curve"),
        Cell::Text(table.curve.clone()),
        Cell::Missing,
    ]);
    let mut tables = other;
    tables.push(Table {
        name: "parameters".into(),
        columns: vec!["item".into(), "value".into(), "unit".into()],
        rows,
    });
    if let (Some(path), Some(fit)) = (&curve.fit, &built.fit) {
        let file = crate::fit::FitFile::load(path)?;
        let number = |x: Option<f64>| x.map_or(Cell::Missing, Cell::Number);
        let rows = file
            .fits
            .iter()
            .filter(|f| f.arm == fit.arm)
            .map(|f| {
                let params: Vec<String> = f
                    .params
                    .iter()
                    .map(|(n, v)| format!("{n}={}", number_text(*v)))
                    .collect();
                vec![
                    Cell::Text(f.family.clone()),
                    f.arm.clone().map_or(Cell::Missing, Cell::Text),
                    Cell::Text(if f.converged { "yes" } else { "no" }.into()),
                    number(f.loglik),
                    number(f.aic),
                    number(f.bic),
                    number(f.delta_aic),
                    number(f.median),
                    Cell::Text(params.join(", ")),
                ]
            })
            .collect();
        tables.push(Table {
            name: "fit_comparison".into(),
            columns: [
                "family",
                "arm",
                "converged",
                "loglik",
                "aic",
                "bic",
                "delta_aic",
                &format!("median ({})", file.data.time_unit),
                "parameters",
            ]
            .iter()
            .map(|s| s.to_string())
            .collect(),
            rows,
        });
    }
    Ok(tables)
}

/// Most entry cycles `--entry-cycles` accepts.
pub const MAX_ENTRY_CYCLES: usize = 10_000;

/// Parses `--entry-cycles`: a whole number from 1 to [`MAX_ENTRY_CYCLES`].
pub fn parse_entry_cycles(text: &str) -> Result<usize> {
    match text.trim().parse::<usize>() {
        Ok(n) if (1..=MAX_ENTRY_CYCLES).contains(&n) => Ok(n),
        _ => Err(Error::Usage(format!(
            "--entry-cycles {}: must be a whole number of model cycles from 1 to {MAX_ENTRY_CYCLES}",
            text.trim()
        ))),
    }
}

/// The age at entry (years) for entry at the start of model cycle `e` (0-based).
pub fn entry_age(start_age: f64, cycle: Duration, e: usize) -> f64 {
    start_age + e as f64 * cycle.in_unit(TimeUnit::Years)
}

/// `tunnels --entry-cycles N`: the long table for entry at each of the first N model cycles,
/// each from the same curve and adjustments with the start age moved on by whole cycles.
#[allow(clippy::too_many_arguments)]
fn run_entry_cycles(
    built: &crate::cmd::curve_args::BuiltCurve,
    cycle: Duration,
    cycle_in_table: Duration,
    count: usize,
    n: usize,
    target: Option<Target>,
    payoff_file: Option<&crate::payoff::PayoffFile>,
    discount: crate::payoff::Discount,
) -> Result<()> {
    let start_age = built
        .adjuster
        .settings()
        .background
        .as_ref()
        .map(|b| b.start_age)
        .ok_or_else(|| Error::Usage("--entry-cycles needs --background".into()))?;
    let cycle_in_curve = cycle.in_unit(built.curve.time_unit());
    let mut tables = Vec::with_capacity(n);
    let mut exactness = None;
    let mut floors = Vec::with_capacity(n);
    for e in 0..n {
        let age = entry_age(start_age, cycle, e);
        let adjuster = built
            .adjuster
            .with_start_age(age)
            .map_err(|err| match err {
                Error::Usage(m) => Error::Usage(format!(
                    "--entry-cycles {n}: entry at cycle {e} (age {}): {m}",
                    readable(age)
                )),
                other => other,
            })?;
        let curve = built.base.adjust(&adjuster)?;
        curve
            .check_horizon(count as f64 * cycle_in_curve)
            .map_err(|err| match err {
                Error::Usage(m) => Error::Usage(format!(
                    "--entry-cycles {n}: entry at cycle {e} (age {}): {m}",
                    readable(age)
                )),
                other => other,
            })?;
        floors.push(curve.floor_report(cycle_in_curve, count));
        let mut table = tunnel_table(&curve, cycle_in_table, count);
        if let Some(file) = payoff_file {
            let p = tunnel_payoffs(&curve, &file.schedule, cycle, count, discount);
            if e == 0 {
                for w in &p.warnings {
                    eprintln!("warning: {w}");
                }
            }
            exactness = Some(p.exactness);
            p.append_to(&mut table);
        }
        tables.push((e, age, table));
    }
    let first = &tables[0].2;
    let mut metadata = built.metadata.clone();
    if let (Some(file), Some(x)) = (payoff_file, exactness) {
        metadata.extend(payoff_metadata(file, discount, x));
    }
    // The floor report of entry cycle 0 under the usual keys (as without --entry-cycles), and
    // where the floor binds for every entry cycle, since it moves with the age at entry.
    metadata.extend(floors[0].iter().cloned());
    let by_entry = floor_binds_by_entry(&floors);
    if let Some(text) = &by_entry {
        metadata.push(("floor_binds_in_tunnels_by_entry".into(), text.clone()));
    }
    metadata.push(("entry_cycles".into(), n.to_string()));
    metadata.push((
        "entry".into(),
        "entry_cycle e (0-based): entry at the start of model cycle e; entry_age = start age + e * cycle, in years; the background hazard follows the age at entry, the curve and its other adjustments follow time since entry".into(),
    ));
    let head = header(first, &metadata, Layout::Long);
    let mut long = long_table(first);
    let mut columns = vec!["entry_cycle".to_string(), "entry_age".to_string()];
    columns.append(&mut long.columns);
    let mut rows = Vec::with_capacity(n * count);
    for (e, age, table) in &tables {
        for row in long_table(table).rows {
            let mut cells = vec![Cell::Int(*e as i64), Cell::Number(*age)];
            cells.extend(row);
            rows.push(cells);
        }
    }
    let combined = Table {
        name: "tunnels".into(),
        columns,
        rows,
    };
    match target {
        Some(target) => {
            let document = crate::export::Document {
                metadata: head,
                tables: vec![combined],
            };
            target.write(&document)?;
            let described = match target.exporter.descriptor_path(&target.path) {
                Some(d) => format!("; described in {}", d.display()),
                None => String::new(),
            };
            output::print(&format!(
                "wrote {} ({} × {} of {} {}, entry at cycles 0 to {}, ages {} to {}, long layout, {}{described})\n",
                target.path.display(),
                counted(n, "entry cycle"),
                counted(count, "tunnel state"),
                readable(first.cycle),
                first.time_unit.name_for(first.cycle),
                n - 1,
                readable(tables[0].1),
                readable(tables[n - 1].1),
                target.exporter.extension()
            ));
        }
        None => {
            let mut text = format!(
                "curve: {}\ncycle: {} {}; {} for each of {} (entry ages {} to {} years); times in {}\n",
                first.curve,
                readable(first.cycle),
                first.time_unit.name_for(first.cycle),
                counted(count, "tunnel state"),
                counted(n, "entry cycle"),
                readable(tables[0].1),
                readable(tables[n - 1].1),
                first.time_unit
            );
            text.push_str(&render_cells(&combined));
            for (key, value) in &floors[0] {
                text.push_str(&format!(
                    "{} (entry cycle 0): {value}\n",
                    key.replace('_', " ")
                ));
            }
            if let Some(by_entry) = &by_entry {
                text.push_str(&format!(
                    "floor binds in tunnels by entry cycle: {by_entry}\n"
                ));
            }
            output::print(&text);
        }
    }
    Ok(())
}

/// Where the floor binds for each entry cycle, consecutive entry cycles with the same tunnels
/// grouped ("entry cycles 0–2: 6–10; entry cycle 3: 5–10"); `None` without a floor.
fn floor_binds_by_entry(floors: &[Vec<(String, String)>]) -> Option<String> {
    let binds: Vec<&str> = floors
        .iter()
        .map(|f| {
            f.iter()
                .find(|(k, _)| k == "floor_binds_in_tunnels")
                .map(|(_, v)| v.as_str())
        })
        .collect::<Option<Vec<_>>>()?;
    let mut parts = Vec::new();
    let mut i = 0;
    while i < binds.len() {
        let mut j = i;
        while j + 1 < binds.len() && binds[j + 1] == binds[i] {
            j += 1;
        }
        let entries: Vec<usize> = (i..=j).collect();
        let label = if i == j {
            "entry cycle"
        } else {
            "entry cycles"
        };
        parts.push(format!(
            "{label} {}: {}",
            crate::adjust::ranges(&entries),
            binds[i]
        ));
        i = j + 1;
    }
    Some(parts.join("; "))
}

/// Runs `tunnels`.
pub fn run(args: TunnelsArgs) -> Result<()> {
    let cycle = parse_duration("--cycle", &args.cycle)?;
    let table_unit: TimeUnit = match &args.table_unit {
        Some(u) => parse_unit("--table-unit", u)?,
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
    let target = match &args.out {
        Some(path) => Some(Target::new(path, args.format.as_deref(), args.force)?),
        None => None,
    };
    let entry_cycles = match &args.entry_cycles {
        None => None,
        Some(text) => Some(parse_entry_cycles(text)?),
    };
    if entry_cycles.is_some() {
        if args.curve.background.is_none() {
            return Err(Error::Usage(
                "--entry-cycles needs background mortality (--background LIFETABLE.csv --start-age A): without it the tunnel probabilities do not depend on the time of entry".into(),
            ));
        }
        if args.layout != Layout::Long {
            return Err(Error::Usage(format!(
                "--entry-cycles writes the long layout only; --layout {} is refused with it",
                args.layout.name()
            )));
        }
    }
    let discount = parse_discount("--discount", &args.discount)?;
    let payoff_file = match &args.payoffs {
        Some(path) => Some(crate::payoff::schedule::load(path)?),
        None => None,
    };
    let companion = match (&target, &payoff_file) {
        (Some(t), Some(_)) if args.layout != Layout::Long && t.exporter.extension() == "csv" => {
            Some(Target::new(
                &companion_path(&t.path),
                args.format.as_deref(),
                args.force,
            )?)
        }
        _ => None,
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
    if let Some(n) = entry_cycles {
        return run_entry_cycles(
            &built,
            cycle,
            cycle_in_table,
            count,
            n,
            target,
            payoff_file.as_ref(),
            discount,
        );
    }
    let mut table = tunnel_table(&built.curve, cycle_in_table, count);
    let payoffs = payoff_file
        .as_ref()
        .map(|f| tunnel_payoffs(&built.curve, &f.schedule, cycle, count, discount));
    if let Some(p) = &payoffs {
        for w in &p.warnings {
            eprintln!("warning: {w}");
        }
        // The long layout carries the payoff columns (the matrices ignore them and get a
        // payoff table beside them).
        p.append_to(&mut table);
    }
    if args.layout == Layout::MatrixByCause && crate::discretise::exit_causes(&table).is_empty() {
        return Err(Error::Usage(
            "--layout matrix-by-cause needs a curve whose exit is split by cause: add background mortality with --background LIFETABLE.csv --background-mode add".into(),
        ));
    }
    let mut metadata = built.metadata.clone();
    let floor = built.floor_report(cycle_in_curve, count);
    metadata.extend(floor.iter().cloned());
    if let (Some(file), Some(p)) = (&payoff_file, &payoffs) {
        metadata.extend(payoff_metadata(file, p.discount, p.exactness));
        metadata.extend(
            p.warnings
                .iter()
                .map(|w| ("warning".to_string(), w.clone())),
        );
    }
    let payoff_side = match (&payoffs, args.layout) {
        (Some(p), Layout::Matrix | Layout::MatrixByCause) => Some(payoff_table(&table, p)),
        _ => None,
    };
    match target {
        Some(target) => {
            let exporter = &target.exporter;
            let head = header(&table, &metadata, args.layout);
            let mut document = tunnel_document(&table, args.layout, head.clone());
            if let (Some(side), None) = (&payoff_side, &companion) {
                // JSON and XLSX hold the payoff table beside the matrix.
                document.tables.push(side.clone());
            }
            if exporter.holds_several_tables() {
                document
                    .tables
                    .extend(workbook_tables(&table, args.layout, &built, &args.curve)?);
            }
            let mut described = match exporter.descriptor_path(&target.path) {
                Some(d) => format!("; described in {}", d.display()),
                None => String::new(),
            };
            match (&companion, &payoff_side) {
                (Some(other), Some(side)) => {
                    let side_document = crate::export::Document {
                        metadata: head,
                        tables: vec![side.clone()],
                    };
                    Target::write_together(&[(&target, &document), (other, &side_document)])?;
                    described.push_str(&format!("; payoff table in {}", other.path.display()));
                }
                _ => target.write(&document)?,
            }
            output::print(&format!(
                "wrote {} ({} of {} {}, {} layout, {}{described})\n",
                target.path.display(),
                counted(table.rows.len(), "tunnel state"),
                readable(table.cycle),
                table.time_unit.name_for(table.cycle),
                args.layout.name(),
                exporter.extension()
            ));
        }
        None => {
            let mut text = render_text(&table, args.layout);
            if let Some(side) = &payoff_side {
                text.push_str("\npayoffs per tunnel state:\n");
                text.push_str(&render_cells(side));
            }
            if let (Some(file), Some(p)) = (&payoff_file, &payoffs) {
                for payoff in &file.schedule.payoffs {
                    text.push_str(&format!(
                        "{}: {}\n",
                        payoff.column(),
                        describe_payoff(payoff)
                    ));
                }
                text.push_str(&format!(
                    "payoffs discounted at {} a year within each cycle; {}\n",
                    p.discount.rate(),
                    p.exactness.describe()
                ));
            }
            for (key, value) in &floor {
                text.push_str(&format!("{}: {value}\n", key.replace('_', " ")));
            }
            output::print(&text)
        }
    }
    Ok(())
}
