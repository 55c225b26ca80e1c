//! The exposure engine (docs/method.md §2): which trades meet which release windows.
//!
//! Every rule is an intersection of two closed intervals: the trade's
//! `[open, close]` (`[open, open]` for `entered`) and the release's window
//! `[t − pre, t + post]` (`[t, t]` for `held`). Used releases are indexed per
//! currency, sorted by window start; a trade's candidates are the windows
//! starting in `[q_start − L, q_end]`, L being the longest window of that
//! currency, found by binary search, then filtered on the window end. Cost:
//! O((n + m) log m + matches + near misses) — never n × m.
//!
//! Invariant: `matched_releases(t)` is exactly the set of relevant used
//! releases satisfying the rule (checked against a plain O(n·m) loop in the
//! property tests).

use crate::engine::windows::WindowSettings;
use crate::import::calendar::Release;
use crate::import::zones::{DAY_MS, MINUTE_MS};
use rayon::prelude::*;
use serde::Serialize;
use std::collections::HashMap;

/// Which trades count as exposed to a release.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ExposureRule {
    /// The holding period overlaps the window: open ≤ t + post and close ≥ t − pre.
    #[default]
    Overlap,
    /// Open at the release instant: open ≤ t ≤ close.
    Held,
    /// Opened inside the window: t − pre ≤ open ≤ t + post.
    Entered,
}

impl ExposureRule {
    /// The interval of a trade that must meet a release's slot
    /// ([`UsedWindow::slot`]) under the rule: `[open, open]` for `entered`,
    /// `[open, close]` otherwise.
    pub fn query(self, open: i64, close: i64) -> (i64, i64) {
        match self {
            ExposureRule::Entered => (open, open),
            _ => (open, close),
        }
    }
}

/// One used release, as the engine sees it.
#[derive(Debug, Clone, Copy)]
struct Slot {
    start: i64,
    end: i64,
    release: u32,
}

/// Per-currency index of used releases.
#[derive(Debug, Default)]
struct CurrencyIndex {
    /// Sorted by `start`.
    slots: Vec<Slot>,
    /// Longest `end − start`.
    max_len: i64,
    /// Release instants sorted, with release index, for "nearest release".
    instants: Vec<(i64, u32)>,
}

/// A used release's window, as the engine needs it.
#[derive(Debug, Clone)]
pub struct UsedWindow {
    /// Index of the release in the calendar.
    pub release: u32,
    /// The release's currency.
    pub currency: String,
    /// Window start and end (inclusive), and the release instant, ms.
    pub start: i64,
    /// Window end (inclusive), ms.
    pub end: i64,
    /// Release instant, ms.
    pub at: i64,
    /// A release with a date but no time (its window is the local day).
    pub all_day: bool,
}

impl UsedWindow {
    /// The interval a trade's query must meet under `rule`: the release
    /// instant for `held` (the whole window for an all-day release), else
    /// the window.
    pub fn slot(&self, rule: ExposureRule) -> (i64, i64) {
        slot_of(rule, self.all_day, (self.start, self.end, self.at))
    }
}

/// [`UsedWindow::slot`] of a release's `(start, end, at)` window (as
/// `WindowSettings::span_for` gives it).
pub fn slot_of(rule: ExposureRule, all_day: bool, (start, end, at): (i64, i64, i64)) -> (i64, i64) {
    match rule {
        ExposureRule::Held if !all_day => (at, at),
        _ => (start, end),
    }
}

/// The windows of the releases the settings use, in calendar order.
pub fn used_windows(releases: &[Release], windows: &WindowSettings) -> Vec<UsedWindow> {
    releases
        .iter()
        .enumerate()
        .filter_map(|(i, r)| {
            let (start, end, at) = windows.span_for(r)?;
            Some(UsedWindow {
                release: i as u32,
                currency: r.currency.clone(),
                start,
                end,
                at,
                all_day: r.all_day,
            })
        })
        .collect()
}

/// Used releases indexed by currency, ready to query.
pub struct Engine {
    rule: ExposureRule,
    currencies: HashMap<String, usize>,
    index: Vec<CurrencyIndex>,
    /// Whether each calendar release is used (has a window under the settings).
    pub used: Vec<bool>,
}

