//! Which parameter sets stay on top without the release trades: one row per
//! run with baseline and removed figures, exposure, tail concentration, an
//! optional placebo p-value, and the rank shift baseline → removed.
//!
//! Runs are processed one at a time (in parallel): a run's exposure
//! annotations live only while its row is computed, so memory does not grow
//! with runs × trades beyond the input itself.

use crate::analysis::evidence::{self, PlaceboSettings};
use crate::analysis::metrics::{self, Context, Metrics};
use crate::analysis::run::AnalysisSettings;
use crate::analysis::run::{run_result, split_by_run};
use crate::analysis::scenarios;
use crate::engine::exposure::{Engine, UsedWindow};
use crate::import::calendar::Release;
use crate::import::trades::Trades;
use rayon::prelude::*;
use serde::Serialize;

/// The scenario a ranking is set beside the one with every trade.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Compared {
    /// Without the exposed trades.
    #[default]
    Removed,
    /// The exposed trades charged the stress cost (`--stress`).
    Stressed,
}

/// The figure runs are ranked by (higher is better; max drawdown: lower).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum RankBy {
    /// Net P/L.
    Net,
    /// Gross profit ÷ |gross loss|.
    ProfitFactor,
    /// Annualised Sharpe ratio of the daily series.
    Sharpe,
    /// Annualised Sortino ratio of the daily series.
    Sortino,
    /// Net ÷ maximum drawdown.
    ReturnToDrawdown,
    /// Mean P/L per trade.
    Expectancy,
    /// t-statistic of the mean daily P/L.
    TStat,
    /// Maximum drawdown (lower is better).
    MaxDrawdown,
}

impl RankBy {
    /// The figure this ranking reads from a scenario's metrics.
    pub fn value(self, m: &Metrics) -> Option<f64> {
        match self {
            RankBy::Net => Some(m.net),
            RankBy::ProfitFactor => m.profit_factor,
            RankBy::Sharpe => m.sharpe,
            RankBy::Sortino => m.sortino,
            RankBy::ReturnToDrawdown => m.return_to_drawdown,
            RankBy::Expectancy => m.expectancy,
            RankBy::TStat => m.t_stat,
            RankBy::MaxDrawdown => m.max_drawdown,
        }
    }
    /// Whether a larger figure ranks higher (all but max drawdown).
    pub fn higher_is_better(self) -> bool {
        self != RankBy::MaxDrawdown
    }
}

/// One parameter set.
#[derive(Debug, Clone, Serialize)]
pub struct RunRow {
    /// Run name.
    pub run: String,
    /// Trades of the run.
    pub trades: usize,
    /// Of them exposed.
    pub exposed_trades: usize,
    /// Σ P/L of the exposed trades.
    pub exposed_pnl: f64,
    /// Exposed trades ÷ trades.
    pub exposed_share_of_trades: Option<f64>,
    /// Exposed P/L ÷ net P/L.
    pub exposed_share_of_net: Option<f64>,
    /// Net P/L with every trade.
    pub net_baseline: f64,
    /// Net P/L without the exposed trades.
    pub net_removed: f64,
    /// Profit factor with every trade.
    pub profit_factor_baseline: Option<f64>,
    /// Profit factor without the exposed trades.
    pub profit_factor_removed: Option<f64>,
    /// Sharpe ratio with every trade.
    pub sharpe_baseline: Option<f64>,
    /// Sharpe ratio without the exposed trades.
    pub sharpe_removed: Option<f64>,
    /// Maximum drawdown with every trade.
    pub max_drawdown_baseline: Option<f64>,
    /// Maximum drawdown without the exposed trades.
    pub max_drawdown_removed: Option<f64>,
    /// Tail concentration ratio with every trade.
    pub tcr_baseline: Option<f64>,
    /// Tail concentration ratio without the exposed trades.
    pub tcr_removed: Option<f64>,
    /// The ranking figure in each scenario.
    pub by_baseline: Option<f64>,
    /// The ranking figure without the exposed trades.
    pub by_removed: Option<f64>,
    /// 1 = best; runs whose figure is undefined rank last.
    pub rank_baseline: usize,
    /// Rank without the exposed trades.
    pub rank_removed: usize,
    /// rank_baseline − rank_removed: positive means the run moved up.
    pub rank_shift: i64,
    /// In the top k (the distortion's k) with every trade.
    pub in_top_baseline: bool,
    /// In the top k without the exposed trades.
    pub in_top_removed: bool,
    /// The ranking figure in the stressed scenario (`--stress`; absent
    /// without it).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub by_stressed: Option<f64>,
    /// Rank in the stressed scenario (`--stress`; absent without it).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub rank_stressed: Option<usize>,
    /// Placebo p-value of the exposed share (when asked for).
    pub placebo_p: Option<f64>,
    /// The ranking figure after removing, instead of the exposed trades, as
    /// many randomly chosen ones: one value per draw (the distortion
    /// reference; empty when not asked for).
    #[serde(skip)]
    pub by_random_removed: Vec<Option<f64>>,
    /// What the run's tail figures were measured on (stated once per report).
    #[serde(skip)]
    pub tcr_basis: scenarios::TailBasis,
}

