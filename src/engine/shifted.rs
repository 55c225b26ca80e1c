//! Exposure flags for many calendars over the same trades: moved copies of
//! one calendar (the placebo calendars of docs/method.md §7) and the cells
//! of a window grid (`tune`, [`Slots::of_windows`]).
//!
//! [`ShiftedCalendar`] prepares the used windows once: each one's currency,
//! weekday number, time of day, its slot under the rule as offsets from the
//! release instant, and, per series and time of day, the weekdays on which
//! a moved window would land within a day of a real release (the drop test).
//! [`ShiftedCalendar::shift`] then moves every window by whole weekdays into
//! per-currency arrays sorted by start. [`TradeIndex`] holds the trades once,
//! per currency, in classes of similar duration sorted by query start, so a
//! moved calendar is applied window by window: a window `[s, e]` meets the
//! trades of a class whose query start lies in `[s − longest, e]` and whose
//! query end is ≥ s. That is the engine's rule ([`super::exposure`]: a
//! trade's query interval and a slot intersect), run from the windows'
//! side, so a calendar costs O(windows × classes + near misses + hits)
//! instead of a search per trade. Only the flags are kept (no match lists).

use crate::engine::exposure::{ExposureRule, UsedWindow};
use crate::import::calendar::{Release, normalise_title};
use crate::import::zones::{DAY_MS, day_of_weekday_index, is_weekday, weekday_index};
use rayon::prelude::*;
use std::collections::HashMap;

/// One used window, ready to move.
#[derive(Debug, Clone, Copy)]
pub(super) struct Prepared {
    pub(super) currency: u32,
    weekday: i64,
    pub(super) time_of_day: i64,
    /// Slot start and end under the rule, minus the release instant.
    pub(super) start_offset: i64,
    pub(super) end_offset: i64,
    /// Its series (currency + normalised title), numbered while preparing.
    series: u32,
}

/// The used windows of a calendar, prepared for moving by whole weekdays.
#[derive(Debug)]
pub struct ShiftedCalendar {
    windows: Vec<Prepared>,
    /// Currencies of the used windows; a window's `currency` indexes this.
    currencies: Vec<String>,
    /// First weekday number of the used windows.
    first_weekday: i64,
    /// Weekdays from the first to the last used window, inclusive.
    span: i64,
    /// Per (series, time of day) of the windows, the weekdays (from the
    /// first, a bit each, `span` bits in whole words) on which a window
    /// moved there would land within a day of a real release of its series;
    /// a window's entry is `near_of`.
    near: Vec<u64>,
    near_of: Vec<u32>,
}

/// The slots of one calendar (moved or not), per currency of a list,
/// sorted by start; and how many moved windows were dropped. Reused
/// between shifts.
#[derive(Debug, Default)]
pub struct Slots {
    slots: Vec<Vec<(i64, i64)>>,
    /// Per currency, the slots' ends (which grow with their starts once
    /// joined) and a coarse index of them, for marking trade by trade.
    ends: Vec<Vec<i64>>,
    ends_index: Vec<StartIndex>,
    /// Moved windows dropped because they landed within a day of a real
    /// release of the same series.
    pub dropped: usize,
}

impl Slots {
    /// The slots of `windows` under `rule`, unmoved, per currency of
    /// `currencies` (sorted; windows of other currencies are left out).
    pub fn of_windows(currencies: &[String], windows: &[UsedWindow], rule: ExposureRule) -> Slots {
        Slots::of_slots(
            currencies.len(),
            windows.iter().filter_map(|w| {
                let c = currencies.binary_search(&w.currency).ok()?;
                Some((c, w.slot(rule)))
            }),
        )
    }

    /// The slots given as (currency, slot), for `currencies` currencies.
    pub fn of_slots(
        currencies: usize,
        given: impl IntoIterator<Item = (usize, (i64, i64))>,
    ) -> Slots {
        let mut slots = vec![Vec::new(); currencies];
        for (c, slot) in given {
            slots[c].push(slot);
        }
        let mut out = Slots {
            slots,
            ..Slots::default()
        };
        out.finish();
        out
    }

    /// Sorts each currency's slots by start, joins those that share an
    /// instant, and indexes their ends.
    fn finish(&mut self) {
        // Nearly sorted already after a move (a rotation): the stable sort
        // merges runs.
        for s in &mut self.slots {
            s.sort_by_key(|x| x.0);
            merge_overlapping(s);
        }
        self.ends.resize_with(self.slots.len(), Vec::new);
        self.ends_index
            .resize_with(self.slots.len(), StartIndex::default);
        for ((slots, ends), index) in self
            .slots
            .iter()
            .zip(&mut self.ends)
            .zip(&mut self.ends_index)
        {
            ends.clear();
            ends.extend(slots.iter().map(|s| s.1));
            *index = StartIndex::new(ends);
        }
    }
}

