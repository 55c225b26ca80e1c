//! Performance figures of one scenario (docs/method.md §5, §6).
//!
//! Input is a scenario's kept trades in close order (ties by open, then
//! input order) with their scenario P/L. The choices made
//! here, documented in docs/method.md §5 and README "How the figures are defined":
//! - the daily series runs over the weekdays of the *whole input's* span
//!   (first open → last close, report zone) for every scenario, so scenarios
//!   compare like for like; a close on a Saturday or Sunday counts on the
//!   following Monday (or the last weekday of the span);
//! - longest drawdown: time from a peak to the first later point at or above
//!   it; one still open at the end runs to the span's end;
//! - largest win/loss are `null` when there are no wins/losses.
//!
//! A figure that cannot be computed is `None` (JSON `null`), never invented.

use crate::import::zones::{DAY_MS, Zone};
use serde::Serialize;

/// Trading days per year used to annualise daily ratios (empyrical's
/// `APPROX_BDAYS_PER_YEAR`; REFERENCES.md §4.3).
pub const DAYS_PER_YEAR: f64 = 252.0;

/// Every docs/method.md §5 figure for one scenario.
#[derive(Debug, Clone, Default, Serialize, PartialEq)]
pub struct Metrics {
    /// Trades in the scenario.
    pub trades: usize,
    /// Trades with P/L > 0.
    pub wins: usize,
    /// Trades with P/L < 0.
    pub losses: usize,
    /// Sum of P/L (account currency).
    pub net: f64,
    /// Sum of winning P/L (≥ 0).
    pub gross_profit: f64,
    /// Sum of losing P/L (≤ 0).
    pub gross_loss: f64,
    /// wins ÷ trades.
    pub win_rate: Option<f64>,
    /// gross profit ÷ |gross loss|; null without losses.
    pub profit_factor: Option<f64>,
    /// Mean P/L of the winning trades.
    pub avg_win: Option<f64>,
    /// Mean losing P/L (negative).
    pub avg_loss: Option<f64>,
    /// avg win ÷ |avg loss|.
    pub payoff_ratio: Option<f64>,
    /// Mean P/L per trade.
    pub expectancy: Option<f64>,
    /// Largest single win.
    pub largest_win: Option<f64>,
    /// Largest single loss (negative).
    pub largest_loss: Option<f64>,
    /// Largest peak-to-trough fall of the closed-trade equity curve (≥ 0).
    pub max_drawdown: Option<f64>,
    /// The same as a fraction of the peak equity, when equity is known.
    pub max_drawdown_pct: Option<f64>,
    /// Longest time from a peak to the next new peak, in days.
    pub longest_drawdown_days: Option<f64>,
    /// net ÷ max drawdown.
    pub return_to_drawdown: Option<f64>,
    /// Daily mean ÷ sample sd (ddof 1) × √252, rf = 0.
    pub sharpe: Option<f64>,
    /// Daily mean ÷ √mean(min(r, 0)²) × √252.
    pub sortino: Option<f64>,
    /// mean P/L ÷ (sd ÷ √n), sd with ddof 1.
    pub t_stat: Option<f64>,
    /// Union of holding intervals ÷ span.
    pub time_in_market: Option<f64>,
    /// Tail concentration ratio at p % (docs/method.md §6).
    pub tcr: Option<f64>,
}

/// What every scenario shares: span, zone for days, initial equity, TCR p.
#[derive(Debug, Clone, Copy)]
pub struct Context {
    /// First open and last close of the whole input (ms).
    pub span: (i64, i64),
    /// Zone whose calendar days make the daily series.
    pub report_zone: Zone,
    /// Starting equity, if known (makes daily figures returns and adds
    /// drawdown %).
    pub initial_equity: Option<f64>,
    /// Percentage for the tail concentration ratio.
    pub tcr_p: f64,
}

