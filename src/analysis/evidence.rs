//! Is the release effect real? (docs/method.md §6–§7): the Hill tail index of |P/L|,
//! placebo calendars, and bootstrap intervals of removed − baseline.
//!
//! Everything random is seeded (ChaCha8) and reproducible; placebo and
//! bootstrap replicates run in parallel (rayon) and report progress through
//! a callback so the engine never touches the terminal.

use crate::analysis::metrics::{self, Context, quantile_type7};
use crate::analysis::scenarios::{self, ScenarioSettings, TradeView};
use crate::engine::exposure::{Engine, ExposureRule, UsedWindow};
use crate::import::calendar::{Release, normalise_title};
use crate::import::trades::Trades;
use crate::import::zones::DAY_MS;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use serde::Serialize;
use std::collections::{BTreeMap, HashMap};

/// Hill (1975) tail-index estimate of a sample's upper tail.
#[derive(Debug, Clone, Copy, Serialize, PartialEq)]
pub struct HillEstimate {
    /// α̂ = 1 / H_k.
    pub alpha: f64,
    /// Number of upper order statistics used.
    pub k: usize,
    /// Sample size.
    pub n: usize,
}

/// Hill, "A Simple General Approach to Inference About the Tail of a
/// Distribution", Ann. Statist. 3(5), 1975: with descending order
/// statistics X(1) ≥ … ≥ X(n), H_k = (1/k) Σ_{i≤k} ln X(i) − ln X(k+1) and
/// α̂ = 1/H_k. The threshold is X(k+1) (REFERENCES.md §5.1 notes some
/// packages use X(k)). Values ≤ 0 are left out; `None` when fewer than
/// k + 1 positive values remain or H_k is 0.
pub fn hill(values: &[f64], k: usize) -> Option<HillEstimate> {
    hill_owned(
        values
            .iter()
            .copied()
            .filter(|v| *v > 0.0 && v.is_finite())
            .collect(),
        k,
    )
}

/// [`hill`] of |pnl| without copying the data: only the k + 1 largest are
/// kept, and the count of positive values decides whether there are enough.
pub fn hill_of_abs(pnl: &[f64], k: usize) -> Option<HillEstimate> {
    let usable = || {
        pnl.iter()
            .map(|v| v.abs())
            .filter(|v| *v > 0.0 && v.is_finite())
    };
    let n = usable().count();
    if k == 0 || n <= k {
        return None;
    }
    // More than k positive values: the k + 1 largest |pnl| are all positive.
    hill_of_top(&crate::analysis::metrics::top_abs_of(pnl, k + 1), k, n)
}

/// H_k and α̂ from the k + 1 largest values, largest first (the top k summed
/// in that order, whatever the input order); `n` values in all.
fn hill_of_top(x: &[f64], k: usize, n: usize) -> Option<HillEstimate> {
    let h = x[..k].iter().map(|v| v.ln()).sum::<f64>() / k as f64 - x[k].ln();
    (h > 0.0).then(|| HillEstimate {
        alpha: 1.0 / h,
        k,
        n,
    })
}

fn hill_owned(mut x: Vec<f64>, k: usize) -> Option<HillEstimate> {
    if k == 0 || x.len() <= k {
        return None;
    }
    // Only the k + 1 largest matter: select them, then order the top k
    // (a sum in a fixed order, whatever the input order).
    x.select_nth_unstable_by(k, |a, b| b.total_cmp(a));
    x[..k].sort_unstable_by(|a, b| b.total_cmp(a));
    hill_of_top(&x[..=k], k, x.len())
}

/// The default k: ⌊√n⌋ (the convention of the `arch` package's estimator,
/// REFERENCES.md §5.1), at least 1.
pub fn default_hill_k(n: usize) -> usize {
    ((n as f64).sqrt() as usize).max(1)
}

