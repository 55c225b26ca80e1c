//! Scenarios (docs/method.md §4): the same trades as given (`baseline`), without the
//! exposed ones (`removed`), and with the exposed ones' P/L clipped
//! (`capped`), under fixed or compounding sizing.
//!
//! Compounding turns each trade into a return r = pnl ÷ equity before it
//! (from `equity_before`, else `pnl_pct`, else the initial equity plus the
//! P/L closed before it in close order) and replays the kept trades one
//! after another in close order: a trade's scenario P/L is the
//! counterfactual equity before it × r. The baseline is replayed the same
//! way so the three scenarios are comparable.

use crate::analysis::metrics::quantile_type7_unsorted;
use serde::Serialize;

/// Starting value of the equity index when only `pnl_pct` is known.
pub const INDEX_START: f64 = 100.0;

/// How P/L adds up.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Sizing {
    /// Sum P/L as given.
    #[default]
    Fixed,
    /// Rebuild equity as a product of per-trade returns.
    Compounding,
}

/// How the cap C of the `capped` scenario is chosen.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "snake_case", tag = "kind", content = "value")]
pub enum CapRule {
    /// Quantile (type 7) of the unexposed trades' |pnl| (or |return|).
    Quantile(f64),
    /// Multiple of the unexposed trades' median |pnl| (or |return|).
    MedianMultiple(f64),
    /// A fixed amount in account currency.
    Amount(f64),
    /// A percentage of equity before the trade.
    EquityPct(f64),
}

impl CapRule {
    /// `q0.99`, `median*3`, `amount:500`, `equity:1.5` (percent).
    pub fn parse(s: &str) -> Result<CapRule, crate::import::setting::BadSetting> {
        let bad = || {
            format!(
                "--cap '{s}': use q0.99 (quantile), median*3, amount:500 or equity:1.5 (% of equity)"
            )
        };
        let num = |x: &str| {
            x.trim()
                .parse::<f64>()
                .ok()
                .filter(|v| v.is_finite() && *v >= 0.0)
                .ok_or_else(bad)
        };
        let s = s.trim();
        if let Some(q) = s.strip_prefix('q') {
            let v = num(q)?;
            if v > 1.0 {
                return Err(format!("--cap '{s}': the quantile must be between 0 and 1").into());
            }
            Ok(CapRule::Quantile(v))
        } else if let Some(m) = s.strip_prefix("median*") {
            Ok(CapRule::MedianMultiple(num(m)?))
        } else if let Some(a) = s.strip_prefix("amount:") {
            Ok(CapRule::Amount(num(a)?))
        } else if let Some(p) = s.strip_prefix("equity:") {
            Ok(CapRule::EquityPct(num(p)?))
        } else {
            Err(bad().into())
        }
    }
}

/// The extra cost the `stressed` scenario charges each exposed trade
/// (docs/method.md §4): worse fills around releases than the back-test's.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "snake_case", tag = "kind", content = "value")]
pub enum StressRule {
    /// A fixed amount per trade, in account currency.
    Amount(f64),
    /// An amount per unit of the trade's size (`size` column).
    PerSize(f64),
    /// A percentage of the trade's |P/L|.
    Pct(f64),
}

impl StressRule {
    /// `amount:15`, `per-size:7`, `pct:20`.
    pub fn parse(s: &str) -> Result<StressRule, crate::import::setting::BadSetting> {
        let bad = || {
            format!(
                "--stress '{s}': use amount:15 (per trade), per-size:7 (times size) or pct:20 (% of |P/L|)"
            )
        };
        let (kind, value) = s.trim().split_once(':').ok_or_else(bad)?;
        let v = value
            .trim()
            .parse::<f64>()
            .ok()
            .filter(|v| v.is_finite() && *v >= 0.0)
            .ok_or_else(bad)?;
        match kind.trim() {
            "amount" => Ok(StressRule::Amount(v)),
            "per-size" => Ok(StressRule::PerSize(v)),
            "pct" => Ok(StressRule::Pct(v)),
            _ => Err(bad().into()),
        }
    }

    /// The charge on a trade with this P/L and size (≥ 0).
    pub fn charge(self, pnl: f64, size: Option<f64>) -> f64 {
        match self {
            StressRule::Amount(a) => a,
            StressRule::PerSize(k) => k * size.unwrap_or(0.0).abs(),
            StressRule::Pct(p) => pnl.abs() * p / 100.0,
        }
    }
}

/// How the scenarios are built from the trades.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct ScenarioSettings {
    /// How P/L adds up.
    pub sizing: Sizing,
    /// How the capped scenario limits exposed trades.
    pub cap: CapRule,
    /// Starting equity (needed by compounding without an equity column).
    pub initial_equity: Option<f64>,
    /// The stressed scenario's extra cost per exposed trade; none: no
    /// stressed scenario.
    pub stress: Option<StressRule>,
}