/// Per-trade exposure, columnar; the matches are stored compressed by trade.
#[derive(Debug, Clone, Default)]
pub struct Exposure {
    /// Number of matched releases per trade (k).
    pub k: Vec<u32>,
    /// Every trade's matched releases, trade after trade (k of them each,
    /// sorted): walk them with [`Exposure::match_lists`].
    pub match_release: Vec<u32>,
    /// Nearest relevant used release to the open (by |t − open|), or u32::MAX.
    /// Empty from [`Engine::run_matches`].
    pub nearest: Vec<u32>,
    /// Signed minutes from the nearest release to the open (open − t);
    /// NaN when there is none.
    pub minutes_from_nearest: Vec<f64>,
}

impl Exposure {
    /// Whether trade `i` (input order) overlaps at least one used release.
    pub fn is_exposed(&self, i: usize) -> bool {
        self.k[i] > 0
    }

    /// Each trade's matched releases, in trade order (no per-trade offsets
    /// are stored: the lists are cut by k as they are walked).
    pub fn match_lists(&self) -> impl Iterator<Item = &[u32]> + '_ {
        let mut rest = self.match_release.as_slice();
        self.k.iter().map(move |&k| {
            let (here, after) = rest.split_at(k as usize);
            rest = after;
            here
        })
    }
    /// Trades exposed to at least one used release.
    pub fn exposed_count(&self) -> usize {
        self.k.iter().filter(|&&k| k > 0).count()
    }
}

impl Engine {
    /// Indexes the releases that the window settings use.
    pub fn new(releases: &[Release], windows: &WindowSettings, rule: ExposureRule) -> Engine {
        Engine::from_windows(&used_windows(releases, windows), rule, releases.len())
    }

    /// Indexes pre-computed windows (used by placebo calendars, which move
    /// the same windows in time). `n_releases` sizes `used`.
    pub fn from_windows(windows: &[UsedWindow], rule: ExposureRule, n_releases: usize) -> Engine {
        let mut currencies = HashMap::new();
        let mut index: Vec<CurrencyIndex> = Vec::new();
        let mut used = vec![false; n_releases];
        for w in windows {
            used[w.release as usize] = true;
            let ci = *currencies.entry(w.currency.clone()).or_insert_with(|| {
                index.push(CurrencyIndex::default());
                index.len() - 1
            });
            let (start, end) = w.slot(rule);
            let ix = &mut index[ci];
            ix.slots.push(Slot {
                start,
                end,
                release: w.release,
            });
            ix.max_len = ix.max_len.max(end - start);
            ix.instants.push((w.at, w.release));
        }
        for ix in &mut index {
            ix.slots.sort_by_key(|s| (s.start, s.release));
            ix.instants.sort_unstable();
        }
        Engine {
            rule,
            currencies,
            index,
            used,
        }
    }

    /// Index of a currency in the engine, if any used release has it.
    fn currency_ids(&self, codes: &[String]) -> Vec<usize> {
        codes
            .iter()
            .filter_map(|c| self.currencies.get(c).copied())
            .collect()
    }

    /// Runs every trade. `instrument_currencies[i]` lists the currencies of
    /// instrument i.
    pub fn run(
        &self,
        opened: &[i64],
        closed: &[i64],
        instrument: &[u32],
        instrument_currencies: &[Vec<String>],
    ) -> Exposure {
        self.run_with(opened, closed, instrument, instrument_currencies, true)
    }

    /// [`Engine::run`] without the nearest release of each trade (`nearest`
    /// and `minutes_from_nearest` stay empty): for placebo calendars, window
    /// grids and per-run ranking, which use only the matches.
    pub fn run_matches(
        &self,
        opened: &[i64],
        closed: &[i64],
        instrument: &[u32],
        instrument_currencies: &[Vec<String>],
    ) -> Exposure {
        self.run_with(opened, closed, instrument, instrument_currencies, false)
    }

