//! Property tests of the invariants #8 names, through the real importer and
//! the whole analysis (not the engine alone):
//! - every input row is imported or rejected, and exactly the damaged rows
//!   are rejected (counts add up);
//! - the summary does not depend on the order of the input rows;
//! - the summary does not depend on the zone the same instants are written in;
//! - removed ∪ exposed = baseline, in trades and in P/L (docs/method.md §3);
//! - per-run figures, placebo p-values and ranks do not depend on the row
//!   order nor on how the rows are split across files.
//!
//! Each property runs 1 000 random cases or more.

use eventfence::analysis::run::{self, Analysis, AnalysisSettings};
use eventfence::analysis::scenarios::{CapRule, ScenarioSettings, Sizing};
use eventfence::engine::exposure::ExposureRule;
use eventfence::engine::relevance::{self, Unmapped};
use eventfence::engine::windows::WindowSettings;
use eventfence::import::calendar::{Release, Tier};
use eventfence::import::trades::{self, TradeOptions, TradeSummary, Trades};
use eventfence::import::zones::{LocalPolicy, Zone};
use proptest::prelude::*;
use serde_json::Value;
use std::collections::{BTreeSet, HashMap};
use std::path::Path;

const MIN: i64 = 60_000;
/// 2024-03-01 00:00 UTC: the 45-day span covers the US (10 March) and EU
/// (31 March) DST starts.
const BASE: i64 = 1_709_251_200_000;
const INSTRUMENTS: [&str; 4] = ["EURUSD", "USDJPY", "EURGBP", "GBPJPY"];
const CURRENCIES: [&str; 4] = ["USD", "EUR", "JPY", "GBP"];
/// Input zones for the same instants: fixed offsets, IANA zones with DST
/// (Lord Howe shifts by 30 minutes), and a shifted server clock.
const ZONES: [&str; 6] = [
    "UTC",
    "+05:30",
    "America/New_York",
    "Europe/London",
    "Australia/Lord_Howe",
    "America/New_York+07:00",
];

#[derive(Debug, Clone)]
struct TradeRow {
    open_min: i64,
    len_min: i64,
    inst: usize,
    pnl_cents: i64,
    run: usize,
    /// Which field to damage, if any: 1 open, 2 close, 3 P/L, 4 instrument.
    damage: u8,
}

#[derive(Debug, Clone)]
struct Case {
    trades: Vec<TradeRow>,
    releases: Vec<(i64, usize, usize)>,
    order: Vec<usize>,
    zone: usize,
}

fn case(damage_odds: u8) -> impl Strategy<Value = Case> {
    let trade = (
        0i64..45 * 288,
        prop_oneof![Just(0i64), 1i64..24, 1i64..2000],
        0usize..4,
        -40_000i64..40_000,
        0usize..3,
        0u8..100,
    )
        .prop_map(move |(slot, len, inst, pnl_cents, run, d)| TradeRow {
            open_min: slot * 5,
            len_min: len * 5,
            inst,
            pnl_cents,
            run,
            damage: if d < damage_odds { 1 + d % 4 } else { 0 },
        });
    let release = (0i64..45 * 288, 0usize..4, 0usize..3).prop_map(|(slot, c, t)| (slot * 5, c, t));
    (
        prop::collection::vec(trade, 1..40),
        prop::collection::vec(release, 0..30),
        0usize..ZONES.len(),
    )
        .prop_flat_map(|(trades, releases, zone)| {
            let n = trades.len();
            (
                Just(trades),
                Just(releases),
                Just((0..n).collect::<Vec<_>>()).prop_shuffle(),
                Just(zone),
            )
        })
        .prop_map(|(trades, releases, order, zone)| Case {
            order: keep_tie_order(&trades, order),
            trades,
            releases,
            zone,
        })
}

/// docs/method.md §5 orders trades by close, then open, then input order: rows with
/// the same open and close keep their relative input order in a shuffle.
fn keep_tie_order(trades: &[TradeRow], mut order: Vec<usize>) -> Vec<usize> {
    let key = |i: usize| (trades[i].open_min, trades[i].len_min);
    let mut groups: HashMap<(i64, i64), Vec<usize>> = HashMap::new();
    for &i in &order {
        groups.entry(key(i)).or_default().push(i);
    }
    for g in groups.values_mut() {
        g.sort_unstable_by(|a, b| b.cmp(a));
    }
    for slot in order.iter_mut() {
        *slot = groups.get_mut(&key(*slot)).unwrap().pop().unwrap();
    }
    order
}