/// One scenario's kept trades, in close order.
pub struct Curve<'a> {
    /// P/L of each kept trade, in close order.
    pub pnl: &'a [f64],
    /// Input index of each kept trade; its times are `opened[trade[j]]` and
    /// `closed[trade[j]]` (the input's columns, not copies per scenario).
    pub trade: &'a [u32],
    /// Open instants of the input, ms UTC (indexed through `trade`).
    pub opened: &'a [i64],
    /// Close instants of the input, ms UTC (indexed through `trade`).
    pub closed: &'a [i64],
    /// The values the tail concentration is measured on (per-trade returns,
    /// see `scenarios::TailBasis`); empty: the P/L itself.
    pub tail: &'a [f64],
}

impl Curve<'_> {
    /// Close instants of the kept trades, in order.
    fn closes(&self) -> impl DoubleEndedIterator<Item = i64> + '_ {
        self.trade.iter().map(|&i| self.closed[i as usize])
    }

    /// (open, close) of the kept trades, in order.
    fn intervals(&self) -> impl DoubleEndedIterator<Item = (i64, i64)> + '_ {
        self.trade
            .iter()
            .map(|&i| (self.opened[i as usize], self.closed[i as usize]))
    }
}

/// `part` ÷ `net`: a share of net P/L; undefined when net is zero within
/// the rounding of its sum, |net| ≤ 10⁻¹² × Σ|P/L| (`abs_total`), where it
/// would be rounding residue over rounding residue, different for every
/// order of the same trades (docs/method.md §3). Every share of net goes
/// through here.
pub fn share_of_net(part: f64, net: f64, abs_total: f64) -> Option<f64> {
    (net.abs() > abs_total * 1e-12).then(|| part / net)
}

/// Sample mean and standard deviation (ddof 1).
pub fn mean_sd(x: &[f64]) -> (Option<f64>, Option<f64>) {
    let n = x.len();
    if n == 0 {
        return (None, None);
    }
    let mean = x.iter().sum::<f64>() / n as f64;
    if n < 2 {
        return (Some(mean), None);
    }
    let var = x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1) as f64;
    (Some(mean), Some(var.sqrt()))
}

/// Sharpe ratio of a per-period series: mean ÷ sd(ddof 1) × √periods.
pub fn sharpe(x: &[f64], periods: f64) -> Option<f64> {
    match mean_sd(x) {
        (Some(m), Some(sd)) if sd > 0.0 => Some(m / sd * periods.sqrt()),
        _ => None,
    }
}

/// Sortino ratio, target 0: mean ÷ √(mean over all periods of min(r,0)²)
/// × √periods (the Red Rock Capital definition, REFERENCES.md §4.2).
pub fn sortino(x: &[f64], periods: f64) -> Option<f64> {
    if x.is_empty() {
        return None;
    }
    let n = x.len() as f64;
    let mean = x.iter().sum::<f64>() / n;
    let dd = (x.iter().map(|v| v.min(0.0).powi(2)).sum::<f64>() / n).sqrt();
    (dd > 0.0).then(|| mean / dd * periods.sqrt())
}

/// t statistic of the mean against 0.
pub fn t_stat(x: &[f64]) -> Option<f64> {
    match mean_sd(x) {
        (Some(m), Some(sd)) if sd > 0.0 => Some(m / (sd / (x.len() as f64).sqrt())),
        _ => None,
    }
}

/// Max drawdown (≥ 0) of the running sum of `pnl` from `start`, with the
/// peak including the start; and the same as a fraction of the peak.
pub fn max_drawdown(pnl: &[f64], start: f64) -> (f64, Option<f64>) {
    let (mut eq, mut peak, mut dd, mut dd_pct) = (start, start, 0.0f64, 0.0f64);
    for p in pnl {
        eq += p;
        peak = peak.max(eq);
        dd = dd.max(peak - eq);
        if peak > 0.0 {
            dd_pct = dd_pct.max((peak - eq) / peak);
        }
    }
    (dd, Some(dd_pct))
}

/// Tail concentration ratio (docs/method.md §6): k = ceil(n·p/100) clamped to [1, n];
/// mean of the k largest |pnl| ÷ mean of all |pnl|.
pub fn tcr(pnl: &[f64], p: f64) -> Option<f64> {
    let n = pnl.len();
    if n == 0 {
        return None;
    }
    let total: f64 = pnl.iter().map(|v| v.abs()).sum();
    if total <= 0.0 {
        return None;
    }
    let k = tcr_k(n, p);
    let top: f64 = top_abs_of(pnl, k).iter().sum();
    Some((top / k as f64) / (total / n as f64))
}