    fn run_with(
        &self,
        opened: &[i64],
        closed: &[i64],
        instrument: &[u32],
        instrument_currencies: &[Vec<String>],
        want_nearest: bool,
    ) -> Exposure {
        let ids: Vec<Vec<usize>> = instrument_currencies
            .iter()
            .map(|c| self.currency_ids(c))
            .collect();
        let n = opened.len();
        // Work in parallel chunks, each writing its trades' k (and nearest
        // release) in place and returning its own matched releases.
        const CHUNK: usize = 1 << 16;
        let mut out = Exposure {
            k: vec![0; n],
            match_release: Vec::new(),
            nearest: vec![u32::MAX; if want_nearest { n } else { 0 }],
            minutes_from_nearest: vec![f64::NAN; if want_nearest { n } else { 0 }],
        };
        let nearest_chunks: Vec<(&mut [u32], &mut [f64])> = if want_nearest {
            out.nearest
                .chunks_mut(CHUNK)
                .zip(out.minutes_from_nearest.chunks_mut(CHUNK))
                .collect()
        } else {
            (0..n.div_ceil(CHUNK))
                .map(|_| (&mut [][..], &mut [][..]))
                .collect()
        };
        let parts: Vec<Vec<u32>> = out
            .k
            .par_chunks_mut(CHUNK)
            .zip(nearest_chunks)
            .enumerate()
            .map(|(c, (k, (nearest, minutes)))| {
                let lo = c * CHUNK;
                let mut rel = Vec::new();
                // Per currency, the last answers of the two searches: trade
                // lists come mostly in time order (per run), so the next
                // answer is near the last one.
                let mut hints = vec![[0usize; 2]; self.index.len()];
                for (j, kj) in k.iter_mut().enumerate() {
                    let i = lo + j;
                    let o = opened[i];
                    let (qa, qb) = self.rule.query(o, closed[i]);
                    let before = rel.len();
                    let mut best: Option<(i64, u32, i64)> = None;
                    for &ci in &ids[instrument[i] as usize] {
                        let ix = &self.index[ci];
                        let h = &mut hints[ci];
                        let from = partition_point_near(&ix.slots, h[0], |s| {
                            s.start < qa.saturating_sub(ix.max_len)
                        });
                        // The candidates are few: walk them rather than
                        // search for their end.
                        let mut to = from;
                        while let Some(s) = ix.slots.get(to).filter(|s| s.start <= qb) {
                            if s.end >= qa {
                                rel.push(s.release);
                            }
                            to += 1;
                        }
                        if !want_nearest {
                            h[0] = from;
                            continue;
                        }
                        // Nearest instant to the open: neighbours of the open.
                        let p = partition_point_near(&ix.instants, h[1], |x| x.0 < o);
                        *h = [from, p];
                        for cand in [p.checked_sub(1), Some(p)].into_iter().flatten() {
                            if let Some(&(t, r)) = ix.instants.get(cand) {
                                let d = (o - t).abs();
                                if best.is_none_or(|(bd, br, _)| d < bd || (d == bd && r < br)) {
                                    best = Some((d, r, t));
                                }
                            }
                        }
                    }
                    if rel.len() - before > 1 {
                        rel[before..].sort_unstable();
                    }
                    *kj = (rel.len() - before) as u32;
                    if let Some((_, r, t)) = best {
                        nearest[j] = r;
                        minutes[j] = (o - t) as f64 / MINUTE_MS as f64;
                    }
                }
                rel
            })
            .collect();
        out.match_release = parts.concat();
        out
    }
}

/// `slice.partition_point(pred)`, searched outward from `hint` (the answer
/// to a nearby query) with doubling steps: O(log distance) instead of
/// O(log n) when queries arrive roughly in order, and never worse than twice
/// a plain binary search.
pub fn partition_point_near<T>(slice: &[T], hint: usize, pred: impl Fn(&T) -> bool) -> usize {
    let n = slice.len();
    let h = hint.min(n);
    let mut step = 1;
    if h < n && pred(&slice[h]) {
        // The answer is past h.
        let mut lo = h + 1;
        loop {
            let probe = lo + step - 1;
            if probe >= n {
                return lo + slice[lo..].partition_point(&pred);
            }
            if !pred(&slice[probe]) {
                return lo + slice[lo..probe].partition_point(&pred);
            }
            lo = probe + 1;
            step *= 2;
        }
    } else {
        // The answer is at h or before.
        let mut hi = h;
        loop {
            if hi < step {
                return slice[..hi].partition_point(&pred);
            }
            let probe = hi - step;
            if pred(&slice[probe]) {
                return probe + 1 + slice[probe + 1..hi].partition_point(&pred);
            }
            hi = probe;
            step *= 2;
        }
    }
}

