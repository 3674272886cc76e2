//! `tunnelcast run ANALYSIS.toml`: a whole analysis from one file. Fits the families, takes
//! the chosen curve to a tunnel table, runs the truncation and within-cycle checks, and
//! writes the fit JSON, the tables in every requested format, the plots and `report.html`
//! into a temporary folder that is renamed into place only when everything succeeded.

use crate::adjust::{lifetable, AdjustedCurve, Adjuster};
use crate::analysis::{Analysis, Choice, Count, CurveSource, NamedFile, REBUILT_FILE};
use crate::cmd::rebuild::{
    overlay_plot, rebuild_inputs, InputNames, RebuildInputs, RebuildOutcome,
};
use crate::curve::{Curve, ParametricCurve};
use crate::discretise::{count_until, tunnel_table, TunnelTable};
use crate::draws::{Sampler, SummaryBuilder, SummaryRow};
use crate::error::{Error, Result};
use crate::export::descriptor::{self, Package, Provenance};
use crate::export::tunnel::{long_table, Layout};
use crate::export::{exporter_for, number_text, unique_keys, Cell, Document, Table};
use crate::fit::{fit_dataset, FamilyFit, FitFile};
use crate::horizon::{
    boundary_log_survival, default_horizon, stable_count, stable_window, suggested_count,
    truncation_table, within_cycle_table, TruncationRow, WithinCycleRow, DEFAULT_HORIZON_SURVIVAL,
    MAX_HORIZON_CYCLES,
};
use crate::input::{self, Dataset, InputOptions};
use crate::output::{self, StagedFolder};
use crate::plot::{self, HorizonPlot, TunnelMarker, TunnelPlot};
use clap::Args;
use std::path::{Path, PathBuf};
use std::sync::Arc;

/// Options of `run`.
#[derive(Debug, Args)]
#[command(after_help = concat!(
    "Example:\n  tunnelcast run analysis.toml --out results\n\n",
    "The analysis file is described in docs/report.md; data/demo_analysis.toml is a complete example.\n\n",
    "Caution: extrapolated survival is an assumption, not an observation. Check every extrapolation \
against clinical opinion and external data. tunnelcast does not replace local HTA guidance or qualified review."
))]
pub struct RunArgs {
    /// The analysis file (TOML).
    pub analysis: PathBuf,
    /// Output folder (default: `[output] folder` of the analysis file, else ANALYSIS-results beside it).
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Replace a non-empty output folder.
    #[arg(long)]
    pub force: bool,
}

/// Everything an analysis computed, before it is written.
pub struct RunResult {
    /// The checked analysis.
    pub analysis: Analysis,
    /// The validated data.
    pub data: Dataset,
    /// Every fit, as written to `fit.json`.
    pub fits: FitFile,
    /// The fit carried forward.
    pub chosen: FamilyFit,
    /// Why that fit (e.g. "smallest AIC among converged fits").
    pub chosen_by: String,
    /// `[choice] reason` of the analysis file, when given (required when the chosen family is
    /// not the lowest AIC of its arm).
    pub reason: Option<String>,
    /// The plausibility settings every fit was annotated with (landmarks, means, targets,
    /// general population); the population plot reads its life table from here.
    pub plausibility: crate::plausibility::Settings,
    /// The chosen curve in the data's time unit.
    pub curve: ParametricCurve,
    /// The chosen curve with the `[adjust]` adjustments, when any were asked for; the
    /// tunnel table and the checks then use this curve.
    pub adjusted: Option<Arc<AdjustedCurve>>,
    /// Summary of the `[draws]` parameter draws (mean and 2.5%/97.5% of p_exit per tunnel).
    pub draws: Option<Vec<SummaryRow>>,
    /// The tunnel table.
    pub tunnels: TunnelTable,
    /// How the count was set.
    pub count_rule: String,
    /// Number of whole cycles to the horizon of the checks.
    pub horizon_cycles: usize,
    /// How the horizon was set.
    pub horizon_rule: String,
    /// The truncation table, one row per candidate count.
    pub truncation: Vec<TruncationRow>,
    /// Smallest count with both truncation errors within the tolerance.
    pub suggested_count: usize,
    /// First tunnel from which p_exit is stable within the tolerance (see
    /// [`crate::horizon::stable_count`]); `None` when not reached within the horizon.
    pub stable_count: Option<usize>,
    /// Fewest tunnels the stable stretch must span.
    pub stable_window: usize,
    /// The within-cycle table.
    pub within_cycle: Vec<WithinCycleRow>,
    /// The rebuild, when the data were rebuilt from a digitised curve (`[data] curve`).
    pub rebuild: Option<RebuildOutcome>,
    /// The payoffs of `[payoffs]`, when given.
    pub payoffs: Option<RunPayoffs>,
}

/// What `[payoffs]` adds to a run: the schedule, the per-tunnel columns (also appended to the
/// tunnel table), the method table and truncation columns to the horizon.
pub struct RunPayoffs {
    /// The payoff file read and checked.
    pub file: crate::payoff::PayoffFile,
    /// The annual discount rate of every payoff figure.
    pub discount: crate::payoff::Discount,
    /// Per-tunnel payoffs of the table's tunnels, discounted within each cycle.
    pub tunnels: crate::payoff::TunnelPayoffs,
    /// The method table and `payoff_rel_error_NAME` over the horizon's cycles.
    pub horizon: crate::payoff::HorizonPayoffs,
    /// Per payoff, the running totals of every method to each boundary of the horizon
    /// (discounted), for the accrual plot.
    pub running: Vec<Vec<(crate::payoff::PayoffMethod, Vec<Option<f64>>)>>,
    /// The suggested count from the life-year criteria alone.
    pub suggested_without_payoffs: usize,
}

impl RunPayoffs {
    /// Metadata lines of every file that carries payoff figures.
    pub fn metadata(&self) -> Vec<(String, String)> {
        crate::cmd::payoff_args::payoff_metadata(&self.file, self.discount, self.tunnels.exactness)
    }
}

