//! Placebo calendars (docs/method.md §7): every used release moved by the same
//! random whole number of weekdays, and how often the moved calendar shows
//! an effect at least as large as the real one.

use crate::engine::exposure::{ExposureRule, UsedWindow};
use crate::engine::shifted::{ShiftedCalendar, Slots, TradeIndex};
use crate::import::calendar::Release;
use crate::import::trades::Trades;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use serde::Serialize;
use std::collections::BTreeMap;

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

/// One set of trades tested against placebo calendars of its own seed:
/// all the trades (`analyze`) or one run's (`rank`).
#[derive(Debug, Clone, Copy)]
pub struct PlaceboGroup<'a> {
    /// The group's trades (input indices) in the order its sums run;
    /// `None`: every trade, in input order.
    pub trades: Option<&'a [u32]>,
    /// Observed exposure of the group's trades, in that order.
    pub observed_exposed: &'a [bool],
    /// Seed of the group's shifts.
    pub seed: u64,
}

/// Runs N placebo calendars over all the trades.
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
    let group = PlaceboGroup {
        trades: None,
        observed_exposed,
        seed: s.seed,
    };
    placebo_groups(
        trades,
        releases,
        windows,
        currencies,
        rule,
        &[group],
        s.n,
        progress,
    )
    .pop()
    .expect("one group")
}

/// Runs `n` placebo calendars for each group (its shifts drawn from its own
/// seed), one result per group. Each distinct shift is built and applied to
/// the trades once ([`ShiftedCalendar`], [`TradeIndex`]), then scored for
/// every group that drew it; `progress` ticks once per group and placebo.
#[allow(clippy::too_many_arguments)]
pub fn placebo_groups(
    trades: &Trades,
    releases: &[Release],
    windows: &[UsedWindow],
    currencies: &[Vec<String>],
    rule: ExposureRule,
    groups: &[PlaceboGroup],
    n: usize,
    progress: &(dyn Fn() + Sync),
) -> Vec<PlaceboResult> {
    let group_pnl = |g: &PlaceboGroup| -> Vec<f64> {
        match g.trades {
            Some(idx) => idx.iter().map(|&i| trades.pnl[i as usize]).collect(),
            None => trades.pnl.clone(),
        }
    };
    let mut results: Vec<PlaceboResult> = groups
        .iter()
        .map(|g| {
            let (observed_share, observed_mean_diff) =
                effect_statistics(&group_pnl(g), g.observed_exposed);
            PlaceboResult {
                placebos: n,
                seed: g.seed,
                observed_share,
                p_share: None,
                observed_mean_diff,
                p_mean_diff: None,
                releases_dropped: 0,
                method: PLACEBO_METHOD,
            }
        })
        .collect();
    if n == 0 || windows.is_empty() {
        return results;
    }
    let calendar = ShiftedCalendar::new(releases, windows, rule);
    let span = calendar.span();
    // Every group's shifts, then which (group, placebo) drew each shift.
    let mut drawn: BTreeMap<i64, Vec<(usize, usize)>> = BTreeMap::new();
    for (g, group) in groups.iter().enumerate() {
        let mut rng = ChaCha8Rng::seed_from_u64(group.seed);
        for j in 0..n {
            let d = if span > 1 {
                rng.random_range(1..span)
            } else {
                0
            };
            drawn.entry(d).or_default().push((g, j));
        }
    }
    let index = TradeIndex::new(
        calendar.currencies(),
        &trades.opened,
        &trades.closed,
        &trades.instrument,
        currencies,
        rule,
    );
    // Net P/L of each group, summed in the group's order.
    let nets: Vec<f64> = groups
        .iter()
        .map(|g| group_pnl(g).iter().fold(0.0, |net, p| net + p))
        .collect();
    let drawn: Vec<(i64, Vec<(usize, usize)>)> = drawn.into_iter().collect();
    // BATCH shifts at a time: marked one after the other, then scored
    // together, BATCH sums running side by side in one pass over a group.
    let zero = vec![0u64; index.words()];
    type Scored = Vec<(usize, usize, usize, Option<f64>, Option<f64>)>;
    let scored: Vec<Scored> = drawn
        .par_chunks(BATCH)
        .map_init(
            || (Slots::default(), vec![vec![0u64; index.words()]; BATCH]),
            |(moved, bits), chunk| {
                let mut dropped = [0usize; BATCH];
                let mut by_group: BTreeMap<usize, Vec<(usize, usize)>> = BTreeMap::new();
                for (k, (d, who)) in chunk.iter().enumerate() {
                    calendar.shift(*d, moved);
                    index.mark(moved, &mut bits[k]);
                    dropped[k] = moved.dropped;
                    for &(g, j) in who {
                        by_group.entry(g).or_default().push((k, j));
                    }
                }
                let mut out = Vec::new();
                for (g, pairs) in by_group {
                    for part in pairs.chunks(BATCH) {
                        let sets: [&[u64]; BATCH] = std::array::from_fn(|b| {
                            part.get(b)
                                .map_or(zero.as_slice(), |&(k, _)| bits[k].as_slice())
                        });
                        let stats =
                            flagged_statistics(&trades.pnl, groups[g].trades, sets, nets[g]);
                        for (&(k, j), (a, b)) in part.iter().zip(stats) {
                            out.push((g, j, dropped[k], a, b));
                            progress();
                        }
                    }
                }
                out
            },
        )
        .collect();
    let mut shares = vec![vec![None; n]; groups.len()];
    let mut diffs = vec![vec![None; n]; groups.len()];
    for (g, j, dropped, a, b) in scored.into_iter().flatten() {
        shares[g][j] = a;
        diffs[g][j] = b;
        results[g].releases_dropped += dropped;
    }
    for (g, r) in results.iter_mut().enumerate() {
        r.p_share = placebo_p(r.observed_share, &shares[g]);
        r.p_mean_diff = placebo_p(r.observed_mean_diff, &diffs[g]);
    }
    results
}

