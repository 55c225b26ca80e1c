//! Renderers: turn result structs into bytes (terminal tables, CSV, JSON).
//! No computation happens here; one writer owns output paths.

pub mod table;
