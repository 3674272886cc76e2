//! `tunnelcast run ANALYSIS.toml`: a whole analysis from one file. Fits the families, takes
//! the chosen curve to a tunnel table, runs the truncation and within-cycle checks, and
//! writes the fit JSON, the tables in every requested format, the plots and `report.html`
//! into a temporary folder that is renamed into place only when everything succeeded.
//!
//! The run is split in three: [`compute`] turns the analysis file into a [`RunResult`] (fits,
//! curve, tables, checks), [`render`] turns a result into file bytes (tables, plots, the report),
//! and this module writes them, all or nothing. The report depends on the result type only.

pub mod compute;
pub mod render;

pub use compute::{compute, rebuild_data, RunPayoffs, RunResult, REBUILD_CAUTION};
pub use render::{render_files, summary};

use crate::analysis::Analysis;
use crate::cmd::rebuild::RebuildOutcome;
use crate::curve::Curve;
use crate::draws::SummaryBuilder;
use crate::error::Result;
use crate::export::tunnel::{draw_columns, Layout};
use crate::export::{Document, Table, Target};
use crate::output::{self, StagedFolder};
use crate::progress::LongRun;
use clap::Args;
use std::path::{Path, PathBuf};

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
    let staged = StagedFolder::new(folder)?;
    if let Some(per_draw) = result.per_draw.take() {
        let (rows, resource) = write_per_draw(&result, &per_draw, &staged)?;
        result.draws = Some(rows);
        result.per_draw_file = Some(resource);
    }
    let files = render_files(&result, output::source_date_epoch()?)?;
    for (name, bytes) in &files {
        staged.write(name, bytes)?;
    }
    staged.finish()?;
    Ok(summary(&result, folder))
}

/// Name of the per-draw tunnel table in the output folder.
pub const PER_DRAW_FILE: &str = "draws.csv";

/// Streams the per-draw tunnel table [`PER_DRAW_FILE`] (and its descriptor) into the staged
/// folder by the path `tunnelcast draws --layout long` writes CSV with, so both files are the
/// same bytes; summarises p_exit in the same pass. Returns the summary and the descriptor.
fn write_per_draw(
    result: &RunResult,
    per_draw: &compute::PerDraw,
    staged: &StagedFolder,
) -> Result<(
    Vec<crate::draws::SummaryRow>,
    crate::export::descriptor::Resource,
)> {
    let path = staged.staging_path(PER_DRAW_FILE);
    let target = Target::new(&path, Some("csv"), false)?;
    let point = &per_draw.point;
    let count = point.rows.len();
    let mut metadata = result.metadata_with_floor(count);
    let caution = metadata.pop();
    metadata.extend([
        ("count".to_string(), count.to_string()),
        ("layout".to_string(), Layout::Long.name().to_string()),
        (
            "per_draw".to_string(),
            "one row per draw and tunnel: draw d's tunnel table, its parameters drawn as the \
             summary's (payoffs are not drawn)"
                .to_string(),
        ),
    ]);
    metadata.extend(caution);
    let (base, adjuster) = (&result.curve, &per_draw.adjuster);
    let build = move |p: &[f64]| -> std::result::Result<Box<dyn Curve>, String> {
        Ok(Box::new(base.adjust_draw(adjuster, p)?))
    };
    let run = LongRun::start(per_draw.params.len() as u64, "draws", false)?;
    let summary = SummaryBuilder::new(point.clone(), per_draw.params.len());
    let rows = crate::cmd::draws::write_streaming(
        &target,
        point,
        &metadata,
        &per_draw.params,
        &build,
        result.analysis.cycle,
        summary,
        &run,
        None,
    )?;
    drop(run);
    let bytes = std::fs::metadata(&path)
        .map_err(|e| crate::error::Error::output(&path, format!("cannot read: {e}")))?
        .len();
    let document = Document {
        metadata,
        tables: vec![Table {
            name: "draws".into(),
            columns: draw_columns(point),
            rows: Vec::new(),
        }],
    };
    let resource = target
        .exporter
        .describe(&document, PER_DRAW_FILE, bytes)
        .ok_or_else(|| crate::error::Error::Computation("CSV has no descriptor".into()))?;
    Ok((rows, resource))
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