impl ShiftedCalendar {
    /// Prepares `windows` (used windows of `releases`) under `rule`.
    pub fn new(
        releases: &[Release],
        windows: &[UsedWindow],
        rule: ExposureRule,
    ) -> ShiftedCalendar {
        let mut series_ids: HashMap<(String, String), u32> = HashMap::new();
        let mut series: Vec<Vec<i64>> = Vec::new();
        // Each release's series, named once.
        let series_of: Vec<u32> = releases
            .iter()
            .map(|r| {
                let key = (r.currency.clone(), normalise_title(&r.title));
                let id = *series_ids.entry(key).or_insert_with(|| {
                    series.push(Vec::new());
                    (series.len() - 1) as u32
                });
                series[id as usize].push(r.at);
                id
            })
            .collect();
        let mut currencies: Vec<String> = windows.iter().map(|w| w.currency.clone()).collect();
        currencies.sort();
        currencies.dedup();
        let prepared: Vec<Prepared> = windows
            .iter()
            .map(|w| {
                let day = w.at.div_euclid(DAY_MS);
                let (start, end) = w.slot(rule);
                Prepared {
                    currency: currencies.binary_search(&w.currency).expect("listed") as u32,
                    weekday: weekday_index(day),
                    time_of_day: w.at - day * DAY_MS,
                    start_offset: start - w.at,
                    end_offset: end - w.at,
                    series: series_of[w.release as usize],
                }
            })
            .collect();
        let first_weekday = prepared.iter().map(|w| w.weekday).min().unwrap_or(0);
        let last = prepared.iter().map(|w| w.weekday).max().unwrap_or(0);
        let span = last - first_weekday + 1;
        // The drop test per (series, time of day), for every weekday at
        // once: a moved instant D·day + time of day lies within a day of a
        // real release t only on the calendar days around t.
        let words = (span as usize).div_ceil(64);
        let mut keys: HashMap<(u32, i64), u32> = HashMap::new();
        let mut near: Vec<u64> = Vec::new();
        let near_of = prepared
            .iter()
            .map(|w| {
                let next = keys.len() as u32;
                *keys.entry((w.series, w.time_of_day)).or_insert_with(|| {
                    near.resize(near.len() + words, 0);
                    let bits = &mut near[next as usize * words..];
                    for &t in &series[w.series as usize] {
                        let from = (t - DAY_MS - w.time_of_day).div_euclid(DAY_MS);
                        for day in from..=from + 2 {
                            let at = day * DAY_MS + w.time_of_day;
                            let u = weekday_index(day) - first_weekday;
                            if (at - t).abs() <= DAY_MS && is_weekday(day) && (0..span).contains(&u)
                            {
                                bits[u as usize / 64] |= 1 << (u % 64);
                            }
                        }
                    }
                    next
                })
            })
            .collect();
        ShiftedCalendar {
            windows: prepared,
            currencies,
            first_weekday,
            span,
            near,
            near_of,
        }
    }

    /// Weekdays from the first to the last used window, inclusive (shifts
    /// are drawn from 1..span).
    pub fn span(&self) -> i64 {
        self.span
    }

    /// The currencies of the used windows, sorted (a [`TradeIndex`]'s list).
    pub fn currencies(&self) -> &[String] {
        &self.currencies
    }

    /// Moves every window by `days` weekdays (wrapping within the span,
    /// time of day kept) into `out`, dropping those within a day of a real
    /// release of their series.
    pub fn shift(&self, days: i64, out: &mut Slots) {
        out.slots.resize_with(self.currencies.len(), Vec::new);
        for s in &mut out.slots {
            s.clear();
        }
        out.dropped = self.each_moved(days, |_, w, _, at| {
            out.slots[w.currency as usize].push((at + w.start_offset, at + w.end_offset));
        });
        out.finish();
    }

