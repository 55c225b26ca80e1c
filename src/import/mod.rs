//! The bottom layer: everything that reads what the user gives. Trade lists
//! (`trades`: column mapping, CSV and Parquet through `table`, numbers in
//! `number`, the block reader `csvchunks`, the memory `budget`), release
//! calendars (`calendar`: ICS and CSV), time (`zones`, `timefmt`), and the
//! two small pieces every layer above shares: the error of a bad flag value
//! (`setting`) and the opt-in phase timer (`phases`). Depends on nothing
//! else in the crate.

pub mod budget;
pub mod calendar;
pub mod columns;
pub mod csvchunks;
pub mod log;
pub mod number;
pub mod phases;
pub mod setting;
pub mod table;
pub mod timefmt;
pub mod trades;
pub mod zones;
