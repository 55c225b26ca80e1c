//! The analysis: everything computed from trades, releases and their
//! exposure, with no I/O and no printing. `run` is the main job (exposure →
//! attribution → scenarios → metrics → evidence), `attribution`,
//! `scenarios`, `metrics` and `evidence` its steps, `rank` and `tune` the
//! per-run and per-window views (`distortion`: how far removing the
//! exposed trades reorders the runs), `schedule` the blackout windows for live
//! trading. Depends only on `engine` and `import`.

pub mod attribution;
pub mod distortion;
pub mod evidence;
pub mod metrics;
pub mod rank;
pub mod run;
pub mod scenarios;
pub mod schedule;
pub mod tune;
