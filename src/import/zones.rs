//! Time zones: parsing zone specs and turning local wall-clock times into UTC
//! instants and back (docs/method.md §1).
//!
//! A zone spec is `UTC`, an IANA name (`Europe/Berlin`), a fixed offset
//! (`+02:00`, `UTC-05:00`) or a *shifted* zone `IANA±HH:MM`: that zone's wall
//! clock moved by the offset (`America/New_York+07:00` reads 00:00 when New
//! York reads 17:00, all year). Instants are `i64` milliseconds since the Unix
//! epoch, UTC, everywhere in the crate.
//!
//! Invariant: a local time in a spring-forward gap or a fall-back overlap is
//! never resolved silently; the caller's [`LocalPolicy`] decides.

use chrono::{DateTime, FixedOffset, NaiveDate, NaiveDateTime, Offset, TimeZone, Utc};
use chrono_tz::Tz;
use std::fmt;
use std::str::FromStr;

/// Milliseconds in one minute and one day.
pub const MINUTE_MS: i64 = 60_000;
/// Milliseconds in a day.
pub const DAY_MS: i64 = 86_400_000;

/// Errors from parsing a zone spec or converting a local time.
#[derive(Debug, thiserror::Error, PartialEq)]
#[allow(missing_docs)] // variant fields are named in each message
pub enum ZoneError {
    #[error(
        "unknown time zone '{0}': use UTC, an IANA name such as Europe/Berlin, an offset such as +02:00 or UTC-05:00, or a shifted zone such as America/New_York+07:00"
    )]
    /// Not a zone spec the tool knows.
    Unknown(String),
    /// An offset beyond ±18:00.
    #[error("offset '{0}' is out of range (at most ±18:00)")]
    OffsetRange(String),
    #[error(
        "local time {local} does not exist in {zone} (clocks jump forward); choose --local-policy earlier or later"
    )]
    /// A local time that does not exist (clocks jump forward).
    Gap { local: NaiveDateTime, zone: String },
    #[error(
        "local time {local} happens twice in {zone} (clocks fall back); choose --local-policy earlier or later"
    )]
    /// A local time that happens twice (clocks fall back).
    Ambiguous { local: NaiveDateTime, zone: String },
}

/// What to do with a local time that falls in a DST gap or overlap.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum LocalPolicy {
    /// Refuse: the row is rejected naming the time.
    #[default]
    Error,
    /// Take the earlier of the two candidate instants.
    Earlier,
    /// Take the later of the two candidate instants.
    Later,
    /// RFC 5545 §3.3.5: overlap → first occurrence; gap → the offset in
    /// force before the gap (used for iCalendar input).
    Rfc5545,
}

/// A parsed zone spec.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Zone {
    /// Coordinated Universal Time.
    Utc,
    /// A fixed offset from UTC.
    Fixed(FixedOffset),
    /// An IANA time zone, DST included.
    Iana(Tz),
    /// An IANA zone's wall clock moved by a fixed number of seconds.
    Shifted(Tz, i32),
}

impl fmt::Display for Zone {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Zone::Utc => write!(f, "UTC"),
            Zone::Fixed(o) => write!(f, "{}", format_offset(o.local_minus_utc())),
            Zone::Iana(tz) => write!(f, "{}", tz.name()),
            Zone::Shifted(tz, s) => write!(f, "{}{}", tz.name(), format_offset(*s)),
        }
    }
}

impl serde::Serialize for Zone {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(&self.to_string())
    }
}

/// `+HH:MM` / `-HH:MM` for an offset in seconds.
pub fn format_offset(secs: i32) -> String {
    let sign = if secs < 0 { '-' } else { '+' };
    let a = secs.unsigned_abs();
    format!("{sign}{:02}:{:02}", a / 3600, (a % 3600) / 60)
}

