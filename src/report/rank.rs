//! What `rank` reports: one row per run with and without the exposed trades.

use crate::analysis::rank::{RankBy, RunRow};
use crate::report::summary::ToolInfo;
use serde::Serialize;

#[derive(Debug, Serialize)]
pub struct RankReport {
    pub tool: ToolInfo,
    pub by: RankBy,
    pub settings: crate::analysis::run::AnalysisSettings,
    pub runs_total: usize,
    /// What needs attention (coverage, skipped rows); also exit status 3.
    pub warnings: Vec<String>,
    /// How each trade's P/L was formed from the input columns.
    pub pnl_formed_as: String,
    /// `amount` or `return`: what tcr_baseline / tcr_removed are measured on.
    pub tcr_basis: crate::analysis::scenarios::TailBasis,
    /// The scenario the terminal table sets beside all trades.
    pub compared: crate::analysis::rank::Compared,
    /// How far removing the exposed trades reorders the runs (over every
    /// run ranked, before `--min-trades` and `--top`).
    pub distortion: crate::analysis::distortion::Distortion,
    pub runs: Vec<RunRow>,
    pub caution: &'static str,
}
