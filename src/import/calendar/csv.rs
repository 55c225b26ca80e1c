//! Calendar CSV import (schema in calendars/README.md).
//!
//! Columns (renamed with `--calendar-map field=Column`): `released_at`, or
//! `date` plus optional `time`; `title`; `currency`; `tier`; optional
//! `category`, `region`, `all_day`, `id`. Times without an offset are local
//! to `--calendar-tz`. A row with a date but no time, or `all_day` true, is
//! an all-day release covering its local day.

use super::rules::Draft;
use super::{
    CalendarError, CalendarOptions, CalendarSummary, Rejection, Release, Tier, countries,
    is_currency,
};
use crate::import::log::RowError;
use crate::import::table::{Cell, ColumnSource, Table};
use crate::import::timefmt::{Stamp, TimeFormat, parse_stamp, scan_date, scan_time};
use crate::import::zones::{LocalPolicy, naive_to_ms};
use chrono::NaiveTime;
use std::path::Path;

/// The calendar CSV fields (columns mappable with --calendar-map).
pub const FIELDS: &[&str] = &[
    "released_at",
    "date",
    "time",
    "title",
    "currency",
    "tier",
    "category",
    "region",
    "all_day",
    "id",
];

/// How a file of the user's own layout writes times and importance.
#[derive(Debug, Clone, Default)]
pub struct Layout {
    /// strftime pattern for `released_at`, or for `date` and `time` joined
    /// by one space (`--calendar-time-format`). The part before its first
    /// space reads a date alone (an untimed row).
    pub time_format: Option<String>,
    /// The file's importance values (compared trimmed, case-insensitive)
    /// and their tiers (`--tier-map`); when given, only these are read.
    pub tier_map: Vec<(String, Tier)>,
    /// The file's own words for "no fixed time" (`--untimed`, compared
    /// trimmed, case-insensitive): such rows become all-day releases.
    pub untimed: Vec<String>,
}

impl Layout {
    /// Reads `--tier-map VALUE=TIER,...` (a value may be any text without
    /// `,` or `=`: words, digits, stars).
    pub fn parse_tier_map(
        specs: &[String],
    ) -> Result<Vec<(String, Tier)>, crate::import::setting::BadSetting> {
        let mut out = Vec::new();
        for spec in specs {
            for pair in spec.split(',').filter(|p| !p.trim().is_empty()) {
                let (v, t) = pair
                    .rsplit_once('=')
                    .ok_or_else(|| format!("--tier-map '{pair}' is not VALUE=TIER"))?;
                let tier = Tier::parse(t).ok_or_else(|| {
                    format!(
                        "--tier-map '{pair}': '{}' is not high, medium or low",
                        t.trim()
                    )
                })?;
                out.push((v.trim().to_lowercase(), tier));
            }
        }
        Ok(out)
    }

    fn is_untimed(&self, s: &str) -> bool {
        let t = s.trim();
        self.untimed
            .iter()
            .any(|w| w.trim().eq_ignore_ascii_case(t))
    }

    /// The tier a row's value names.
    fn tier(&self, value: &str) -> Result<Tier, RowErr> {
        if self.tier_map.is_empty() {
            return Tier::parse(value).ok_or(RowError::new(
"tier", "bad_tier", format!("'{value}' is not high, medium or low; map the file's own values with --tier-map")));
        }
        let key = value.trim().to_lowercase();
        self.tier_map
            .iter()
            .find(|(v, _)| *v == key)
            .map(|(_, t)| *t)
            .ok_or_else(|| {
                let known: Vec<&str> = self.tier_map.iter().map(|(v, _)| v.as_str()).collect();
                RowError::new(
                    "tier",
                    "unmapped_tier",
                    format!(
                        "'{value}' is not in --tier-map (mapped: {})",
                        known.join(", ")
                    ),
                )
            })
    }
}

/// Reads one calendar CSV file into `out`, counting every row in `summary`.
pub fn read(
    path: &Path,
    opts: &CalendarOptions,
    out: &mut Vec<Release>,
    summary: &mut CalendarSummary,
) -> Result<(), CalendarError> {
    let table = Table::read(path, opts.delimiter).map_err(|message| CalendarError::Format {
        path: path.into(),
        message: message.to_string(),
    })?;
    read_table(&table, path, opts, out, summary)
}

