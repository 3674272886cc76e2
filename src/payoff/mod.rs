//! Payoffs by time since entry: costs and quality of life that depend on how long a person has
//! been in the chain (a costly first year, then maintenance; a one-off on entry or on exit).
//!
//! One module per concern: [`schedule`] (the checked payoff schedule, built from rows a CSV
//! reader has split) and [`discount`] (the annual rate).

pub mod discount;
pub mod schedule;

pub use discount::Discount;
pub use schedule::{Payoff, PayoffColumns, PayoffKind, PayoffRow, RatePiece, Schedule};
