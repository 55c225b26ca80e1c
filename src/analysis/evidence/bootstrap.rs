//! Bootstrap intervals of removed − baseline (docs/method.md §7).

use crate::analysis::metrics::{self, Context, quantile_type7};
use crate::analysis::scenarios::{self, ScenarioSettings, TradeView};
use crate::import::trades::Trades;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use serde::Serialize;
use std::collections::BTreeMap;

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

/// Resample `r` of a seeded bootstrap as trade indices: each trade's
/// count from [`draw_counts`] (by position in `order`, the weighted pass's
/// layout: close order, or its segments by exposure and sign),
/// that trade repeated as often. Each resample is drawn on its own (in any
/// order, on any thread) and only the ones being evaluated are held in
/// memory — 2 000 resamples of 10 million trades would otherwise take
/// 80 GB.
pub fn resample(order: &[u32], seed: u64, r: usize) -> Vec<u32> {
    let mut counts: Vec<u32> = Vec::new();
    let fits = draw_counts(order.len(), seed, r, &mut counts);
    debug_assert!(fits, "u32 counts hold any resample");
    let mut out = Vec::with_capacity(order.len());
    for (&i, &c) in order.iter().zip(&counts) {
        out.extend(std::iter::repeat_n(i, c as usize));
    }
    out
}

/// A per-trade draw count: one byte in the weighted pass (a resample that
/// draws a trade 256 times or more goes to the slow path), four elsewhere.
pub trait DrawCount: Copy {
    /// No draw.
    const ZERO: Self;
    /// A count of at most 64 (a Poisson step count), which every count
    /// type holds.
    fn small(k: u32) -> Self;
    /// Adds one draw; false when the count would not fit.
    fn add_one(&mut self) -> bool;
    /// The count.
    fn get(self) -> u32;
    /// The first position at or after `from` holding [`UNSETTLED`].
    fn next_unsettled(counts: &[Self], from: usize) -> Option<usize> {
        let at = counts[from..].iter().position(|c| c.get() == UNSETTLED)?;
        Some(from + at)
    }
    /// Every position's [`settled_count`] from its 16-bit word (`bytes`:
    /// two a position, little-endian) into `dst`; whether any is
    /// [`UNSETTLED`].
    fn settle(bytes: &[u8], dst: &mut [Self], tops: &[u16; 6], last: u16) -> bool {
        settle_portable(bytes, dst, tops, last)
    }
}

/// [`DrawCount::settle`] word by word (without a branch a word).
#[inline(always)]
fn settle_portable<C: DrawCount>(bytes: &[u8], dst: &mut [C], tops: &[u16; 6], last: u16) -> bool {
    let mut any = false;
    for (c, b) in dst.iter_mut().zip(bytes.chunks_exact(2)) {
        let k = settled_count(u16::from_le_bytes([b[0], b[1]]), tops, last);
        any |= k == UNSETTLED;
        *c = C::small(k);
    }
    any
}

/// [`DrawCount::settle`] of one-byte counts in AVX2, sixteen words at a
/// time: the unsigned comparisons as signed ones of the words with the
/// top bit flipped (one instruction each), the count as minus the sum of
/// the comparisons' all-ones masks, packed to bytes. The same counts as
/// [`settled_count`] (tested on every word).
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn settle_avx2(bytes: &[u8], dst: &mut [u8], tops: &[u16; 6], last: u16) -> bool {
    use std::arch::x86_64::*;
    let flipped = |x: u16| _mm256_set1_epi16((x ^ 0x8000) as i16);
    let top_bit = _mm256_set1_epi16(i16::MIN);
    let tops_flipped: [__m256i; 6] = std::array::from_fn(|k| flipped(tops[k]));
    let tops_plain: [__m256i; 6] = std::array::from_fn(|k| _mm256_set1_epi16(tops[k] as i16));
    let last_flipped = flipped(last);
    let all_ones = _mm256_set1_epi16(-1);
    let unsettled = _mm256_set1_epi16(UNSETTLED as i16);
    let mut any = _mm256_setzero_si256();
    let n = dst.len().min(bytes.len() / 2);
    let mut i = 0;
    while i + 16 <= n {
        // SAFETY: 32 bytes from 2i are within `bytes` (2i + 32 ≤ 2n); 16
        // bytes from i within `dst` (i + 16 ≤ n); unaligned access is allowed.
        let w = unsafe { _mm256_loadu_si256(bytes.as_ptr().add(2 * i) as *const __m256i) };
        let w_flipped = _mm256_xor_si256(w, top_bit);
        // At or past the last step's top bits: open.
        let mut open = _mm256_xor_si256(_mm256_cmpgt_epi16(last_flipped, w_flipped), all_ones);
        let mut k = _mm256_setzero_si256();
        for (tf, tp) in tops_flipped.iter().zip(&tops_plain) {
            k = _mm256_sub_epi16(k, _mm256_cmpgt_epi16(w_flipped, *tf));
            open = _mm256_or_si256(open, _mm256_cmpeq_epi16(w, *tp));
        }
        let counts = _mm256_blendv_epi8(k, unsettled, open);
        // Bytes 0–7 of each 128-bit half hold its eight counts: halves'
        // low quarters moved together.
        let packed = _mm256_packus_epi16(counts, counts);
        let ordered = _mm256_permute4x64_epi64::<0b00_00_10_00>(packed);
        // SAFETY: see the load.
        unsafe {
            _mm_storeu_si128(
                dst.as_mut_ptr().add(i) as *mut __m128i,
                _mm256_castsi256_si128(ordered),
            )
        };
        any = _mm256_or_si256(any, open);
        i += 16;
    }
    let rest = settle_portable(&bytes[2 * i..2 * n], &mut dst[i..n], tops, last);
    rest || _mm256_testz_si256(any, any) == 0
}

impl DrawCount for u8 {
    const ZERO: u8 = 0;
    #[inline(always)]
    fn get(self) -> u32 {
        self as u32
    }
    #[inline(always)]
    fn small(k: u32) -> u8 {
        k as u8
    }
    #[inline(always)]
    fn add_one(&mut self) -> bool {
        self.checked_add(1).map(|v| *self = v).is_some()
    }
    /// A byte search (SIMD, `memchr`): the block seldom holds one.
    fn next_unsettled(counts: &[u8], from: usize) -> Option<usize> {
        Some(from + memchr::memchr(UNSETTLED as u8, &counts[from..])?)
    }
    /// In AVX2 where the CPU has it (chosen at run time).
    #[inline(always)]
    fn settle(bytes: &[u8], dst: &mut [u8], tops: &[u16; 6], last: u16) -> bool {
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the CPU has AVX2, just checked.
            return unsafe { settle_avx2(bytes, dst, tops, last) };
        }
        settle_portable(bytes, dst, tops, last)
    }
}

impl DrawCount for u32 {
    const ZERO: u32 = 0;
    #[inline(always)]
    fn get(self) -> u32 {
        self
    }
    #[inline(always)]
    fn small(k: u32) -> u32 {
        k
    }
    #[inline(always)]
    fn add_one(&mut self) -> bool {
        self.checked_add(1).map(|v| *self = v).is_some()
    }
}

/// How many times resample `r` of `seed` draws each of `n` trades, into
/// `counts` (index: position in close order); false when a count does not
/// fit its type.
///
/// The counts are those of n draws with replacement, each of the n trades
/// equally likely (a multinomial count vector), made without n random
/// writes: every position gets a Poisson(λ) count in turn, λ = 1 − 4/√n
/// (at least ½), by a uniform 64-bit value against the Poisson distribution
/// function scaled to 2⁶⁴. The value's top 16 bits are the position's
/// 16-bit word of stream `r` of `seed` ([`Words`]); they settle the count
/// unless they equal a step's top 16 bits or reach the seventh step's
/// (about 2 positions in 10 000), when its other 48 bits come from stream
/// `r + 2⁶³` of the same seed. When the counts add up to more than n
/// (probability ≈ 3·10⁻⁵ for large n) all are drawn again, the streams
/// going on; then the n − total missing draws go to uniformly drawn
/// positions (from the second stream). Given their total s, independent
/// Poisson counts are multinomial with s draws, equally likely trades
/// (whatever λ); adding n − s independent uniform draws makes n. λ below 1
/// makes the redraw rare; the number of positions drawn one by one is
/// about 4√n. Thresholds are computed in double precision (the
/// probabilities are exact to about 10⁻¹⁶).
pub fn draw_counts<C: DrawCount>(n: usize, seed: u64, r: usize, counts: &mut Vec<C>) -> bool {
    counts.clear();
    counts.resize(n, C::ZERO);
    draw_into(n, seed, r, counts)
}

/// [`draw_counts`] into `out` (n long).
fn draw_into<C: DrawCount>(n: usize, seed: u64, r: usize, out: &mut [C]) -> bool {
    if n == 0 {
        return true;
    }
    let mut draw = CountDraw::new(n, seed, r);
    let mut total = draw.block(&mut out[..n]);
    draw.finish(out, 1, &mut total)
}

/// The first draw of every position for resamples side by side, into
/// interleaved `counts` (lane l of position j at `j · LANES + l`), block by
/// block across the lanes so that the counts are filled while in cache;
/// `totals` gets each lane's sum. Compiled for AVX2 too, chosen at run time
/// (the same words and counts either way).
fn draw_side_by_side(draws: &mut [CountDraw], counts: &mut [u8], totals: &mut [u64; LANES]) {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") {
        // SAFETY: the CPU has AVX2, just checked.
        return unsafe { draw_side_by_side_avx2(draws, counts, totals) };
    }
    draw_blocks(draws, counts, totals)
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn draw_side_by_side_avx2(draws: &mut [CountDraw], counts: &mut [u8], totals: &mut [u64; LANES]) {
    draw_blocks(draws, counts, totals)
}

#[inline(always)]
fn draw_blocks(draws: &mut [CountDraw], counts: &mut [u8], totals: &mut [u64; LANES]) {
    let n = counts.len() / LANES;
    let mut lane = [[0u8; COUNT_BLOCK]; LANES];
    for start in (0..n).step_by(COUNT_BLOCK) {
        let len = COUNT_BLOCK.min(n - start);
        for (l, d) in draws.iter_mut().enumerate() {
            totals[l] += d.block(&mut lane[l][..len]);
        }
        interleave(&lane, &mut counts[start * LANES..(start + len) * LANES]);
    }
}

