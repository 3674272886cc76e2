//! One file per command: its argument struct and its `run`.

pub mod curve_args;
pub mod demo;
pub mod draws;
pub mod fit;
pub mod fit_effects;
pub mod horizon;
pub mod payoff_args;
pub mod plausibility_args;
pub mod rebuild;
pub mod run;
pub mod tunnels;
