//! `eventfence analyze`: the main job — exposure, attribution, scenarios
//! and metrics, shown as a table, JSON, or a folder of files.

use super::common::{self, ChanceArgs, InputArgs, ScenarioArgs, TerminalArgs, WindowArgs};
use super::outcome::Outcome;
use crate::analysis::run as analysis;
use crate::import::table::TableFormat;
use crate::report::summary::{Inputs, Summary};
use anyhow::Result;
use clap::Args;
use std::path::PathBuf;

/// Find the trades exposed to releases and recompute every figure without
/// them (removed) and with their P/L capped.
///
/// Example (the bundled demo):
///   eventfence analyze --trades demo/trades.csv --trades-tz America/New_York+07:00 \
///     --calendar calendars/demo-usd.ics calendars/demo-eur.csv calendars/demo-gbp-jpy.ics \
///     --calendar-tz Europe/Berlin --instrument-map US500=USD --out demo/out
#[derive(Debug, Args)]
#[command(verbatim_doc_comment)]
pub struct AnalyzeArgs {
    #[command(flatten)]
    pub input: InputArgs,
    #[command(flatten)]
    pub windows: WindowArgs,
    #[command(flatten)]
    pub scenario: ScenarioArgs,
    #[command(flatten)]
    pub chance: ChanceArgs,
    #[command(flatten)]
    pub terminal: TerminalArgs,
    #[command(flatten)]
    pub charts: common::ChartArgs,
    /// With runs: read every run's trades as one account (for runs that
    /// really are one account split by strategy). Without it, runs are
    /// alternative parameter sets and the account-path figures (Sharpe,
    /// drawdowns, t, ...) are given per run and as their spread across runs.
    #[arg(long)]
    pub pool: bool,
    /// Print summary JSON to stdout instead of tables.
    #[arg(long)]
    pub json: bool,
    /// Write report.html, summary.json, trades.csv (or .parquet), releases.csv,
    /// tail.csv and the charts (SVG) here.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Format of the annotated trade file in --out.
    #[arg(long, value_enum, default_value_t = TableFormat::Csv)]
    pub trades_format: TableFormat,
}

pub fn run(args: AnalyzeArgs) -> Result<std::process::ExitCode> {
    let outcome = execute(&args, args.out.is_some())?;
    if let Some(dir) = &args.out {
        outcome.write(dir, &args.charts)?;
    }
    if args.json {
        crate::render::output::stdout(format!("{}\n", outcome.json).as_bytes())?;
    } else {
        args.terminal.print(&outcome.text)?;
        if let Some(dir) = &args.out {
            let ext = args.trades_format.extension();
            crate::render::output::stdout(format!("Wrote report.html, summary.json, trades.{ext}, releases.csv, tail.csv and chart-*.svg to {}\n", dir.display()).as_bytes())?;
        }
    }
    Ok(common::exit_status(&outcome.warnings))
}

/// The analysis and everything it shows, in memory: the summary JSON, the
/// terminal table and, with `files`, the `--out` folder's files and charts.
pub fn execute(args: &AnalyzeArgs, files: bool) -> Result<Outcome> {
    // Resolve every flag before reading data.
    let mut settings = args.scenario.settings(&args.windows)?;
    settings.calendar_span = args.input.calendar.stated_span()?;
    settings.pool = args.pool;
    let loaded = args.input.load("analyze", &args.terminal)?;
    let (trades, trade_summary, cal, currencies) = (
        &loaded.trades,
        &loaded.trade_summary,
        &loaded.calendar,
        &loaded.currencies,
    );
    let (mut result, exposure) =
        analysis::analyze(trades, &cal.releases, currencies, &settings, files)?;
    // The scenario series (filled only for files) go to the files below.
    let series = std::mem::take(&mut result.series);
    let (placebo, bootstrap) = crate::analysis::evidence::chance(
        trades,
        &cal.releases,
        currencies,
        &settings,
        &exposure,
        result.initial_equity,
        crate::analysis::evidence::ChanceSettings {
            placebo: args.chance.placebo,
            bootstrap: args.chance.bootstrap,
            seed: args.chance.seed,
        },
        &common::Bars::new(&args.terminal),
    );
    let inputs = Inputs::new(
        trade_summary,
        args.input.trades.trades_tz.clone(),
        &cal.summary,
        args.input.calendar.calendar_tz().to_string(),
    );
    let mut summary = Summary::new(inputs, settings, result, placebo, bootstrap);
    // With alternative runs: the distortion, and each run's ranks for the
    // report's rank chart.
    let mut rank_points = Vec::new();
    if summary.account_figures == crate::analysis::run::AccountFigures::PerRun {
        let (d, points) = distortion(&loaded, &summary.settings, &args.chance)?;
        summary.distortion = Some(d);
        rank_points = points;
        crate::import::phases::mark("distortion");
    }
    let json = serde_json::to_string_pretty(&summary)?;
    crate::import::phases::mark("summary");
    let mut outcome = Outcome {
        text: crate::render::table::analyze(&summary),
        inputs: args.input.input_paths(&loaded),
        warnings: summary.warnings.clone(),
        ..Outcome::default()
    };
    if files {
        let sorted_abs = series.sorted_abs(&exposure);
        let figures = figures(
            &summary,
            trades,
            &exposure,
            &cal.releases,
            &series,
            &sorted_abs,
            &rank_points,
        )?;
        drop(series);
        let annotated = crate::render::files::annotated_trades(
            trades,
            &exposure,
            &cal.releases,
            &trade_summary.files,
        );
        let trades_file = match args.trades_format {
            TableFormat::Csv => ("trades.csv", annotated.to_csv()),
            TableFormat::Parquet => ("trades.parquet", annotated.to_parquet()?),
        };
        outcome.files = vec![
            (trades_file.0.to_string(), trades_file.1),
            (
                "releases.csv".into(),
                crate::render::files::releases_csv(&summary.attribution.by_release),
            ),
            (
                "tail.csv".into(),
                crate::render::files::tail_csv(&sorted_abs, summary.tail.tcr_basis),
            ),
            (
                "report.html".into(),
                crate::render::html::analyze_report(&summary, &figures).into_bytes(),
            ),
            ("summary.json".into(), json.clone().into_bytes()),
        ];
        outcome.charts = figures
            .into_iter()
            .map(|f| (f.id.to_string(), f.svg))
            .collect();
    }
    outcome.json = json;
    Ok(outcome)
}