/// The lanes' counts of a block (lane l's at `lane[l][i]`) interleaved into
/// `out`: position i's eight counts side by side at `out[i · 8..]`. On
/// x86-64, eight positions at a time by an 8 × 8 byte transpose in SSE2
/// (every x86-64 CPU has it); the rest one by one.
fn interleave(lane: &[[u8; COUNT_BLOCK]; LANES], out: &mut [u8]) {
    let len = out.len() / LANES;
    let mut done = 0;
    #[cfg(target_arch = "x86_64")]
    {
        use std::arch::x86_64::*;
        while done + 8 <= len {
            // SAFETY: bytes done..done + 8 of every lane and 64 bytes of
            // `out` from done · 8 are in bounds (done + 8 ≤ len); the loads
            // and stores have no alignment requirement; SSE2 is part of
            // x86-64.
            unsafe {
                let row = |l: usize| _mm_loadl_epi64(lane[l][done..].as_ptr() as *const __m128i);
                let t01 = _mm_unpacklo_epi8(row(0), row(1));
                let t23 = _mm_unpacklo_epi8(row(2), row(3));
                let t45 = _mm_unpacklo_epi8(row(4), row(5));
                let t67 = _mm_unpacklo_epi8(row(6), row(7));
                let (u0, u1) = (_mm_unpacklo_epi16(t01, t23), _mm_unpackhi_epi16(t01, t23));
                let (u2, u3) = (_mm_unpacklo_epi16(t45, t67), _mm_unpackhi_epi16(t45, t67));
                let at = out[done * LANES..].as_mut_ptr() as *mut __m128i;
                _mm_storeu_si128(at, _mm_unpacklo_epi32(u0, u2));
                _mm_storeu_si128(at.add(1), _mm_unpackhi_epi32(u0, u2));
                _mm_storeu_si128(at.add(2), _mm_unpacklo_epi32(u1, u3));
                _mm_storeu_si128(at.add(3), _mm_unpackhi_epi32(u1, u3));
            }
            done += 8;
        }
    }
    for (i, c) in out.chunks_exact_mut(LANES).enumerate().skip(done) {
        for (l, c) in c.iter_mut().enumerate() {
            *c = lane[l][i];
        }
    }
}

/// One resample's count draw ([`draw_counts`]), made a block of positions
/// at a time so that resamples drawn side by side fill their interleaved
/// counts block by block (in cache) while each takes the same words, in
/// the same order, as when drawn alone.
struct CountDraw {
    n: usize,
    steps: Vec<u64>,
    /// The top 16 bits of the first six steps (past `steps`: u16::MAX).
    tops: [u16; 6],
    /// The top 16 bits of the seventh step (or of the last, if fewer): a
    /// word at or past it is settled by its full value.
    last: u16,
    /// Stream r: a 16-bit word per position.
    main: Words,
    /// Stream r + 2⁶³: the low 48 bits of the few unsettled values, and the
    /// added draws.
    side: Words,
}

impl CountDraw {
    fn new(n: usize, seed: u64, r: usize) -> CountDraw {
        let steps = poisson_steps(n);
        let top = |k: usize| (steps[k] >> 48) as u16;
        let fast = steps.len().min(7);
        let tops = std::array::from_fn(|k| if k + 1 < fast { top(k) } else { u16::MAX });
        let last = top(fast - 1);
        CountDraw {
            n,
            tops,
            last,
            steps,
            main: Words::new(seed, r as u64),
            side: Words::new(seed, r as u64 | 1 << 63),
        }
    }

    /// The Poisson counts of the next `out.len()` positions, in order,
    /// into `out`; returns their sum.
    #[inline(always)]
    fn block<C: DrawCount>(&mut self, out: &mut [C]) -> u64 {
        let (tops, last) = (self.tops, self.last);
        let mut total = 0u64;
        let mut done = 0;
        while done < out.len() {
            let ready = self.main.ready();
            let take = (ready.len() / 2).min(out.len() - done);
            let dst = &mut out[done..done + take];
            // Every word's count from its top bits, without a branch: the
            // steps below it, or UNSETTLED on a step's top bits or at or
            // past the seventh step's.
            if C::settle(&ready[..2 * take], dst, &tops, last) {
                // The other 48 bits decide, in position order.
                let mut from = 0;
                while let Some(i) = C::next_unsettled(dst, from) {
                    let w = u16::from_le_bytes([ready[2 * i], ready[2 * i + 1]]);
                    let high = self.side.next_word() as u64;
                    let low = (high << 16) | (self.side.next_word() >> 16) as u64;
                    let u = (w as u64) << 48 | low;
                    // At most `steps.len()` ≤ 64: fits every count type.
                    dst[i] = C::small(self.steps.iter().take_while(|&&t| u >= t).count() as u32);
                    from = i + 1;
                }
            }
            total += dst.iter().map(|c| c.get() as u64).sum::<u64>();
            self.main.consume(2 * take);
            done += take;
        }
        total
    }

    /// After every position's first draw (`total` their sum): all drawn
    /// again while they add up to more than n, then the missing draws at
    /// uniform positions. False when a count does not fit its type.
    fn finish<C: DrawCount>(&mut self, out: &mut [C], stride: usize, total: &mut u64) -> bool {
        let n = self.n;
        while *total > n as u64 {
            let mut again = vec![C::ZERO; n];
            *total = self.block(&mut again);
            for (j, c) in again.into_iter().enumerate() {
                out[j * stride] = c;
            }
        }
        for _ in *total as usize..n {
            if !out[self.side.index(n as u32) as usize * stride].add_one() {
                return false;
            }
        }
        true
    }
}

/// What [`settled_count`] gives for a word that does not settle its count
/// (no count reaches it: at most 64 steps).
const UNSETTLED: u32 = u8::MAX as u32;

/// The count of a uniform 64-bit value whose top 16 bits are `w`, when
/// they settle it: the steps whose top 16 bits are below w (`tops`: the
/// first six steps' top bits, u16::MAX past the steps; `last`: the
/// seventh's, or the last step's if fewer). [`UNSETTLED`] when w equals a
/// step's top bits or reaches `last`. Without a branch.
#[inline(always)]
fn settled_count(w: u16, tops: &[u16; 6], last: u16) -> u32 {
    let mut k = 0u32;
    let mut unsettled = w >= last;
    for &t in tops {
        k += (w > t) as u32;
        unsettled |= w == t;
    }
    if unsettled { UNSETTLED } else { k }
}

/// The Poisson(λ) distribution function at 0, 1, 2, … scaled to 2⁶⁴ (a
/// count is the number of steps at or below a uniform 64-bit value), for
/// the λ of [`draw_counts`]; it stops where the rest is below 2⁻⁶⁴.
fn poisson_steps(n: usize) -> Vec<u64> {
    let lambda = (1.0 - 4.0 / (n as f64).sqrt()).max(0.5);
    let scale = 2f64.powi(64);
    let (mut term, mut cdf) = ((-lambda).exp(), 0.0f64);
    let mut steps = Vec::new();
    for k in 0..64 {
        cdf += term;
        let step = cdf * scale;
        if step >= scale {
            break;
        }
        steps.push(step as u64);
        if (1.0 - cdf) * scale < 1.0 {
            break;
        }
        term *= lambda / (k + 1) as f64;
    }
    steps
}

/// The resamples a bootstrap evaluates.
#[derive(Debug, Clone, Copy)]
pub enum Resamples<'a> {
    /// `count` resamples of all trades, resample r's counts as
    /// [`draw_counts`] draws them.
    Seeded {
        /// Number of resamples.
        count: usize,
        /// Seed of the resamples.
        seed: u64,
    },
    /// Index sets drawn elsewhere (e.g. by a reference computation).
    Given(&'a [Vec<u32>]),
}

impl Resamples<'_> {
    /// Number of resamples.
    pub fn len(&self) -> usize {
        match self {
            Resamples::Seeded { count, .. } => *count,
            Resamples::Given(sets) => sets.len(),
        }
    }

    /// Whether there are none.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The trade indices of resample `r`; `order` is the trades' close
    /// order, by which seeded counts are laid out.
    pub fn indices(&self, order: &[u32], r: usize) -> Vec<u32> {
        match self {
            Resamples::Seeded { seed, .. } => resample(order, *seed, r),
            Resamples::Given(sets) => sets[r].clone(),
        }
    }
}

/// Bootstrap intervals of removed − baseline over `resamples`.
///
/// Under fixed sizing resamples are evaluated by `Weighted`, eight at a
/// time: one pass over the trades (in close order, or in segments by
/// exposure and sign without the account path) weighted by how often
/// each resample drew each trade, equal to [`changes`] on the same indices
/// to the rounding of the sums. Compounding sizing replays equity per
/// resample and goes through [`changes`]. `account_path`: whether the
/// figures of one account's path ([`ACCOUNT_PATH_FIGURES`]) are wanted;
/// without it they are left out of the result.
#[allow(clippy::too_many_arguments)]
pub fn bootstrap_intervals(
    resamples: Resamples,
    trades: &Trades,
    exposed: &[bool],
    settings: &ScenarioSettings,
    ctx: &Context,
    confidence: f64,
    account_path: bool,
    progress: &(dyn Fn() + Sync),
) -> BTreeMap<&'static str, Interval> {
    let n = trades.len();
    let all: Vec<u32> = (0..n as u32).collect();
    // The observed changes and the weighted pass's layout, side by side.
    let (observed, weighted) = rayon::join(
        || changes(&all, trades, exposed, settings, ctx),
        || Weighted::new(trades, exposed, settings, ctx, false, account_path),
    );
    let count = resamples.len();
    let fixed = settings.sizing == scenarios::Sizing::Fixed;
    // The scenarios cannot be built (a cap needs equity the input does not
    // have): no resample of the same trades can build them either.
    let unbuildable = fixed && observed[0].is_none();
    let weighted = weighted.filter(|_| !unbuildable);
    // The layout seeded counts are drawn in: the weighted pass's own, or
    // (where there is none) the close order, made here from the identity
    // above.
    let own_order: Vec<u32>;
    let order: &[u32] = match &weighted {
        Some(w) => {
            drop(all);
            &w.order
        }
        None => {
            let mut all = all;
            scenarios::close_order(&mut all, &trades.opened, &trades.closed);
            own_order = all;
            &own_order
        }
    };
    let slow = |r: usize| changes(&resamples.indices(order, r), trades, exposed, settings, ctx);
    let reps: Vec<[Option<f64>; 5]> = if unbuildable {
        (0..count).for_each(|_| progress());
        vec![[None; 5]; count]
    } else if let Some(w) = &weighted {
        let pool = std::sync::Mutex::new(Vec::new());
        (0..count.div_ceil(LANES))
            .into_par_iter()
            .flat_map_iter(|b| {
                let first = b * LANES;
                let popped = pool.lock().expect("scratch pool").pop();
                let mut scratch = popped.unwrap_or_else(|| w.lane_scratch());
                let side = w.changes_side_by_side(&mut scratch, &resamples, first, account_path);
                pool.lock().expect("scratch pool").push(scratch);
                let lanes = LANES.min(count - first);
                let batch: Vec<[Option<f64>; 5]> = side[..lanes]
                    .iter()
                    .enumerate()
                    .map(|(l, c)| {
                        let c = c.unwrap_or_else(|| slow(first + l));
                        progress();
                        c
                    })
                    .collect();
                batch
            })
            .collect()
    } else {
        (0..count)
            .into_par_iter()
            .map(|r| {
                let c = slow(r);
                progress();
                c
            })
            .collect()
    };
    BOOTSTRAP_FIGURES
        .iter()
        .enumerate()
        .filter(|(_, name)| account_path || !ACCOUNT_PATH_FIGURES.contains(name))
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