fn local_text(ms: i64, zone: &Zone) -> String {
    zone.to_local(ms).format("%Y-%m-%d %H:%M:%S").to_string()
}

/// Writes the rows in `order`, times local to `zone`, damaging what the
/// row asks for. Returns the CSV text.
fn csv_text(c: &Case, order: &[usize], zone: &Zone) -> String {
    let mut s = String::from("run,opened_at,closed_at,instrument,pnl\n");
    for &i in order {
        let t = &c.trades[i];
        let open = BASE + t.open_min * MIN;
        let close = open + t.len_min * MIN;
        let mut f = [
            format!("p{}", t.run),
            local_text(open, zone),
            local_text(close, zone),
            INSTRUMENTS[t.inst].to_string(),
            format!("{}", t.pnl_cents as f64 / 100.0),
        ];
        match t.damage {
            1 => f[1] = "2024-02-30 10:00".into(),
            2 => f[2] = String::new(),
            3 => f[4] = "12..5".into(),
            4 => f[3] = String::new(),
            _ => {}
        }
        s.push_str(&f.join(","));
        s.push('\n');
    }
    s
}

fn import(text: &str, zone: &Zone, dir: &Path) -> (Trades, TradeSummary) {
    import_files(&[text.to_string()], zone, dir)
}

/// Each text as its own file (with a `run` column, files do not name runs).
fn import_files(texts: &[String], zone: &Zone, dir: &Path) -> (Trades, TradeSummary) {
    let paths: Vec<_> = texts
        .iter()
        .enumerate()
        .map(|(k, text)| {
            let p = dir.join(format!("trades-{k}.csv"));
            std::fs::write(&p, text).unwrap();
            p
        })
        .collect();
    let opts = TradeOptions {
        zone: *zone,
        policy: LocalPolicy::Error,
        skip_bad_rows: true,
        ..TradeOptions::default()
    };
    trades::load(&paths, &opts).unwrap()
}

/// `rank` with a 19-placebo p-value per run, rows listed by run name.
fn ranked(t: &Trades, rel: &[Release]) -> Value {
    let cur = relevance::resolve(&t.instruments, &HashMap::new(), Unmapped::Error, &[]).unwrap();
    let lists: Vec<Vec<String>> = cur.iter().map(|c| c.currencies.clone()).collect();
    let s = settings();
    let windows = eventfence::engine::exposure::used_windows(rel, &s.windows);
    let placebo = eventfence::analysis::evidence::PlaceboSettings { n: 19, seed: 7 };
    let mut rows = eventfence::analysis::rank::rank(
        t,
        rel,
        &windows,
        &lists,
        &s,
        eventfence::analysis::rank::RankBy::Net,
        eventfence::analysis::rank::RankDraws {
            placebo,
            random_removal: Default::default(),
        },
        &|| {},
    )
    .unwrap();
    rows.sort_by(|a, b| a.run.cmp(&b.run));
    serde_json::to_value(rows).unwrap()
}

fn releases(c: &Case) -> Vec<Release> {
    let tiers = [Tier::High, Tier::Medium, Tier::Low];
    c.releases
        .iter()
        .enumerate()
        .map(|(i, &(at, cur, tier))| Release {
            id: format!("r{i}"),
            at: BASE + at * MIN,
            end: BASE + at * MIN,
            all_day: false,
            title: format!("release {i}"),
            currency: CURRENCIES[cur].into(),
            tier: tiers[tier],
            category: None,
            region: None,
        })
        .collect()
}

fn settings() -> AnalysisSettings {
    AnalysisSettings {
        exposure_rule: ExposureRule::Overlap,
        windows: WindowSettings::default(),
        scenario: ScenarioSettings {
            sizing: Sizing::Fixed,
            cap: CapRule::parse("q0.99").unwrap(),
            initial_equity: Some(10_000.0),
            stress: None,
        },
        report_tz: "Europe/London".parse().unwrap(),
        tcr_p: 1.0,
        tcr_threshold: 12.0,
        calendar_span: None,
        pool: false,
    }
}

