//! Window tuning: sweep pre/post window lengths over a grid and show, per
//! cell, what removing the exposed trades costs and gains, marking the cells
//! on the cost/benefit frontier (most tail reduction for least time
//! blocked).
//!
//! The trades are read, sorted into close order and indexed once
//! (`engine::shifted::TradeIndex`, numbered by close order); cells mark
//! their windows on that index eight at a time and take each run's figures
//! without the exposed trades from the weighted pass
//! (`evidence::RemovedPass`), or from built scenarios where the pass does
//! not apply.

use crate::analysis::evidence;
use crate::analysis::metrics::{self, Context};
use crate::analysis::run::{AccountFigures, AnalysisSettings};
use crate::analysis::scenarios::{self, TradeView};
use crate::engine::exposure::slot_of;
use crate::engine::shifted::{Slots, TradeIndex, is_set, set_bits};
use crate::engine::windows::{Window, WindowSettings};
use crate::import::calendar::{Release, Tier};
use crate::import::trades::Trades;
use crate::import::zones::DAY_MS;
use rayon::prelude::*;
use serde::Serialize;

/// `START..END/STEP` minutes, END included.
pub fn parse_range(s: &str) -> Result<Vec<i64>, crate::import::setting::BadSetting> {
    let bad = || format!("'{s}' is not START..END/STEP minutes, e.g. 0..60/5");
    let (range, step) = s.split_once('/').ok_or_else(bad)?;
    let (a, b) = range.split_once("..").ok_or_else(bad)?;
    let (a, b, step): (i64, i64, i64) = (
        a.trim().parse().map_err(|_| bad())?,
        b.trim().parse().map_err(|_| bad())?,
        step.trim().parse().map_err(|_| bad())?,
    );
    if a < 0 || b < a || step <= 0 || b > 7 * 24 * 60 {
        return Err(bad().into());
    }
    let v: Vec<i64> = (a..=b).step_by(step as usize).collect();
    if v.len() > 200 {
        return Err(format!("'{s}' has {} steps; at most 200", v.len()).into());
    }
    Ok(v)
}

/// One grid cell.
#[derive(Debug, Clone, Serialize)]
pub struct Cell {
    /// Minutes before each release.
    pub pre_min: i64,
    /// Minutes after each release.
    pub post_min: i64,
    /// Trades the windows remove (exposed trades).
    pub trades_removed: usize,
    /// Exposed P/L ÷ net P/L.
    pub share_of_net_removed: Option<f64>,
    /// Tail concentration ratio without the exposed trades.
    pub tcr_after: Option<f64>,
    /// Baseline TCR − TCR after removal.
    pub tcr_reduction: Option<f64>,
    /// Sharpe ratio without the exposed trades.
    pub sharpe_after: Option<f64>,
    /// Maximum drawdown without the exposed trades.
    pub max_drawdown_after: Option<f64>,
    /// With alternative runs: share of runs whose tail concentration falls
    /// without the exposed trades, and share whose Sharpe rises.
    pub runs_tcr_reduced: Option<f64>,
    /// Share of runs whose Sharpe ratio rises.
    pub runs_sharpe_improved: Option<f64>,
    /// With `--stress` under fixed sizing: net P/L of all trades with the
    /// cell's exposed trades charged the stress cost (net − Σ charge);
    /// absent otherwise.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub net_stressed: Option<f64>,
    /// With `--stress` under fixed sizing: profit factor of all trades with
    /// the cell's exposed trades charged; absent otherwise (or undefined:
    /// no loss).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub profit_factor_stressed: Option<f64>,
    /// Union of the windows (of the traded currencies) ÷ weekday time in
    /// the trades' span.
    pub blocked_share: f64,
    /// No other cell blocks no more time and reduces the tail at least as
    /// much, with one of the two strictly better.
    pub frontier: bool,
}