/// Stream `stream` of `seed`, read a block at a time: by 32-bit words
/// ([`Words::next_word`]) or by the buffered bytes ([`Words::ready`], for
/// 16-bit words). A stream is read one way only, so that a word never
/// straddles a refill.
///
/// The words are those of four xoshiro256++ generators (Blackman & Vigna,
/// "Scrambled linear pseudorandom number generators", ACM TOMS 2021) run
/// side by side, their states the first 128 bytes of ChaCha8 stream
/// `stream` of `seed` (lane l's s0..s3 the 64-bit words 4l..4l + 3); the
/// buffer holds their outputs interleaved, little-endian: 64-bit word 4i + l
/// is lane l's i-th output. Written out rather than taken from
/// rand_xoshiro (one generator at a time): the four lanes advance together
/// in one AVX2 register ([`xoshiro_lanes_avx2`], chosen at run time; the
/// lane-by-lane loop is the portable path and does not vectorise) and give
/// the bytes at a fraction of ChaCha8's cost, which was a sixth of the
/// bootstrap's time. A test holds every lane equal to rand_xoshiro's
/// generator from the same state.
struct Words {
    /// `state[k][l]`: lane l's s_k.
    state: [[u64; 4]; 4],
    buf: [u8; 4096],
    at: usize,
}

impl Words {
    fn new(seed: u64, stream: u64) -> Words {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        rng.set_stream(stream);
        let mut by_lane = [[0u64; 4]; 4];
        for lane in &mut by_lane {
            for s in lane.iter_mut() {
                *s = rng.next_u64();
            }
        }
        Words {
            state: std::array::from_fn(|k| std::array::from_fn(|l| by_lane[l][k])),
            buf: [0; 4096],
            at: 4096,
        }
    }

    /// The next 4096 bytes: 128 outputs of each lane, interleaved. On
    /// x86-64 CPUs with AVX2 the four lanes are one register (chosen at run
    /// time; the same outputs, tested).
    fn refill(&mut self) {
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the CPU has AVX2, just checked.
            unsafe { xoshiro_lanes_avx2(&mut self.state, &mut self.buf) };
            self.at = 0;
            return;
        }
        xoshiro_lanes(&mut self.state, &mut self.buf);
        self.at = 0;
    }

    /// The buffered bytes not yet read (refilled when none are left).
    #[inline]
    fn ready(&mut self) -> &[u8] {
        if self.at == self.buf.len() {
            self.refill();
        }
        &self.buf[self.at..]
    }

    /// Marks `k` bytes of [`Words::ready`] read.
    #[inline]
    fn consume(&mut self, k: usize) {
        self.at += k;
    }

    fn next_word(&mut self) -> u32 {
        if self.at == self.buf.len() {
            self.refill();
        }
        let w = u32::from_le_bytes(self.buf[self.at..self.at + 4].try_into().expect("4 bytes"));
        self.at += 4;
        w
    }

    /// A draw from 0..n exactly as rand 0.10's `random_range(0..n)` makes
    /// it for u32 (`UniformInt::sample_single_inclusive`, its default biased
    /// variant of Canon's method): the high word of w·n, corrected by a
    /// second word when the low word is within n of overflowing. Written out
    /// so that the words can come from a block; a test holds the two
    /// equal.
    #[inline]
    fn index(&mut self, n: u32) -> u32 {
        let m = self.next_word() as u64 * n as u64;
        let (hi, lo) = ((m >> 32) as u32, m as u32);
        if lo > n.wrapping_neg() {
            let hi2 = ((self.next_word() as u64 * n as u64) >> 32) as u32;
            if lo.checked_add(hi2).is_none() {
                return hi + 1;
            }
        }
        hi
    }
}

/// [`Words::refill`] lane by lane.
fn xoshiro_lanes(state: &mut [[u64; 4]; 4], buf: &mut [u8; 4096]) {
    let [mut s0, mut s1, mut s2, mut s3] = *state;
    for out in buf.chunks_exact_mut(32) {
        let mut next = [0u64; 4];
        for l in 0..4 {
            next[l] = s0[l]
                .wrapping_add(s3[l])
                .rotate_left(23)
                .wrapping_add(s0[l]);
            let t = s1[l] << 17;
            s2[l] ^= s0[l];
            s3[l] ^= s1[l];
            s1[l] ^= s2[l];
            s0[l] ^= s3[l];
            s2[l] ^= t;
            s3[l] = s3[l].rotate_left(45);
        }
        for (o, v) in out.chunks_exact_mut(8).zip(next) {
            o.copy_from_slice(&v.to_le_bytes());
        }
    }
    *state = [s0, s1, s2, s3];
}

/// [`xoshiro_lanes`] with the four lanes in one AVX2 register (x86-64 is
/// little-endian: the stored lanes are the bytes `to_le_bytes` gives).
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn xoshiro_lanes_avx2(state: &mut [[u64; 4]; 4], buf: &mut [u8; 4096]) {
    use std::arch::x86_64::*;
    // SAFETY: each load and store reads or writes 32 bytes within a [u64;
    // 4] of `state` or a 32-byte chunk of `buf`; unaligned access is allowed.
    let load = |a: &[u64; 4]| unsafe { _mm256_loadu_si256(a.as_ptr() as *const __m256i) };
    // Rotations left by 23 and 45: shifts by immediates.
    let rotl23 = |x| _mm256_or_si256(_mm256_slli_epi64::<23>(x), _mm256_srli_epi64::<41>(x));
    let rotl45 = |x| _mm256_or_si256(_mm256_slli_epi64::<45>(x), _mm256_srli_epi64::<19>(x));
    let (mut s0, mut s1, mut s2, mut s3) = (
        load(&state[0]),
        load(&state[1]),
        load(&state[2]),
        load(&state[3]),
    );
    for out in buf.chunks_exact_mut(32) {
        let next = _mm256_add_epi64(rotl23(_mm256_add_epi64(s0, s3)), s0);
        // SAFETY: see above.
        unsafe { _mm256_storeu_si256(out.as_mut_ptr() as *mut __m256i, next) };
        let t = _mm256_slli_epi64::<17>(s1);
        s2 = _mm256_xor_si256(s2, s0);
        s3 = _mm256_xor_si256(s3, s1);
        s1 = _mm256_xor_si256(s1, s2);
        s0 = _mm256_xor_si256(s0, s3);
        s2 = _mm256_xor_si256(s2, t);
        s3 = rotl45(s3);
    }
    for (a, v) in state.iter_mut().zip([s0, s1, s2, s3]) {
        // SAFETY: see above.
        unsafe { _mm256_storeu_si256(a.as_mut_ptr() as *mut __m256i, v) };
    }
}

/// The trades laid out once in close order (ties by open, then input
/// order, as [`changes`] orders a resample; without day slots, in the four
/// segments of `segments`), so that a resample is a count per trade and
/// every figure one pass over the trades: no gather of the resample's
/// columns and no sort per resample (SPEC §7). Resamples go eight at a
/// time through [`Weighted::changes_side_by_side`] (equal to [`changes`]
/// to the rounding of the sums); the removed scenario of one set of trades
/// under changing flags ([`RemovedPass`]) goes through [`Weighted::kept`],
/// bit for bit the built scenario.
///
/// Only for fixed sizing, and only when every resample measures its tail
/// on the same basis as the whole input (amounts when no equity is
/// recorded, returns when every trade's is).
struct Weighted {
    /// Position → input index.
    order: Vec<u32>,
    /// By position: P/L, exposed, daily slot (empty when built without
    /// `daily`).
    pnl: Vec<f64>,
    exposed: Vec<bool>,
    slot: Vec<u32>,
    /// By position, |return| when the tail is measured on returns; `None`:
    /// on |P/L|.
    tail: Option<Vec<f64>>,
    /// Positions by |tail value|, largest first: the whole order, or
    /// (`ranked_all` false) a prefix of it deep enough for the top-k walk of
    /// any likely resample (a resample that runs past it takes the slow path).
    by_tail: Vec<u32>,
    /// For the resamples' walk (built with `rank_all` false): each ranked
    /// trade's tail value and exposure, in `by_tail`'s order, so the walk
    /// reads them in turn rather than at scattered positions.
    ranked: Vec<(f64, bool)>,
    ranked_all: bool,
    /// Built without day slots (no account path): the positions are four
    /// segments, each in close order — unexposed trades with P/L ≥ 0, then
    /// < 0, then the exposed ones likewise — and these are the segments'
    /// ends. `None`: one close order (the account path needs it).
    segments: Option<[usize; 4]>,
    days: usize,
    start: f64,
    initial_equity: Option<f64>,
    tcr_p: f64,
}

/// The removed scenario's figures of one set of trades under changing
/// exposure flags, each a pass over the trades in close order (the
/// bootstrap's weighted pass, every weight 1): for window grids, where
/// every cell removes different trades from the same runs.
pub struct RemovedPass {
    weighted: Weighted,
}

impl RemovedPass {
    /// `None` where the weighted pass does not apply (see `Weighted`:
    /// compounding sizing, partly recorded equity, no trade, a span without
    /// weekdays, sums that may be −0.0 or not finite): build the scenarios.
    pub fn new(trades: &Trades, settings: &ScenarioSettings, ctx: &Context) -> Option<RemovedPass> {
        let none = vec![false; trades.len()];
        let weighted = Weighted::new(trades, &none, settings, ctx, true, true)?;
        Some(RemovedPass { weighted })
    }

    /// Position in close order → index of the trade (in the trades given
    /// to [`RemovedPass::new`]): the order of the flags
    /// [`RemovedPass::figures_at`] takes.
    pub fn order(&self) -> &[u32] {
        &self.weighted.order
    }

    /// Net, profit factor, Sharpe, max drawdown and TCR of the trades not
    /// `exposed` (by input index), bit for bit those of the removed
    /// scenario's metrics.
    pub fn figures(&self, exposed: impl Fn(usize) -> bool) -> [Option<f64>; 5] {
        let by_position: Vec<bool> = self.order().iter().map(|&i| exposed(i as usize)).collect();
        self.figures_at(&by_position)
    }

    /// [`RemovedPass::figures`] with the left-out trades flagged by position
    /// in [`RemovedPass::order`] (the window grid asks this of every run in
    /// every cell).
    pub fn figures_at(&self, dropped: &[bool]) -> [Option<f64>; 5] {
        self.weighted.kept::<ALL_FIGURES>(dropped)
    }

    /// TCR, Sharpe and max drawdown of [`RemovedPass::figures_at`] (what a
    /// window grid's cell asks of every run), without the net and profit
    /// factor sums.
    pub fn tail_and_path_at(&self, dropped: &[bool]) -> [Option<f64>; 3] {
        let f = self.weighted.kept::<{ SHARPE | DRAWDOWN | TCR }>(dropped);
        [f[4], f[2], f[3]]
    }

    /// One of [`RemovedPass::figures_at`] (0 net, 1 profit factor, 2
    /// Sharpe, 3 max drawdown, 4 TCR), bit for bit: the same pass, with
    /// only the sums, the daily P/L or the top-k walk that figure needs.
    /// For draws that each need one figure (rank's random-removal
    /// reference).
    pub fn figure_at(&self, dropped: &[bool], which: usize) -> Option<f64> {
        let w = &self.weighted;
        match which {
            0 | 1 => w.kept::<NET_PF>(dropped)[which],
            2 => w.kept::<SHARPE>(dropped)[2],
            3 => w.kept::<DRAWDOWN>(dropped)[3],
            _ => w.kept::<TCR>(dropped)[4],
        }
    }
}