fn analyse(t: &Trades, rel: &[Release]) -> Option<Analysis> {
    if t.is_empty() {
        return None;
    }
    let cur = relevance::resolve(&t.instruments, &HashMap::new(), Unmapped::Error, &[]).unwrap();
    Some(run::analyze(t, rel, &cur, &settings(), false).unwrap().0)
}

/// Equal JSON, numbers to 1e-9 relative (summation order may differ).
fn same(a: &Value, b: &Value, at: &str) -> Result<(), String> {
    match (a, b) {
        (Value::Number(x), Value::Number(y)) => {
            let (x, y) = (x.as_f64().unwrap(), y.as_f64().unwrap());
            if (x - y).abs() <= 1e-9 * x.abs().max(y.abs()).max(1.0) {
                Ok(())
            } else {
                Err(format!("{at}: {x} vs {y}"))
            }
        }
        (Value::Array(x), Value::Array(y)) if x.len() == y.len() => x
            .iter()
            .zip(y)
            .enumerate()
            .try_for_each(|(i, (p, q))| same(p, q, &format!("{at}[{i}]"))),
        (Value::Object(x), Value::Object(y)) if x.len() == y.len() => {
            x.iter().try_for_each(|(k, v)| match y.get(k) {
                Some(w) => same(v, w, &format!("{at}.{k}")),
                None => Err(format!("{at}: key {k} missing")),
            })
        }
        _ if a == b => Ok(()),
        _ => Err(format!("{at}: {a} vs {b}")),
    }
}

/// The analysis as JSON, with what names input rows (row numbers in the
/// largest-trade lists) left out: those follow the input order by design.
fn summary(a: &Option<Analysis>) -> Value {
    let mut v = serde_json::to_value(a).unwrap();
    strip_rows(&mut v);
    v
}