/// The k largest |value|, largest first, without copying the data (10 M
/// trades × 3 scenarios would otherwise copy 240 MB at once): through a
/// sampled threshold on large inputs, else a heap of k ([`top_abs`]). NaN
/// is never among them.
pub fn top_abs_of(values: &[f64], k: usize) -> Vec<f64> {
    let n = values.len();
    if k == 0 {
        return Vec::new();
    }
    // On a large input, a threshold read off a sample of about 4 096 keeps
    // roughly twice the top k; when at least k values pass it, the top k are
    // among them (the k-th largest is then ≥ the threshold).
    if n >= 1 << 16 && k.saturating_mul(8) <= n {
        let mut sample: Vec<f64> = values
            .iter()
            .step_by(n / 4096)
            .map(|v| v.abs())
            .filter(|v| !v.is_nan())
            .collect();
        sample.sort_unstable_by(|a, b| b.total_cmp(a));
        let want = (2.0 * k as f64 / n as f64 * sample.len() as f64).ceil() as usize + 8;
        if let Some(&t) = sample.get(want) {
            let mut kept: Vec<f64> = values.iter().map(|v| v.abs()).filter(|&v| v >= t).collect();
            if kept.len() >= k {
                kept.select_nth_unstable_by(k - 1, |a, b| b.total_cmp(a));
                kept.truncate(k);
                kept.sort_unstable_by(|a, b| b.total_cmp(a));
                return kept;
            }
        }
    }
    top_abs(values.iter().map(|v| v.abs()), k)
}

/// The k largest of `values` (NaN left out), largest first, through a
/// bounded heap: one pass, O(k) memory.
pub fn top_abs(values: impl Iterator<Item = f64>, k: usize) -> Vec<f64> {
    use std::cmp::{Ordering, Reverse};
    #[derive(PartialEq)]
    struct Total(f64);
    impl Eq for Total {}
    impl PartialOrd for Total {
        fn partial_cmp(&self, o: &Self) -> Option<Ordering> {
            Some(self.cmp(o))
        }
    }
    impl Ord for Total {
        fn cmp(&self, o: &Self) -> Ordering {
            self.0.total_cmp(&o.0)
        }
    }
    if k == 0 {
        return Vec::new();
    }
    let mut heap: std::collections::BinaryHeap<Reverse<Total>> =
        std::collections::BinaryHeap::with_capacity(k + 1);
    for v in values.filter(|v| !v.is_nan()) {
        if heap.len() < k {
            heap.push(Reverse(Total(v)));
        } else if heap.peek().is_some_and(|m| v > m.0.0) {
            heap.pop();
            heap.push(Reverse(Total(v)));
        }
    }
    let mut out: Vec<f64> = heap.into_iter().map(|r| r.0.0).collect();
    out.sort_by(|a, b| b.total_cmp(a));
    out
}

/// Size of the top bucket for n trades at p %. n·p/100 is computed in a
/// way that is exact for whole results (e.g. 300 × 1 % = 3, not 3.0000001).
pub fn tcr_k(n: usize, p: f64) -> usize {
    let raw = n as f64 * p / 100.0;
    let rounded = raw.round();
    let k = if (raw - rounded).abs() < 1e-9 {
        rounded
    } else {
        raw.ceil()
    };
    (k as usize).clamp(1, n)
}

/// Linear-interpolated quantile (Hyndman–Fan type 7, numpy's default).
pub fn quantile_type7(sorted: &[f64], q: f64) -> Option<f64> {
    if sorted.is_empty() {
        return None;
    }
    let h = (sorted.len() - 1) as f64 * q.clamp(0.0, 1.0);
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(sorted.len() - 1);
    Some(sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo]))
}

/// [`quantile_type7`] of values in any order, by selection (O(n)) rather
/// than a full sort; `values` is reordered. NaN sorts last (total order).
pub fn quantile_type7_unsorted(values: &mut [f64], q: f64) -> Option<f64> {
    if values.is_empty() {
        return None;
    }
    let h = (values.len() - 1) as f64 * q.clamp(0.0, 1.0);
    let lo = h.floor() as usize;
    let (_, &mut a, rest) = values.select_nth_unstable_by(lo, f64::total_cmp);
    // The next order statistic is the least of what lies above.
    let b = rest.iter().copied().min_by(f64::total_cmp).unwrap_or(a);
    Some(a + (h - lo as f64) * (b - a))
}

