//! Subcommands: one module each, with its clap arguments and `run`.

pub mod analyze;
pub mod check;
pub mod common;
pub mod rank;
pub mod schedule;
pub mod tune;
mod values;
