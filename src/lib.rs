//! eventfence: find the back-test trades exposed to economic releases,
//! attribute their P/L, and recompute the strategy's figures without them.
//!
//! Module map: `zones` and `timefmt` (time), `table` (reading files),
//! `trades` and `calendar` (importers), `relevance` (instrument currencies),
//! `report` (shared report text), `render` (output formats), `cmd` (CLI).

pub mod calendar;
pub mod cmd;
pub mod relevance;
pub mod render;
pub mod report;
pub mod table;
pub mod timefmt;
pub mod trades;
pub mod zones;