/// Placebo settings.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct PlaceboSettings {
    /// Number of placebo calendars (0 = off).
    pub n: usize,
    /// Seed of the placebo shifts.
    pub seed: u64,
}

/// Result of the placebo test (docs/method.md §7).
#[derive(Debug, Clone, Serialize)]
pub struct PlaceboResult {
    /// Placebo calendars drawn.
    pub placebos: usize,
    /// Seed of the shifts.
    pub seed: u64,
    /// Observed exposed P/L ÷ net P/L, and its p-value.
    pub observed_share: Option<f64>,
    /// p-value of the share: (1 + placebos at least as high) ÷ (N + 1), see [`placebo_p`].
    pub p_share: Option<f64>,
    /// Observed mean exposed P/L − mean unexposed P/L, and its p-value.
    pub observed_mean_diff: Option<f64>,
    /// p-value of the mean difference, by the same rule.
    pub p_mean_diff: Option<f64>,
    /// Shifted releases dropped because they landed within a day of a real
    /// release of the same series, summed over placebos.
    pub releases_dropped: usize,
    /// The rule, spelled out for reports.
    pub method: &'static str,
}

/// How the placebo calendars are made, in words (shown with the result).
pub const PLACEBO_METHOD: &str = "every used release moved by the same random whole number of weekdays (time of day kept, wrapping within the calendar's weekday span); a moved release within 1 day of a real release of the same series is dropped; p = (1 + #placebo >= observed) / (N + 1)";

/// The two statistics of docs/method.md §7 for a set of exposure flags.
pub fn effect_statistics(pnl: &[f64], exposed: &[bool]) -> (Option<f64>, Option<f64>) {
    let (mut net, mut e_sum, mut e_n, mut u_sum, mut u_n) = (0.0, 0.0, 0usize, 0.0, 0usize);
    for (&p, &x) in pnl.iter().zip(exposed) {
        net += p;
        if x {
            e_sum += p;
            e_n += 1;
        } else {
            u_sum += p;
            u_n += 1;
        }
    }
    let share = (net != 0.0).then(|| e_sum / net);
    let diff = (e_n > 0 && u_n > 0).then(|| e_sum / e_n as f64 - u_sum / u_n as f64);
    (share, diff)
}

/// Placebo p-value: (1 + #(placebo ≥ observed)) ÷ (N + 1), Phipson & Smyth
/// (2010); `None` when the observed statistic is undefined. A placebo whose
/// statistic is undefined counts as not ≥.
pub fn placebo_p(observed: Option<f64>, placebo: &[Option<f64>]) -> Option<f64> {
    let obs = observed?;
    let ge = placebo
        .iter()
        .filter(|v| v.is_some_and(|v| v >= obs - 1e-12 * obs.abs()))
        .count();
    Some((1 + ge) as f64 / (placebo.len() + 1) as f64)
}