/// The window grid of [`tune`]: one cell per (pre, post).
#[derive(Debug, Clone, Serialize)]
pub struct TuneResult {
    /// `per_run`: each cell's tail, Sharpe and drawdown figures are medians
    /// over runs (alternative accounts) of the per-run figures, and
    /// `tcr_baseline` the median run's; else the figures of all trades.
    pub account_figures: AccountFigures,
    /// Runs the medians are taken over (0 unless `per_run`).
    pub runs: usize,
    /// `None`: every used tier gets the cell's window; else only this tier.
    pub tier: Option<Tier>,
    /// Pre-release minutes of the grid's rows.
    pub pre: Vec<i64>,
    /// Post-release minutes of the grid's columns.
    pub post: Vec<i64>,
    /// Tail concentration ratio with every trade.
    pub tcr_baseline: Option<f64>,
    /// `amount` or `return`: what the cells' tail figures are measured on.
    pub tcr_basis: scenarios::TailBasis,
    /// The cells, row after row.
    pub cells: Vec<Cell>,
}

/// Window settings for one cell.
pub fn cell_windows(base: &WindowSettings, tier: Option<Tier>, w: Window) -> WindowSettings {
    let mut s = base.clone();
    let set = |slot: &mut Option<Window>, t: Tier| {
        if tier == Some(t) || (tier.is_none() && slot.is_some()) {
            *slot = Some(w);
        }
    };
    set(&mut s.high, Tier::High);
    set(&mut s.medium, Tier::Medium);
    set(&mut s.low, Tier::Low);
    s
}

fn weekday_ms(span: (i64, i64)) -> i64 {
    let (mut total, mut day) = (0, span.0.div_euclid(DAY_MS));
    while day * DAY_MS < span.1 {
        if crate::import::zones::is_weekday(day) {
            total += (span.1.min((day + 1) * DAY_MS) - span.0.max(day * DAY_MS)).max(0);
        }
        day += 1;
    }
    total
}

