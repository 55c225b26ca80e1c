//! eventfence: find the back-test trades exposed to economic releases,
//! attribute their P/L, and recompute the strategy's figures without them.
//!
//! Layers, each depending only on those below it:
//! `import` (trade lists, calendars, zones, time text) → `engine`
//! (relevance, windows, exposure) → `analysis` (attribution, scenarios,
//! metrics, evidence, rank, tune, schedule) → `report` (output structs) →
//! `render` (terminal, HTML, CSV/Parquet, SVG/PNG, ICS, atomic files) →
//! `cmd` (the command line). docs/method.md defines every figure.
//!
//! The names below are the library's entry points; a caller outside the
//! command line needs nothing else:
//!
//! 1. trades: [`TradeColumns::into_trades`] from arrays, or [`load_trades`]
//!    from CSV / Parquet files with [`TradeOptions`];
//! 2. a calendar: [`load_calendar`] from ICS / CSV files with
//!    [`CalendarOptions`];
//! 3. each instrument's currencies: [`instrument_currencies`];
//! 4. the work: [`analyze`] (with [`AnalysisSettings`]), then [`chance`]
//!    for the placebo and bootstrap tests, [`rank`] for parameter sets,
//!    [`tune`] for a window grid, [`schedule`] for the blackout list.
//!
//! Back-test figures are not forecasts, release times must be checked
//! against the publisher, and nothing here is investment advice.

#![warn(missing_docs)]

pub mod analysis;
#[allow(missing_docs)] // the command line's own layers, outside the library API
pub mod cmd;
pub mod engine;
pub mod import;
#[allow(missing_docs)] // the command line's own layers, outside the library API
pub mod render;
#[allow(missing_docs)] // the command line's own layers, outside the library API
pub mod report;

pub use analysis::evidence::{ChanceSettings, NoProgress, Progress, chance};
pub use analysis::rank::{RankBy, RunRow, rank};
pub use analysis::run::{Analysis, AnalysisSettings, analyze};
pub use analysis::schedule::{Blackout, ScheduleSettings, build as schedule};
pub use analysis::tune::{TuneResult, tune};
pub use engine::relevance::{InstrumentCurrencies, resolve as instrument_currencies};
pub use import::calendar::{Calendar, CalendarOptions, Release, load as load_calendar};
pub use import::columns::{ColumnsError, TradeColumns};
pub use import::trades::{TradeOptions, TradeSummary, Trades, load as load_trades};
pub use import::zones::Zone;
pub use report::summary::Summary;