    /// Every window moved by `days` weekdays (wrapping within the span,
    /// time of day kept) and not dropped, in calendar order: `keep` gets its
    /// index among the used windows, the window, its new weekday number and
    /// its new instant. Returns how many were dropped (within a day of a real
    /// release of their series). The one rule of the move, for [`Self::shift`]
    /// and [`super::daytimes::DayTimeIndex`].
    pub(super) fn each_moved(
        &self,
        days: i64,
        mut keep: impl FnMut(usize, &Prepared, i64, i64),
    ) -> usize {
        if self.windows.is_empty() {
            return 0;
        }
        let words = (self.span as usize).div_ceil(64);
        let days = days.rem_euclid(self.span);
        let mut dropped = 0;
        for (i, w) in self.windows.iter().enumerate() {
            // Weekdays from the first, wrapped within the span.
            let mut u = w.weekday - self.first_weekday + days;
            if u >= self.span {
                u -= self.span;
            }
            let near = &self.near[self.near_of[i] as usize * words..];
            if near[u as usize / 64] >> (u % 64) & 1 == 1 {
                dropped += 1;
                continue;
            }
            let weekday = self.first_weekday + u;
            let at = day_of_weekday_index(weekday) * DAY_MS + w.time_of_day;
            keep(i, w, weekday, at);
        }
        dropped
    }

    /// The used windows as prepared, in calendar order.
    pub(super) fn prepared(&self) -> &[Prepared] {
        &self.windows
    }

    /// First weekday number of the used windows (moved ones stay within
    /// it and the next `span − 1`).
    pub(super) fn first_weekday(&self) -> i64 {
        self.first_weekday
    }
}

/// Joins slots (sorted by start) that share an instant into one: a query
/// meets the joined slot exactly when it meets one of them (closed
/// intervals; a query past the first's end but within the second's
/// starts at or after the second's start), so the flags are unchanged and
/// the trades under both are not looked at twice.
fn merge_overlapping(slots: &mut Vec<(i64, i64)>) {
    let mut kept = 0;
    for i in 0..slots.len() {
        let (s, e) = slots[i];
        if kept > 0 && s <= slots[kept - 1].1 {
            slots[kept - 1].1 = slots[kept - 1].1.max(e);
        } else {
            slots[kept] = (s, e);
            kept += 1;
        }
    }
    slots.truncate(kept);
}

/// Trades of one currency whose query lasts about as long: sorted by query start.
#[derive(Debug, Default)]
struct Class {
    longest: i64,
    query_start: Vec<i64>,
    /// Query end − query start, in ms; [`LONG`] for a query of 2³² − 1 ms
    /// (about 50 days) or more, whose end is in `long_ends`. Four bytes
    /// where the end itself takes eight: at 10 M trades on two currencies
    /// that is 80 MB less.
    query_len: Vec<u32>,
    /// (position, query end) of the long queries, by position.
    long_ends: Vec<(u32, i64)>,
    trade: Vec<u32>,
    /// Where to start looking for a query start: see [`StartIndex`].
    starts: StartIndex,
}

/// A coarse index of a sorted list of instants: the span cut into buckets
/// of 2^shift ms, about four entries each, and each bucket's first position.
/// The first position at or after an instant is then its bucket's first
/// plus a few steps, instead of a search.
#[derive(Debug, Default)]
struct StartIndex {
    first_instant: i64,
    shift: u32,
    first: Vec<u32>,
}

impl StartIndex {
    fn new(sorted: &[i64]) -> StartIndex {
        let (Some(&lo), Some(&hi)) = (sorted.first(), sorted.last()) else {
            return StartIndex::default();
        };
        let buckets = (sorted.len() / 4).max(1) as u64;
        let width = ((hi - lo) as u64 / buckets).max(1);
        let shift = 64 - (width - 1).leading_zeros();
        let count = (((hi - lo) as u64) >> shift) as usize + 1;
        let mut first = Vec::with_capacity(count + 1);
        let mut j = 0;
        for b in 0..=count {
            let at = lo + ((b as i64) << shift);
            while j < sorted.len() && sorted[j] < at {
                j += 1;
            }
            first.push(j as u32);
        }
        StartIndex {
            first_instant: lo,
            shift,
            first,
        }
    }

    /// The first position of `sorted` (the list indexed) at or after
    /// `from` whose instant is ≥ `at`. `FOURS`: step over the list four
    /// entries at a time (faster where the answer is usually within four of
    /// the bucket's start: slot ends looked up trade by trade; slower for a
    /// window's first candidate, measured).
    #[inline]
    fn first_at_least<const FOURS: bool>(&self, sorted: &[i64], from: usize, at: i64) -> usize {
        let mut j = if at <= self.first_instant {
            0
        } else {
            let b = ((at - self.first_instant) as u64 >> self.shift) as usize;
            self.first.get(b).map_or(sorted.len(), |&f| f as usize)
        };
        j = j.max(from);
        if FOURS {
            // Four at a time without a branch per entry: in a sorted list
            // the entries below `at` among four in a row are the steps to
            // the first at or past it, when there are fewer than four.
            while let Some(four) = sorted.get(j..j + 4) {
                let below = four.iter().map(|&x| (x < at) as usize).sum::<usize>();
                j += below;
                if below < 4 {
                    return j;
                }
            }
        }
        while j < sorted.len() && sorted[j] < at {
            j += 1;
        }
        j
    }
}

