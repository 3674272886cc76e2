//! Payoffs by time since entry: costs and quality of life that depend on how long a person has
//! been in the chain (a costly first year, then maintenance; a one-off on entry or on exit).
//!
//! One module per concern: [`schedule`] (the checked payoff schedule, built from rows a CSV
//! reader has split), [`discount`] (the annual rate), [`integral`] (the exact integrals: closed
//! forms when the curve's hazard is piecewise constant, quadrature otherwise), [`tunnel`] (payoff columns per
//! tunnel state) and [`horizon`] (totals by within-cycle method against the exact integral, and
//! the truncation criterion). Definitions and worked numbers: `docs/payoffs.md`.

pub mod discount;
pub mod horizon;
pub mod integral;
pub mod schedule;
pub mod tunnel;

pub use discount::Discount;
pub use horizon::{
    horizon_payoffs, payoff_method_rows, payoff_truncation_columns, payoff_truncation_errors,
    running_totals, suggested_count_with_payoffs, HorizonPayoffs, PayoffMethod, PayoffMethodRow,
    PAYOFF_METHODS,
};
pub use integral::Exactness;
pub use schedule::{Payoff, PayoffColumns, PayoffFile, PayoffRow, RatePiece, Schedule};
pub use tunnel::{single_tunnel_entry_warning, tunnel_payoffs, TunnelPayoffs};