/// Reads one calendar table (a CSV file's, or one held in memory) into
/// `out`; `path` names it in messages.
pub fn read_table(
    table: &Table,
    path: &Path,
    opts: &CalendarOptions,
    out: &mut Vec<Release>,
    summary: &mut CalendarSummary,
) -> Result<(), CalendarError> {
    let name_of = |f: &str| {
        opts.columns
            .get(f)
            .cloned()
            .unwrap_or_else(|| f.to_string())
    };
    let missing = |f: &str| CalendarError::MissingColumn {
        path: path.into(),
        field: f.into(),
        column: name_of(f),
        available: table.names().join(", "),
    };
    let get = |f: &str| table.column(&name_of(f));
    let released = get("released_at");
    let date = get("date");
    let time = get("time");
    if released.is_none() && date.is_none() {
        return Err(missing("released_at"));
    }
    let title = get("title").ok_or_else(|| missing("title"))?;
    let currency = get("currency");
    if currency.is_none() && opts.rules.0.is_empty() {
        return Err(missing("currency"));
    }
    let tier = get("tier");
    let (category, region, all_day, id) =
        (get("category"), get("region"), get("all_day"), get("id"));
    let file = path.display().to_string();
    let text = |c: Option<&ColumnSource>, i: usize| -> Option<String> {
        match c?.get(i) {
            Cell::Str(s) => Some(s.trim().to_string()),
            Cell::Num(v) => Some(if v.fract() == 0.0 {
                format!("{}", v as i64)
            } else {
                v.to_string()
            }),
            _ => None,
        }
    };
    for i in 0..table.height() {
        summary.rows_read += 1;
        if let Some(p) = table.row_problem(i) {
            summary.reject(Rejection {
                file: file.clone(),
                row: i + 1,
                field: p.column.clone().unwrap_or_else(|| "row".into()),
                reason: p.reason,
                message: p.message.clone(),
            });
            continue;
        }
        let row = (|| -> Result<Release, RowErr> {
            let t = text(Some(&title), i)
                .filter(|s| !s.is_empty())
                .ok_or(RowError::new("title", "missing_value", "empty".to_string()))?;
            let flagged_all_day = match text(all_day.as_ref(), i).map(|s| s.to_ascii_lowercase()) {
                None => false,
                Some(s) => match s.as_str() {
                    "true" | "1" | "yes" | "y" => true,
                    "false" | "0" | "no" | "n" | "" => false,
                    _ => {
                        return Err(RowError::new(
                            "all_day",
                            "bad_value",
                            format!("'{s}' is not true/false"),
                        ));
                    }
                },
            };
            // The instant, or the local day for an all-day release.
            let (at, end, is_all_day) =
                resolve_time(&released, &date, &time, i, flagged_all_day, opts)?;
            let mut cur = text(currency.as_ref(), i).filter(|s| !s.is_empty());
            // A country code: the currency in force there on the release's
            // local date.
            let country = cur.as_deref().and_then(countries::code_of);
            if let Some(code) = country {
                let day = opts.zone.local_date(at);
                let found = countries::currency_on(code, day).ok_or(RowError::new(
                    "currency",
                    "bad_currency",
                    format!("country '{code}' had no currency in the table on {day}"),
                ))?;
                cur = Some(found.to_string());
            }
            let region = text(region.as_ref(), i).filter(|s| !s.is_empty());
            let mut tr = match text(tier.as_ref(), i).filter(|s| !s.is_empty()) {
                None => None,
                Some(s) => Some(opts.layout.tier(&s)?),
            };
            let mut cat = text(category.as_ref(), i)
                .filter(|s| !s.is_empty())
                .map(|s| s.to_lowercase());
            opts.rules.fill(Draft {
                title: &t,
                country,
                region: region.as_deref(),
                currency: &mut cur,
                tier: &mut tr,
                category: &mut cat,
            });
            let cur = cur.ok_or(RowError::new(
                "currency",
                "missing_currency",
                "empty; add a currency or a title rule".to_string(),
            ))?;
            if !is_currency(&cur) && !countries::FORMER.contains(&cur.to_ascii_uppercase().as_str())
            {
                return Err(RowError::new(
                    "currency",
                    "bad_currency",
                    format!("'{cur}' is not an ISO 4217 code or a known ISO 3166 country code"),
                ));
            }
            let tr = tr.ok_or(RowError::new(
                "tier",
                "missing_value",
                "empty; give high, medium or low (or a title rule)".to_string(),
            ))?;
            Ok(Release {
                id: text(id.as_ref(), i)
                    .filter(|s| !s.is_empty())
                    .unwrap_or_else(|| format!("{file}:{}", i + 1)),
                at,
                end,
                all_day: is_all_day,
                title: t,
                currency: cur.to_ascii_uppercase(),
                tier: tr,
                category: cat,
                region,
            })
        })();
        match row {
            Ok(r) => out.push(r),
            Err(mut e) => {
                // Named as the file names it (a mapped column's own heading).
                if let Some(own) = opts.columns.get(e.field.as_ref()) {
                    e.field = own.clone().into();
                }
                summary.reject(e.at(&file, i + 1))
            }
        }
    }
    Ok(())
}