fn strip_rows(v: &mut Value) {
    match v {
        Value::Object(m) => {
            m.remove("row");
            m.remove("file");
            m.values_mut().for_each(strip_rows);
        }
        Value::Array(a) => a.iter_mut().for_each(strip_rows),
        _ => {}
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 1000, ..ProptestConfig::default() })]

    /// Every row is imported or rejected, and the rejected rows are exactly
    /// the damaged ones, each named by its data row.
    #[test]
    fn every_row_imported_or_rejected(c in case(25)) {
        let dir = tempfile::tempdir().unwrap();
        let (t, s) = import(&csv_text(&c, &c.order, &Zone::Utc), &Zone::Utc, dir.path());
        prop_assert_eq!(s.rows_read, c.trades.len());
        prop_assert_eq!(s.rows_read, s.rows_imported + s.log.rows_rejected);
        prop_assert_eq!(t.len(), s.rows_imported);
        let damaged: BTreeSet<usize> = c.order.iter().enumerate().filter(|(_, i)| c.trades[**i].damage != 0).map(|(pos, _)| pos + 1).collect();
        let rejected: BTreeSet<usize> = s.log.rejections.iter().map(|r| r.row).collect();
        prop_assert_eq!(rejected, damaged);
        prop_assert_eq!(s.log.rejected_by_reason.values().sum::<usize>(), s.log.rows_rejected);
    }

    /// Shuffled input rows give the same summary (rows with the same open
    /// and close keep their input order, which docs/method.md §5 makes significant).
    #[test]
    fn independent_of_row_order(c in case(0)) {
        let dir = tempfile::tempdir().unwrap();
        let rel = releases(&c);
        let in_order: Vec<usize> = (0..c.trades.len()).collect();
        let (t1, _) = import(&csv_text(&c, &in_order, &Zone::Utc), &Zone::Utc, dir.path());
        let (t2, _) = import(&csv_text(&c, &c.order, &Zone::Utc), &Zone::Utc, dir.path());
        let (a, b) = (summary(&analyse(&t1, &rel)), summary(&analyse(&t2, &rel)));
        prop_assert!(same(&a, &b, "summary").is_ok(), "{}", same(&a, &b, "summary").unwrap_err());
    }

    /// The same instants written in another zone (declared with the input
    /// zone) give the same instants and the same summary. Local times that
    /// the zone repeats (DST overlap) are left out of both inputs: they are
    /// ambiguous by nature and rejected under the default policy.
    #[test]
    fn independent_of_input_zone(c in case(0)) {
        let dir = tempfile::tempdir().unwrap();
        let zone: Zone = ZONES[c.zone].parse().unwrap();
        let mut c = c;
        c.trades.retain(|t| {
            let open = BASE + t.open_min * MIN;
            [open, open + t.len_min * MIN].iter().all(|&ms| zone.to_utc(&zone.to_local(ms), LocalPolicy::Error) == Ok(ms))
        });
        let order: Vec<usize> = (0..c.trades.len()).collect();
        let (t1, s1) = import(&csv_text(&c, &order, &Zone::Utc), &Zone::Utc, dir.path());
        let (t2, s2) = import(&csv_text(&c, &order, &zone), &zone, dir.path());
        prop_assert_eq!(s1.log.rows_rejected, 0);
        prop_assert_eq!(s2.log.rows_rejected, 0);
        prop_assert_eq!(&t1.opened, &t2.opened);
        prop_assert_eq!(&t1.closed, &t2.closed);
        let rel = releases(&c);
        let (a, b) = (summary(&analyse(&t1, &rel)), summary(&analyse(&t2, &rel)));
        prop_assert!(same(&a, &b, "summary").is_ok(), "{}", same(&a, &b, "summary").unwrap_err());
    }

    /// The rows shuffled and cut into one to four files give the same
    /// per-run figures, placebo p-values (every run against the same
    /// calendars, scored on its own trades) and ranks
    /// (ties by run name). Rows with equal open and close keep their
    /// relative order (docs/method.md §5 makes it significant), so the files are
    /// consecutive pieces of the shuffled rows.
    #[test]
    fn runs_independent_of_order_and_files(c in case(0), cuts in prop::collection::vec(0usize..40, 0..3)) {
        let dir = tempfile::tempdir().unwrap();
        let rel = releases(&c);
        let in_order: Vec<usize> = (0..c.trades.len()).collect();
        let (t1, _) = import(&csv_text(&c, &in_order, &Zone::Utc), &Zone::Utc, dir.path());
        let mut bounds: Vec<usize> = cuts.iter().map(|&k| k % (c.order.len() + 1)).collect();
        bounds.extend([0, c.order.len()]);
        bounds.sort();
        bounds.dedup();
        let pieces: Vec<String> = bounds.windows(2).map(|w| csv_text(&c, &c.order[w[0]..w[1]], &Zone::Utc)).collect();
        let (t2, _) = import_files(&pieces, &Zone::Utc, dir.path());
        prop_assert_eq!(t1.len(), t2.len());
        let (a, b) = (ranked(&t1, &rel), ranked(&t2, &rel));
        prop_assert!(same(&a, &b, "runs").is_ok(), "{}", same(&a, &b, "runs").unwrap_err());
        for (x, y) in a.as_array().unwrap().iter().zip(b.as_array().unwrap()) {
            prop_assert_eq!(&x["rank_baseline"], &y["rank_baseline"]);
            prop_assert_eq!(&x["rank_removed"], &y["rank_removed"]);
            prop_assert_eq!(&x["placebo_p"], &y["placebo_p"]);
        }
    }

    /// removed ∪ exposed = baseline, and the exposed P/L is what the
    /// releases were attributed, overall and per run.
    #[test]
    fn removed_and_exposed_make_the_baseline(c in case(0)) {
        let dir = tempfile::tempdir().unwrap();
        let (t, _) = import(&csv_text(&c, &c.order, &Zone::Utc), &Zone::Utc, dir.path());
        let a = analyse(&t, &releases(&c)).unwrap();
        let (b, r, e) = (&a.scenarios.baseline, &a.scenarios.removed, &a.exposure);
        prop_assert_eq!(b.trades, t.len());
        prop_assert_eq!(r.trades + e.exposed_trades, b.trades);
        prop_assert!((b.net - r.net - e.exposed_pnl).abs() < 1e-6, "{} - {} != {}", b.net, r.net, e.exposed_pnl);
        let attributed: f64 = a.attribution.by_release.iter().map(|x| x.attributed_pnl).sum();
        prop_assert!((attributed - e.exposed_pnl).abs() < 1e-6);
        let mut run_trades = 0;
        for run in &a.runs {
            let s = &run.scenarios;
            prop_assert_eq!(s.removed.trades + run.exposed_trades, s.baseline.trades);
            prop_assert!((s.baseline.net - s.removed.net - run.exposed_pnl).abs() < 1e-6);
            run_trades += run.trades;
        }
        prop_assert_eq!(run_trades, t.len());
    }
}