/// Sweeps the grid.
#[allow(clippy::too_many_arguments)]
pub fn tune(
    trades: &Trades,
    releases: &[Release],
    currencies: &[Vec<String>],
    settings: &AnalysisSettings,
    tier: Option<Tier>,
    pre: &[i64],
    post: &[i64],
    progress: &(dyn Fn() + Sync),
) -> Result<TuneResult, scenarios::ScenarioError> {
    let span = trades.span().unwrap_or((0, 0));
    let mut order: Vec<u32> = (0..trades.len() as u32).collect();
    crate::analysis::scenarios::close_order(&mut order, &trades.opened, &trades.closed);
    let net: f64 = order.iter().map(|&i| trades.pnl[i as usize]).sum();
    // Each trade's number in close order: the flags a cell marks are by
    // this number, so that a cell's sums read them in turn.
    let number_of = crate::import::trades::places_in(&order);
    // Gross profit and gross loss of all trades (the stressed figures').
    let gross = order
        .iter()
        .map(|&i| trades.pnl[i as usize])
        .fold((0.0, 0.0), |(gp, gl), p| (gp + p.max(0.0), gl + p.min(0.0)));
    // The scenarios come from the one builder analyze uses, so a cell's
    // figures follow the sizing (compounding replays the kept trades).
    let build = |exposed: &(dyn Fn(usize) -> bool + Sync)| {
        scenarios::build(&TradeView::of(&order, trades, exposed), &settings.scenario)
    };
    let ctx_of = |sc: &scenarios::Scenarios| Context {
        span,
        report_zone: settings.report_tz,
        initial_equity: sc.initial_equity,
        tcr_p: settings.tcr_p,
    };
    let account_figures = AccountFigures::of(trades, settings.pool);
    let base = build(&|_| false)?;
    let tcr_basis = base.tail_basis;
    // Per run (alternative accounts): each run's trades in close order,
    // its span, and its baseline TCR and Sharpe, computed once.
    let per_run: Vec<RunBase> = if account_figures == AccountFigures::PerRun {
        crate::analysis::run::split_by_run(&order, trades)
            .into_par_iter()
            .map(|idx| -> Result<RunBase, scenarios::ScenarioError> {
                let span = crate::analysis::run::span_of(&idx, trades, span);
                let sc =
                    scenarios::build(&TradeView::of(&idx, trades, &|_| false), &settings.scenario)?;
                let ctx = Context {
                    span,
                    ..ctx_of(&sc)
                };
                let m = metrics::compute(
                    &sc.baseline.view().curve(&trades.opened, &trades.closed),
                    &ctx,
                );
                let pass = evidence::RemovedPass::new(
                    &crate::analysis::run::subset(trades, &idx),
                    &settings.scenario,
                    &ctx,
                )
                .map(|p| {
                    let numbers = p
                        .order()
                        .iter()
                        .map(|&s| number_of[idx[s as usize] as usize]);
                    (numbers.collect(), p)
                });
                Ok(RunBase {
                    // Kept for the scenarios built where the pass does not
                    // apply (with it, its numbers stand for the trades).
                    order: if pass.is_some() { Vec::new() } else { idx },
                    span,
                    tcr: m.tcr,
                    sharpe: m.sharpe,
                    pass,
                })
            })
            .collect::<Result<_, _>>()?
    } else {
        Vec::new()
    };
    // One account: its removed scenario by the weighted pass where it applies.
    let pooled_pass: Option<(Vec<u32>, evidence::RemovedPass)> = per_run
        .is_empty()
        .then(|| evidence::RemovedPass::new(trades, &settings.scenario, &ctx_of(&base)))
        .flatten()
        .map(|p| {
            let numbers = p.order().iter().map(|&i| number_of[i as usize]);
            (numbers.collect(), p)
        });
    let tcr_baseline = if per_run.is_empty() {
        metrics::compute(
            &base.baseline.view().curve(&trades.opened, &trades.closed),
            &ctx_of(&base),
        )
        .tcr
    } else {
        median(per_run.iter().filter_map(|r| r.tcr).collect())
    };
    drop(base);
    // The index and the cells must not stack on what building the runs
    // (and then the index) freed.
    crate::import::budget::release_freed_memory();
    crate::import::phases::mark("tune: baselines and passes");
    let week = weekday_ms(span) as f64;
    // The trades indexed once; each cell marks its windows' slots.
    let mut calendar_currencies: Vec<String> =
        releases.iter().map(|r| r.currency.clone()).collect();
    calendar_currencies.sort();
    calendar_currencies.dedup();
    // Each release's currency (its number in that list) and whether a
    // traded instrument has it.
    let traded: Vec<&String> = currencies.iter().flatten().collect();
    let release_currency: Vec<(usize, bool)> = releases
        .iter()
        .map(|r| {
            let c = calendar_currencies.binary_search(&r.currency);
            (c.expect("listed above"), traded.contains(&&r.currency))
        })
        .collect();
    let index = TradeIndex::new(
        &calendar_currencies,
        &trades.opened,
        &trades.closed,
        &trades.instrument,
        currencies,
        settings.exposure_rule,
    )
    .renumbered(&number_of);
    // Numbers by input index are read only where a scenario is built (no
    // weighted pass): else dropped, 4 bytes a trade (40 MB at 10 M).
    let built = match per_run.is_empty() {
        true => pooled_pass.is_none(),
        false => per_run.iter().any(|r| r.pass.is_none()),
    };
    let number_of = if built { number_of } else { Vec::new() };
    crate::import::budget::release_freed_memory();
    crate::import::phases::mark("tune: index");
    // The P/L in close order, read in turn by every cell (through the
    // order, each cell's sum would wait on scattered reads).
    let pnl_in_order: Vec<f64> = order.iter().map(|&i| trades.pnl[i as usize]).collect();
    let grid: Vec<(i64, i64)> = pre
        .iter()
        .flat_map(|&a| post.iter().map(move |&b| (a, b)))
        .collect();
    // The slots of a cell's windows, and the time its windows on traded
    // currencies block (their union within the span, ms).
    let windows_of = |(a, b): (i64, i64)| {
        let ws = cell_windows(
            &settings.windows,
            tier,
            Window {
                pre_min: a,
                post_min: b,
            },
        );
        let mut blocking = Vec::new();
        let slots = Slots::of_slots(
            calendar_currencies.len(),
            releases
                .iter()
                .zip(&release_currency)
                .filter_map(|(r, &(c, traded))| {
                    let window = ws.span_for(r)?;
                    if traded {
                        blocking.push((window.0, window.1));
                    }
                    Some((c, slot_of(settings.exposure_rule, r.all_day, window)))
                }),
        );
        (slots, metrics::union_within(blocking, Some(span)))
    };
    // A cell's figures from its flags (by close-order number) and the time
    // it blocks.
    let cell_of = |(a, b): (i64, i64),
                   bits: &[u64],
                   blocked: i64|
     -> Result<Cell, scenarios::ScenarioError> {
        // In close order, the exposed trades alone: the others would add
        // −0.0, the identity of addition.
        let exposed_pnl: f64 = set_bits(bits).map(|k| pnl_in_order[k]).sum();
        let is_exposed = |i: usize| is_set(bits, number_of[i] as usize);
        // The stressed scenario keeps every trade and charges the
        // exposed ones: its net is the baseline's less the charges
        // (fixed sizing; compounding would replay the account).
        let stressed = settings
            .scenario
            .stress
            .filter(|_| settings.scenario.sizing == scenarios::Sizing::Fixed)
            .map(|rule| {
                let size = trades.size.as_deref();
                // Net less the charges; gross profit and loss with each
                // exposed trade's P/L replaced by its charged P/L.
                let (mut charge, mut gp, mut gl) = (0.0, gross.0, gross.1);
                for i in set_bits(bits).map(|k| order[k] as usize) {
                    let p = trades.pnl[i];
                    let c = rule.charge(p, size.map(|z| z[i]));
                    charge += c;
                    gp += (p - c).max(0.0) - p.max(0.0);
                    gl += (p - c).min(0.0) - p.min(0.0);
                }
                (net - charge, (gl < 0.0).then(|| gp / -gl))
            });
        let (net_stressed, profit_factor_stressed) =
            (stressed.map(|s| s.0), stressed.and_then(|s| s.1));
        let after = if per_run.is_empty() {
            let [tcr, sharpe, max_drawdown] = match &pooled_pass {
                Some((numbers, pass)) => tail_and_path(pass, numbers, bits),
                None => removed_by_build(&order, trades, &is_exposed, settings, &ctx_of)?,
            };
            After {
                tcr,
                tcr_reduction: tcr_baseline.zip(tcr).map(|(x, y)| x - y),
                sharpe,
                max_drawdown,
                runs_tcr_reduced: None,
                runs_sharpe_improved: None,
            }
        } else {
            runs_after(&per_run, trades, &number_of, bits, settings, &ctx_of)?
        };
        progress();
        Ok(Cell {
            pre_min: a,
            post_min: b,
            trades_removed: bits.iter().map(|w| w.count_ones() as usize).sum(),
            share_of_net_removed: metrics::share_of_net(exposed_pnl, net, gross.0 - gross.1),
            tcr_after: after.tcr,
            tcr_reduction: after.tcr_reduction,
            sharpe_after: after.sharpe,
            max_drawdown_after: after.max_drawdown,
            runs_tcr_reduced: after.runs_tcr_reduced,
            runs_sharpe_improved: after.runs_sharpe_improved,
            net_stressed,
            profit_factor_stressed,
            blocked_share: if week > 0.0 {
                blocked as f64 / week
            } else {
                0.0
            },
            frontier: false,
        })
    };
    // Eight cells at a time: their windows marked together (the index is
    // read once for the eight), then each cell's figures.
    let mut cells: Vec<Cell> = grid
        .par_chunks(8)
        .flat_map_iter(|chunk| {
            let (slots, blocked): (Vec<Slots>, Vec<i64>) =
                chunk.iter().map(|&cell| windows_of(cell)).unzip();
            let mut bits = vec![vec![0u64; index.words()]; chunk.len()];
            let calendars: Vec<&Slots> = slots.iter().collect();
            let mut flags: Vec<&mut [u64]> = bits.iter_mut().map(|b| b.as_mut_slice()).collect();
            index.mark_each(&calendars, &mut flags);
            drop(slots);
            let cells: Vec<Result<Cell, scenarios::ScenarioError>> = chunk
                .iter()
                .zip(&bits)
                .zip(blocked)
                .map(|((&cell, bits), blocked)| cell_of(cell, bits, blocked))
                .collect();
            cells
        })
        .collect::<Result<_, _>>()?;
    crate::import::phases::mark("tune: cells");
    mark_frontier(&mut cells);
    Ok(TuneResult {
        account_figures,
        runs: per_run.len(),
        tier,
        pre: pre.to_vec(),
        post: post.to_vec(),
        tcr_baseline,
        tcr_basis,
        cells,
    })
}

