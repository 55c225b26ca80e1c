//! Blackout schedule renderers: CSV, JSON, RFC 5545 ICS, and the terminal
//! view. Times are shown in the zone the user names, with its UTC offset.

use crate::report::summary::{CAUTION, ToolInfo};
use crate::report::types::Blackout;
use crate::report::types::{Zone, format_offset, format_utc};
use serde::Serialize;
use std::fmt::Write;

fn local(z: &Zone, ms: i64) -> String {
    z.to_local(ms).format("%Y-%m-%d %H:%M:%S").to_string()
}

fn titles(b: &Blackout) -> String {
    b.releases
        .iter()
        .map(|r| format!("{} {} ({})", r.currency, r.title, r.tier))
        .collect::<Vec<_>>()
        .join("; ")
}

pub const CSV_COLUMNS: &[&str] = &[
    "instrument",
    "start_local",
    "end_local",
    "start_offset",
    "end_offset",
    "start_utc",
    "end_utc",
    "minutes",
    "releases",
    "release_ids",
    "uid",
];

pub fn csv(windows: &[Blackout], z: &Zone) -> Vec<u8> {
    use super::files::csv_field;
    let mut s = CSV_COLUMNS.join(",");
    s.push('\n');
    for b in windows {
        let _ = writeln!(
            s,
            "{},{},{},{},{},{},{},{},{},{},{}",
            csv_field(&b.instrument),
            local(z, b.start),
            local(z, b.end),
            format_offset(z.offset_at(b.start)),
            format_offset(z.offset_at(b.end)),
            format_utc(b.start),
            format_utc(b.end),
            (b.end - b.start) / 60_000,
            csv_field(&titles(b)),
            csv_field(
                &b.releases
                    .iter()
                    .map(|r| r.id.as_str())
                    .collect::<Vec<_>>()
                    .join(";")
            ),
            csv_field(&b.uid()),
        );
    }
    s.into_bytes()
}

#[derive(Serialize)]
struct JsonWindow<'a> {
    uid: String,
    instrument: &'a str,
    start_utc: String,
    end_utc: String,
    start_local: String,
    end_local: String,
    start_offset: String,
    end_offset: String,
    releases: Vec<JsonRelease<'a>>,
}

#[derive(Serialize)]
struct JsonRelease<'a> {
    id: &'a str,
    title: &'a str,
    currency: &'a str,
    tier: &'a str,
    released_at: String,
}

#[derive(Serialize)]
struct JsonSchedule<'a> {
    tool: ToolInfo,
    zone: String,
    windows: Vec<JsonWindow<'a>>,
    caution: &'static str,
}

pub fn json(windows: &[Blackout], z: &Zone) -> String {
    let doc = JsonSchedule {
        tool: ToolInfo::current(),
        zone: z.to_string(),
        windows: windows
            .iter()
            .map(|b| JsonWindow {
                uid: b.uid(),
                instrument: &b.instrument,
                start_utc: format_utc(b.start),
                end_utc: format_utc(b.end),
                start_local: z.format(b.start),
                end_local: z.format(b.end),
                start_offset: format_offset(z.offset_at(b.start)),
                end_offset: format_offset(z.offset_at(b.end)),
                releases: b
                    .releases
                    .iter()
                    .map(|r| JsonRelease {
                        id: &r.id,
                        title: &r.title,
                        currency: &r.currency,
                        tier: r.tier,
                        released_at: format_utc(r.at),
                    })
                    .collect(),
            })
            .collect(),
        caution: CAUTION,
    };
    serde_json::to_string_pretty(&doc).expect("plain data serialises")
}

/// RFC 5545 §3.3.11 TEXT escaping.
fn escape(s: &str) -> String {
    s.replace('\\', "\\\\")
        .replace(';', "\\;")
        .replace(',', "\\,")
        .replace('\n', "\\n")
}

/// Folds a content line at 75 octets (RFC 5545 §3.1), never inside a UTF-8
/// sequence, and ends it with CRLF.
fn fold(line: &str, out: &mut String) {
    let mut used = 0;
    for ch in line.chars() {
        let n = ch.len_utf8();
        if used + n > 75 {
            out.push_str("\r\n ");
            used = 1;
        }
        out.push(ch);
        used += n;
    }
    out.push_str("\r\n");
}

fn ics_utc(ms: i64) -> String {
    crate::report::types::ms_to_naive(ms)
        .format("%Y%m%dT%H%M%SZ")
        .to_string()
}

/// One VEVENT per merged window, DTSTART/DTEND in UTC, stable UIDs.
pub fn ics(windows: &[Blackout], dtstamp_ms: i64) -> Vec<u8> {
    let mut s = String::new();
    for l in [
        "BEGIN:VCALENDAR",
        "VERSION:2.0",
        "PRODID:-//eventfence//blackout schedule//EN",
        "CALSCALE:GREGORIAN",
        "METHOD:PUBLISH",
    ] {
        fold(l, &mut s);
    }
    for b in windows {
        fold("BEGIN:VEVENT", &mut s);
        fold(&format!("UID:{}", b.uid()), &mut s);
        fold(&format!("DTSTAMP:{}", ics_utc(dtstamp_ms)), &mut s);
        fold(&format!("DTSTART:{}", ics_utc(b.start)), &mut s);
        fold(&format!("DTEND:{}", ics_utc(b.end)), &mut s);
        fold(
            &format!(
                "SUMMARY:{}",
                escape(&format!(
                    "{} blackout: {}",
                    b.instrument,
                    b.releases
                        .iter()
                        .map(|r| r.title.as_str())
                        .collect::<Vec<_>>()
                        .join(" + ")
                ))
            ),
            &mut s,
        );
        fold(
            &format!(
                "DESCRIPTION:{}",
                escape(&format!("{}\n{}", titles(b), CAUTION))
            ),
            &mut s,
        );
        fold("TRANSP:TRANSPARENT", &mut s);
        fold(&format!("CATEGORIES:{}", escape(&b.instrument)), &mut s);
        fold("END:VEVENT", &mut s);
    }
    fold("END:VCALENDAR", &mut s);
    s.into_bytes()
}

/// Terminal view of the coming windows.
pub fn table(windows: &[Blackout], z: &Zone) -> String {
    let mut t = super::table::new_table(&["instrument", "from", "to", "offset", "releases"]);
    for b in windows {
        t.add_row(vec![
            comfy_table::Cell::new(&b.instrument),
            comfy_table::Cell::new(z.to_local(b.start).format("%a %Y-%m-%d %H:%M").to_string()),
            // A window that ends on a later local day shows that day.
            comfy_table::Cell::new({
                let (start, end) = (z.to_local(b.start), z.to_local(b.end));
                if end.date() == start.date() {
                    end.format("%H:%M").to_string()
                } else {
                    end.format("%a %Y-%m-%d %H:%M").to_string()
                }
            }),
            comfy_table::Cell::new(format_offset(z.offset_at(b.start))),
            comfy_table::Cell::new(titles(b)),
        ]);
    }
    format!(
        "Blackout windows in {z} ({} windows)\n{t}\n{}\n",
        windows.len(),
        super::table::wrap(CAUTION, 78)
    )
}
