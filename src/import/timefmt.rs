//! Reading time stamps from text (docs/method.md §1): ISO 8601 with or without `T` and
//! offset, `YYYY.MM.DD HH:MM[:SS]`, `YYYY-MM-DD HH:MM[:SS][.fff]`, epoch
//! seconds or milliseconds (only when asked), or a user strftime format.
//!
//! The common forms are read by a hand-written byte scanner rather than
//! chrono's format parser: it runs once per input row on files of millions of
//! rows, and it must accept several shapes without trying each in turn.
//! A stamp with `Z` or an offset is an instant; one without is local time
//! that the caller resolves in the input zone.

use crate::import::zones::{LocalPolicy, Zone, ZoneError, naive_to_ms};
use chrono::{NaiveDate, NaiveDateTime, NaiveTime};

/// How time columns are written.
#[derive(Debug, Clone, PartialEq)]
pub enum TimeFormat {
    /// ISO 8601 and the dotted/dashed forms of docs/method.md §1 (default).
    Auto,
    /// Integer or decimal seconds since 1970-01-01 UTC.
    EpochSeconds,
    /// Integer milliseconds since 1970-01-01 UTC.
    EpochMillis,
    /// A chrono strftime pattern, e.g. `%d/%m/%Y %H:%M`.
    Pattern(String),
}

impl TimeFormat {
    /// `auto`, `epoch-s`, `epoch-ms`, or a strftime pattern containing `%`.
    pub fn parse(spec: &str) -> Result<Self, crate::import::setting::BadSetting> {
        match spec {
            "auto" | "iso" => Ok(TimeFormat::Auto),
            "epoch-s" | "epoch_s" | "unix" => Ok(TimeFormat::EpochSeconds),
            "epoch-ms" | "epoch_ms" => Ok(TimeFormat::EpochMillis),
            p if p.contains('%') => Ok(TimeFormat::Pattern(p.to_string())),
            other => Err(format!(
                "unknown time format '{other}': use auto, epoch-s, epoch-ms or a strftime pattern such as '%d/%m/%Y %H:%M'"
            )
            .into()),
        }
    }
}

/// A stamp as written: with its own offset (an instant) or without (local).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Stamp {
    /// With its own offset or Z: ms since epoch UTC.
    Instant(i64),
    /// Without an offset: a local wall-clock time.
    Local(NaiveDateTime),
}

impl Stamp {
    /// The UTC instant, resolving local time in `zone` under `policy`.
    pub fn resolve(self, zone: &Zone, policy: LocalPolicy) -> Result<i64, ZoneError> {
        match self {
            Stamp::Instant(ms) => Ok(ms),
            Stamp::Local(ndt) => zone.to_utc(&ndt, policy),
        }
    }
}

/// Why a stamp could not be read; the caller adds file, row and column.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("'{text}' is not a time: {expected}")]
pub struct TimeError {
    /// The text as written.
    pub text: String,
    /// The forms that were expected.
    pub expected: &'static str,
}

const EXPECT_AUTO: &str = "expected YYYY-MM-DD HH:MM[:SS][.fff], YYYY.MM.DD HH:MM[:SS] or ISO 8601 with T/Z/offset (for slash dates give --time-format)";

fn err(text: &str, expected: &'static str) -> TimeError {
    TimeError {
        text: text.chars().take(60).collect(),
        expected,
    }
}

/// `s.trim()`, without the Unicode scan when both ends are plain ASCII
/// text (the common case on hot paths).
pub fn trim_fast(s: &str) -> &str {
    match (s.as_bytes().first(), s.as_bytes().last()) {
        (Some(&a), Some(&b)) if a.is_ascii_graphic() && b.is_ascii_graphic() => s,
        _ => s.trim(),
    }
}

/// Epoch seconds as ms, when finite and within the accepted years.
pub fn epoch_seconds_to_ms(v: f64) -> Option<i64> {
    let ms = (v * 1000.0).round();
    (ms.is_finite()
        && ms >= crate::import::zones::EARLIEST_MS as f64
        && ms <= crate::import::zones::LATEST_MS as f64)
        .then_some(ms as i64)
}

