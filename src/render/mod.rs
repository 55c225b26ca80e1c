//! Renderers: turn result structs into bytes (terminal tables, CSV,
//! Parquet). No computation happens here; `crate::output` owns the paths.

pub mod charts;
pub mod files;
pub mod html;
pub mod png;
pub mod schedule;
pub mod table;
pub mod term;
