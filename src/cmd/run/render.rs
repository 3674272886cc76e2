//! Rendering a computed analysis: the documents (tables with their metadata), plots, the
//! data package and the report, as file bytes by name. Nothing here computes a fit or writes a file.

use super::compute::{file_name, Chosen, RunResult, REBUILD_CAUTION};
use crate::analysis::REBUILT_FILE;
use crate::cmd::curve_args::Base;
use crate::cmd::rebuild::overlay_plot;
use crate::curve::Curve;
use crate::error::Result;
use crate::export::descriptor::{self, Package, Provenance};
use crate::export::tunnel::{long_table, Layout};
use crate::export::{exporter_for, number_text, unique_keys, Cell, Document, Table};
use crate::output::{self};
use crate::plot::{self, HorizonPlot, TunnelMarker, TunnelPlot};
use std::path::Path;

impl RunResult {
    /// Metadata heading every table file: tool, data, curve, settings, caution.
    pub fn metadata(&self) -> Vec<(String, String)> {
        let a = &self.analysis;
        let family = self.curve.family();
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
        // A joint model's lines as the curve options write them (`joint_model`, `arm`, the
        // covariate setting, `joint_estimates`); a separate fit's arm and parameters.
        let joint_lines = match &self.curve {
            Base::Joint(j) => j.metadata.clone(),
            Base::Parametric(_) => Vec::new(),
        };
        let (estimates, setting): (Vec<_>, Vec<_>) = joint_lines
            .into_iter()
            .partition(|(k, _)| k == "joint_estimates");
        m.extend(setting);
        if let Chosen::Separate(fit) = &self.chosen {
            if let Some(arm) = &fit.arm {
                m.push(("arm".into(), arm.clone()));
            }
        }
        m.extend([
            ("family".into(), family.name().to_string()),
            ("chosen_by".into(), self.chosen_by.clone()),
        ]);
        if let Some(reason) = &self.reason {
            m.push(("choice_reason".into(), reason.clone()));
        }
        m.extend(estimates);
        if let Base::Parametric(p) = &self.curve {
            m.push((
                "parameters".into(),
                crate::cmd::curve_args::parameter_text(family, &p.params),
            ));
        }
        m.push((
            "parameter_time_unit".into(),
            self.curve.unit().name().into(),
        ));
        if let Base::Parametric(p) = &self.curve {
            m.push((
                "parameter_units".into(),
                crate::families::parameter_units_text(family, p.unit),
            ));
        }
        m.extend([
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
    pub fn metadata_with_floor(&self, count: usize) -> Vec<(String, String)> {
        let mut metadata = self.metadata();
        let at = metadata
            .iter()
            .position(|(k, _)| k == "draws" || k == "caution")
            .unwrap_or(metadata.len());
        metadata.splice(at..at, self.floor_report(count));
        metadata
    }

    /// Short name of the chosen curve for titles and labels: the family, or e.g. "weibull ph
    /// joint model, arm B".
    pub fn curve_label(&self) -> String {
        match &self.chosen {
            Chosen::Separate(fit) => fit.family.clone(),
            Chosen::Joint(j) => format!(
                "{} {} joint model, arm {}",
                j.summary.family, j.summary.model, j.arm
            ),
        }
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
    // `draws.csv` itself was streamed into the folder already; only its entry is listed.
    resources.extend(result.per_draw_file.iter().cloned());
    let unit = result.analysis.time_unit;
    let longest = result
        .data
        .arms
        .iter()
        .map(|a| a.max_time())
        .fold(0.0, f64::max);
    let horizon = (result.horizon_cycles as f64 * result.analysis.cycle.in_unit(unit)).max(longest);
    let mut figures = plot::fit_figures(&result.data, &result.fits, horizon)?;
    let mut extra: Vec<(String, &dyn Curve)> = Vec::new();
    // A joint model's arm curve is none of the separate fits drawn already: draw it too.
    if let Base::Joint(_) = &result.curve {
        extra.push((result.curve_label(), &result.curve as &dyn Curve));
    }
    if let Some(a) = &result.adjusted {
        let label = format!("{}, adjusted", result.curve_label());
        extra.push((label, a.as_ref() as &dyn Curve));
    }
    figures.extend(plot::population_figures(
        &result.fits,
        &result.plausibility,
        crate::plausibility::comparison::default_display_unit(&result.fits),
        result.chosen.arm(),
        &extra,
    )?);
    let tunnel_plot = TunnelPlot {
        title: format!(
            "Tunnel table: {}{}",
            result.curve_label(),
            if result.adjusted.is_some() {
                " with adjustments"
            } else {
                ""
            }
        ),
        table: &result.tunnels,
        colour: plot::family_colour(result.curve.family().name()),
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
    // A joint curve's description names its arm already.
    let arm = match &result.chosen {
        Chosen::Separate(fit) => fit.arm.as_deref().map(|a| format!(", arm {a}")),
        Chosen::Joint(_) => None,
    }
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
