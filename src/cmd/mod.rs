//! One file per command: its argument struct and its `run`.

pub mod demo;
pub mod fit;
pub mod rebuild;
