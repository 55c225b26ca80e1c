//! `eventfence rank`: many parameter sets side by side — which stay on top
//! once the release-exposed trades are removed.

use super::common::{self, InputArgs, ScenarioArgs, TerminalArgs, WindowArgs};
use super::outcome::Outcome;
use crate::analysis::rank::{self, Compared, RankBy};
use crate::import::table::TableFormat;
use crate::report::rank::RankReport;
use crate::report::summary::{CAUTION, ToolInfo};
use anyhow::{Result, bail};
use clap::Args;
use std::path::PathBuf;

/// Rank parameter sets (a run column, or one file per run) before and after
/// removing release-exposed trades.
///
/// Example (the bundled demo's 50 runs):
///   eventfence rank --trades demo/trades.csv --trades-tz America/New_York+07:00 \
///     --calendar calendars/demo-usd.ics calendars/demo-eur.csv calendars/demo-gbp-jpy.ics \
///     --calendar-tz Europe/Berlin --instrument-map US500=USD --by sharpe --top 20
#[derive(Debug, Args)]
#[command(verbatim_doc_comment)]
pub struct RankArgs {
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
    /// Figure to rank by.
    #[arg(long, value_enum, default_value_t = RankBy::Sharpe)]
    pub by: RankBy,
    /// Order of the table.
    #[arg(long, value_enum, default_value_t = SortBy::RankRemoved)]
    pub sort: SortBy,
    /// The scenario the table sets beside all trades: removed (without the
    /// exposed trades) or stressed (exposed trades charged, needs --stress;
    /// then --sort rank-removed orders by the stressed rank).
    #[arg(long = "scenario", value_enum, default_value_t = Compared::Removed)]
    pub compared: Compared,
    /// Show only the first N rows (after sorting).
    #[arg(long, value_name = "N")]
    pub top: Option<usize>,
    /// Leave out runs with fewer trades.
    #[arg(long, value_name = "N", default_value_t = 0)]
    pub min_trades: usize,
    /// Placebo calendars per run for a p-value (0 = off; costs N exposure passes per run).
    #[arg(long, value_name = "N", default_value_t = 0)]
    pub placebo: usize,
    /// Draws of the distortion reference: per run, as many random trades
    /// removed as it has exposed ones (0 = off).
    #[arg(long, value_name = "N", default_value_t = 199)]
    pub distortion_draws: usize,
    /// Seed of the placebo calendars and the distortion draws.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub seed: u64,
    /// Print JSON instead of the table (the same as --format json).
    #[arg(long, conflicts_with = "format")]
    pub json: bool,
    /// What to print on stdout: table, json, or jsonl (one JSON object per
    /// line for each run, in the table's order).
    #[arg(long, value_enum, default_value_t = common::PrintFormat::Table)]
    pub format: common::PrintFormat,
    /// Write runs.csv (or runs.parquet), chart-rank-shift.svg and report.html here.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Runs whose tail shapes (sorted |P/L| ÷ mean |P/L|) --out overlays;
    /// default: the top 3 with all trades and the top 3 without the
    /// exposed ones.
    #[arg(long, value_name = "RUN,...", value_delimiter = ',')]
    pub curves: Vec<String>,
    /// Format of the runs file in --out.
    #[arg(long, value_enum, default_value_t = TableFormat::Csv)]
    pub runs_format: TableFormat,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum SortBy {
    RankRemoved,
    RankBaseline,
    /// Largest moves first (by absolute shift).
    Shift,
    Run,
}

/// k of the top-k overlap when `--top` is not given (SPEC §9.3).
pub const DEFAULT_TOP_K: usize = 10;

pub fn run(args: RankArgs) -> Result<std::process::ExitCode> {
    execute(&args, args.out.is_some())?.deliver(
        args.out.as_deref(),
        &args.charts,
        args.format.chosen(args.json),
        &args.terminal,
    )
}

/// The ranking and everything it shows, in memory: the JSON, the terminal
/// table and, with `files`, the `--out` folder's files and chart.
pub fn execute(args: &RankArgs, files: bool) -> Result<Outcome> {
    let mut settings = args.scenario.settings(&args.windows)?;
    settings.calendar_span = args.input.calendar.stated_span()?;
    if args.compared == Compared::Stressed && settings.scenario.stress.is_none() {
        bail!("--scenario stressed needs --stress (amount:…, per-size:… or pct:…)");
    }
    if !args.curves.is_empty() && args.out.is_none() {
        bail!("--curves picks the runs of the tail-shape chart, which --out writes: give --out");
    }
    let loaded = args.input.load("rank", &args.terminal)?;
    let trades = &loaded.trades;
    if !trades.has_runs() {
        bail!(
            "the trades have no runs: map a run column (--map run=<column>) or give one file per run"
        );
    }
    let cal = &loaded.calendar;
    let cur = loaded.currency_lists();
    let windows = crate::engine::exposure::used_windows(&cal.releases, &settings.windows);
    let pb = common::progress_bar(&args.terminal, trades.runs.len() as u64, "runs");
    let draws = rank::RankDraws {
        placebo: crate::analysis::evidence::PlaceboSettings {
            n: args.placebo,
            seed: args.seed,
        },
        random_removal: rank::RandomRemovalSettings {
            draws: args.distortion_draws,
            seed: args.seed,
        },
    };
    let mut rows = rank::rank(
        trades,
        &cal.releases,
        &windows,
        &cur,
        &settings,
        args.by,
        draws,
        &|| pb.inc(1),
    )?;
    pb.finish_and_clear();
    let total = rows.len();
    let top_k = args.top.unwrap_or(DEFAULT_TOP_K);
    let distortion = rank::distortion(&rows, args.by, top_k, args.seed);
    rank::mark_top(&mut rows, top_k);
    let warnings = loaded.warnings(&args.input, &settings);
    let tcr_basis = rows.first().map(|r| r.tcr_basis).unwrap_or_default();
    rows.retain(|r| r.trades >= args.min_trades);
    match args.sort {
        SortBy::RankRemoved if args.compared == Compared::Stressed => {
            rows.sort_by_key(|r| r.rank_stressed)
        }
        SortBy::RankRemoved => rows.sort_by_key(|r| r.rank_removed),
        SortBy::RankBaseline => rows.sort_by_key(|r| r.rank_baseline),
        SortBy::Shift => rows.sort_by_key(|r| (-r.rank_shift.abs(), r.rank_removed)),
        SortBy::Run => rows.sort_by(|a, b| crate::import::trades::run_order(&a.run, &b.run)),
    }
    let mut outcome = Outcome {
        inputs: args.input.input_paths(&loaded),
        warnings: warnings.clone(),
        ..Outcome::default()
    };
    if files {
        let runs_file = match args.runs_format {
            TableFormat::Csv => ("runs.csv", crate::render::files::runs_csv(&rows)),
            TableFormat::Parquet => ("runs.parquet", crate::render::files::runs_parquet(&rows)?),
        };
        let mut by_shift = rows.clone();
        by_shift.sort_by_key(|r| (-r.rank_shift.abs(), r.rank_removed));
        #[cfg(feature = "charts")]
        let figures = {
            let pts: Vec<(usize, usize, String)> = rows
                .iter()
                .map(|r| (r.rank_baseline, r.rank_removed, r.run.clone()))
                .collect();
            let svg = crate::render::charts::rank_shift(
                &pts,
                distortion.top_k,
                "Rank with and without release trades",
            )?;
            let picked = if args.curves.is_empty() {
                let by = |key: fn(&rank::RunRow) -> usize| {
                    let mut v: Vec<&rank::RunRow> = rows.iter().collect();
                    v.sort_by_key(|r| key(r));
                    v.into_iter()
                        .take(3)
                        .map(|r| r.run.clone())
                        .collect::<Vec<_>>()
                };
                let mut picked = by(|r| r.rank_baseline);
                for r in by(|r| r.rank_removed) {
                    if !picked.contains(&r) {
                        picked.push(r);
                    }
                }
                picked
            } else {
                args.curves.clone()
            };
            let shapes = rank::tail_shapes(trades, &picked, &settings)?;
            let tails = crate::render::charts::tail_shapes(
                &shapes,
                settings.tcr_threshold,
                "Tail shapes: each run's sorted |P/L| over its mean",
            )?;
            vec![
                crate::render::Figure { id: "rank-shift", caption: "Each point is a run; points off the diagonal change rank once release-exposed trades are removed; triangles are runs in either top k (the lines mark its border).".into(), svg },
                crate::render::Figure { id: "tail-shapes", caption: "Each line is one run's trades by |P/L|, largest first, divided by the run's mean |P/L| so that runs compare; lines that start high and fall fast lean on a few trades. The dashed line is the tail threshold.".into(), svg: tails },
            ]
        };
        #[cfg(not(feature = "charts"))]
        let figures: Vec<crate::render::Figure> = Vec::new();
        let page = crate::render::html::charts_page(
            "Parameter sets with and without release trades",
            &format!(
                "{} runs; P/L per trade = {}. {}",
                rows.len(),
                loaded.trade_summary.pnl_formed_as,
                crate::render::text::distortion_lines(&distortion).replace('\n', " ")
            ),
            &warnings,
            &figures,
            &crate::render::html::rank_table(&by_shift, &crate::render::label(&args.by)),
            CAUTION,
        );
        outcome.files = vec![
            (runs_file.0.to_string(), runs_file.1),
            ("report.html".into(), page.into_bytes()),
        ];
        outcome.charts = figures
            .into_iter()
            .map(|f| (f.id.to_string(), f.svg))
            .collect();
    }
    if let Some(n) = args.top {
        rows.truncate(n);
    }
    let report = RankReport {
        tool: ToolInfo::current(),
        by: args.by,
        settings,
        runs_total: total,
        warnings,
        pnl_formed_as: loaded.trade_summary.pnl_formed_as.clone(),
        tcr_basis,
        compared: args.compared,
        distortion,
        runs: rows,
        caution: CAUTION,
    };
    outcome.json = serde_json::to_string_pretty(&report)?;
    if args.format.chosen(args.json) == common::PrintFormat::Jsonl {
        outcome.jsonl = super::outcome::json_lines(&report.runs)?;
    }
    outcome.text = crate::render::table::rank(&report, crate::render::term::width());
    Ok(outcome)
}