/// Parses `±HH:MM`, `±HHMM` or `±HH` into seconds east of UTC.
pub fn parse_offset(s: &str) -> Option<i32> {
    let b = s.as_bytes();
    let sign = match b.first()? {
        b'+' => 1,
        b'-' => -1,
        _ => return None,
    };
    let rest = &s[1..];
    // Byte slicing below needs ASCII (found by fuzzing: "-\u{7f}〲" split
    // inside a character and panicked).
    if !rest.is_ascii() {
        return None;
    }
    let (h, m) = match rest.len() {
        2 => (rest, "00"),
        4 => (&rest[..2], &rest[2..]),
        5 if rest.as_bytes()[2] == b':' => (&rest[..2], &rest[3..]),
        _ => return None,
    };
    if !h.bytes().chain(m.bytes()).all(|c| c.is_ascii_digit()) {
        return None;
    }
    let (h, m): (i32, i32) = (h.parse().ok()?, m.parse().ok()?);
    if m >= 60 {
        return None;
    }
    Some(sign * (h * 3600 + m * 60))
}

impl FromStr for Zone {
    type Err = ZoneError;
    fn from_str(spec: &str) -> Result<Self, ZoneError> {
        let s = spec.trim();
        if s.eq_ignore_ascii_case("utc") || s == "Z" || s.eq_ignore_ascii_case("gmt") {
            return Ok(Zone::Utc);
        }
        let fixed = |text: &str| -> Result<Zone, ZoneError> {
            let secs = parse_offset(text).ok_or_else(|| ZoneError::Unknown(spec.to_string()))?;
            if secs.abs() > 18 * 3600 {
                return Err(ZoneError::OffsetRange(spec.to_string()));
            }
            Ok(Zone::Fixed(
                FixedOffset::east_opt(secs).expect("checked range"),
            ))
        };
        if s.starts_with('+') || s.starts_with('-') {
            return fixed(s);
        }
        for prefix in ["UTC", "GMT", "utc", "gmt"] {
            if let Some(rest) = s.strip_prefix(prefix)
                && (rest.starts_with('+') || rest.starts_with('-'))
            {
                return fixed(rest);
            }
        }
        if let Ok(tz) = s.parse::<Tz>() {
            return Ok(Zone::Iana(tz));
        }
        // Shifted zone: the last '+' or '-' that starts a valid offset.
        if let Some(pos) = s.rfind(['+', '-']) {
            let (name, off) = s.split_at(pos);
            if let (Ok(tz), Some(secs)) = (name.parse::<Tz>(), parse_offset(off)) {
                if secs.abs() > 18 * 3600 {
                    return Err(ZoneError::OffsetRange(spec.to_string()));
                }
                return Ok(Zone::Shifted(tz, secs));
            }
        }
        Err(ZoneError::Unknown(spec.to_string()))
    }
}

/// Milliseconds since the epoch for a naive date-time read as UTC.
pub fn naive_to_ms(ndt: &NaiveDateTime) -> i64 {
    ndt.and_utc().timestamp_millis()
}

/// First instant accepted from any input: 1000-01-01T00:00:00Z (ms).
pub const EARLIEST_MS: i64 = -30_610_224_000_000;
/// Last instant accepted from any input: 9999-12-31T23:59:59.999Z (ms).
pub const LATEST_MS: i64 = 253_402_300_799_999;

/// Whether an instant lies in the years every reader accepts (1000–9999,
/// four-digit years, well inside chrono's range), so that nothing later
/// formats or shifts a time chrono cannot hold.
pub fn in_accepted_years(ms: i64) -> bool {
    (EARLIEST_MS..=LATEST_MS).contains(&ms)
}

/// What a reader says of a time outside [`in_accepted_years`].
pub const YEARS_MESSAGE: &str = "outside the years 1000-9999 that eventfence reads";

/// The naive UTC date-time of an instant.
pub fn ms_to_naive(ms: i64) -> NaiveDateTime {
    DateTime::<Utc>::from_timestamp_millis(ms)
        .expect("instant within chrono's range")
        .naive_utc()
}

/// Resolves a local time in an IANA zone, returning both candidates when the
/// local time is in a gap (`Err(Gap)` carries none) or an overlap.
/// One local day's steady offset (ms), see [`Zone::to_utc_cached`].
#[derive(Debug, Clone, Copy)]
pub struct DayOffsetCache {
    day: i64,
    offset_ms: Option<i64>,
}

impl Default for DayOffsetCache {
    fn default() -> Self {
        DayOffsetCache {
            day: i64::MIN,
            offset_ms: None,
        }
    }
}