/// The trades, indexed once per currency of a [`ShiftedCalendar`] for
/// marking moved calendars.
#[derive(Debug)]
pub struct TradeIndex {
    trades: usize,
    by_currency: Vec<Vec<Class>>,
}

impl TradeIndex {
    /// Indexes the trades under `rule` (query `[open, open]` for `entered`,
    /// `[open, close]` otherwise) on `currencies` (sorted: the list the
    /// [`Slots`] to mark are built on).
    pub fn new(
        currencies: &[String],
        opened: &[i64],
        closed: &[i64],
        instrument: &[u32],
        instrument_currencies: &[Vec<String>],
        rule: ExposureRule,
    ) -> TradeIndex {
        let ids = currency_numbers(currencies, instrument_currencies);
        // Classes by duration, a factor of 4 apart: a class's near misses
        // stay within a small multiple of its hits.
        let class_of = |len: i64| ((64 - (len.max(0) as u64).leading_zeros()) / 2) as usize;
        // One currency at a time (two at once on two threads), one class at
        // a time within it: a class's queries gathered, sorted and laid out
        // in columns, the gathered copy dropped before the next. All
        // currencies' copies at once took 24 B a trade and currency on top
        // of the index (480 MB at 10 M trades on two currencies); a whole
        // currency's, the peak of the default run at 10 M.
        let by_currency: Vec<Vec<Class>> = (0..currencies.len())
            .into_par_iter()
            .map(|c| {
                let query = |i: usize| rule.query(opened[i], closed[i]);
                // The currency's trades by class as 4-byte indices; each
                // class's queries are then gathered, laid out and dropped in
                // turn.
                let mut classes: Vec<Vec<u32>> = Vec::new();
                for i in 0..opened.len() {
                    if !ids[instrument[i] as usize].contains(&(c as u32)) {
                        continue;
                    }
                    let (qa, qb) = query(i);
                    let k = class_of(qb - qa);
                    if classes.len() <= k {
                        classes.resize_with(k + 1, Vec::new);
                    }
                    classes[k].push(i as u32);
                }
                classes
                    .into_iter()
                    .filter(|c| !c.is_empty())
                    .map(|members| {
                        let gathered = members
                            .iter()
                            .map(|&i| {
                                let (qa, qb) = query(i as usize);
                                (qa, qb, i)
                            })
                            .collect();
                        drop(members);
                        Class::new(gathered)
                    })
                    .collect()
            })
            .collect();
        TradeIndex {
            trades: opened.len(),
            by_currency,
        }
    }

    /// The same index with trade `order[k]` numbered k (`order`: a
    /// permutation of the input indices), so that flags marked on it are in
    /// that order.
    pub fn numbered_by(self, order: &[u32]) -> TradeIndex {
        self.renumbered(&crate::import::trades::places_in(order))
    }

    /// The same index with trade i numbered `number[i]` (a permutation:
    /// [`TradeIndex::numbered_by`]'s inverse, for a caller that has it).
    pub fn renumbered(mut self, number: &[u32]) -> TradeIndex {
        assert_eq!(number.len(), self.trades, "a number for every trade");
        for c in self.by_currency.iter_mut().flatten() {
            for t in &mut c.trade {
                *t = number[*t as usize];
            }
        }
        self
    }

    /// Words of a flag set for these trades (bit i of word i / 64 = trade i).
    pub fn words(&self) -> usize {
        self.trades.div_ceil(64)
    }

    /// Sets in `bits` (cleared first; [`TradeIndex::words`] long) the trades
    /// that meet at least one of the slots.
    pub fn mark(&self, slots: &Slots, bits: &mut [u64]) {
        self.mark_each(&[slots], &mut [bits]);
    }

    /// [`TradeIndex::mark`] for several calendars at once: `bits[b]` gets
    /// the trades that meet a slot of `slots[b]`. The same flags as one by
    /// one; a class's trades are read once for all the calendars, a tile
    /// at a time (the index is far larger than the caches, and marking one
    /// calendar after another read all of it from memory each time).
    pub fn mark_each(&self, slots: &[&Slots], bits: &mut [&mut [u64]]) {
        assert_eq!(slots.len(), bits.len(), "a flag set per calendar");
        bits.iter_mut().for_each(|b| b.fill(0));
        for (c, classes) in self.by_currency.iter().enumerate() {
            for class in classes {
                let mut by_slots: Vec<SlotsAndFlags> = Vec::new();
                for (s, b) in slots.iter().zip(bits.iter_mut()) {
                    let list = &s.slots[c];
                    if class.trade.len() < list.len() * TRADE_SIDE {
                        class.mark_from_trades(list, &s.ends[c], &s.ends_index[c], b);
                    } else {
                        by_slots.push((list, b));
                    }
                }
                class.mark_from_slots(&mut by_slots, TILE);
            }
        }
    }
}

