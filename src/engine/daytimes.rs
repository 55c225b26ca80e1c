//! Exposure flags of moved calendars (the placebo calendars of
//! docs/method.md §7), eight calendars at a time, from what a move keeps.
//!
//! A move changes only a window's weekday: its currency, time of day and
//! offsets from the release instant (together, its *shape*) stay. So the
//! question "which windows could meet this trade" is asked once per trade,
//! not once per calendar: [`DayTimeIndex`] keeps, for each trade, the
//! weekdays on which a window could meet its query and, for each, the set of
//! shapes that would (a few bits). A moved calendar is then a table of the
//! shapes it puts on each weekday; a trade is exposed when one of its
//! (weekday, shapes) meets that table. Weekdays on which every possible
//! window would meet a trade's query (those well inside a long holding) are
//! kept as a range instead: any moved window of one of its currencies there
//! meets it.
//!
//! The same flags as [`super::shifted::TradeIndex::mark`] on
//! [`ShiftedCalendar::shift`]'s slots (tested): the same closed-interval
//! rule (a query `[qs, qe]` meets a slot `[s, e]` when `qs ≤ e` and
//! `qe ≥ s`), decided per shape. That index marks a calendar window by
//! window, at a cost per window and nearby trade; this one costs a few
//! operations per trade for eight calendars, and needs no search per
//! calendar. Written here: no crate indexes intervals by time of day.

use super::shifted::ShiftedCalendar;
use crate::engine::exposure::ExposureRule;
use crate::import::zones::{DAY_MS, is_weekday, weekday_index};
use rayon::prelude::*;
use std::collections::HashMap;

/// Calendars marked together by [`DayTimeIndex::mark_each`].
pub const LANES: usize = 8;

/// Most window shapes [`DayTimeIndex::new`] indexes (16 words of shapes a
/// weekday: a moved calendar's table is then at most 1 KiB a weekday).
pub const MAX_SHAPES: usize = 1024;

/// Most further entries a trade may have on average (past its first) for
/// [`DayTimeIndex::new`] to build: each is 16 bytes and a lookup per
/// calendar, where the first costs no branch. On a calendar of 20 000
/// releases at random minutes (7 445 shapes) there were 5.4 a trade, and
/// the placebo phase took three times as long as the window-by-window
/// index's; on the benchmark calendar (82 shapes) 0.13.
pub const MAX_MORE: f64 = 0.5;

/// The trades, by number, and what each moved calendar could expose them to.
#[derive(Debug)]
pub struct DayTimeIndex {
    trades: usize,
    /// The shape of each used window of the calendar (by its index).
    shape_of: Vec<u32>,
    /// Words of one weekday's set of shapes.
    words: usize,
    first_weekday: i64,
    /// Weekdays a moved window can land on.
    span: usize,
    currencies: usize,
    /// Trade k's first entry, `first_row[k]` and `first_mask[k]`: the
    /// shapes of word `row % words` (bits of `mask`; none: no entry) would
    /// meet it on weekday `first_weekday + row / words`. One per trade, so
    /// that the pass over them has no branch; the few further entries are
    /// in `more`. Two columns: 12 bytes a trade, where the pair takes 16.
    first_row: Vec<u32>,
    first_mask: Vec<u64>,
    /// Further entries.
    more: Vec<Further>,
    /// Trades with whole weekdays inside their query.
    inside: Vec<Inside>,
    /// The currency sets of the trades (calendar currency numbers, sorted).
    sets: Vec<Vec<u32>>,
}

/// Weekdays `first..=last` (from the index's first weekday) on which every
/// window would meet trade `trade`'s query; `set`: its currencies.
#[derive(Debug, Clone, Copy)]
struct Inside {
    trade: u32,
    set: u32,
    first: u32,
    last: u32,
}

/// A further entry of a trade: (trade, row, mask), as the first entries'.
type Further = (u32, u32, u64);

/// A window's place in its day: currency, then start and end (time of day
/// plus offsets; either may leave the day).
type Shape = (u32, i64, i64);