/// Why the scenarios could not be built.
#[derive(Debug, thiserror::Error)]
pub enum ScenarioError {
    #[error(
        "compounding needs each trade's equity: map an equity_before or pnl_pct column, or give --initial-equity"
    )]
    /// Compounding without any equity to compound.
    NoEquity,
    /// An equity cap without any equity.
    #[error("--cap equity:… needs equity: map an equity_before column or give --initial-equity")]
    NoEquityForCap,
    /// A per-size stress without sizes.
    #[error("--stress per-size:… needs each trade's size: map a size column")]
    NoSizeForStress,
}

/// One scenario's kept trades in close order.
#[derive(Debug, Clone, Default)]
pub struct Series {
    /// Scenario P/L per kept trade.
    pub pnl: Vec<f64>,
    /// Index of each kept trade in the input; its times are read from the
    /// input's columns through it (not copied per scenario).
    pub trade: Vec<u32>,
    /// Each kept trade's return on the equity before it (P/L ÷ equity), when
    /// the tail is measured on returns ([`TailBasis::Return`]); else empty.
    pub ret: Vec<f64>,
}

/// What the tail figures (tail concentration, Hill index, sorted
/// magnitudes) are measured on: P/L amounts, or per-trade returns when every
/// trade's return on equity is known (docs/method.md "Tail basis"): with
/// position sizes that follow equity, amounts grow with the account and the
/// "largest" trades are merely the latest.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum TailBasis {
    /// On P/L amounts.
    #[default]
    Amount,
    /// On per-trade returns (P/L ÷ equity before the trade).
    Return,
}

/// One scenario's kept trades, borrowed.
#[derive(Debug, Clone, Copy)]
pub struct SeriesView<'a> {
    /// P/L of the kept trades.
    pub pnl: &'a [f64],
    /// Input index of each kept trade.
    pub trade: &'a [u32],
    /// Returns of the kept trades, or empty (amount basis).
    pub ret: &'a [f64],
}

impl<'a> SeriesView<'a> {
    /// The metrics' view, times from the input columns.
    pub fn curve(
        self,
        opened: &'a [i64],
        closed: &'a [i64],
    ) -> crate::analysis::metrics::Curve<'a> {
        crate::analysis::metrics::Curve {
            pnl: self.pnl,
            trade: self.trade,
            opened,
            closed,
            tail: self.ret,
        }
    }

    /// The values the tail figures are measured on.
    pub fn tail_values(&self) -> &'a [f64] {
        if self.ret.is_empty() {
            self.pnl
        } else {
            self.ret
        }
    }
}

impl Scenarios {
    /// The capped scenario with the baseline's times and trades.
    pub fn capped_view(&self) -> SeriesView<'_> {
        SeriesView {
            pnl: &self.capped.pnl,
            ret: &self.capped.ret,
            ..self.baseline.view()
        }
    }

    /// The stressed scenario with the baseline's times and trades, when
    /// there is one.
    pub fn stressed_view(&self) -> Option<SeriesView<'_>> {
        self.stress_charge.map(|_| SeriesView {
            pnl: &self.stressed.pnl,
            ret: &self.stressed.ret,
            ..self.baseline.view()
        })
    }

    /// baseline, removed, capped.
    pub fn views(&self) -> [SeriesView<'_>; 3] {
        [
            self.baseline.view(),
            self.removed.view(),
            self.capped_view(),
        ]
    }

    /// Baseline |P/L| (or |return|, see [`TailBasis`]) sorted descending
    /// with the exposed flag.
    pub fn sorted_abs(&self, exp: &crate::engine::exposure::Exposure) -> Vec<(f64, bool)> {
        let b = &self.baseline;
        let mut v: Vec<(f64, bool)> = b
            .view()
            .tail_values()
            .iter()
            .zip(&b.trade)
            .map(|(p, &i)| (p.abs(), exp.is_exposed(i as usize)))
            .collect();
        v.sort_by(|a, b| b.0.total_cmp(&a.0));
        v
    }

    /// Each scenario's (close instant, P/L) in close order — baseline,
    /// removed, capped, and stressed when there is one; `closed` is the
    /// input's close column.
    pub fn curves(&self, closed: &[i64]) -> Vec<Vec<(i64, f64)>> {
        let curve = |sr: SeriesView| -> Vec<(i64, f64)> {
            sr.trade
                .iter()
                .map(|&i| closed[i as usize])
                .zip(sr.pnl.iter().copied())
                .collect()
        };
        self.views()
            .into_iter()
            .chain(self.stressed_view())
            .map(curve)
            .collect()
    }

    /// Room for `n` trades in each series (removed may use less).
    fn reserve(&mut self, n: usize, baseline_trades: bool) {
        for s in [&mut self.baseline, &mut self.removed] {
            s.pnl.reserve(n);
        }
        self.removed.trade.reserve(n);
        if baseline_trades {
            self.baseline.trade.reserve(n);
        }
        self.capped.pnl.reserve(n);
    }
}

