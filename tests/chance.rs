//! Placebo calendars and bootstrap intervals (docs/method.md §7).
//!
//! - Bootstrap percentiles against numpy (tests/reference/
//!   make_bootstrap_fixture.py, numpy 2.4.6) on the same resample indices.
//! - Placebo p-values are roughly uniform when exposure carries no effect,
//!   and small when an effect is planted.
//! - The seeded bootstrap does not depend on the order of the input rows.

use eventfence::analysis::evidence::{self, PlaceboSettings};
use eventfence::analysis::metrics::Context;
use eventfence::analysis::scenarios::{CapRule, ScenarioSettings, Sizing};
use eventfence::engine::exposure::{Engine, ExposureRule, used_windows};
use eventfence::engine::windows::WindowSettings;
use eventfence::import::calendar::{Release, Tier};
use eventfence::import::trades::Trades;
use eventfence::import::zones::{DAY_MS, MINUTE_MS, Zone};
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;

mod common;

fn trades_from(opened: Vec<i64>, closed: Vec<i64>, pnl: Vec<f64>) -> Trades {
    let n = pnl.len();
    Trades {
        opened,
        closed,
        instrument: vec![0; n],
        instruments: vec!["EURUSD".into()],
        pnl,
        run: vec![0; n],
        file: vec![0; n],
        row: (1..=n as u32).collect(),
        ..Default::default()
    }
}

#[test]
fn bootstrap_percentiles_match_numpy() {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/bootstrap_reference.json"
    );
    let f: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    assert_eq!(f["libraries"]["numpy"], "2.4.6");
    let v = |k: &str| f[k].as_array().unwrap().clone();
    let opened: Vec<i64> = v("opened_min")
        .iter()
        .map(|x| x.as_i64().unwrap() * MINUTE_MS)
        .collect();
    let closed: Vec<i64> = v("closed_min")
        .iter()
        .map(|x| x.as_i64().unwrap() * MINUTE_MS)
        .collect();
    let pnl: Vec<f64> = v("pnl").iter().map(|x| x.as_f64().unwrap()).collect();
    let exposed: Vec<bool> = v("exposed").iter().map(|x| x.as_bool().unwrap()).collect();
    let sets: Vec<Vec<u32>> = v("sets")
        .iter()
        .map(|s| {
            s.as_array()
                .unwrap()
                .iter()
                .map(|i| i.as_u64().unwrap() as u32)
                .collect()
        })
        .collect();
    let t = trades_from(opened, closed, pnl);
    let settings = ScenarioSettings {
        sizing: Sizing::Fixed,
        cap: CapRule::Quantile(0.99),
        initial_equity: None,
        stress: None,
    };
    let ctx = Context {
        span: t.span().unwrap(),
        report_zone: Zone::Utc,
        initial_equity: None,
        tcr_p: f["tcr_p"].as_f64().unwrap(),
    };
    let got = evidence::bootstrap_intervals(
        evidence::Resamples::Given(&sets),
        &t,
        &exposed,
        &settings,
        &ctx,
        0.95,
        true,
        &|| {},
    );
    for name in ["net", "profit_factor", "max_drawdown", "tcr"] {
        let want = &f["percentiles"][name];
        let g = &got[name];
        assert_eq!(
            g.replicates as u64,
            want["replicates"].as_u64().unwrap(),
            "{name}"
        );
        for (side, value) in [("low", g.low.unwrap()), ("high", g.high.unwrap())] {
            let w = want[side].as_f64().unwrap();
            assert!(
                (value - w).abs() <= 1e-9 * w.abs().max(1.0),
                "{name} {side}: {value} vs numpy {w}"
            );
        }
    }
}