/// Resamples evaluated side by side in one pass over the trades
/// ([`Weighted::changes_side_by_side`]): eight, two AVX2 registers of
/// doubles.
const LANES: usize = 8;

/// Positions drawn per lane in turn: 8 lanes × 512 one-byte counts, in
/// the first-level cache.
const COUNT_BLOCK: usize = 512;

/// Per-thread buffers of [`Weighted::changes_side_by_side`].
struct LaneScratch {
    /// Position j's count in lane l at `j · LANES + l`.
    counts: Vec<u8>,
    /// P/L per day slot and lane: baseline, removed.
    daily: [Vec<[f64; LANES]>; 2],
}

/// One scenario's sums for `LANES` resamples side by side.
#[derive(Clone, Copy)]
struct LaneSums {
    /// Copies counted, as doubles (exact below 2⁵³).
    n: [f64; LANES],
    gross_profit: [f64; LANES],
    gross_loss: [f64; LANES],
    abs_tail: [f64; LANES],
    equity: [f64; LANES],
    peak: [f64; LANES],
    drawdown: [f64; LANES],
}

impl LaneSums {
    fn new(start: f64) -> LaneSums {
        LaneSums {
            n: [0.0; LANES],
            gross_profit: [0.0; LANES],
            gross_loss: [0.0; LANES],
            abs_tail: [0.0; LANES],
            equity: [start; LANES],
            peak: [start; LANES],
            drawdown: [0.0; LANES],
        }
    }
}

/// What one scenario's figures are made of.
struct Totals {
    n: usize,
    net: f64,
    gross_profit: f64,
    gross_loss: f64,
    losses: usize,
    drawdown: Option<f64>,
    abs_tail: f64,
}

impl Totals {
    fn of(s: &Sums) -> Totals {
        Totals {
            n: s.n,
            net: s.net,
            gross_profit: s.gross_profit,
            gross_loss: s.gross_loss,
            losses: s.losses,
            drawdown: Some(s.path.drawdown),
            abs_tail: s.abs_tail,
        }
    }

    /// Lane `l`'s totals; net is gross profit + gross loss, and so is the
    /// |P/L| tail's sum (− gross loss) unless the tail is on returns. A
    /// loss was drawn when the gross loss is below zero (a loss's copies add
    /// a negative amount; no sum of them underflows to zero).
    fn of_lane(s: &LaneSums, l: usize, returns: bool) -> Totals {
        let (gp, gl) = (s.gross_profit[l], s.gross_loss[l]);
        Totals {
            n: s.n[l] as usize,
            net: gp + gl,
            gross_profit: gp,
            gross_loss: gl,
            losses: (gl < 0.0) as usize,
            drawdown: Some(s.drawdown[l]),
            abs_tail: if returns { s.abs_tail[l] } else { gp - gl },
        }
    }
}

/// An equity path's running peak and largest fall from it, as
/// `metrics::max_drawdown` walks it (see [`Sums::add`] for the maxima).
#[derive(Clone, Copy)]
struct Path {
    equity: f64,
    peak: f64,
    drawdown: f64,
}

impl Path {
    fn new(start: f64) -> Path {
        Path {
            equity: start,
            peak: start,
            drawdown: 0.0,
        }
    }

    #[inline(always)]
    fn add(&mut self, p: f64) {
        self.equity += p;
        if self.equity > self.peak {
            self.peak = self.equity;
        }
        let fall = self.peak - self.equity;
        if fall > self.drawdown {
            self.drawdown = fall;
        }
    }
}

/// The running sums of one scenario over the drawn copies.
struct Sums {
    n: usize,
    net: f64,
    gross_profit: f64,
    gross_loss: f64,
    losses: usize,
    path: Path,
    abs_tail: f64,
}

impl Sums {
    fn new(start: f64) -> Sums {
        Sums {
            n: 0,
            net: 0.0,
            gross_profit: 0.0,
            gross_loss: 0.0,
            losses: 0,
            path: Path::new(start),
            abs_tail: 0.0,
        }
    }

    /// One trade's P/L `p` and tail value `t` (a kept trade's, or +0.0
    /// for a dropped one), into the sums `WANT` asks for (see
    /// [`Weighted::kept`]), with the sums of `metrics::compute`,
    /// `max_drawdown` and `tcr` in their order. The maxima are plain
    /// comparisons: on finite values that are never −0.0 (no sum here
    /// starts at or can reach −0.0) they pick what `f64::max` picks, and
    /// adding a clipped 0.0 where the original adds ±0.0 leaves a sum that
    /// is never −0.0 unchanged.
    #[inline(always)]
    fn add<const WANT: u8>(&mut self, p: f64, t: f64) {
        if WANT & NET_PF != 0 {
            self.net += p;
            self.gross_profit += if p > 0.0 { p } else { 0.0 };
            self.gross_loss += if p < 0.0 { p } else { 0.0 };
            self.losses += (p < 0.0) as usize;
        }
        if WANT & DRAWDOWN != 0 {
            self.path.add(p);
        }
        if WANT & TCR != 0 {
            self.abs_tail += t;
        }
    }
}

/// What a pass of [`Weighted::kept`] computes: net and profit factor,
/// Sharpe, max drawdown, TCR (bits of `WANT`).
const NET_PF: u8 = 1;
const SHARPE: u8 = 2;
const DRAWDOWN: u8 = 4;
const TCR: u8 = 8;
const ALL_FIGURES: u8 = NET_PF | SHARPE | DRAWDOWN | TCR;

impl Weighted {
    /// `rank_all`: rank every trade by tail value (for exposure flags that
    /// change from call to call), else a prefix deep enough for `exposed`.
    /// `daily`: keep each trade's day slot (for Sharpe and the account
    /// path; without it, 4 bytes a trade less — 40 MB at 10 M trades).
    fn new(
        trades: &Trades,
        exposed: &[bool],
        settings: &ScenarioSettings,
        ctx: &Context,
        rank_all: bool,
        daily: bool,
    ) -> Option<Weighted> {
        let n = trades.len();
        if settings.sizing != scenarios::Sizing::Fixed || n == 0 || n >= u32::MAX as usize {
            return None;
        }
        let equity = scenarios::recorded_equity_of(trades);
        if equity.is_none() && (trades.equity_before.is_some() || trades.pnl_pct.is_some()) {
            // Some trades' equity is unknown: a resample without them would
            // measure its tail on returns, one with them on amounts.
            return None;
        }
        let mut slots = metrics::DaySlots::new(ctx);
        let start = settings.initial_equity.unwrap_or(0.0);
        if slots.is_empty()
            || (start == 0.0 && start.is_sign_negative())
            || !start.is_finite()
            || trades.pnl.iter().any(|p| !p.is_finite())
        {
            // Sums that may be −0.0 or not finite: see `Sums::add`.
            return None;
        }
        let mut order: Vec<u32> = (0..n as u32).collect();
        scenarios::close_order(&mut order, &trades.opened, &trades.closed);
        // Without the account path the order of the sums is free: by
        // exposure and sign, so that each segment adds to one sum per lane
        // (the stable sort keeps close order within a segment).
        let segment =
            |i: u32| 2 * exposed[i as usize] as usize + (trades.pnl[i as usize] < 0.0) as usize;
        let segments = (!daily).then(|| {
            order.sort_by_key(|&i| segment(i));
            let mut ends = [0usize; 4];
            for &i in &order {
                ends[segment(i)] += 1;
            }
            for k in 1..4 {
                ends[k] += ends[k - 1];
            }
            ends
        });
        let by_pos = |f: &dyn Fn(usize) -> f64| -> Vec<f64> {
            order.iter().map(|&i| f(i as usize)).collect()
        };
        let pnl = by_pos(&|i| trades.pnl[i]);
        let tail = equity.map(|eq| by_pos(&|i| (trades.pnl[i] / eq[i]).abs()));
        if tail
            .as_ref()
            .is_some_and(|t| t.iter().any(|v| !v.is_finite()))
        {
            return None;
        }
        let slot = if daily {
            order
                .iter()
                .map(|&i| slots.slot(trades.closed[i as usize]) as u32)
                .collect()
        } else {
            Vec::new()
        };
        let exposed: Vec<bool> = order.iter().map(|&i| exposed[i as usize]).collect();
        let tail_of = |j: u32| match &tail {
            Some(t) => t[j as usize],
            None => pnl[j as usize].abs(),
        };
        // A resample's k largest copies come from the whole input's largest
        // trades; four times k deep (plus a margin) covers any resample but
        // one that missed most of them. The removed scenario ranks only the
        // unexposed trades, so the prefix must hold that many of them too:
        // when the largest trades are mostly exposed (the very case the
        // tool looks for) it is deepened until it does.
        let want = n.min(metrics::tcr_k(n, ctx.tcr_p).saturating_mul(4) + 1024);
        let unexposed_total = exposed.iter().filter(|&&x: &&bool| !x).count();
        let desc = |a: &u32, b: &u32| tail_of(*b).total_cmp(&tail_of(*a));
        let mut depth = if rank_all { n } else { want };
        let by_tail = loop {
            let mut v: Vec<u32> = (0..n as u32).collect();
            if depth < n {
                v.select_nth_unstable_by(depth - 1, desc);
                v.truncate(depth);
            }
            let unexposed = v.iter().filter(|&&j| !exposed[j as usize]).count();
            if depth == n || unexposed >= want.min(unexposed_total) {
                v.sort_unstable_by(desc);
                break v;
            }
            depth = n.min(depth.saturating_mul(2));
        };
        let ranked = if rank_all {
            Vec::new()
        } else {
            by_tail
                .iter()
                .map(|&j| (tail_of(j), exposed[j as usize]))
                .collect()
        };
        Some(Weighted {
            order,
            pnl,
            exposed,
            slot,
            tail,
            ranked_all: depth == n,
            ranked,
            by_tail,
            segments,
            days: slots.len(),
            start,
            initial_equity: settings.initial_equity,
            tcr_p: ctx.tcr_p,
        })
    }

    fn lane_scratch(&self) -> LaneScratch {
        LaneScratch {
            counts: Vec::new(),
            daily: [Vec::new(), Vec::new()],
        }
    }

    fn tail_at(&self, j: usize) -> f64 {
        match &self.tail {
            Some(t) => t[j],
            None => self.pnl[j].abs(),
        }
    }