/// Each instrument's currencies as numbers in `currencies` (sorted, without
/// repeats; those not in the list left out).
pub(super) fn currency_numbers(
    currencies: &[String],
    instrument_currencies: &[Vec<String>],
) -> Vec<Vec<u32>> {
    instrument_currencies
        .iter()
        .map(|cs| {
            let mut v: Vec<u32> = cs
                .iter()
                .filter_map(|c| currencies.binary_search(c).ok())
                .map(|c| c as u32)
                .collect();
            v.sort_unstable();
            v.dedup();
            v
        })
        .collect()
}

/// One calendar's slots of a currency, and the flags they set.
type SlotsAndFlags<'a> = (&'a [(i64, i64)], &'a mut [u64]);

/// Query starts of a class read per tile of [`Class::mark_from_slots`]:
/// 16 bytes of index each, 256 KiB a tile, within the second-level cache.
const TILE: usize = 16_384;

/// A class with fewer trades than this many times its currency's slots is
/// marked trade by trade (a lookup among the slots for each) rather than
/// slot by slot (a lookup among the trades for each): the small runs of
/// `rank`. Measured at 1 M trades × 100 runs, 1, 2 and 4 differ by a few
/// per cent.
const TRADE_SIDE: usize = 2;

/// [`Class::query_len`] of a query whose end is kept apart.
const LONG: u32 = u32::MAX;

impl Class {
    /// A class from its trades' (query start, query end, trade).
    fn new(mut c: Vec<(i64, i64, u32)>) -> Class {
        c.sort_unstable_by_key(|x| (x.0, x.2));
        let query_start: Vec<i64> = c.iter().map(|x| x.0).collect();
        Class {
            longest: c.iter().map(|x| x.1 - x.0).max().unwrap_or(0).max(0),
            starts: StartIndex::new(&query_start),
            query_start,
            query_len: c
                .iter()
                .map(|x| u32::try_from(x.1 - x.0).unwrap_or(LONG))
                .collect(),
            long_ends: c
                .iter()
                .enumerate()
                .filter(|(_, x)| x.1 - x.0 >= LONG as i64 || x.1 < x.0)
                .map(|(j, x)| (j as u32, x.1))
                .collect(),
            trade: c.iter().map(|x| x.2).collect(),
        }
    }

    /// The query end of position j.
    #[inline(always)]
    fn query_end(&self, j: usize) -> i64 {
        match self.query_len[j] {
            LONG => {
                let at = self.long_ends.partition_point(|&(p, _)| (p as usize) < j);
                self.long_ends[at].1
            }
            len => self.query_start[j] + len as i64,
        }
    }

    /// Window by window: the trades whose query start lies in
    /// `[s − longest, e]`, flagged when their query end is ≥ s; for each
    /// calendar's (slots, flags) in `each`. A tile of the class's trades at a
    /// time: every calendar's windows whose candidates begin in the tile,
    /// in turn, so the tile is read from memory once (a window's candidates
    /// may run on into the next tile; each window is taken once, in order).
    fn mark_from_slots(&self, each: &mut [SlotsAndFlags], tile: usize) {
        if each.is_empty() {
            return;
        }
        let n = self.query_start.len();
        // Per calendar: its next window, and where its last one's
        // candidates began.
        let mut next = vec![0usize; each.len()];
        let mut hint = vec![0usize; each.len()];
        let mut tile_start = 0;
        while tile_start < n {
            let tile_end = (tile_start + tile).min(n);
            // Windows whose first candidate lies before this instant
            // belong to the tile (the last tile takes all that are left).
            let before = self.query_start.get(tile_end).copied().unwrap_or(i64::MAX);
            for (b, (slots, bits)) in each.iter_mut().enumerate() {
                while let Some(&(s, e)) = slots.get(next[b]) {
                    let from_instant = s.saturating_sub(self.longest);
                    if from_instant >= before && tile_end < n {
                        break;
                    }
                    next[b] += 1;
                    let from = self.starts.first_at_least::<false>(
                        &self.query_start,
                        hint[b],
                        from_instant,
                    );
                    hint[b] = from;
                    for j in from..n {
                        if self.query_start[j] > e {
                            break;
                        }
                        // Without a branch: about half the candidates
                        // are near misses, in no predictable pattern.
                        let t = self.trade[j] as usize;
                        bits[t / 64] |= ((self.query_end(j) >= s) as u64) << (t % 64);
                    }
                }
            }
            tile_start = tile_end;
        }
    }