/// Runs N placebo calendars.
#[allow(clippy::too_many_arguments)]
pub fn placebo(
    trades: &Trades,
    releases: &[Release],
    windows: &[UsedWindow],
    currencies: &[Vec<String>],
    rule: ExposureRule,
    observed_exposed: &[bool],
    s: PlaceboSettings,
    progress: &(dyn Fn() + Sync),
) -> PlaceboResult {
    let (observed_share, observed_mean_diff) = effect_statistics(&trades.pnl, observed_exposed);
    let mut result = PlaceboResult {
        placebos: s.n,
        seed: s.seed,
        observed_share,
        p_share: None,
        observed_mean_diff,
        p_mean_diff: None,
        releases_dropped: 0,
        method: PLACEBO_METHOD,
    };
    if s.n == 0 || windows.is_empty() {
        return result;
    }
    // Series: currency + normalised title; real instants sorted per series.
    let series_of = |r: &Release| (r.currency.clone(), normalise_title(&r.title));
    let mut series: HashMap<(String, String), Vec<i64>> = HashMap::new();
    for r in releases {
        series.entry(series_of(r)).or_default().push(r.at);
    }
    for v in series.values_mut() {
        v.sort_unstable();
    }
    // Per window, once: its weekday number, time of day, and the sorted
    // real instants of its series (looked up here, not per placebo).
    let wd: Vec<(i64, i64)> = windows
        .iter()
        .map(|w| {
            let day = w.at.div_euclid(DAY_MS);
            (
                crate::import::zones::weekday_index(day),
                w.at - day * DAY_MS,
            )
        })
        .collect();
    let real_of: Vec<&[i64]> = windows
        .iter()
        .map(|w| series[&series_of(&releases[w.release as usize])].as_slice())
        .collect();
    let w0 = wd.iter().map(|x| x.0).min().expect("non-empty");
    let span = wd.iter().map(|x| x.0).max().expect("non-empty") - w0 + 1;
    let mut rng = ChaCha8Rng::seed_from_u64(s.seed);
    let shifts: Vec<i64> = (0..s.n)
        .map(|_| {
            if span > 1 {
                rng.random_range(1..span)
            } else {
                0
            }
        })
        .collect();
    let runs: Vec<(Option<f64>, Option<f64>, usize)> = shifts
        .par_iter()
        .map(|&d| {
            let mut moved = Vec::with_capacity(windows.len());
            let mut dropped = 0;
            for ((w, &(idx, tod)), real) in windows.iter().zip(&wd).zip(&real_of) {
                let new_idx = w0 + (idx - w0 + d).rem_euclid(span);
                let new_at = crate::import::zones::day_of_weekday_index(new_idx) * DAY_MS + tod;
                let p = real.partition_point(|&t| t < new_at - DAY_MS);
                if real.get(p).is_some_and(|&t| t <= new_at + DAY_MS) {
                    dropped += 1;
                    continue;
                }
                let delta = new_at - w.at;
                moved.push(UsedWindow {
                    start: w.start + delta,
                    end: w.end + delta,
                    at: new_at,
                    ..w.clone()
                });
            }
            let engine = Engine::from_windows(&moved, rule, releases.len());
            let exp = engine.run_matches(
                &trades.opened,
                &trades.closed,
                &trades.instrument,
                currencies,
            );
            let flags: Vec<bool> = exp.k.iter().map(|&k| k > 0).collect();
            let (a, b) = effect_statistics(&trades.pnl, &flags);
            progress();
            (a, b, dropped)
        })
        .collect();
    let shares: Vec<Option<f64>> = runs.iter().map(|r| r.0).collect();
    let diffs: Vec<Option<f64>> = runs.iter().map(|r| r.1).collect();
    result.p_share = placebo_p(observed_share, &shares);
    result.p_mean_diff = placebo_p(observed_mean_diff, &diffs);
    result.releases_dropped = runs.iter().map(|r| r.2).sum();
    result
}

/// Bootstrap settings.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct BootstrapSettings {
    /// Resamples (0 = off).
    pub n: usize,
    /// Seed of the resamples.
    pub seed: u64,
    /// Confidence level, e.g. 0.95.
    pub confidence: f64,
}

/// A percentile interval of removed − baseline.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Interval {
    /// removed − baseline on the data as given.
    pub observed: Option<f64>,
    /// Lower end of the interval.
    pub low: Option<f64>,
    /// Upper end of the interval.
    pub high: Option<f64>,
    /// Replicates where the change was defined.
    pub replicates: usize,
}

/// Result of the bootstrap (docs/method.md §7).
#[derive(Debug, Clone, Serialize)]
pub struct BootstrapResult {
    /// Resamples drawn.
    pub resamples: usize,
    /// Seed of the resamples.
    pub seed: u64,
    /// Confidence level of the intervals.
    pub confidence: f64,
    /// The method in words.
    pub method: &'static str,
    /// Figure → interval of its change removed − baseline.
    pub intervals: BTreeMap<&'static str, Interval>,
}