/// Scratch of [`DayTimeIndex::mark_each`], kept between calls.
#[derive(Debug, Default)]
pub struct MovedTable {
    /// Per (weekday, shape word): the shapes each calendar puts there.
    cells: Vec<[u64; LANES]>,
    /// Cells set by the last calendars, to clear.
    touched: Vec<u32>,
    /// Per (currency, weekday word): the weekdays each calendar puts a
    /// window of that currency on.
    occupied: Vec<[u64; LANES]>,
}

impl DayTimeIndex {
    /// Indexes the trades under `rule` (query `[open, open]` for `entered`,
    /// `[open, close]` otherwise) against the moves of `calendar`; trade
    /// number k is input trade `order[k]`. `None` when the calendar's
    /// windows come in too many shapes for this index to pay: more than
    /// [`MAX_SHAPES`], or more than [`MAX_MORE`] further entries a trade
    /// (trades meeting shapes in several words, or on several weekdays: as
    /// release times spread over the clock, in a calendar of every minute):
    /// the window-by-window index ([`super::shifted::TradeIndex`]) then
    /// costs less, in time and memory.
    pub fn new(
        calendar: &ShiftedCalendar,
        opened: &[i64],
        closed: &[i64],
        instrument: &[u32],
        instrument_currencies: &[Vec<String>],
        rule: ExposureRule,
        order: &[u32],
    ) -> Option<DayTimeIndex> {
        let shapes = Shapes::new(calendar)?;
        let currencies = calendar.currencies();
        // Each instrument's currency set.
        let mut set_ids: HashMap<Vec<u32>, u32> = HashMap::new();
        let mut sets: Vec<Vec<u32>> = Vec::new();
        let set_of: Vec<Option<u32>> =
            super::shifted::currency_numbers(currencies, instrument_currencies)
                .into_iter()
                .map(|v| {
                    (!v.is_empty()).then(|| {
                        *set_ids.entry(v.clone()).or_insert_with(|| {
                            sets.push(v);
                            (sets.len() - 1) as u32
                        })
                    })
                })
                .collect();
        // Trade k's entries and inside range, in parallel by blocks; the
        // first entries straight into their columns.
        const BLOCK: usize = 1 << 15;
        let n = order.len();
        let (mut first_row, mut first_mask) = (vec![0u32; n], vec![0u64; n]);
        let blocks: Option<Vec<(Vec<Further>, Vec<Inside>)>> = order
            .par_chunks(BLOCK)
            .zip(first_row.par_chunks_mut(BLOCK))
            .zip(first_mask.par_chunks_mut(BLOCK))
            .enumerate()
            .map(|(blk, ((chunk, rows), masks))| {
                let (mut more, mut inside, mut day) = (Vec::new(), Vec::new(), Vec::new());
                for (j, &i) in chunk.iter().enumerate() {
                    let i = i as usize;
                    let Some(set) = set_of[instrument[i] as usize] else {
                        continue;
                    };
                    let k = (blk * BLOCK + j) as u32;
                    let (qs, qe) = rule.query(opened[i], closed[i]);
                    let within =
                        shapes.entries(qs, qe, &sets[set as usize], &mut day, |row, mask| {
                            if masks[j] == 0 {
                                (rows[j], masks[j]) = (row, mask);
                            } else {
                                more.push((k, row, mask));
                            }
                        });
                    if let Some((first, last)) = within {
                        inside.push(Inside {
                            trade: k,
                            set,
                            first,
                            last,
                        });
                    }
                    if more.len() > (chunk.len() as f64 * MAX_MORE) as usize + 64 {
                        return None;
                    }
                }
                Some((more, inside))
            })
            .collect();
        let (mut more, mut inside) = (Vec::new(), Vec::new());
        for (m, ins) in blocks? {
            more.extend(m);
            inside.extend(ins);
        }
        Some(DayTimeIndex {
            trades: n,
            shape_of: shapes.shape_of,
            words: shapes.words,
            first_weekday: shapes.first_weekday,
            span: shapes.span,
            currencies: currencies.len(),
            first_row,
            first_mask,
            more,
            inside,
            sets,
        })
    }

