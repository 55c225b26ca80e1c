//! Placebo calendars (docs/method.md §7): every used release moved by the same
//! random whole number of weekdays, and how often the moved calendar shows
//! an effect at least as large as the real one.

use crate::analysis::metrics;
use crate::engine::daytimes::{DayTimeIndex, LANES, MovedTable};
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
    let (mut e_sum, mut e_n, mut u_sum, mut u_n) = (0.0, 0usize, 0.0, 0usize);
    for (&p, &x) in pnl.iter().zip(exposed) {
        if x {
            e_sum += p;
            e_n += 1;
        } else {
            u_sum += p;
            u_n += 1;
        }
    }
    let share = Net::of(pnl).share(e_sum);
    let diff = (e_n > 0 && u_n > 0).then(|| e_sum / e_n as f64 - u_sum / u_n as f64);
    (share, diff)
}

/// A group's net P/L (summed in its order) and Σ|P/L|, which decides
/// whether the net is zero within the rounding of its sum.
#[derive(Debug, Clone, Copy, Default)]
struct Net {
    net: f64,
    abs_total: f64,
}

impl Net {
    fn of(pnl: &[f64]) -> Net {
        pnl.iter().fold(Net::default(), |n, &p| n.add(p))
    }

    fn add(self, p: f64) -> Net {
        Net {
            net: self.net + p,
            abs_total: self.abs_total + p.abs(),
        }
    }

    /// `part` ÷ net ([`metrics::share_of_net`]).
    fn share(self, part: f64) -> Option<f64> {
        metrics::share_of_net(part, self.net, self.abs_total)
    }
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

/// One set of trades tested against the placebo calendars: all the trades
/// (`analyze`) or one run's (`rank`).
#[derive(Debug, Clone, Copy)]
pub struct PlaceboGroup<'a> {
    /// The group's trades (input indices) in the order its observed sums
    /// run; `None`: every trade, in input order (then the only group).
    pub trades: Option<&'a [u32]>,
    /// Observed exposure of the group's trades, in that order.
    pub observed_exposed: &'a [bool],
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
    };
    placebo_groups(
        trades,
        releases,
        windows,
        currencies,
        rule,
        &[group],
        s,
        Marking::Auto,
        progress,
    )
    .pop()
    .expect("one group")
}

/// How the moved calendars are marked: the same flags, so the same
/// results, whichever (tested); only time and memory differ.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Marking {
    /// By the windows' times of day ([`DayTimeIndex`]) where it pays,
    /// else window by window.
    Auto,
    /// Window by window ([`TradeIndex`]): trades by currency and duration,
    /// each moved window looked up among them.
    ByWindow,
}

/// The index a [`Marking`] chose, with its scratch per thread.
enum Marker {
    ByTimeOfDay(DayTimeIndex),
    ByWindow(TradeIndex),
}

/// A marker's scratch, kept per thread between chunks of shifts.
#[derive(Default)]
struct MarkScratch {
    table: MovedTable,
    moved: [Slots; BATCH],
}

impl Marker {
    fn words(&self) -> usize {
        match self {
            Marker::ByTimeOfDay(ix) => ix.words(),
            Marker::ByWindow(ix) => ix.words(),
        }
    }

    /// `bits[b]`: the trades under `calendar` moved by `shifts[b]`; how
    /// many windows each move dropped.
    fn mark(
        &self,
        calendar: &ShiftedCalendar,
        shifts: &[i64],
        scratch: &mut MarkScratch,
        bits: &mut [&mut [u64]],
    ) -> [usize; BATCH] {
        match self {
            Marker::ByTimeOfDay(ix) => ix.mark_each(calendar, shifts, &mut scratch.table, bits),
            Marker::ByWindow(ix) => {
                let mut dropped = [0; BATCH];
                for ((&d, moved), dropped) in
                    shifts.iter().zip(&mut scratch.moved).zip(&mut dropped)
                {
                    calendar.shift(d, moved);
                    *dropped = moved.dropped;
                }
                let moved: Vec<&Slots> = scratch.moved[..shifts.len()].iter().collect();
                ix.mark_each(&moved, bits);
                dropped
            }
        }
    }
}

