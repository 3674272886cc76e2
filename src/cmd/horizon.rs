//! `tunnelcast horizon`: the truncation table (how many tunnel states are enough) and the
//! within-cycle table (what the cycle length costs in life-years), printed and optionally
//! written as JSON.

use crate::cmd::curve_args::CurveArgs;
use crate::cmd::payoff_args::{describe_payoff, payoff_metadata};
use crate::cmd::tunnels::parse_duration;
use crate::curve::Curve;
use crate::discretise::count_until;
use crate::error::{Error, Result};
use crate::export::json::MetadataMap;
use crate::format::{counted, readable, sig};
use crate::horizon::{
    boundary_log_survival, default_horizon, stable_count, stable_window, suggested_count,
    truncation_table, within_cycle_table, TruncationRow, WithinCycleRow, DEFAULT_HORIZON_SURVIVAL,
    DEFAULT_HORIZON_YEARS, MAX_HORIZON_CYCLES, STABLE_WINDOW_YEARS,
};
use crate::output;
use crate::payoff::{horizon_payoffs, suggested_count_with_payoffs, Discount, PayoffMethodRow};
use clap::Args;
use serde::Serialize;
use std::path::PathBuf;

/// Options of `horizon`.
#[derive(Debug, Args)]
#[command(after_help = concat!(
    "Example:\n",
    "  tunnelcast horizon --family weibull --param shape=1.2 --param scale=30 --time-unit months --cycle \"1 month\"\n\n",
    "Caution: extrapolated survival is an assumption, not an observation. Check every extrapolation \
against clinical opinion and external data. tunnelcast does not replace local HTA guidance or qualified review."
))]
pub struct HorizonArgs {
    #[command(flatten)]
    pub curve: CurveArgs,
    /// Cycle length, e.g. "1 month", "28 days"; the tables are in its unit.
    #[arg(long, value_name = "DURATION", allow_hyphen_values = true)]
    pub cycle: String,
    /// Time horizon (default: where survival first falls below 0.001, at most 100 years); rounded up to whole cycles.
    #[arg(long, value_name = "DURATION", allow_hyphen_values = true)]
    pub horizon: Option<String>,
    /// Tolerance for both truncation errors and for the stable-probability criterion.
    #[arg(long, default_value = "0.001", value_name = "X")]
    pub tolerance: String,
    /// Annual discount rate for the discounted life-years, applied as (1 + r)^(-t).
    #[arg(long, default_value = "0.035", value_name = "RATE")]
    pub discount: String,
    /// Write every truncation row and the within-cycle table to this JSON file.
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
    /// Replace an existing output file.
    #[arg(long)]
    pub force: bool,
    /// Payoff schedule CSV (payoff,kind,from,amount,per): adds the payoff table by method beside
    /// the exact total, and payoff_rel_error_NAME to the truncation table.
    #[arg(long, value_name = "FILE", help_heading = "Payoffs")]
    pub payoffs: Option<PathBuf>,
}

/// A truncation row with the payoff columns after the contract's four.
pub struct TruncationOut<'a> {
    /// The row.
    pub row: &'a TruncationRow,
    /// (`payoff_rel_error_NAME`, value at this count).
    pub payoffs: Vec<(&'a str, f64)>,
}

impl Serialize for TruncationOut<'_> {
    fn serialize<S: serde::Serializer>(
        &self,
        serializer: S,
    ) -> std::result::Result<S::Ok, S::Error> {
        use serde::ser::SerializeMap;
        let mut map = serializer.serialize_map(Some(4 + self.payoffs.len()))?;
        map.serialize_entry("count", &self.row.count)?;
        map.serialize_entry("max_surv_gap", &self.row.max_surv_gap)?;
        map.serialize_entry("ly_rel_error", &self.row.ly_rel_error)?;
        map.serialize_entry("p_exit_last", &self.row.p_exit_last)?;
        for (name, value) in &self.payoffs {
            map.serialize_entry(name, value)?;
        }
        map.end()
    }
}

/// Truncation rows joined with the payoff columns (`columns[i].1[K - 1]`).
pub fn truncation_out<'a>(
    rows: &'a [TruncationRow],
    columns: &'a [(String, Vec<f64>)],
) -> Vec<TruncationOut<'a>> {
    rows.iter()
        .enumerate()
        .map(|(i, row)| TruncationOut {
            row,
            payoffs: columns.iter().map(|(n, v)| (n.as_str(), v[i])).collect(),
        })
        .collect()
}