/// One run's trades and its figures with every trade.
struct RunBase {
    /// The run's trades (input indices) in close order; empty where the
    /// weighted pass applies.
    order: Vec<u32>,
    span: (i64, i64),
    tcr: Option<f64>,
    sharpe: Option<f64>,
    /// Its removed scenario's figures by the weighted pass, where it
    /// applies, with the close-order number of each of the pass's trades
    /// (then `order` is left empty).
    pass: Option<(Vec<u32>, evidence::RemovedPass)>,
}

/// A cell's figures without the exposed trades.
struct After {
    tcr: Option<f64>,
    tcr_reduction: Option<f64>,
    sharpe: Option<f64>,
    max_drawdown: Option<f64>,
    runs_tcr_reduced: Option<f64>,
    runs_sharpe_improved: Option<f64>,
}

fn median(mut v: Vec<f64>) -> Option<f64> {
    metrics::quantile_type7_unsorted(&mut v, 0.5)
}

/// Medians over runs of each run's figures without the `exposed` trades
/// (flags by close-order number, `number_of` a trade's by input index; the reduction
/// is each run's own, then the median), and the shares of runs whose TCR
/// falls and whose Sharpe rises.
fn runs_after(
    runs: &[RunBase],
    trades: &Trades,
    number_of: &[u32],
    exposed: &[u64],
    settings: &AnalysisSettings,
    ctx_of: &(dyn Fn(&scenarios::Scenarios) -> Context + Sync),
) -> Result<After, scenarios::ScenarioError> {
    // Per run: TCR after, its reduction, Sharpe after, max drawdown after,
    // Sharpe gain.
    type RunAfter = [Option<f64>; 5];
    let each: Vec<RunAfter> = runs
        .iter()
        .map(|r| -> Result<_, scenarios::ScenarioError> {
            let [tcr, sharpe, max_drawdown] = match &r.pass {
                Some((numbers, pass)) => tail_and_path(pass, numbers, exposed),
                None => removed_by_build(
                    &r.order,
                    trades,
                    &|i| is_set(exposed, number_of[i] as usize),
                    settings,
                    &|sc| Context {
                        span: r.span,
                        ..ctx_of(sc)
                    },
                )?,
            };
            Ok([
                tcr,
                r.tcr.zip(tcr).map(|(b, a)| b - a),
                sharpe,
                max_drawdown,
                r.sharpe.zip(sharpe).map(|(b, a)| a - b),
            ])
        })
        .collect::<Result<_, _>>()?;
    let share = |v: Vec<f64>| {
        (!v.is_empty()).then(|| v.iter().filter(|&&d| d > 0.0).count() as f64 / v.len() as f64)
    };
    let reductions: Vec<f64> = each.iter().filter_map(|e| e[1]).collect();
    let sharpe_gains: Vec<f64> = each.iter().filter_map(|e| e[4]).collect();
    Ok(After {
        tcr: median(each.iter().filter_map(|e| e[0]).collect()),
        tcr_reduction: median(reductions.clone()),
        sharpe: median(each.iter().filter_map(|e| e[2]).collect()),
        max_drawdown: median(each.iter().filter_map(|e| e[3]).collect()),
        runs_tcr_reduced: share(reductions),
        runs_sharpe_improved: share(sharpe_gains),
    })
}