/// One synthetic year: 400 trades on EURUSD, 150 high-tier USD releases at
/// 12:30 UTC on random weekdays, each its own series. `effect` is added to
/// the P/L of trades exposed to the real calendar.
fn synthetic(seed: u64, effect: f64) -> (Trades, Vec<Release>) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let monday = 1_704_067_200_000i64; // 2024-01-01T00:00Z, a Monday
    let weekday = |w: i64| monday + (w / 5 * 7 + w % 5) * DAY_MS;
    let releases: Vec<Release> = (0..150)
        .map(|i| {
            let at = weekday(rng.random_range(0..250)) + 12 * 3_600_000 + 30 * MINUTE_MS;
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
    let n = 400;
    let opened: Vec<i64> = (0..n)
        .map(|_| weekday(rng.random_range(0..250)) + rng.random_range(6 * 60..20 * 60) * MINUTE_MS)
        .collect();
    let closed: Vec<i64> = opened
        .iter()
        .map(|o| o + rng.random_range(0..120) * MINUTE_MS)
        .collect();
    let mut pnl: Vec<f64> = (0..n)
        .map(|_| {
            let u1: f64 = rng.random::<f64>().max(1e-12);
            let u2: f64 = rng.random();
            10.0 * (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos() + 1.0
        })
        .collect();
    let t = trades_from(opened.clone(), closed.clone(), pnl.clone());
    let exp = Engine::new(&releases, &WindowSettings::default(), ExposureRule::Overlap).run(
        &t.opened,
        &t.closed,
        &t.instrument,
        &[vec!["EUR".into(), "USD".into()]],
    );
    for (i, p) in pnl.iter_mut().enumerate() {
        if exp.k[i] > 0 {
            *p += effect;
        }
    }
    (trades_from(opened, closed, pnl), releases)
}

fn placebo_p(seed: u64, effect: f64, n: usize) -> f64 {
    let (t, rel) = synthetic(seed, effect);
    let w = WindowSettings::default();
    let cur = vec![vec!["EUR".to_string(), "USD".to_string()]];
    let exp =
        Engine::new(&rel, &w, ExposureRule::Overlap).run(&t.opened, &t.closed, &t.instrument, &cur);
    let flags: Vec<bool> = exp.k.iter().map(|&k| k > 0).collect();
    let r = evidence::placebo(
        &t,
        &rel,
        &used_windows(&rel, &w),
        &cur,
        ExposureRule::Overlap,
        &flags,
        PlaceboSettings {
            n,
            seed: seed + 1000,
        },
        &|| {},
    );
    r.p_share.expect("defined")
}

/// Runs tested together (`rank`): each run's placebo result is the one it
/// gets tested alone against the same seed's calendars, bit for bit, with
/// the runs' rows interleaved in the input.
#[test]
fn runs_share_the_calendars_and_are_scored_as_if_alone() {
    let (_, rel) = synthetic(7, 0.0);
    let w = WindowSettings::default();
    let windows = used_windows(&rel, &w);
    let cur = vec![vec!["EUR".to_string(), "USD".to_string()]];
    let settings = PlaceboSettings { n: 49, seed: 11 };
    let flags_of = |t: &Trades| -> Vec<bool> {
        let exp = Engine::new(&rel, &w, ExposureRule::Overlap).run(
            &t.opened,
            &t.closed,
            &t.instrument,
            &cur,
        );
        exp.k.iter().map(|&k| k > 0).collect()
    };
    // Three runs of different trades (the second with an effect planted on
    // its own releases, which the shared calendar does not hold), rows
    // interleaved: row 3i + r is run r's trade i.
    let runs: Vec<Trades> = [(1, 0.0), (2, 30.0), (3, 0.0)]
        .iter()
        .map(|&(seed, effect)| synthetic(seed, effect).0)
        .collect();
    let n = runs[0].len();
    let pick = |f: &dyn Fn(&Trades, usize) -> i64| -> Vec<i64> {
        (0..3 * n).map(|k| f(&runs[k % 3], k / 3)).collect()
    };
    let mut all = trades_from(
        pick(&|t, i| t.opened[i]),
        pick(&|t, i| t.closed[i]),
        (0..3 * n).map(|k| runs[k % 3].pnl[k / 3]).collect(),
    );
    all.run = (0..3 * n as u32).map(|k| k % 3).collect();
    let members: Vec<Vec<u32>> = (0..3u32)
        .map(|r| (0..n as u32).map(|i| 3 * i + r).collect())
        .collect();
    let flags: Vec<Vec<bool>> = runs.iter().map(flags_of).collect();
    let groups: Vec<evidence::PlaceboGroup> = members
        .iter()
        .zip(&flags)
        .map(|(m, f)| evidence::PlaceboGroup {
            trades: Some(m),
            observed_exposed: f,
        })
        .collect();
    let together = evidence::placebo_groups(
        &all,
        &rel,
        &windows,
        &cur,
        ExposureRule::Overlap,
        &groups,
        settings,
        evidence::Marking::Auto,
        &|| {},
    );
    let bits = |x: Option<f64>| x.map(f64::to_bits);
    for (r, got) in together.iter().enumerate() {
        let alone = evidence::placebo(
            &runs[r],
            &rel,
            &windows,
            &cur,
            ExposureRule::Overlap,
            &flags[r],
            settings,
            &|| {},
        );
        assert_eq!(
            bits(got.observed_share),
            bits(alone.observed_share),
            "run {r}"
        );
        assert_eq!(bits(got.p_share), bits(alone.p_share), "run {r}");
        assert_eq!(
            bits(got.observed_mean_diff),
            bits(alone.observed_mean_diff),
            "run {r}"
        );
        assert_eq!(bits(got.p_mean_diff), bits(alone.p_mean_diff), "run {r}");
        assert_eq!(got.releases_dropped, alone.releases_dropped, "run {r}");
        assert!(
            got.p_share.is_some() && got.releases_dropped > 0,
            "run {r}: {got:?}"
        );
    }
    // The runs differ, so their p-values are not one value copied.
    let ps: Vec<Option<u64>> = together.iter().map(|g| bits(g.p_share)).collect();
    assert!(ps[0] != ps[1] || ps[1] != ps[2], "{ps:?}");
}

/// The two ways of marking the moved calendars (by the windows' times of
/// day, and window by window) give the same results bit for bit: for all
/// trades as one group and for runs as groups, under each exposure rule.
#[test]
fn both_markings_give_the_same_placebo_results() {
    let w = WindowSettings::default();
    let cur = vec![vec!["EUR".to_string(), "USD".to_string()]];
    let settings = PlaceboSettings { n: 99, seed: 5 };
    let mut mid_range = 0;
    let bits = |r: &evidence::PlaceboResult| {
        (
            r.p_share.map(f64::to_bits),
            r.p_mean_diff.map(f64::to_bits),
            r.observed_share.map(f64::to_bits),
            r.releases_dropped,
        )
    };
    for (seed, rule) in [
        (3, ExposureRule::Overlap),
        (4, ExposureRule::Held),
        (5, ExposureRule::Entered),
    ] {
        // No planted effect: the p-values lie mid-range, where a placebo's
        // statistic moving to either side of the observed one shows.
        let (t, rel) = synthetic(seed, 0.0);
        let windows = used_windows(&rel, &w);
        let flags: Vec<bool> = Engine::new(&rel, &w, rule)
            .run(&t.opened, &t.closed, &t.instrument, &cur)
            .k
            .iter()
            .map(|&k| k > 0)
            .collect();
        // One group of every trade, and three groups of every third trade.
        let members: Vec<Vec<u32>> = (0..3u32)
            .map(|r| (r..t.len() as u32).step_by(3).collect())
            .collect();
        let group_flags: Vec<Vec<bool>> = members
            .iter()
            .map(|m| m.iter().map(|&i| flags[i as usize]).collect())
            .collect();
        let as_groups: Vec<evidence::PlaceboGroup> = members
            .iter()
            .zip(&group_flags)
            .map(|(m, f)| evidence::PlaceboGroup {
                trades: Some(m),
                observed_exposed: f,
            })
            .collect();
        let one = [evidence::PlaceboGroup {
            trades: None,
            observed_exposed: &flags,
        }];
        for groups in [&one[..], &as_groups[..]] {
            let run = |marking| {
                evidence::placebo_groups(
                    &t,
                    &rel,
                    &windows,
                    &cur,
                    rule,
                    groups,
                    settings,
                    marking,
                    &|| {},
                )
            };
            let (auto, by_window) = (
                run(evidence::Marking::Auto),
                run(evidence::Marking::ByWindow),
            );
            assert_eq!(auto.len(), groups.len());
            for (a, b) in auto.iter().zip(&by_window) {
                assert_eq!(bits(a), bits(b), "{rule:?}");
                assert!(
                    a.p_share.is_some() && a.releases_dropped > 0,
                    "{rule:?}: {a:?}"
                );
                let p = a.p_share.unwrap();
                mid_range += (p > 0.05 && p < 0.95) as usize;
            }
        }
    }
    // Most p-values mid-range (12 in all): a placebo's statistic moving to
    // the other side of the observed one would show.
    assert!(mid_range >= 8, "{mid_range} of 12 mid-range");
}

#[test]
fn placebo_p_values_are_roughly_uniform_without_an_effect() {
    let ps: Vec<f64> = (0..200).map(|s| placebo_p(s, 0.0, 99)).collect();
    let below = ps.iter().filter(|&&p| p <= 0.05).count() as f64 / ps.len() as f64;
    assert!(
        (0.02..=0.10).contains(&below),
        "share of p ≤ 0.05 = {below}"
    );
    let below_half = ps.iter().filter(|&&p| p <= 0.5).count() as f64 / ps.len() as f64;
    assert!(
        (0.4..=0.6).contains(&below_half),
        "share of p ≤ 0.5 = {below_half}"
    );
}

#[test]
fn placebo_finds_a_planted_release_effect() {
    for seed in [1, 2, 3] {
        let p = placebo_p(seed, 30.0, 299);
        assert!(p < 0.01, "seed {seed}: p = {p}");
    }
}

/// Resample counts are laid out by close order, not by input row: the demo
/// with its rows reversed gives the same intervals for the same seed.
#[test]
fn bootstrap_intervals_ignore_row_order() {
    let dir = tempfile::tempdir().unwrap();
    let demo = std::fs::read_to_string(common::root().join("demo/trades.csv")).unwrap();
    let mut lines: Vec<&str> = demo.lines().collect();
    lines[1..].reverse();
    let reversed = dir.path().join("reversed.csv");
    std::fs::write(&reversed, lines.join("\n") + "\n").unwrap();
    let run = |trades: &std::path::Path| -> serde_json::Value {
        let r = common::root();
        let o = std::process::Command::new(env!("CARGO_BIN_EXE_eventfence"))
            .arg("analyze")
            .arg("--trades")
            .arg(trades)
            .args(["--trades-tz", "America/New_York+07:00", "--calendar"])
            .arg(r.join("calendars/demo-usd.ics"))
            .arg(r.join("calendars/demo-eur.csv"))
            .arg(r.join("calendars/demo-gbp-jpy.ics"))
            .args(["--calendar-tz", "Europe/Berlin", "--instrument-map-file"])
            .arg(r.join("demo/instruments.json"))
            .args(["--placebo", "0", "--bootstrap", "60", "--json", "--quiet"])
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        serde_json::from_slice::<serde_json::Value>(&o.stdout).unwrap()["bootstrap"].clone()
    };
    let (a, b) = (run(&common::root().join("demo/trades.csv")), run(&reversed));
    assert_eq!(a["intervals"]["net"]["replicates"], 60);
    assert_eq!(a, b);
}
