//! Importer paths beyond plain CSV: Parquet with typed columns, several
//! files as runs, epoch times, and the coverage warning.

use polars::prelude::*;
use std::process::Command;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_eventfence"))
}

const CAL: &str = "released_at,title,currency,tier\n2024-03-08T13:30:00Z,Jobs,USD,high\n";

#[test]
fn parquet_with_timestamp_and_float_columns() {
    let dir = tempfile::tempdir().unwrap();
    // 2024-03-08T13:20Z and 13:40Z as epoch milliseconds in a Datetime column.
    let open_ms = [1_709_904_000_000i64, 1_709_910_000_000];
    let close_ms = [1_709_905_200_000i64, 1_709_911_000_000];
    let mut df = DataFrame::new(
        2,
        vec![
            Column::new("opened_at".into(), open_ms)
                .cast(&DataType::Datetime(TimeUnit::Milliseconds, None))
                .unwrap(),
            Column::new("closed_at".into(), close_ms)
                .cast(&DataType::Datetime(TimeUnit::Milliseconds, None))
                .unwrap(),
            Column::new("instrument".into(), ["EURUSD", "EURUSD"]),
            Column::new("pnl".into(), [12.5f64, -3.0]),
        ],
    )
    .unwrap();
    let p = dir.path().join("t.parquet");
    ParquetWriter::new(std::fs::File::create(&p).unwrap())
        .finish(&mut df)
        .unwrap();
    std::fs::write(dir.path().join("c.csv"), CAL).unwrap();
    let o = bin()
        .current_dir(dir.path())
        .args([
            "analyze",
            "--trades",
            "t.parquet",
            "--calendar",
            "c.csv",
            "--json",
            "--placebo",
            "0",
            "--bootstrap",
            "0",
        ])
        .output()
        .unwrap();
    // Completed with warnings (the calendar holds no EUR releases): status 3.
    assert_eq!(
        o.status.code(),
        Some(3),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let j: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    // 13:20–13:40Z overlaps [13:15, 14:00]; 15:00–15:16:40Z does not.
    assert_eq!(j["exposure"]["exposed_trades"], 1);
    assert_eq!(j["exposure"]["exposed_pnl"], 12.5);
}

#[test]
fn several_files_become_runs_and_epoch_times_read() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("c.csv"), CAL).unwrap();
    // 1709904600 = 2024-03-08T13:30:00Z.
    std::fs::write(
        dir.path().join("set-a.csv"),
        "opened_at,closed_at,instrument,pnl\n1709904600,1709905000,EURUSD,5\n",
    )
    .unwrap();
    std::fs::write(
        dir.path().join("set-b.csv"),
        "opened_at,closed_at,instrument,pnl\n1709800000,1709800100,EURUSD,7\n",
    )
    .unwrap();
    let o = bin()
        .current_dir(dir.path())
        .args([
            "analyze",
            "--trades",
            "set-*.csv",
            "--calendar",
            "c.csv",
            "--time-format",
            "epoch-s",
            "--json",
            "--placebo",
            "0",
            "--bootstrap",
            "0",
        ])
        .output()
        .unwrap();
    // Completed with warnings (the calendar holds no EUR releases): status 3.
    assert_eq!(
        o.status.code(),
        Some(3),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let j: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let runs = j["runs"].as_array().unwrap();
    assert_eq!(
        runs.iter()
            .map(|r| r["run"].as_str().unwrap())
            .collect::<Vec<_>>(),
        vec!["set-a", "set-b"]
    );
    assert_eq!(runs[0]["exposed_trades"], 1);
    assert_eq!(runs[1]["exposed_trades"], 0);
    // The calendar has only 2024-03-08 for USD and nothing for EUR: both
    // trades fall outside some coverage, and the warning says so.
    let warnings: Vec<&str> = j["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w.as_str().unwrap())
        .collect();
    // The EUR line says exactly what happened: the set-a trade was judged
    // (and exposed) on USD, only the set-b trade counts as unexposed
    // unjudged (it once said both were "counted as unexposed").
    assert!(
        warnings.contains(&"COVERAGE: the calendar has no releases for EUR; 2 trade(s) with P/L 12.00 fall outside it (EURUSD 2) and could not be judged on EUR; 1 of them (P/L 5.00) were exposed on the instrument's other currency, the other 1 (P/L 7.00) count as unexposed"),
        "{warnings:?}"
    );
    assert!(warnings.iter().any(|w| w.contains("covers 2024-03-08 to 2024-03-08 (first to last release; state its real span with --calendar-span) for USD") && w.contains("1 trade(s)")), "{warnings:?}");
    // Stating the calendar's real span covers the set-b trade for USD.
    let o = bin()
        .current_dir(dir.path())
        .args([
            "analyze",
            "--trades",
            "set-*.csv",
            "--calendar",
            "c.csv",
            "--time-format",
            "epoch-s",
            "--json",
            "--placebo",
            "0",
            "--bootstrap",
            "0",
            "--calendar-span",
            "2024-03-01..2024-03-31",
        ])
        .output()
        .unwrap();
    let j: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let warnings: Vec<&str> = j["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w.as_str().unwrap())
        .collect();
    assert_eq!(warnings.len(), 1, "{warnings:?}");
    assert!(warnings[0].starts_with("COVERAGE: the calendar has no releases for EUR"));
    let usd = j["coverage"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["currency"] == "USD")
        .unwrap();
    assert_eq!(
        (
            usd["calendar_from"].as_str(),
            usd["calendar_to"].as_str(),
            usd["coverage_from"].as_str()
        ),
        (
            Some("2024-03-01"),
            Some("2024-03-31"),
            Some("--calendar-span")
        )
    );
    assert_eq!(usd["trades_outside"], 0);
}

#[test]
fn parquet_read_group_by_group_keeps_row_numbers_and_runs() {
    // 300 rows in row groups of 64, an integer run column (runs 7 and 12 in
    // turn, 30 rows each), and one damaged row (it closes before it opens)
    // in the fourth group (row 200, in run 7): row 200 must be the one
    // named, the rest imported; runs listed by value, 7 before 12.
    let dir = tempfile::tempdir().unwrap();
    let n = 300;
    let base = 1_709_904_000_000i64;
    let open_ms: Vec<i64> = (0..n).map(|i| base + i as i64 * 3_600_000).collect();
    let close_ms: Vec<i64> = (0..n)
        .map(|i| {
            if i == 199 {
                base - 1
            } else {
                base + i as i64 * 3_600_000 + 60_000
            }
        })
        .collect();
    let run: Vec<i64> = (0..n)
        .map(|i| if (i / 30) % 2 == 0 { 7 } else { 12 })
        .collect();
    let mut df = DataFrame::new(
        n,
        vec![
            Column::new("run".into(), run),
            Column::new("opened_at".into(), open_ms)
                .cast(&DataType::Datetime(TimeUnit::Milliseconds, None))
                .unwrap(),
            Column::new("closed_at".into(), close_ms)
                .cast(&DataType::Datetime(TimeUnit::Milliseconds, None))
                .unwrap(),
            Column::new("instrument".into(), vec!["EURUSD"; n]),
            Column::new("pnl".into(), vec![1.0f64; n]),
        ],
    )
    .unwrap();
    let p = dir.path().join("t.parquet");
    ParquetWriter::new(std::fs::File::create(&p).unwrap())
        .with_row_group_size(Some(64))
        .finish(&mut df)
        .unwrap();
    std::fs::write(dir.path().join("c.csv"), CAL).unwrap();
    let run = |extra: &[&str]| {
        let mut args = vec![
            "analyze",
            "--trades",
            "t.parquet",
            "--calendar",
            "c.csv",
            "--json",
            "--placebo",
            "0",
            "--bootstrap",
            "0",
        ];
        args.extend_from_slice(extra);
        bin().current_dir(dir.path()).args(&args).output().unwrap()
    };
    let refused = run(&[]);
    assert!(!refused.status.success());
    assert!(
        String::from_utf8_lossy(&refused.stderr).contains("row 200"),
        "{}",
        String::from_utf8_lossy(&refused.stderr)
    );
    let o = run(&["--skip-bad-rows"]);
    // Completed with warnings (the calendar holds no EUR releases): status 3.
    assert_eq!(
        o.status.code(),
        Some(3),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let j: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(j["exposure"]["trades"], 299);
    let runs: Vec<(String, u64)> = j["runs"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            (
                r["run"].as_str().unwrap().to_string(),
                r["trades"].as_u64().unwrap(),
            )
        })
        .collect();
    assert_eq!(runs, vec![("7".to_string(), 149), ("12".to_string(), 150)]);
}