/// Computes one row per run (in run order), then ranks them.
#[allow(clippy::too_many_arguments)]
pub fn rank(
    trades: &Trades,
    releases: &[Release],
    windows: &[UsedWindow],
    currencies: &[Vec<String>],
    settings: &AnalysisSettings,
    by: RankBy,
    draws: RankDraws,
    progress: &(dyn Fn() + Sync),
) -> Result<Vec<RunRow>, scenarios::ScenarioError> {
    let placebo = draws.placebo;
    let engine = Engine::from_windows(windows, settings.exposure_rule, releases.len());
    // Each run's trades in close order, so that every per-run sum runs in
    // an order that does not depend on the input's row order.
    let mut order: Vec<u32> = (0..trades.len() as u32).collect();
    scenarios::close_order(&mut order, &trades.opened, &trades.closed);
    let by_run = if trades.runs.is_empty() {
        vec![order]
    } else {
        split_by_run(&order, trades)
    };
    let rows_and_flags = by_run
        .par_iter()
        .enumerate()
        .map(|(r, idx)| {
            let row = run_row(trades, idx, r, &engine, currencies, settings, by).and_then(
                |(mut row, flags)| {
                    row.by_random_removed = random_removal(
                        trades,
                        idx,
                        &flags,
                        &row.run,
                        settings,
                        by,
                        draws.random_removal,
                    )?;
                    Ok((row, flags))
                },
            );
            progress();
            row
        })
        .collect::<Result<Vec<_>, _>>()?;
    let (mut rows, flags): (Vec<RunRow>, Vec<Vec<bool>>) = rows_and_flags.into_iter().unzip();
    if placebo.n > 0 {
        // Every run against the same placebo calendars (drawn from the
        // seed alone): each shift is moved and marked once for all runs.
        let groups: Vec<evidence::PlaceboGroup> = by_run
            .iter()
            .zip(&flags)
            .map(|(idx, f)| evidence::PlaceboGroup {
                trades: Some(idx),
                observed_exposed: f,
            })
            .collect();
        let results = evidence::placebo_groups(
            trades,
            releases,
            windows,
            currencies,
            settings.exposure_rule,
            &groups,
            placebo,
            evidence::Marking::Auto,
            &|| {},
        );
        for (row, res) in rows.iter_mut().zip(results) {
            row.placebo_p = res.p_share;
        }
    }
    assign_ranks(&mut rows, by);
    Ok(rows)
}

/// The draws `rank` makes besides the rows: placebo calendars per run, and
/// random removals (the distortion reference).
#[derive(Debug, Clone, Copy, Default)]
pub struct RankDraws {
    /// Placebo calendars per run (0 = off).
    pub placebo: PlaceboSettings,
    /// Random removals (0 draws = off).
    pub random_removal: RandomRemovalSettings,
}