impl Series {
    /// The series, borrowed.
    pub fn view(&self) -> SeriesView<'_> {
        SeriesView {
            pnl: &self.pnl,
            trade: &self.trade,
            ret: &self.ret,
        }
    }

    fn push(&mut self, i: usize, pnl: f64) {
        self.pnl.push(pnl);
        self.trade.push(i as u32);
    }
}

/// The three scenarios of one trade set.
#[derive(Debug, Clone, Default)]
pub struct Scenarios {
    /// Every trade as given.
    pub baseline: Series,
    /// Without the exposed trades.
    pub removed: Series,
    /// Only `pnl` is filled: the capped scenario keeps exactly the
    /// baseline's trades in the same order, so its times and trade indices
    /// are the baseline's (not stored twice; see [`Scenarios::capped_view`]).
    pub capped: Series,
    /// Like `capped`: the baseline's trades with the exposed ones charged
    /// the stress cost (only `pnl`, and `ret` on the return basis); empty
    /// without `--stress`.
    pub stressed: Series,
    /// Σ charge over the exposed trades (in account currency, as each
    /// scenario trade's P/L is); `None` without `--stress`.
    pub stress_charge: Option<f64>,
    /// C: in account currency, or as a return fraction under compounding
    /// (quantile/median caps); `None` when there are no unexposed trades to
    /// take it from (then exposed trades count 0 in `capped`).
    pub cap_value: Option<f64>,
    /// Starting equity used (compounding, or given).
    pub initial_equity: Option<f64>,
    /// What the series' tail figures are measured on.
    pub tail_basis: TailBasis,
}

/// Inputs for one trade set (all trades, or one run).
pub struct TradeView<'a> {
    /// Trade indices in close order (ties by open, then input order).
    pub order: &'a [u32],
    /// P/L per trade (input order).
    pub pnl: &'a [f64],
    /// Open instants, ms UTC (input order).
    pub opened: &'a [i64],
    /// Close instants, ms UTC (input order).
    pub closed: &'a [i64],
    /// Whether trade i (input order) is exposed.
    pub exposed: &'a (dyn Fn(usize) -> bool + Sync),
    /// Equity before each trade, when known.
    pub equity_before: Option<&'a [f64]>,
    /// P/L as a percentage of equity at open, when known.
    pub pnl_pct: Option<&'a [f64]>,
    /// Position size, when mapped (the per-size stress).
    pub size: Option<&'a [f64]>,
}

impl<'a> TradeView<'a> {
    /// A view of imported trades in the given order.
    pub fn of(
        order: &'a [u32],
        t: &'a crate::import::trades::Trades,
        exposed: &'a (dyn Fn(usize) -> bool + Sync),
    ) -> TradeView<'a> {
        TradeView {
            order,
            pnl: &t.pnl,
            opened: &t.opened,
            closed: &t.closed,
            exposed,
            equity_before: t.equity_before.as_deref(),
            pnl_pct: t.pnl_pct.as_deref(),
            size: t.size.as_deref(),
        }
    }
}

/// Sorts indices by close, then open, then input order.
pub fn close_order(idx: &mut [u32], opened: &[i64], closed: &[i64]) {
    // Sorting the keys themselves (contiguous) beats sorting indices whose
    // keys are looked up at random on every comparison. A key holds the
    // close and the index: unique, so an unstable sort gives one order.
    // Packed into one u64 when the closes' range and the index fit (ten
    // years of milliseconds take 39 bits, ten million indices 24), else a
    // (close, index) pair. Runs of equal closes are then put in open order
    // (they are short).
    use rayon::prelude::*;
    let Some((lo, hi, top)) = idx
        .par_iter()
        .map(|&i| (closed[i as usize], closed[i as usize], i))
        .reduce_with(|a, b| (a.0.min(b.0), a.1.max(b.1), a.2.max(b.2)))
    else {
        return;
    };
    let index_bits = (32 - top.leading_zeros()).max(1);
    let range_bits = 64 - ((hi as i128 - lo as i128) as u64).leading_zeros();
    if range_bits + index_bits <= 64 {
        let mask = (1u64 << index_bits) - 1;
        let mut keys: Vec<u64> = idx
            .par_iter()
            .map(|&i| ((closed[i as usize] - lo) as u64) << index_bits | i as u64)
            .collect();
        keys.par_sort_unstable();
        open_order_within_ties(
            &mut keys,
            |k| (k >> index_bits) as i64,
            |k| opened[(k & mask) as usize],
        );
        idx.par_iter_mut()
            .zip(keys.par_iter())
            .for_each(|(slot, k)| *slot = (k & mask) as u32);
    } else {
        let mut keys: Vec<(i64, u32)> = idx.par_iter().map(|&i| (closed[i as usize], i)).collect();
        keys.par_sort_unstable();
        open_order_within_ties(&mut keys, |k| k.0, |k| opened[k.1 as usize]);
        idx.par_iter_mut()
            .zip(keys.par_iter())
            .for_each(|(slot, k)| *slot = k.1);
    }
}

