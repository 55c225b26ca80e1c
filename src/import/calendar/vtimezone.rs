//! Zones defined inside an iCalendar file (VTIMEZONE, RFC 5545 §3.6.5), and
//! RRULE expansion in local time shared with VEVENT recurrences.
//!
//! A VTIMEZONE is used only when its TZID is not an IANA name: tzdata is the
//! better authority for named zones, and many files ship truncated
//! VTIMEZONEs (RFC 5545's own §4 example covers only 1998–1999).

use crate::import::zones::{DAY_MS, ms_to_naive, naive_to_ms};

/// Why a part of an iCalendar file (a time, a VTIMEZONE, an event's zone)
/// cannot be used; the caller turns it into a rejected event or a file
/// error naming the file and line.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("{0}")]
pub struct IcsProblem(pub String);

impl From<String> for IcsProblem {
    fn from(message: String) -> Self {
        IcsProblem(message)
    }
}

impl From<IcsProblem> for String {
    fn from(p: IcsProblem) -> Self {
        p.0
    }
}

impl From<&str> for IcsProblem {
    fn from(message: &str) -> Self {
        IcsProblem(message.to_string())
    }
}
use chrono::NaiveDateTime;

/// Expands an RRULE whose DTSTART is a local wall-clock time, returning local
/// occurrences in `[from, to]` (local, inclusive). The rule is expanded with
/// the rrule crate on the naive time treated as UTC, so BYDAY/BYMONTHDAY act
/// on the local calendar as RFC 5545 §3.3.10 requires.
///
/// Errors when the rule is malformed, would produce more than `max_keep`
/// occurrences in the span, or needs more than `max_steps` steps to get
/// there (a minutely rule over decades).
pub fn expand_local(
    dtstart: NaiveDateTime,
    rrule_text: &str,
    from: NaiveDateTime,
    to: NaiveDateTime,
    max_keep: usize,
    max_steps: usize,
) -> Result<Vec<NaiveDateTime>, IcsProblem> {
    use chrono::TimeZone;
    // The expander's own messages name its internals (its time zones, its
    // types): ours name the rule and the RFC section instead.
    let unreadable = || {
        format!(
            "RRULE '{rrule_text}' is not a recurrence rule eventfence can read (RFC 5545 §3.3.10: FREQ, then INTERVAL, COUNT or UNTIL, BY… parts)"
        )
    };
    let rule: rrule::RRule<rrule::Unvalidated> = rrule_text
        .parse()
        .map_err(|_: rrule::RRuleError| unreadable())?;
    let start = rrule::Tz::UTC.from_utc_datetime(&skip_ahead(dtstart, rrule_text, from));
    let set = rule.build(start).map_err(|_| unreadable())?;
    let mut out = Vec::new();
    for (steps, occ) in set.into_iter().enumerate() {
        let local = occ.naive_utc();
        if local > to {
            break;
        }
        if steps >= max_steps {
            return Err(format!(
                "RRULE '{rrule_text}' needs more than {max_steps} steps to cover the analysed span; narrow the span or the rule"
            ).into());
        }
        if local >= from {
            if out.len() >= max_keep {
                return Err(format!(
                    "RRULE '{rrule_text}' yields more than {max_keep} occurrences in the analysed span; refusing to expand it"
                ).into());
            }
            out.push(local);
        }
    }
    Ok(out)
}

/// A start moved forward by whole rule periods to just before `from`, for
/// fixed-length frequencies (SECONDLY to WEEKLY) without COUNT: the
/// occurrences from `from` on are the same, and a minutely rule begun in
/// year 4 no longer steps through 1 000 million minutes to reach the span
/// (found by fuzzing). The moved start stays before `from`, so it is never
/// kept even where it would not match the rule's BY parts.
fn skip_ahead(dtstart: NaiveDateTime, rule: &str, from: NaiveDateTime) -> NaiveDateTime {
    let mut freq = None;
    let mut interval = 1i64;
    for part in rule.split(';') {
        let (k, v) = part.split_once('=').unwrap_or((part, ""));
        match k.trim().to_ascii_uppercase().as_str() {
            "COUNT" => return dtstart,
            "FREQ" => freq = Some(v.trim().to_ascii_uppercase()),
            "INTERVAL" => interval = v.trim().parse().unwrap_or(1).max(1),
            _ => {}
        }
    }
    let unit = match freq.as_deref() {
        Some("SECONDLY") => 1,
        Some("MINUTELY") => 60,
        Some("HOURLY") => 3_600,
        Some("DAILY") => 86_400,
        Some("WEEKLY") => 604_800,
        _ => return dtstart,
    };
    let period = unit * interval;
    let gap = (from - dtstart).num_seconds();
    let whole = gap / period - 1;
    if whole <= 0 {
        return dtstart;
    }
    dtstart + chrono::Duration::seconds(whole * period)
}

