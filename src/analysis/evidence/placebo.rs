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
#[derive(Debug, Clone, Copy, Default, Serialize)]
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
/// seed), one result per group. Each distinct shift is moved once
/// ([`ShiftedCalendar`]) and marked once on the trades of each group that
/// drew it (a [`TradeIndex`] per group); `progress` ticks once per group
/// and placebo.
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
    // Each group's trades indexed on their own (a run's placebo marks
    // only its trades), numbered by open instant, with their P/L in that
    // order and its net summed in it.
    struct Group {
        index: TradeIndex,
        pnl: Vec<f64>,
        net: f64,
    }
    let prepared: Vec<Group> = groups
        .par_iter()
        .map(|g| {
            let in_group = group_pnl(g);
            let (index, order) = match g.trades {
                None => TradeIndex::new(
                    calendar.currencies(),
                    &trades.opened,
                    &trades.closed,
                    &trades.instrument,
                    currencies,
                    rule,
                )
                .in_open_order(&trades.opened),
                Some(idx) => {
                    let pick =
                        |v: &[i64]| -> Vec<i64> { idx.iter().map(|&i| v[i as usize]).collect() };
                    let opened = pick(&trades.opened);
                    let instrument: Vec<u32> =
                        idx.iter().map(|&i| trades.instrument[i as usize]).collect();
                    TradeIndex::new(
                        calendar.currencies(),
                        &opened,
                        &pick(&trades.closed),
                        &instrument,
                        currencies,
                        rule,
                    )
                    .in_open_order(&opened)
                }
            };
            let pnl: Vec<f64> = order.iter().map(|&k| in_group[k as usize]).collect();
            let net = pnl.iter().fold(0.0, |net, p| net + p);
            Group { index, pnl, net }
        })
        .collect();
    let drawn: Vec<(i64, Vec<(usize, usize)>)> = drawn.into_iter().collect();
    // BATCH shifts at a time: each moved once and marked on the trades of
    // every group that drew it; a group's marked shifts are scored BATCH at
    // a time, their sums running side by side in one pass over the group.
    type Scored = Vec<(usize, usize, usize, Option<f64>, Option<f64>)>;
    // A group's marked shifts waiting to be scored: (dropped, the
    // group's placebos that drew the shift, bits).
    type Pending = Vec<(usize, Vec<usize>, Vec<u64>)>;
    let score = |g: usize, pending: &mut Pending, pool: &mut Vec<Vec<u64>>, out: &mut Scored| {
        let group = &prepared[g];
        let zero = vec![0u64; group.index.words()];
        let sets: [&[u64]; BATCH] =
            std::array::from_fn(|b| pending.get(b).map_or(zero.as_slice(), |p| p.2.as_slice()));
        let stats = flagged_statistics(&group.pnl, sets, group.net);
        for ((dropped, js, bits), (a, b)) in pending.drain(..).zip(stats) {
            for j in js {
                out.push((g, j, dropped, a, b));
                progress();
            }
            pool.push(bits);
        }
    };
    let scored: Vec<Scored> = drawn
        .par_chunks(BATCH)
        .map_init(
            || (Slots::default(), Vec::<Vec<u64>>::new()),
            |(moved, pool), chunk| {
                let mut waiting: BTreeMap<usize, Pending> = BTreeMap::new();
                let mut out = Vec::new();
                for (d, who) in chunk {
                    calendar.shift(*d, moved);
                    // Marked once per group, however often it drew the shift
                    // (`who` lists a group's placebos together).
                    for same in who.chunk_by(|a, b| a.0 == b.0) {
                        let g = same[0].0;
                        let index = &prepared[g].index;
                        let mut bits = pool.pop().unwrap_or_default();
                        bits.resize(index.words(), 0);
                        index.mark(moved, &mut bits);
                        let js = same.iter().map(|&(_, j)| j).collect();
                        let pending = waiting.entry(g).or_default();
                        pending.push((moved.dropped, js, bits));
                        if pending.len() == BATCH {
                            score(g, pending, pool, &mut out);
                        }
                    }
                }
                for (g, mut pending) in waiting {
                    if !pending.is_empty() {
                        score(g, &mut pending, pool, &mut out);
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
/// side instead of waiting on each addition in turn. On x86-64 CPUs with
/// AVX2 the same loop is compiled for it (chosen at run time; the same
/// operations in the same order, so the same bits).
fn flagged_statistics(
    pnl: &[f64],
    bits: [&[u64]; BATCH],
    net: f64,
) -> [(Option<f64>, Option<f64>); BATCH] {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") {
        // SAFETY: the CPU has AVX2, just checked.
        return unsafe { flagged_statistics_avx2(pnl, bits, net) };
    }
    flagged_statistics_in(pnl, bits, net)
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn flagged_statistics_avx2(
    pnl: &[f64],
    bits: [&[u64]; BATCH],
    net: f64,
) -> [(Option<f64>, Option<f64>); BATCH] {
    flagged_statistics_in(pnl, bits, net)
}

#[inline(always)]
fn flagged_statistics_in(
    pnl: &[f64],
    bits: [&[u64]; BATCH],
    net: f64,
) -> [(Option<f64>, Option<f64>); BATCH] {
    let mut e_sum = [0.0f64; BATCH];
    let mut u_sum = [0.0f64; BATCH];
    let mut e_n = [0usize; BATCH];
    // Adds p to the exposed or the unexposed total of each set: the mask
    // keeps p's bits or makes +0.0, so there is no branch to mispredict.
    for (w, chunk) in pnl.chunks(64).enumerate() {
        let words: [u64; BATCH] = std::array::from_fn(|b| bits[b][w]);
        for (bit, &p) in chunk.iter().enumerate() {
            let p = p.to_bits();
            for b in 0..BATCH {
                let keep = 0u64.wrapping_sub(words[b] >> bit & 1);
                e_sum[b] += f64::from_bits(p & keep);
                u_sum[b] += f64::from_bits(p & !keep);
            }
        }
        for b in 0..BATCH {
            e_n[b] += words[b].count_ones() as usize;
        }
    }
    let total = pnl.len();
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
    /// input order and in a group's own order, with zeros of both signs,
    /// and the AVX2 build of the loop equals the plain one.
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
        let all = flagged_statistics(&pnl, sets, net);
        // The loop as compiled for AVX2 (when the CPU has it) and without.
        let bitwise_all = |v: [(Option<f64>, Option<f64>); BATCH]| {
            v.map(|(a, b)| (a.map(f64::to_bits), b.map(f64::to_bits)))
        };
        assert_eq!(
            bitwise_all(flagged_statistics_in(&pnl, sets, net)),
            bitwise_all(all)
        );
        // A group: every third trade, backwards, flagged by group position.
        let order: Vec<u32> = (0..n as u32).rev().filter(|i| i % 3 == 0).collect();
        let g_pnl: Vec<f64> = order.iter().map(|&i| pnl[i as usize]).collect();
        let g_net = g_pnl.iter().fold(0.0, |a, p| a + p);
        let g_bit_sets: Vec<Vec<u64>> = flag_sets
            .iter()
            .map(|flags| {
                let mut bits = vec![0u64; order.len().div_ceil(64)];
                for (j, &i) in order.iter().enumerate() {
                    bits[j / 64] |= (flags[i as usize] as u64) << (j % 64);
                }
                bits
            })
            .collect();
        let g_sets: [&[u64]; BATCH] = std::array::from_fn(|b| g_bit_sets[b].as_slice());
        let group = flagged_statistics(&g_pnl, g_sets, g_net);
        for (b, (flags, density)) in flag_sets.iter().zip(densities).take(BATCH).enumerate() {
            let bitwise =
                |v: (Option<f64>, Option<f64>)| (v.0.map(f64::to_bits), v.1.map(f64::to_bits));
            assert_eq!(
                bitwise(all[b]),
                bitwise(effect_statistics(&pnl, flags)),
                "density {density}"
            );
            let g_flags: Vec<bool> = order.iter().map(|&i| flags[i as usize]).collect();
            assert_eq!(
                bitwise(group[b]),
                bitwise(effect_statistics(&g_pnl, &g_flags)),
                "group, density {density}"
            );
        }
    }
}