impl RunResult {
    /// Metadata heading every table file: tool, data, curve, settings, caution.
    pub fn metadata(&self) -> Vec<(String, String)> {
        let a = &self.analysis;
        let family = self.curve.family;
        let mut m = vec![
            ("tool_version".to_string(), crate::VERSION.to_string()),
            ("analysis_file".into(), file_name(&a.file)),
            ("data_file".into(), a.data_name.clone()),
            ("data_sha256".into(), self.data.sha256.clone()),
        ];
        if let Some(source) = &a.rebuild {
            m.push(("rebuilt_from_curve".into(), source.curve.name.clone()));
            if let Some(r) = &source.at_risk {
                m.push(("rebuilt_from_at_risk".into(), r.name.clone()));
            }
        }
        if let Some(arm) = &self.chosen.arm {
            m.push(("arm".into(), arm.clone()));
        }
        m.extend([
            ("family".into(), family.name().to_string()),
            ("chosen_by".into(), self.chosen_by.clone()),
        ]);
        if let Some(reason) = &self.reason {
            m.push(("choice_reason".into(), reason.clone()));
        }
        m.extend([
            (
                "parameters".into(),
                crate::cmd::curve_args::parameter_text(family, &self.curve.params),
            ),
            ("parameter_time_unit".into(), self.curve.unit.name().into()),
            (
                "parameter_units".into(),
                crate::families::parameter_units_text(family, self.curve.unit),
            ),
            (
                "cycle".into(),
                format!(
                    "{} {}",
                    crate::format::readable(self.tunnels.cycle),
                    self.tunnels.time_unit.name_for(self.tunnels.cycle)
                ),
            ),
            ("time_unit".into(), self.tunnels.time_unit.name().into()),
        ]);
        if let Some(adjusted) = &self.adjusted {
            m.extend(adjusted.metadata.iter().cloned());
            for w in &adjusted.warnings {
                m.push(("warning".into(), w.clone()));
            }
        }
        if let Some(d) = &a.draws {
            m.extend([
                ("draws".into(), d.count.to_string()),
                ("seed".into(), d.seed.to_string()),
                ("generator".into(), crate::draws::GENERATOR.to_string()),
            ]);
        }
        if let Some(p) = &self.payoffs {
            m.extend(p.metadata());
            for w in &p.tunnels.warnings {
                m.push(("warning".into(), w.clone()));
            }
        }
        m.push(("caution".into(), crate::CAUTION.into()));
        m
    }

    /// Where the background floor binds among the first `count` cycles of the adjusted curve
    /// (empty unless `background_mode = "floor"`): the lines `tunnels` (over the table's
    /// count) and `horizon` (over the horizon's cycles) record for the same curve.
    pub fn floor_report(&self, count: usize) -> Vec<(String, String)> {
        match &self.adjusted {
            Some(a) => a.floor_report(self.analysis.cycle.in_unit(a.time_unit()), count),
            None => Vec::new(),
        }
    }

    /// [`RunResult::metadata`] with the floor lines over `count` cycles after the adjustment
    /// lines, as a table file of that many cycles records them.
    fn metadata_with_floor(&self, count: usize) -> Vec<(String, String)> {
        let mut metadata = self.metadata();
        let at = metadata
            .iter()
            .position(|(k, _)| k == "draws" || k == "caution")
            .unwrap_or(metadata.len());
        metadata.splice(at..at, self.floor_report(count));
        metadata
    }

    /// The curve the tunnel table is computed from: the adjusted curve, else the fitted one.
    pub fn table_curve(&self) -> &dyn Curve {
        match &self.adjusted {
            Some(a) => a.as_ref(),
            None => &self.curve,
        }
    }

    /// The draws summary as exported, when `[draws]` was given.
    pub fn draws_document(&self) -> Option<Document> {
        let rows = self.draws.as_ref()?;
        // The same columns as `tunnelcast draws --summary-out`, so both files read alike.
        let mut table = crate::cmd::draws::summary_table(rows);
        table.name = "draws_summary".into();
        Some(Document {
            metadata: self.metadata_with_floor(self.tunnels.rows.len()),
            tables: vec![table],
        })
    }

    /// The tunnel table as exported (long layout).
    pub fn tunnel_document(&self) -> Document {
        let mut metadata = self.metadata_with_floor(self.tunnels.rows.len());
        metadata.push(("count".into(), self.tunnels.rows.len().to_string()));
        metadata.push(("count_rule".into(), self.count_rule.clone()));
        metadata.push(("layout".into(), Layout::Long.name().into()));
        metadata.push((
            "convention".into(),
            "tunnel k covers [(k-1)*cycle, k*cycle) since entry; p_exit = 1 - S(t_end)/S(t_start); the last tunnel repeats its own probability".into(),
        ));
        Document {
            metadata,
            tables: vec![long_table(&self.tunnels)],
        }
    }

    /// The truncation table as exported, every candidate count.
    pub fn truncation_document(&self) -> Document {
        let mut metadata = self.metadata_with_floor(self.horizon_cycles);
        metadata.extend([
            ("horizon_cycles".into(), self.horizon_cycles.to_string()),
            ("horizon_rule".into(), self.horizon_rule.clone()),
            ("tolerance".into(), number_text(self.analysis.tolerance)),
            ("suggested_count".into(), self.suggested_count.to_string()),
            (
                "stable_count".into(),
                self.stable_count
                    .map_or("not reached".into(), |k| k.to_string()),
            ),
            (
                "stable_definition".into(),
                format!(
                    "first tunnel k from which every later p_exit up to the horizon is within the tolerance (relative) of p_exit(k), over at least {} tunnels ({} years)",
                    self.stable_window,
                    crate::horizon::STABLE_WINDOW_YEARS
                ),
            ),
        ]);
        let no_columns = Vec::new();
        let payoff_columns = self
            .payoffs
            .as_ref()
            .map_or(&no_columns, |p| &p.horizon.truncation);
        if let Some(p) = &self.payoffs {
            metadata.push((
                "suggested_count_without_payoffs".into(),
                p.suggested_without_payoffs.to_string(),
            ));
        }
        let rows = self
            .truncation
            .iter()
            .enumerate()
            .map(|(i, r)| {
                let mut row = vec![
                    Cell::Int(r.count as i64),
                    Cell::Number(r.max_surv_gap),
                    Cell::Number(r.ly_rel_error),
                    Cell::Number(r.p_exit_last),
                ];
                row.extend(payoff_columns.iter().map(|(_, v)| Cell::Number(v[i])));
                row
            })
            .collect();
        let mut columns: Vec<String> = ["count", "max_surv_gap", "ly_rel_error", "p_exit_last"]
            .map(String::from)
            .to_vec();
        columns.extend(payoff_columns.iter().map(|(n, _)| n.clone()));
        Document {
            metadata,
            tables: vec![Table {
                name: "truncation".into(),
                columns,
                rows,
            }],
        }
    }