    /// Trade by trade: the first slot ending at or after the query start
    /// (slots disjoint and sorted, `ends` their ends) is the only one that
    /// can meet the query first; it does when it starts by the query end.
    fn mark_from_trades(
        &self,
        slots: &[(i64, i64)],
        ends: &[i64],
        ends_index: &StartIndex,
        bits: &mut [u64],
    ) {
        let mut hint = 0;
        for j in 0..self.trade.len() {
            // Query starts grow within a class, so the slot only moves on.
            let at = ends_index.first_at_least::<true>(ends, hint, self.query_start[j]);
            hint = at;
            if slots.get(at).is_some_and(|&(s, _)| s <= self.query_end(j)) {
                let t = self.trade[j] as usize;
                bits[t / 64] |= 1 << (t % 64);
            }
        }
    }
}

/// The trades set in a flag set from [`TradeIndex::mark`], ascending.
pub fn set_bits(bits: &[u64]) -> impl Iterator<Item = usize> + '_ {
    bits.iter().enumerate().flat_map(|(w, &word)| {
        let mut left = word;
        std::iter::from_fn(move || {
            (left != 0).then(|| {
                let bit = left.trailing_zeros() as usize;
                left &= left - 1;
                w * 64 + bit
            })
        })
    })
}

/// Whether trade `i` is set in a flag set from [`TradeIndex::mark`].
pub fn is_set(bits: &[u64], i: usize) -> bool {
    bits[i / 64] >> (i % 64) & 1 == 1
}

#[cfg(test)]
mod tests {
    use super::*;

    use crate::engine::exposure::Engine;
    use crate::import::calendar::Tier;
    use crate::import::zones::MINUTE_MS;

