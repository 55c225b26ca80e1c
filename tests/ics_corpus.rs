//! Calendars as calendar applications export them (tests/fixtures/
//! ics-corpus/): every file's release instants and titles in 2024 equal
//! what an independent RFC 5545 expander computes (recurring-ical-events
//! 3.8.2 over icalendar 7.3.2, with x-wr-timezone 2.0.1;
//! tests/reference/make_ics_fixture.py wrote tests/fixtures/
//! ics_expected.json). One class per file: UTC offsets with seconds,
//! RECURRENCE-ID (moved, cancelled, THISANDFUTURE), RDATE periods, two
//! RRULEs, UNTIL of other types, X-WR-TIMEZONE, unused components.

mod common;

use eventfence::import::calendar::{self, CalendarOptions};
use std::collections::BTreeMap;

const FROM: i64 = 1_704_067_200_000; // 2024-01-01T00:00:00Z
const TO: i64 = 1_735_689_600_000; // 2025-01-01T00:00:00Z

#[test]
fn corpus_expands_as_the_outside_expander_does() {
    let root = common::root();
    let expected: BTreeMap<String, Vec<(String, String)>> = serde_json::from_str(
        &std::fs::read_to_string(root.join("tests/fixtures/ics_expected.json")).unwrap(),
    )
    .unwrap();
    let dir = root.join("tests/fixtures/ics-corpus");
    let mut files: Vec<String> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    files.sort();
    assert_eq!(
        files,
        expected.keys().cloned().collect::<Vec<_>>(),
        "every corpus file has expected instants"
    );
    for file in files {
        let opts = CalendarOptions {
            span: Some((FROM, TO)),
            ..Default::default()
        };
        let cal =
            calendar::load(&[dir.join(&file)], &opts).unwrap_or_else(|e| panic!("{file}: {e}"));
        assert_eq!(
            cal.summary.log.rows_rejected, 0,
            "{file}: {:?}",
            cal.summary.log.rejections
        );
        let mut got: Vec<(String, String)> = cal
            .releases
            .iter()
            .filter(|r| (FROM..TO).contains(&r.at))
            .map(|r| (eventfence::import::zones::format_utc(r.at), r.title.clone()))
            .collect();
        got.sort();
        assert_eq!(got, expected[&file], "{file}");
    }
}

#[test]
fn what_was_read_leniently_is_said() {
    let dir = common::root().join("tests/fixtures/ics-corpus");
    let load = |file: &str, opts: CalendarOptions| {
        calendar::load(
            &[dir.join(file)],
            &CalendarOptions {
                span: Some((FROM, TO)),
                ..opts
            },
        )
        .unwrap()
    };
    let s = load("until-types.ics", CalendarOptions::default()).summary;
    assert!(
        s.notes.iter().any(|n| n
            .contains("UNTIL is a DATE under a DATE-TIME DTSTART; read as the end of 2024-03-25")),
        "{:?}",
        s.notes
    );
    assert!(
        s.notes
            .iter()
            .any(|n| n.contains("UNTIL lies before DTSTART, so the series is empty")),
        "{:?}",
        s.notes
    );
    let s = load("unused-components.ics", CalendarOptions::default()).summary;
    assert_eq!(
        s.components_skipped, 4,
        "VTODO (with its broken line and open VALARM), VJOURNAL, X-OUR-THING, the event's VALARM"
    );
    let s = load(
        "recurrence-id-moved-and-cancelled.ics",
        CalendarOptions::default(),
    )
    .summary;
    assert_eq!(
        (s.occurrences_moved, s.occurrences_cancelled, s.rows_read),
        (1, 1, 3)
    );
    // X-WR-TIMEZONE applies unless --calendar-tz is given.
    let s = load("x-wr-timezone.ics", CalendarOptions::default()).summary;
    assert!(s.notes[0].ends_with("floating times read in Europe/London (the file's X-WR-TIMEZONE; --calendar-tz overrides it)"), "{:?}", s.notes);
    let given = CalendarOptions {
        zone: "Asia/Tokyo".parse().unwrap(),
        zone_given: true,
        ..Default::default()
    };
    let cal = load("x-wr-timezone.ics", given);
    assert!(cal.summary.notes[0].contains(
        "read in Asia/Tokyo (--calendar-tz), not in the file's X-WR-TIMEZONE Europe/London"
    ));
    // 07:00 Tokyo = 22:00Z the day before.
    assert_eq!(
        eventfence::import::zones::format_utc(cal.releases[0].at),
        "2024-03-18T22:00:00Z"
    );
}
