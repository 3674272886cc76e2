//! Patient-level data rebuilt from a digitised Kaplan–Meier figure and its numbers at risk,
//! following Guyot, Ades, Ouwens and Welton (BMC Medical Research Methodology, 2012), so that
//! modellers without the trial's data can still fit the families.
//!
//! [`read`] turns the digitised points and the risk table into cleaned, checked inputs;
//! [`algorithm`] rebuilds the records; [`quality`] measures how well the rebuild reproduces
//! the published figure. Choices the paper leaves open are in `docs/rebuild.md`.

pub mod algorithm;
pub mod quality;
pub mod read;

pub use algorithm::{rebuild, CensoringRule, IntervalSummary, Rebuilt};
pub use quality::{assess, AtRiskCheck, Quality};
pub use read::{read_curves, read_risk_tables, Cleaning, DigitisedCurve, RiskTable, TOLERANCE};

/// One digitised point: time (the figure's unit) and survival as a proportion.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Point {
    /// Time on the figure's axis.
    pub time: f64,
    /// Survival, 0–1.
    pub survival: f64,
}

/// One row of a published risk table.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RiskRow {
    /// Time on the figure's axis.
    pub time: f64,
    /// Patients at risk at `time`.
    pub at_risk: u64,
    /// Line in the risk-table file (0 when the row was made from `--patients`).
    pub line: u64,
}