    /// Flags from the moved calendar equal the engine's on the same moved
    /// windows, for every rule, shift and a mix of trade lengths.
    #[test]
    fn marks_equal_the_engine_on_moved_windows() {
        let day = DAY_MS / MINUTE_MS;
        let mut releases = Vec::new();
        for i in 0..60i64 {
            let cur = ["USD", "EUR", "JPY"][(i % 3) as usize];
            let at = (20_000 + i * 37 % 40) * day + (i * 211 % 1440);
            releases.push(Release {
                id: format!("r{i}"),
                at: at * MINUTE_MS,
                end: at * MINUTE_MS,
                all_day: i % 11 == 0,
                title: format!("series {}", i % 7),
                currency: cur.into(),
                tier: [Tier::High, Tier::Medium, Tier::Low][(i % 3) as usize],
                category: None,
                region: None,
            });
        }
        let windows: Vec<UsedWindow> = releases
            .iter()
            .enumerate()
            .map(|(i, r)| {
                let (pre, post) = if r.all_day {
                    (0, day - 1)
                } else {
                    (15 + i as i64 % 20, 30)
                };
                UsedWindow {
                    release: i as u32,
                    currency: r.currency.clone(),
                    start: r.at - pre * MINUTE_MS,
                    end: r.at + post * MINUTE_MS,
                    at: r.at,
                    all_day: r.all_day,
                }
            })
            .collect();
        let currencies = vec![
            vec!["EUR".to_string(), "USD".to_string()],
            vec!["JPY".to_string(), "USD".to_string()],
            vec!["GBP".to_string()],
        ];
        // Many trades and few.
        for n_trades in [4000u32, 30] {
            let (mut opened, mut closed, mut instrument) = (Vec::new(), Vec::new(), Vec::new());
            let mut x: u64 = 7;
            for i in 0..n_trades {
                x = x
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                let o = (20_000 * day + (x >> 20) as i64 % (42 * day)) * MINUTE_MS;
                let len = [0, 1, 5, 60, 600, 3000, 20_000, 80_000][(x >> 8) as usize % 8]
                    * MINUTE_MS
                    + (x >> 40) as i64 % MINUTE_MS;
                opened.push(o);
                closed.push(o + len);
                instrument.push(i % 3);
            }
            for rule in [
                ExposureRule::Overlap,
                ExposureRule::Held,
                ExposureRule::Entered,
            ] {
                let cal = ShiftedCalendar::new(&releases, &windows, rule);
                let build = || {
                    TradeIndex::new(
                        cal.currencies(),
                        &opened,
                        &closed,
                        &instrument,
                        &currencies,
                        rule,
                    )
                };
                let index = build();
                let mut moved = Slots::default();
                let mut bits = vec![0; index.words()];
                let mut exposed_seen = 0;
                for d in [0, 1, 3, 7, cal.span() - 1] {
                    cal.shift(d, &mut moved);
                    index.mark(&moved, &mut bits);
                    // Numbered by open instant (as the placebo calendars
                    // number them): the same trades, renumbered.
                    let mut order: Vec<u32> = (0..opened.len() as u32).collect();
                    order.sort_by_key(|&i| (opened[i as usize], i));
                    let by_open = build().numbered_by(&order);
                    let mut renumbered = vec![0; by_open.words()];
                    by_open.mark(&moved, &mut renumbered);
                    for (k, &i) in order.iter().enumerate() {
                        assert_eq!(is_set(&renumbered, k), is_set(&bits, i as usize));
                    }
                    // By the windows' times of day, three moves at once: the
                    // same trades as marked slot by slot, and the same drops.
                    let by_day = super::super::daytimes::DayTimeIndex::new(
                        &cal,
                        &opened,
                        &closed,
                        &instrument,
                        &currencies,
                        rule,
                        &order,
                    )
                    .expect("few shapes: the index is built");
                    let mut table = super::super::daytimes::MovedTable::default();
                    for _ in 0..2 {
                        let mut three = vec![vec![u64::MAX; by_day.words()]; 3];
                        let mut flags: Vec<&mut [u64]> =
                            three.iter_mut().map(|b| b.as_mut_slice()).collect();
                        let dropped =
                            by_day.mark_each(&cal, &[d, d + 2, d + 5], &mut table, &mut flags);
                        assert_eq!(three[0], renumbered, "{rule:?} shift {d}");
                        for (j, extra) in [2, 5].into_iter().enumerate() {
                            let mut other = Slots::default();
                            cal.shift(d + extra, &mut other);
                            let mut want = vec![0; by_open.words()];
                            by_open.mark(&other, &mut want);
                            assert_eq!(three[j + 1], want, "{rule:?} shift {}", d + extra);
                            assert_eq!(dropped[j + 1], other.dropped);
                        }
                        assert_eq!(dropped[0], moved.dropped);
                    }
                    // The same move done window by window, through the engine.
                    let first = windows
                        .iter()
                        .map(|w| weekday_index(w.at.div_euclid(DAY_MS)))
                        .min()
                        .unwrap();
                    let mut kept = Vec::new();
                    let mut dropped = 0;
                    for w in &windows {
                        let wd = weekday_index(w.at.div_euclid(DAY_MS));
                        let new_at =
                            day_of_weekday_index(first + (wd - first + d).rem_euclid(cal.span()))
                                * DAY_MS
                                + w.at.rem_euclid(DAY_MS);
                        let r = &releases[w.release as usize];
                        let near = releases.iter().any(|q| {
                            q.currency == r.currency
                                && normalise_title(&q.title) == normalise_title(&r.title)
                                && (q.at - new_at).abs() <= DAY_MS
                        });
                        if near {
                            dropped += 1;
                            continue;
                        }
                        let delta = new_at - w.at;
                        kept.push(UsedWindow {
                            start: w.start + delta,
                            end: w.end + delta,
                            at: new_at,
                            ..w.clone()
                        });
                    }
                    assert_eq!(moved.dropped, dropped, "{rule:?} shift {d}");
                    // Trade by trade and slot by slot mark the same trades,
                    // whichever `mark` picks for a class; slot by slot also
                    // with this calendar and two others marked at once, in
                    // tiles of a few trades.
                    let mut others = [Slots::default(), Slots::default()];
                    cal.shift(d + 2, &mut others[0]);
                    cal.shift(d + 5, &mut others[1]);
                    for (k, classes) in index.by_currency.iter().enumerate() {
                        let slots = &moved.slots[k];
                        let (ends, ends_index) = (&moved.ends[k], &moved.ends_index[k]);
                        assert!(ends.windows(2).all(|e| e[0] <= e[1]), "joined slots");
                        for c in classes {
                            let alone = |cal: &Slots| {
                                let mut by_trade = vec![0; index.words()];
                                let (ends, at) = (&cal.ends[k], &cal.ends_index[k]);
                                c.mark_from_trades(&cal.slots[k], ends, at, &mut by_trade);
                                by_trade
                            };
                            let mut by_trade = vec![0; index.words()];
                            c.mark_from_trades(slots, ends, ends_index, &mut by_trade);
                            assert_eq!(by_trade, alone(&moved));
                            for tile in [1, 7, TILE] {
                                let mut by_slot = vec![vec![0; index.words()]; 3];
                                let [a, b, e] = &mut by_slot[..] else {
                                    unreachable!()
                                };
                                c.mark_from_slots(
                                    &mut [
                                        (slots, a),
                                        (&others[0].slots[k], b),
                                        (&others[1].slots[k], e),
                                    ],
                                    tile,
                                );
                                assert_eq!(by_trade, by_slot[0], "{rule:?} shift {d} tile {tile}");
                                assert_eq!(alone(&others[0]), by_slot[1], "tile {tile}");
                                assert_eq!(alone(&others[1]), by_slot[2], "tile {tile}");
                            }
                        }
                    }
                    // All classes and currencies: marked together as one by one.
                    let mut each = vec![vec![0; index.words()]; 3];
                    let mut flags: Vec<&mut [u64]> =
                        each.iter_mut().map(|b| b.as_mut_slice()).collect();
                    index.mark_each(&[&moved, &others[0], &others[1]], &mut flags);
                    assert_eq!(each[0], bits, "{rule:?} shift {d}");
                    for (other, got) in others.iter().zip(&each[1..]) {
                        let mut one = vec![0; index.words()];
                        index.mark(other, &mut one);
                        assert_eq!(&one, got, "{rule:?} shift {d}");
                    }
                    let want = Engine::from_windows(&kept, rule, releases.len())
                        .run_matches(&opened, &closed, &instrument, &currencies)
                        .k;
                    for (i, &k) in want.iter().enumerate() {
                        assert_eq!(is_set(&bits, i), k > 0, "{rule:?} shift {d} trade {i}");
                    }
                    exposed_seen += want.iter().filter(|&&k| k > 0).count();
                }
                // Unmoved, as a window grid cell marks them.
                index.mark(
                    &Slots::of_windows(cal.currencies(), &windows, rule),
                    &mut bits,
                );
                let want = Engine::from_windows(&windows, rule, releases.len())
                    .run_matches(&opened, &closed, &instrument, &currencies)
                    .k;
                for (i, &k) in want.iter().enumerate() {
                    assert_eq!(is_set(&bits, i), k > 0, "{rule:?} unmoved trade {i}");
                }
                assert!(
                    exposed_seen > n_trades as usize / 40,
                    "{rule:?}: the check needs exposed trades ({exposed_seen})"
                );
            }
        }
    }

