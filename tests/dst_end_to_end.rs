//! End-to-end time correctness: trades on a broker server clock
//! (`America/New_York+07:00`), a USD calendar in ICS with
//! `TZID=America/New_York` and a EUR calendar CSV local to Europe/Berlin,
//! across the 2024 US and EU DST changes and the weeks when US and EU clocks
//! differ. Expected exposures are worked out by hand below.
//!
//! Sources for the clock changes (REFERENCES.md §2.2, tzdata rules US and
//! EU): New York to EDT 2024-03-10 07:00Z, to EST 2024-11-03 06:00Z; Berlin
//! to CEST 2024-03-31 01:00Z, to CET 2024-10-27 01:00Z. Mismatch weeks:
//! 2024-03-10..31 and 2024-10-27..11-03 (REFERENCES.md §2.3).
//!
//! Server clock = New York wall clock + 7 h, so server = UTC+2 under EST and
//! UTC+3 under EDT. Releases (high tier, window 15 min before, 30 after):
//!   E1 2024-03-08 08:30 EST = 13:30Z  window [13:15, 14:00]
//!   E2 2024-03-15 08:30 EDT = 12:30Z  window [12:15, 13:00]  (mismatch week)
//!   E3 2024-04-05 08:30 EDT = 12:30Z  window [12:15, 13:00]
//!   E4 2024-10-31 08:30 EDT = 12:30Z  window [12:15, 13:00]  (mismatch week)
//!   E5 2024-11-08 08:30 EST = 13:30Z  window [13:15, 14:00]
//!   G1 2024-03-15 14:15 CET = 13:15Z  window [13:00, 13:45]  (EUR)
//!   G2 2024-10-31 14:15 CET = 13:15Z  window [13:00, 13:45]  (EUR; EU already on CET)
//! Trades (server time → UTC):
//!   T1 EURUSD 03-08 15:20–15:25 → 13:20–13:25Z: E1 → exposed, k 1
//!   T2 EURUSD 03-08 14:00–15:14 → 12:00–13:14Z: ends 1 min before E1 → no
//!   T3 EURUSD 03-15 15:20–15:40 → 12:20–12:40Z (EDT): E2 → k 1. A fixed +2
//!      server offset would put it at 13:20Z, inside G1 instead.
//!   T4 EURUSD 03-15 16:05–16:10 → 13:05–13:10Z: after E2, inside G1 → k 1
//!   T5 EURUSD 10-31 15:31–15:50 → 12:31–12:50Z: E4 → k 1
//!   T6 EURUSD 10-31 16:00–16:20 → 13:00–13:20Z: touches E4's end (edges
//!      count) and inside G2 → k 2
//!   T7 EURUSD 11-08 15:29–15:29 (zero length) → 13:29Z: E5 → k 1
//!   T8 USDJPY 11-08 16:31–16:40 → 14:31Z: after E5's window → no
//!   T9 GBPUSD 04-05 15:44–15:46 → 12:44Z (EDT): E3 → k 1
//!   T10 EURGBP 04-05 15:44–15:46: no USD/EUR release then → no
//!   T11 EURUSD 03-08 23:00 → 03-11 10:00 (across the US change) → no

use std::process::Command;

const ICS: &str = "BEGIN:VCALENDAR\r\nVERSION:2.0\r\nPRODID:-//eventfence tests//EN\r\n\
BEGIN:VEVENT\r\nUID:e1\r\nSUMMARY:E1\r\nPRIORITY:1\r\nCATEGORIES:USD\r\nDTSTART;TZID=America/New_York:20240308T083000\r\nEND:VEVENT\r\n\
BEGIN:VEVENT\r\nUID:e2\r\nSUMMARY:E2\r\nPRIORITY:1\r\nCATEGORIES:USD\r\nDTSTART;TZID=America/New_York:20240315T083000\r\nEND:VEVENT\r\n\
BEGIN:VEVENT\r\nUID:e3\r\nSUMMARY:E3\r\nPRIORITY:1\r\nCATEGORIES:USD\r\nDTSTART;TZID=America/New_York:20240405T083000\r\nEND:VEVENT\r\n\
BEGIN:VEVENT\r\nUID:e4\r\nSUMMARY:E4\r\nPRIORITY:1\r\nCATEGORIES:USD\r\nDTSTART;TZID=America/New_York:20241031T083000\r\nEND:VEVENT\r\n\
BEGIN:VEVENT\r\nUID:e5\r\nSUMMARY:E5\r\nPRIORITY:1\r\nCATEGORIES:USD\r\nDTSTART;TZID=America/New_York:20241108T083000\r\nEND:VEVENT\r\n\
END:VCALENDAR\r\n";

