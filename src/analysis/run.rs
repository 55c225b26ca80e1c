//! The main job as one pure computation: exposure → attribution →
//! scenarios → metrics, overall and per run. No I/O here.

use crate::analysis::attribution::{self, Attribution, ConservationError};
use crate::analysis::metrics::{self, Context, Metrics};
use crate::analysis::scenarios::{self, ScenarioError, ScenarioSettings, Scenarios};
use crate::engine::exposure::{self, CoverageLine, Engine, Exposure, ExposureRule};
use crate::engine::relevance::InstrumentCurrencies;
use crate::engine::windows::WindowSettings;
use crate::import::calendar::Release;
use crate::import::trades::Trades;
use crate::import::zones::Zone;
use rayon::prelude::*;
use serde::Serialize;

/// Everything that shapes the numbers.
#[derive(Debug, Clone, Serialize)]
pub struct AnalysisSettings {
    /// Which trades count as exposed to a release window.
    pub exposure_rule: ExposureRule,
    /// The release windows per tier, category and title.
    pub windows: WindowSettings,
    /// Sizing, cap rule and starting equity of the scenarios.
    #[serde(flatten)]
    pub scenario: ScenarioSettings,
    /// Zone whose calendar days make the daily series (Sharpe, Sortino).
    pub report_tz: Zone,
    /// p of the tail concentration ratio, in percent.
    pub tcr_p: f64,
    /// TCR above which a result "leans on a handful of trades".
    pub tcr_threshold: f64,
    /// The calendar's real coverage as the user states it
    /// (`--calendar-span`, ms, end exclusive); else each currency's first
    /// to last release. Shown in the coverage lines.
    #[serde(skip)]
    pub calendar_span: Option<(i64, i64)>,
    /// `--pool`: read every run's trades as one account (runs that really
    /// are one account split by strategy).
    pub pool: bool,
}

impl Default for AnalysisSettings {
    /// The command line's defaults (a test in `cmd::settings` holds the two
    /// together): overlap rule, windows high 15/30 and medium 5/10 minutes,
    /// fixed sizing, cap at the unexposed trades' 99th |P/L| percentile,
    /// days in UTC, tail concentration at 1 % with 12 as "leans on a
    /// handful of trades", runs read as alternatives.
    fn default() -> Self {
        AnalysisSettings {
            exposure_rule: ExposureRule::Overlap,
            windows: WindowSettings::default(),
            scenario: ScenarioSettings {
                sizing: scenarios::Sizing::Fixed,
                cap: scenarios::CapRule::Quantile(0.99),
                initial_equity: None,
                stress: None,
            },
            report_tz: crate::import::zones::Zone::Utc,
            tcr_p: 1.0,
            tcr_threshold: 12.0,
            calendar_span: None,
            pool: false,
        }
    }
}

/// How the overall account-path figures (Sharpe, Sortino, drawdowns,
/// return/drawdown, t-statistic, time in market) of an input are read.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum AccountFigures {
    /// No runs, or one: the trades are one account.
    OneAccount,
    /// Several runs, each an alternative account: the overall account-path
    /// figures are their spread across runs (`across_runs`), and the pooled
    /// scenario figures leave them out (null).
    PerRun,
    /// Several runs read as one account (`--pool`).
    Pooled,
}

impl AccountFigures {
    /// How the account-path figures of these trades are read: per run when there are several runs and `pool` is off.
    pub fn of(trades: &Trades, pool: bool) -> AccountFigures {
        // One run, alone or picked with --run, is one account.
        if trades.runs.len() < 2 {
            AccountFigures::OneAccount
        } else if pool {
            AccountFigures::Pooled
        } else {
            AccountFigures::PerRun
        }
    }
}

impl Metrics {
    /// Leaves out the figures that follow one account's path through time
    /// (for trades pooled from alternative accounts).
    pub fn without_account_path(mut self) -> Metrics {
        self.max_drawdown = None;
        self.max_drawdown_pct = None;
        self.longest_drawdown_days = None;
        self.return_to_drawdown = None;
        self.sharpe = None;
        self.sortino = None;
        self.t_stat = None;
        self.time_in_market = None;
        self
    }
}