/// How far the calendar reaches for one currency, and which trades it
/// cannot judge on that currency.
#[derive(Debug, Clone, Serialize)]
pub struct CoverageLine {
    /// ISO 4217 code.
    pub currency: String,
    /// First and last UTC day covered (whole days, inclusive): the stated
    /// `--calendar-span`, else the days of this currency's first and last
    /// release; `None` when the calendar has no release of it.
    pub calendar_from: Option<String>,
    /// Last UTC day covered (see `calendar_from`).
    pub calendar_to: Option<String>,
    /// `releases` (first to last release) or `--calendar-span`.
    pub coverage_from: &'static str,
    /// Trades of an instrument with this currency that open before the
    /// first day or close after the last day.
    pub trades_outside: usize,
    /// Σ P/L of those trades.
    pub pnl_outside: f64,
    /// Of those, the trades exposed all the same (on the instrument's other
    /// currency), and their P/L; the rest count as unexposed unjudged.
    pub exposed_outside: usize,
    /// Σ P/L of the exposed ones among them.
    pub exposed_pnl_outside: f64,
    /// Trades outside, per instrument (instrument, trades).
    pub by_instrument: Vec<(String, usize)>,
}

/// [`coverage`] at the given windows and rule, running the engine for the
/// exposure counts (for commands that do not run the analysis).
pub fn coverage_at(
    releases: &[Release],
    trades: &crate::import::trades::Trades,
    instrument_currencies: &[Vec<String>],
    windows: &crate::engine::windows::WindowSettings,
    rule: ExposureRule,
    stated: Option<(i64, i64)>,
) -> Vec<CoverageLine> {
    let exp = Engine::new(releases, windows, rule).run_matches(
        &trades.opened,
        &trades.closed,
        &trades.instrument,
        instrument_currencies,
    );
    coverage(releases, trades, instrument_currencies, &exp.k, stated)
}