    /// Metadata of the rebuild's files (`rebuilt.csv` and the quality tables): tool, the
    /// digitised inputs and their SHA-256, method, time unit, caution. `None` without `[data] curve`.
    pub fn rebuild_metadata(&self) -> Option<Vec<(String, String)>> {
        let (Some(outcome), Some(source)) = (&self.rebuild, &self.analysis.rebuild) else {
            return None;
        };
        let mut metadata = vec![
            ("tool_version".to_string(), crate::VERSION.to_string()),
            ("analysis_file".into(), file_name(&self.analysis.file)),
            ("curve_file".into(), source.curve.name.clone()),
            ("curve_sha256".into(), outcome.curve_sha256.clone()),
        ];
        if let (Some(r), Some(sha)) = (&source.at_risk, &outcome.at_risk_sha256) {
            metadata.push(("at_risk_file".into(), r.name.clone()));
            metadata.push(("at_risk_sha256".into(), sha.clone()));
        }
        metadata.extend([
            ("rebuilt_file".into(), crate::analysis::REBUILT_FILE.into()),
            (
                "method".into(),
                "Guyot, Ades, Ouwens and Welton (2012); choices in docs/rebuild.md".into(),
            ),
            ("time_unit".into(), self.analysis.time_unit.name().into()),
            ("caution".into(), REBUILD_CAUTION.into()),
        ]);
        Some(metadata)
    }

    /// The rebuild's quality tables as exported, by file stem: per arm figures, numbers at risk
    /// against the table, and the intervals of the reconstruction. Empty without `[data] curve`.
    pub fn rebuild_documents(&self) -> Vec<(&'static str, Document)> {
        let (Some(outcome), Some(metadata)) = (&self.rebuild, self.rebuild_metadata()) else {
            return Vec::new();
        };
        let arm_cell = |a: &Option<String>| match a {
            Some(a) => Cell::Text(a.clone()),
            None => Cell::Missing,
        };
        let count = |n: u64| Cell::Int(n as i64);
        let quality_rows = outcome
            .arms
            .iter()
            .map(|a| {
                let q = &a.quality;
                let worst = q
                    .at_risk
                    .iter()
                    .map(|c| c.published.abs_diff(c.rebuilt))
                    .max()
                    .filter(|_| outcome.with_risk_table);
                vec![
                    arm_cell(&a.curve.arm),
                    Cell::Int(a.curve.cleaning.rows as i64),
                    Cell::Text(
                        if a.curve.cleaning.percentage {
                            "percentage"
                        } else {
                            "proportion"
                        }
                        .into(),
                    ),
                    Cell::Text(crate::cmd::rebuild::cleaning_text(&a.curve.cleaning)),
                    count(q.patients),
                    count(q.events),
                    q.events_given.map_or(Cell::Missing, count),
                    count(q.patients - q.events),
                    Cell::Number(q.max_abs_diff),
                    Cell::Number(q.max_abs_at),
                    Cell::Number(q.mean_abs_diff),
                    worst.map_or(Cell::Missing, count),
                ]
            })
            .collect();
        let at_risk_rows = outcome
            .arms
            .iter()
            .filter(|_| outcome.with_risk_table)
            .flat_map(|a| {
                a.quality.at_risk.iter().map(|c| {
                    vec![
                        arm_cell(&a.curve.arm),
                        Cell::Number(c.time),
                        count(c.published),
                        count(c.rebuilt),
                        Cell::Int(c.rebuilt as i64 - c.published as i64),
                    ]
                })
            })
            .collect();
        let interval_rows = outcome
            .arms
            .iter()
            .flat_map(|a| {
                a.rebuilt.intervals.iter().map(|iv| {
                    vec![
                        arm_cell(&a.curve.arm),
                        Cell::Number(iv.start),
                        Cell::Number(iv.end),
                        count(iv.at_risk_start),
                        count(iv.events),
                        count(iv.censored),
                        iv.published_end.map_or(Cell::Missing, count),
                        count(iv.rebuilt_end),
                        Cell::Text(crate::cmd::rebuild::rule_text(iv)),
                    ]
                })
            })
            .collect();
        let table = |name: &str, columns: &[&str], rows: Vec<Vec<Cell>>| Document {
            metadata: metadata.clone(),
            tables: vec![Table {
                name: name.into(),
                columns: columns.iter().map(|c| c.to_string()).collect(),
                rows,
            }],
        };
        vec![
            (
                "rebuild_quality",
                table(
                    "rebuild_quality",
                    &[
                        "arm",
                        "digitised_rows",
                        "survival_read_as",
                        "cleaning",
                        "patients",
                        "events",
                        "events_published",
                        "censored",
                        "max_abs_diff",
                        "max_abs_diff_time",
                        "mean_abs_diff",
                        "at_risk_max_abs_diff",
                    ],
                    quality_rows,
                ),
            ),
            (
                "rebuild_at_risk",
                table(
                    "rebuild_at_risk",
                    &["arm", "time", "published", "rebuilt", "difference"],
                    at_risk_rows,
                ),
            ),
            (
                "rebuild_intervals",
                table(
                    "rebuild_intervals",
                    &[
                        "arm",
                        "start",
                        "end",
                        "at_risk_start",
                        "events",
                        "censored",
                        "published_end",
                        "rebuilt_end",
                        "censoring_rule",
                    ],
                    interval_rows,
                ),
            ),
        ]
    }