/// Draws of the distortion reference.
#[derive(Debug, Clone, Copy, Default)]
pub struct RandomRemovalSettings {
    /// Draws (0 = off).
    pub draws: usize,
    /// Seed; each run's stream is named by the run, so the draws do not
    /// depend on which other runs are ranked beside it.
    pub seed: u64,
}

/// Salt of the random-removal streams, so that they never coincide with
/// the placebo or bootstrap streams of the same seed.
const RANDOM_REMOVAL_SALT: u64 = 0x5eed_0fd1_570a_7e00;

/// One run's ranking figure after each draw: as many of its trades as are
/// exposed, chosen uniformly at random without replacement, removed in
/// place of the exposed ones (docs/method.md §10). The same path as the
/// removed scenario, with the drawn trades as the "exposed" set.
fn random_removal(
    all: &Trades,
    idx: &[u32],
    flags: &[bool],
    run: &str,
    settings: &AnalysisSettings,
    by: RankBy,
    draws: RandomRemovalSettings,
) -> Result<Vec<Option<f64>>, scenarios::ScenarioError> {
    random_removal_with(all, idx, flags, run, settings, by, draws, true)
}

/// [`random_removal`]; `fast`: take net, profit factor, Sharpe and max
/// drawdown from the weighted pass (`evidence::RemovedPass`, bit for bit
/// the removed scenario's figures) where it applies, else build the
/// scenarios each draw.
#[allow(clippy::too_many_arguments)]
fn random_removal_with(
    all: &Trades,
    idx: &[u32],
    flags: &[bool],
    run: &str,
    settings: &AnalysisSettings,
    by: RankBy,
    draws: RandomRemovalSettings,
    fast: bool,
) -> Result<Vec<Option<f64>>, scenarios::ScenarioError> {
    use rand::SeedableRng;
    if draws.draws == 0 {
        return Ok(Vec::new());
    }
    let t = crate::analysis::run::subset(all, idx);
    let exposed = flags.iter().filter(|&&f| f).count();
    let ctx = Context {
        span: (0, 0),
        report_zone: settings.report_tz,
        initial_equity: None,
        tcr_p: settings.tcr_p,
    };
    // The figure's slot in the pass's [net, profit factor, Sharpe, max
    // drawdown, TCR], for the figures it computes.
    let slot = match by {
        RankBy::Net => Some(0),
        RankBy::ProfitFactor => Some(1),
        RankBy::Sharpe => Some(2),
        RankBy::MaxDrawdown => Some(3),
        _ => None,
    };
    let all_idx: Vec<u32> = (0..t.len() as u32).collect();
    let pass = slot.filter(|_| fast).and_then(|_| {
        // The context run_result gives the run's scenarios.
        let run_ctx = Context {
            span: crate::analysis::run::span_of(&all_idx, &t, ctx.span),
            initial_equity: settings.scenario.initial_equity,
            ..ctx
        };
        evidence::RemovedPass::new(&t, &settings.scenario, &run_ctx)
    });
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(crate::import::trades::run_seed(
        draws.seed ^ RANDOM_REMOVAL_SALT,
        run,
    ));
    // Where the pass applies, the drawn trades are flagged by its position
    // (the same trades: each index's position, looked up once).
    let position: Vec<u32> = pass
        .as_ref()
        .map_or_else(Vec::new, |p| crate::import::trades::places_in(p.order()));
    let mut drawn = vec![false; t.len()];
    let mut out = Vec::with_capacity(draws.draws);
    for _ in 0..draws.draws {
        drawn.fill(false);
        let sample = rand::seq::index::sample(&mut rng, t.len(), exposed);
        let value = match (&pass, slot) {
            (Some(p), Some(k)) => {
                for i in sample {
                    drawn[position[i] as usize] = true;
                }
                p.figure_at(&drawn, k)
            }
            _ => {
                for i in sample {
                    drawn[i] = true;
                }
                let is_drawn = |i: usize| drawn[i];
                let result = run_result(
                    run.to_string(),
                    all_idx.clone(),
                    &t,
                    &is_drawn,
                    &ctx,
                    settings,
                )?;
                by.value(&result.scenarios.removed)
            }
        };
        out.push(value);
    }
    Ok(out)
}