/// Coverage per trade currency (docs/method.md §2). Trades outside stay in every
/// scenario (exposed only if another currency of theirs matched); reports
/// say exactly which.
pub fn coverage(
    releases: &[Release],
    trades: &crate::import::trades::Trades,
    instrument_currencies: &[Vec<String>],
    k: &[u32],
    stated: Option<(i64, i64)>,
) -> Vec<CoverageLine> {
    let mut span: HashMap<&str, (i64, i64)> = HashMap::new();
    for r in releases {
        let e = span.entry(r.currency.as_str()).or_insert((r.at, r.at));
        e.0 = e.0.min(r.at);
        e.1 = e.1.max(r.at);
    }
    let mut all: Vec<&String> = instrument_currencies.iter().flatten().collect();
    all.sort();
    all.dedup();
    // Each currency's whole UTC days, and per instrument its currencies'
    // positions in `all`; then one pass over the trades (in input order, so
    // each sum adds in the same order whatever the currency count).
    let days: Vec<Option<(i64, i64)>> = all
        .iter()
        .map(|cur| {
            let released = span.get(cur.as_str())?;
            Some(stated.unwrap_or((
                released.0.div_euclid(DAY_MS) * DAY_MS,
                (released.1.div_euclid(DAY_MS) + 1) * DAY_MS,
            )))
        })
        .collect();
    let of_instrument: Vec<Vec<usize>> = instrument_currencies
        .iter()
        .map(|cs| {
            cs.iter()
                .filter_map(|c| all.binary_search(&c).ok())
                .collect()
        })
        .collect();
    #[derive(Default, Clone)]
    struct Outside {
        trades: usize,
        pnl: f64,
        exposed: usize,
        exposed_pnl: f64,
        by_instrument: std::collections::BTreeMap<u32, usize>,
    }
    let mut outside = vec![Outside::default(); all.len()];
    let (opened, closed, pnl) = (&trades.opened, &trades.closed, &trades.pnl);
    for i in 0..opened.len() {
        for &c in &of_instrument[trades.instrument[i] as usize] {
            let out = match days[c] {
                None => true,
                Some((a, b)) => opened[i] < a || closed[i] >= b,
            };
            if out {
                let o = &mut outside[c];
                o.trades += 1;
                o.pnl += pnl[i];
                if k[i] > 0 {
                    o.exposed += 1;
                    o.exposed_pnl += pnl[i];
                }
                *o.by_instrument.entry(trades.instrument[i]).or_default() += 1;
            }
        }
    }
    all.iter()
        .zip(days)
        .zip(outside)
        .map(|((cur, d), o)| CoverageLine {
            currency: (*cur).clone(),
            calendar_from: d.map(|d| crate::import::zones::format_utc(d.0)[..10].to_string()),
            calendar_to: d
                .map(|d| crate::import::zones::format_utc(d.1 - DAY_MS)[..10].to_string()),
            coverage_from: if stated.is_some() {
                "--calendar-span"
            } else {
                "releases"
            },
            trades_outside: o.trades,
            pnl_outside: o.pnl,
            exposed_outside: o.exposed,
            exposed_pnl_outside: o.exposed_pnl,
            by_instrument: {
                // By name, whatever the order instruments first appear in.
                let mut v: Vec<(String, usize)> = o
                    .by_instrument
                    .into_iter()
                    .map(|(i, n)| (trades.instruments[i as usize].clone(), n))
                    .collect();
                v.sort();
                v
            },
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn search_near_a_hint_equals_partition_point() {
        let v: Vec<i64> = (0..300).map(|i| i / 3 * 2).collect();
        for q in -3..205 {
            let want = v.partition_point(|&x| x < q);
            for hint in [0, 1, 7, 150, 299, 300, 5000] {
                assert_eq!(
                    partition_point_near(&v, hint, |&x| x < q),
                    want,
                    "q {q} hint {hint}"
                );
            }
        }
        assert_eq!(partition_point_near(&[] as &[i64], 3, |&x| x < 1), 0);
    }
    use crate::import::calendar::Tier;

    fn rel(at_min: i64, cur: &str, tier: Tier) -> Release {
        Release {
            id: format!("{cur}{at_min}"),
            at: at_min * MINUTE_MS,
            end: at_min * MINUTE_MS,
            all_day: false,
            title: "r".into(),
            currency: cur.into(),
            tier,
            category: None,
            region: None,
        }
    }

    #[test]
    fn window_edges_are_inclusive_for_each_rule() {
        // High release at minute 1000: window [985, 1030].
        let rs = vec![rel(1000, "USD", Tier::High)];
        let w = WindowSettings::default();
        let cur = vec![vec!["EUR".to_string(), "USD".to_string()]];
        let m = |x: i64| x * MINUTE_MS;
        let trades: Vec<(i64, i64)> = vec![
            (900, 985),
            (900, 984),
            (1030, 1100),
            (1031, 1100),
            (990, 995),
            (1000, 1000),
            (1001, 1005),
        ];
        let (o, c): (Vec<i64>, Vec<i64>) = trades.iter().map(|&(a, b)| (m(a), m(b))).unzip();
        let inst = vec![0; o.len()];
        let k = |rule| Engine::new(&rs, &w, rule).run(&o, &c, &inst, &cur).k;
        assert_eq!(k(ExposureRule::Overlap), vec![1, 0, 1, 0, 1, 1, 1]);
        assert_eq!(k(ExposureRule::Held), vec![0, 0, 0, 0, 0, 1, 0]);
        assert_eq!(k(ExposureRule::Entered), vec![0, 0, 1, 0, 1, 1, 1]);
    }

    #[test]
    fn nearest_release_and_minutes() {
        let rs = vec![
            rel(1000, "USD", Tier::High),
            rel(2000, "EUR", Tier::Medium),
            rel(1400, "JPY", Tier::High),
        ];
        let w = WindowSettings::default();
        let cur = vec![vec!["EUR".to_string(), "USD".to_string()]];
        let o = vec![1600 * MINUTE_MS];
        let c = vec![1700 * MINUTE_MS];
        let e = Engine::new(&rs, &w, ExposureRule::Overlap).run(&o, &c, &[0], &cur);
        assert_eq!(e.k, vec![0]);
        assert_eq!(e.nearest, vec![1]);
        assert_eq!(e.minutes_from_nearest, vec![-400.0]);
    }
}