/// The payoff table by method as aligned text, like the within-cycle table.
pub fn payoff_method_text(rows: &[PayoffMethodRow]) -> String {
    let missing = |x: Option<f64>| x.map_or_else(|| "-".to_string(), |v| sig(v, 3));
    let cells: Vec<Vec<String>> = rows
        .iter()
        .map(|r| {
            vec![
                r.payoff.clone(),
                r.method.name().to_string(),
                sig(r.total, 6),
                sig(r.exact, 6),
                sig(r.error, 3),
                missing(r.rel_error),
                sig(r.disc_total, 6),
                sig(r.disc_exact, 6),
                sig(r.disc_error, 3),
                missing(r.disc_rel_error),
            ]
        })
        .collect();
    crate::format::table(
        &[
            "payoff",
            "method",
            "total",
            "exact",
            "error",
            "rel_error",
            "disc_total",
            "disc_exact",
            "disc_error",
            "disc_rel_error",
        ],
        &cells,
    )
}

/// The JSON written by `horizon --json`.
#[derive(Serialize)]
pub struct HorizonReport<'a> {
    /// Tool version, curve source and settings, caution.
    pub metadata: MetadataMap<'a>,
    /// Time unit of every time (cycle, horizon); not of life-years, see `life_years_unit`.
    pub time_unit: &'static str,
    /// Unit of every life-year figure of `within_cycle`: always `years`.
    pub life_years_unit: &'static str,
    /// Cycle length in `time_unit`.
    pub cycle: f64,
    /// Number of whole cycles to the horizon.
    pub horizon_cycles: usize,
    /// Horizon in `time_unit` (whole cycles).
    pub horizon: f64,
    /// Tolerance used.
    pub tolerance: f64,
    /// Annual discount rate used in the within-cycle table.
    pub discount: f64,
    /// Smallest count with both truncation errors within the tolerance.
    pub suggested_count: usize,
    /// First tunnel from which every later p_exit up to the horizon is within the tolerance
    /// (relative) of its own, over at least `stable_window` tunnels; null when not reached.
    pub stable_count: Option<usize>,
    /// Fewest tunnels the stable stretch must span (two years of cycles, at least 2).
    pub stable_window: usize,
    /// One row per candidate count 1..horizon_cycles (with `payoff_rel_error_NAME` per payoff
    /// when `--payoffs` is given).
    pub truncation: Vec<TruncationOut<'a>>,
    /// One row per within-cycle method.
    pub within_cycle: &'a [WithinCycleRow],
    /// With `--payoffs`: one row per payoff and method, undiscounted and discounted at `discount`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub payoffs: Option<&'a [PayoffMethodRow]>,
    /// With `--payoffs`: the smallest count with both life-year criteria within the tolerance,
    /// ignoring the payoffs (`suggested_count` also requires every payoff's).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub suggested_count_without_payoffs: Option<usize>,
}

fn parse_number(option: &str, text: &str, check: impl Fn(f64) -> bool, what: &str) -> Result<f64> {
    match text.trim().parse::<f64>() {
        Ok(x) if x.is_finite() && check(x) => Ok(x),
        _ => Err(Error::Usage(format!(
            "{option} {}: must be {what}",
            text.trim()
        ))),
    }
}

/// Counts shown in the printed truncation table: 1–12, then about 25 spread out, plus the two answers.
fn shown_counts(n: usize, keep: &[usize]) -> Vec<usize> {
    let step = (n / 25).max(1);
    let mut counts: Vec<usize> = (1..=n.min(12)).collect();
    counts.extend((step..=n).step_by(step).filter(|k| *k > 12));
    counts.extend(keep.iter().copied().filter(|k| *k <= n));
    counts.push(n);
    counts.sort_unstable();
    counts.dedup();
    counts
}

/// The printed answer for `stable_count`: the tunnel and what it means, or "not reached".
pub fn stable_text(stable: Option<usize>, tolerance: f64, window: usize) -> String {
    match stable {
        Some(k) => format!(
            "{k} (from tunnel {k} on, every p_exit up to the horizon is within {tolerance} relative of tunnel {k}'s, over at least {} = {STABLE_WINDOW_YEARS} years)",
            counted(window, "tunnel")
        ),
        None => format!(
            "not reached (no tunnel from which every later p_exit up to the horizon stays within {tolerance} relative of its own over at least {} = {STABLE_WINDOW_YEARS} years)",
            counted(window, "tunnel")
        ),
    }
}