    /// Words of a flag set for these trades (bit k of word k / 64 = trade k).
    pub fn words(&self) -> usize {
        self.trades.div_ceil(64)
    }

    /// Sets in `bits[b]` (every word written; [`Self::words`] long) the
    /// trades that meet a window of `calendar` moved by `shifts[b]` weekdays
    /// (at most [`LANES`] shifts); returns how many windows each move
    /// dropped.
    pub fn mark_each(
        &self,
        calendar: &ShiftedCalendar,
        shifts: &[i64],
        table: &mut MovedTable,
        bits: &mut [&mut [u64]],
    ) -> [usize; LANES] {
        assert!(shifts.len() <= LANES && shifts.len() == bits.len());
        let span_words = self.span.div_ceil(64);
        table.cells.resize(self.span * self.words, [0; LANES]);
        table.occupied.clear();
        table
            .occupied
            .resize(self.currencies * span_words, [0; LANES]);
        let mut dropped = [0; LANES];
        for (b, &d) in shifts.iter().enumerate() {
            let (cells, touched, occupied) =
                (&mut table.cells, &mut table.touched, &mut table.occupied);
            dropped[b] = calendar.each_moved(d, |i, w, weekday, _| {
                let u = (weekday - self.first_weekday) as usize;
                let shape = self.shape_of[i] as usize;
                let row = u * self.words + shape / 64;
                cells[row][b] |= 1 << (shape % 64);
                touched.push(row as u32);
                occupied[w.currency as usize * span_words + u / 64][b] |= 1 << (u % 64);
            });
        }
        self.mark_trades(&table.cells, bits);
        for ins in &self.inside {
            let mut hit = 0u64;
            let (first, last) = (ins.first as usize, ins.last as usize);
            for &c in &self.sets[ins.set as usize] {
                for w in first / 64..=last / 64 {
                    let lo = if w == first / 64 { first % 64 } else { 0 };
                    let hi = if w == last / 64 { last % 64 } else { 63 };
                    let range = (u64::MAX >> (63 - hi)) & (u64::MAX << lo);
                    let cell = &table.occupied[c as usize * span_words + w];
                    for (l, &o) in cell.iter().enumerate() {
                        hit |= ((o & range != 0) as u64) << l;
                    }
                }
            }
            let t = ins.trade as usize;
            for (b, out) in bits.iter_mut().enumerate() {
                out[t / 64] |= (hit >> b & 1) << (t % 64);
            }
        }
        for &row in &table.touched {
            table.cells[row as usize] = [0; LANES];
        }
        table.touched.clear();
        dropped
    }
}

impl DayTimeIndex {
    /// Every trade's flags from its entries: a bit per calendar, every word
    /// of `bits` written ([`first_flags`]), then the further entries.
    fn mark_trades(&self, cells: &[[u64; LANES]], bits: &mut [&mut [u64]]) {
        first_flags(&self.first_row, &self.first_mask, cells, bits);
        for &(t, row, mask) in &self.more {
            let hit = meets(&cells[row as usize], mask) as u64;
            let t = t as usize;
            for (b, out) in bits.iter_mut().enumerate() {
                out[t / 64] |= (hit >> b & 1) << (t % 64);
            }
        }
    }
}

/// Trade k's flag under calendar l (bit k of `bits[l]`, every word
/// written) from its one entry (`rows[k]`, `masks[k]`) in `cells`. On
/// x86-64 CPUs with AVX2 in vector instructions, chosen at run time (the
/// same flags, tested).
fn first_flags(rows: &[u32], masks: &[u64], cells: &[[u64; LANES]], bits: &mut [&mut [u64]]) {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") {
        // SAFETY: the CPU has AVX2, just checked.
        return unsafe { first_flags_avx2(rows, masks, cells, bits) };
    }
    first_flags_portable(rows, masks, cells, bits)
}