/// The offset a zone keeps through local day `day` (its first and last
/// millisecond each map to one instant with the same offset), or `None`
/// on a day with a transition. Assumes no zone makes two transitions in
/// one day that return to the same offset; the unit tests compare this
/// path with the exact one over many zones and two centuries.
fn steady_offset(tz: &Tz, day: i64) -> Option<i64> {
    let (a, b) = (day * DAY_MS, day * DAY_MS + DAY_MS - 1);
    match (
        iana_candidates(tz, &ms_to_naive(a)),
        iana_candidates(tz, &ms_to_naive(b)),
    ) {
        (Candidates::One(ua), Candidates::One(ub)) if a - ua == b - ub => Some(a - ua),
        _ => None,
    }
}

enum Candidates {
    One(i64),
    /// Fall-back overlap: (first occurrence, second occurrence).
    Two(i64, i64),
    /// Spring-forward gap: (instant using the offset after the gap, instant
    /// using the offset before the gap); the first is the earlier instant.
    Gap(i64, i64),
}

fn iana_candidates(tz: &Tz, local: &NaiveDateTime) -> Candidates {
    use chrono::LocalResult;
    match tz.from_local_datetime(local) {
        LocalResult::Single(dt) => Candidates::One(dt.timestamp_millis()),
        LocalResult::Ambiguous(a, b) => {
            let (x, y) = (a.timestamp_millis(), b.timestamp_millis());
            Candidates::Two(x.min(y), x.max(y))
        }
        LocalResult::None => {
            // Offsets a day either side of the gap; no zone changes twice in
            // a day, so these are the offsets before and after it.
            let base = naive_to_ms(local);
            let off_at = |ms: i64| {
                tz.offset_from_utc_datetime(&ms_to_naive(ms))
                    .fix()
                    .local_minus_utc() as i64
                    * 1000
            };
            let before = base - off_at(base - DAY_MS);
            let after = base - off_at(base + DAY_MS);
            Candidates::Gap(before.min(after), before.max(after))
        }
    }
}

impl Zone {
    /// Converts a local wall-clock time in this zone to a UTC instant (ms).
    pub fn to_utc(&self, local: &NaiveDateTime, policy: LocalPolicy) -> Result<i64, ZoneError> {
        let (tz, shift) = match self {
            Zone::Utc => return Ok(naive_to_ms(local)),
            Zone::Fixed(o) => return Ok(naive_to_ms(local) - o.local_minus_utc() as i64 * 1000),
            Zone::Iana(tz) => (tz, 0i64),
            Zone::Shifted(tz, s) => (tz, *s as i64 * 1000),
        };
        // A shifted clock reads the IANA wall clock plus the shift.
        let wall = if shift == 0 {
            *local
        } else {
            ms_to_naive(naive_to_ms(local) - shift)
        };
        match iana_candidates(tz, &wall) {
            Candidates::One(ms) => Ok(ms),
            Candidates::Two(first, second) => match policy {
                LocalPolicy::Error => Err(ZoneError::Ambiguous {
                    local: *local,
                    zone: self.to_string(),
                }),
                LocalPolicy::Earlier | LocalPolicy::Rfc5545 => Ok(first),
                LocalPolicy::Later => Ok(second),
            },
            Candidates::Gap(earlier, later) => match policy {
                LocalPolicy::Error => Err(ZoneError::Gap {
                    local: *local,
                    zone: self.to_string(),
                }),
                LocalPolicy::Earlier => Ok(earlier),
                LocalPolicy::Later | LocalPolicy::Rfc5545 => Ok(later),
            },
        }
    }

    /// [`Zone::to_utc`] for many stamps: a day on which the zone keeps one
    /// offset (every day but transition days) resolves by subtraction, the
    /// offset remembered in `cache`; transition days take the exact path.
    pub fn to_utc_cached(
        &self,
        local: &NaiveDateTime,
        policy: LocalPolicy,
        cache: &mut DayOffsetCache,
    ) -> Result<i64, ZoneError> {
        let (tz, shift) = match self {
            Zone::Utc | Zone::Fixed(_) => return self.to_utc(local, policy),
            Zone::Iana(tz) => (tz, 0i64),
            Zone::Shifted(tz, s) => (tz, *s as i64 * 1000),
        };
        let wall = naive_to_ms(local) - shift;
        let day = wall.div_euclid(DAY_MS);
        if cache.day != day {
            *cache = DayOffsetCache {
                day,
                offset_ms: steady_offset(tz, day),
            };
        }
        match cache.offset_ms {
            Some(off) => Ok(wall - off),
            None => self.to_utc(local, policy),
        }
    }

