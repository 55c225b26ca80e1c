//! `eventfence schedule`: the three formats, ICS read back by an independent
//! parser (the `icalendar` crate, not our own reader), stable UIDs, CSV
//! round trip, and local times across DST changes in the output zone.

mod common;

use std::path::Path;
use std::process::Command;

fn schedule(dir: &Path, extra: &[&str]) {
    let r = common::root();
    let o = Command::new(env!("CARGO_BIN_EXE_eventfence"))
        .current_dir(dir)
        .arg("schedule")
        .arg("--calendar")
        .arg(r.join("calendars/demo-usd.ics"))
        .arg(r.join("calendars/demo-eur.csv"))
        .args([
            "--calendar-tz",
            "Europe/Berlin",
            "--instruments",
            "EURUSD,US500",
            "--instrument-map",
            "US500=USD",
        ])
        .args([
            "--from",
            "2024-03-01",
            "--to",
            "2024-03-31",
            "--tz",
            "America/New_York+07:00",
        ])
        .args(extra)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

fn csv_rows(text: &str) -> Vec<Vec<String>> {
    // Our CSV quotes fields with commas; the release list may contain them.
    text.lines()
        .skip(1)
        .map(|l| {
            let mut out = vec![String::new()];
            let mut q = false;
            for c in l.chars() {
                match c {
                    '"' => q = !q,
                    ',' if !q => out.push(String::new()),
                    _ => out.last_mut().unwrap().push(c),
                }
            }
            out
        })
        .collect()
}

#[test]
fn demo_month_in_three_formats_round_trips() {
    let dir = tempfile::tempdir().unwrap();
    for (fmt, file) in [("csv", "m.csv"), ("json", "m.json"), ("ics", "m.ics")] {
        schedule(dir.path(), &["--format", fmt, "--output", file]);
    }
    let csv = std::fs::read_to_string(dir.path().join("m.csv")).unwrap();
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("m.json")).unwrap()).unwrap();
    let ics = std::fs::read_to_string(dir.path().join("m.ics")).unwrap();
    let windows = json["windows"].as_array().unwrap();
    assert!(
        windows.len() >= 10,
        "a month of demo releases gives many windows"
    );
    // CSV round trip: same windows, same order.
    let rows = csv_rows(&csv);
    assert_eq!(rows.len(), windows.len());
    for (row, w) in rows.iter().zip(windows) {
        assert_eq!(row[0], w["instrument"].as_str().unwrap());
        assert_eq!(row[5], w["start_utc"].as_str().unwrap());
        assert_eq!(row[6], w["end_utc"].as_str().unwrap());
        assert_eq!(row[10], w["uid"].as_str().unwrap());
    }
    // The payrolls window on 2024-03-01 (EST): 08:30 NY = 13:30Z, window
    // 13:15–14:00Z, server clock (UTC+2) 15:15–16:00.
    let first = &rows[0];
    assert_eq!(
        (first[1].as_str(), first[3].as_str(), first[5].as_str()),
        ("2024-03-01 15:15:00", "+02:00", "2024-03-01T13:15:00Z")
    );

    // ICS read back with the icalendar crate's parser.
    let unfolded = icalendar::parser::unfold(&ics);
    let cal = icalendar::parser::read_calendar(&unfolded).unwrap();
    let events: Vec<_> = cal
        .components
        .iter()
        .filter(|c| c.name.as_str() == "VEVENT")
        .collect();
    assert_eq!(events.len(), windows.len());
    let compact = |s: &str| s.replace(['-', ':'], "");
    for (e, w) in events.iter().zip(windows) {
        let prop = |n: &str| e.find_prop(n).unwrap().val.as_str().to_string();
        assert_eq!(prop("DTSTART"), compact(w["start_utc"].as_str().unwrap()));
        assert_eq!(prop("DTEND"), compact(w["end_utc"].as_str().unwrap()));
        assert!(prop("DTSTART").ends_with('Z') && prop("DTEND").ends_with('Z'));
        assert_eq!(prop("UID"), w["uid"].as_str().unwrap());
    }
    assert!(
        ics.lines().all(|l| l.trim_end_matches('\r').len() <= 75),
        "lines folded at 75 octets"
    );

    // UIDs are stable across runs.
    schedule(dir.path(), &["--format", "ics", "--output", "again.ics"]);
    let again = std::fs::read_to_string(dir.path().join("again.ics")).unwrap();
    let uids = |t: &str| {
        t.lines()
            .filter(|l| l.starts_with("UID:"))
            .map(String::from)
            .collect::<Vec<_>>()
    };
    assert_eq!(uids(&ics), uids(&again));
}