    /// [`changes`] of the resamples `first..first + LANES` (those below
    /// `resamples.len()`), side by side in one pass over the trades; a
    /// resample's entry is `None` when it needs the slow path (a trade drawn
    /// over 255 times, an empty set, a set of 2³² copies or more, or a top-k
    /// walk past the ranked prefix). `account_path`: whether Sharpe and max
    /// drawdown are wanted (else `None`).
    ///
    /// Each sum adds a trade's value times its count (once per trade, not
    /// once per copy), so the figures equal [`changes`] to the rounding of
    /// the sums, not bit for bit (docs/method.md §7; tested).
    fn changes_side_by_side(
        &self,
        sc: &mut LaneScratch,
        resamples: &Resamples,
        first: usize,
        account_path: bool,
    ) -> [Option<[Option<f64>; 5]>; LANES] {
        let n = self.pnl.len();
        let lanes = LANES.min(resamples.len().saturating_sub(first));
        sc.counts.clear();
        sc.counts.resize(n * LANES, 0);
        let mut usable = [false; LANES];
        let mut drawn = [0u64; LANES];
        match resamples {
            Resamples::Seeded { seed, .. } => {
                // Block by block across the lanes, so that the interleaved
                // counts are filled while in cache.
                let mut draws: Vec<CountDraw> = (0..lanes)
                    .map(|l| CountDraw::new(n, *seed, first + l))
                    .collect();
                let mut totals = [0u64; LANES];
                draw_side_by_side(&mut draws, &mut sc.counts, &mut totals);
                for (l, d) in draws.iter_mut().enumerate() {
                    usable[l] = d.finish(&mut sc.counts[l..], LANES, &mut totals[l]);
                    drawn[l] = n as u64;
                }
            }
            Resamples::Given(sets) => {
                let position = crate::import::trades::places_in(&self.order);
                for l in 0..lanes {
                    let set = &sets[first + l];
                    usable[l] = set.len() < u32::MAX as usize
                        && set.iter().all(|&i| {
                            sc.counts[position[i as usize] as usize * LANES + l].add_one()
                        });
                    drawn[l] = set.len() as u64;
                }
            }
        }
        for l in 0..lanes {
            usable[l] &= drawn[l] > 0;
        }
        let mut sums = self.sum_side_by_side(sc, account_path);
        sums[0].n = drawn.map(|d| d as f64);
        let totals: [[Totals; LANES]; 2] = std::array::from_fn(|k| {
            std::array::from_fn(|l| Totals::of_lane(&sums[k], l, self.tail.is_some()))
        });
        let ks = totals.each_ref().map(|t| {
            t.each_ref().map(|s| {
                if s.n == 0 || s.abs_tail <= 0.0 {
                    0
                } else {
                    metrics::tcr_k(s.n, self.tcr_p)
                }
            })
        });
        let tops = self.top_sums_side_by_side(&sc.counts, ks);
        std::array::from_fn(|l| {
            if !usable[l] {
                return None;
            }
            let daily = |k: usize| {
                account_path.then(|| sc.daily[k].iter().map(|d| d[l]).collect::<Vec<f64>>())
            };
            let b = self.figures(&totals[0][l], daily(0), |_| tops[0][l])?;
            let k = self.figures(&totals[1][l], daily(1), |_| tops[1][l])?;
            Some(std::array::from_fn(|f| match (b[f], k[f]) {
                (Some(x), Some(y)) => Some(y - x),
                _ => None,
            }))
        })
    }

    /// For each lane of the interleaved `counts` and each scenario
    /// (baseline; removed, without the exposed trades), the sum of its
    /// `ks` largest tail values among the drawn copies: one walk down the
    /// ranked trades for all of them. `None` where the ranked prefix runs
    /// out first.
    fn top_sums_side_by_side(
        &self,
        counts: &[u8],
        ks: [[usize; LANES]; 2],
    ) -> [[Option<f64>; LANES]; 2] {
        let mut left = ks;
        let mut top = [[0.0f64; LANES]; 2];
        let mut open = left.iter().flatten().filter(|&&k| k > 0).count();
        assert_eq!(self.ranked.len(), self.by_tail.len(), "built for resamples");
        // The counts of a ranked trade lie at a scattered position: fetched
        // this many trades ahead.
        const AHEAD: usize = 16;
        for (i, (&j, &(v, exposed))) in self.by_tail.iter().zip(&self.ranked).enumerate() {
            if open == 0 {
                break;
            }
            #[cfg(target_arch = "x86_64")]
            if let Some(&ahead) = self.by_tail.get(i + AHEAD) {
                // SAFETY: a prefetch is a hint; the address lies in `counts`
                // (every position's LANES counts are there) and is never read
                // through this pointer.
                unsafe {
                    use std::arch::x86_64::{_MM_HINT_T0, _mm_prefetch};
                    let at = counts.as_ptr().add(ahead as usize * LANES);
                    _mm_prefetch::<_MM_HINT_T0>(at as *const i8);
                }
            }
            let j = j as usize;
            let c: &[u8; LANES] = counts[j * LANES..][..LANES]
                .try_into()
                .expect("LANES counts");
            if c.iter().all(|&c| c == 0) {
                continue;
            }
            let scenarios = if exposed { 1 } else { 2 };
            for k in 0..scenarios {
                for l in 0..LANES {
                    let take = (c[l] as usize).min(left[k][l]);
                    if take > 0 {
                        top[k][l] += v * take as f64;
                        left[k][l] -= take;
                        open -= (left[k][l] == 0) as usize;
                    }
                }
            }
        }
        std::array::from_fn(|k| {
            std::array::from_fn(|l| (left[k][l] == 0 || self.ranked_all).then_some(top[k][l]))
        })
    }

    /// The baseline's and the removed scenario's sums of `LANES` count
    /// vectors at once (the one pass behind [`Weighted::changes_side_by_side`]),
    /// with the daily P/L into `sc.daily` when `account_path`. On x86-64
    /// machines with AVX2 the same loop is compiled for it (the lanes are
    /// independent: the same operations in the same order either way, so
    /// the same bits).
    fn sum_side_by_side(&self, sc: &mut LaneScratch, account_path: bool) -> [LaneSums; 2] {
        assert!(
            !account_path || self.slot.len() == self.pnl.len(),
            "built with daily slots"
        );
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the CPU has AVX2, just checked.
            return unsafe { self.sum_side_by_side_avx2(sc, account_path) };
        }
        self.sum_dispatch(sc, account_path)
    }

    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2")]
    fn sum_side_by_side_avx2(&self, sc: &mut LaneScratch, account_path: bool) -> [LaneSums; 2] {
        self.sum_dispatch(sc, account_path)
    }

    #[inline(always)]
    fn sum_dispatch(&self, sc: &mut LaneScratch, account_path: bool) -> [LaneSums; 2] {
        match (account_path, self.tail.is_some()) {
            (false, false) if self.segments.is_some() => self.lane_sums(sc),
            (false, false) => self.lane_pass::<false, false>(sc),
            (false, true) => self.lane_pass::<false, true>(sc),
            (true, false) => self.lane_pass::<true, false>(sc),
            (true, true) => self.lane_pass::<true, true>(sc),
        }
    }

    /// The pass without account path and with the tail on |P/L| (the
    /// common case: runs read as alternatives): five sums per lane, written
    /// out in AVX2 instructions where the CPU has them ([`sums_avx2`]),
    /// else in the same operations lane by lane ([`sums_portable`]; the
    /// same bits, tested).
    fn lane_sums(&self, sc: &LaneScratch) -> [LaneSums; 2] {
        let n = self.pnl.len();
        let ends = self.segments.expect("built without day slots");
        let (pnl, counts) = (&self.pnl[..n], &sc.counts[..n * LANES]);
        #[cfg(target_arch = "x86_64")]
        let s = if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the CPU has AVX2, just checked.
            unsafe { sums_avx2(pnl, ends, counts) }
        } else {
            sums_portable(pnl, ends, counts)
        };
        #[cfg(not(target_arch = "x86_64"))]
        let s = sums_portable(pnl, ends, counts);
        let [base_gp, base_gl, kept_gp, kept_gl, kept_n] = s;
        let sums = |n: [f64; LANES], gp, gl| LaneSums {
            n,
            gross_profit: gp,
            gross_loss: gl,
            ..LaneSums::new(self.start)
        };
        // The baseline's copies: every drawn one (set by the caller).
        [
            sums([0.0; LANES], base_gp, base_gl),
            sums(kept_n, kept_gp, kept_gl),
        ]
    }

    /// The pass itself. `PATH`: equity path and daily P/L; `RETURNS`: the
    /// tail is measured on returns (else on |P/L|, whose sum is gross
    /// profit − gross loss). The removed scenario weighs an exposed trade's
    /// count by 0.
    #[inline(always)]
    fn lane_pass<const PATH: bool, const RETURNS: bool>(
        &self,
        sc: &mut LaneScratch,
    ) -> [LaneSums; 2] {
        let n = self.pnl.len();
        let (pnl, exposed) = (&self.pnl[..n], &self.exposed[..n]);
        // Day slots are kept only where the account path is wanted.
        let slot = if PATH { &self.slot[..n] } else { &[][..] };
        let tail = if RETURNS {
            &self.tail.as_deref().expect("returns tail")[..n]
        } else {
            &[][..]
        };
        let mut sums = [LaneSums::new(self.start); 2];
        let mut day = [[0.0f64; LANES]; 2];
        let mut cur = slot.first().copied().unwrap_or(0);
        if PATH {
            for d in sc.daily.iter_mut() {
                d.clear();
                d.resize(self.days, [0.0; LANES]);
            }
        }
        // Masks of a double's bits: all ones keeps it, zero makes it +0.0.
        let mask = |on: bool| 0u64.wrapping_sub(on as u64);
        let and = |x: f64, m: u64| f64::from_bits(x.to_bits() & m);
        for (j, c) in sc.counts.chunks_exact(LANES).enumerate().take(n) {
            let c: &[u8; LANES] = c.try_into().expect("LANES counts");
            let p = pnl[j];
            let keep = mask(!exposed[j]);
            let (gain, loss) = (mask(p > 0.0), mask(p < 0.0));
            if PATH && slot[j] != cur {
                for (daily, day) in sc.daily.iter_mut().zip(&mut day) {
                    daily[cur as usize] = std::mem::replace(day, [0.0; LANES]);
                }
                cur = slot[j];
            }
            let w: [f64; LANES] = c.map(f64::from);
            let wp: [f64; LANES] = std::array::from_fn(|l| w[l] * p);
            for (k, s) in sums.iter_mut().enumerate() {
                let m = if k == 0 { u64::MAX } else { keep };
                for l in 0..LANES {
                    s.n[l] += and(w[l], m);
                    s.gross_profit[l] += and(wp[l], m & gain);
                    s.gross_loss[l] += and(wp[l], m & loss);
                    if RETURNS {
                        s.abs_tail[l] += and(w[l] * tail[j], m);
                    }
                    if PATH {
                        // Within a trade's copies the equity moves one way:
                        // its extremes are at their ends.
                        let wp = and(wp[l], m);
                        s.equity[l] += wp;
                        s.peak[l] = s.peak[l].max(s.equity[l]);
                        s.drawdown[l] = s.drawdown[l].max(s.peak[l] - s.equity[l]);
                        day[k][l] += wp;
                    }
                }
            }
        }
        if PATH {
            for (daily, day) in sc.daily.iter_mut().zip(day) {
                daily[cur as usize] = day;
            }
        }
        sums
    }

    /// The five figures of one scenario from its totals and daily P/L: net,
    /// profit factor, Sharpe, max drawdown, TCR (the sum of its k largest
    /// tail values from `top_sum(k)`); `None` when `top_sum` is (the ranked
    /// prefix ran out). Without daily P/L, no Sharpe and no drawdown.
    fn figures(
        &self,
        s: &Totals,
        daily: Option<Vec<f64>>,
        top_sum: impl FnOnce(usize) -> Option<f64>,
    ) -> Option<[Option<f64>; 5]> {
        let sharpe = daily.as_ref().and_then(|d| {
            metrics::sharpe(
                &metrics::daily_values(d.clone(), self.initial_equity),
                metrics::DAYS_PER_YEAR,
            )
        });
        let tcr = if s.n == 0 || s.abs_tail <= 0.0 {
            None
        } else {
            let k = metrics::tcr_k(s.n, self.tcr_p);
            let top = top_sum(k)?;
            Some((top / k as f64) / (s.abs_tail / s.n as f64))
        };
        Some([
            Some(s.net),
            (s.losses > 0).then(|| s.gross_profit / s.gross_loss.abs()),
            sharpe,
            daily.and(s.drawdown),
            tcr,
        ])
    }

    /// The removed scenario's figures (as [`Weighted::figures`]) with every
    /// trade once and those `dropped` (by position) left out, in one pass
    /// over the trades in close order; only the figures `WANT` asks for
    /// (bits [`NET_PF`], [`SHARPE`], [`DRAWDOWN`], [`TCR`]), the others
    /// `None`. The pass adds +0.0 (and counts nothing) for a dropped trade
    /// instead of branching on it: on sums that are never −0.0 (see
    /// [`Sums::add`]) that leaves every sum, bit for bit, as if the trade
    /// had been skipped.
    #[inline(always)]
    fn kept<const WANT: u8>(&self, dropped: &[bool]) -> [Option<f64>; 5] {
        let daily = WANT & SHARPE != 0;
        let n = self.pnl.len();
        let (pnl, dropped) = (&self.pnl[..n], &dropped[..n]);
        let mut sums = Sums::new(self.start);
        let mut by_day = if daily {
            vec![0.0; self.days]
        } else {
            Vec::new()
        };
        let slot = if daily { &self.slot[..n] } else { &[][..] };
        // A day's sum starts at 0.0 as `walk_closes` starts it; closes come
        // in order, so each day is one run of trades.
        let (mut cur, mut day) = (slot.first().copied().unwrap_or(0), 0.0f64);
        for j in 0..n {
            let keep = !dropped[j];
            let mask = 0u64.wrapping_sub(keep as u64);
            let p = f64::from_bits(pnl[j].to_bits() & mask);
            let t = if WANT & TCR != 0 {
                sums.n += keep as usize;
                f64::from_bits(self.tail_at(j).to_bits() & mask)
            } else {
                0.0
            };
            sums.add::<WANT>(p, t);
            if daily {
                let s = slot[j];
                if s != cur {
                    by_day[cur as usize] = day;
                    (day, cur) = (0.0, s);
                }
                day += p;
            }
        }
        if daily {
            by_day[cur as usize] = day;
        }
        // Every trade is ranked (`rank_all`): the k largest kept ones,
        // largest first, as `metrics::tcr` adds them. Without TCR, a
        // stand-in sum whose figure is dropped below.
        let top = |k: usize| {
            let kept = self.by_tail.iter().map(|&j| j as usize);
            Some(match WANT & TCR != 0 {
                true => kept
                    .filter(|&j| !dropped[j])
                    .take(k)
                    .fold(0.0f64, |top, j| top + self.tail_at(j)),
                false => 0.0,
            })
        };
        let f = self
            .figures(&Totals::of(&sums), daily.then_some(by_day), top)
            .expect("every trade is ranked");
        let wanted = |bit: u8, v: Option<f64>| if WANT & bit != 0 { v } else { None };
        [
            wanted(NET_PF, f[0]),
            wanted(NET_PF, f[1]),
            f[2],
            wanted(DRAWDOWN, Some(sums.path.drawdown)),
            wanted(TCR, f[4]),
        ]
    }
}