/// TCR, Sharpe and max drawdown without the trades whose close-order
/// number is set in `exposed`, by the weighted pass (`numbers`: the number
/// of each of its trades, in its order).
fn tail_and_path(
    pass: &evidence::RemovedPass,
    numbers: &[u32],
    exposed: &[u64],
) -> [Option<f64>; 3] {
    let dropped: Vec<bool> = numbers
        .iter()
        .map(|&k| is_set(exposed, k as usize))
        .collect();
    pass.tail_and_path_at(&dropped)
}

/// TCR, Sharpe and max drawdown of the removed scenario built over `order`
/// (where the weighted pass does not apply).
fn removed_by_build(
    order: &[u32],
    trades: &Trades,
    exposed: &(dyn Fn(usize) -> bool + Sync),
    settings: &AnalysisSettings,
    ctx_of: &dyn Fn(&scenarios::Scenarios) -> Context,
) -> Result<[Option<f64>; 3], scenarios::ScenarioError> {
    let sc = scenarios::build(&TradeView::of(order, trades, exposed), &settings.scenario)?;
    let m = metrics::compute(
        &sc.removed.view().curve(&trades.opened, &trades.closed),
        &ctx_of(&sc),
    );
    Ok([m.tcr, m.sharpe, m.max_drawdown])
}