/// The tail shape of each run named in `runs` (in that order): its trades'
/// |P/L| — or |return| on the return basis, the values the tail
/// concentration is measured on — sorted largest first and divided by
/// their mean, so that runs of different size compare (docs/method.md §6).
/// A name that is no run is an error naming it.
pub fn tail_shapes(
    trades: &Trades,
    runs: &[String],
    settings: &AnalysisSettings,
) -> Result<Vec<(String, Vec<f64>)>, TailShapeError> {
    let mut order: Vec<u32> = (0..trades.len() as u32).collect();
    scenarios::close_order(&mut order, &trades.opened, &trades.closed);
    let by_run = split_by_run(&order, trades);
    runs.iter()
        .map(|name| {
            let r = trades
                .runs
                .iter()
                .position(|n| n == name)
                .ok_or_else(|| TailShapeError::NoRun(name.clone()))?;
            let sc = scenarios::build_in_order(
                by_run[r].clone(),
                trades,
                &|_| false,
                &settings.scenario,
            )?;
            let mut v: Vec<f64> = sc
                .baseline
                .view()
                .tail_values()
                .iter()
                .map(|x| x.abs())
                .collect();
            v.sort_by(|a, b| b.total_cmp(a));
            let mean = v.iter().sum::<f64>() / v.len().max(1) as f64;
            if mean > 0.0 {
                v.iter_mut().for_each(|x| *x /= mean);
            }
            Ok((name.clone(), v))
        })
        .collect()
}