/// Per lane of the interleaved `counts` (position j's count in lane l at
/// `j · LANES + l`), over positions laid out in the four segments of
/// [`Weighted::segments`] (`ends`): the baseline's gross profit and gross
/// loss, the removed scenario's (the unexposed segments alone) and its
/// number of copies. Each segment adds count × P/L, position by position,
/// to its one sum per lane (the unexposed ones also the count): four
/// multiplications and additions a position fewer than weighing every
/// sum by sign and exposure.
fn sums_portable(pnl: &[f64], ends: [usize; 4], counts: &[u8]) -> [[f64; LANES]; 5] {
    let segment = |from: usize, to: usize, count: bool| {
        let (mut sum, mut n) = ([0.0f64; LANES], [0.0f64; LANES]);
        let by_position = counts[from * LANES..to * LANES].chunks_exact(LANES);
        for (&p, c) in pnl[from..to].iter().zip(by_position) {
            for l in 0..LANES {
                let w = c[l] as f64;
                sum[l] += w * p;
                if count {
                    n[l] += w;
                }
            }
        }
        (sum, n)
    };
    by_segments(ends, segment)
}

/// The five sums of [`sums_portable`] from each segment's (sum of count ×
/// P/L, sum of counts), `segment(from, to, count)` giving them (the counts
/// only where `count`).
#[inline(always)]
fn by_segments(
    ends: [usize; 4],
    segment: impl Fn(usize, usize, bool) -> ([f64; LANES], [f64; LANES]),
) -> [[f64; LANES]; 5] {
    let (kept_gp, n_gp) = segment(0, ends[0], true);
    let (kept_gl, n_gl) = segment(ends[0], ends[1], true);
    let (exposed_gp, _) = segment(ends[1], ends[2], false);
    let (exposed_gl, _) = segment(ends[2], ends[3], false);
    let add = |a: [f64; LANES], b: [f64; LANES]| std::array::from_fn(|l| a[l] + b[l]);
    [
        add(kept_gp, exposed_gp),
        add(kept_gl, exposed_gl),
        kept_gp,
        kept_gl,
        add(n_gp, n_gl),
    ]
}

/// [`sums_portable`] in AVX2: the eight lanes in two registers of four
/// doubles, the same multiplications and additions (no fused ones) in the
/// same order, so the same bits.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn sums_avx2(pnl: &[f64], ends: [usize; 4], counts: &[u8]) -> [[f64; LANES]; 5] {
    use std::arch::x86_64::*;
    let to_lanes = |[lo, hi]: [__m256d; 2]| {
        let mut out = [0.0f64; LANES];
        // SAFETY: `out` holds eight doubles; unaligned stores.
        unsafe {
            _mm256_storeu_pd(out.as_mut_ptr(), lo);
            _mm256_storeu_pd(out.as_mut_ptr().add(4), hi);
        }
        out
    };
    /// One segment's sums, in registers (the lanes' halves apart).
    #[target_feature(enable = "avx2")]
    #[inline]
    fn segment<const COUNT: bool>(
        pnl: &[f64],
        counts: &[u8],
        from: usize,
        to: usize,
    ) -> [__m256d; 4] {
        let (mut sum_lo, mut sum_hi) = (_mm256_setzero_pd(), _mm256_setzero_pd());
        let (mut n_lo, mut n_hi) = (_mm256_setzero_pd(), _mm256_setzero_pd());
        let counts = counts[from * LANES..to * LANES].chunks_exact(LANES);
        for (&p, c) in pnl[from..to].iter().zip(counts) {
            let p = _mm256_set1_pd(p);
            // SAFETY: `c` is 8 bytes long; the load has no alignment
            // requirement.
            let c8 = unsafe { _mm_loadl_epi64(c.as_ptr() as *const __m128i) };
            let c32 = _mm256_cvtepu8_epi32(c8);
            let w_lo = _mm256_cvtepi32_pd(_mm256_castsi256_si128(c32));
            let w_hi = _mm256_cvtepi32_pd(_mm256_extracti128_si256::<1>(c32));
            sum_lo = _mm256_add_pd(sum_lo, _mm256_mul_pd(w_lo, p));
            sum_hi = _mm256_add_pd(sum_hi, _mm256_mul_pd(w_hi, p));
            if COUNT {
                n_lo = _mm256_add_pd(n_lo, w_lo);
                n_hi = _mm256_add_pd(n_hi, w_hi);
            }
        }
        [sum_lo, sum_hi, n_lo, n_hi]
    }
    let segment = |from: usize, to: usize, count: bool| {
        let [s_lo, s_hi, n_lo, n_hi] = if count {
            segment::<true>(pnl, counts, from, to)
        } else {
            segment::<false>(pnl, counts, from, to)
        };
        (to_lanes([s_lo, s_hi]), to_lanes([n_lo, n_hi]))
    };
    by_segments(ends, segment)
}