/// Runs `horizon`.
pub fn run(args: HorizonArgs) -> Result<()> {
    let cycle = parse_duration("--cycle", &args.cycle)?;
    let tolerance = parse_number(
        "--tolerance",
        &args.tolerance,
        |x| x > 0.0 && x < 1.0,
        "a number between 0 and 1",
    )?;
    let discount = parse_number(
        "--discount",
        &args.discount,
        |x| (0.0..1.0).contains(&x),
        "an annual rate from 0 to below 1 (e.g. 0.035)",
    )?;
    let given_horizon = match &args.horizon {
        Some(h) => Some(parse_duration("--horizon", h)?),
        None => None,
    };
    if let Some(path) = &args.json {
        output::check_writable(path, args.force)?;
    }
    let payoff_file = match &args.payoffs {
        Some(path) => Some(crate::payoff::schedule::load(path)?),
        None => None,
    };
    let built = args.curve.build()?;
    for w in &built.warnings {
        eprintln!("warning: {w}");
    }
    let curve: &dyn Curve = &built.curve;
    let unit = cycle.unit;
    let (n, horizon_note) = match given_horizon {
        Some(h) => {
            let n = count_until(cycle, h)
                .map_err(|e| Error::Usage(e.replace("--until", "--horizon")))?;
            if n > MAX_HORIZON_CYCLES {
                return Err(Error::Usage(format!(
                    "--horizon {h} spans {n} cycles of {cycle}; at most {MAX_HORIZON_CYCLES} are allowed (use a longer cycle)"
                )));
            }
            (n, format!("--horizon {h}"))
        }
        None => {
            let (n, by_threshold) = default_horizon(curve, cycle);
            let why = if by_threshold {
                format!("default: survival first falls below {DEFAULT_HORIZON_SURVIVAL}")
            } else {
                format!("default: survival stays above {DEFAULT_HORIZON_SURVIVAL} for {DEFAULT_HORIZON_YEARS} years")
            };
            (n, why)
        }
    };
    let horizon = n as f64 * cycle.value;
    let cycle_in_curve = cycle.in_unit(curve.time_unit());
    built.check_horizon(n as f64 * cycle_in_curve)?;
    let floor = built.floor_report(cycle_in_curve, n);
    let log_s = boundary_log_survival(curve, cycle, n);
    let truncation = truncation_table(&log_s, cycle.value);
    let payoffs = match &payoff_file {
        Some(file) => {
            let rate = Discount::annual(discount).map_err(Error::Usage)?;
            Some(horizon_payoffs(curve, &file.schedule, cycle, n, rate))
        }
        None => None,
    };
    let no_columns = Vec::new();
    let payoff_columns = payoffs.as_ref().map_or(&no_columns, |p| &p.truncation);
    let life_years_only = suggested_count(&truncation, tolerance);
    let suggested = suggested_count_with_payoffs(&truncation, payoff_columns, tolerance);
    let p_exit: Vec<f64> = truncation.iter().map(|r| r.p_exit_last).collect();
    let window = stable_window(cycle);
    let stable = stable_count(&p_exit, tolerance, window);
    let within = within_cycle_table(curve, cycle, n, discount);

    let mut text = format!(
        "curve: {}\ncycle: {} {}; horizon: {} {} = {} ({horizon_note}); times in {unit}, life-years in years\n\n",
        curve.describe(),
        readable(cycle.value),
        unit.name_for(cycle.value),
        readable(horizon),
        unit.name_for(horizon),
        counted(n, "cycle"),
    );
    text.push_str(&format!(
        "Truncation (chain cut at K tunnels, the last repeating its probability; tolerance {tolerance}):\n"
    ));
    let marked: Vec<usize> = std::iter::once(suggested).chain(stable).collect();
    let rows: Vec<Vec<String>> = shown_counts(n, &marked)
        .into_iter()
        .map(|k| {
            let r = &truncation[k - 1];
            let mark = match (k == suggested, Some(k) == stable) {
                (true, true) => "suggested, stable",
                (true, false) => "suggested",
                (false, true) => "stable",
                _ => "",
            };
            let mut cells = vec![
                r.count.to_string(),
                sig(r.max_surv_gap, 3),
                sig(r.ly_rel_error, 3),
                sig(r.p_exit_last, 4),
            ];
            cells.extend(payoff_columns.iter().map(|(_, v)| sig(v[k - 1], 3)));
            cells.push(mark.to_string());
            cells
        })
        .collect();
    let mut header = vec!["count", "max_surv_gap", "ly_rel_error", "p_exit_last"];
    header.extend(payoff_columns.iter().map(|(name, _)| name.as_str()));
    header.push("");
    text.push_str(&crate::format::table_aligned(&header, &rows, 0));
    let criteria = if payoff_columns.is_empty() {
        "max_surv_gap and ly_rel_error both".to_string()
    } else {
        format!(
            "max_surv_gap, ly_rel_error and every payoff_rel_error_NAME (discounted at {discount} a year) all"
        )
    };
    text.push_str(&format!(
        "suggested_count: {suggested} (smallest K with {criteria} ≤ {tolerance})\n"
    ));
    if !payoff_columns.is_empty() && life_years_only != suggested {
        text.push_str(&format!(
            "  (without the payoffs it would be {life_years_only})\n"
        ));
    }
    text.push_str(&format!(
        "stable_count: {}\n\n",
        stable_text(stable, tolerance, window)
    ));
    text.push_str(&format!(
        "Within-cycle life-years (in years) to {} {} from survival at cycle boundaries; discounted at {} a year as (1 + r)^(-t) at each boundary:\n",
        readable(horizon),
        unit.name_for(horizon),
        discount
    ));
    let rows: Vec<Vec<String>> = within
        .iter()
        .map(|r| {
            vec![
                r.method.name().to_string(),
                sig(r.life_years, 6),
                sig(r.exact, 6),
                sig(r.error, 3),
                sig(r.rel_error, 3),
                sig(r.discounted_life_years, 6),
                sig(r.discounted_exact, 6),
                sig(r.discounted_error, 3),
                sig(r.discounted_rel_error, 3),
            ]
        })
        .collect();
    text.push_str(&crate::format::table(
        &[
            "method",
            "life_years",
            "exact",
            "error",
            "rel_error",
            "disc_life_years",
            "disc_exact",
            "disc_error",
            "disc_rel_error",
        ],
        &rows,
    ));

    if let (Some(file), Some(p)) = (&payoff_file, &payoffs) {
        text.push_str(&format!(
            "\nPayoffs to {} {} for one person entering at time 0, by method, beside the exact total; discounted at {} a year as (1 + r)^(-t) (cycle-integrated: the per-tunnel payoffs, {}):\n",
            readable(horizon),
            unit.name_for(horizon),
            discount,
            p.exactness.describe()
        ));
        text.push_str(&payoff_method_text(&p.rows));
        for payoff in &file.schedule.payoffs {
            text.push_str(&format!(
                "{}: {}\n",
                payoff.column(),
                describe_payoff(payoff)
            ));
        }
    }
    for (key, value) in &floor {
        text.push_str(&format!("{}: {value}\n", key.replace('_', " ")));
    }
    if let Some(path) = &args.json {
        let mut metadata = vec![("tool_version".to_string(), crate::VERSION.to_string())];
        metadata.extend(built.metadata.iter().cloned());
        metadata.extend(floor.iter().cloned());
        metadata.push(("horizon_rule".into(), horizon_note.clone()));
        metadata.push((
            "cycle".into(),
            format!("{} {}", readable(cycle.value), unit.name_for(cycle.value)),
        ));
        if let (Some(file), Some(p)) = (&payoff_file, &payoffs) {
            let rate = Discount::annual(discount).map_err(Error::Usage)?;
            metadata.extend(payoff_metadata(file, rate, p.exactness));
        }
        metadata.push(("caution".into(), crate::CAUTION.into()));
        let report = HorizonReport {
            metadata: MetadataMap(&metadata),
            time_unit: unit.name(),
            life_years_unit: "years",
            cycle: cycle.value,
            horizon_cycles: n,
            horizon,
            tolerance,
            discount,
            suggested_count: suggested,
            stable_count: stable,
            stable_window: window,
            truncation: truncation_out(&truncation, payoff_columns),
            within_cycle: &within,
            payoffs: payoffs.as_ref().map(|p| p.rows.as_slice()),
            suggested_count_without_payoffs: payoffs.as_ref().map(|_| life_years_only),
        };
        let bytes = crate::export::json::to_json_bytes(&report)?;
        output::write_atomic(path, &bytes)?;
        text.push_str(&format!("wrote {}\n", path.display()));
    }
    output::print(&text);
    Ok(())
}