/// [`first_flags`] in plain Rust.
fn first_flags_portable(
    rows: &[u32],
    masks: &[u64],
    cells: &[[u64; LANES]],
    bits: &mut [&mut [u64]],
) {
    for (w, (rows, masks)) in rows.chunks(64).zip(masks.chunks(64)).enumerate() {
        // Byte t: trade t's flag under each calendar (bit l: calendar l),
        // eight trades' bytes turned into eight calendars' at a time.
        let mut hits = [0u8; 64];
        for ((hit, &row), &mask) in hits.iter_mut().zip(rows).zip(masks) {
            *hit = meets(&cells[row as usize], mask);
        }
        let mut words = [0u64; LANES];
        for (g, eight) in hits.chunks_exact(8).enumerate() {
            let by_lane = transpose8(u64::from_le_bytes(eight.try_into().expect("8")));
            for (l, word) in words.iter_mut().enumerate() {
                *word |= (by_lane >> (8 * l) & 0xff) << (8 * g);
            }
        }
        for (out, &word) in bits.iter_mut().zip(&words) {
            out[w] = word;
        }
    }
}

/// [`first_flags`] in AVX2: a trade's cell is two registers, ANDed with its
/// mask and compared with zero (one sign bit per calendar); calendar l's
/// word is then bit l of the 64 trades' bytes, shifted to each byte's top
/// bit and gathered by `movemask`.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn first_flags_avx2(rows: &[u32], masks: &[u64], cells: &[[u64; LANES]], bits: &mut [&mut [u64]]) {
    use std::arch::x86_64::*;
    let zero = _mm256_setzero_si256();
    // SAFETY (every load below): 32 bytes within a 64-byte cell or within
    // the 64-byte `hits`; unaligned loads are allowed.
    let load = |p: *const u64| unsafe { _mm256_loadu_si256(p as *const __m256i) };
    for (w, (rows, masks)) in rows.chunks(64).zip(masks.chunks(64)).enumerate() {
        let mut hits = [0u8; 64];
        for ((hit, &row), &mask) in hits.iter_mut().zip(rows).zip(masks) {
            let cell = cells[row as usize].as_ptr();
            let m = _mm256_set1_epi64x(mask as i64);
            // SAFETY: see `load`; the second half starts 4 words in.
            let (a, b) = (load(cell), load(unsafe { cell.add(4) }));
            let none_a = _mm256_cmpeq_epi64(_mm256_and_si256(a, m), zero);
            let none_b = _mm256_cmpeq_epi64(_mm256_and_si256(b, m), zero);
            let none = _mm256_movemask_pd(_mm256_castsi256_pd(none_a))
                | _mm256_movemask_pd(_mm256_castsi256_pd(none_b)) << 4;
            *hit = !(none as u8);
        }
        let p = hits.as_ptr() as *const u64;
        // SAFETY: see `load`.
        let (lo, hi) = (load(p), load(unsafe { p.add(4) }));
        for (l, out) in bits.iter_mut().enumerate() {
            // Bit l of each byte to its top bit (16-bit shifts: the high
            // byte's top bit comes from its own bit l).
            let by = _mm_cvtsi32_si128(7 - l as i32);
            let a = _mm256_movemask_epi8(_mm256_sll_epi16(lo, by)) as u32 as u64;
            let b = _mm256_movemask_epi8(_mm256_sll_epi16(hi, by)) as u32 as u64;
            out[w] = a | b << 32;
        }
    }
}

/// Bit l: calendar l puts one of the shapes in `mask` in this cell.
#[inline(always)]
fn meets(cell: &[u64; LANES], mask: u64) -> u8 {
    let mut hit = 0u8;
    for (l, &c) in cell.iter().enumerate() {
        hit |= ((c & mask != 0) as u8) << l;
    }
    hit
}

