//! Parquet trade lists written by pandas and pyarrow
//! (tests/reference/make_parquet_fixtures.py): naive timestamps are local
//! to `--trades-tz`, zoned ones are instants, integers follow
//! `--time-format`; each gives the exposure of the same rows as CSV text.
//! The local-to-UTC conversions in the fixtures were made by pandas.

mod common;

use serde_json::Value;
use std::process::{Command, Output};

fn run(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_eventfence"))
        .current_dir(common::root().join("tests/fixtures/parquet"))
        .args(args)
        .output()
        .unwrap()
}

fn exposure(trades: &str, extra: &[&str]) -> Value {
    let mut args = vec![
        "analyze",
        "--trades",
        trades,
        "--calendar",
        "calendar.csv",
        "--placebo",
        "0",
        "--bootstrap",
        "0",
        "--json",
    ];
    args.extend_from_slice(extra);
    let o = run(&args);
    assert!(
        o.status.code() == Some(0) || o.status.code() == Some(3),
        "{trades}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    let j: Value = serde_json::from_slice(&o.stdout).unwrap();
    j["exposure"].clone()
}

#[test]
fn every_writer_gives_the_exposure_of_the_csv() {
    // A (08:20-08:40 New York, 12:20Z) and C (08:25-09:05 New York, EST)
    // meet the 08:30 releases; B and D would only if read as UTC.
    let reference = exposure("trades.csv", &["--trades-tz", "America/New_York"]);
    assert_eq!(reference["exposed_trades"], 2);
    assert_eq!(reference["exposed_pnl"], 175.0);
    for naive in ["naive_pandas.parquet", "naive_pyarrow.parquet"] {
        assert_eq!(
            exposure(naive, &["--trades-tz", "America/New_York"]),
            reference,
            "{naive}"
        );
    }
    // Zoned columns are instants: --trades-tz does not apply to them.
    for zoned in ["utc_pandas.parquet", "ny_pyarrow.parquet"] {
        assert_eq!(
            exposure(zoned, &["--trades-tz", "America/New_York"]),
            reference,
            "{zoned}"
        );
        assert_eq!(
            exposure(zoned, &["--trades-tz", "Asia/Tokyo"]),
            reference,
            "{zoned} under another --trades-tz"
        );
    }
    assert_eq!(
        exposure("epoch_ms.parquet", &["--time-format", "epoch-ms"]),
        reference
    );
    // The same naive file read as UTC is the wrong answer the zone rule prevents.
    let as_utc = exposure("naive_pandas.parquet", &[]);
    assert_eq!(
        as_utc["exposed_pnl"], -20.0,
        "B (-50) and D (+30) are the trades at 12:30Z and 13:30Z on the UTC reading"
    );
}

#[test]
fn check_says_which_rule_applied_per_column() {
    let o = run(&[
        "check",
        "--trades",
        "naive_pandas.parquet",
        "--trades-tz",
        "America/New_York",
        "--json",
    ]);
    let j: Value = serde_json::from_slice(&o.stdout).unwrap();
    let cols = j["trades"]["import"]["time_columns"].as_array().unwrap();
    assert_eq!(cols.len(), 2);
    assert_eq!(cols[0]["field"], "opened_at");
    assert_eq!(
        cols[0]["read_as"],
        "timestamps without a zone: local to --trades-tz America/New_York"
    );
    let o = run(&["check", "--trades", "ny_pyarrow.parquet", "--json"]);
    let j: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(
        j["trades"]["import"]["time_columns"][1]["read_as"],
        "timestamps with zone America/New_York: instants, used as stored"
    );
}

#[test]
fn dates_are_refused_and_far_epochs_rejected() {
    let o = run(&["check", "--trades", "dates.parquet"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&o.stderr).contains(
        "dates.parquet: column 'opened_at' (opened_at) holds dates without a time of day"
    ));
    let o = run(&[
        "check",
        "--trades",
        "epoch_out_of_range.parquet",
        "--time-format",
        "epoch-ms",
        "--json",
    ]);
    assert_eq!(o.status.code(), Some(3));
    let j: Value = serde_json::from_slice(&o.stdout).unwrap();
    let r = &j["trades"]["import"]["rejections"][0];
    assert_eq!(r["row"], 2);
    assert_eq!(r["field"], "opened_at");
    assert_eq!(
        r["message"],
        "1000000000000000000 ms since 1970 is outside the years 1000-9999 that eventfence reads"
    );
}

#[test]
fn parquet_output_holds_utc_timestamps() {
    use polars::prelude::*;
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    let o = run(&[
        "analyze",
        "--trades",
        "naive_pandas.parquet",
        "--trades-tz",
        "America/New_York",
        "--calendar",
        "calendar.csv",
        "--placebo",
        "0",
        "--bootstrap",
        "0",
        "--trades-format",
        "parquet",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert!(
        o.status.code() == Some(0) || o.status.code() == Some(3),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let df = ParquetReader::new(std::fs::File::open(out.join("trades.parquet")).unwrap())
        .finish()
        .unwrap();
    let opened = df.column("opened_at").unwrap();
    assert_eq!(
        opened.dtype(),
        &DataType::Datetime(TimeUnit::Milliseconds, Some(TimeZone::UTC))
    );
    // Row 1 opened 2024-03-12 08:20 New York (EDT, UTC-4) = 12:20Z.
    let first = opened
        .as_materialized_series()
        .to_physical_repr()
        .i64()
        .unwrap()
        .get(0)
        .unwrap();
    assert_eq!(first, 1_710_246_000_000);
}
