//! eventfence: find the back-test trades exposed to economic releases,
//! attribute their P/L, and recompute the strategy's figures without them.
//!
//! Module map: `zones` and `timefmt` (time), `table` (reading files),
//! `trades` and `calendar` (importers), `relevance` (instrument currencies),
//! `windows` and `exposure` (the engine), `attribution`, `scenarios`,
//! `metrics`, `analysis` (the main job, no I/O), `report` (the summary
//! layout), `render` (output formats), `output` (atomic files), `cmd` (CLI).

pub mod analysis;
pub mod attribution;
pub mod budget;
pub mod calendar;
pub mod cmd;
pub mod csvchunks;
pub mod exposure;
pub mod metrics;
pub mod number;
pub mod output;
pub mod phases;
pub mod rank;
pub mod relevance;
pub mod render;
pub mod report;
pub mod scenarios;
pub mod schedule;
pub mod setting;
pub mod stats;
pub mod table;
pub mod timefmt;
pub mod trades;
pub mod tune;
pub mod windows;
pub mod zones;