const EUR_CSV: &str = "id,date,time,title,currency,tier\ng1,2024-03-15,14:15,G1,EUR,high\ng2,2024-10-31,14:15,G2,EUR,high\n";

const TRADES: &str = "opened_at,closed_at,instrument,pnl
2024.03.08 15:20,2024.03.08 15:25,EURUSD,1
2024.03.08 14:00,2024.03.08 15:14,EURUSD,2
2024.03.15 15:20,2024.03.15 15:40,EURUSD,3
2024.03.15 16:05,2024.03.15 16:10,EURUSD,4
2024.10.31 15:31,2024.10.31 15:50,EURUSD,5
2024.10.31 16:00,2024.10.31 16:20,EURUSD,6
2024.11.08 15:29,2024.11.08 15:29,EURUSD,7
2024.11.08 16:31,2024.11.08 16:40,USDJPY,8
2024.04.05 15:44,2024.04.05 15:46,GBPUSD,9
2024.04.05 15:44,2024.04.05 15:46,EURGBP,10
2024.03.08 23:00,2024.03.11 10:00,EURUSD,11
";

#[test]
fn server_clock_and_zoned_calendars_across_dst() {
    let dir = tempfile::tempdir().unwrap();
    let p = |n: &str| dir.path().join(n);
    std::fs::write(p("usd.ics"), ICS).unwrap();
    std::fs::write(p("eur.csv"), EUR_CSV).unwrap();
    std::fs::write(p("trades.csv"), TRADES).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_eventfence"))
        .args(["analyze", "--trades"])
        .arg(p("trades.csv"))
        .args(["--trades-tz", "America/New_York+07:00", "--calendar"])
        .arg(p("usd.ics"))
        .arg(p("eur.csv"))
        .args(["--calendar-tz", "Europe/Berlin", "--out"])
        .arg(p("out"))
        .arg("--json")
        .output()
        .unwrap();
    // Status 3 exactly when the run has warnings (README).
    let summary: serde_json::Value = serde_json::from_slice(&out.stdout)
        .unwrap_or_else(|_| panic!("{}", String::from_utf8_lossy(&out.stderr)));
    let warned = !summary["warnings"].as_array().unwrap().is_empty();
    assert_eq!(
        out.status.code(),
        Some(if warned { 3 } else { 0 }),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let csv = std::fs::read_to_string(p("out/trades.csv")).unwrap();
    let mut k_by_pnl = Vec::new();
    let mut rows = csv.lines();
    let header: Vec<&str> = rows.next().unwrap().split(',').collect();
    let col = |n: &str| header.iter().position(|h| *h == n).unwrap();
    for line in rows {
        let f: Vec<&str> = line.split(',').collect();
        k_by_pnl.push((
            f[col("pnl")].parse::<f64>().unwrap() as i32,
            f[col("matches")].parse::<u32>().unwrap(),
        ));
    }
    k_by_pnl.sort();
    assert_eq!(
        k_by_pnl,
        vec![
            (1, 1),
            (2, 0),
            (3, 1),
            (4, 1),
            (5, 1),
            (6, 2),
            (7, 1),
            (8, 0),
            (9, 1),
            (10, 0),
            (11, 0)
        ]
    );
    // The opened_at column is written in UTC: T3 opened at 12:20Z.
    assert!(csv.contains("2024-03-15T12:20:00Z"));
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(json["exposure"]["exposed_trades"], 7);
    assert_eq!(
        json["exposure"]["exposed_pnl"],
        1.0 + 3.0 + 4.0 + 5.0 + 6.0 + 7.0 + 9.0
    );
    // Per release: G1 got T4 (4); E4 got T5 + half of T6 (5 + 3); G2 half of T6.
    let by_release = json["attribution"]["by_release"].as_array().unwrap();
    let amount = |id: &str| {
        by_release.iter().find(|r| r["id"] == id).unwrap()["attributed_pnl"]
            .as_f64()
            .unwrap()
    };
    assert_eq!(amount("g1"), 4.0);
    assert_eq!(amount("e4"), 8.0);
    assert_eq!(amount("g2"), 3.0);
    assert_eq!(amount("e1"), 1.0);
}