/// One observance (STANDARD or DAYLIGHT) of a VTIMEZONE.
#[derive(Debug, Clone, Default)]
pub struct Observance {
    /// DTSTART: first local onset.
    pub dtstart: Option<NaiveDateTime>,
    /// TZOFFSETFROM in seconds.
    pub offset_from: Option<i32>,
    /// TZOFFSETTO in seconds.
    pub offset_to: Option<i32>,
    /// RRULE of the onsets, as written.
    pub rrule: Option<String>,
    /// RDATE onsets.
    pub rdates: Vec<NaiveDateTime>,
}

/// A zone built from a VTIMEZONE's transitions.
#[derive(Debug, Clone)]
pub struct CustomZone {
    /// The file's TZID.
    pub tzid: String,
    /// (UTC instant ms, offset in seconds from then on), sorted.
    transitions: Vec<(i64, i32)>,
    /// Offset before the first transition.
    initial: i32,
}

impl CustomZone {
    /// Builds the transition table up to local year `until_year`.
    pub fn build(
        tzid: &str,
        obs: &[Observance],
        until: NaiveDateTime,
    ) -> Result<CustomZone, IcsProblem> {
        let mut trans: Vec<(i64, i32, i32)> = Vec::new();
        for o in obs {
            let (Some(start), Some(from), Some(to)) = (o.dtstart, o.offset_from, o.offset_to)
            else {
                return Err(format!(
                    "VTIMEZONE {tzid}: an observance lacks DTSTART, TZOFFSETFROM or TZOFFSETTO"
                )
                .into());
            };
            let mut onsets = vec![start];
            if let Some(rule) = &o.rrule {
                onsets = expand_local(start, rule, start, until, 10_000, 100_000)?;
            }
            onsets.extend(o.rdates.iter().copied());
            for local in onsets {
                trans.push((naive_to_ms(&local) - from as i64 * 1000, to, from));
            }
        }
        if trans.is_empty() {
            return Err(format!("VTIMEZONE {tzid} has no STANDARD or DAYLIGHT observance").into());
        }
        trans.sort_by_key(|t| t.0);
        let initial = trans[0].2;
        Ok(CustomZone {
            tzid: tzid.to_string(),
            transitions: trans.iter().map(|t| (t.0, t.1)).collect(),
            initial,
        })
    }

    /// Offset (seconds east) in force at an instant.
    pub fn offset_at(&self, ms: i64) -> i32 {
        match self.transitions.partition_point(|t| t.0 <= ms) {
            0 => self.initial,
            i => self.transitions[i - 1].1,
        }
    }

