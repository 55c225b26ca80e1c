//! Subcommands: one module each, with its clap arguments and `run`; the
//! shared flags (`args`), their resolution (`settings`), input loading
//! (`load`) and progress bars (`progress`), gathered in `common`.

pub mod analyze;
pub mod args;
pub mod check;
pub mod common;
pub mod load;
pub mod outcome;
pub mod progress;
pub mod rank;
pub mod schedule;
pub mod settings;
pub mod tune;
mod values;
