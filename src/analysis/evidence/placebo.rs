//! Placebo calendars (docs/method.md §7): every used release moved by the same
//! random whole number of weekdays, and how often the moved calendar shows
//! an effect at least as large as the real one.

use crate::engine::exposure::{Engine, ExposureRule, UsedWindow};
use crate::import::calendar::{Release, normalise_title};
use crate::import::trades::Trades;
use crate::import::zones::DAY_MS;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use serde::Serialize;
use std::collections::HashMap;

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