    /// Local → UTC under RFC 5545 §3.3.5: an overlap takes the first
    /// occurrence, a gap the offset in force before it.
    pub fn to_utc_rfc(&self, local: &NaiveDateTime) -> i64 {
        let base = naive_to_ms(local);
        let mut offsets: Vec<i32> = self.transitions.iter().map(|t| t.1).collect();
        offsets.push(self.initial);
        offsets.sort_unstable();
        offsets.dedup();
        // Valid readings: instants whose offset maps back to this local time.
        let first_valid = offsets
            .iter()
            .map(|&o| base - o as i64 * 1000)
            .filter(|&inst| {
                naive_to_ms(&ms_to_naive(inst + self.offset_at(inst) as i64 * 1000)) == base
            })
            .min();
        match first_valid {
            Some(inst) => inst,
            None => base - self.offset_at(base - DAY_MS) as i64 * 1000,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ndt(s: &str) -> NaiveDateTime {
        NaiveDateTime::parse_from_str(s, "%Y%m%dT%H%M%S").unwrap()
    }

    /// RFC 5545 §3.6.5 current-rules New York VTIMEZONE, checked against the
    /// tzdata instants of ../shared/REFERENCES.md §2.2 and the §3.3.5 rule.
    #[test]
    fn rfc_new_york_vtimezone_matches_tzdata() {
        let obs = vec![
            Observance {
                dtstart: Some(ndt("20070311T020000")),
                offset_from: Some(-5 * 3600),
                offset_to: Some(-4 * 3600),
                rrule: Some("FREQ=YEARLY;BYMONTH=3;BYDAY=2SU".into()),
                rdates: vec![],
            },
            Observance {
                dtstart: Some(ndt("20071104T020000")),
                offset_from: Some(-4 * 3600),
                offset_to: Some(-5 * 3600),
                rrule: Some("FREQ=YEARLY;BYMONTH=11;BYDAY=1SU".into()),
                rdates: vec![],
            },
        ];
        let z = CustomZone::build("NY-local", &obs, ndt("20260101T000000")).unwrap();
        let utc = |s: &str| naive_to_ms(&ndt(s));
        assert_eq!(z.offset_at(utc("20240310T065959")), -5 * 3600);
        assert_eq!(z.offset_at(utc("20240310T070000")), -4 * 3600);
        assert_eq!(z.offset_at(utc("20241103T055959")), -4 * 3600);
        assert_eq!(z.offset_at(utc("20241103T060000")), -5 * 3600);
        assert_eq!(
            z.to_utc_rfc(&ndt("20071104T013000")),
            utc("20071104T053000")
        );
        assert_eq!(
            z.to_utc_rfc(&ndt("20070311T023000")),
            utc("20070311T073000")
        );
        assert_eq!(
            z.to_utc_rfc(&ndt("20240105T083000")),
            utc("20240105T133000")
        );
    }

    #[test]
    fn expansion_is_bounded() {
        // COUNT forbids skipping ahead: the steps before the span are bounded.
        let e = expand_local(
            ndt("19900101T000000"),
            "FREQ=MINUTELY;COUNT=900000000",
            ndt("20200101T000000"),
            ndt("20200102T000000"),
            50_000,
            1_000_000,
        )
        .unwrap_err();
        assert!(e.0.contains("steps"), "{e}");
        // Without COUNT the same rule skips ahead to the span: 1 441 minutes.
        let ok = expand_local(
            ndt("19900101T000000"),
            "FREQ=MINUTELY",
            ndt("20200101T000000"),
            ndt("20200102T000000"),
            50_000,
            1_000_000,
        )
        .unwrap();
        assert_eq!(ok.len(), 1441);
        let e = expand_local(
            ndt("20200101T000000"),
            "FREQ=MINUTELY",
            ndt("20200101T000000"),
            ndt("20210101T000000"),
            50_000,
            1_000_000,
        )
        .unwrap_err();
        assert!(e.0.contains("occurrences"), "{e}");
        // Started centuries before the span: skipped ahead, same occurrences.
        let late = expand_local(
            ndt("00040204T000000"),
            "FREQ=MINUTELY;INTERVAL=7",
            ndt("20200101T000000"),
            ndt("20200101T010000"),
            50_000,
            1_000,
        )
        .unwrap();
        let step = (ndt("20200101T000000") - ndt("00040204T000000"))
            .num_minutes()
            .rem_euclid(7);
        assert_eq!(
            late[0],
            ndt("20200101T000000") + chrono::Duration::minutes((7 - step) % 7)
        );
        assert_eq!(late.len(), 9);
        assert!(late.windows(2).all(|w| (w[1] - w[0]).num_minutes() == 7));
        let weekly = expand_local(
            ndt("19000102T083000"),
            "FREQ=WEEKLY;BYDAY=TU,TH",
            ndt("20240101T000000"),
            ndt("20240115T000000"),
            100,
            1_000,
        )
        .unwrap();
        assert_eq!(
            weekly,
            vec![
                ndt("20240102T083000"),
                ndt("20240104T083000"),
                ndt("20240109T083000"),
                ndt("20240111T083000")
            ]
        );
        let ok = expand_local(
            ndt("20240105T083000"),
            "FREQ=MONTHLY;BYDAY=1FR;COUNT=3",
            ndt("20240101T000000"),
            ndt("20250101T000000"),
            10,
            100,
        )
        .unwrap();
        assert_eq!(
            ok,
            vec![
                ndt("20240105T083000"),
                ndt("20240202T083000"),
                ndt("20240301T083000")
            ]
        );
    }
}
