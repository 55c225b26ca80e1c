//! What `check` reports: the import overview of trades and calendar.

use crate::engine::relevance::InstrumentCurrencies;
use crate::import::calendar::{CalendarSummary, Tier};
use crate::import::trades::TradeSummary;
use crate::import::zones::Zone;
use crate::report::summary::ToolInfo;
use serde::Serialize;
use std::collections::BTreeMap;

/// Overview of imported trades.
#[derive(Debug, Serialize)]
pub struct TradesOverview {
    pub import: TradeSummary,
    pub input_zone: Zone,
    /// First open and last close, UTC and in the input zone.
    pub span_utc: Option<[String; 2]>,
    pub span_input_zone: Option<[String; 2]>,
    pub runs: usize,
    pub instruments: Vec<InstrumentLine>,
}

#[derive(Debug, Serialize)]
pub struct InstrumentLine {
    #[serde(flatten)]
    pub currencies: InstrumentCurrencies,
    pub trades: usize,
}

/// Overview of the merged calendar.
#[derive(Debug, Serialize)]
pub struct CalendarOverview {
    pub import: CalendarSummary,
    pub span_utc: Option<[String; 2]>,
    /// currency → tier → count (all-day releases counted under their tier).
    pub releases_by_currency: BTreeMap<String, BTreeMap<Tier, usize>>,
    pub all_day_releases: usize,
}

#[derive(Debug, Serialize)]
pub struct CheckReport {
    pub tool: ToolInfo,
    pub trades: Option<TradesOverview>,
    pub calendar: Option<CalendarOverview>,
    /// Unmapped instruments (when --unmapped error), reported rather than fatal here.
    pub problems: Vec<String>,
    pub caution: &'static str,
}