/// Daily P/L (or returns when equity is known) over the weekdays of the
/// span in the report zone. A close on a weekend counts on the next Monday.
pub fn daily_series(c: &Curve, ctx: &Context) -> Vec<f64> {
    walk_closes(c, ctx).0
}

/// One pass over the closes in order: the daily series (see
/// [`daily_series`]) and the longest peak-to-recovery time in days.
fn walk_closes(c: &Curve, ctx: &Context) -> (Vec<f64>, f64) {
    let mut slots = DaySlots::new(ctx);
    let mut pnl = vec![0.0; slots.len()];
    let (mut eq, mut peak, mut peak_t, mut longest) = (0.0f64, 0.0f64, ctx.span.0, 0i64);
    let mut under = false;
    for (&p, cl) in c.pnl.iter().zip(c.closes()) {
        if let Some(s) = pnl.get_mut(slots.slot(cl)) {
            *s += p;
        }
        eq += p;
        if eq >= peak {
            if under {
                longest = longest.max(cl - peak_t);
            }
            peak = eq;
            peak_t = cl;
            under = false;
        } else {
            under = true;
        }
    }
    if under {
        longest = longest.max(ctx.span.1 - peak_t);
    }
    (
        daily_values(pnl, ctx.initial_equity),
        longest as f64 / DAY_MS as f64,
    )
}

/// The daily series from the P/L summed per day: the sums themselves, or
/// with a starting equity each day's return on the equity before it.
pub fn daily_values(day_pnl: Vec<f64>, initial_equity: Option<f64>) -> Vec<f64> {
    match initial_equity {
        None => day_pnl,
        Some(e0) => {
            let mut eq = e0;
            day_pnl
                .iter()
                .map(|&p| {
                    let r = if eq != 0.0 { p / eq } else { f64::NAN };
                    eq += p;
                    r
                })
                .collect()
        }
    }
}

/// The slot of the daily series each close counts in: the weekdays of the
/// context's span in the report zone, a weekend close on the next weekday
/// (clamped to the span). Fed closes in order, the zone is consulted only
/// when the day changes.
pub struct DaySlots<'a> {
    days: crate::import::zones::LocalDayCursor<'a>,
    first: i64,
    len: usize,
    day: i64,
    slot: usize,
}

impl<'a> DaySlots<'a> {
    /// The slots of `ctx`'s span.
    pub fn new(ctx: &'a Context) -> Self {
        use crate::import::zones::{LocalDayCursor, local_day, weekday_index};
        let z = &ctx.report_zone;
        let first = weekday_index(local_day(z, ctx.span.0));
        let last = weekday_index(local_day(z, ctx.span.1));
        DaySlots {
            days: LocalDayCursor::new(z),
            first,
            len: (last - first + 1).max(0) as usize,
            day: i64::MIN,
            slot: 0,
        }
    }

    /// Number of weekdays in the span.
    pub fn len(&self) -> usize {
        self.len
    }

    /// Whether the span holds no weekday.
    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// The slot of a close instant (ms UTC).
    pub fn slot(&mut self, close: i64) -> usize {
        let d = self.days.day(close);
        if d != self.day {
            self.day = d;
            self.slot = (crate::import::zones::weekday_index(d) - self.first)
                .clamp(0, self.len as i64 - 1) as usize;
        }
        self.slot
    }
}

/// Union length of [open, close] intervals given in close order (as every
/// scenario series is): one backward sweep, no sort. Walking closes from the
/// last, an interval that ends before the current merged segment starts can
/// overlap no interval already seen, so the segment is complete.
fn union_length(intervals: impl DoubleEndedIterator<Item = (i64, i64)>) -> i64 {
    let (mut total, mut cur): (i64, Option<(i64, i64)>) = (0, None);
    let mut last_close = i64::MAX;
    for (a, b) in intervals.rev() {
        debug_assert!(b <= last_close, "close order");
        last_close = b;
        cur = match cur {
            Some((s, e)) if b >= s => Some((s.min(a), e)),
            Some((s, e)) => {
                total += e - s;
                Some((a, b))
            }
            None => Some((a, b)),
        };
    }
    total + cur.map_or(0, |(s, e)| e - s)
}