/// Sorted (close, index) keys: each run of equal closes put in open order,
/// then index order (the keys already hold the index order).
fn open_order_within_ties<K: Copy + Ord>(
    keys: &mut [K],
    close: impl Fn(K) -> i64 + Copy,
    open: impl Fn(K) -> i64,
) {
    let mut a = 0;
    while a < keys.len() {
        let c = close(keys[a]);
        let b = a + keys[a..]
            .iter()
            .position(|&k| close(k) != c)
            .unwrap_or(keys.len() - a);
        if b - a > 1 {
            keys[a..b].sort_by_key(|&k| (open(k), k));
        }
        a = b;
    }
}

fn cap_from(values: impl Iterator<Item = f64>, rule: CapRule) -> Option<f64> {
    let mut v: Vec<f64> = values.map(f64::abs).collect();
    match rule {
        CapRule::Quantile(q) => quantile_type7_unsorted(&mut v, q),
        CapRule::MedianMultiple(m) => quantile_type7_unsorted(&mut v, 0.5).map(|x| x * m),
        _ => None,
    }
}

/// Builds the three scenarios.
pub fn build(v: &TradeView, s: &ScenarioSettings) -> Result<Scenarios, ScenarioError> {
    build_with(v, s, true)
}

/// [`build`] over imported trades in `order`, which becomes the baseline's
/// trade list as it is (the baseline keeps every trade in that order), so
/// the indices are held once.
pub fn build_in_order(
    order: Vec<u32>,
    t: &crate::import::trades::Trades,
    exposed: &(dyn Fn(usize) -> bool + Sync),
    s: &ScenarioSettings,
) -> Result<Scenarios, ScenarioError> {
    let mut sc = build_with(&TradeView::of(&order, t, exposed), s, false)?;
    sc.baseline.trade = order;
    Ok(sc)
}

/// `baseline_trades`: fill the baseline's trade list (else the caller sets it).
fn build_with(
    v: &TradeView,
    s: &ScenarioSettings,
    baseline_trades: bool,
) -> Result<Scenarios, ScenarioError> {
    let mut out = Scenarios::default();
    if matches!(s.stress, Some(StressRule::PerSize(_))) && v.size.is_none() {
        return Err(ScenarioError::NoSizeForStress);
    }
    match s.sizing {
        Sizing::Fixed => build_fixed(v, s, out, baseline_trades),
        Sizing::Compounding => {
            out.reserve(v.order.len(), baseline_trades);
            build_compounding(v, s, out, baseline_trades)
        }
    }
}

/// Equity before each trade (indexed by input position) from the column or
/// from the initial equity plus earlier closes.
fn equity_before(v: &TradeView, e0: Option<f64>) -> Option<Vec<f64>> {
    let n = v.pnl.len();
    if let Some(eb) = v.equity_before {
        return Some(eb.to_vec());
    }
    let e0 = e0?;
    let mut out = vec![f64::NAN; n];
    let mut eq = e0;
    for &i in v.order {
        out[i as usize] = eq;
        eq += v.pnl[i as usize];
    }
    Some(out)
}

