//! Command-line definition (clap derive) and dispatch to one command per file in `cmd/`.

use crate::cmd;
use crate::error::Result;
use clap::{Parser, Subcommand};

/// Parametric survival curves turned into tunnel-state transition probabilities.
#[derive(Debug, Parser)]
#[command(
    name = "tunnelcast",
    version,
    about = "Fit parametric survival curves to time-to-event data and turn them into per-cycle \
             tunnel-state probabilities for cohort state-transition models.",
    after_help = crate::CAUTION
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

/// The commands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Fit parametric families to right-censored time-to-event data and compare them.
    Fit(cmd::fit::FitArgs),
    /// Run the bundled invented example and print its results.
    Demo(cmd::demo::DemoArgs),
    /// Per-cycle exit probabilities for a chain of tunnel states (long or matrix layout).
    Tunnels(cmd::tunnels::TunnelsArgs),
    /// How many tunnel states are enough, and what the cycle length costs in life-years.
    Horizon(cmd::horizon::HorizonArgs),
    /// Uncertainty draws of the tunnel table (multivariate normal or bootstrap) with a p_exit summary.
    Draws(cmd::draws::DrawsArgs),
    /// Run a whole analysis described in a TOML file: fits, tables, plots and report.html.
    Run(cmd::run::RunArgs),
    /// Rebuild patient-level data from a digitised Kaplan–Meier figure (Guyot et al., 2012).
    Rebuild(cmd::rebuild::RebuildArgs),
}

/// Runs the parsed command. A malformed `SOURCE_DATE_EPOCH` stops every command before any
/// work (the reproducible-builds convention), so later readers of it can trust it.
pub fn run(cli: Cli) -> Result<()> {
    crate::output::source_date_epoch()?;
    match cli.command {
        Command::Fit(args) => cmd::fit::run(args),
        Command::Demo(args) => cmd::demo::run(args),
        Command::Tunnels(args) => cmd::tunnels::run(args),
        Command::Horizon(args) => cmd::horizon::run(args),
        Command::Draws(args) => cmd::draws::run(args),
        Command::Run(args) => cmd::run::run(args),
        Command::Rebuild(args) => cmd::rebuild::run(args),
    }
}