    /// The within-cycle table as exported.
    pub fn within_cycle_document(&self) -> Document {
        let mut metadata = self.metadata_with_floor(self.horizon_cycles);
        metadata.extend([
            ("horizon_cycles".into(), self.horizon_cycles.to_string()),
            ("discount".into(), number_text(self.analysis.discount)),
            ("life_years_unit".into(), "years".into()),
        ]);
        let rows = self
            .within_cycle
            .iter()
            .map(|r| {
                vec![
                    Cell::Text(r.method.name().into()),
                    Cell::Number(r.life_years),
                    Cell::Number(r.exact),
                    Cell::Number(r.error),
                    Cell::Number(r.rel_error),
                    Cell::Number(r.discounted_life_years),
                    Cell::Number(r.discounted_exact),
                    Cell::Number(r.discounted_error),
                    Cell::Number(r.discounted_rel_error),
                ]
            })
            .collect();
        Document {
            metadata,
            tables: vec![Table {
                name: "within_cycle".into(),
                columns: [
                    "method",
                    "life_years",
                    "exact",
                    "error",
                    "rel_error",
                    "discounted_life_years",
                    "discounted_exact",
                    "discounted_error",
                    "discounted_rel_error",
                ]
                .map(String::from)
                .to_vec(),
                rows,
            }],
        }
    }
}

impl RunResult {
    /// The payoff table by method (`payoff_methods.*`), when `[payoffs]` was given.
    pub fn payoff_methods_document(&self) -> Option<Document> {
        let p = self.payoffs.as_ref()?;
        let mut metadata = self.metadata_with_floor(self.horizon_cycles);
        metadata.push(("horizon_cycles".into(), self.horizon_cycles.to_string()));
        let missing = |x: Option<f64>| x.map_or(Cell::Missing, Cell::Number);
        let rows = p
            .horizon
            .rows
            .iter()
            .map(|r| {
                vec![
                    Cell::Text(r.payoff.clone()),
                    Cell::Text(r.method.name().into()),
                    Cell::Number(r.total),
                    Cell::Number(r.exact),
                    Cell::Number(r.error),
                    missing(r.rel_error),
                    Cell::Number(r.disc_total),
                    Cell::Number(r.disc_exact),
                    Cell::Number(r.disc_error),
                    missing(r.disc_rel_error),
                ]
            })
            .collect();
        Some(Document {
            metadata,
            tables: vec![Table {
                name: "payoff_methods".into(),
                columns: [
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
                ]
                .map(String::from)
                .to_vec(),
                rows,
            }],
        })
    }

    /// The payoff accrual plot: per payoff, each method's running total minus the exact
    /// accrual, in percent of the exact discounted total, over time since entry.
    pub fn payoff_plot(&self) -> Option<plot::PayoffPlot> {
        let p = self.payoffs.as_ref()?;
        let h = self.analysis.cycle;
        let times: Vec<f64> = (0..=self.horizon_cycles)
            .map(|j| j as f64 * h.value)
            .collect();
        let panels = p
            .file
            .schedule
            .payoffs
            .iter()
            .zip(&p.running)
            .map(|(payoff, running)| {
                let exact_path = running
                    .iter()
                    .find(|(m, _)| *m == crate::payoff::PayoffMethod::CycleIntegrated)
                    .map(|(_, v)| v.clone())
                    .unwrap_or_default();
                let total = p
                    .horizon
                    .rows
                    .iter()
                    .find(|r| r.payoff == payoff.name)
                    .map_or(0.0, |r| r.disc_exact.abs());
                let series = running
                    .iter()
                    .map(|(method, values)| {
                        let relative = values
                            .iter()
                            .zip(&exact_path)
                            .map(|(v, e)| match (v, e) {
                                (Some(v), Some(e)) if total > 0.0 => Some(100.0 * (v - e) / total),
                                _ => None,
                            })
                            .collect();
                        (*method, relative)
                    })
                    .collect();
                plot::PayoffPanel {
                    name: payoff.name.clone(),
                    times: times.clone(),
                    series,
                }
            })
            .collect();
        Some(plot::PayoffPlot {
            title: format!(
                "Where each method gains or loses against the exact accrual (discounted at {} a year)",
                p.discount.rate()
            ),
            time_unit: h.unit.name().to_string(),
            panels,
        })
    }

    /// The Data Package of the folder's CSV files: their descriptors, the metadata they share
    /// and, only when `SOURCE_DATE_EPOCH` gives one, the time it was made.
    pub fn package(&self, resources: Vec<descriptor::Resource>, created: Option<u64>) -> Package {
        let stem = Path::new(&self.analysis.file)
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_default();
        Package {
            profile: "tabular-data-package",
            name: descriptor::identifier(&stem),
            title: self.analysis.title.clone(),
            created: created.map(output::rfc3339),
            description: "The CSV tables of one tunnelcast analysis (see report.html); each \
                          is also described in NAME.resource.json beside it."
                .into(),
            resources,
            tunnelcast: Provenance(unique_keys(&self.metadata())),
        }
    }
}

/// What every output of a run from a digitised curve says about the data.
pub const REBUILD_CAUTION: &str = "The patient-level data are reconstructed from a digitised Kaplan–Meier figure, not the trial's own: when patients were censored within each interval of the risk table is assumed, not known.";

/// Reads the digitised curve (and risk table) of `[data] curve` and rebuilds patient-level
/// data with the `rebuild` command's own code; errors name the analysis file's keys.
pub fn rebuild_data(analysis: &Analysis, source: &CurveSource) -> Result<RebuildOutcome> {
    let read = |f: &NamedFile, key: &str| {
        std::fs::read(&f.path).map_err(|e| {
            analysis.error_at(
                f.place,
                format!("[data] {key} {}: cannot read: {e}", f.path.display()),
            )
        })
    };
    let curve_bytes = read(&source.curve, "curve")?;
    let risk_bytes = match &source.at_risk {
        Some(r) => Some(read(r, "at_risk")?),
        None => None,
    };
    let names = InputNames {
        at_risk: "[data] at_risk",
        patients: "[data] patients",
        events: "[data] events",
    };
    rebuild_inputs(&RebuildInputs {
        curve_name: &source.curve.name,
        curve_bytes: &curve_bytes,
        at_risk: source
            .at_risk
            .as_ref()
            .zip(risk_bytes.as_deref())
            .map(|(r, b)| (r.name.as_str(), b)),
        patients: &source.patients,
        events: &source.events,
        arm_col: analysis.arm_column.as_deref(),
        names,
    })
    .map_err(|e| match e {
        Error::Usage(m) => {
            let place = if m.starts_with(names.events) {
                source.events_place
            } else if m.starts_with(names.patients) {
                source.patients_place
            } else {
                source.curve.place
            };
            analysis.error_at(
                place,
                m.replace("--arm-col not given", "[data] arm_column not given"),
            )
        }
        other => other,
    })
}