fn build_fixed(
    v: &TradeView,
    s: &ScenarioSettings,
    mut out: Scenarios,
    baseline_trades: bool,
) -> Result<Scenarios, ScenarioError> {
    use rayon::prelude::*;
    // Each series is a gather or filter of the input in close order, built
    // in parallel (in one piece for small trade sets).
    const PIECE: usize = 1 << 15;
    out.initial_equity = s.initial_equity;
    let per_trade_cap: Option<Vec<f64>> = match s.cap {
        CapRule::EquityPct(p) => {
            let eb = equity_before(v, s.initial_equity).ok_or(ScenarioError::NoEquityForCap)?;
            Some(eb.iter().map(|e| e * p / 100.0).collect())
        }
        _ => None,
    };
    let order = v.order;
    let exposed = v.exposed;
    let (baseline_pnl, (baseline_trade, removed_trade)) = rayon::join(
        || {
            order
                .par_iter()
                .with_min_len(PIECE)
                .map(|&i| v.pnl[i as usize])
                .collect::<Vec<f64>>()
        },
        || {
            rayon::join(
                || {
                    if baseline_trades {
                        order.to_vec()
                    } else {
                        Vec::new()
                    }
                },
                || {
                    order
                        .par_iter()
                        .with_min_len(PIECE)
                        .copied()
                        .filter(|&i| !exposed(i as usize))
                        .collect::<Vec<u32>>()
                },
            )
        },
    );
    let removed_pnl: Vec<f64> = removed_trade
        .par_iter()
        .with_min_len(PIECE)
        .map(|&i| v.pnl[i as usize])
        .collect();
    // The removed series holds exactly the unexposed trades.
    out.cap_value = match s.cap {
        CapRule::Amount(a) => Some(a),
        CapRule::EquityPct(_) => None,
        rule => cap_from(removed_pnl.iter().copied(), rule),
    };
    let cap = out.cap_value.unwrap_or(0.0);
    out.capped.pnl = order
        .par_iter()
        .zip(baseline_pnl.par_iter())
        .with_min_len(PIECE)
        .map(|(&i, &p)| {
            if !exposed(i as usize) {
                return p;
            }
            let c = per_trade_cap
                .as_ref()
                .map_or(cap, |caps| caps[i as usize].abs());
            p.clamp(-c, c)
        })
        .collect();
    if let Some(rule) = s.stress {
        let size = |i: u32| v.size.map(|z| z[i as usize]);
        out.stressed.pnl = order
            .iter()
            .zip(&baseline_pnl)
            .map(|(&i, &p)| {
                if exposed(i as usize) {
                    p - rule.charge(p, size(i))
                } else {
                    p
                }
            })
            .collect();
        out.stress_charge = Some(
            order
                .iter()
                .filter(|&&i| exposed(i as usize))
                .map(|&i| rule.charge(v.pnl[i as usize], size(i)))
                .sum(),
        );
    }
    // Returns on the recorded equity (the column, or the one P/L % implies)
    // when every trade has one: sizes may follow the account even when the
    // P/L is summed as given.
    if let Some(eq) = recorded_equity(v) {
        let ret_of = |trade: &[u32], pnl: &[f64]| -> Vec<f64> {
            trade
                .iter()
                .zip(pnl)
                .map(|(&i, p)| p / eq[i as usize])
                .collect()
        };
        let base_trade: &[u32] = if baseline_trades {
            &baseline_trade
        } else {
            order
        };
        out.baseline.ret = ret_of(base_trade, &baseline_pnl);
        out.removed.ret = ret_of(&removed_trade, &removed_pnl);
        out.capped.ret = ret_of(base_trade, &out.capped.pnl);
        if s.stress.is_some() {
            out.stressed.ret = ret_of(base_trade, &out.stressed.pnl);
        }
        out.tail_basis = TailBasis::Return;
    }
    out.baseline = Series {
        pnl: baseline_pnl,
        trade: baseline_trade,
        ret: std::mem::take(&mut out.baseline.ret),
    };
    out.removed = Series {
        pnl: removed_pnl,
        trade: removed_trade,
        ret: std::mem::take(&mut out.removed.ret),
    };
    Ok(out)
}

/// `recorded_equity` over all of `t`'s trades: when `Some`, every trade
/// set drawn from `t` measures its tail on returns ([`TailBasis::Return`])
/// on this equity; when `None` and `t` has neither an `equity_before` nor a
/// `pnl_pct` column, every set measures it on amounts.
pub fn recorded_equity_of(t: &crate::import::trades::Trades) -> Option<Vec<f64>> {
    let all: Vec<u32> = (0..t.len() as u32).collect();
    recorded_equity(&TradeView::of(&all, t, &|_| false))
}

/// Equity before each trade (by input position) as the input records it:
/// the `equity_before` column, else the equity a `pnl_pct` implies
/// (pnl ÷ pct × 100); `None` unless every trade of the view has a finite,
/// non-zero one.
fn recorded_equity(v: &TradeView) -> Option<Vec<f64>> {
    let n = v.pnl.len();
    let eq: Vec<f64> = if let Some(eb) = v.equity_before {
        eb.to_vec()
    } else {
        let pct = v.pnl_pct?;
        (0..n)
            .map(|i| {
                if pct[i] != 0.0 {
                    v.pnl[i] / pct[i] * 100.0
                } else if v.pnl[i] == 0.0 {
                    f64::INFINITY
                } else {
                    f64::NAN
                }
            })
            .collect()
    };
    // A zero P/L at 0 % says nothing of equity but has return 0 (∞ → 0/∞).
    v.order
        .iter()
        .all(|&i| {
            let e = eq[i as usize];
            (e.is_finite() && e != 0.0) || e == f64::INFINITY
        })
        .then_some(eq)
}