/// Of [`BOOTSTRAP_FIGURES`], those that follow one account's path through
/// time (left out when runs are alternative accounts).
pub const ACCOUNT_PATH_FIGURES: [&str; 2] = ["sharpe", "max_drawdown"];

/// The figures whose change is bootstrapped.
pub const BOOTSTRAP_FIGURES: [&str; 5] = ["net", "profit_factor", "sharpe", "max_drawdown", "tcr"];

fn figure(m: &metrics::Metrics, name: &str) -> Option<f64> {
    match name {
        "net" => Some(m.net),
        "profit_factor" => m.profit_factor,
        "sharpe" => m.sharpe,
        "max_drawdown" => m.max_drawdown,
        "tcr" => m.tcr,
        _ => None,
    }
}

/// removed − baseline of each figure for one set of trade indices (a
/// resample may repeat indices).
pub fn changes(
    idx: &[u32],
    trades: &Trades,
    exposed: &[bool],
    settings: &ScenarioSettings,
    ctx: &Context,
) -> [Option<f64>; 5] {
    let mut order = idx.to_vec();
    scenarios::close_order(&mut order, &trades.opened, &trades.closed);
    let is_exposed = |i: usize| exposed[i];
    let view = TradeView::of(&order, trades, &is_exposed);
    let Ok(sc) = scenarios::build(&view, settings) else {
        return [None; 5];
    };
    let ctx = Context {
        initial_equity: sc.initial_equity,
        ..*ctx
    };
    let m = |s: &scenarios::Series| {
        metrics::compute(&s.view().curve(&trades.opened, &trades.closed), &ctx)
    };
    let (b, r) = (m(&sc.baseline), m(&sc.removed));
    BOOTSTRAP_FIGURES.map(|f| match (figure(&b, f), figure(&r, f)) {
        (Some(x), Some(y)) => Some(y - x),
        _ => None,
    })
}

/// Percentile interval (numpy's linear method) of the defined replicates.
pub fn percentile_interval(
    replicates: &[Option<f64>],
    confidence: f64,
) -> (Option<f64>, Option<f64>, usize) {
    let mut v: Vec<f64> = replicates
        .iter()
        .flatten()
        .copied()
        .filter(|x| x.is_finite())
        .collect();
    v.sort_by(f64::total_cmp);
    let a = (1.0 - confidence) / 2.0;
    (quantile_type7(&v, a), quantile_type7(&v, 1.0 - a), v.len())
}

/// Resample `r` of a seeded bootstrap: n indices drawn with replacement
/// from ChaCha8 stream `r` of `seed`, so each resample is drawn on its own
/// (in any order, on any thread) and only the ones being evaluated are held
/// in memory — 2 000 resamples of 10 million trades would otherwise take
/// 80 GB.
pub fn resample(n: usize, seed: u64, r: usize) -> Vec<u32> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(r as u64);
    (0..n).map(|_| rng.random_range(0..n as u32)).collect()
}

/// Bootstrap intervals over `count` resamples, resample `r` given by
/// `draw(r)` (e.g. [`resample`], or index sets drawn elsewhere).
#[allow(clippy::too_many_arguments)]
pub fn bootstrap_drawn(
    count: usize,
    draw: &(dyn Fn(usize) -> Vec<u32> + Sync),
    trades: &Trades,
    exposed: &[bool],
    settings: &ScenarioSettings,
    ctx: &Context,
    confidence: f64,
    progress: &(dyn Fn() + Sync),
) -> BTreeMap<&'static str, Interval> {
    let all: Vec<u32> = (0..trades.len() as u32).collect();
    let observed = changes(&all, trades, exposed, settings, ctx);
    let reps: Vec<[Option<f64>; 5]> = (0..count)
        .into_par_iter()
        .map(|r| {
            let c = changes(&draw(r), trades, exposed, settings, ctx);
            progress();
            c
        })
        .collect();
    BOOTSTRAP_FIGURES
        .iter()
        .enumerate()
        .map(|(f, &name)| {
            let col: Vec<Option<f64>> = reps.iter().map(|r| r[f]).collect();
            let (low, high, replicates) = percentile_interval(&col, confidence);
            (
                name,
                Interval {
                    observed: observed[f],
                    low,
                    high,
                    replicates,
                },
            )
        })
        .collect()
}