/// The 8 × 8 bit matrix in `x` (bit c of byte r: row r, column c)
/// transposed (Hacker's Delight, 2nd ed., §7–3: three swaps of blocks).
fn transpose8(mut x: u64) -> u64 {
    let mut t = (x ^ (x >> 7)) & 0x00AA_00AA_00AA_00AA;
    x ^= t ^ (t << 7);
    t = (x ^ (x >> 14)) & 0x0000_CCCC_0000_CCCC;
    x ^= t ^ (t << 14);
    t = (x ^ (x >> 28)) & 0x0000_0000_F0F0_F0F0;
    x ^ t ^ (t << 28)
}

/// The distinct shapes of a calendar's windows, sorted by currency, start
/// and end, and what [`DayTimeIndex::new`] asks of them per trade.
struct Shapes {
    shapes: Vec<Shape>,
    /// The shape of each used window of the calendar (by its index).
    shape_of: Vec<u32>,
    /// Words of one weekday's set of shapes.
    words: usize,
    /// Per calendar currency: its shapes' range and its longest shape.
    ranges: Vec<(usize, usize, i64)>,
    /// Over all shapes: the earliest and latest start and end.
    min_start: i64,
    max_start: i64,
    min_end: i64,
    max_end: i64,
    first_weekday: i64,
    span: usize,
}

impl Shapes {
    /// `None` past [`MAX_SHAPES`].
    fn new(calendar: &ShiftedCalendar) -> Option<Shapes> {
        let windows = calendar.prepared();
        let shape = |w: &super::shifted::Prepared| -> Shape {
            (
                w.currency,
                w.time_of_day + w.start_offset,
                w.time_of_day + w.end_offset,
            )
        };
        let mut shapes: Vec<Shape> = windows.iter().map(shape).collect();
        shapes.sort_unstable();
        shapes.dedup();
        if shapes.len() > MAX_SHAPES {
            return None;
        }
        let shape_of = windows
            .iter()
            .map(|w| shapes.binary_search(&shape(w)).expect("listed") as u32)
            .collect();
        let ranges = (0..calendar.currencies().len() as u32)
            .map(|c| {
                let lo = shapes.partition_point(|s| s.0 < c);
                let hi = shapes.partition_point(|s| s.0 <= c);
                let longest = shapes[lo..hi].iter().map(|s| s.2 - s.1).max().unwrap_or(0);
                (lo, hi, longest.max(0))
            })
            .collect();
        let bound = |f: fn(&Shape) -> i64, max: bool| {
            let v = shapes.iter().map(f);
            if max { v.max() } else { v.min() }.unwrap_or(0)
        };
        Some(Shapes {
            words: shapes.len().div_ceil(64).max(1),
            min_start: bound(|s| s.1, false),
            max_start: bound(|s| s.1, true),
            min_end: bound(|s| s.2, false),
            max_end: bound(|s| s.2, true),
            shapes,
            shape_of,
            ranges,
            first_weekday: calendar.first_weekday(),
            span: calendar.span().max(0) as usize,
        })
    }

    /// A trade's query `[qs, qe]` against the shapes of the currencies in
    /// `set`: `entry(row, mask)` for each weekday on which some would meet
    /// it (row: weekday from the first × words + word), and the weekdays
    /// (from the first) on which every shape would, if any. A day can hold
    /// a meeting window only if the earliest start is by the query's end
    /// and the latest end at or after its start; every window meets the
    /// query if the latest start and the earliest end do. `day`: scratch.
    fn entries(
        &self,
        qs: i64,
        qe: i64,
        set: &[u32],
        day: &mut Vec<(u32, u64)>,
        mut entry: impl FnMut(u32, u64),
    ) -> Option<(u32, u32)> {
        if self.shapes.is_empty() {
            return None;
        }
        let in_lo = ceil_div(qs.saturating_sub(self.min_end), DAY_MS);
        let in_hi = qe.saturating_sub(self.max_start).div_euclid(DAY_MS);
        let lo = ceil_div(qs.saturating_sub(self.max_end), DAY_MS);
        let hi = qe.saturating_sub(self.min_start).div_euclid(DAY_MS);
        let mut d = lo;
        while d <= hi {
            if in_lo <= in_hi && d == in_lo {
                d = in_hi + 1;
                continue;
            }
            if let Some(u) = self.weekday_from_first(d) {
                self.meeting(qs - d * DAY_MS, qe - d * DAY_MS, set, day);
                for &(w, m) in day.iter() {
                    entry(u * self.words as u32 + w, m);
                }
            }
            d += 1;
        }
        if in_lo > in_hi {
            return None;
        }
        // The first and last weekdays in the range, within the span.
        let first = weekday_index(in_lo).max(self.first_weekday);
        let last = (weekday_index(in_hi + 1) - 1).min(self.first_weekday + self.span as i64 - 1);
        (first <= last).then(|| {
            (
                (first - self.first_weekday) as u32,
                (last - self.first_weekday) as u32,
            )
        })
    }