/// The last path component of a file name as given (so outputs do not depend on the working folder).
fn file_name(path: &str) -> String {
    Path::new(path)
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| path.to_string())
}

/// Runs the analysis on the data file's bytes; nothing is written. `lifetable_bytes`, when
/// given, are the contents of `[adjust] background` (the demo's compiled-in table); otherwise
/// the life table is read from its path.
pub fn compute(
    analysis: Analysis,
    data_bytes: &[u8],
    lifetable_bytes: Option<&[u8]>,
) -> Result<RunResult> {
    let options = InputOptions {
        time_col: analysis.time_column.clone(),
        event_col: analysis.event_column.clone(),
        arm_col: analysis.arm_column.clone(),
        delimiter: None,
        zero_time: None,
    };
    let data = input::parse(&analysis.data_name, data_bytes, &options)?;
    let arms: Vec<Option<&str>> = data.arms.iter().map(|a| a.arm.as_deref()).collect();
    let arm = match (&analysis.arm, arms.as_slice()) {
        (Some(a), _) => {
            if !arms.contains(&Some(a.as_str())) {
                let names: Vec<&str> = arms.iter().flatten().copied().collect();
                return Err(analysis.error_at(
                    analysis.arm_place,
                    format!(
                        "[fit] arm: the data have no arm \"{a}\" (arms: {})",
                        names.join(", ")
                    ),
                ));
            }
            Some(a.clone())
        }
        (None, [only]) => only.map(str::to_string),
        (None, _) => {
            let names: Vec<&str> = arms.iter().flatten().copied().collect();
            return Err(analysis.error_at(
                analysis.choose_place,
                format!(
                    "the data have several arms ({}); say which one the tunnel table is for with [fit] arm",
                    names.join(", ")
                ),
            ));
        }
    };
    let mut fits = fit_dataset(&data, &analysis.families, analysis.time_unit, None);
    if let (Some(effects), Some(arm_col)) = (&analysis.effects, &analysis.arm_column) {
        let columns = (&*analysis.time_column, &*analysis.event_column, &**arm_col);
        crate::cmd::fit_effects::attach(
            &mut fits,
            effects,
            &analysis.data_name,
            data_bytes,
            columns,
        )?;
    }
    let plausibility = plausibility_settings(&analysis, &data, lifetable_bytes)?;
    crate::plausibility::annotate(&mut fits, &plausibility);
    let in_arm = |f: &&FamilyFit| f.arm == arm;
    let (chosen, chosen_by) = match analysis.choose {
        Choice::BestAic => {
            let best = fits
                .fits
                .iter()
                .filter(in_arm)
                .filter(|f| f.converged)
                .min_by(|a, b| {
                    a.aic
                        .unwrap_or(f64::INFINITY)
                        .total_cmp(&b.aic.unwrap_or(f64::INFINITY))
                })
                .ok_or_else(|| {
                    analysis.error_at(
                        analysis.choose_place,
                        "no family converged, so none can be chosen",
                    )
                })?;
            (
                best.clone(),
                "smallest AIC among converged fits".to_string(),
            )
        }
        Choice::Family(family) => {
            let fit = fits
                .fits
                .iter()
                .filter(in_arm)
                .find(|f| f.family == family.name())
                .ok_or_else(|| {
                    Error::Computation(format!("the {} fit is missing", family.name()))
                })?;
            if !fit.converged {
                return Err(analysis.error_at(
                    analysis.choose_place,
                    format!(
                        "[fit] choose: the {} fit failed ({}); choose another family or \"best-aic\"",
                        family.name(),
                        fit.message.as_deref().unwrap_or("no reason recorded")
                    ),
                ));
            }
            (fit.clone(), "named in the analysis file".to_string())
        }
    };
    let lowest = fits
        .fits
        .iter()
        .filter(in_arm)
        .filter(|f| f.converged)
        .filter_map(|f| f.aic.map(|aic| (f, aic)))
        .min_by(|a, b| a.1.total_cmp(&b.1));
    let reason = analysis.reason.as_ref().map(|r| r.text.clone());
    if let (Some((best, best_aic)), Some(aic), None) = (lowest, chosen.aic, &reason) {
        if aic > best_aic {
            return Err(analysis.error_at(
                analysis.choose_place,
                format!(
                    "[fit] choose: {} is not the lowest AIC{} ({} is, by {}); say why it is chosen with [choice] reason = \"...\"",
                    chosen.family,
                    chosen.arm.as_deref().map(|a| format!(" in arm {a}")).unwrap_or_default(),
                    best.family,
                    crate::format::fixed(aic - best_aic, 2)
                ),
            ));
        }
    }
    let family = chosen.family().map_err(Error::Computation)?;
    let params = chosen
        .param_vector(family)
        .ok_or_else(|| Error::Computation(format!("the {} fit lacks parameters", family.name())))?;
    let curve = ParametricCurve::new(family, params, analysis.time_unit)
        .map_err(|e| Error::Computation(format!("the {} fit: {e}", family.name())))?;

    // The one way from the chosen curve to the adjusted curve, also taken by every draw.
    // The table is named as the analysis file writes it (relative to that file), as the other
    // commands name it as given: every output records the same name for the same input.
    let settings = &analysis.adjustments;
    let table = match &settings.background {
        None => None,
        Some(b) => {
            let name = analysis
                .background_name
                .clone()
                .unwrap_or_else(|| b.path.display().to_string());
            let read;
            let bytes = match lifetable_bytes {
                Some(bytes) => bytes,
                None => {
                    read = crate::csv_read::read_file(&b.path)?;
                    &read
                }
            };
            Some(lifetable::parse(&name, bytes, b.sex)?)
        }
    };
    let adjuster = Adjuster::new(settings.clone(), table)?;
    let table_curve = Arc::new(adjuster.adjust(curve.clone())?);
    let adjusted = (!adjuster.is_empty()).then(|| table_curve.clone());

    let cycle = analysis.cycle;
    let (horizon_cycles, horizon_rule) = match analysis.horizon {
        Some(h) => {
            let n = count_until(cycle, h).map_err(|e| {
                Error::Usage(format!(
                    "{}: [tunnels] horizon: {}",
                    analysis.file,
                    e.replace("--until ", "")
                ))
            })?;
            if n > MAX_HORIZON_CYCLES {
                return Err(Error::Usage(format!(
                    "{}: [tunnels] horizon {h} spans {n} cycles of {cycle}; at most {MAX_HORIZON_CYCLES} are allowed",
                    analysis.file
                )));
            }
            (n, format!("horizon = {h}"))
        }
        None => {
            let (n, by_threshold) = default_horizon(table_curve.as_ref(), cycle);
            let why = if by_threshold {
                format!("default: survival first falls below {DEFAULT_HORIZON_SURVIVAL}")
            } else {
                format!("default: survival stays above {DEFAULT_HORIZON_SURVIVAL} for 100 years")
            };
            (n, why)
        }
    };
    let payoff_input = match &analysis.payoffs {
        None => None,
        Some(p) => {
            let read;
            let bytes = match p.bytes {
                Some(bytes) => bytes,
                None => {
                    read = std::fs::read(&p.file.path).map_err(|e| {
                        analysis.error_at(
                            p.file.place,
                            format!("[payoffs] file {}: cannot read: {e}", p.file.path.display()),
                        )
                    })?;
                    &read
                }
            };
            let file = crate::payoff::schedule::parse(&p.file.name, bytes)?;
            let discount = crate::payoff::Discount::annual(p.discount).map_err(Error::Usage)?;
            Some((file, discount))
        }
    };
    let log_s = boundary_log_survival(table_curve.as_ref(), cycle, horizon_cycles);
    let truncation = truncation_table(&log_s, cycle.value);
    let life_years_suggested = suggested_count(&truncation, analysis.tolerance);
    let payoff_horizon = payoff_input.as_ref().map(|(file, discount)| {
        crate::payoff::horizon_payoffs(
            table_curve.as_ref(),
            &file.schedule,
            cycle,
            horizon_cycles,
            *discount,
        )
    });
    let suggested = match &payoff_horizon {
        Some(h) => crate::payoff::suggested_count_with_payoffs(
            &truncation,
            &h.truncation,
            analysis.tolerance,
        ),
        None => life_years_suggested,
    };
    let p_exit: Vec<f64> = truncation.iter().map(|r| r.p_exit_last).collect();
    let window = stable_window(cycle);
    let stable = stable_count(&p_exit, analysis.tolerance, window);
    let (count, count_rule) = match analysis.count {
        Count::Auto => (suggested, "auto: the suggested count".to_string()),
        Count::Fixed(n) => (n, "fixed in the analysis file".to_string()),
    };
    let last = horizon_cycles.max(count) as f64 * cycle.in_unit(curve.unit);
    table_curve
        .check_horizon(last)
        .map_err(|e| analysis.error_at(analysis.adjust_place, format!("[adjust] {e}")))?;
    let tunnels = tunnel_table(table_curve.as_ref(), cycle, count);
    let within_cycle = within_cycle_table(
        table_curve.as_ref(),
        cycle,
        horizon_cycles,
        analysis.discount,
    );
    let draws = match analysis.draws {
        None => None,
        Some(settings) => {
            let sampler = Sampler::from_fit(family, &chosen).map_err(|e| {
                Error::Computation(format!("[draws]: the {} fit: {e}", family.name()))
            })?;
            let params = sampler.draw_natural(settings.count, settings.seed);
            let unit = curve.unit;
            let adjuster = &adjuster;
            let build = move |p: &[f64]| -> std::result::Result<Box<dyn Curve>, String> {
                Ok(Box::new(adjuster.adjust_params(family, p, unit)?))
            };
            let mut summary = SummaryBuilder::new(tunnels.clone(), params.len());
            crate::draws::tables_in_chunks(
                &params,
                &build,
                cycle,
                count,
                &crate::draws::Control::none(),
                |_, tables| {
                    tables.iter().for_each(|t| summary.add(t));
                    Ok(())
                },
            )?;
            Some(summary.finish())
        }
    };
    let mut tunnels = tunnels;
    let payoffs = match (payoff_input, payoff_horizon) {
        (Some((file, discount)), Some(horizon)) => {
            let per_tunnel = crate::payoff::tunnel_payoffs(
                table_curve.as_ref(),
                &file.schedule,
                cycle,
                count,
                discount,
            );
            per_tunnel.append_to(&mut tunnels);
            // The running totals use the per-tunnel payoffs over the horizon's cycles.
            let over_horizon = crate::payoff::tunnel_payoffs(
                table_curve.as_ref(),
                &file.schedule,
                cycle,
                horizon_cycles,
                discount,
            );
            let running = file
                .schedule
                .payoffs
                .iter()
                .zip(&over_horizon.values)
                .map(|(payoff, values)| {
                    crate::payoff::running_totals(payoff, &log_s, cycle, discount, values)
                })
                .collect();
            Some(RunPayoffs {
                file,
                discount,
                tunnels: per_tunnel,
                horizon,
                running,
                suggested_without_payoffs: life_years_suggested,
            })
        }
        _ => None,
    };
    Ok(RunResult {
        analysis,
        data,
        fits,
        chosen,
        chosen_by,
        reason,
        plausibility,
        curve,
        adjusted,
        draws,
        tunnels,
        count_rule,
        horizon_cycles,
        horizon_rule,
        truncation,
        suggested_count: suggested,
        stable_count: stable,
        stable_window: window,
        within_cycle,
        rebuild: None,
        payoffs,
    })
}