/// Reads one stamp.
pub fn parse_stamp(text: &str, fmt: &TimeFormat) -> Result<Stamp, TimeError> {
    let t = trim_fast(text);
    match fmt {
        TimeFormat::Auto => scan_auto(t).ok_or_else(|| err(t, EXPECT_AUTO)),
        TimeFormat::EpochSeconds => {
            let v: f64 = t.parse().map_err(|_| err(t, "expected epoch seconds"))?;
            epoch_seconds_to_ms(v)
                .map(Stamp::Instant)
                .ok_or_else(|| err(t, crate::import::zones::YEARS_MESSAGE))
        }
        TimeFormat::EpochMillis => {
            let v: i64 = t
                .parse()
                .map_err(|_| err(t, "expected integer epoch milliseconds"))?;
            if !crate::import::zones::in_accepted_years(v) {
                return Err(err(t, crate::import::zones::YEARS_MESSAGE));
            }
            Ok(Stamp::Instant(v))
        }
        TimeFormat::Pattern(p) => {
            if let Ok(dt) = chrono::DateTime::parse_from_str(t, p) {
                return Ok(Stamp::Instant(dt.timestamp_millis()));
            }
            NaiveDateTime::parse_from_str(t, p)
                .map(Stamp::Local)
                .map_err(|_| err(t, "does not match the --time-format pattern"))
        }
    }
}

fn digits(b: &[u8], at: usize, n: usize) -> Option<u32> {
    let s = b.get(at..at + n)?;
    let mut v = 0u32;
    for &c in s {
        if !c.is_ascii_digit() {
            return None;
        }
        v = v * 10 + (c - b'0') as u32;
    }
    Some(v)
}

/// Reads `YYYY-MM-DD`, `YYYY.MM.DD` or `YYYYMMDD` at the start; returns the
/// date and the bytes used.
pub fn scan_date(b: &[u8]) -> Option<(NaiveDate, usize)> {
    let y = digits(b, 0, 4)? as i32;
    let (m, d, used) = match b.get(4) {
        Some(&sep @ (b'-' | b'.')) => {
            if b.get(7) != Some(&sep) {
                return None;
            }
            (digits(b, 5, 2)?, digits(b, 8, 2)?, 10)
        }
        Some(c) if c.is_ascii_digit() => (digits(b, 4, 2)?, digits(b, 6, 2)?, 8),
        _ => return None,
    };
    Some((NaiveDate::from_ymd_opt(y, m, d)?, used))
}

/// Reads `HH:MM[:SS][.fff]` or `HHMM[SS]`; a second of 60 is read as 59
/// (RFC 5545 §3.3.5 for readers without leap seconds).
pub fn scan_time(b: &[u8]) -> Option<(NaiveTime, usize)> {
    let h = digits(b, 0, 2)?;
    let colon = b.get(2) == Some(&b':');
    let (m, mut i) = if colon {
        (digits(b, 3, 2)?, 5)
    } else {
        (digits(b, 2, 2)?, 4)
    };
    let mut s = 0;
    if colon && b.get(i) == Some(&b':') {
        s = digits(b, i + 1, 2)?;
        i += 3;
    } else if !colon && digits(b, i, 2).is_some() {
        s = digits(b, i, 2)?;
        i += 2;
    }
    let mut ms = 0u32;
    if matches!(b.get(i), Some(b'.') | Some(b','))
        && b.get(i + 1).is_some_and(|c| c.is_ascii_digit())
    {
        i += 1;
        let mut scale = 100;
        while let Some(c) = b.get(i).filter(|c| c.is_ascii_digit()) {
            ms += (c - b'0') as u32 * scale;
            scale /= 10;
            i += 1;
        }
    }
    let s = s.min(59);
    Some((NaiveTime::from_hms_milli_opt(h, m, s, ms)?, i))
}