/// Why the tail shapes could not be drawn.
#[derive(Debug, thiserror::Error)]
pub enum TailShapeError {
    /// `--curves` names a run the trades do not have.
    #[error("--curves: no run '{0}' in the trades")]
    NoRun(String),
    /// The scenarios could not be built.
    #[error(transparent)]
    Scenario(#[from] scenarios::ScenarioError),
}

/// Marks each row's membership of the two top-`k` sets (by its ranks).
pub fn mark_top(rows: &mut [RunRow], k: usize) {
    for r in rows {
        r.in_top_baseline = r.rank_baseline <= k;
        r.in_top_removed = r.rank_removed <= k;
    }
}

/// The distortion of the ranking `rows` (as [`rank`] returned them, before
/// any filter): ρ, τ-b, the top-`top_k` overlap and, when the rows carry
/// random removals, their reference.
pub fn distortion(
    rows: &[RunRow],
    by: RankBy,
    top_k: usize,
    seed: u64,
) -> crate::analysis::distortion::Distortion {
    let names: Vec<&str> = rows.iter().map(|r| r.run.as_str()).collect();
    let b: Vec<Option<f64>> = rows.iter().map(|r| r.by_baseline).collect();
    let rm: Vec<Option<f64>> = rows.iter().map(|r| r.by_removed).collect();
    let rb: Vec<usize> = rows.iter().map(|r| r.rank_baseline).collect();
    let rr: Vec<usize> = rows.iter().map(|r| r.rank_removed).collect();
    let n = rows
        .iter()
        .map(|r| r.by_random_removed.len())
        .min()
        .unwrap_or(0);
    let random: Vec<Vec<Option<f64>>> = (0..n)
        .map(|d| rows.iter().map(|r| r.by_random_removed[d]).collect())
        .collect();
    crate::analysis::distortion::distortion(by, &names, &b, &rm, (&rb, &rr), top_k, &random, seed)
}

/// One run's row (without its placebo p-value) and its trades' exposure
/// flags in `idx` order.
fn run_row(
    all: &Trades,
    idx: &[u32],
    r: usize,
    engine: &Engine,
    currencies: &[Vec<String>],
    settings: &AnalysisSettings,
    by: RankBy,
) -> Result<(RunRow, Vec<bool>), scenarios::ScenarioError> {
    let t = crate::analysis::run::subset(all, idx);
    let exp = engine.run_matches(&t.opened, &t.closed, &t.instrument, currencies);
    let flags: Vec<bool> = exp.k.iter().map(|&k| k > 0).collect();
    drop(exp);
    let name = all.runs.get(r).cloned().unwrap_or_else(|| "all".into());
    // The subset is in close order already (picked from the overall close
    // order), so its own order is 0..n.
    let ctx = Context {
        span: (0, 0),
        report_zone: settings.report_tz,
        initial_equity: None,
        tcr_p: settings.tcr_p,
    };
    let is_exposed = |i: usize| flags[i];
    let result = run_result(
        name,
        (0..t.len() as u32).collect(),
        &t,
        &is_exposed,
        &ctx,
        settings,
    )?;
    let (b, rm) = (&result.scenarios.baseline, &result.scenarios.removed);
    let exposed_pnl = result.exposed_pnl;
    let name = result.run.clone();
    let row = RunRow {
        run: name,
        trades: t.len(),
        exposed_trades: result.exposed_trades,
        exposed_pnl,
        exposed_share_of_trades: (!t.is_empty())
            .then(|| result.exposed_trades as f64 / t.len() as f64),
        exposed_share_of_net: metrics::share_of_net(
            exposed_pnl,
            b.net,
            b.gross_profit - b.gross_loss,
        ),
        net_baseline: b.net,
        net_removed: rm.net,
        profit_factor_baseline: b.profit_factor,
        profit_factor_removed: rm.profit_factor,
        sharpe_baseline: b.sharpe,
        sharpe_removed: rm.sharpe,
        max_drawdown_baseline: b.max_drawdown,
        max_drawdown_removed: rm.max_drawdown,
        tcr_baseline: b.tcr,
        tcr_removed: rm.tcr,
        by_baseline: by.value(b),
        by_removed: by.value(rm),
        rank_baseline: 0,
        rank_removed: 0,
        rank_shift: 0,
        in_top_baseline: false,
        in_top_removed: false,
        by_stressed: result.scenarios.stressed.as_ref().and_then(|m| by.value(m)),
        rank_stressed: None,
        placebo_p: None,
        by_random_removed: Vec::new(),
        tcr_basis: result.tail_basis,
    };
    Ok((row, flags))
}

/// Ranks 1..n by the figure; ties and undefined values (ranked last) in
/// the natural order of run names ([`crate::import::trades::run_order`]).
/// Public so that runs figured apart (partitions of a distributed run) are
/// ranked together by the same rule.
pub fn ranks(values: &[Option<f64>], names: &[&str], higher_is_better: bool) -> Vec<usize> {
    let mut idx: Vec<usize> = (0..values.len()).collect();
    let by_name = |a: usize, b: usize| crate::import::trades::run_order(names[a], names[b]);
    idx.sort_by(|&a, &b| match (values[a], values[b]) {
        (Some(x), Some(y)) => {
            let o = if higher_is_better {
                y.total_cmp(&x)
            } else {
                x.total_cmp(&y)
            };
            o.then_with(|| by_name(a, b))
        }
        (Some(_), None) => std::cmp::Ordering::Less,
        (None, Some(_)) => std::cmp::Ordering::Greater,
        (None, None) => by_name(a, b),
    });
    let mut out = vec![0; values.len()];
    for (pos, &i) in idx.iter().enumerate() {
        out[i] = pos + 1;
    }
    out
}

fn assign_ranks(rows: &mut [RunRow], by: RankBy) {
    let b: Vec<Option<f64>> = rows.iter().map(|r| r.by_baseline).collect();
    let r: Vec<Option<f64>> = rows.iter().map(|r| r.by_removed).collect();
    let names: Vec<&str> = rows.iter().map(|r| r.run.as_str()).collect();
    let (rb, rr) = (
        ranks(&b, &names, by.higher_is_better()),
        ranks(&r, &names, by.higher_is_better()),
    );
    // The stressed scenario holds every trade, so each run has one when
    // any has (`--stress`).
    let stressed = rows.iter().any(|r| r.by_stressed.is_some()).then(|| {
        let s: Vec<Option<f64>> = rows.iter().map(|r| r.by_stressed).collect();
        ranks(&s, &names, by.higher_is_better())
    });
    for (i, row) in rows.iter_mut().enumerate() {
        row.rank_baseline = rb[i];
        row.rank_removed = rr[i];
        row.rank_shift = rb[i] as i64 - rr[i] as i64;
        row.rank_stressed = stressed.as_ref().map(|s| s[i]);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The weighted pass and the built scenarios give the same draws, bit
    /// for bit, for every figure the pass computes.
    #[test]
    fn random_removal_fast_path_equals_the_scenarios() {
        let n = 300;
        let day = 86_400_000i64;
        let mut t = Trades::default();
        for i in 0..n {
            let open = 1_700_000_000_000 + (i as i64) * day / 3 + (i as i64 % 7) * 3_600_000;
            t.opened.push(open);
            t.closed.push(open + 600_000 * (1 + i as i64 % 5));
            t.instrument.push(0);
            t.pnl
                .push(((i * 37 % 101) as f64 - 48.0) * if i % 17 == 0 { 9.0 } else { 1.0 });
            t.run.push(0);
        }
        t.instruments = vec!["X".into()];
        let flags: Vec<bool> = (0..n).map(|i| i % 9 == 0).collect();
        let idx: Vec<u32> = (0..n as u32).collect();
        let settings = AnalysisSettings::default();
        let draws = RandomRemovalSettings { draws: 25, seed: 3 };
        for by in [
            RankBy::Net,
            RankBy::ProfitFactor,
            RankBy::Sharpe,
            RankBy::MaxDrawdown,
        ] {
            let fast =
                random_removal_with(&t, &idx, &flags, "r", &settings, by, draws, true).unwrap();
            let slow =
                random_removal_with(&t, &idx, &flags, "r", &settings, by, draws, false).unwrap();
            assert_eq!(fast.len(), 25);
            assert!(fast.iter().all(|v| v.is_some()), "{by:?}");
            let bits =
                |v: &[Option<f64>]| v.iter().map(|x| x.map(f64::to_bits)).collect::<Vec<_>>();
            assert_eq!(bits(&fast), bits(&slow), "{by:?}");
        }
    }

    /// A run's tail shape: |P/L| largest first over its mean (so the curve
    /// averages 1); an unknown run is named in the error.
    #[test]
    fn tail_shapes_scale_by_the_mean() {
        let mut t = Trades::default();
        for (i, p) in [4.0, -1.0, 2.0, -1.0].iter().enumerate() {
            t.opened.push(i as i64 * 1000);
            t.closed.push(i as i64 * 1000 + 500);
            t.instrument.push(0);
            t.pnl.push(*p);
            t.run.push(0);
        }
        t.instruments = vec!["X".into()];
        t.runs = vec!["a".into()];
        let settings = AnalysisSettings::default();
        let shapes = tail_shapes(&t, &["a".to_string()], &settings).unwrap();
        // Mean |P/L| = 8 / 4 = 2.
        assert_eq!(shapes, vec![("a".to_string(), vec![2.0, 1.0, 0.5, 0.5])]);
        let e = tail_shapes(&t, &["b".to_string()], &settings).unwrap_err();
        assert_eq!(e.to_string(), "--curves: no run 'b' in the trades");
    }

    #[test]
    fn ranking_orders_and_puts_undefined_last() {
        let names = ["a", "b", "c", "d"];
        assert_eq!(
            ranks(&[Some(1.0), None, Some(3.0), Some(2.0)], &names, true),
            vec![3, 4, 1, 2]
        );
        assert_eq!(
            ranks(&[Some(1.0), None, Some(3.0), Some(2.0)], &names, false),
            vec![1, 4, 3, 2]
        );
        // Ties by the runs' natural name order, not by their input position.
        assert_eq!(
            ranks(&[Some(1.0), Some(1.0)], &["p10", "p2"], true),
            vec![2, 1]
        );
        assert_eq!(
            ranks(
                &[Some(1.0), Some(1.0), None, None],
                &["10", "9", "b", "a"],
                true
            ),
            vec![2, 1, 4, 3]
        );
    }
}