/// The plausibility settings of `[plausibility]` (and `[adjust]`'s life table), with the
/// targets and the life table read; errors name the analysis file's keys. `lifetable_bytes`
/// are the `[adjust] background` table's bytes when compiled in (the demo).
pub fn plausibility_settings(
    analysis: &Analysis,
    data: &Dataset,
    lifetable_bytes: Option<&[u8]>,
) -> Result<crate::plausibility::Settings> {
    use crate::adjust::background::{BackgroundHazard, BeyondTable};
    let p = &analysis.plausibility;
    let mut settings = crate::plausibility::Settings {
        landmarks_years: p.landmarks_years.clone(),
        mean_horizon_years: p.mean_horizon_years,
        ..Default::default()
    };
    let read = |f: &NamedFile, key: &str| {
        std::fs::read(&f.path).map_err(|e| {
            analysis.error_at(
                f.place,
                format!("{key} {}: cannot read: {e}", f.path.display()),
            )
        })
    };
    if let Some(t) = &p.targets {
        let bytes = read(t, "[plausibility] targets")?;
        settings.targets = crate::plausibility::targets::parse(&t.name, &bytes)?;
        settings.targets_file = Some(t.name.clone());
        let arms: Vec<Option<String>> = data.arms.iter().map(|a| a.arm.clone()).collect();
        crate::plausibility::targets::check_arms(&settings.targets, &arms, &t.name)?;
    }
    if let Some(source) = &p.population {
        let key = if source.from_adjust {
            "[adjust] background"
        } else {
            "[plausibility] background"
        };
        let read_bytes;
        let bytes = match (source.from_adjust, lifetable_bytes) {
            (true, Some(bytes)) => bytes,
            _ => {
                read_bytes = read(&source.file, key)?;
                &read_bytes
            }
        };
        let table = lifetable::parse(&source.file.name, bytes, source.sex)?;
        let hazard = BackgroundHazard::new(
            table,
            source.start_age,
            BeyondTable::HoldLast,
            crate::units::TimeUnit::Years,
        )
        .map_err(|e| {
            let message = match e {
                Error::Usage(m) => m,
                other => other.to_string(),
            };
            let section = if source.from_adjust {
                "[adjust]"
            } else {
                "[plausibility]"
            };
            analysis.error_at(
                source.file.place,
                format!("{section} {}", message.replace("--start-age", "start_age")),
            )
        })?;
        settings.population = Some(hazard);
    }
    Ok(settings)
}