type RowErr = RowError;

fn resolve_time(
    released: &Option<ColumnSource>,
    date: &Option<ColumnSource>,
    time: &Option<ColumnSource>,
    i: usize,
    all_day: bool,
    opts: &CalendarOptions,
) -> Result<(i64, i64, bool), RowErr> {
    let zone_err = |field: &'static str| {
        move |e: crate::import::zones::ZoneError| {
            RowError::new(field, zone_reason(&e), e.to_string())
        }
    };
    let day_bounds = |d: chrono::NaiveDate| local_day(d, opts).map_err(zone_err("date"));
    if let Some(rc) = released {
        match rc.get(i) {
            Cell::Instant(ms) if crate::import::zones::in_accepted_years(ms) => {
                return Ok((ms, ms, false));
            }
            Cell::Instant(_) | Cell::Local(_) => {
                let wall = match rc.get(i) {
                    Cell::Local(w) if crate::import::zones::in_accepted_years(w) => w,
                    _ => {
                        return Err(RowError::new(
                            "released_at",
                            "bad_time",
                            format!("a timestamp {}", crate::import::zones::YEARS_MESSAGE),
                        ));
                    }
                };
                let ndt = crate::import::zones::ms_to_naive(wall);
                if all_day {
                    return day_bounds(ndt.date());
                }
                let ms = Stamp::Local(ndt)
                    .resolve(&opts.zone, opts.policy)
                    .map_err(zone_err("released_at"))?;
                return Ok((ms, ms, false));
            }
            Cell::Date(days) => {
                return day_bounds(
                    chrono::DateTime::UNIX_EPOCH.date_naive()
                        + chrono::TimeDelta::days(days as i64),
                );
            }
            Cell::Str(s) if opts.layout.is_untimed(s) && date.is_some() => {
                return resolve_time(&None, date, &None, i, true, opts);
            }
            Cell::Str(s) if opts.layout.is_untimed(s) => {
                return Err(RowError::new(
                    "released_at",
                    "missing_value",
                    format!(
                        "'{}' (an --untimed word) gives no date; add a date column",
                        s.trim()
                    ),
                ));
            }
            Cell::Str(s) if opts.layout.time_format.is_some() => {
                let pattern = opts.layout.time_format.as_deref().unwrap_or_default();
                return by_pattern(s.trim(), pattern, all_day, opts)
                    .map_err(|(r, m)| RowError::new("released_at", r, m));
            }
            Cell::Str(s) => {
                let s = s.trim();
                if s.len() == 10
                    && let Some((d, 10)) = scan_date(s.as_bytes())
                {
                    return day_bounds(d);
                }
                let stamp = parse_stamp(s, &TimeFormat::Auto)
                    .map_err(|e| RowError::new("released_at", "bad_time", e.to_string()))?;
                if all_day {
                    let d = match stamp {
                        Stamp::Local(l) => l.date(),
                        Stamp::Instant(ms) => opts.zone.local_date(ms),
                    };
                    return day_bounds(d);
                }
                let ms = stamp
                    .resolve(&opts.zone, opts.policy)
                    .map_err(zone_err("released_at"))?;
                return Ok((ms, ms, false));
            }
            Cell::Num(_) => {
                return Err(RowError::new(
                    "released_at",
                    "bad_time",
                    "a number where a time was expected".into(),
                ));
            }
            Cell::Null if date.is_none() => {
                return Err(RowError::new(
                    "released_at",
                    "missing_value",
                    "empty".into(),
                ));
            }
            Cell::Null => {}
        }
    }
    let dc = date.as_ref().ok_or(RowError::new(
        "released_at",
        "missing_value",
        "empty".to_string(),
    ))?;
    if let Some(pattern) = opts.layout.time_format.as_deref() {
        let day_text = match dc.get(i) {
            Cell::Str(s) => s.trim(),
            Cell::Null => return Err(RowError::new("date", "missing_value", "empty".into())),
            _ => {
                return Err(RowError::new(
                    "date",
                    "bad_time",
                    "not text that --calendar-time-format can read".into(),
                ));
            }
        };
        let time_text = match time.as_ref().map(|c| c.get(i)) {
            Some(Cell::Str(t)) if !opts.layout.is_untimed(t) => Some(t.trim()),
            _ => None,
        };
        let joined = match time_text {
            Some(t) => format!("{day_text} {t}"),
            None => day_text.to_string(),
        };
        return by_pattern(&joined, pattern, all_day || time_text.is_none(), opts).map_err(
            |(r, m)| RowError::new(if time_text.is_some() { "time" } else { "date" }, r, m),
        );
    }
    let d = match dc.get(i) {
        Cell::Str(s) => match scan_date(s.trim().as_bytes()) {
            Some((d, n)) if n == s.trim().len() => d,
            _ => {
                return Err(RowError::new(
                    "date",
                    "bad_time",
                    format!("'{s}' is not a date YYYY-MM-DD"),
                ));
            }
        },
        Cell::Instant(ms) if crate::import::zones::in_accepted_years(ms) => {
            opts.zone.local_date(ms)
        }
        Cell::Local(w) if crate::import::zones::in_accepted_years(w) => {
            crate::import::zones::ms_to_naive(w).date()
        }
        Cell::Date(days) => {
            chrono::DateTime::UNIX_EPOCH.date_naive() + chrono::TimeDelta::days(days as i64)
        }
        Cell::Null => return Err(RowError::new("date", "missing_value", "empty".into())),
        _ => return Err(RowError::new("date", "bad_time", "not a date".into())),
    };
    let t = match time.as_ref().map(|c| c.get(i)) {
        None | Some(Cell::Null) => None,
        Some(Cell::Str(s)) => {
            let s = s.trim();
            match s {
                "" => None,
                _ if opts.layout.is_untimed(s) => None,
                _ => {
                    let (tm, used) = scan_time(s.as_bytes()).ok_or(RowError::new(
                        "time",
                        "bad_time",
                        format!("'{s}' is not a time HH:MM[:SS]"),
                    ))?;
                    let rest = s[used..].trim();
                    if rest.is_empty() {
                        Some(Stamp::Local(d.and_time(tm)))
                    } else if rest == "Z" {
                        Some(Stamp::Instant(naive_to_ms(&d.and_time(tm))))
                    } else {
                        let off = crate::import::zones::parse_offset(rest).ok_or(RowError::new(
                            "time",
                            "bad_time",
                            format!("'{s}' has an unreadable offset"),
                        ))?;
                        Some(Stamp::Instant(
                            naive_to_ms(&d.and_time(tm)) - off as i64 * 1000,
                        ))
                    }
                }
            }
        }
        Some(_) => {
            return Err(RowError::new(
                "time",
                "bad_time",
                "not a time HH:MM[:SS]".into(),
            ));
        }
    };
    match t {
        None => day_bounds(d),
        Some(_) if all_day => day_bounds(d),
        Some(stamp) => {
            let ms = stamp
                .resolve(&opts.zone, opts.policy)
                .map_err(zone_err("time"))?;
            Ok((ms, ms, false))
        }
    }
}