    /// Day `d`'s weekday number from the first, when it is a weekday
    /// within the span (no window is moved onto another day).
    fn weekday_from_first(&self, d: i64) -> Option<u32> {
        let u = weekday_index(d) - self.first_weekday;
        (is_weekday(d) && (0..self.span as i64).contains(&u)).then_some(u as u32)
    }

    /// Into `day`, as (word, bits): the shapes of `set`'s currencies whose
    /// window, placed on a day, meets a query `[a, b]` from that day's
    /// start. Per currency, the shapes starting by the query's end, back to
    /// those that could still reach its start.
    fn meeting(&self, a: i64, b: i64, set: &[u32], day: &mut Vec<(u32, u64)>) {
        day.clear();
        for &c in set {
            let (from, to, longest) = self.ranges[c as usize];
            let end = from + self.shapes[from..to].partition_point(|s| s.1 <= b);
            for x in (from..end).rev() {
                if self.shapes[x].1.saturating_add(longest) < a {
                    break;
                }
                if self.shapes[x].2 >= a {
                    let (w, bit) = ((x / 64) as u32, 1u64 << (x % 64));
                    match day.iter_mut().find(|e| e.0 == w) {
                        Some(e) => e.1 |= bit,
                        None => day.push((w, bit)),
                    }
                }
            }
        }
    }
}