    /// The coarse index finds what a binary search finds, from any start
    /// at or before it, on lists with ties, gaps and one entry.
    #[test]
    fn start_index_equals_partition_point() {
        let lists: Vec<Vec<i64>> = vec![
            vec![5],
            (0..300).map(|i| i / 3 * 2).collect(),
            (0..500)
                .map(|i| if i < 250 { i } else { 1_000_000 + i * 7 })
                .collect(),
        ];
        for v in &lists {
            let ix = StartIndex::new(v);
            for at in (v[0] - 3..v[v.len() - 1] + 3)
                .step_by(((v[v.len() - 1] - v[0]) / 700).max(1) as usize)
            {
                let want = v.partition_point(|&x| x < at);
                for from in [0, want / 2, want] {
                    assert_eq!(
                        ix.first_at_least::<false>(v, from, at),
                        want,
                        "at {at} from {from}"
                    );
                    assert_eq!(
                        ix.first_at_least::<true>(v, from, at),
                        want,
                        "at {at} from {from}"
                    );
                }
            }
        }
    }

    /// Slots that share an instant are joined; others kept as they are.
    /// The set trades listed are exactly those `is_set` says, ascending,
    /// across word boundaries and in a full word.
    #[test]
    fn set_bits_lists_what_is_set() {
        let bits = [0b1001u64, 0, u64::MAX, 1 << 63];
        let listed: Vec<usize> = set_bits(&bits).collect();
        let want: Vec<usize> = (0..256).filter(|&i| is_set(&bits, i)).collect();
        assert_eq!(listed, want);
        assert_eq!(listed.len(), 2 + 64 + 1);
        assert_eq!((listed[0], listed[1], listed[66]), (0, 3, 255));
    }

    #[test]
    fn overlapping_slots_are_joined() {
        let mut s = vec![(0, 10), (5, 8), (10, 12), (13, 20), (14, 30), (31, 31)];
        merge_overlapping(&mut s);
        assert_eq!(s, vec![(0, 12), (13, 30), (31, 31)]);
        let mut none: Vec<(i64, i64)> = Vec::new();
        merge_overlapping(&mut none);
        assert!(none.is_empty());
    }
}