impl ScenarioMetrics {
    fn without_account_path(self) -> ScenarioMetrics {
        ScenarioMetrics {
            baseline: self.baseline.without_account_path(),
            removed: self.removed.without_account_path(),
            capped: self.capped.without_account_path(),
            stressed: self.stressed.map(Metrics::without_account_path),
        }
    }
}

/// Where the default TCR threshold comes from (docs/method.md §6).
pub const TCR_THRESHOLD_SOURCE: &str =
    "common practice (rule of thumb, no published source); set with --tcr-threshold";

/// Tail figures of one scenario (docs/method.md §6).
#[derive(Debug, Clone, Serialize)]
pub struct TailLine {
    /// Tail concentration ratio: mean of the top p % of |P/L| ÷ mean of all |P/L|.
    pub tcr: Option<f64>,
    /// Trades in the top bucket (k).
    pub top_bucket: usize,
    /// Fewer than 10 trades in the top bucket: too few to judge.
    pub too_few: bool,
    /// Whether the ratio is above the threshold (`None` when undefined).
    pub above_threshold: Option<bool>,
    /// Hill (1975) tail index of |P/L|, k = ⌊√n⌋ upper order statistics.
    pub hill: Option<crate::analysis::evidence::HillEstimate>,
}

/// The tail figures of the three scenarios and the settings they use.
#[derive(Debug, Clone, Serialize)]
pub struct TailSummary {
    /// `amount`: tail figures on P/L; `return`: on per-trade returns.
    pub tcr_basis: scenarios::TailBasis,
    /// p of the top bucket, in percent.
    pub p: f64,
    /// Ratio above which the result "leans on a handful of trades".
    pub threshold: f64,
    /// Where that threshold comes from.
    pub threshold_source: &'static str,
    /// All trades.
    pub baseline: TailLine,
    /// Without the exposed trades.
    pub removed: TailLine,
    /// Exposed trades capped at the cap value.
    pub capped: TailLine,
    /// Exposed trades charged the stress cost (`--stress`; absent without).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub stressed: Option<TailLine>,
}

/// `tcr` is the scenario's metric (computed once, in [`metrics::compute`]).
fn tail_line(pnl: &[f64], tcr: Option<f64>, p: f64, threshold: f64) -> TailLine {
    let k = if pnl.is_empty() {
        0
    } else {
        metrics::tcr_k(pnl.len(), p)
    };
    TailLine {
        tcr,
        top_bucket: k,
        too_few: k < 10,
        above_threshold: tcr.map(|t| t > threshold),
        hill: crate::analysis::evidence::hill_of_abs(
            pnl,
            crate::analysis::evidence::default_hill_k(pnl.len()),
        ),
    }
}

