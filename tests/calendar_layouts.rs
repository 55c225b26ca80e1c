//! Calendars in the user's own layout (tests/fixtures/calendar-layouts/):
//! day-first dates and a 12-hour clock (`--calendar-time-format`), the
//! file's own importance symbols (`--tier-map`), its own "no fixed time"
//! word (`--untimed`) and ISO 3166 country codes for currencies.
//!
//! Check values: UK clocks go forward on the last Sunday of March (31 March
//! 2024; EU summer-time directive 2000/84/EC, REFERENCES.md tz section), so
//! 07:00 London is 07:00Z on 12 March and 06:00Z on 16 April. Lithuania
//! adopted the euro on 2015-01-01 (CLDR via babel, tests/fixtures/
//! country_currency.json).

mod common;

use eventfence::import::calendar::{self, CalendarOptions, Tier, csv::Layout};
use serde_json::Value;

fn utc(s: &str) -> i64 {
    chrono::NaiveDateTime::parse_from_str(s, "%Y-%m-%d %H:%M")
        .unwrap()
        .and_utc()
        .timestamp_millis()
}

fn options() -> CalendarOptions {
    let columns = [
        ("date", "Date"),
        ("time", "Time"),
        ("currency", "Country"),
        ("title", "Event"),
        ("tier", "Importance"),
    ];
    CalendarOptions {
        zone: "Europe/London".parse().unwrap(),
        columns: columns
            .iter()
            .map(|(f, c)| (f.to_string(), c.to_string()))
            .collect(),
        skip_bad_rows: true,
        layout: Layout {
            time_format: Some("%d/%m/%Y %I:%M %p".into()),
            tier_map: Layout::parse_tier_map(&["***=high,**=medium,*=low".into()]).unwrap(),
            untimed: vec!["All Day".into()],
        },
        ..Default::default()
    }
}

#[test]
fn own_layout_read_by_the_flags() {
    let path = common::root().join("tests/fixtures/calendar-layouts/own-layout.csv");
    let cal = calendar::load(&[path], &options()).unwrap();
    let got: Vec<(i64, &str, Tier, bool, &str)> = cal
        .releases
        .iter()
        .map(|r| {
            (
                r.at,
                r.currency.as_str(),
                r.tier,
                r.all_day,
                r.title.as_str(),
            )
        })
        .collect();
    assert_eq!(
        got,
        vec![
            (
                utc("2014-12-31 10:00"),
                "LTL",
                Tier::Medium,
                false,
                "Flash prices"
            ),
            (
                utc("2015-01-02 10:00"),
                "EUR",
                Tier::Medium,
                false,
                "Flash prices"
            ),
            // All day in London: from local midnight (GMT).
            (
                utc("2024-03-08 00:00"),
                "EUR",
                Tier::Low,
                true,
                "Bank holiday"
            ),
            // 1:30 PM London (GMT) on 8 March.
            (
                utc("2024-03-08 13:30"),
                "USD",
                Tier::High,
                false,
                "Employment report"
            ),
            (
                utc("2024-03-12 07:00"),
                "GBP",
                Tier::Medium,
                false,
                "Labour market"
            ),
            (
                utc("2024-04-16 06:00"),
                "GBP",
                Tier::Medium,
                false,
                "Labour market"
            ),
        ]
    );
    let r = &cal.summary.log.rejections[0];
    assert_eq!((r.row, r.reason), (7, "unmapped_tier"));
    assert_eq!(
        r.message,
        "'????' is not in --tier-map (mapped: ***, **, *)"
    );
}

#[test]
fn flags_reach_the_reader_and_bad_patterns_fail_fast() {
    let path = common::root().join("tests/fixtures/calendar-layouts/own-layout.csv");
    let run = |extra: &[&str]| {
        std::process::Command::new(env!("CARGO_BIN_EXE_eventfence"))
            .args(["check", "--json", "--calendar"])
            .arg(&path)
            .args([
                "--calendar-map",
                "date=Date,time=Time,currency=Country,title=Event,tier=Importance",
                "--calendar-tz",
                "Europe/London",
            ])
            .args(extra)
            .output()
            .unwrap()
    };
    let o = run(&[
        "--calendar-time-format",
        "%d/%m/%Y %I:%M %p",
        "--tier-map",
        "***=high,**=medium,*=low",
        "--untimed",
        "All Day",
    ]);
    assert_eq!(o.status.code(), Some(3));
    let j: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(j["calendar"]["import"]["releases"], 6);
    assert_eq!(j["calendar"]["all_day_releases"], 1);
    // Without the layout flags every row is refused, each saying why.
    let o = run(&[]);
    let j: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(j["calendar"]["import"]["rows_rejected"], 7);
    let first = j["calendar"]["import"]["rejections"][0]["message"]
        .as_str()
        .unwrap();
    assert!(
        first.contains("'08/03/2024' is not a date YYYY-MM-DD"),
        "{first}"
    );
    let o = run(&["--calendar-time-format", "%d/%m/%Y %Q"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&o.stderr).contains("is not a strftime pattern"));
    let o = run(&["--tier-map", "***=urgent"]);
    assert!(String::from_utf8_lossy(&o.stderr).contains("'urgent' is not high, medium or low"));
}

#[test]
fn untimed_words_are_the_files_own() {
    // "Tentative" was once a built-in marker; now only --untimed words (or
    // an empty time, or all_day=true) make a release all-day.
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("c.csv");
    std::fs::write(&p, "date,time,title,currency,tier\n2024-03-08,Tentative,A,USD,high\n2024-03-08,TBD,B,USD,high\n2024-03-08,,C,USD,high\n").unwrap();
    let opts = CalendarOptions {
        skip_bad_rows: true,
        layout: Layout {
            untimed: vec!["tbd".into()],
            ..Default::default()
        },
        ..Default::default()
    };
    let cal = calendar::load(&[p], &opts).unwrap();
    assert_eq!(cal.summary.log.rows_rejected, 1);
    assert_eq!(
        cal.summary.log.rejections[0].message,
        "'Tentative' is not a time HH:MM[:SS]"
    );
    assert!(cal.releases.iter().all(|r| r.all_day));
    assert_eq!(cal.releases.len(), 2);
}