    /// The UTC offset (seconds east) this zone's clock shows at an instant.
    pub fn offset_at(&self, ms: i64) -> i32 {
        match self {
            Zone::Utc => 0,
            Zone::Fixed(o) => o.local_minus_utc(),
            Zone::Iana(tz) => tz
                .offset_from_utc_datetime(&ms_to_naive(ms))
                .fix()
                .local_minus_utc(),
            Zone::Shifted(tz, s) => {
                tz.offset_from_utc_datetime(&ms_to_naive(ms))
                    .fix()
                    .local_minus_utc()
                    + s
            }
        }
    }

    /// The local wall-clock time of an instant in this zone.
    pub fn to_local(&self, ms: i64) -> NaiveDateTime {
        ms_to_naive(ms + self.offset_at(ms) as i64 * 1000)
    }

    /// The local calendar date of an instant in this zone.
    pub fn local_date(&self, ms: i64) -> NaiveDate {
        self.to_local(ms).date()
    }

    /// RFC 3339 text of an instant in this zone, offset shown.
    pub fn format(&self, ms: i64) -> String {
        let off = self.offset_at(ms);
        format!(
            "{}{}",
            self.to_local(ms).format("%Y-%m-%dT%H:%M:%S"),
            format_offset(off)
        )
    }
}

/// Local day number (days since 1970-01-01 on this zone's clock) of an instant.
pub fn local_day(zone: &Zone, ms: i64) -> i64 {
    (ms + zone.offset_at(ms) as i64 * 1000).div_euclid(DAY_MS)
}

/// [`local_day`] for many instants that come mostly in time order (closes
/// of a curve): remembers the UTC span `[lo, hi)` of the last answer's local
/// day, over which the zone keeps one offset, so most instants cost two
/// comparisons instead of a zone lookup and three divisions.
#[derive(Debug, Clone)]
pub struct LocalDayCursor<'a> {
    zone: &'a Zone,
    lo: i64,
    hi: i64,
    day: i64,
}

impl<'a> LocalDayCursor<'a> {
    /// A cursor over `zone`'s local days.
    pub fn new(zone: &'a Zone) -> Self {
        LocalDayCursor {
            zone,
            lo: 0,
            hi: 0,
            day: 0,
        }
    }

    /// The local day (days since 1970-01-01) of instant `ms`.
    pub fn day(&mut self, ms: i64) -> i64 {
        if self.lo <= ms && ms < self.hi {
            return self.day;
        }
        let off = self.zone.offset_at(ms) as i64 * 1000;
        let day = (ms + off).div_euclid(DAY_MS);
        // The local day under this offset spans these instants; keep the
        // span only when the offset holds at both ends (no transition in it).
        let (lo, hi) = (day * DAY_MS - off, day * DAY_MS + DAY_MS - off);
        let steady = match self.zone {
            Zone::Utc | Zone::Fixed(_) => true,
            z => z.offset_at(lo) as i64 * 1000 == off && z.offset_at(hi - 1) as i64 * 1000 == off,
        };
        (self.lo, self.hi, self.day) = if steady {
            (lo, hi, day)
        } else {
            (ms, ms + 1, day)
        };
        day
    }
}

/// Whether a day number (days since 1970-01-01, a Thursday) is a Monday
/// to Friday.
pub fn is_weekday(day: i64) -> bool {
    (day - 4).rem_euclid(7) < 5
}

/// Weekday number of a day number: Mondays to Fridays counted from Monday
/// 1970-01-05 (day 4); a Saturday or Sunday counts as the following Monday.
pub fn weekday_index(day: i64) -> i64 {
    let d = day - 4;
    let (week, dow) = (d.div_euclid(7), d.rem_euclid(7));
    if !is_weekday(day) {
        (week + 1) * 5
    } else {
        week * 5 + dow
    }
}