/// Union length of intervals, each first clipped to `clip` when given.
pub fn union_within(mut iv: Vec<(i64, i64)>, clip: Option<(i64, i64)>) -> i64 {
    if let Some((lo, hi)) = clip {
        iv = iv
            .into_iter()
            .map(|(a, b)| (a.max(lo), b.min(hi)))
            .filter(|(a, b)| b > a)
            .collect();
    }
    iv.sort_unstable();
    let (mut total, mut cur): (i64, Option<(i64, i64)>) = (0, None);
    for (a, b) in iv {
        cur = match cur {
            Some((s, e)) if a <= e => Some((s, e.max(b))),
            Some((s, e)) => {
                total += e - s;
                Some((a, b))
            }
            None => Some((a, b)),
        };
    }
    total + cur.map_or(0, |(s, e)| e - s)
}

/// All figures for one scenario.
pub fn compute(c: &Curve, ctx: &Context) -> Metrics {
    compute_with_union(c, ctx, None)
}

/// Union length of a curve's holding periods (ms), for
/// [`compute_with_union`].
pub fn time_held(c: &Curve) -> i64 {
    union_length(c.intervals())
}

/// [`compute`], given the union length of the holding periods when it is
/// already known (the capped scenario holds the baseline's trades).
pub fn compute_with_union(c: &Curve, ctx: &Context, union: Option<i64>) -> Metrics {
    let n = c.pnl.len();
    let mut m = Metrics {
        trades: n,
        ..Default::default()
    };
    let (mut big_win, mut big_loss) = (f64::NEG_INFINITY, f64::INFINITY);
    // Without branches: a win or loss is a coin flip to the predictor.
    // Adding 0.0 for the other side leaves each sum as it was.
    for &p in c.pnl {
        m.net += p;
        m.wins += (p > 0.0) as usize;
        m.losses += (p < 0.0) as usize;
        m.gross_profit += p.max(0.0);
        m.gross_loss += p.min(0.0);
        big_win = big_win.max(p);
        big_loss = big_loss.min(p);
    }
    if n > 0 {
        m.win_rate = Some(m.wins as f64 / n as f64);
        m.expectancy = Some(m.net / n as f64);
    }
    m.profit_factor = (m.losses > 0).then(|| m.gross_profit / m.gross_loss.abs());
    m.avg_win = (m.wins > 0).then(|| m.gross_profit / m.wins as f64);
    m.avg_loss = (m.losses > 0).then(|| m.gross_loss / m.losses as f64);
    m.payoff_ratio = match (m.avg_win, m.avg_loss) {
        (Some(w), Some(l)) => Some(w / l.abs()),
        _ => None,
    };
    m.largest_win = (m.wins > 0).then_some(big_win);
    m.largest_loss = (m.losses > 0).then_some(big_loss);
    let (dd, dd_pct) = max_drawdown(c.pnl, ctx.initial_equity.unwrap_or(0.0));
    m.max_drawdown = Some(dd);
    m.max_drawdown_pct = ctx.initial_equity.and(dd_pct);
    let (daily, longest) = walk_closes(c, ctx);
    m.longest_drawdown_days = Some(longest);
    m.return_to_drawdown = (dd > 0.0).then(|| m.net / dd);
    m.sharpe = sharpe(&daily, DAYS_PER_YEAR);
    m.sortino = sortino(&daily, DAYS_PER_YEAR);
    m.t_stat = t_stat(c.pnl);
    let span = ctx.span.1 - ctx.span.0;
    m.time_in_market =
        (span > 0).then(|| union.unwrap_or_else(|| time_held(c)) as f64 / span as f64);
    m.tcr = tcr(if c.tail.is_empty() { c.pnl } else { c.tail }, ctx.tcr_p);
    m
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn top_values_from_a_heap_equal_the_sorted_head() {
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(9);
        for n in [0usize, 1, 5, 100, 1000] {
            let v: Vec<f64> = (0..n)
                .map(|_| (rng.random_range(-40..40) as f64) / 4.0)
                .collect();
            let mut sorted: Vec<f64> = v.iter().map(|x| x.abs()).collect();
            sorted.sort_by(|a, b| b.total_cmp(a));
            for k in [0usize, 1, 3, 10, 2000] {
                assert_eq!(
                    top_abs(v.iter().map(|x| x.abs()), k),
                    sorted[..k.min(n)].to_vec(),
                    "n {n} k {k}"
                );
            }
        }
    }

    #[test]
    fn top_values_through_a_threshold_equal_the_heap_ones() {
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(12);
        for (n, spread) in [(70_000usize, 40i64), (200_000, 4), (300_000, 1_000_000)] {
            // Few distinct values (many ties at the cut) and many.
            let v: Vec<f64> = (0..n)
                .map(|_| (rng.random_range(-spread..spread) as f64) / 4.0)
                .collect();
            for k in [1usize, 5, 100, n / 100, n / 9] {
                assert_eq!(
                    top_abs_of(&v, k),
                    top_abs(v.iter().map(|x| x.abs()), k),
                    "n {n} spread {spread} k {k}"
                );
            }
        }
    }

    #[test]
    fn quantile_by_selection_equals_the_sorted_one() {
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        for n in [1usize, 2, 3, 10, 101, 1000] {
            let v: Vec<f64> = (0..n)
                .map(|_| (rng.random_range(0..50) as f64) / 4.0)
                .collect();
            let mut sorted = v.clone();
            sorted.sort_by(f64::total_cmp);
            for q in [0.0, 0.01, 0.25, 0.5, 0.9, 0.99, 1.0] {
                assert_eq!(
                    quantile_type7_unsorted(&mut v.clone(), q),
                    quantile_type7(&sorted, q),
                    "n {n} q {q}"
                );
            }
        }
    }

    #[test]
    fn union_in_close_order_equals_the_sorted_union() {
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        for _ in 0..500 {
            let n = rng.random_range(0..40);
            let mut iv: Vec<(i64, i64)> = (0..n)
                .map(|_| {
                    let a = rng.random_range(0..200);
                    (a, a + rng.random_range(0..30))
                })
                .collect();
            iv.sort_by_key(|&(a, b)| (b, a));
            assert_eq!(
                union_length(iv.iter().copied()),
                union_within(iv.clone(), None),
                "{iv:?}"
            );
        }
    }

    /// REFERENCES.md §4.5 reference trade list (scipy/numpy computed).
    const REF: [f64; 10] = [
        250.0, -100.0, 75.0, -50.0, 400.0, -200.0, 125.0, 30.0, -80.0, 150.0,
    ];

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-9 * b.abs().max(1.0)
    }

    #[test]
    fn reference_trade_list() {
        let t: Vec<i64> = (0..10).map(|i| i * DAY_MS).collect();
        let ctx = Context {
            span: (0, 9 * DAY_MS),
            report_zone: Zone::Utc,
            initial_equity: None,
            tcr_p: 10.0,
        };
        let m = compute(
            &Curve {
                pnl: &REF,
                trade: &[0, 1, 2, 3, 4, 5, 6, 7, 8, 9],
                opened: &t,
                closed: &t,
                tail: &[],
            },
            &ctx,
        );
        assert_eq!((m.trades, m.wins, m.losses), (10, 6, 4));
        assert!(
            close(m.net, 600.0) && close(m.gross_profit, 1030.0) && close(m.gross_loss, -430.0)
        );
        assert!(close(m.profit_factor.unwrap(), 2.395348837209302));
        assert!(close(m.win_rate.unwrap(), 0.6));
        assert!(close(m.t_stat.unwrap(), 1.056905286528691));
        assert!(close(m.max_drawdown.unwrap(), 200.0));
        // k = ceil(10 × 10 / 100) = 1 → 400 / 146.
        assert!(close(m.tcr.unwrap(), 2.73972602739726));
        assert!(close(tcr(&REF, 20.0).unwrap(), 2.2260273972602738));
        assert!(close(tcr(&REF, 30.0).unwrap(), 1.9406392694063925));
        assert!(close(sortino(&REF, 1.0).unwrap(), 0.7817962860855644));
        assert!(close(sharpe(&REF, 1.0).unwrap(), 0.33422279765035395));
    }

    /// Red Rock Capital "Sortino: A 'Sharper' Ratio" worked example
    /// (REFERENCES.md §4.2): annual returns, target 0 → 4.417261042993862.
    #[test]
    fn sortino_and_sharpe_match_a_published_worked_example() {
        let r = [0.17, 0.15, 0.23, -0.05, 0.12, 0.09, 0.13, -0.04];
        assert!(close(sortino(&r, 1.0).unwrap(), 4.417261042993862));
        assert!(close(sharpe(&r, 1.0).unwrap(), 1.0160946695958604));
        let daily = [0.01, -0.005, 0.007, 0.002, -0.003];
        assert!(close(sharpe(&daily, 252.0).unwrap(), 5.474264111966791));
    }

    #[test]
    fn tcr_of_equal_and_single_outsized_trades() {
        assert_eq!(tcr(&[5.0; 37], 1.0), Some(1.0));
        // One huge trade among n: k = 1 at 1 % for n ≤ 100.
        let mut v = vec![1.0; 99];
        v.push(1000.0);
        let expect = 1000.0 / (1099.0 / 100.0);
        assert!(close(tcr(&v, 1.0).unwrap(), expect));
        // Whole n·p/100: factor 100/p times the top share.
        let v: Vec<f64> = (1..=300).map(|i| i as f64).collect();
        let total: f64 = v.iter().sum();
        for (p, factor, k) in [(1.0, 100.0, 3), (2.0, 50.0, 6), (4.0, 25.0, 12)] {
            let top: f64 = v[300 - k..].iter().sum();
            assert!(close(tcr(&v, p).unwrap(), top / total * factor), "p={p}");
            assert_eq!(tcr_k(300, p), k);
        }
        // Non-whole: n = 150, 1 % → 1.5 → k = 2.
        assert_eq!(tcr_k(150, 1.0), 2);
        assert_eq!(tcr_k(5, 1.0), 1);
        assert_eq!(tcr(&[0.0, 0.0], 1.0), None);
    }

    #[test]
    fn quantile_matches_numpy_linear() {
        // numpy.quantile([1, 2, 3, 4, 10], q) (linear): 0.5 → 3, 0.9 → 7.6, 0.99 → 9.76 (hand-checked: h = 4q).
        let s = [1.0, 2.0, 3.0, 4.0, 10.0];
        assert!(close(quantile_type7(&s, 0.5).unwrap(), 3.0));
        assert!(close(quantile_type7(&s, 0.9).unwrap(), 7.6));
        assert!(close(quantile_type7(&s, 0.99).unwrap(), 9.76));
    }

    #[test]
    fn drawdown_counts_the_starting_peak_and_durations() {
        assert_eq!(max_drawdown(&[-10.0, 5.0], 0.0).0, 10.0);
        let (dd, pct) = max_drawdown(&[10.0, -20.0, 5.0], 100.0);
        assert_eq!(dd, 20.0);
        assert!(close(pct.unwrap(), 20.0 / 110.0));
        let t: Vec<i64> = vec![DAY_MS, 3 * DAY_MS, 4 * DAY_MS, 10 * DAY_MS];
        let pnl = [5.0, -3.0, 1.0, 4.0];
        let ctx = Context {
            span: (0, 12 * DAY_MS),
            report_zone: Zone::Utc,
            initial_equity: None,
            tcr_p: 1.0,
        };
        // Peak at day 1 (5), recovered at day 10 (7) → 9 days.
        assert_eq!(
            walk_closes(
                &Curve {
                    pnl: &pnl,
                    trade: &[0, 1, 2, 3],
                    opened: &t,
                    closed: &t,
                    tail: &[]
                },
                &ctx
            )
            .1,
            9.0
        );
        assert_eq!(union_length([(0, 10), (5, 12), (20, 25)].into_iter()), 17);
        assert_eq!(
            union_within(vec![(0, 10), (5, 20), (30, 40)], Some((0, 35))),
            25
        );
    }
}