/// Why an analysis could not be made.
#[derive(Debug, thiserror::Error)]
pub enum AnalysisError {
    /// Attribution did not add up to the exposed P/L (a defect; reported, never hidden).
    #[error(transparent)]
    Conservation(#[from] ConservationError),
    /// The scenarios need equity that the input lacks.
    #[error(transparent)]
    Scenario(#[from] ScenarioError),
    /// No trades were left to analyse.
    #[error("no trades to analyse")]
    NoTrades,
}

/// The `exposure` block of the summary (docs/method.md §8).
#[derive(Debug, Clone, Serialize)]
pub struct ExposureSummary {
    /// Trades analysed.
    pub trades: usize,
    /// Trades exposed to at least one used release.
    pub exposed_trades: usize,
    /// Σ P/L of the exposed trades.
    pub exposed_pnl: f64,
    /// Trade–release matches (Σ k).
    pub matches: usize,
    /// Releases whose tier and window make them count.
    pub releases_used: usize,
    /// Used releases that at least one trade was exposed to.
    pub releases_touched: usize,
}

/// Metrics of the three scenarios.
#[derive(Debug, Clone, Serialize)]
pub struct ScenarioMetrics {
    /// Figures with every trade.
    pub baseline: Metrics,
    /// Figures without the exposed trades.
    pub removed: Metrics,
    /// Figures with the exposed trades capped.
    pub capped: Metrics,
    /// Figures with the exposed trades charged the stress cost (`--stress`;
    /// absent without it).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub stressed: Option<Metrics>,
}

/// One parameter set.
#[derive(Debug, Clone, Serialize)]
pub struct RunResult {
    /// Run name.
    pub run: String,
    /// Trades of the run.
    pub trades: usize,
    /// Of them exposed.
    pub exposed_trades: usize,
    /// Σ P/L of the run's exposed trades.
    pub exposed_pnl: f64,
    /// The cap C used for this run's `capped` scenario.
    pub cap_value: Option<f64>,
    /// The run's figures in the three scenarios.
    pub scenarios: ScenarioMetrics,
    /// What the run's tail figures were measured on.
    #[serde(skip)]
    pub tail_basis: scenarios::TailBasis,
}

/// One figure across runs: each run is an alternative account, so the
/// account-path figures of a multi-run input are read as their spread over
/// runs rather than from the pooled trades.
#[derive(Debug, Clone, Serialize)]
pub struct AcrossRuns {
    /// Figure name (as in `Metrics`).
    pub metric: &'static str,
    /// Runs where the figure is defined in both scenarios.
    pub runs: usize,
    /// Spread of the figure over runs with every trade.
    pub baseline: Spread,
    /// Spread without the exposed trades.
    pub removed: Spread,
    /// Share of those runs whose figure is better without the exposed
    /// trades (higher; for drawdowns lower).
    pub share_improved: Option<f64>,
}

/// Median, quartiles (type 7) and extremes; "best" and "worst" follow the
/// figure's direction.
#[derive(Debug, Clone, Serialize)]
pub struct Spread {
    /// Median over runs.
    pub median: Option<f64>,
    /// First quartile.
    pub q1: Option<f64>,
    /// Third quartile.
    pub q3: Option<f64>,
    /// Best run's value.
    pub best: Option<f64>,
    /// Worst run's value.
    pub worst: Option<f64>,
}

/// The account-path figures across runs, and the share of runs above the
/// tail threshold with all trades and without the exposed ones.
#[derive(Debug, Clone, Serialize)]
pub struct RunDistribution {
    /// One line per account-path figure.
    pub figures: Vec<AcrossRuns>,
    /// Share of runs whose tail ratio is above the threshold, all trades.
    pub share_above_tcr_threshold_baseline: Option<f64>,
    /// The same without the exposed trades.
    pub share_above_tcr_threshold_removed: Option<f64>,
}

/// Spreads of each account-path figure over `runs` (empty without runs).
pub fn across_runs(runs: &[RunResult], tcr_threshold: f64) -> Option<RunDistribution> {
    if runs.len() < 2 {
        return None;
    }
    type Get = fn(&Metrics) -> Option<f64>;
    let figures: [(&'static str, Get, bool); 7] = [
        ("sharpe", |m| m.sharpe, true),
        ("sortino", |m| m.sortino, true),
        ("max_drawdown", |m| m.max_drawdown, false),
        ("longest_drawdown_days", |m| m.longest_drawdown_days, false),
        ("return_to_drawdown", |m| m.return_to_drawdown, true),
        ("t_stat", |m| m.t_stat, true),
        ("time_in_market", |m| m.time_in_market, true),
    ];
    let spread = |mut v: Vec<f64>, higher: bool| {
        let q = |v: &mut Vec<f64>, p: f64| metrics::quantile_type7_unsorted(v, p);
        let (lo, hi) = (
            v.iter().copied().reduce(f64::min),
            v.iter().copied().reduce(f64::max),
        );
        Spread {
            median: q(&mut v, 0.5),
            q1: q(&mut v, 0.25),
            q3: q(&mut v, 0.75),
            best: if higher { hi } else { lo },
            worst: if higher { lo } else { hi },
        }
    };
    let figures = figures
        .iter()
        .map(|&(metric, get, higher)| {
            let pairs: Vec<(f64, f64)> = runs
                .iter()
                .filter_map(|r| get(&r.scenarios.baseline).zip(get(&r.scenarios.removed)))
                .collect();
            let improved = pairs
                .iter()
                .filter(|(b, r)| if higher { r > b } else { r < b })
                .count();
            AcrossRuns {
                metric,
                runs: pairs.len(),
                baseline: spread(pairs.iter().map(|p| p.0).collect(), higher),
                removed: spread(pairs.iter().map(|p| p.1).collect(), higher),
                share_improved: (!pairs.is_empty() && metric != "time_in_market")
                    .then(|| improved as f64 / pairs.len() as f64),
            }
        })
        .collect();
    let above = |get: fn(&RunResult) -> Option<f64>| {
        let v: Vec<f64> = runs.iter().filter_map(get).collect();
        (!v.is_empty())
            .then(|| v.iter().filter(|&&t| t > tcr_threshold).count() as f64 / v.len() as f64)
    };
    Some(RunDistribution {
        figures,
        share_above_tcr_threshold_baseline: above(|r| r.scenarios.baseline.tcr),
        share_above_tcr_threshold_removed: above(|r| r.scenarios.removed.tcr),
    })
}

/// The result of [`analyze`]: every figure of the summary, no text.
#[derive(Debug, Clone, Serialize)]
pub struct Analysis {
    /// Whether account-path figures are of one account or per run.
    pub account_figures: AccountFigures,
    /// Counts and P/L of the exposure.
    pub exposure: ExposureSummary,
    /// Per currency: trades outside the calendar's span.
    pub coverage: Vec<CoverageLine>,
    /// Σ stress charge over the exposed trades (`--stress`), so that
    /// stressed net = baseline net − this; `None` without it.
    pub stress_charge: Option<f64>,
    /// The cap C of the capped scenario.
    pub cap_value: Option<f64>,
    /// Starting equity used by compounding sizing.
    pub initial_equity: Option<f64>,
    /// Figures of the three scenarios over all trades.
    pub scenarios: ScenarioMetrics,
    /// Tail concentration and Hill index per scenario.
    pub tail: TailSummary,
    /// P/L attributed to releases, categories, currencies and tiers.
    pub attribution: Attribution,
    /// Per-run figures (runs listed by name).
    pub runs: Vec<RunResult>,
    /// The three scenarios' trades in close order (for charts and
    /// tail.csv; not part of summary.json); empty unless asked for.
    #[serde(skip)]
    pub series: Scenarios,
}

/// `opened`/`closed`: the input's columns (series hold trade indices).
fn metrics_of(sc: &Scenarios, opened: &[i64], closed: &[i64], ctx: &Context) -> ScenarioMetrics {
    let [b, r, c] = sc.views().map(|s| s.curve(opened, closed));
    // The capped scenario holds the baseline's trades: one union of their
    // holding periods serves both.
    let ((baseline, capped), removed) = rayon::join(
        || {
            let held = metrics::time_held(&b);
            rayon::join(
                || metrics::compute_with_union(&b, ctx, Some(held)),
                || metrics::compute_with_union(&c, ctx, Some(held)),
            )
        },
        || metrics::compute(&r, ctx),
    );
    // The stressed scenario also holds the baseline's trades.
    let stressed = sc.stressed_view().map(|v| {
        let c = v.curve(opened, closed);
        metrics::compute_with_union(&c, ctx, Some(metrics::time_held(&b)))
    });
    ScenarioMetrics {
        baseline,
        removed,
        capped,
        stressed,
    }
}

/// Runs the exposure engine: the matches, and with `nearest` also each
/// trade's nearest release. `cur[i]`: the currencies of instrument i.
fn exposure_of(
    trades: &Trades,
    releases: &[Release],
    cur: &[Vec<String>],
    windows: &WindowSettings,
    rule: ExposureRule,
    nearest: bool,
) -> (Engine, Exposure) {
    let engine = Engine::new(releases, windows, rule);
    let (o, c, i) = (&trades.opened, &trades.closed, &trades.instrument);
    let exp = if nearest {
        engine.run(o, c, i, cur)
    } else {
        engine.run_matches(o, c, i, cur)
    };
    (engine, exp)
}

/// Metrics and tail figures of the three scenarios of all trades.
fn overall_of(
    all: &Scenarios,
    trades: &Trades,
    ctx: &Context,
    settings: &AnalysisSettings,
) -> (ScenarioMetrics, TailSummary) {
    let o = metrics_of(all, &trades.opened, &trades.closed, ctx);
    let tl = |sr: scenarios::SeriesView, m: &Metrics| {
        tail_line(
            sr.tail_values(),
            m.tcr,
            settings.tcr_p,
            settings.tcr_threshold,
        )
    };
    let (baseline, (removed, capped)) = rayon::join(
        || tl(all.baseline.view(), &o.baseline),
        || {
            rayon::join(
                || tl(all.removed.view(), &o.removed),
                || tl(all.capped_view(), &o.capped),
            )
        },
    );
    let stressed = all
        .stressed_view()
        .zip(o.stressed.as_ref())
        .map(|(v, m)| tl(v, m));
    let tail = TailSummary {
        tcr_basis: all.tail_basis,
        p: settings.tcr_p,
        threshold: settings.tcr_threshold,
        threshold_source: TCR_THRESHOLD_SOURCE,
        baseline,
        removed,
        capped,
        stressed,
    };
    (o, tail)
}

/// First open and last close of the trades `idx` (a run's span), or
/// `whole` for none.
pub fn span_of(idx: &[u32], trades: &Trades, whole: (i64, i64)) -> (i64, i64) {
    (
        idx.iter()
            .map(|&i| trades.opened[i as usize])
            .min()
            .unwrap_or(whole.0),
        idx.iter()
            .map(|&i| trades.closed[i as usize])
            .max()
            .unwrap_or(whole.1),
    )
}

/// Each run's trade indices in close order, from the overall close order.
pub fn split_by_run(order: &[u32], trades: &Trades) -> Vec<Vec<u32>> {
    // Sized exactly first: grown by doubling they would hold up to twice
    // the trade count.
    let mut count = vec![0usize; trades.runs.len()];
    for &r in &trades.run {
        count[r as usize] += 1;
    }
    let mut by_run: Vec<Vec<u32>> = count.into_iter().map(Vec::with_capacity).collect();
    for &i in order {
        by_run[trades.run[i as usize] as usize].push(i);
    }
    by_run
}

/// Scenarios and metrics of each run (`by_run` from [`split_by_run`]).
fn runs_of(
    by_run: Vec<Vec<u32>>,
    trades: &Trades,
    exposed: &(dyn Fn(usize) -> bool + Sync),
    ctx: &Context,
    settings: &AnalysisSettings,
) -> Result<Vec<RunResult>, AnalysisError> {
    by_run
        .into_par_iter()
        .enumerate()
        .map(|(r, idx)| {
            Ok(run_result(
                trades.runs[r].clone(),
                idx,
                trades,
                exposed,
                ctx,
                settings,
            )?)
        })
        .collect()
}

/// One run's scenarios and their figures: the one per-run routine, used by
/// `analyze`'s run table and by `rank`'s rows. `idx`: the run's trades in
/// close order; `ctx.span` stands in when the run is empty.
pub fn run_result(
    run: String,
    idx: Vec<u32>,
    trades: &Trades,
    exposed: &(dyn Fn(usize) -> bool + Sync),
    ctx: &Context,
    settings: &AnalysisSettings,
) -> Result<RunResult, ScenarioError> {
    let sc = scenarios::build_in_order(idx, trades, exposed, &settings.scenario)?;
    let idx = &sc.baseline.trade;
    let run_span = span_of(idx, trades, ctx.span);
    let ctx = Context {
        span: run_span,
        initial_equity: sc.initial_equity,
        ..*ctx
    };
    Ok(RunResult {
        run,
        trades: idx.len(),
        exposed_trades: idx.iter().filter(|&&i| exposed(i as usize)).count(),
        exposed_pnl: idx
            .iter()
            .filter(|&&i| exposed(i as usize))
            .map(|&i| trades.pnl[i as usize])
            .sum(),
        cap_value: sc.cap_value,
        scenarios: metrics_of(&sc, &trades.opened, &trades.closed, &ctx),
        tail_basis: sc.tail_basis,
    })
}

/// The whole analysis. `files`: also compute what only the output files
/// use — each trade's nearest release (in the returned exposure) and the
/// scenario series (`Analysis::series`, else left empty).
pub fn analyze(
    trades: &Trades,
    releases: &[Release],
    currencies: &[InstrumentCurrencies],
    settings: &AnalysisSettings,
    files: bool,
) -> Result<(Analysis, Exposure), AnalysisError> {
    let span = trades.span().ok_or(AnalysisError::NoTrades)?;
    crate::import::phases::mark("start analysis");
    // Exposure beside the close-order sort and the coverage (independent
    // passes).
    let cur: Vec<Vec<String>> = currencies.iter().map(|c| c.currencies.clone()).collect();
    let ((engine, exp), order) = rayon::join(
        || {
            exposure_of(
                trades,
                releases,
                &cur,
                &settings.windows,
                settings.exposure_rule,
                files,
            )
        },
        || {
            let mut order: Vec<u32> = (0..trades.len() as u32).collect();
            scenarios::close_order(&mut order, &trades.opened, &trades.closed);
            order
        },
    );
    let coverage = exposure::coverage(releases, trades, &cur, &exp.k, settings.calendar_span);
    crate::import::phases::mark("exposure, close order");
    let exposed = |i: usize| exp.is_exposed(i);
    let base_ctx = Context {
        span,
        report_zone: settings.report_tz,
        initial_equity: None,
        tcr_p: settings.tcr_p,
    };
    let by_run = trades.has_runs().then(|| split_by_run(&order, trades));
    // Attribution, the overall scenarios and their figures, and the runs',
    // side by side.
    let ((attribution, overall), runs) = rayon::join(
        || {
            rayon::join(
                || attribution::attribute(&exp, &trades.pnl, releases, &engine.used),
                || -> Result<_, AnalysisError> {
                    let all =
                        scenarios::build_in_order(order, trades, &exposed, &settings.scenario)?;
                    let ctx = Context {
                        initial_equity: all.initial_equity,
                        ..base_ctx
                    };
                    let (metrics, tail) = overall_of(&all, trades, &ctx, settings);
                    crate::import::phases::mark("(overall)");
                    Ok((all, metrics, tail))
                },
            )
        },
        || match by_run {
            Some(by_run) => runs_of(by_run, trades, &exposed, &base_ctx, settings),
            None => Ok(Vec::new()),
        },
    );
    let (attribution, (all, overall, tail)) = (attribution?, overall?);
    let (cap_value, initial_equity, stress_charge) =
        (all.cap_value, all.initial_equity, all.stress_charge);
    let mut runs = runs?;
    // Listed by name, whatever the row order.
    runs.sort_by(|a, b| crate::import::trades::run_order(&a.run, &b.run));
    // The series feed only the output files; without them they go now.
    let series = if files { all } else { Scenarios::default() };
    crate::import::phases::mark("attribution, scenarios, runs");
    let summary = ExposureSummary {
        trades: trades.len(),
        exposed_trades: exp.exposed_count(),
        exposed_pnl: attribution.headline.exposed_pnl,
        matches: exp.match_release.len(),
        releases_used: engine.used.iter().filter(|&&u| u).count(),
        releases_touched: attribution
            .by_release
            .iter()
            .filter(|r| r.trades_touched > 0)
            .count(),
    };
    let account_figures = AccountFigures::of(trades, settings.pool);
    let overall = if account_figures == AccountFigures::PerRun {
        overall.without_account_path()
    } else {
        overall
    };
    Ok((
        Analysis {
            account_figures,
            exposure: summary,
            coverage,
            stress_charge,
            cap_value,
            initial_equity,
            scenarios: overall,
            tail,
            attribution,
            runs,
            series,
        },
        exp,
    ))
}

/// The trades of one run as their own table (so nothing per-trade is kept
/// for other runs).
pub fn subset(t: &Trades, idx: &[u32]) -> Trades {
    fn pick<T: Copy>(v: &[T], idx: &[u32]) -> Vec<T> {
        idx.iter().map(|&i| v[i as usize]).collect()
    }
    Trades {
        opened: pick(&t.opened, idx),
        closed: pick(&t.closed, idx),
        instrument: pick(&t.instrument, idx),
        pnl: pick(&t.pnl, idx),
        run: vec![0; idx.len()],
        equity_before: t.equity_before.as_deref().map(|v| pick(v, idx)),
        pnl_pct: t.pnl_pct.as_deref().map(|v| pick(v, idx)),
        size: t.size.as_deref().map(|v| pick(v, idx)),
        file: vec![0; idx.len()],
        row: vec![0; idx.len()],
        ..Default::default()
    }
}