/// Runs the same `s.n` placebo calendars (shifts drawn from `s.seed`) for
/// each of disjoint groups of trades, one result per group: a group's
/// result depends on its own trades and the seed only, not on which other
/// groups are tested beside it. Each distinct shift is marked once, eight
/// at a time, on one index of all the groups' trades (numbered by open
/// instant, ties in the groups' order; [`Marking`]); each group's
/// statistics then add its trades' P/L in that numbering. `marking`:
/// [`Marking::Auto`] but in tests (the same results either way).
/// `progress` ticks once per group and placebo.
#[allow(clippy::too_many_arguments)]
pub fn placebo_groups(
    trades: &Trades,
    releases: &[Release],
    windows: &[UsedWindow],
    currencies: &[Vec<String>],
    rule: ExposureRule,
    groups: &[PlaceboGroup],
    s: PlaceboSettings,
    marking: Marking,
    progress: &(dyn Fn() + Sync),
) -> Vec<PlaceboResult> {
    let n = s.n;
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
                seed: s.seed,
                observed_share,
                p_share: None,
                observed_mean_diff,
                p_mean_diff: None,
                releases_dropped: 0,
                method: PLACEBO_METHOD,
            }
        })
        .collect();
    if n == 0 || windows.is_empty() || groups.is_empty() {
        return results;
    }
    let calendar = ShiftedCalendar::new(releases, windows, rule);
    let span = calendar.span();
    let mut rng = ChaCha8Rng::seed_from_u64(s.seed);
    let mut drawn: BTreeMap<i64, Vec<usize>> = BTreeMap::new();
    for j in 0..n {
        let d = if span > 1 {
            rng.random_range(1..span)
        } else {
            0
        };
        drawn.entry(d).or_default().push(j);
    }
    // The index: every trade in input order (one group of all), or the
    // groups' trades one group after another; then numbered by open
    // instant, ties in that order.
    let all = groups.iter().any(|g| g.trades.is_none());
    assert!(
        !all || groups.len() == 1,
        "a group of every trade is the only one"
    );
    let listed: Vec<u32> = if all {
        Vec::new()
    } else {
        groups
            .iter()
            .flat_map(|g| g.trades.unwrap_or(&[]))
            .copied()
            .collect()
    };
    // The trades numbered by open instant (ties in that order), so that a
    // window's trades set neighbouring bits.
    let picked: Option<(Vec<i64>, Vec<i64>, Vec<u32>)> = (!all).then(|| {
        let pick = |v: &[i64]| -> Vec<i64> { listed.iter().map(|&i| v[i as usize]).collect() };
        let instrument = listed
            .iter()
            .map(|&i| trades.instrument[i as usize])
            .collect();
        (pick(&trades.opened), pick(&trades.closed), instrument)
    });
    let (opened, closed, instrument) = match &picked {
        Some((o, c, i)) => (&o[..], &c[..], &i[..]),
        None => (
            &trades.opened[..],
            &trades.closed[..],
            &trades.instrument[..],
        ),
    };
    let mut numbered: Vec<u32> = (0..opened.len() as u32).collect();
    numbered.par_sort_unstable_by_key(|&i| (opened[i as usize], i));
    let by_time_of_day = (marking == Marking::Auto)
        .then(|| {
            DayTimeIndex::new(
                &calendar, opened, closed, instrument, currencies, rule, &numbered,
            )
        })
        .flatten();
    let index = match by_time_of_day {
        Some(ix) => Marker::ByTimeOfDay(ix),
        None => Marker::ByWindow(
            TradeIndex::new(
                calendar.currencies(),
                opened,
                closed,
                instrument,
                currencies,
                rule,
            )
            .numbered_by(&numbered),
        ),
    };
    drop(picked);
    // The trades' P/L by number, each number's group, and each group's
    // net summed in ascending number.
    let pnl: Vec<f64> = numbered
        .iter()
        .map(|&at| match all {
            true => trades.pnl[at as usize],
            false => trades.pnl[listed[at as usize] as usize],
        })
        .collect();
    let group_of: Option<Vec<u32>> = (!all).then(|| {
        let firsts: Vec<usize> = groups
            .iter()
            .scan(0, |from, g| {
                let first = *from;
                *from += g.trades.map_or(0, <[u32]>::len);
                Some(first)
            })
            .collect();
        numbered
            .iter()
            .map(|&at| (firsts.partition_point(|&f| f <= at as usize) - 1) as u32)
            .collect()
    });
    drop(numbered);
    let mut nets = vec![Net::default(); groups.len()];
    let mut sizes = vec![0usize; groups.len()];
    for (k, &p) in pnl.iter().enumerate() {
        let g = group_of.as_ref().map_or(0, |of| of[k] as usize);
        nets[g] = nets[g].add(p);
        sizes[g] += 1;
    }
    let scoring = Scoring {
        pnl,
        group_of,
        nets,
        sizes,
    };
    let drawn: Vec<(i64, Vec<usize>)> = drawn.into_iter().collect();
    // Per chunk of BATCH shifts: each moved and marked, then every group
    // scored on the chunk's flag sets at once.
    // (group, placebo, releases dropped, share, mean difference)
    type Scores = Vec<(usize, usize, usize, Option<f64>, Option<f64>)>;
    let scored: Vec<Scores> = drawn
        .par_chunks(BATCH)
        .map_init(
            // The flag sets too are kept per thread: each marking writes
            // every word of them.
            || {
                (
                    MarkScratch::default(),
                    vec![vec![0u64; index.words()]; BATCH],
                )
            },
            |(scratch, bits), chunk| {
                let bits = &mut bits[..chunk.len()];
                let shifts: Vec<i64> = chunk.iter().map(|(d, _)| *d).collect();
                let mut flags: Vec<&mut [u64]> =
                    bits.iter_mut().map(|b| b.as_mut_slice()).collect();
                let dropped = index.mark(&calendar, &shifts, scratch, &mut flags);
                let sets: [&[u64]; BATCH] =
                    std::array::from_fn(|b| bits.get(b).unwrap_or(&bits[0]).as_slice());
                let mut out = Vec::new();
                for (g, stats) in scoring.statistics(sets).into_iter().enumerate() {
                    for (b, (_, js)) in chunk.iter().enumerate() {
                        for &j in js {
                            out.push((g, j, dropped[b], stats[b].0, stats[b].1));
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

/// The groups, ready to score: the index's trades' P/L by number, and
/// each number's group (`None`: one group of every trade); each group's net
/// (summed in ascending number) and size.
struct Scoring {
    pnl: Vec<f64>,
    group_of: Option<Vec<u32>>,
    nets: Vec<Net>,
    sizes: Vec<usize>,
}

impl Scoring {
    /// Every group's statistics under each of BATCH flag sets of the index.
    fn statistics(&self, sets: [&[u64]; BATCH]) -> Vec<[(Option<f64>, Option<f64>); BATCH]> {
        match &self.group_of {
            None => vec![flagged_statistics(&self.pnl, sets, self.nets[0])],
            Some(of) => grouped_statistics(&self.pnl, of, &self.nets, &self.sizes, sets),
        }
    }
}

/// Shifts scored together (see [`flagged_statistics`]).
const BATCH: usize = LANES;

/// [`effect_statistics`] of a group's trades under each of BATCH
/// [`DayTimeIndex::mark_each`] bit sets, `net` being the group's net P/L summed
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
    net: Net,
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
    net: Net,
) -> [(Option<f64>, Option<f64>); BATCH] {
    flagged_statistics_in(pnl, bits, net)
}

#[inline(always)]
fn flagged_statistics_in(
    pnl: &[f64],
    bits: [&[u64]; BATCH],
    net: Net,
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
    from_totals(e_sum, u_sum, e_n, pnl.len(), net)
}

/// [`flagged_statistics`] of several disjoint groups of the index's trades
/// at once, in one pass over the numbers in order: number k's P/L
/// `pnl[k]` goes to group `group_of[k]`'s totals (every number belongs to
/// one), so each group adds its trades in ascending number, the same sums
/// as [`flagged_statistics`] over the group alone. `nets` and `sizes`: each
/// group's net (summed in that order) and number of trades.
fn grouped_statistics(
    pnl: &[f64],
    group_of: &[u32],
    nets: &[Net],
    sizes: &[usize],
    bits: [&[u64]; BATCH],
) -> Vec<[(Option<f64>, Option<f64>); BATCH]> {
    let groups = nets.len();
    let mut e_sum = vec![[0.0f64; BATCH]; groups];
    let mut u_sum = vec![[0.0f64; BATCH]; groups];
    let mut e_n = vec![[0usize; BATCH]; groups];
    for (w, (chunk, of)) in pnl.chunks(64).zip(group_of.chunks(64)).enumerate() {
        let words: [u64; BATCH] = std::array::from_fn(|b| bits[b][w]);
        for (bit, (&p, &g)) in chunk.iter().zip(of).enumerate() {
            let g = g as usize;
            let p = p.to_bits();
            let (e, u, c) = (&mut e_sum[g], &mut u_sum[g], &mut e_n[g]);
            for b in 0..BATCH {
                let flag = words[b] >> bit & 1;
                let keep = 0u64.wrapping_sub(flag);
                e[b] += f64::from_bits(p & keep);
                u[b] += f64::from_bits(p & !keep);
                c[b] += flag as usize;
            }
        }
    }
    (0..groups)
        .map(|g| from_totals(e_sum[g], u_sum[g], e_n[g], sizes[g], nets[g]))
        .collect()
}

/// The two statistics from each flag set's exposed and unexposed totals,
/// its exposed count, the group's size and net.
fn from_totals(
    e_sum: [f64; BATCH],
    u_sum: [f64; BATCH],
    e_n: [usize; BATCH],
    total: usize,
    net: Net,
) -> [(Option<f64>, Option<f64>); BATCH] {
    std::array::from_fn(|b| {
        let u_n = total - e_n[b];
        let share = net.share(e_sum[b]);
        let diff =
            (e_n[b] > 0 && u_n > 0).then(|| e_sum[b] / e_n[b] as f64 - u_sum[b] / u_n as f64);
        (share, diff)
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// P/L that cancel exactly leave a net of rounding residue (0.1 + 0.2 −
    /// 0.3 = 5.55e-17 in doubles): the share of net is undefined there, for
    /// the observed and the placebo statistic alike; the mean difference
    /// is not affected.
    #[test]
    fn share_is_undefined_when_net_cancels() {
        let pnl = [0.1, 0.2, -0.3];
        assert!(pnl.iter().sum::<f64>() != 0.0, "residue, not zero");
        let flags = [true, false, false];
        let (share, diff) = effect_statistics(&pnl, &flags);
        assert_eq!(share, None);
        assert_eq!(diff, Some(0.1 - (0.2 + -0.3) / 2.0));
        let bits = [1u64];
        let got = flagged_statistics(&pnl, [&bits[..]; BATCH], Net::of(&pnl));
        assert!(got.iter().all(|&(s, d)| s.is_none() && d == diff));
        // A real net keeps its share: 1.0 of 2.5.
        assert_eq!(effect_statistics(&[1.0, 1.5], &[true, false]).0, Some(0.4));
    }

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
        let net = Net::of(&pnl);
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
        let g_net = Net::of(&g_pnl);
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