/// Pareto frontier: maximise tail reduction, minimise time blocked.
pub fn mark_frontier(cells: &mut [Cell]) {
    let pts: Vec<(f64, f64)> = cells
        .iter()
        .map(|c| {
            (
                c.blocked_share,
                c.tcr_reduction.unwrap_or(f64::NEG_INFINITY),
            )
        })
        .collect();
    for (i, c) in cells.iter_mut().enumerate() {
        let (b, r) = pts[i];
        c.frontier = r.is_finite()
            && !pts
                .iter()
                .any(|&(b2, r2)| b2 <= b && r2 >= r && (b2 < b || r2 > r));
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cell(blocked: f64, red: f64) -> Cell {
        Cell {
            pre_min: 0,
            post_min: 0,
            trades_removed: 0,
            share_of_net_removed: None,
            tcr_after: None,
            tcr_reduction: Some(red),
            sharpe_after: None,
            max_drawdown_after: None,
            runs_tcr_reduced: None,
            runs_sharpe_improved: None,
            net_stressed: None,
            profit_factor_stressed: None,
            blocked_share: blocked,
            frontier: false,
        }
    }

    #[test]
    fn frontier_and_ranges() {
        let mut c = vec![
            cell(0.1, 1.0),
            cell(0.2, 0.5),
            cell(0.2, 2.0),
            cell(0.3, 2.0),
            cell(0.05, 0.2),
        ];
        mark_frontier(&mut c);
        assert_eq!(
            c.iter().map(|x| x.frontier).collect::<Vec<_>>(),
            vec![true, false, true, false, true]
        );
        assert_eq!(parse_range("0..60/15").unwrap(), vec![0, 15, 30, 45, 60]);
        assert!(parse_range("10..5/1").is_err());
        assert!(parse_range("0..60").is_err());
    }

    #[test]
    fn weekday_time() {
        // 2024-03-08 (Fri) 00:00Z to 2024-03-11 (Mon) 12:00Z: Friday + half Monday.
        let fri = 1_709_856_000_000;
        assert_eq!(
            weekday_ms((fri, fri + 3 * DAY_MS + DAY_MS / 2)),
            DAY_MS + DAY_MS / 2
        );
    }
}
