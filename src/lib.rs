//! tunnelcast: parametric survival curves fitted to time-to-event data and turned into
//! per-cycle tunnel-state transition probabilities for cohort state-transition models.
//!
//! Pipeline: [`input`] (validated records) → [`km`] (Kaplan–Meier) → [`fit`] over
//! [`families`] → tables and checks downstream. The binary in `src/main.rs` is a thin shell
//! over [`cli`].

// Matrix and grid code reads more plainly with index loops.
#![allow(clippy::needless_range_loop)]

pub mod adjust;
pub mod analysis;
pub mod cli;
pub mod cmd;
pub mod csv_read;
pub mod curve;
pub mod discretise;
pub mod draws;
pub mod effects;
pub mod error;
pub mod export;
pub mod families;
pub mod fit;
pub mod format;
pub mod horizon;
pub mod input;
pub mod km;
pub mod numeric;
pub mod output;
pub mod payoff;
pub mod plausibility;
pub mod plot;
pub mod progress;
pub mod rebuild;
pub mod report;
pub mod units;

pub use error::{Error, Result};

/// Tool version written into every output file.
pub const VERSION: &str = env!("CARGO_PKG_VERSION");

/// The caution printed in `--help`, the README and the report.
pub const CAUTION: &str = "Caution: extrapolated survival is an assumption, not an observation. \
Check every extrapolation against clinical opinion and external data. tunnelcast does not \
replace local HTA guidance or qualified review.";