/// A release time by the file's own strftime pattern: with an offset an
/// instant, else local to `--calendar-tz`; a date alone (read by the
/// pattern's part before its first space) or `all_day` gives the local day.
fn by_pattern(
    text: &str,
    pattern: &str,
    all_day: bool,
    opts: &CalendarOptions,
) -> Result<(i64, i64, bool), (&'static str, String)> {
    let day_bounds =
        |d: chrono::NaiveDate| local_day(d, opts).map_err(|e| (zone_reason(&e), e.to_string()));
    let date_part = pattern.split_once(' ').map_or(pattern, |(d, _)| d);
    let stamp = if let Ok(dt) = chrono::DateTime::parse_from_str(text, pattern) {
        Stamp::Instant(dt.timestamp_millis())
    } else if let Ok(ndt) = chrono::NaiveDateTime::parse_from_str(text, pattern) {
        Stamp::Local(ndt)
    } else if let Ok(d) = chrono::NaiveDate::parse_from_str(text, date_part) {
        return day_bounds(d);
    } else {
        return Err((
            "bad_time",
            format!("'{text}' does not match --calendar-time-format '{pattern}'"),
        ));
    };
    if all_day {
        let d = match stamp {
            Stamp::Local(l) => l.date(),
            Stamp::Instant(ms) => opts.zone.local_date(ms),
        };
        return day_bounds(d);
    }
    let ms = stamp
        .resolve(&opts.zone, opts.policy)
        .map_err(|e| (zone_reason(&e), e.to_string()))?;
    Ok((ms, ms, false))
}