fn build_compounding(
    v: &TradeView,
    s: &ScenarioSettings,
    mut out: Scenarios,
    baseline_trades: bool,
) -> Result<Scenarios, ScenarioError> {
    let n = v.pnl.len();
    let ret: Vec<f64> = if let Some(eb) = v.equity_before {
        (0..n)
            .map(|i| if eb[i] != 0.0 { v.pnl[i] / eb[i] } else { 0.0 })
            .collect()
    } else if let Some(pct) = v.pnl_pct {
        pct.iter().map(|p| p / 100.0).collect()
    } else if let Some(eb) = equity_before(v, s.initial_equity) {
        (0..n)
            .map(|i| if eb[i] != 0.0 { v.pnl[i] / eb[i] } else { 0.0 })
            .collect()
    } else {
        return Err(ScenarioError::NoEquity);
    };
    // Starting equity: given; else the recorded equity before the first
    // trade; else (returns only) an index starting at 100.
    let e0 = s
        .initial_equity
        .or_else(|| {
            v.order
                .first()
                .and_then(|&i| v.equity_before.map(|eb| eb[i as usize]))
        })
        .unwrap_or(INDEX_START);
    let cap_r = match s.cap {
        CapRule::Quantile(_) | CapRule::MedianMultiple(_) => cap_from(
            v.order
                .iter()
                .map(|&i| i as usize)
                .filter(|&i| !(v.exposed)(i))
                .map(|i| ret[i]),
            s.cap,
        ),
        CapRule::EquityPct(p) => Some(p / 100.0),
        CapRule::Amount(_) => None,
    };
    out.initial_equity = Some(e0);
    out.cap_value = match s.cap {
        CapRule::Amount(a) => Some(a),
        _ => cap_r,
    };
    // Under compounding every trade's return is known: the tail is
    // measured on the returns each scenario replays.
    out.tail_basis = TailBasis::Return;
    let (mut eq_base, mut eq_rem, mut eq_cap, mut eq_st) = (e0, e0, e0, e0);
    let ratio = |p: f64, e: f64| if e != 0.0 { p / e } else { 0.0 };
    let mut charged = 0.0;
    for &i in v.order {
        let i = i as usize;
        let r = ret[i];
        if let Some(rule) = s.stress {
            // The charge falls on the stressed account's own P/L of the
            // trade (its equity × r), which then compounds on.
            let p = eq_st * r;
            let ps = if (v.exposed)(i) {
                let c = rule.charge(p, v.size.map(|z| z[i]));
                charged += c;
                p - c
            } else {
                p
            };
            out.stressed.ret.push(ratio(ps, eq_st));
            eq_st += ps;
            out.stressed.pnl.push(ps);
        }
        let pb = eq_base * r;
        out.baseline.ret.push(r);
        eq_base += pb;
        out.baseline.pnl.push(pb);
        if baseline_trades {
            out.baseline.trade.push(i as u32);
        }
        if (v.exposed)(i) {
            let pc = match s.cap {
                CapRule::Amount(a) => (eq_cap * r).clamp(-a, a),
                _ => {
                    let c = cap_r.unwrap_or(0.0);
                    eq_cap * r.clamp(-c, c)
                }
            };
            out.capped.ret.push(ratio(pc, eq_cap));
            eq_cap += pc;
            out.capped.pnl.push(pc);
        } else {
            let pr = eq_rem * r;
            eq_rem += pr;
            out.removed.push(i, pr);
            out.removed.ret.push(r);
            let pc = eq_cap * r;
            out.capped.ret.push(r);
            eq_cap += pc;
            out.capped.pnl.push(pc);
        }
    }
    if s.stress.is_some() {
        out.stress_charge = Some(charged);
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn view<'a>(
        order: &'a [u32],
        pnl: &'a [f64],
        t: &'a [i64],
        exposed: &'a (dyn Fn(usize) -> bool + Sync),
        eb: Option<&'a [f64]>,
    ) -> TradeView<'a> {
        TradeView {
            order,
            pnl,
            opened: t,
            closed: t,
            exposed,
            equity_before: eb,
            pnl_pct: None,
            size: None,
        }
    }

    /// Hand-computed three-trade example. Equity 1000; trades in close order
    /// +100 (equity before 1000, r = 10 %), −110 (before 1100, r = −10 %),
    /// +99 (before 990, r = 10 %). Removing the first trade: 1000 → −100
    /// (−10 % of 1000) → 900 → +90 (10 % of 900) → 990. So trade 3's P/L
    /// shrinks from 99 to 90, in proportion to the counterfactual equity.
    #[test]
    fn compounding_three_trade_example() {
        let pnl = [100.0, -110.0, 99.0];
        let eb = [1000.0, 1100.0, 990.0];
        let t = [1, 2, 3];
        let order = [0u32, 1, 2];
        let exposed = |i: usize| i == 0;
        let s = ScenarioSettings {
            sizing: Sizing::Compounding,
            cap: CapRule::Amount(50.0),
            initial_equity: None,
            stress: None,
        };
        let sc = build(&view(&order, &pnl, &t, &exposed, Some(&eb)), &s).unwrap();
        let close = |a: &[f64], b: &[f64]| a.iter().zip(b).all(|(x, y)| (x - y).abs() < 1e-9);
        assert!(
            close(&sc.baseline.pnl, &[100.0, -110.0, 99.0]),
            "{:?}",
            sc.baseline.pnl
        );
        assert!(
            close(&sc.removed.pnl, &[-100.0, 90.0]),
            "{:?}",
            sc.removed.pnl
        );
        // Capped at 50: 1000 → +50 → 1050 → −105 → 945 → +94.5.
        assert!(
            close(&sc.capped.pnl, &[50.0, -105.0, 94.5]),
            "{:?}",
            sc.capped.pnl
        );
    }

    #[test]
    fn fixed_cap_by_quantile_of_unexposed() {
        // REFERENCES.md §4.5: capping at ±150 gives net 300.
        let pnl = [
            250.0, -100.0, 75.0, -50.0, 400.0, -200.0, 125.0, 30.0, -80.0, 150.0,
        ];
        let t: Vec<i64> = (0..10).collect();
        let order: Vec<u32> = (0..10).collect();
        let all = |_: usize| true;
        let s = ScenarioSettings {
            sizing: Sizing::Fixed,
            cap: CapRule::Amount(150.0),
            initial_equity: None,
            stress: None,
        };
        let sc = build(&view(&order, &pnl, &t, &all, None), &s).unwrap();
        assert!((sc.capped.pnl.iter().sum::<f64>() - 300.0).abs() < 1e-9);
        assert!(sc.removed.pnl.is_empty());
        // Quantile cap from unexposed |pnl| = {100, 75, 50}: q0.5 → 75.
        let some = |i: usize| i == 0 || i == 4;
        let s = ScenarioSettings {
            cap: CapRule::Quantile(0.5),
            ..s
        };
        let sc = build(&view(&order[..4], &pnl, &t, &some, None), &s).unwrap();
        assert_eq!(sc.cap_value, Some(75.0));
        assert_eq!(sc.capped.pnl, vec![75.0, -100.0, 75.0, -50.0]);
    }

    #[test]
    fn close_order_is_close_then_open_then_input_order() {
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(4);
        for n in [0usize, 1, 2, 7, 300, 5000] {
            // Few distinct times: many ties in close, and in close and open.
            let opened: Vec<i64> = (0..n).map(|_| rng.random_range(0..6)).collect();
            let closed: Vec<i64> = opened.iter().map(|o| o + rng.random_range(0..4)).collect();
            let mut got: Vec<u32> = (0..n as u32).collect();
            close_order(&mut got, &opened, &closed);
            let mut want: Vec<u32> = (0..n as u32).collect();
            want.sort_by_key(|&i| (closed[i as usize], opened[i as usize], i));
            assert_eq!(got, want, "n {n}");
            // A range too wide to pack with the index: the pair path.
            let wide: Vec<i64> = closed
                .iter()
                .map(|c| c * (i64::MAX / 8) - i64::MAX / 2)
                .collect();
            let mut got: Vec<u32> = (0..n as u32).collect();
            close_order(&mut got, &opened, &wide);
            assert_eq!(got, want, "wide, n {n}");
            // A subset of indices (as for one run).
            let mut got: Vec<u32> = (0..n as u32).rev().step_by(3).collect();
            close_order(&mut got, &opened, &closed);
            let sub: Vec<u32> = want
                .iter()
                .copied()
                .filter(|i| (n as u32 - 1 - i).is_multiple_of(3))
                .collect();
            assert_eq!(got, sub, "subset, n {n}");
        }
    }

    #[test]
    fn cap_rule_parsing() {
        assert_eq!(CapRule::parse("q0.99").unwrap(), CapRule::Quantile(0.99));
        assert_eq!(
            CapRule::parse("median*3").unwrap(),
            CapRule::MedianMultiple(3.0)
        );
        assert_eq!(
            CapRule::parse("amount:500").unwrap(),
            CapRule::Amount(500.0)
        );
        assert_eq!(
            CapRule::parse("equity:1.5").unwrap(),
            CapRule::EquityPct(1.5)
        );
        assert!(CapRule::parse("q1.5").is_err());
        assert!(CapRule::parse("lots").is_err());
    }

    fn stressed(rule: &str, size: Option<&[f64]>) -> Result<Scenarios, ScenarioError> {
        let pnl = [100.0, -50.0, 30.0, -20.0];
        let t = [1, 2, 3, 4];
        let order = [0u32, 1, 2, 3];
        let exposed = |i: usize| i < 2;
        let v = TradeView {
            size,
            ..view(&order, &pnl, &t, &exposed, None)
        };
        let s = ScenarioSettings {
            sizing: Sizing::Fixed,
            cap: CapRule::Amount(500.0),
            initial_equity: None,
            stress: Some(StressRule::parse(rule).unwrap()),
        };
        build(&v, &s)
    }

    /// Worked by hand: P/L 100, −50 (exposed, sizes 1 and 2), 30, −20.
    /// amount:15 charges 15 each; per-size:7 charges 7 × 1 and 7 × 2;
    /// pct:20 charges 20 % of |100| and of |−50|. Unexposed trades keep
    /// their P/L, and stressed net = baseline net (60) − the total charge.
    #[test]
    fn stressed_charges_each_exposed_trade() {
        let size = [1.0, 2.0, 0.5, 3.0];
        for (rule, want, charge) in [
            ("amount:15", [85.0, -65.0, 30.0, -20.0], 30.0),
            ("per-size:7", [93.0, -64.0, 30.0, -20.0], 21.0),
            ("pct:20", [80.0, -60.0, 30.0, -20.0], 30.0),
        ] {
            let sc = stressed(rule, Some(&size)).unwrap();
            assert_eq!(sc.stressed.pnl, want, "{rule}");
            assert_eq!(sc.stress_charge, Some(charge), "{rule}");
            let net: f64 = sc.stressed.pnl.iter().sum();
            let base: f64 = sc.baseline.pnl.iter().sum();
            assert_eq!(net, base - charge, "{rule}: conservation");
            let view = sc.stressed_view().unwrap();
            assert_eq!(view.trade, sc.baseline.trade.as_slice());
        }
    }

    #[test]
    fn stress_rules_parse_and_per_size_needs_sizes() {
        assert_eq!(
            StressRule::parse("amount:15").unwrap(),
            StressRule::Amount(15.0)
        );
        assert_eq!(
            StressRule::parse(" per-size:7 ").unwrap(),
            StressRule::PerSize(7.0)
        );
        assert_eq!(StressRule::parse("pct:20").unwrap(), StressRule::Pct(20.0));
        for bad in ["15", "amount:-1", "pct:x", "fee:3"] {
            assert!(StressRule::parse(bad).is_err(), "{bad}");
        }
        assert!(matches!(
            stressed("per-size:7", None),
            Err(ScenarioError::NoSizeForStress)
        ));
    }

    /// Compounding, worked by hand on the three-trade example above
    /// (returns +10 %, −10 %, +10 %; equity 1000; the first trade
    /// exposed), amount:15: 1000 × 10 % − 15 = 85 → 1085; −10 % = −108.5 →
    /// 976.5; +10 % = 97.65. The charge (15) compounds on, so the stressed
    /// net (74.15) is not the baseline's 89 − 15.
    #[test]
    fn stressed_under_compounding() {
        let pnl = [100.0, -110.0, 99.0];
        let eb = [1000.0, 1100.0, 990.0];
        let t = [1, 2, 3];
        let order = [0u32, 1, 2];
        let exposed = |i: usize| i == 0;
        let s = ScenarioSettings {
            sizing: Sizing::Compounding,
            cap: CapRule::Amount(50.0),
            initial_equity: None,
            stress: Some(StressRule::Amount(15.0)),
        };
        let sc = build(&view(&order, &pnl, &t, &exposed, Some(&eb)), &s).unwrap();
        let want = [85.0, -108.5, 97.65];
        for (got, want) in sc.stressed.pnl.iter().zip(want) {
            assert!((got - want).abs() < 1e-9, "{got} vs {want}");
        }
        assert_eq!(sc.stress_charge, Some(15.0));
        assert!((sc.stressed.ret[0] - 0.085).abs() < 1e-12);
    }
}
