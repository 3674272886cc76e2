//! `tunnelcast demo`: runs the bundled invented analysis (`data/demo_analysis.toml` on the
//! fictional trial in `data/demo_trial.csv`, see `data/README.md`) exactly as `run` would,
//! into `./tunnelcast-demo/` or `--out`. Both files are compiled into the binary, so the demo
//! works from any folder.

use crate::analysis::Analysis;
use crate::error::{Error, Result};
use crate::output;
use clap::Args;
use std::path::{Path, PathBuf};

/// Options of `demo`.
#[derive(Debug, Args)]
#[command(after_help = concat!(
    "Example:\n  tunnelcast demo --out demo-results\n\n",
    "The data are invented (a fictional trial, see data/README.md).\n\n",
    "Caution: extrapolated survival is an assumption, not an observation. Check every extrapolation \
against clinical opinion and external data. tunnelcast does not replace local HTA guidance or qualified review."
))]
pub struct DemoArgs {
    /// Output folder; an earlier demo output there is replaced.
    #[arg(long, default_value = "tunnelcast-demo")]
    pub out: PathBuf,
}

/// The bundled invented trial data, compiled into the binary so the demo runs anywhere.
pub const DEMO_TRIAL: &str = include_str!("../../data/demo_trial.csv");

/// The bundled invented life table (background mortality of the demo).
pub const DEMO_LIFETABLE: &str = include_str!("../../data/demo_lifetable.csv");

/// The bundled invented payoff schedule (`[payoffs]` of the demo, from `scripts/make_demo.py`).
pub const DEMO_PAYOFFS: &str = include_str!("../../data/demo_payoffs.csv");

/// The bundled analysis file.
pub const DEMO_ANALYSIS: &str = include_str!("../../data/demo_analysis.toml");

/// Whether `folder` holds an earlier demo output (its own `analysis.toml` and `report.html`),
/// which the demo may replace; any other non-empty folder is left alone.
fn is_earlier_demo(folder: &Path) -> bool {
    std::fs::read_to_string(folder.join("analysis.toml")).is_ok_and(|t| t == DEMO_ANALYSIS)
        && folder.join("report.html").is_file()
}

/// Runs the demo.
pub fn run(args: DemoArgs) -> Result<()> {
    let replace = args.out.exists() && is_earlier_demo(&args.out);
    output::check_folder(&args.out, replace).map_err(|e| match e {
        Error::Output { path, .. } => Error::Output {
            path,
            message:
                "is not empty and is not an earlier demo output; choose another folder with --out"
                    .into(),
        },
        other => other,
    })?;
    let mut analysis =
        Analysis::parse("data/demo_analysis.toml", DEMO_ANALYSIS, Path::new("data"))?;
    if let Some(payoffs) = analysis.payoffs.as_mut() {
        payoffs.bytes = Some(DEMO_PAYOFFS.as_bytes());
    }
    let text = crate::cmd::run::execute(
        analysis,
        DEMO_TRIAL.as_bytes(),
        Some(DEMO_LIFETABLE.as_bytes()),
        None,
        &args.out,
    )?;
    output::print(&format!(
        "tunnelcast demo: an invented trial (Veltranib against standard care; see data/README.md)\n\n{text}"
    ));
    Ok(())
}