/// An all-day release's local day in the calendar zone: (start, end, true),
/// DST edges by RFC 5545 §3.3.5.
fn local_day(
    d: chrono::NaiveDate,
    opts: &CalendarOptions,
) -> Result<(i64, i64, bool), crate::import::zones::ZoneError> {
    let p = LocalPolicy::Rfc5545;
    let a = opts.zone.to_utc(&d.and_time(NaiveTime::MIN), p)?;
    let b = opts
        .zone
        .to_utc(&(d + chrono::Days::new(1)).and_time(NaiveTime::MIN), p)?;
    Ok((a, b, true))
}

/// The rejection reason of a zone error.
fn zone_reason(e: &crate::import::zones::ZoneError) -> &'static str {
    match e {
        crate::import::zones::ZoneError::Gap { .. } => "local_time_gap",
        crate::import::zones::ZoneError::Ambiguous { .. } => "local_time_ambiguous",
        _ => "bad_time",
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use chrono::NaiveDateTime;

    fn utc(s: &str) -> i64 {
        naive_to_ms(&NaiveDateTime::parse_from_str(s, "%Y-%m-%d %H:%M").unwrap())
    }

    fn load(content: &str, opts: &CalendarOptions) -> (Vec<Release>, CalendarSummary) {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("c.csv");
        std::fs::write(&p, content).unwrap();
        let mut out = Vec::new();
        let mut s = CalendarSummary::default();
        read(&p, opts, &mut out, &mut s).unwrap();
        (out, s)
    }

    /// BLS CPI for September 2025 was published 2025-10-24 at 08:30 Eastern
    /// (bls.gov/bls/092025-cpi-reschedule-notice.htm, REFERENCES.md §3.2):
    /// 12:30Z under EDT. ONS market-sensitive releases are at 07:00 UK time
    /// (REFERENCES.md §3.3): 06:00Z in BST.
    #[test]
    fn date_and_time_columns_in_calendar_zone() {
        let csv = "date,time,title,currency,tier,category\n2025-10-24,08:30,Consumer prices,USD,high,inflation\n2025-10-24,,Holiday,USD,low,\n";
        let opts = CalendarOptions {
            zone: "America/New_York".parse().unwrap(),
            ..Default::default()
        };
        let (rs, s) = load(csv, &opts);
        assert_eq!(s.log.rows_rejected, 0);
        assert_eq!(rs[0].at, utc("2025-10-24 12:30"));
        assert_eq!(rs[0].category.as_deref(), Some("inflation"));
        assert!(
            rs[1].all_day
                && rs[1].at == utc("2025-10-24 04:00")
                && rs[1].end == utc("2025-10-25 04:00")
        );
        let csv = "released_at,title,currency,tier\n2025-06-18 07:00,UK consumer prices,GBP,high\n2025-06-18T07:00:00+01:00,Same with offset,GBP,high\n";
        let opts = CalendarOptions {
            zone: "Europe/London".parse().unwrap(),
            ..Default::default()
        };
        let (rs, _) = load(csv, &opts);
        assert_eq!(rs[0].at, utc("2025-06-18 06:00"));
        assert_eq!(rs[1].at, utc("2025-06-18 06:00"));
    }

    #[test]
    fn rejections_name_field_and_reason() {
        let csv = "released_at,title,currency,tier\n2024-01-05 08:30,A,USD,urgent\n2024-01-05 08:30,B,XYZ,high\n,C,USD,high\n2024-03-10 02:30,D,USD,high\n";
        let opts = CalendarOptions {
            zone: "America/New_York".parse().unwrap(),
            ..Default::default()
        };
        let (rs, s) = load(csv, &opts);
        assert!(rs.is_empty());
        assert_eq!(s.log.rows_rejected, 4);
        let reasons: Vec<_> = s
            .log
            .rejections
            .iter()
            .map(|r| (r.row, r.field.as_str(), r.reason))
            .collect();
        assert_eq!(
            reasons,
            vec![
                (1, "tier", "bad_tier"),
                (2, "currency", "bad_currency"),
                (3, "released_at", "missing_value"),
                (4, "released_at", "local_time_gap")
            ]
        );
    }
}