/// Windows crossing a DST change in the output zone. Sources: tzdata rules
/// (REFERENCES.md §2.2): New York to EDT at 2024-03-10 07:00Z; Berlin to CET
/// at 2024-10-27 01:00Z.
#[test]
fn local_times_across_us_and_eu_changes() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("c.csv"),
        "released_at,title,currency,tier\n2024-03-10T06:50:00Z,US overnight,USD,high\n2024-10-27T00:50:00Z,EU overnight,EUR,high\n",
    )
    .unwrap();
    let run = |zone: &str| {
        let o = Command::new(env!("CARGO_BIN_EXE_eventfence"))
            .current_dir(dir.path())
            .args([
                "schedule",
                "--calendar",
                "c.csv",
                "--currencies",
                "USD,EUR",
                "--from",
                "2024-01-01",
                "--to",
                "2024-12-31",
            ])
            .args(["--tz", zone, "--format", "csv"])
            .output()
            .unwrap();
        // Each currency's calendar covers one day of the requested year:
        // the schedule is written, with a warning and status 3.
        assert_eq!(
            o.status.code(),
            Some(3),
            "{}",
            String::from_utf8_lossy(&o.stderr)
        );
        assert!(String::from_utf8_lossy(&o.stderr).contains("lies partly outside it"));
        csv_rows(&String::from_utf8(o.stdout).unwrap())
    };
    // Window [06:35Z, 07:20Z]: 01:35 EST (−05:00) to 03:20 EDT (−04:00).
    let ny = run("America/New_York");
    let usd = ny.iter().find(|r| r[0] == "USD").unwrap();
    assert_eq!(
        (usd[1].as_str(), usd[3].as_str()),
        ("2024-03-10 01:35:00", "-05:00")
    );
    assert_eq!(
        (usd[2].as_str(), usd[4].as_str()),
        ("2024-03-10 03:20:00", "-04:00")
    );
    // Window [00:35Z, 01:20Z]: 02:35 CEST (+02:00) to 02:20 CET (+01:00).
    let be = run("Europe/Berlin");
    let eur = be.iter().find(|r| r[0] == "EUR").unwrap();
    assert_eq!(
        (eur[1].as_str(), eur[3].as_str()),
        ("2024-10-27 02:35:00", "+02:00")
    );
    assert_eq!(
        (eur[2].as_str(), eur[4].as_str()),
        ("2024-10-27 02:20:00", "+01:00")
    );
}

/// A window crossing local midnight shows the date it ends on, and high-tier
/// all-day releases left out of the schedule are counted in a warning.
#[test]
fn midnight_crossing_windows_and_all_day_releases_are_shown() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("c.csv"),
        "date,time,title,currency,tier\n2024-03-05,23:50,Late release,USD,high\n2024-03-06,,Holiday,USD,high\n2024-03-07,08:30,Morning,USD,high\n",
    )
    .unwrap();
    let o = Command::new(env!("CARGO_BIN_EXE_eventfence"))
        .current_dir(dir.path())
        .args([
            "schedule",
            "--calendar",
            "c.csv",
            "--currencies",
            "USD",
            "--from",
            "2024-03-05",
            "--to",
            "2024-03-07",
            "--tz",
            "UTC",
        ])
        .output()
        .unwrap();
    let (out, err) = (
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr),
    );
    // 23:50 − 15 min to + 30 min: 23:35 on Tuesday to 00:20 on Wednesday.
    let late = out.lines().find(|l| l.contains("Late release")).unwrap();
    assert!(
        late.contains("Tue 2024-03-05 23:35") && late.contains("Wed 2024-03-06 00:20"),
        "{late}"
    );
    let morning = out.lines().find(|l| l.contains("Morning")).unwrap();
    assert!(
        morning.contains("Thu 2024-03-07 08:15") && morning.contains(" 09:00 "),
        "{morning}"
    );
    assert!(
        err.contains("1 high-tier all-day release(s) in the range are left out"),
        "{err}"
    );
    assert_eq!(o.status.code(), Some(3));
}