/// A run's rank with every trade, without the exposed ones, and its name.
type RankPoint = (usize, usize, String);

/// How far removing the exposed trades reorders the runs, by rank's
/// default figure (Sharpe) and top k: `rank`'s own computation.
fn distortion(
    loaded: &crate::cmd::load::Loaded,
    settings: &crate::analysis::run::AnalysisSettings,
    chance: &ChanceArgs,
) -> Result<(crate::analysis::distortion::Distortion, Vec<RankPoint>)> {
    use crate::analysis::rank::{self, RandomRemovalSettings, RankBy, RankDraws};
    let windows =
        crate::engine::exposure::used_windows(&loaded.calendar.releases, &settings.windows);
    let rows = rank::rank(
        &loaded.trades,
        &loaded.calendar.releases,
        &windows,
        &loaded.currency_lists(),
        settings,
        RankBy::Sharpe,
        RankDraws {
            placebo: Default::default(),
            random_removal: RandomRemovalSettings {
                draws: chance.distortion_draws,
                seed: chance.seed,
            },
        },
        &|| {},
    )?;
    let d = rank::distortion(
        &rows,
        RankBy::Sharpe,
        super::rank::DEFAULT_TOP_K,
        chance.seed,
    );
    let points = rows
        .into_iter()
        .map(|r| (r.rank_baseline, r.rank_removed, r.run))
        .collect();
    Ok((d, points))
}

/// The charts of the report (SVG), drawn from the summary and the scenario
/// series; none in a build without the `charts` feature.
#[cfg(feature = "charts")]
fn figures(
    summary: &Summary,
    trades: &crate::import::trades::Trades,
    exposure: &crate::engine::exposure::Exposure,
    releases: &[crate::import::calendar::Release],
    series: &crate::analysis::scenarios::Scenarios,
    sorted_abs: &[(f64, bool)],
    rank_points: &[(usize, usize, String)],
) -> Result<Vec<crate::render::Figure>> {
    let curves = series.curves(&trades.closed);
    let mut removed_abs: Vec<f64> = series
        .removed
        .view()
        .tail_values()
        .iter()
        .map(|v| v.abs())
        .collect();
    removed_abs.sort_by(|a, b| b.total_cmp(a));
    let high_releases = releases
        .iter()
        .filter(|r| {
            r.tier == crate::import::calendar::Tier::High
                && summary.settings.windows.window_for(r).is_some()
        })
        .map(|r| r.at)
        .collect();
    let scatter = (0..trades.len())
        .map(|i| {
            (
                exposure.minutes_from_nearest[i],
                trades.pnl[i],
                exposure.is_exposed(i),
            )
        })
        .collect();
    let data = crate::render::charts::AnalyzeCharts {
        summary,
        sorted_abs,
        removed_abs: &removed_abs,
        curves: &curves,
        span_start: trades.span().map_or(0, |s| s.0),
        high_releases,
        scatter,
    };
    let mut figures = crate::render::charts::analyze_figures(&data)?;
    if let Some(d) = &summary.distortion {
        figures.push(crate::render::Figure {
            id: "rank-shift",
            caption: format!("Each point is a run ranked by {} with all trades and without the exposed ones; triangles are runs in either top {} (the lines mark its border).", crate::render::label(&d.by), d.top_k),
            svg: crate::render::charts::rank_shift(rank_points, d.top_k, "Rank with and without release trades")?,
        });
    }
    Ok(figures)
}

#[cfg(not(feature = "charts"))]
fn figures(
    _: &Summary,
    _: &crate::import::trades::Trades,
    _: &crate::engine::exposure::Exposure,
    _: &[crate::import::calendar::Release],
    _: &crate::analysis::scenarios::Scenarios,
    _: &[(f64, bool)],
    _: &[(usize, usize, String)],
) -> Result<Vec<crate::render::Figure>> {
    Ok(Vec::new())
}