/// The bootstrap method in words (shown with the result).
pub const BOOTSTRAP_METHOD: &str = "trades resampled with replacement, keeping their exposure; percentile interval of removed - baseline (linear interpolation, numpy's default)";

#[cfg(test)]
mod tests {
    use super::*;
    use chrono::{Datelike, Days, NaiveDate, Weekday};

    /// REFERENCES.md §5.1 check values: [8,4,2,1], k=3 → H = 2 ln 2,
    /// α̂ = 0.7213475204444817; ideal Pareto quantiles x(i) = (n/i)^(1/α),
    /// α = 2, n = 1000, k = 10 → H = 0.44372700774540963.
    #[test]
    fn hill_check_values() {
        let h = hill(&[8.0, 4.0, 2.0, 1.0], 3).unwrap();
        assert!((h.alpha - 0.7213475204444817).abs() < 1e-12);
        let x: Vec<f64> = (1..=1000).map(|i| (1000.0 / i as f64).powf(0.5)).collect();
        let h = hill(&x, 10).unwrap();
        assert!((1.0 / h.alpha - 0.44372700774540963).abs() < 1e-12);
        let h = hill(&x, 100).unwrap();
        assert!((1.0 / h.alpha - 0.48886338064281).abs() < 1e-12);
        assert_eq!(hill(&[1.0, 2.0], 2), None);
    }

    /// Seeded Pareto samples x = (1 − U)^(−1/α), n = 100 000, k = 1 000:
    /// the estimator's asymptotic standard error is α/√k (Hill 1975;
    /// REFERENCES.md §5.1), 0.047 at α = 1.5 and 0.095 at α = 3. We allow
    /// four standard errors, so a correct estimator fails this about once in
    /// 16 000 seeds — and the seed is fixed.
    #[test]
    fn hill_recovers_pareto_alpha() {
        for (alpha, seed) in [(1.5, 11u64), (3.0, 12u64)] {
            let mut rng = ChaCha8Rng::seed_from_u64(seed);
            let x: Vec<f64> = (0..100_000)
                .map(|_| (1.0 - rng.random::<f64>()).powf(-1.0 / alpha))
                .collect();
            let k = 1000;
            let est = hill(&x, k).unwrap();
            let se = alpha / (k as f64).sqrt();
            assert!(
                (est.alpha - alpha).abs() < 4.0 * se,
                "alpha {alpha}: estimated {}",
                est.alpha
            );
        }
    }

    #[test]
    fn weekday_arithmetic_round_trips() {
        use crate::import::zones::{day_of_weekday_index, weekday_index};
        let days = |d: NaiveDate| (d - NaiveDate::from_ymd_opt(1970, 1, 1).unwrap()).num_days();
        let fri = days(NaiveDate::from_ymd_opt(2024, 3, 8).unwrap());
        let w = weekday_index(fri);
        assert_eq!(day_of_weekday_index(w), fri);
        assert_eq!(
            day_of_weekday_index(w + 1),
            days(NaiveDate::from_ymd_opt(2024, 3, 11).unwrap())
        );
        assert_eq!(weekday_index(fri + 1), w + 1, "Saturday counts as Monday");
        for d in 0..3000 {
            let date = NaiveDate::from_ymd_opt(2018, 1, 1).unwrap() + Days::new(d);
            if !matches!(date.weekday(), Weekday::Sat | Weekday::Sun) {
                assert_eq!(day_of_weekday_index(weekday_index(days(date))), days(date));
            }
        }
    }