/// The bootstrap method in words (shown with the result).
pub const BOOTSTRAP_METHOD: &str = "trades resampled with replacement, keeping their exposure; percentile interval of removed - baseline (linear interpolation, numpy's default)";

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::scenarios::{CapRule, Sizing};
    use crate::import::zones::{MINUTE_MS, Zone};
    use rand::RngExt;

    #[test]
    fn block_words_draw_what_rand_draws() {
        /// rand's uniform draw fed with the same words.
        struct Fed(Words);
        impl rand::TryRng for Fed {
            type Error = std::convert::Infallible;
            fn try_next_u32(&mut self) -> Result<u32, Self::Error> {
                Ok(self.0.next_word())
            }
            fn try_next_u64(&mut self) -> Result<u64, Self::Error> {
                let lo = self.0.next_word() as u64;
                Ok(lo | (self.0.next_word() as u64) << 32)
            }
            fn try_fill_bytes(&mut self, dst: &mut [u8]) -> Result<(), Self::Error> {
                for b in dst {
                    *b = self.0.next_word() as u8;
                }
                Ok(())
            }
        }
        for (n, seed, r) in [
            (1usize, 3u64, 0usize),
            (7, 3, 1),
            (1000, 9, 5),
            (123_457, 1, 1999),
            (3_000_000_000, 1, 4),
        ] {
            let mut w = Words::new(seed, r as u64);
            let got: Vec<u32> = (0..3000).map(|_| w.index(n as u32)).collect();
            let mut fed = Fed(Words::new(seed, r as u64));
            let want: Vec<u32> = (0..3000).map(|_| fed.random_range(0..n as u32)).collect();
            assert_eq!(got, want, "n {n} r {r}");
        }
    }

    /// The AVX2 refill gives the lane-by-lane refill's bytes and state
    /// (compares nothing on a CPU without AVX2).
    #[test]
    fn avx2_words_equal_portable_words() {
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") {
            let start = Words::new(5, 11).state;
            let (mut a, mut b) = (start, start);
            let (mut buf_a, mut buf_b) = ([0u8; 4096], [0u8; 4096]);
            for _ in 0..3 {
                xoshiro_lanes(&mut a, &mut buf_a);
                // SAFETY: the CPU has AVX2, just checked.
                unsafe { xoshiro_lanes_avx2(&mut b, &mut buf_b) };
                assert_eq!(buf_a, buf_b);
                assert_eq!(a, b);
            }
        }
    }

    /// Each lane of the words is xoshiro256++ as rand_xoshiro computes it
    /// from the same state (over several refills), the lanes' states are
    /// ChaCha8's first 128 bytes of the stream, and streams differ.
    #[test]
    fn words_are_four_xoshiro256plusplus_lanes() {
        use rand_xoshiro::Xoshiro256PlusPlus;
        let (seed, stream) = (42u64, 7u64 | 1 << 63);
        let mut chacha = ChaCha8Rng::seed_from_u64(seed);
        chacha.set_stream(stream);
        let mut state = [0u8; 128];
        chacha.fill_bytes(&mut state);
        let mut w = Words::new(seed, stream);
        let mut got = Vec::new();
        for _ in 0..3 * 4096 / 4 {
            got.push(w.next_word());
        }
        for lane in 0..4 {
            let mut x =
                Xoshiro256PlusPlus::from_seed(state[32 * lane..32 * lane + 32].try_into().unwrap());
            for i in 0..3 * 4096 / 32 {
                let v = x.next_u64();
                let at = 2 * (4 * i + lane);
                assert_eq!(
                    (got[at], got[at + 1]),
                    (v as u32, (v >> 32) as u32),
                    "lane {lane} output {i}"
                );
            }
        }
        let mut other = Words::new(seed, 7);
        assert_ne!(other.next_word(), Words::new(seed, stream).next_word());
    }

    /// Every resample draws n copies; one-byte and four-byte counts are the
    /// same draw; `resample` lays them out by the order given.
    #[test]
    fn drawn_counts_add_up_to_n() {
        for n in [0usize, 1, 2, 16, 17, 1000, 50_001] {
            for r in 0..4 {
                let (mut small, mut wide) = (Vec::<u8>::new(), Vec::<u32>::new());
                assert!(draw_counts(n, 7, r, &mut small) && draw_counts(n, 7, r, &mut wide));
                assert_eq!(small.len(), n);
                assert_eq!(wide.iter().map(|&c| c as usize).sum::<usize>(), n, "n {n}");
                assert!(small.iter().zip(&wide).all(|(&a, &b)| a as u32 == b));
            }
        }
        let order = [2u32, 0, 1];
        let mut wide = Vec::<u32>::new();
        draw_counts(3, 4, 9, &mut wide);
        let mut want = Vec::new();
        for (j, &c) in wide.iter().enumerate() {
            want.extend(std::iter::repeat_n(order[j], c as usize));
        }
        assert_eq!(resample(&order, 4, 9), want);
    }

    /// The AVX2 settling gives every word's count as [`settled_count`]
    /// does, for all 65 536 words (and a tail past the last sixteen), and
    /// says whether any is open (compares nothing on a CPU without AVX2).
    #[test]
    fn settled_words_in_avx2_count_as_one_by_one() {
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") {
            for n in [3usize, 20_000, 10_000_000] {
                let d = CountDraw::new(n, 1, 0);
                // Every word once, in an order that mixes them, and a tail
                // shorter than sixteen.
                let words: Vec<u16> = (0..=u16::MAX as u32 + 5)
                    .map(|i| (i.wrapping_mul(40_503) % 65_536) as u16)
                    .collect();
                let bytes: Vec<u8> = words.iter().flat_map(|w| w.to_le_bytes()).collect();
                let mut fast = vec![0u8; words.len()];
                // SAFETY: the CPU has AVX2, just checked.
                let any = unsafe { settle_avx2(&bytes, &mut fast, &d.tops, d.last) };
                let want: Vec<u8> = words
                    .iter()
                    .map(|&w| settled_count(w, &d.tops, d.last) as u8)
                    .collect();
                assert_eq!(fast, want, "n {n}");
                assert!(any);
                let settled = &bytes[..2 * 40];
                let none = words[..40]
                    .iter()
                    .all(|&w| settled_count(w, &d.tops, d.last) != UNSETTLED);
                let mut few = vec![0u8; 40];
                // SAFETY: as above.
                assert_eq!(
                    unsafe { settle_avx2(settled, &mut few, &d.tops, d.last) },
                    !none
                );
            }
        }
    }

    /// A word that settles its count gives the count of every 64-bit value
    /// with those top bits (the lowest and the highest), for all 65 536
    /// words, at the λ of several n; and the words that do not settle are
    /// few (equal to a step's top bits, or at or past the seventh step).
    #[test]
    fn settled_words_give_the_full_values_count() {
        for n in [1usize, 3, 50, 20_000, 10_000_000] {
            let d = CountDraw::new(n, 1, 0);
            let full = |u: u64| d.steps.iter().take_while(|&&t| u >= t).count() as u32;
            let mut unsettled = 0;
            for w in 0..=u16::MAX {
                let k = settled_count(w, &d.tops, d.last);
                let (lo, hi) = ((w as u64) << 48, (w as u64) << 48 | ((1 << 48) - 1));
                if k == UNSETTLED {
                    unsettled += 1;
                } else {
                    assert_eq!((k, k), (full(lo), full(hi)), "n {n} w {w}");
                }
            }
            // At most six step tops plus the words from the seventh up
            // (under 3·10⁻⁴ of all at these λ).
            assert!(unsettled < 20, "n {n}: {unsettled}");
        }
    }

    /// The counts follow the multinomial law of n draws with replacement,
    /// checked against its exact probabilities: for n = 3, the ten count
    /// vectors' frequencies over 30 000 resamples by Pearson's chi-square
    /// (9 degrees of freedom; 27.88 is its 0.999 quantile, scipy 1.17.1
    /// `stats.chi2.ppf(0.999, 9)` = 27.877: a correct draw fails one run
    /// in a thousand); for
    /// n = 20 000 (λ = 0.97 < 1, where the redraw and the added draws
    /// matter), the share of trades never drawn, (1 − 1/n)ⁿ = 0.36787, and
    /// the counts' variance, 1 − 1/n.
    #[test]
    fn drawn_counts_are_multinomial() {
        let mut freq = BTreeMap::<Vec<u32>, usize>::new();
        let runs = 30_000;
        let mut c = Vec::<u32>::new();
        for r in 0..runs {
            draw_counts(3, 11, r, &mut c);
            *freq.entry(c.clone()).or_default() += 1;
        }
        let mut chi2 = 0.0;
        let mut cells = 0;
        for a in 0..=3u32 {
            for b in 0..=3 - a {
                let v = vec![a, b, 3 - a - b];
                let fact = |k: u32| (1..=k).product::<u32>() as f64;
                let p = 6.0 / (fact(a) * fact(b) * fact(3 - a - b)) / 27.0;
                let expected = p * runs as f64;
                let seen = freq.get(&v).copied().unwrap_or(0) as f64;
                chi2 += (seen - expected).powi(2) / expected;
                cells += 1;
            }
        }
        assert_eq!(cells, 10);
        assert_eq!(freq.values().sum::<usize>(), runs);
        assert!(freq.len() == 10, "only count vectors adding up to 3");
        assert!(chi2 < 27.88, "chi-square {chi2}");
        let n = 20_000;
        let (mut zeros, mut sq, mut total) = (0usize, 0.0f64, 0usize);
        for r in 0..30 {
            draw_counts(n, 12, r, &mut c);
            zeros += c.iter().filter(|&&k| k == 0).count();
            sq += c.iter().map(|&k| (k as f64 - 1.0).powi(2)).sum::<f64>();
            total += n;
        }
        let never = zeros as f64 / total as f64;
        let want_never = (1.0 - 1.0 / n as f64).powi(n as i32);
        // Standard errors: about 0.0006 and 0.004 over 600 000 counts.
        assert!(
            (never - want_never).abs() < 0.003,
            "{never} vs {want_never}"
        );
        let var = sq / total as f64;
        assert!(
            (var - (1.0 - 1.0 / n as f64)).abs() < 0.02,
            "variance {var}"
        );
    }

    /// Random trades: ties in close (and open) instants, weekend closes,
    /// P/L of both signs with zeros, a third exposed.
    fn random_trades(n: usize, seed: u64, equity: bool) -> (Trades, Vec<bool>) {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let t0 = 1_704_067_200_000i64; // 2024-01-01T00:00Z
        let opened: Vec<i64> = (0..n)
            .map(|_| t0 + rng.random_range(0..400i64) * 6 * 3_600_000)
            .collect();
        let closed: Vec<i64> = opened
            .iter()
            .map(|o| o + rng.random_range(0..30i64) * 30 * MINUTE_MS)
            .collect();
        let pnl: Vec<f64> = (0..n)
            .map(|_| match rng.random_range(0..10) {
                0 => 0.0,
                1 => rng.random_range(-4000..4000) as f64 / 3.0,
                _ => rng.random_range(-300..320) as f64 / 7.0,
            })
            .collect();
        let equity_before = equity.then(|| {
            (0..n)
                .map(|_| rng.random_range(5_000.0..20_000.0))
                .collect()
        });
        let exposed = (0..n).map(|_| rng.random_range(0..3) == 0).collect();
        let t = Trades {
            opened,
            closed,
            instrument: vec![0; n],
            instruments: vec!["EURUSD".into()],
            pnl,
            run: vec![0; n],
            file: vec![0; n],
            row: (1..=n as u32).collect(),
            equity_before,
            ..Default::default()
        };
        (t, exposed)
    }

    /// Fixed sizing, a cap at the 99 % quantile, and the given starting equity.
    fn fixed_sizing(initial_equity: Option<f64>) -> ScenarioSettings {
        ScenarioSettings {
            sizing: Sizing::Fixed,
            cap: CapRule::Quantile(0.99),
            initial_equity,
            stress: None,
        }
    }

    /// The trades' own span in `zone`, TCR on the top 1 %.
    fn context(t: &Trades, zone: Zone) -> Context {
        Context {
            span: t.span().unwrap(),
            report_zone: zone,
            initial_equity: None,
            tcr_p: 1.0,
        }
    }

    fn bits(c: &[Option<f64>; 5]) -> [Option<u64>; 5] {
        c.map(|v| v.map(f64::to_bits))
    }

    /// Whether the side-by-side figures equal [`changes`] to the rounding
    /// of their sums: the same `None`s; net and max drawdown within 10⁻¹¹
    /// of the trades' gross |P/L| (a sum's rounding grows with what it
    /// adds: about 3 000 × 1.1·10⁻¹⁶ at most here), the ratios within
    /// 10⁻¹¹ of their size.
    fn equal_to_rounding(got: &[Option<f64>; 5], want: &[Option<f64>; 5], gross: f64) -> bool {
        got.iter()
            .zip(want)
            .enumerate()
            .all(|(f, (g, w))| match (g, w) {
                (None, None) => true,
                (Some(g), Some(w)) => {
                    let scale = if f == 0 || f == 3 { gross } else { w.abs() };
                    (g - w).abs() <= 1e-11 * (1.0 + scale)
                }
                _ => false,
            })
    }

    /// The side-by-side pass gives every figure of [`changes`] to the
    /// rounding of the sums: seeded and given resamples, amount and return
    /// tails, with and without a starting equity, in UTC and in a zone with
    /// DST, with and without the account path; and the same figures for a
    /// resample whichever lane it is evaluated in.
    #[test]
    fn side_by_side_pass_equals_changes() {
        let zones = [Zone::Utc, "America/New_York".parse::<Zone>().unwrap()];
        for (case, (equity, initial, zone)) in [
            (false, None, 0),
            (true, None, 1),
            (false, Some(25_000.0), 1),
            (true, Some(10_000.0), 0),
        ]
        .into_iter()
        .enumerate()
        {
            let (t, exposed) = random_trades(3000, 40 + case as u64, equity);
            let gross: f64 = t.pnl.iter().map(|p| p.abs()).sum();
            let settings = fixed_sizing(initial);
            let ctx = context(&t, zones[zone]);
            let w =
                Weighted::new(&t, &exposed, &settings, &ctx, false, true).expect("fixed sizing");
            assert_eq!(w.tail.is_some(), equity);
            let mut sc = w.lane_scratch();
            let seeded = Resamples::Seeded { count: 20, seed: 5 };
            for first in [0, 8, 16, 3] {
                let got = w.changes_side_by_side(&mut sc, &seeded, first, true);
                let sums_only = w.changes_side_by_side(&mut sc, &seeded, first, false);
                for l in 0..LANES.min(20 - first) {
                    let r = first + l;
                    let want = changes(&seeded.indices(&w.order, r), &t, &exposed, &settings, &ctx);
                    let got = got[l].expect("weighted pass");
                    assert!(
                        equal_to_rounding(&got, &want, gross),
                        "case {case} resample {r}: {got:?} vs {want:?}"
                    );
                    let mut without_path = want;
                    without_path[2] = None;
                    without_path[3] = None;
                    assert_eq!(
                        sums_only[l].map(|c| bits(&c)),
                        Some(bits(&{
                            let mut g = got;
                            g[2] = None;
                            g[3] = None;
                            g
                        }))
                    );
                    assert!(equal_to_rounding(
                        &sums_only[l].unwrap(),
                        &without_path,
                        gross
                    ));
                }
                // Past the last resample: nothing.
                assert!(got[(20 - first).min(LANES)..].iter().all(Option::is_none));
            }
            // Built without day slots: laid out by exposure and sign, each
            // resample the rebuild of its own trades to rounding.
            let segmented =
                Weighted::new(&t, &exposed, &settings, &ctx, false, false).expect("fixed sizing");
            assert!(segmented.segments.is_some() && segmented.order != w.order);
            let mut sc2 = segmented.lane_scratch();
            for first in [0, 8] {
                let got = segmented.changes_side_by_side(&mut sc2, &seeded, first, false);
                for (l, got) in got.iter().enumerate() {
                    let r = first + l;
                    let mut want = changes(
                        &seeded.indices(&segmented.order, r),
                        &t,
                        &exposed,
                        &settings,
                        &ctx,
                    );
                    (want[2], want[3]) = (None, None);
                    let got = got.expect("weighted pass");
                    assert!(
                        equal_to_rounding(&got, &want, gross),
                        "case {case} segmented resample {r}: {got:?} vs {want:?}"
                    );
                }
            }
            // A resample's figures do not depend on its lane.
            let a = w.changes_side_by_side(&mut sc, &seeded, 0, true)[3];
            let b = w.changes_side_by_side(&mut sc, &seeded, 3, true)[0];
            assert_eq!(a.map(|c| bits(&c)), b.map(|c| bits(&c)));
            // Given sets: a small one with a trade drawn 9 times, one
            // drawing a single trade 300 times (past a one-byte count: the
            // slow path), and an empty one.
            let sets = vec![
                vec![3, 3, 3, 3, 3, 3, 3, 3, 3, 10, 11, 2999],
                vec![17; 300],
                vec![],
            ];
            let given = Resamples::Given(&sets);
            let got = w.changes_side_by_side(&mut sc, &given, 0, true);
            let want = changes(&sets[0], &t, &exposed, &settings, &ctx);
            assert!(
                equal_to_rounding(&got[0].unwrap(), &want, gross),
                "case {case}"
            );
            assert!(got[1].is_none() && got[2].is_none(), "slow path");
            assert!(got[3..].iter().all(Option::is_none));
        }
    }

    /// Interleaving puts lane l's count of position i at i · 8 + l, for
    /// blocks whose length is and is not a multiple of eight.
    #[test]
    fn lanes_interleave_by_position() {
        let mut lane = [[0u8; COUNT_BLOCK]; LANES];
        for (l, row) in lane.iter_mut().enumerate() {
            for (i, c) in row.iter_mut().enumerate() {
                *c = (i * 8 + l) as u8 ^ 0x5a;
            }
        }
        for len in [0, 1, 8, 13, 64, 67, COUNT_BLOCK] {
            let mut out = vec![0u8; len * LANES];
            interleave(&lane, &mut out);
            for i in 0..len {
                for l in 0..LANES {
                    assert_eq!(out[i * LANES + l], lane[l][i], "len {len} i {i} l {l}");
                }
            }
        }
    }

    /// The AVX2 sums are the portable ones, bit for bit (on a CPU without
    /// AVX2 there is nothing to compare).
    #[test]
    fn avx2_sums_equal_portable_sums() {
        let (t, exposed) = random_trades(2000, 12, false);
        let ctx = context(&t, Zone::Utc);
        let w = Weighted::new(&t, &exposed, &fixed_sizing(None), &ctx, false, false).unwrap();
        let ends = w.segments.expect("laid out in segments");
        // Each segment holds what its place says.
        for (j, (&p, &x)) in w.pnl.iter().zip(&w.exposed).enumerate() {
            let k = ends.iter().position(|&e| j < e).unwrap();
            assert_eq!((k >= 2, k % 2 == 1), (x, p < 0.0), "position {j}");
        }
        assert!(ends.windows(2).all(|e| e[0] < e[1]), "{ends:?}");
        let mut counts = Vec::new();
        for l in 0..LANES {
            let mut c = Vec::<u8>::new();
            draw_counts(t.len(), 3, l, &mut c);
            counts.resize(t.len() * LANES, 0);
            for (j, &k) in c.iter().enumerate() {
                counts[j * LANES + l] = k;
            }
        }
        let portable = sums_portable(&w.pnl, ends, &counts);
        assert!(portable[0].iter().all(|&g| g > 0.0) && portable[1].iter().all(|&g| g < 0.0));
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the CPU has AVX2, just checked.
            let avx2 = unsafe { sums_avx2(&w.pnl, ends, &counts) };
            assert_eq!(
                avx2.map(|a| a.map(f64::to_bits)),
                portable.map(|a| a.map(f64::to_bits))
            );
        }
    }

    /// The removed pass gives the removed scenario's metrics bit for bit,
    /// whatever the exposure flags of the call.
    #[test]
    fn removed_pass_equals_the_removed_scenario() {
        for (case, equity) in [false, true].into_iter().enumerate() {
            let (t, _) = random_trades(4000, 60 + case as u64, equity);
            let settings = fixed_sizing(None);
            let ctx = context(&t, "America/New_York".parse::<Zone>().unwrap());
            let pass = RemovedPass::new(&t, &settings, &ctx).expect("fixed sizing");
            let mut order: Vec<u32> = (0..t.len() as u32).collect();
            scenarios::close_order(&mut order, &t.opened, &t.closed);
            for every in [1usize, 3, 7, 4001] {
                let exposed = |i: usize| i.is_multiple_of(every);
                let sc = scenarios::build(&TradeView::of(&order, &t, &exposed), &settings).unwrap();
                let m = metrics::compute(&sc.removed.view().curve(&t.opened, &t.closed), &ctx);
                let want = [
                    Some(m.net),
                    m.profit_factor,
                    m.sharpe,
                    m.max_drawdown,
                    m.tcr,
                ];
                assert_eq!(
                    bits(&pass.figures(exposed)),
                    bits(&want),
                    "case {case}, every {every}"
                );
                let flags: Vec<bool> = (0..t.len()).map(exposed).collect();
                let by_position: Vec<bool> =
                    pass.order().iter().map(|&i| flags[i as usize]).collect();
                assert_eq!(
                    bits(&pass.figures_at(&by_position)),
                    bits(&want),
                    "case {case}, every {every}"
                );
                for (f, w) in want.iter().enumerate() {
                    assert_eq!(
                        pass.figure_at(&by_position, f).map(f64::to_bits),
                        w.map(f64::to_bits),
                        "case {case}, every {every}, figure {f}"
                    );
                }
                assert_eq!(
                    pass.tail_and_path_at(&by_position)
                        .map(|v| v.map(f64::to_bits)),
                    [want[4], want[2], want[3]].map(|v| v.map(f64::to_bits)),
                    "case {case}, every {every}"
                );
            }
        }
    }

    /// When the largest trades are all exposed, the ranked prefix is deep
    /// enough for the removed scenario's top k: resamples stay on the
    /// weighted pass, with the figures of the rebuild (to rounding).
    #[test]
    fn largest_trades_exposed_keep_the_weighted_pass() {
        let (t, _) = random_trades(20_000, 91, false);
        // The 2 000 largest |P/L| exposed, and nothing else: the removed
        // scenario's top 200 lie past a 4 × 200 + 1024 deep prefix.
        let mut by_size: Vec<usize> = (0..t.len()).collect();
        by_size.sort_by(|&a, &b| t.pnl[b].abs().total_cmp(&t.pnl[a].abs()));
        let mut exposed = vec![false; t.len()];
        for &i in &by_size[..2000] {
            exposed[i] = true;
        }
        let settings = fixed_sizing(None);
        let ctx = context(&t, Zone::Utc);
        let w = Weighted::new(&t, &exposed, &settings, &ctx, false, true).unwrap();
        assert!(!w.ranked_all);
        assert!(
            w.by_tail.len() > 2000 + 1824,
            "deepened past the exposed: {}",
            w.by_tail.len()
        );
        let gross: f64 = t.pnl.iter().map(|p| p.abs()).sum();
        let res = Resamples::Seeded { count: 5, seed: 8 };
        let got = w.changes_side_by_side(&mut w.lane_scratch(), &res, 0, true);
        for r in 0..5 {
            let got = got[r].expect("weighted pass");
            let want = changes(&res.indices(&w.order, r), &t, &exposed, &settings, &ctx);
            assert!(equal_to_rounding(&got, &want, gross), "resample {r}");
        }
    }

    /// A resample that holds none of the largest trades walks past the
    /// ranked prefix and is handed to the slow path, with the same result.
    #[test]
    fn a_resample_past_the_ranked_prefix_takes_the_slow_path() {
        let (t, exposed) = random_trades(5000, 77, false);
        let settings = fixed_sizing(None);
        let ctx = context(&t, Zone::Utc);
        let w = Weighted::new(&t, &exposed, &settings, &ctx, false, true).unwrap();
        assert!(!w.ranked_all, "50 × 4 + 1024 < 5000");
        let mut small: Vec<u32> = (0..5000).collect();
        small.sort_by(|&a, &b| t.pnl[a as usize].abs().total_cmp(&t.pnl[b as usize].abs()));
        // The 2 000 smallest: below the prefix (deepened to 2 448 for the
        // unexposed two thirds).
        small.truncate(2000);
        assert!(w.by_tail.len() <= 3000, "{}", w.by_tail.len());
        let sets = vec![small];
        let res = Resamples::Given(&sets);
        assert!(w.changes_side_by_side(&mut w.lane_scratch(), &res, 0, true)[0].is_none());
        let got = bootstrap_intervals(res, &t, &exposed, &settings, &ctx, 0.95, true, &|| {});
        let want = changes(&sets[0], &t, &exposed, &settings, &ctx);
        for (f, name) in BOOTSTRAP_FIGURES.iter().enumerate() {
            assert_eq!(
                got[name].low.map(f64::to_bits),
                want[f].map(f64::to_bits),
                "{name}"
            );
        }
    }
}
