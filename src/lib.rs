//! eventfence: find the back-test trades exposed to economic releases,
//! attribute their P/L, and recompute the strategy's figures without them.
//!
//! Layers, each depending only on those below it:
//! `import` (trade lists, calendars, zones, time text) → `engine`
//! (relevance, windows, exposure) → `analysis` (attribution, scenarios,
//! metrics, evidence, rank, tune, schedule) → `report` (output structs) →
//! `render` (terminal, HTML, CSV/Parquet, SVG/PNG, ICS, atomic files) →
//! `cmd` (the command line). docs/method.md defines every figure.

pub mod analysis;
pub mod cmd;
pub mod engine;
pub mod import;
pub mod render;
pub mod report;