    #[test]
    fn placebo_p_value_counts_ties_and_never_zero() {
        assert_eq!(
            placebo_p(Some(0.5), &[Some(0.1), Some(0.5), Some(0.7), None]),
            Some(3.0 / 5.0)
        );
        assert_eq!(placebo_p(Some(9.0), &[Some(0.1); 99]), Some(0.01));
        assert_eq!(placebo_p(None, &[Some(0.1)]), None);
    }
}

/// How many replicates each chance test draws.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ChanceSettings {
    /// Placebo calendars for the p-value (0: no placebo test).
    pub placebo: usize,
    /// Bootstrap resamples for the intervals (0: no intervals).
    pub bootstrap: usize,
    /// Seed of the placebo shifts and the bootstrap resamples.
    pub seed: u64,
}

/// Where a long test reports how far it is: the command line draws a bar,
/// a library caller may pass [`NoProgress`].
pub trait Progress: Sync {
    /// A test of `total` steps named `what` starts.
    fn begin(&self, what: &'static str, total: u64);
    /// One step of the current test is done (called from any thread).
    fn step(&self);
    /// The current test is over.
    fn end(&self);
}

/// Progress reported nowhere.
pub struct NoProgress;

impl Progress for NoProgress {
    fn begin(&self, _: &'static str, _: u64) {}
    fn step(&self) {}
    fn end(&self) {}
}

/// The chance tests of `analyze`: the placebo p-value and the bootstrap
/// intervals, each when asked for. `initial_equity`: the analysis' own
/// (compounding sizing). With runs read as alternatives the pooled trades
/// make no account path, so only the figures that are sums or shares keep
/// an interval.
#[allow(clippy::too_many_arguments)]
pub fn chance(
    trades: &Trades,
    releases: &[Release],
    currencies: &[crate::engine::relevance::InstrumentCurrencies],
    settings: &crate::analysis::run::AnalysisSettings,
    exposure: &crate::engine::exposure::Exposure,
    initial_equity: Option<f64>,
    c: ChanceSettings,
    progress: &dyn Progress,
) -> (Option<PlaceboResult>, Option<BootstrapResult>) {
    let flags: Vec<bool> = (0..trades.len()).map(|i| exposure.is_exposed(i)).collect();
    let placebo_result = (c.placebo > 0).then(|| {
        progress.begin("placebo", c.placebo as u64);
        let windows = crate::engine::exposure::used_windows(releases, &settings.windows);
        let cur: Vec<Vec<String>> = currencies.iter().map(|x| x.currencies.clone()).collect();
        let r = placebo(
            trades,
            releases,
            &windows,
            &cur,
            settings.exposure_rule,
            &flags,
            PlaceboSettings {
                n: c.placebo,
                seed: c.seed,
            },
            &|| progress.step(),
        );
        progress.end();
        r
    });
    let bootstrap = (c.bootstrap > 0).then(|| {
        progress.begin("bootstrap", c.bootstrap as u64);
        let ctx = Context {
            span: trades.span().unwrap_or((0, 0)),
            report_zone: settings.report_tz,
            initial_equity,
            tcr_p: settings.tcr_p,
        };
        let n = trades.len();
        let draw = |r: usize| resample(n, c.seed, r);
        let mut intervals = bootstrap_drawn(
            c.bootstrap,
            &draw,
            trades,
            &flags,
            &settings.scenario,
            &ctx,
            0.95,
            &|| progress.step(),
        );
        progress.end();
        if crate::analysis::run::AccountFigures::of(trades, settings.pool)
            == crate::analysis::run::AccountFigures::PerRun
        {
            intervals.retain(|name, _| !ACCOUNT_PATH_FIGURES.contains(name));
        }
        BootstrapResult {
            resamples: c.bootstrap,
            seed: c.seed,
            confidence: 0.95,
            method: BOOTSTRAP_METHOD,
            intervals,
        }
    });
    (placebo_result, bootstrap)
}