/// Days from 1970-01-01 to a proleptic Gregorian date (H. Hinnant,
/// "chrono-Compatible Low-Level Date Algorithms", days_from_civil).
fn days_from_civil(y: i64, m: u32, d: u32) -> i64 {
    let y = if m <= 2 { y - 1 } else { y };
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let mp = (m as i64 + 9) % 12;
    let doy = (153 * mp + 2) / 5 + d as i64 - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146_097 + doe - 719_468
}

/// `YYYY-MM-DDTHH:MM:SSZ` exactly (the form most exports write), read
/// without building calendar types (seconds above 59 read as 59, as the
/// general reader does); anything else, or an impossible date
/// or time, is left to the general reader (which names the fault).
fn scan_utc_seconds(b: &[u8]) -> Option<i64> {
    if b.len() != 20
        || b[4] != b'-'
        || b[7] != b'-'
        || !matches!(b[10], b'T' | b't' | b' ')
        || b[13] != b':'
        || b[16] != b':'
        || !matches!(b[19], b'Z' | b'z')
    {
        return None;
    }
    let (y, mo, d) = (digits(b, 0, 4)?, digits(b, 5, 2)?, digits(b, 8, 2)?);
    let (h, mi, sec) = (digits(b, 11, 2)?, digits(b, 14, 2)?, digits(b, 17, 2)?);
    let leap = y % 4 == 0 && (y % 100 != 0 || y % 400 == 0);
    let month_days = [
        31,
        if leap { 29 } else { 28 },
        31,
        30,
        31,
        30,
        31,
        31,
        30,
        31,
        30,
        31,
    ];
    if !(1..=12).contains(&mo) || d == 0 || d > month_days[mo as usize - 1] || h > 23 || mi > 59 {
        return None;
    }
    let secs =
        days_from_civil(y as i64, mo, d) * 86_400 + (h * 3600 + mi * 60 + sec.min(59)) as i64;
    Some(secs * 1000)
}

