//! The library's entry points, called as another program would: only the
//! names at the crate root. Trades from in-memory columns must give the same
//! analysis as the same trades read from a CSV file, and the exposure of a
//! hand-made case follows docs/method.md (overlap rule: open ≤ t + post and
//! close ≥ t − pre; default high-tier window 15 min before, 30 after).

use eventfence::{
    AnalysisSettings, CalendarOptions, NoProgress, TradeColumns, TradeOptions, analyze, chance,
    instrument_currencies, load_calendar, load_trades,
};
use std::collections::HashMap;

const MIN: i64 = 60_000;
/// 2024-03-08 12:00 UTC (an invented release instant).
const T: i64 = 1_709_899_200_000;

fn columns() -> TradeColumns {
    TradeColumns {
        // exposed (ends inside the pre window), exposed (holds the release),
        // not exposed (opens after the post window), not exposed (ends before it).
        opened: vec![T - 20 * MIN, T - 5 * MIN, T + 31 * MIN, T - 60 * MIN],
        closed: vec![T - 15 * MIN, T + 5 * MIN, T + 40 * MIN, T - 16 * MIN],
        instrument: vec!["EURUSD".into(); 4],
        pnl: vec![100.0, -40.0, 7.5, 2.5],
        run: None,
    }
}

fn write(dir: &std::path::Path, name: &str, text: &str) -> std::path::PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

#[test]
fn columns_and_files_give_the_same_analysis() {
    let dir = tempfile::tempdir().unwrap();
    let cal_path = write(
        dir.path(),
        "cal.csv",
        "released_at,title,currency,tier\n2024-03-08T12:00:00Z,Invented index,USD,high\n",
    );
    let cal = load_calendar(&[cal_path], &CalendarOptions::default()).unwrap();
    assert_eq!(cal.releases.len(), 1);
    assert_eq!(cal.releases[0].at, T);

    let from_columns = columns().into_trades().unwrap();
    let csv = "opened_at,closed_at,instrument,pnl\n\
               2024-03-08T11:40:00Z,2024-03-08T11:45:00Z,EURUSD,100\n\
               2024-03-08T11:55:00Z,2024-03-08T12:05:00Z,EURUSD,-40\n\
               2024-03-08T12:31:00Z,2024-03-08T12:40:00Z,EURUSD,7.5\n\
               2024-03-08T11:00:00Z,2024-03-08T11:44:00Z,EURUSD,2.5\n";
    let trades_path = write(dir.path(), "trades.csv", csv);
    let (from_file, summary) = load_trades(&[trades_path], &TradeOptions::default()).unwrap();
    assert_eq!(summary.rows_imported, 4);
    assert_eq!(from_file.opened, from_columns.opened);
    assert_eq!(from_file.closed, from_columns.closed);

    let currencies = |t: &eventfence::Trades| {
        instrument_currencies(
            &t.instruments,
            &HashMap::new(),
            Default::default(),
            &["USD".to_string()],
        )
        .unwrap()
    };
    let settings = AnalysisSettings::default();
    let run = |t: &eventfence::Trades| {
        analyze(t, &cal.releases, &currencies(t), &settings, false).unwrap()
    };
    let (a, exposure) = run(&from_columns);
    let (b, _) = run(&from_file);
    assert_eq!(
        serde_json::to_value(&a).unwrap(),
        serde_json::to_value(&b).unwrap()
    );
    // The hand-made case: the first two trades touch [T − 15, T + 30] min.
    assert_eq!(
        (0..4).map(|i| exposure.is_exposed(i)).collect::<Vec<_>>(),
        vec![true, true, false, false]
    );
    assert_eq!(a.exposure.exposed_trades, 2);
    assert_eq!(a.exposure.exposed_pnl, 60.0);
    assert_eq!(a.scenarios.baseline.net, 70.0);
    assert_eq!(a.scenarios.removed.net, 10.0);

    // The chance tests run from the library with no progress display.
    let chance_settings = eventfence::ChanceSettings {
        placebo: 19,
        bootstrap: 50,
        seed: 7,
    };
    let (placebo, bootstrap) = chance(
        &from_columns,
        &cal.releases,
        &currencies(&from_columns),
        &settings,
        &exposure,
        a.initial_equity,
        chance_settings,
        &NoProgress,
    );
    assert_eq!(placebo.map(|p| p.placebos), Some(19));
    assert_eq!(bootstrap.map(|b| b.resamples), Some(50));
}