/// Shifts scored together (see [`flagged_statistics`]).
const BATCH: usize = 8;

/// [`effect_statistics`] of a group's trades under each of BATCH
/// [`TradeIndex::mark`] bit sets, `net` being the group's net P/L summed
/// in the group's order. Bit for bit the same sums: each total adds the
/// same values in the same order, the others' turn adding +0.0, which
/// leaves a total unchanged (a total that starts at +0.0 is never −0.0).
/// The BATCH totals are independent chains, so one pass runs them side by
/// side instead of waiting on each addition in turn.
fn flagged_statistics(
    pnl: &[f64],
    order: Option<&[u32]>,
    bits: [&[u64]; BATCH],
    net: f64,
) -> [(Option<f64>, Option<f64>); BATCH] {
    let mut e_sum = [0.0f64; BATCH];
    let mut u_sum = [0.0f64; BATCH];
    let mut e_n = [0usize; BATCH];
    // Adds p to the exposed or the unexposed total of each set: the mask
    // keeps p's bits or makes +0.0, so there is no branch to mispredict.
    #[inline(always)]
    fn add(
        e_sum: &mut [f64; BATCH],
        u_sum: &mut [f64; BATCH],
        words: [u64; BATCH],
        bit: usize,
        p: f64,
    ) {
        let p = p.to_bits();
        for b in 0..BATCH {
            let keep = 0u64.wrapping_sub(words[b] >> bit & 1);
            e_sum[b] += f64::from_bits(p & keep);
            u_sum[b] += f64::from_bits(p & !keep);
        }
    }
    let total = match order {
        Some(idx) => {
            for &i in idx {
                let i = i as usize;
                let words: [u64; BATCH] = std::array::from_fn(|b| bits[b][i / 64]);
                add(&mut e_sum, &mut u_sum, words, i % 64, pnl[i]);
                for b in 0..BATCH {
                    e_n[b] += (words[b] >> (i % 64) & 1) as usize;
                }
            }
            idx.len()
        }
        None => {
            for (w, chunk) in pnl.chunks(64).enumerate() {
                let words: [u64; BATCH] = std::array::from_fn(|b| bits[b][w]);
                for (bit, &p) in chunk.iter().enumerate() {
                    add(&mut e_sum, &mut u_sum, words, bit, p);
                }
                for b in 0..BATCH {
                    e_n[b] += words[b].count_ones() as usize;
                }
            }
            pnl.len()
        }
    };
    std::array::from_fn(|b| {
        let u_n = total - e_n[b];
        let share = (net != 0.0).then(|| e_sum[b] / net);
        let diff =
            (e_n[b] > 0 && u_n > 0).then(|| e_sum[b] / e_n[b] as f64 - u_sum[b] / u_n as f64);
        (share, diff)
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The bit-set statistics equal [`effect_statistics`] bit for bit, in
    /// input order and in a group's own order, with zeros of both signs.
    #[test]
    fn flagged_statistics_equal_effect_statistics_bitwise() {
        let mut x: u64 = 99;
        let mut next = || {
            x = x
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            x >> 11
        };
        let n: usize = 1000;
        let pnl: Vec<f64> = (0..n)
            .map(|i| match i % 9 {
                0 => 0.0,
                1 => -0.0,
                _ => (next() % 200_001) as f64 / 7.0 - 14_285.0,
            })
            .collect();
        let densities = [0, 3, 50, 100, 97, 20, 1, 70];
        assert!(BATCH <= densities.len());
        let flag_sets: Vec<Vec<bool>> = densities
            .iter()
            .map(|&d| (0..n).map(|_| next() % 100 < d).collect())
            .collect();
        let bit_sets: Vec<Vec<u64>> = flag_sets
            .iter()
            .map(|flags| {
                let mut bits = vec![0u64; n.div_ceil(64)];
                for (i, &f) in flags.iter().enumerate() {
                    bits[i / 64] |= (f as u64) << (i % 64);
                }
                bits
            })
            .collect();
        let sets: [&[u64]; BATCH] = std::array::from_fn(|b| bit_sets[b].as_slice());
        let net = pnl.iter().fold(0.0, |a, p| a + p);
        let all = flagged_statistics(&pnl, None, sets, net);
        let order: Vec<u32> = (0..n as u32).rev().filter(|i| i % 3 == 0).collect();
        let g_pnl: Vec<f64> = order.iter().map(|&i| pnl[i as usize]).collect();
        let g_net = g_pnl.iter().fold(0.0, |a, p| a + p);
        let group = flagged_statistics(&pnl, Some(&order), sets, g_net);
        for (b, (flags, density)) in flag_sets.iter().zip(densities).take(BATCH).enumerate() {
            let bitwise =
                |v: (Option<f64>, Option<f64>)| (v.0.map(f64::to_bits), v.1.map(f64::to_bits));
            assert_eq!(
                bitwise(all[b]),
                bitwise(effect_statistics(&pnl, flags)),
                "density {density}"
            );
            // A group: every third trade, backwards.
            let g_flags: Vec<bool> = order.iter().map(|&i| flags[i as usize]).collect();
            assert_eq!(
                bitwise(group[b]),
                bitwise(effect_statistics(&g_pnl, &g_flags)),
                "group, density {density}"
            );
        }
    }
}
