//! `eventfence tune`: sweep pre/post window lengths and find the windows
//! that remove the damage at least cost.

use super::common::{self, InputArgs, ScenarioArgs, TerminalArgs, WindowArgs};
use super::outcome::Outcome;
use crate::import::calendar::Tier;
use crate::report::summary::{CAUTION, ToolInfo};
use crate::report::tune::TuneReport;
use anyhow::Result;
use clap::Args;
use std::path::PathBuf;

/// Sweep window lengths over a grid; mark the cost/benefit frontier.
///
/// Example:
///   eventfence tune --trades demo/trades.csv --trades-tz America/New_York+07:00 \
///     --calendar calendars/demo-usd.ics calendars/demo-eur.csv calendars/demo-gbp-jpy.ics \
///     --calendar-tz Europe/Berlin --instrument-map US500=USD --pre 0..60/15 --post 0..120/30
#[derive(Debug, Args)]
#[command(verbatim_doc_comment)]
pub struct TuneArgs {
    #[command(flatten)]
    pub input: InputArgs,
    #[command(flatten)]
    pub windows: WindowArgs,
    #[command(flatten)]
    pub scenario: ScenarioArgs,
    #[command(flatten)]
    pub terminal: TerminalArgs,
    #[command(flatten)]
    pub charts: common::ChartArgs,
    /// Minutes before the release: START..END/STEP.
    #[arg(long, value_name = "RANGE", default_value = "0..60/5")]
    pub pre: String,
    /// Minutes after the release: START..END/STEP.
    #[arg(long, value_name = "RANGE", default_value = "0..180/15")]
    pub post: String,
    /// Vary only this tier's window (others keep theirs); default: every
    /// tier that has a window.
    #[arg(long, value_name = "TIER")]
    pub tier: Option<String>,
    /// With runs: read every run's trades as one account (for runs that
    /// really are one account split by strategy). Without it, runs are
    /// alternative parameter sets and the account-path figures (Sharpe,
    /// drawdowns, t, ...) are given per run and as their spread across runs.
    #[arg(long)]
    pub pool: bool,
    /// Show only frontier cells in the table.
    #[arg(long)]
    pub frontier_only: bool,
    /// Print JSON instead of the table (the same as --format json).
    #[arg(long, conflicts_with = "format")]
    pub json: bool,
    /// What to print on stdout: table, json, or jsonl (one JSON object per
    /// line for each cell, pre-window by pre-window).
    #[arg(long, value_enum, default_value_t = common::PrintFormat::Table)]
    pub format: common::PrintFormat,
    /// Write grid.csv, tune.json, chart-tune.svg and report.html here.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
}

pub fn run(args: TuneArgs) -> Result<std::process::ExitCode> {
    execute(&args, args.out.is_some())?.deliver(
        args.out.as_deref(),
        &args.charts,
        args.format.chosen(args.json),
        &args.terminal,
    )
}

/// The window grid and everything it shows, in memory: the JSON, the
/// terminal table and, with `files`, the `--out` folder's files and chart.
pub fn execute(args: &TuneArgs, files: bool) -> Result<Outcome> {
    let pre =
        crate::analysis::tune::parse_range(&args.pre).map_err(|e| anyhow::anyhow!("--pre {e}"))?;
    let post = crate::analysis::tune::parse_range(&args.post)
        .map_err(|e| anyhow::anyhow!("--post {e}"))?;
    let tier = match &args.tier {
        None => None,
        Some(t) => Some(
            Tier::parse(t)
                .ok_or_else(|| anyhow::anyhow!("--tier '{t}' is not high, medium or low"))?,
        ),
    };
    let mut settings = args.scenario.settings(&args.windows)?;
    settings.calendar_span = args.input.calendar.stated_span()?;
    settings.pool = args.pool;
    let loaded = args.input.load("tune", &args.terminal)?;
    let trades = &loaded.trades;
    let cal = &loaded.calendar;
    let cur = loaded.currency_lists();
    let pb = common::progress_bar(&args.terminal, (pre.len() * post.len()) as u64, "cells");
    let result = crate::analysis::tune::tune(
        trades,
        &cal.releases,
        &cur,
        &settings,
        tier,
        &pre,
        &post,
        &|| pb.inc(1),
    )?;
    pb.finish_and_clear();
    let warnings = loaded.warnings(&args.input, &settings);
    let report = TuneReport {
        tool: ToolInfo::current(),
        settings,
        warnings,
        pnl_formed_as: loaded.trade_summary.pnl_formed_as.clone(),
        result,
        caution: CAUTION,
    };
    let json = serde_json::to_string_pretty(&report)?;
    let mut outcome = Outcome {
        text: crate::render::table::tune(&report, args.frontier_only),
        inputs: args.input.input_paths(&loaded),
        warnings: report.warnings.clone(),
        ..Outcome::default()
    };
    if files {
        let res = &report.result;
        #[cfg(feature = "charts")]
        let figures = {
            let cell = |a: usize, b: usize| &res.cells[a * res.post.len() + b];
            let svg = crate::render::charts::heatmap(
                &res.pre,
                &res.post,
                &|a, b| cell(a, b).tcr_reduction,
                &|a, b| cell(a, b).frontier,
                "Tail reduction by window (frontier outlined)",
                "TCR reduction",
            )?;
            vec![crate::render::Figure { id: "tune", caption: "Darker cells cut the tail concentration more (the scale on the right gives the reduction); outlined cells are on the cost/benefit frontier; grey cells have no value.".into(), svg }]
        };
        #[cfg(not(feature = "charts"))]
        let figures: Vec<crate::render::Figure> = Vec::new();
        let page = crate::render::html::charts_page(
            "Window tuning",
            &format!(
                "{} × {} cells; P/L per trade = {}{}",
                res.pre.len(),
                res.post.len(),
                report.pnl_formed_as,
                if res.account_figures == crate::analysis::run::AccountFigures::PerRun {
                    format!(
                        "; runs are alternative accounts: each cell's tail figure is the median over {} runs of each run's own",
                        res.runs
                    )
                } else {
                    String::new()
                }
            ),
            &report.warnings,
            &figures,
            "",
            CAUTION,
        );
        outcome.files = vec![
            (
                "grid.csv".into(),
                crate::render::files::grid_csv(&res.cells),
            ),
            ("tune.json".into(), json.clone().into_bytes()),
            ("report.html".into(), page.into_bytes()),
        ];
        outcome.charts = figures
            .into_iter()
            .map(|f| (f.id.to_string(), f.svg))
            .collect();
    }
    outcome.json = json;
    if args.format.chosen(args.json) == common::PrintFormat::Jsonl {
        outcome.jsonl = super::outcome::json_lines(&report.result.cells)?;
    }
    Ok(outcome)
}