/// ⌈a ÷ b⌉ for b > 0 (any sign of a).
fn ceil_div(a: i64, b: i64) -> i64 {
    -((-a).div_euclid(b))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::exposure::UsedWindow;
    use crate::import::calendar::{Release, Tier};
    use crate::import::zones::MINUTE_MS;

    /// `n` USD releases at distinct minutes of the clock (one a weekday
    /// from 2024-01-01), each with a window of 5 minutes either side.
    fn spread_calendar(n: i64) -> (Vec<Release>, Vec<UsedWindow>) {
        let monday = 19_723 * DAY_MS; // 2024-01-01T00:00Z
        let releases: Vec<Release> = (0..n)
            .map(|i| {
                let at = monday + (i / 5 * 7 + i % 5) * DAY_MS + (i * 7 % 1440) * MINUTE_MS;
                Release {
                    id: format!("r{i}"),
                    at,
                    end: at,
                    all_day: false,
                    title: format!("series {i}"),
                    currency: "USD".into(),
                    tier: Tier::High,
                    category: None,
                    region: None,
                }
            })
            .collect();
        let windows = releases
            .iter()
            .enumerate()
            .map(|(i, r)| UsedWindow {
                release: i as u32,
                currency: r.currency.clone(),
                start: r.at - 5 * MINUTE_MS,
                end: r.at + 5 * MINUTE_MS,
                at: r.at,
                all_day: false,
            })
            .collect();
        (releases, windows)
    }

    /// The index is declined where its shapes would not pay: more than
    /// [`MAX_SHAPES`] of them, or trades long enough to meet shapes in
    /// several words each; built for the same calendar's short trades.
    #[test]
    fn too_many_shapes_are_declined() {
        let build = |n: i64, hold_minutes: i64| {
            let (releases, windows) = spread_calendar(n);
            let cal = ShiftedCalendar::new(&releases, &windows, ExposureRule::Overlap);
            let trades = 2000i64;
            let opened: Vec<i64> = (0..trades)
                .map(|k| releases[0].at + k * 37 * MINUTE_MS)
                .collect();
            let closed: Vec<i64> = opened
                .iter()
                .map(|o| o + hold_minutes * MINUTE_MS)
                .collect();
            let order: Vec<u32> = (0..trades as u32).collect();
            DayTimeIndex::new(
                &cal,
                &opened,
                &closed,
                &vec![0; trades as usize],
                &[vec!["USD".to_string()]],
                ExposureRule::Overlap,
                &order,
            )
        };
        // 1 440 distinct minutes in 1 100 releases: 1 100 shapes.
        assert!(build(1100, 1).is_none());
        // 600 shapes (ten words): a 12-hour holding meets most words.
        assert!(build(600, 720).is_none());
        // The same calendar and one-minute holdings: one word a trade.
        assert!(build(600, 1).is_some());
        assert!(build(1000, 1).is_some());
    }

    /// The AVX2 flags equal the portable ones (which use [`transpose8`]),
    /// on random cells, masks and rows, a partial last word and fewer
    /// calendars than lanes (compares nothing on a CPU without AVX2).
    #[test]
    fn avx2_flags_equal_portable_flags() {
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") {
            let mut x = 99u64;
            let mut next = || {
                x = x
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                x ^ x >> 29
            };
            // Sparse cells and masks, so that hits and misses both occur.
            let cells: Vec<[u64; LANES]> = (0..50)
                .map(|_| std::array::from_fn(|_| next() & next() & next()))
                .collect();
            for (trades, lanes) in [(1000usize, LANES), (130, 3)] {
                let rows: Vec<u32> = (0..trades).map(|_| (next() % 50) as u32).collect();
                let masks: Vec<u64> = (0..trades).map(|_| next() & next()).collect();
                let words = trades.div_ceil(64);
                let run = |avx2: bool| {
                    let mut out = vec![vec![u64::MAX; words]; lanes];
                    let mut refs: Vec<&mut [u64]> =
                        out.iter_mut().map(|v| v.as_mut_slice()).collect();
                    if avx2 {
                        // SAFETY: the CPU has AVX2, just checked.
                        unsafe { first_flags_avx2(&rows, &masks, &cells, &mut refs) };
                    } else {
                        first_flags_portable(&rows, &masks, &cells, &mut refs);
                    }
                    out
                };
                let (fast, by_hand) = (run(true), run(false));
                assert_eq!(fast, by_hand);
                // And each flag as its definition says.
                for (l, lane) in by_hand.iter().enumerate() {
                    for k in 0..trades {
                        let want = cells[rows[k] as usize][l] & masks[k] != 0;
                        assert_eq!(lane[k / 64] >> (k % 64) & 1 == 1, want);
                    }
                }
                let set: usize = by_hand
                    .iter()
                    .flatten()
                    .map(|w| w.count_ones() as usize)
                    .sum();
                assert!(set > trades / 10 && set < trades * lanes * 9 / 10, "{set}");
            }
        }
    }

    /// Bit c of byte r lands at bit r of byte c, for every (r, c) and on
    /// a dense matrix.
    #[test]
    fn transpose8_swaps_rows_and_columns() {
        for r in 0..8 {
            for c in 0..8 {
                assert_eq!(transpose8(1 << (8 * r + c)), 1 << (8 * c + r), "({r}, {c})");
            }
        }
        let x = 0x0123_4567_89ab_cdefu64;
        let t = transpose8(x);
        for r in 0..8 {
            for c in 0..8 {
                assert_eq!(x >> (8 * r + c) & 1, t >> (8 * c + r) & 1);
            }
        }
        assert_eq!(transpose8(t), x);
    }
}
