//! What `tune` reports: the window grid and its frontier.

use crate::report::summary::ToolInfo;
use serde::Serialize;

#[derive(Serialize)]
pub struct TuneReport {
    pub tool: ToolInfo,
    pub settings: crate::analysis::run::AnalysisSettings,
    /// What needs attention (coverage, skipped rows); also exit status 3.
    pub warnings: Vec<String>,
    /// How each trade's P/L was formed from the input columns.
    pub pnl_formed_as: String,
    #[serde(flatten)]
    pub result: crate::analysis::tune::TuneResult,
    pub caution: &'static str,
}