/// Every output file of a finished analysis, by name. Each CSV file gets its descriptor
/// (`NAME.resource.json`) and all of them are gathered into `datapackage.json`. `created`
/// (seconds since 1970, from `SOURCE_DATE_EPOCH`) is the only time any file records (the
/// report's date, the package's `created`); without it a rerun writes the same bytes.
pub fn render_files(result: &RunResult, created: Option<u64>) -> Result<Vec<(String, Vec<u8>)>> {
    let mut files: Vec<(String, Vec<u8>)> = Vec::new();
    let fit_json = crate::export::json::to_json_bytes(&result.fits)?;
    files.push(("fit.json".into(), fit_json));
    let mut documents = vec![
        ("tunnels", result.tunnel_document()),
        ("truncation", result.truncation_document()),
        ("within_cycle", result.within_cycle_document()),
    ];
    if let Some(d) = result.payoff_methods_document() {
        documents.push(("payoff_methods", d));
    }
    if let Some(d) = result.draws_document() {
        documents.push(("draws_summary", d));
    }
    documents.extend(result.rebuild_documents());
    let mut resources = Vec::new();
    for format in &result.analysis.formats {
        for (stem, document) in &documents {
            let name = format!("{stem}.{format}");
            let exporter = exporter_for(Path::new(&name), None)?;
            let bytes = exporter.render(document)?;
            if let Some(path) = exporter.descriptor_path(Path::new(&name)) {
                if let Some(r) = exporter.describe(document, &name, bytes.len() as u64) {
                    files.push((crate::export::file_name(&path), descriptor::to_json(&r)?));
                    resources.push(r);
                }
            }
            files.push((name, bytes));
        }
    }
    let unit = result.analysis.time_unit;
    let longest = result
        .data
        .arms
        .iter()
        .map(|a| a.max_time())
        .fold(0.0, f64::max);
    let horizon = (result.horizon_cycles as f64 * result.analysis.cycle.in_unit(unit)).max(longest);
    let mut figures = plot::fit_figures(&result.data, &result.fits, horizon)?;
    let adjusted_label = format!("{}, adjusted", result.curve.family.name());
    let extra: Vec<(String, &dyn Curve)> = match &result.adjusted {
        Some(a) => vec![(adjusted_label, a.as_ref() as &dyn Curve)],
        None => Vec::new(),
    };
    figures.extend(plot::population_figures(
        &result.fits,
        &result.plausibility,
        crate::plausibility::comparison::default_display_unit(&result.fits),
        result.chosen.arm.as_deref(),
        &extra,
    )?);
    let tunnel_plot = TunnelPlot {
        title: format!(
            "Tunnel table: {}{}",
            result.curve.family.name(),
            if result.adjusted.is_some() {
                " with adjustments"
            } else {
                ""
            }
        ),
        table: &result.tunnels,
        colour: plot::family_colour(result.curve.family.name()),
        markers: std::iter::once(TunnelMarker {
            label: "suggested count".into(),
            tunnel: result.suggested_count,
        })
        .chain(result.stable_count.map(|k| TunnelMarker {
            label: "p_exit stable from".into(),
            tunnel: k,
        }))
        .collect(),
    };
    figures.extend(plot::both("tunnels", &tunnel_plot)?);
    let horizon_plot = HorizonPlot {
        title: "Truncation errors by number of tunnel states".into(),
        counts: result.truncation.iter().map(|r| r.count).collect(),
        max_surv_gap: result.truncation.iter().map(|r| r.max_surv_gap).collect(),
        ly_rel_error: result.truncation.iter().map(|r| r.ly_rel_error).collect(),
        tolerance: result.analysis.tolerance,
    };
    figures.extend(plot::both("horizon", &horizon_plot)?);
    if let Some(payoff_plot) = result.payoff_plot() {
        figures.extend(plot::both("payoffs", &payoff_plot)?);
    }
    if let (Some(outcome), Some(metadata)) = (&result.rebuild, result.rebuild_metadata()) {
        let arm_column = result.analysis.arm_column.as_deref();
        let document = crate::cmd::rebuild::rebuilt_document(arm_column, metadata);
        let path = crate::export::csv::descriptor_path(Path::new(REBUILT_FILE));
        let r = descriptor::resource(&document, REBUILT_FILE, outcome.csv.len() as u64);
        files.push((crate::export::file_name(&path), descriptor::to_json(&r)?));
        resources.push(r);
        files.push((REBUILT_FILE.into(), outcome.csv.clone()));
        files.push(("rebuild.txt".into(), outcome.report.clone().into_bytes()));
        figures.extend(plot::both(
            "rebuild",
            &overlay_plot(outcome, Some(result.analysis.time_unit)),
        )?);
    }
    if !resources.is_empty() {
        let package = result.package(resources, created);
        files.push(("datapackage.json".into(), descriptor::to_json(&package)?));
    }
    let html = crate::report::render(result, &figures, created)?;
    files.extend(figures);
    files.push(("report.html".into(), html.into_bytes()));
    files.push((
        "analysis.toml".into(),
        result.analysis.text.clone().into_bytes(),
    ));
    Ok(files)
}

