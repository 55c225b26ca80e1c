//! Property test: the exposure engine and per-release attribution equal a
//! plain O(n·m) reading of docs/method.md §2–§3, written here without the engine's
//! indexing, on random trades and calendars (zero-length trades, trades
//! spanning many releases, releases exactly at window edges).

use eventfence::analysis::attribution::per_release;
use eventfence::engine::exposure::{Engine, ExposureRule};
use eventfence::engine::windows::{Window, WindowSettings};
use eventfence::import::calendar::{Release, Tier};
use proptest::prelude::*;

const MIN: i64 = 60_000;

fn release(i: usize, at_min: i64, cur: &str, tier: Tier, cat: &str) -> Release {
    Release {
        id: format!("r{i}"),
        at: at_min * MIN,
        end: at_min * MIN,
        all_day: false,
        title: format!("release {i}"),
        currency: cur.into(),
        tier,
        category: Some(cat.into()),
        region: None,
    }
}

const CURRENCIES: [&str; 4] = ["USD", "EUR", "JPY", "GBP"];
const INSTRUMENTS: [[&str; 2]; 4] = [
    ["EUR", "USD"],
    ["USD", "JPY"],
    ["EUR", "GBP"],
    ["GBP", "JPY"],
];

/// The plain reading: for every trade and every release, test the rule.
fn naive(
    opened: &[i64],
    closed: &[i64],
    inst: &[u32],
    releases: &[Release],
    w: &WindowSettings,
    rule: ExposureRule,
) -> Vec<Vec<u32>> {
    let mut out = vec![Vec::new(); opened.len()];
    for (i, m) in out.iter_mut().enumerate() {
        for (j, r) in releases.iter().enumerate() {
            if !INSTRUMENTS[inst[i] as usize].contains(&r.currency.as_str()) {
                continue;
            }
            let Some(win) = w.window_for(r) else { continue };
            let (t, pre, post) = (r.at, win.pre_min * MIN, win.post_min * MIN);
            let hit = match rule {
                ExposureRule::Overlap => opened[i] <= t + post && closed[i] >= t - pre,
                ExposureRule::Held => opened[i] <= t && t <= closed[i],
                ExposureRule::Entered => t - pre <= opened[i] && opened[i] <= t + post,
            };
            if hit {
                m.push(j as u32);
            }
        }
    }
    out
}

#[derive(Debug, Clone)]
struct Case {
    releases: Vec<(i64, usize, u8, u8)>,
    trades: Vec<(i64, i64, u32, f64)>,
    category_window: Option<(i64, i64)>,
}

fn case() -> impl Strategy<Value = Case> {
    // Times on a 5-minute grid over ~2 days so window edges coincide often.
    let rel = (0i64..600, 0usize..4, 0u8..3, 0u8..2)
        .prop_map(|(slot, c, tier, cat)| (slot * 5, c, tier, cat));
    let trade = (
        0i64..600,
        prop_oneof![Just(0i64), 0i64..12, 0i64..400],
        0u32..4,
        -500i64..500,
    )
        .prop_map(|(slot, len, inst, p)| (slot * 5, slot * 5 + len * 5, inst, p as f64 / 4.0));
    (
        prop::collection::vec(rel, 0..40),
        prop::collection::vec(trade, 0..60),
        prop::option::of((0i64..90, 0i64..120)),
    )
        .prop_map(|(releases, trades, category_window)| Case {
            releases,
            trades,
            category_window,
        })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 1200, ..ProptestConfig::default() })]

    #[test]
    fn engine_equals_naive(c in case(), rule_ix in 0usize..3) {
        let rule = [ExposureRule::Overlap, ExposureRule::Held, ExposureRule::Entered][rule_ix];
        let tiers = [Tier::High, Tier::Medium, Tier::Low];
        let releases: Vec<Release> = c
            .releases
            .iter()
            .enumerate()
            .map(|(i, &(at, cur, tier, cat))| release(i, at, CURRENCIES[cur], tiers[tier as usize], ["rates", "inflation"][cat as usize]))
            .collect();
        let mut w = WindowSettings { low: Some(Window { pre_min: 0, post_min: 5 }), ..Default::default() };
        if let Some((pre, post)) = c.category_window {
            w.by_category.push(("rates".into(), Some(Window { pre_min: pre, post_min: post })));
        }
        let opened: Vec<i64> = c.trades.iter().map(|t| t.0 * MIN).collect();
        let closed: Vec<i64> = c.trades.iter().map(|t| t.1 * MIN).collect();
        let inst: Vec<u32> = c.trades.iter().map(|t| t.2).collect();
        let pnl: Vec<f64> = c.trades.iter().map(|t| t.3).collect();
        let cur: Vec<Vec<String>> = INSTRUMENTS.iter().map(|p| p.iter().map(|s| s.to_string()).collect()).collect();

        let exp = Engine::new(&releases, &w, rule).run(&opened, &closed, &inst, &cur);
        let expect = naive(&opened, &closed, &inst, &releases, &w, rule);
        let lists: Vec<&[u32]> = exp.match_lists().collect();
        prop_assert_eq!(lists.len(), expect.len());
        for (i, m) in expect.iter().enumerate() {
            prop_assert_eq!(lists[i], m.as_slice(), "trade {}", i);
            prop_assert_eq!(exp.k[i] as usize, m.len());
        }
        // Per-release attribution against the plain split.
        let (touched, amount) = per_release(&exp, &pnl, releases.len());
        let mut t2 = vec![0usize; releases.len()];
        let mut a2 = vec![0.0f64; releases.len()];
        for (i, m) in expect.iter().enumerate() {
            for &r in m {
                t2[r as usize] += 1;
                a2[r as usize] += pnl[i] / m.len() as f64;
            }
        }
        prop_assert_eq!(touched, t2);
        for (x, y) in amount.iter().zip(&a2) {
            prop_assert!((x - y).abs() < 1e-9, "{} vs {}", x, y);
        }
        // Conservation: attributed total equals exposed P/L.
        let exposed: f64 = (0..pnl.len()).filter(|&i| !expect[i].is_empty()).map(|i| pnl[i]).sum();
        prop_assert!((amount.iter().sum::<f64>() - exposed).abs() < 1e-6);
    }
}

/// A trade spanning many releases matches each of them.
#[test]
fn long_trade_matches_every_release_it_spans() {
    let releases: Vec<Release> = (0..37)
        .map(|i| release(i, 100 + i as i64 * 60, "USD", Tier::High, "rates"))
        .collect();
    let w = WindowSettings::default();
    let cur = vec![vec!["EUR".to_string(), "USD".to_string()]];
    let exp = Engine::new(&releases, &w, ExposureRule::Overlap).run(
        &[0],
        &[100 * MIN + 36 * 60 * MIN],
        &[0],
        &cur,
    );
    assert_eq!(exp.k, vec![37]);
}