/// Day number of a weekday number (inverse of [`weekday_index`] on weekdays).
pub fn day_of_weekday_index(w: i64) -> i64 {
    w.div_euclid(5) * 7 + w.rem_euclid(5) + 4
}

/// RFC 3339 UTC text (`2024-03-08T13:30:00Z`) of an instant. Written by
/// hand rather than with a strftime pattern: it runs twice per trade when
/// the annotated trade file is written.
pub fn format_utc(ms: i64) -> String {
    use chrono::{Datelike, Timelike};
    let n = ms_to_naive(ms);
    let (y, mo, d) = (n.year(), n.month(), n.day());
    let (h, mi, sec) = (n.hour(), n.minute(), n.second());
    let frac = ms.rem_euclid(1000);
    if frac == 0 {
        format!("{y:04}-{mo:02}-{d:02}T{h:02}:{mi:02}:{sec:02}Z")
    } else {
        format!("{y:04}-{mo:02}-{d:02}T{h:02}:{mi:02}:{sec:02}.{frac:03}Z")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn day_cursor_equals_local_day_across_transitions() {
        // Quarter-hour steps (1 ms before each) through 2024, past every DST
        // change of these zones, then a shuffled pass; Lord Howe moves by
        // 30 minutes.
        use rand::{SeedableRng, seq::SliceRandom};
        let start = naive_to_ms(&ndt("2024-01-01 00:00"));
        let mut t: Vec<i64> = (0..366 * 24 * 4)
            .map(|q| start + q * 15 * MINUTE_MS - 1)
            .collect();
        for spec in [
            "UTC",
            "+05:30",
            "Europe/Berlin",
            "America/New_York",
            "Australia/Lord_Howe",
            "America/New_York+07:00",
        ] {
            let z: Zone = spec.parse().unwrap();
            let mut cur = LocalDayCursor::new(&z);
            for &ms in &t {
                assert_eq!(
                    cur.day(ms),
                    local_day(&z, ms),
                    "{spec} at {}",
                    format_utc(ms)
                );
            }
        }
        t.shuffle(&mut rand_chacha::ChaCha8Rng::seed_from_u64(1));
        let z: Zone = "Europe/Berlin".parse().unwrap();
        let mut cur = LocalDayCursor::new(&z);
        assert!(t.iter().all(|&ms| cur.day(ms) == local_day(&z, ms)));
    }

    fn ndt(s: &str) -> NaiveDateTime {
        NaiveDateTime::parse_from_str(s, "%Y-%m-%d %H:%M").unwrap()
    }
    fn utc(s: &str) -> i64 {
        naive_to_ms(&ndt(s))
    }

    #[test]
    fn parses_every_spec_form() {
        assert_eq!("UTC".parse::<Zone>().unwrap(), Zone::Utc);
        assert_eq!(
            "+02:00".parse::<Zone>().unwrap(),
            Zone::Fixed(FixedOffset::east_opt(7200).unwrap())
        );
        assert_eq!(
            "UTC-05:00".parse::<Zone>().unwrap(),
            Zone::Fixed(FixedOffset::east_opt(-18000).unwrap())
        );
        assert_eq!(
            "Europe/Berlin".parse::<Zone>().unwrap(),
            Zone::Iana(chrono_tz::Europe::Berlin)
        );
        assert_eq!(
            "America/New_York+07:00".parse::<Zone>().unwrap(),
            Zone::Shifted(chrono_tz::America::New_York, 25200)
        );
        assert_eq!(
            "Etc/GMT-3".parse::<Zone>().unwrap(),
            Zone::Iana(chrono_tz::Etc::GMTMinus3)
        );
        assert!(matches!(
            "Mars/Olympus".parse::<Zone>(),
            Err(ZoneError::Unknown(_))
        ));
        assert!(matches!(
            "+19:00".parse::<Zone>(),
            Err(ZoneError::OffsetRange(_))
        ));
        assert_eq!(
            "America/New_York+07:00"
                .parse::<Zone>()
                .unwrap()
                .to_string(),
            "America/New_York+07:00"
        );
    }

    /// Source: ../shared/REFERENCES.md §2.2, tzdata `Rule US 2007 max` — the
    /// 2024 New York changes are 2024-03-10 07:00Z and 2024-11-03 06:00Z.
    #[test]
    fn shifted_server_clock_tracks_new_york_dst() {
        let z: Zone = "America/New_York+07:00".parse().unwrap();
        // 17:00 New York is 00:00 on the server, in winter and in summer.
        // 2024-01-10 17:00 EST = 22:00Z; server reads 2024-01-11 00:00.
        assert_eq!(
            z.to_utc(&ndt("2024-01-11 00:00"), LocalPolicy::Error)
                .unwrap(),
            utc("2024-01-10 22:00")
        );
        // 2024-07-10 17:00 EDT = 21:00Z.
        assert_eq!(
            z.to_utc(&ndt("2024-07-11 00:00"), LocalPolicy::Error)
                .unwrap(),
            utc("2024-07-10 21:00")
        );
        // The server's gap sits at 09:00 (02:00 NY + 7h) on 2024-03-10.
        assert!(matches!(
            z.to_utc(&ndt("2024-03-10 09:30"), LocalPolicy::Error),
            Err(ZoneError::Gap { .. })
        ));
        assert_eq!(z.offset_at(utc("2024-03-10 06:59")), 2 * 3600);
        assert_eq!(z.offset_at(utc("2024-03-10 07:00")), 3 * 3600);
        assert_eq!(
            z.format(utc("2024-11-03 05:59")),
            "2024-11-03T08:59:00+03:00"
        );
        assert_eq!(
            z.format(utc("2024-11-03 06:00")),
            "2024-11-03T08:00:00+02:00"
        );
    }

    /// Source: RFC 5545 §3.3.5 text, check values in ../shared/REFERENCES.md §1.4.
    #[test]
    fn rfc5545_rule_for_gap_and_overlap() {
        let ny = Zone::Iana(chrono_tz::America::New_York);
        let p = LocalPolicy::Rfc5545;
        assert_eq!(
            ny.to_utc(&ndt("2007-11-04 01:30"), p).unwrap(),
            utc("2007-11-04 05:30")
        );
        assert_eq!(
            ny.to_utc(&ndt("2007-03-11 02:30"), p).unwrap(),
            utc("2007-03-11 07:30")
        );
        assert_eq!(
            ny.to_utc(&ndt("2024-11-03 01:30"), p).unwrap(),
            utc("2024-11-03 05:30")
        );
        assert_eq!(
            ny.to_utc(&ndt("2024-03-10 02:30"), p).unwrap(),
            utc("2024-03-10 07:30")
        );
        let berlin = Zone::Iana(chrono_tz::Europe::Berlin);
        assert_eq!(
            berlin.to_utc(&ndt("2024-10-27 02:30"), p).unwrap(),
            utc("2024-10-27 00:30")
        );
        assert_eq!(
            berlin.to_utc(&ndt("2024-03-31 02:30"), p).unwrap(),
            utc("2024-03-31 01:30")
        );
        let london = Zone::Iana(chrono_tz::Europe::London);
        assert_eq!(
            london.to_utc(&ndt("2024-10-27 01:30"), p).unwrap(),
            utc("2024-10-27 00:30")
        );
        assert_eq!(
            london.to_utc(&ndt("2024-03-31 01:30"), p).unwrap(),
            utc("2024-03-31 01:30")
        );
    }

    #[test]
    fn policies_pick_earlier_or_later_instant() {
        let ny = Zone::Iana(chrono_tz::America::New_York);
        let fold = ndt("2024-11-03 01:30");
        assert_eq!(
            ny.to_utc(&fold, LocalPolicy::Earlier).unwrap(),
            utc("2024-11-03 05:30")
        );
        assert_eq!(
            ny.to_utc(&fold, LocalPolicy::Later).unwrap(),
            utc("2024-11-03 06:30")
        );
        assert!(matches!(
            ny.to_utc(&fold, LocalPolicy::Error),
            Err(ZoneError::Ambiguous { .. })
        ));
        let gap = ndt("2024-03-10 02:30");
        assert_eq!(
            ny.to_utc(&gap, LocalPolicy::Earlier).unwrap(),
            utc("2024-03-10 06:30")
        );
        assert_eq!(
            ny.to_utc(&gap, LocalPolicy::Later).unwrap(),
            utc("2024-03-10 07:30")
        );
    }

    /// Source: ../shared/REFERENCES.md §2.4 (zoneinfo-computed rows).
    #[test]
    fn new_york_release_in_other_zones() {
        let ny = Zone::Iana(chrono_tz::America::New_York);
        let t = ny
            .to_utc(&ndt("2024-03-15 08:30"), LocalPolicy::Error)
            .unwrap();
        assert_eq!(format_utc(t), "2024-03-15T12:30:00Z");
        assert_eq!(format_utc(t + 250), "2024-03-15T12:30:00.250Z");
        assert_eq!(format_utc(-1), "1969-12-31T23:59:59.999Z");
        let berlin: Zone = "Europe/Berlin".parse().unwrap();
        assert_eq!(berlin.format(t), "2024-03-15T13:30:00+01:00");
        let sydney: Zone = "Australia/Sydney".parse().unwrap();
        assert_eq!(sydney.format(t), "2024-03-15T23:30:00+11:00");
        let t = ny
            .to_utc(&ndt("2024-11-08 08:30"), LocalPolicy::Error)
            .unwrap();
        assert_eq!(sydney.format(t), "2024-11-09T00:30:00+11:00");
        assert_eq!(
            "Asia/Tokyo".parse::<Zone>().unwrap().format(t),
            "2024-11-08T22:30:00+09:00"
        );
    }

    #[test]
    fn cached_resolution_equals_the_exact_path() {
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        // Every 17th IANA zone, plus zones with half-hour and midnight
        // transitions, and a shifted server clock.
        let mut zones: Vec<Zone> = chrono_tz::TZ_VARIANTS
            .iter()
            .step_by(17)
            .map(|tz| Zone::Iana(*tz))
            .collect();
        for z in [
            "Australia/Lord_Howe",
            "America/Santiago",
            "Asia/Beirut",
            "America/New_York+07:00",
            "Europe/Dublin",
        ] {
            zones.push(z.parse().unwrap());
        }
        for zone in &zones {
            let mut cache = DayOffsetCache::default();
            // Sorted local times (as in a trade file) and random ones.
            let mut t: Vec<i64> = (0..400)
                .map(|_| rng.random_range(-2_208_988_800_000i64..4_102_444_800_000))
                .collect();
            t.sort();
            t.extend((0..200).map(|_| rng.random_range(-2_208_988_800_000i64..4_102_444_800_000)));
            for ms in t {
                let local = ms_to_naive(ms - ms % 60_000);
                for policy in [LocalPolicy::Error, LocalPolicy::Later] {
                    assert_eq!(
                        zone.to_utc_cached(&local, policy, &mut cache),
                        zone.to_utc(&local, policy),
                        "{zone} {local}"
                    );
                }
            }
            // Every local hour around this zone's transitions of 2024.
            let mut cache = DayOffsetCache::default();
            for h in 0..(366 * 24) {
                let local = ms_to_naive(1_704_067_200_000 + h * 3_600_000 + 30 * 60_000);
                assert_eq!(
                    zone.to_utc_cached(&local, LocalPolicy::Error, &mut cache),
                    zone.to_utc(&local, LocalPolicy::Error),
                    "{zone} {local}"
                );
            }
        }
    }

    /// Fuzzing finding: an offset with a multi-byte character is refused,
    /// not split inside the character.
    #[test]
    fn offsets_with_non_ascii_are_refused() {
        assert_eq!(parse_offset("-\u{7f}〲"), None);
        assert_eq!(parse_offset("+〲"), None);
        assert!("UTC-\u{7f}〲".parse::<Zone>().is_err());
        assert_eq!(
            crate::import::timefmt::parse_stamp(
                "2024-01-08 03:34-\u{7f}〲",
                &crate::import::timefmt::TimeFormat::Auto
            )
            .ok(),
            None
        );
        assert_eq!(parse_offset("+05:30"), Some(19_800));
    }
}