/// Short summary printed after a run.
pub fn summary(result: &RunResult, folder: &Path) -> String {
    let unit = result.tunnels.time_unit;
    let arm = result
        .chosen
        .arm
        .as_deref()
        .map(|a| format!(", arm {a}"))
        .unwrap_or_default();
    let display = crate::plausibility::comparison::default_display_unit(&result.fits);
    let mut text = crate::plausibility::comparison::render(&result.fits, display);
    text.push_str(&format!(
        "\nchosen curve: {} ({}{arm})\n",
        result.curve.describe(),
        result.chosen_by
    ));
    if let Some(reason) = &result.reason {
        text.push_str(&format!("why: {reason}\n"));
    }
    if let Some(adjusted) = &result.adjusted {
        // The adjusted curve's description repeats the chosen curve's; show what it adds.
        let full = adjusted.describe();
        let base = result.curve.describe();
        let added = full
            .strip_prefix(base.as_str())
            .map(|rest| rest.trim_start_matches([',', ';', ' ']))
            .unwrap_or(&full);
        text.push_str(&format!(
            "adjustments (in the tunnel table and the checks): {added}\n"
        ));
    }
    let stable = match result.stable_count {
        Some(k) => format!("p_exit stable from tunnel {k}"),
        None => "p_exit stable: not reached within the horizon".to_string(),
    };
    text.push_str(&format!(
        "tunnel table: {} of {} {} ({}); suggested count {}, {stable} (tolerance {})\n",
        crate::format::counted(result.tunnels.rows.len(), "tunnel state"),
        crate::format::readable(result.tunnels.cycle),
        unit.name_for(result.tunnels.cycle),
        result.count_rule,
        result.suggested_count,
        result.analysis.tolerance
    ));
    if let Some(p) = &result.payoffs {
        let columns: Vec<String> = p.tunnels.columns.clone();
        text.push_str(&format!(
            "payoffs: {} per tunnel (discounted at {} a year within each cycle); totals by within-cycle method in payoff_methods.*\n",
            columns.join(", "),
            p.discount.rate()
        ));
        for row in p
            .horizon
            .rows
            .iter()
            .filter(|r| r.method == crate::payoff::PayoffMethod::HalfCycle)
        {
            if let Some(rel) = row.disc_rel_error {
                text.push_str(&format!(
                    "  {}: exact discounted total {} to the horizon; half-cycle correction would be off by {:+.2}%\n",
                    row.payoff,
                    crate::format::sig(row.disc_exact, 6),
                    100.0 * rel
                ));
            }
        }
    }
    if let Some(source) = &result.analysis.rebuild {
        text.push_str(&format!(
            "data rebuilt from the digitised curve {} (reconstructed, not the trial's own; see {REBUILT_FILE} and rebuild.txt)\n",
            source.curve.name
        ));
    }
    text.push_str(&format!(
        "\nreport: {}\n{}\n",
        folder.join("report.html").display(),
        crate::CAUTION
    ));
    text
}

/// Computes and writes an analysis into `folder` (checked beforehand), all or nothing;
/// `rebuilt` is the rebuild the data bytes came from, when `[data] curve` was given.
pub fn execute(
    analysis: Analysis,
    data_bytes: &[u8],
    lifetable_bytes: Option<&[u8]>,
    rebuilt: Option<RebuildOutcome>,
    folder: &Path,
) -> Result<String> {
    let mut result = compute(analysis, data_bytes, lifetable_bytes)?;
    // Printed as every command prints them; `metadata` records them in each output.
    for w in result.adjusted.iter().flat_map(|a| &a.warnings) {
        eprintln!("warning: {w}");
    }
    result.rebuild = rebuilt;
    let files = render_files(&result, output::source_date_epoch()?)?;
    let staged = StagedFolder::new(folder)?;
    for (name, bytes) in &files {
        staged.write(name, bytes)?;
    }
    staged.finish()?;
    Ok(summary(&result, folder))
}

/// Runs `run`.
pub fn run(args: RunArgs) -> Result<()> {
    let analysis = Analysis::load(&args.analysis)?;
    let folder = match (&args.out, &analysis.folder) {
        (Some(out), _) => out.clone(),
        (None, Some(f)) => f.clone(),
        (None, None) => {
            let stem = args
                .analysis
                .file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_else(|| "analysis".into());
            args.analysis.with_file_name(format!("{stem}-results"))
        }
    };
    output::check_folder(&folder, args.force)?;
    let (data_bytes, rebuilt) = match &analysis.rebuild {
        Some(source) => {
            let outcome = rebuild_data(&analysis, source)?;
            (outcome.csv.clone(), Some(outcome))
        }
        None => {
            let bytes = std::fs::read(&analysis.data_path).map_err(|e| {
                analysis.error_at(
                    analysis.data_place,
                    format!(
                        "[data] file {}: cannot read: {e}",
                        analysis.data_path.display()
                    ),
                )
            })?;
            (bytes, None)
        }
    };
    let text = execute(analysis, &data_bytes, None, rebuilt, &folder)?;
    output::print(&text);
    Ok(())
}