fn scan_auto(t: &str) -> Option<Stamp> {
    let b = t.as_bytes();
    if let Some(ms) = scan_utc_seconds(b) {
        return Some(Stamp::Instant(ms));
    }
    let (date, mut i) = scan_date(b)?;
    if i == b.len() {
        return Some(Stamp::Local(date.and_time(NaiveTime::MIN)));
    }
    match b[i] {
        b'T' | b't' | b' ' => i += 1,
        _ => return None,
    }
    while b.get(i) == Some(&b' ') {
        i += 1;
    }
    let (time, used) = scan_time(&b[i..])?;
    i += used;
    let local = date.and_time(time);
    let rest = t[i..].trim_start();
    if rest.is_empty() {
        return Some(Stamp::Local(local));
    }
    if rest == "Z" || rest == "z" || rest.eq_ignore_ascii_case("utc") {
        return Some(Stamp::Instant(naive_to_ms(&local)));
    }
    let off = crate::import::zones::parse_offset(rest)?;
    if off.abs() > 18 * 3600 {
        return None;
    }
    Some(Stamp::Instant(naive_to_ms(&local) - off as i64 * 1000))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fast_utc_form_equals_the_general_reader() {
        // Every day of years around leap rules (1900, 2000, 2024, 2100) plus
        // impossible dates and times: the short path answers exactly as the
        // general one, or steps aside.
        let mut texts = Vec::new();
        for y in [1600, 1899, 1900, 1970, 1999, 2000, 2023, 2024, 2100, 9999] {
            for m in 0..=13 {
                for d in 0..=32 {
                    texts.push(format!("{y:04}-{m:02}-{d:02}T23:59:59Z"));
                }
            }
        }
        for hms in [
            "00:00:00", "24:00:00", "12:60:00", "12:00:60", "12:00:61", "1a:00:00",
        ] {
            texts.push(format!("2024-02-29t{hms}z"));
            texts.push(format!("2024-02-29 {hms}Z"));
        }
        let mut fast = 0;
        for t in &texts {
            let b = t.as_bytes();
            let general = {
                let (date, i) = scan_date(b).map(|(d, i)| (Some(d), i)).unwrap_or((None, 0));
                date.and_then(|date| {
                    scan_time(&b[i + 1..]).map(|(tm, _)| naive_to_ms(&date.and_time(tm)))
                })
            };
            let short = scan_utc_seconds(b);
            if short.is_some() {
                fast += 1;
            }
            assert!(
                short.is_none() || short == general,
                "{t}: {short:?} vs {general:?}"
            );
            assert_eq!(short.is_some(), general.is_some(), "{t}");
        }
        assert!(fast > 3000, "{fast}");
    }

    fn at(s: &str) -> i64 {
        naive_to_ms(&NaiveDateTime::parse_from_str(s, "%Y-%m-%d %H:%M:%S%.f").unwrap())
    }
    fn local(s: &str) -> Stamp {
        Stamp::Local(NaiveDateTime::parse_from_str(s, "%Y-%m-%d %H:%M:%S%.f").unwrap())
    }

    #[test]
    fn reads_the_spec_forms() {
        let a = TimeFormat::Auto;
        assert_eq!(
            parse_stamp("2024-03-08 13:30", &a).unwrap(),
            local("2024-03-08 13:30:00.0")
        );
        assert_eq!(
            parse_stamp("2024.03.08 13:30:15", &a).unwrap(),
            local("2024-03-08 13:30:15.0")
        );
        assert_eq!(
            parse_stamp("2024-03-08 13:30:15.250", &a).unwrap(),
            local("2024-03-08 13:30:15.25")
        );
        assert_eq!(
            parse_stamp("2024-03-08T13:30:00Z", &a).unwrap(),
            Stamp::Instant(at("2024-03-08 13:30:00.0"))
        );
        assert_eq!(
            parse_stamp("2024-03-08T08:30:00-05:00", &a).unwrap(),
            Stamp::Instant(at("2024-03-08 13:30:00.0"))
        );
        assert_eq!(
            parse_stamp("2024-03-08T14:30+0100", &a).unwrap(),
            Stamp::Instant(at("2024-03-08 13:30:00.0"))
        );
        assert_eq!(
            parse_stamp("20240308T133000Z", &a).unwrap(),
            Stamp::Instant(at("2024-03-08 13:30:00.0"))
        );
        assert_eq!(
            parse_stamp("2024-03-08", &a).unwrap(),
            local("2024-03-08 00:00:00.0")
        );
    }

    #[test]
    fn rejects_what_is_not_a_time() {
        let a = TimeFormat::Auto;
        for bad in [
            "",
            "08/03/2024 13:30",
            "2024-13-01 00:00",
            "2024-02-30 10:00",
            "2024-03-08 25:00",
            "yesterday",
            "2024-03-08X13:30",
            "2024-03-08 13:30 +25:00",
        ] {
            assert!(parse_stamp(bad, &a).is_err(), "{bad} should fail");
        }
        let e = parse_stamp("08/03/2024 13:30", &a).unwrap_err();
        assert!(e.to_string().contains("--time-format"));
    }

    #[test]
    fn epochs_and_patterns() {
        assert_eq!(
            parse_stamp("1709904600", &TimeFormat::EpochSeconds).unwrap(),
            Stamp::Instant(at("2024-03-08 13:30:00.0"))
        );
        assert_eq!(
            parse_stamp("1709904600500", &TimeFormat::EpochMillis).unwrap(),
            Stamp::Instant(at("2024-03-08 13:30:00.5"))
        );
        assert!(parse_stamp("nan", &TimeFormat::EpochSeconds).is_err());
        let p = TimeFormat::parse("%d/%m/%Y %H:%M").unwrap();
        assert_eq!(
            parse_stamp("08/03/2024 13:30", &p).unwrap(),
            local("2024-03-08 13:30:00.0")
        );
    }

    /// RFC 5545 §3.3.5: "Implementations that do not support leap seconds
    /// SHOULD interpret the second 60 as equivalent to the second 59."
    #[test]
    fn leap_second_reads_as_59() {
        assert_eq!(
            parse_stamp("19970630T235960Z", &TimeFormat::Auto).unwrap(),
            Stamp::Instant(at("1997-06-30 23:59:59.0"))
        );
    }
}
