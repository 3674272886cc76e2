//! `tunnelcast demo`: runs the bundled invented example (a fictional trial, see `data/README.md`).

use crate::error::Result;
use clap::Args;
use std::path::PathBuf;

/// Options of `demo`.
#[derive(Debug, Args)]
pub struct DemoArgs {
    /// Output folder for the demo's files.
    #[arg(long, default_value = "tunnelcast-demo")]
    pub out: PathBuf,
}

/// The bundled invented trial data, compiled into the binary so the demo runs anywhere.
pub const DEMO_TRIAL: &str = include_str!("../../data/demo_trial.csv");

/// Runs the demo: fits the bundled data and prints the comparison.
pub fn run(_args: DemoArgs) -> Result<()> {
    let options = crate::input::InputOptions {
        arm_col: Some("arm".into()),
        ..Default::default()
    };
    let data = crate::input::parse("data/demo_trial.csv", DEMO_TRIAL.as_bytes(), &options)?;
    let file = crate::fit::fit_dataset(
        &data,
        crate::families::STANDARD.as_ref(),
        crate::units::TimeUnit::Months,
        None,
    );
    crate::output::print(&crate::cmd::fit::render_comparison(&file));
    Ok(())
}
