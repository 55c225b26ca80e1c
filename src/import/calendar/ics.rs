//! iCalendar (RFC 5545) import: VEVENTs become releases.
//!
//! DTSTART may be UTC (`Z`), zoned (`TZID=` an IANA name, else a VTIMEZONE
//! in the file), floating (read in `--calendar-tz`) or a DATE (all-day).
//! Local times follow RFC 5545 §3.3.5 (overlap → first occurrence, gap →
//! offset before the gap). RRULE/RDATE/EXDATE are expanded over the analysed
//! span. Tier comes from PRIORITY (1–4 high, 5 medium, 6–9 low, 0/absent
//! medium), CATEGORIES words (`high`/`medium`/`low`) or `X-EVENTFENCE-TIER`;
//! currency from an ISO 4217 code in CATEGORIES or `X-EVENTFENCE-CURRENCY`;
//! category from the first other CATEGORIES word or `X-EVENTFENCE-CATEGORY`;
//! region from `X-EVENTFENCE-REGION`. Title rules run last.

use super::contentline::{ContentLine, parse_lines_each, split_text_list, unescape_text};
use super::rules::Draft;
use super::vtimezone::{CustomZone, IcsProblem, Observance, expand_local};
use super::{
    CalendarError, CalendarOptions, CalendarSummary, Rejection, Release, Tier, is_currency,
};
use crate::import::log::RowError;
use crate::import::timefmt::{scan_date, scan_time};
use crate::import::zones::{DAY_MS, LocalPolicy, Zone, ms_to_naive, naive_to_ms};
use chrono::{NaiveDate, NaiveDateTime, NaiveTime};
use std::collections::HashMap;
use std::path::Path;

/// Our own iCalendar extension properties (documented in calendars/README.md).
pub const X_CURRENCY: &str = "X-EVENTFENCE-CURRENCY";
/// Our tier property (high, medium, low).
pub const X_TIER: &str = "X-EVENTFENCE-TIER";
/// Our category property.
pub const X_CATEGORY: &str = "X-EVENTFENCE-CATEGORY";
/// Our region property.
pub const X_REGION: &str = "X-EVENTFENCE-REGION";

/// A DTSTART/RDATE/EXDATE value as written.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
enum IcsTime {
    Date(NaiveDate),
    Utc(NaiveDateTime),
    Local(NaiveDateTime),
}

fn parse_ics_time(v: &str, value_param: Option<&str>) -> Result<IcsTime, IcsProblem> {
    let v = v.trim();
    let b = v.as_bytes();
    let bad =
        || format!("'{v}' is not an RFC 5545 DATE (YYYYMMDD) or DATE-TIME (YYYYMMDDTHHMMSS[Z])");
    if b.len() < 8 || !b[..8].iter().all(u8::is_ascii_digit) {
        return Err(bad().into());
    }
    let (date, _) = scan_date(&b[..8]).ok_or_else(bad)?;
    if b.len() == 8 {
        return Ok(IcsTime::Date(date));
    }
    if value_param.is_some_and(|p| p.eq_ignore_ascii_case("DATE")) {
        return Err(bad().into());
    }
    if b[8] != b'T' || b.len() < 15 || !b[9..15].iter().all(u8::is_ascii_digit) {
        return Err(bad().into());
    }
    let (time, used) = scan_time(&b[9..15]).ok_or_else(bad)?;
    debug_assert_eq!(used, 6);
    let ndt = date.and_time(time);
    match &v[15..] {
        "" => Ok(IcsTime::Local(ndt)),
        "Z" => Ok(IcsTime::Utc(ndt)),
        _ => Err(format!(
            "'{v}': a UTC offset is not allowed in an RFC 5545 DATE-TIME (use Z or TZID=)"
        )
        .into()),
    }
}

/// How one event's local times become instants.
enum EventZone<'a> {
    Named(Zone),
    Custom(&'a CustomZone),
}

impl EventZone<'_> {
    fn to_utc(&self, local: &NaiveDateTime) -> i64 {
        match self {
            EventZone::Named(z) => z
                .to_utc(local, LocalPolicy::Rfc5545)
                .expect("RFC policy never fails"),
            EventZone::Custom(c) => c.to_utc_rfc(local),
        }
    }
    fn to_local(&self, ms: i64) -> NaiveDateTime {
        match self {
            EventZone::Named(z) => z.to_local(ms),
            EventZone::Custom(c) => ms_to_naive(ms + c.offset_at(ms) as i64 * 1000),
        }
    }
}

/// An RRULE with its UNTIL rewritten for the expander, which steps through
/// DTSTART's own clock (local wall time, UTC, or midnight of a DATE) and
/// needs UNTIL as a time on that clock. RFC 5545 §3.3.10 wants UNTIL of
/// DTSTART's type (UTC when DTSTART is zoned); software of the RFC 2445 era
/// writes other types, read leniently here and noted:
/// - a DATE under a DATE-TIME DTSTART: the end of that day in DTSTART's zone;
/// - a floating time under a zoned or UTC DTSTART: a time on DTSTART's clock.
///
/// `None`: UNTIL lies before DTSTART, an empty series.
fn rule_for_expander(
    rule: &str,
    start: IcsTime,
    zoned: bool,
    zone: &EventZone,
    notes: &mut Vec<String>,
) -> Result<Option<String>, IcsProblem> {
    let mut parts: Vec<String> = Vec::new();
    let local0 = match start {
        IcsTime::Date(d) => d.and_time(NaiveTime::MIN),
        IcsTime::Utc(t) | IcsTime::Local(t) => t,
    };
    for part in rule.split(';').filter(|p| !p.trim().is_empty()) {
        let Some((k, v)) = part.split_once('=') else {
            parts.push(part.to_string());
            continue;
        };
        if !k.trim().eq_ignore_ascii_case("UNTIL") {
            parts.push(part.to_string());
            continue;
        }
        let until = parse_ics_time(v, None).map_err(|m| format!("UNTIL {m}"))?;
        let on_clock = match (until, start) {
            (IcsTime::Date(d), IcsTime::Date(_)) => d.and_hms_opt(23, 59, 59).expect("valid"),
            (IcsTime::Date(d), _) => {
                notes.push(format!("RRULE '{rule}': UNTIL is a DATE under a DATE-TIME DTSTART; read as the end of {d} in DTSTART's zone"));
                d.and_hms_opt(23, 59, 59).expect("valid")
            }
            (IcsTime::Utc(t), IcsTime::Utc(_)) => t,
            (IcsTime::Utc(t), _) => zone.to_local(naive_to_ms(&t)),
            (IcsTime::Local(t), IcsTime::Local(_)) if zoned => {
                notes.push(format!(
                    "RRULE '{rule}': UNTIL has no Z under a zoned DTSTART; read on DTSTART's clock"
                ));
                t
            }
            (IcsTime::Local(t), IcsTime::Local(_) | IcsTime::Date(_)) => t,
            (IcsTime::Local(t), IcsTime::Utc(_)) => {
                notes.push(format!(
                    "RRULE '{rule}': UNTIL has no Z under a UTC DTSTART; read as UTC"
                ));
                t
            }
        };
        if on_clock < local0 {
            notes.push(format!(
                "RRULE '{rule}': UNTIL lies before DTSTART, so the series is empty"
            ));
            return Ok(None);
        }
        parts.push(format!("UNTIL={}", on_clock.format("%Y%m%dT%H%M%SZ")));
    }
    Ok(Some(parts.join(";")))
}

/// Occurrences one RRULE may step through before and within the span: a
/// daily rule over a millennium fits; a minutely rule started centuries
/// before the span does not (found by fuzzing: 5 000 000 steps took over
/// 10 s on such a rule).
pub const MAX_RULE_STEPS: usize = 500_000;

struct Component {
    line: usize,
    props: Vec<ContentLine>,
}

/// Reads one ICS file, appending releases and counting rejections.
pub fn read(
    path: &Path,
    opts: &CalendarOptions,
    out: &mut Vec<Release>,
    summary: &mut CalendarSummary,
) -> Result<(), CalendarError> {
    let bytes = std::fs::read(path).map_err(|source| CalendarError::Io {
        path: path.into(),
        source,
    })?;
    read_bytes(&bytes, &path.display().to_string(), opts, out, summary).map_err(|message| {
        CalendarError::Format {
            path: path.into(),
            message: message.to_string(),
        }
    })
}

/// Reads iCalendar bytes; `file` names them in messages. Structural errors
/// (no VCALENDAR, unbalanced BEGIN/END) fail the whole file.
pub fn read_bytes(
    bytes: &[u8],
    file: &str,
    opts: &CalendarOptions,
    out: &mut Vec<Release>,
    summary: &mut CalendarSummary,
) -> Result<(), IcsProblem> {
    let lines = parse_lines_each(bytes);
    let mut stack: Vec<(String, usize)> = Vec::new();
    let mut events: Vec<Component> = Vec::new();
    let mut zones_raw: HashMap<String, Vec<Observance>> = HashMap::new();
    let mut cur_event: Option<Component> = None;
    let mut cur_tzid: Option<String> = None;
    let mut cur_obs: Option<Observance> = None;
    let mut saw_calendar = false;
    let mut wr_timezone: Option<String> = None;
    // A component this reader does not use (VTODO, VJOURNAL, VALARM, an
    // X- component…): everything up to its END is passed over, broken lines
    // included (RFC 5545 §3.6: a reader may ignore what it does not use).
    let mut skipping: Option<(String, usize)> = None;
    for item in lines {
        let l = match item {
            Ok(l) => l,
            Err(_) if skipping.is_some() => continue,
            Err(e) => return Err(e.to_string().into()),
        };
        if let Some((name, at)) = &skipping {
            let ends = |c: &str| l.name == "END" && l.value.trim().eq_ignore_ascii_case(c);
            if ends(name) {
                summary.components_skipped += 1;
                skipping = None;
                continue;
            }
            if !ends("VCALENDAR") {
                continue;
            }
            summary.components_skipped += 1;
            summary.notes.push(format!("{file}: BEGIN:{name} at line {at} has no END:{name}; passed over up to END:VCALENDAR"));
            skipping = None;
        }
        match l.name.as_str() {
            "BEGIN" => {
                let comp = l.value.trim().to_ascii_uppercase();
                let parent = stack.last().map(|s| s.0.as_str());
                match (comp.as_str(), parent) {
                    ("VCALENDAR", None) => saw_calendar = true,
                    ("VEVENT", Some("VCALENDAR")) => {
                        cur_event = Some(Component {
                            line: l.line,
                            props: Vec::new(),
                        })
                    }
                    ("VTIMEZONE", Some("VCALENDAR")) => {}
                    ("STANDARD" | "DAYLIGHT", Some("VTIMEZONE")) => {
                        cur_obs = Some(Observance::default())
                    }
                    _ => {
                        skipping = Some((comp, l.line));
                        continue;
                    }
                }
                stack.push((comp, l.line));
            }
            "END" => {
                let comp = l.value.trim().to_ascii_uppercase();
                let Some((open, at)) = stack.pop() else {
                    return Err(
                        format!("line {}: END:{comp} without a matching BEGIN", l.line).into(),
                    );
                };
                if open != comp {
                    return Err(format!(
                        "line {}: END:{comp} closes BEGIN:{open} opened at line {at}; the file is malformed or truncated",
                        l.line
                    ).into());
                }
                match comp.as_str() {
                    "VEVENT" => events.extend(cur_event.take()),
                    "STANDARD" | "DAYLIGHT" => {
                        if let (Some(o), Some(tz)) = (cur_obs.take(), &cur_tzid) {
                            zones_raw.entry(tz.clone()).or_default().push(o);
                        }
                    }
                    "VTIMEZONE" => cur_tzid = None,
                    _ => {}
                }
            }
            _ => {
                if let Some(o) = cur_obs.as_mut() {
                    read_observance_prop(o, &l)?;
                } else if let Some(e) = cur_event.as_mut() {
                    if stack.last().is_some_and(|s| s.0 == "VEVENT") {
                        e.props.push(l);
                    }
                } else if l.name == "TZID" && stack.last().is_some_and(|s| s.0 == "VTIMEZONE") {
                    cur_tzid = Some(l.value.trim().to_string());
                } else if l.name == "X-WR-TIMEZONE"
                    && stack.last().is_some_and(|s| s.0 == "VCALENDAR")
                {
                    wr_timezone = Some(unescape_text(&l.value).trim().to_string());
                }
            }
        }
    }
    if let Some((open, at)) = stack.pop() {
        return Err(format!(
            "BEGIN:{open} at line {at} has no END:{open}; the file looks truncated"
        )
        .into());
    }
    if !saw_calendar {
        return Err("no BEGIN:VCALENDAR found; is this an iCalendar file?".into());
    }

    let until = opts
        .span
        .map(|s| ms_to_naive(s.1 + 2 * DAY_MS))
        .unwrap_or_else(|| {
            NaiveDate::from_ymd_opt(2100, 1, 1)
                .unwrap()
                .and_time(NaiveTime::MIN)
        });
    // Floating times: --calendar-tz when given, else the file's
    // X-WR-TIMEZONE (a widespread calendar-level property), else UTC.
    let mut local_opts;
    let opts = match &wr_timezone {
        Some(name) if !opts.zone_given => match name.parse::<chrono_tz::Tz>() {
            Ok(tz) => {
                summary.notes.push(format!("{file}: floating times read in {name} (the file's X-WR-TIMEZONE; --calendar-tz overrides it)"));
                local_opts = opts.clone();
                local_opts.zone = Zone::Iana(tz);
                &local_opts
            }
            Err(_) => {
                summary.notes.push(format!("{file}: X-WR-TIMEZONE '{name}' is not an IANA zone name; floating times read in {}", opts.zone));
                opts
            }
        },
        Some(name) => {
            summary.notes.push(format!("{file}: floating times read in {} (--calendar-tz), not in the file's X-WR-TIMEZONE {name}", opts.zone));
            opts
        }
        None => opts,
    };
    let mut custom: HashMap<String, Result<CustomZone, IcsProblem>> = HashMap::new();
    // Instances with RECURRENCE-ID (RFC 5545 §3.8.4.4) change one
    // occurrence of their series (same UID), or with RANGE=THISANDFUTURE
    // that one and every later one; they are applied after the series.
    let (overrides, masters): (Vec<Component>, Vec<Component>) = events
        .into_iter()
        .partition(|e| e.props.iter().any(|p| p.name == "RECURRENCE-ID"));
    let uid_of = |e: &Component| {
        e.props
            .iter()
            .find(|p| p.name == "UID")
            .map(|p| p.value.trim().to_string())
    };
    let mut series: Vec<(Option<String>, Release)> = Vec::new();
    let mut notes = Vec::new();
    for ev in &masters {
        summary.rows_read += 1;
        match event_releases(ev, file, opts, &zones_raw, &mut custom, until, &mut notes) {
            Ok(EventOutcome::Releases(rs)) => {
                summary.recurrences_expanded += rs.len().saturating_sub(1);
                series.extend(rs.into_iter().map(|r| (uid_of(ev), r)));
            }
            Ok(EventOutcome::Cancelled) => summary.reject(Rejection {
                file: file.into(),
                row: ev.line,
                field: "STATUS".into(),
                reason: "cancelled",
                message: "STATUS:CANCELLED; not a release".into(),
            }),
            Err(e) => summary.reject(e.at(file, ev.line)),
        }
    }
    let mut ordered: Vec<&Component> = overrides.iter().collect();
    ordered.sort_by_key(|e| {
        e.props
            .iter()
            .find(|p| p.name == "RECURRENCE-ID")
            .map(|p| p.value.trim().to_string())
    });
    for ov in ordered {
        summary.rows_read += 1;
        let uid = uid_of(ov);
        let master = masters.iter().find(|m| uid.is_some() && uid_of(m) == uid);
        match apply_override(
            ov,
            master,
            file,
            opts,
            &zones_raw,
            &mut custom,
            until,
            &mut notes,
            &uid,
            &mut series,
        ) {
            Ok(moved) => {
                if moved {
                    summary.occurrences_moved += 1;
                } else {
                    summary.occurrences_cancelled += 1;
                }
            }
            Err(e) => summary.reject(e.at(file, ov.line)),
        }
    }
    summary
        .notes
        .extend(notes.into_iter().map(|n| format!("{file}: {n}")));
    out.extend(series.into_iter().map(|(_, r)| r));
    Ok(())
}

/// Applies one RECURRENCE-ID instance to its series: the occurrence whose
/// original start equals the RECURRENCE-ID is replaced by the instance (or
/// removed when the instance is cancelled); with RANGE=THISANDFUTURE every
/// later occurrence moves by the same shift. Properties the instance does
/// not repeat (title, currency, tier…) come from the series. Returns
/// whether the occurrence was moved (else cancelled).
#[allow(clippy::too_many_arguments)]
fn apply_override(
    ov: &Component,
    master: Option<&Component>,
    file: &str,
    opts: &CalendarOptions,
    zones_raw: &HashMap<String, Vec<Observance>>,
    custom: &mut HashMap<String, Result<CustomZone, IcsProblem>>,
    until: NaiveDateTime,
    notes: &mut Vec<String>,
    uid: &Option<String>,
    series: &mut Vec<(Option<String>, Release)>,
) -> Result<bool, Reject> {
    const SERIES_ONLY: [&str; 8] = [
        "RRULE",
        "RDATE",
        "EXDATE",
        "EXRULE",
        "RECURRENCE-ID",
        "DTSTART",
        "DTEND",
        "DURATION",
    ];
    let rid = ov
        .props
        .iter()
        .find(|p| p.name == "RECURRENCE-ID")
        .expect("partitioned on it");
    let mut props = ov.props.clone();
    if let Some(m) = master {
        for p in &m.props {
            if !SERIES_ONLY.contains(&p.name.as_str()) && !props.iter().any(|q| q.name == p.name) {
                props.push(p.clone());
            }
        }
    }
    props.retain(|p| p.name != "RECURRENCE-ID");
    // The original start: RECURRENCE-ID in its own zone, else the series'.
    let rid_time = parse_ics_time(&rid.value, rid.param("VALUE"))
        .map_err(|m| reject("RECURRENCE-ID", "bad_time", m))?;
    let tzid = rid.param("TZID").or_else(|| {
        master
            .and_then(|m| m.props.iter().find(|p| p.name == "DTSTART"))
            .and_then(|p| p.param("TZID"))
    });
    let rid_at = match rid_time {
        IcsTime::Date(d) => opts
            .zone
            .to_utc(&d.and_time(NaiveTime::MIN), LocalPolicy::Rfc5545)
            .expect("RFC policy"),
        IcsTime::Utc(t) => naive_to_ms(&t),
        IcsTime::Local(t) => match tzid {
            Some(z) => resolve_tzid(z, zones_raw, custom, until)
                .map_err(|m| reject("RECURRENCE-ID", "unknown_zone", m))?
                .to_utc(&t),
            None => EventZone::Named(opts.zone).to_utc(&t),
        },
    };
    let this_and_future = rid
        .param("RANGE")
        .is_some_and(|r| r.eq_ignore_ascii_case("THISANDFUTURE"));
    let instance = Component {
        line: ov.line,
        props,
    };
    let outcome = event_releases(&instance, file, opts, zones_raw, custom, until, notes)?;
    let same_series = |u: &Option<String>| u.is_some() && u == uid;
    series.retain(|(u, r)| !(same_series(u) && r.at == rid_at));
    let moved = match outcome {
        EventOutcome::Cancelled => {
            if this_and_future {
                series.retain(|(u, r)| !(same_series(u) && r.at > rid_at));
            }
            false
        }
        EventOutcome::Releases(rs) => {
            let Some(mut r) = rs.into_iter().next() else {
                return Ok(true);
            };
            let shift = r.at - rid_at;
            if this_and_future {
                for (u, later) in series.iter_mut() {
                    if same_series(u) && later.at > rid_at {
                        later.at += shift;
                        later.end += shift;
                        if let Some((base, _)) = later.id.rsplit_once('/') {
                            later.id =
                                format!("{base}/{}", crate::import::zones::format_utc(later.at));
                        }
                    }
                }
            }
            let base = uid.clone().unwrap_or_else(|| format!("{file}:{}", ov.line));
            r.id = format!("{base}/{}", crate::import::zones::format_utc(r.at));
            series.push((uid.clone(), r));
            true
        }
    };
    Ok(moved)
}

fn read_observance_prop(o: &mut Observance, l: &ContentLine) -> Result<(), IcsProblem> {
    let off = |v: &str| {
        utc_offset(v.trim()).ok_or_else(|| {
            format!(
                "line {}: {} '{}' is not a UTC offset like -0500 or +005328",
                l.line, l.name, v
            )
        })
    };
    let local = |v: &str| match parse_ics_time(v, None) {
        Ok(IcsTime::Local(t)) => Ok(t),
        _ => Err(IcsProblem(format!(
            "line {}: {} '{}' must be a local DATE-TIME",
            l.line, l.name, v
        ))),
    };
    match l.name.as_str() {
        "DTSTART" => o.dtstart = Some(local(&l.value)?),
        "TZOFFSETFROM" => o.offset_from = Some(off(&l.value)?),
        "TZOFFSETTO" => o.offset_to = Some(off(&l.value)?),
        "RRULE" => o.rrule = Some(l.value.clone()),
        "RDATE" => {
            for v in l.value.split(',') {
                o.rdates.push(local(v)?);
            }
        }
        _ => {}
    }
    Ok(())
}

/// An RFC 5545 §3.3.14 UTC-OFFSET, `(+|-)hhmm[ss]`, in seconds (old
/// local mean times carry seconds: `+005328`). `-0000` is read as 0.
fn utc_offset(v: &str) -> Option<i32> {
    let b = v.as_bytes();
    let sign = match b.first()? {
        b'+' => 1,
        b'-' => -1,
        _ => return None,
    };
    let digits = &b[1..];
    if !(digits.len() == 4 || digits.len() == 6) || !digits.iter().all(u8::is_ascii_digit) {
        return None;
    }
    let two = |i: usize| (digits[i] - b'0') as i32 * 10 + (digits[i + 1] - b'0') as i32;
    let (h, m, sec) = (two(0), two(2), if digits.len() == 6 { two(4) } else { 0 });
    (h < 24 && m < 60 && sec < 60).then_some(sign * (h * 3600 + m * 60 + sec))
}

enum EventOutcome {
    Releases(Vec<Release>),
    Cancelled,
}

type Reject = RowError;

fn reject(field: &str, reason: &'static str, message: impl Into<String>) -> Reject {
    RowError {
        field: field.to_string().into(),
        reason,
        message: message.into(),
    }
}

fn event_releases(
    ev: &Component,
    file: &str,
    opts: &CalendarOptions,
    zones_raw: &HashMap<String, Vec<Observance>>,
    custom: &mut HashMap<String, Result<CustomZone, IcsProblem>>,
    until: NaiveDateTime,
    notes: &mut Vec<String>,
) -> Result<EventOutcome, Reject> {
    let prop = |name: &str| ev.props.iter().find(|p| p.name == name);
    if prop("STATUS").is_some_and(|p| p.value.trim().eq_ignore_ascii_case("CANCELLED")) {
        return Ok(EventOutcome::Cancelled);
    }
    let Labels {
        title,
        currency,
        tier,
        category,
        region,
    } = event_labels(ev, opts)?;
    let dt =
        prop("DTSTART").ok_or_else(|| reject("DTSTART", "missing_time", "event has no DTSTART"))?;
    let start = parse_ics_time(&dt.value, dt.param("VALUE"))
        .map_err(|m| reject("DTSTART", "bad_time", m))?;
    let zone = match (start, dt.param("TZID")) {
        (IcsTime::Utc(_), Some(_)) => {
            return Err(reject(
                "DTSTART",
                "bad_time",
                "TZID must not be used with a UTC (Z) time (RFC 5545 §3.3.5)",
            ));
        }
        (IcsTime::Local(_), Some(tzid)) => resolve_tzid(tzid, zones_raw, custom, until)
            .map_err(|m| reject("DTSTART", "unknown_zone", m))?,
        _ => EventZone::Named(opts.zone),
    };
    let (starts, has_rules) = event_starts(
        ev,
        start,
        dt.param("TZID").is_some(),
        &zone,
        opts,
        until,
        notes,
    )?;
    let excluded = excluded_starts(ev)?;
    let uid = prop("UID")
        .map(|p| p.value.trim().to_string())
        .filter(|s| !s.is_empty());
    let recurring = starts.len() > 1 || has_rules;
    let mut out = Vec::with_capacity(starts.len());
    for s in starts {
        if excluded.contains(&s) {
            continue;
        }
        let (at, end, all_day) = instant_of(s, &zone, opts);
        let base = uid.clone().unwrap_or_else(|| format!("{file}:{}", ev.line));
        let id = if recurring {
            format!("{base}/{}", crate::import::zones::format_utc(at))
        } else {
            base
        };
        out.push(Release {
            id,
            at,
            end,
            all_day,
            title: title.clone(),
            currency: currency.clone(),
            tier,
            category: category.clone(),
            region: region.clone(),
        });
    }
    Ok(EventOutcome::Releases(out))
}

/// What an event says about itself: title, currency, tier, category and
/// region, from SUMMARY, PRIORITY, CATEGORIES, the X- properties and the
/// title rules (in that order of strength).
struct Labels {
    title: String,
    currency: String,
    tier: Tier,
    category: Option<String>,
    region: Option<String>,
}

fn event_labels(ev: &Component, opts: &CalendarOptions) -> Result<Labels, Reject> {
    let prop = |name: &str| ev.props.iter().find(|p| p.name == name);
    let title = prop("SUMMARY")
        .map(|p| unescape_text(&p.value))
        .unwrap_or_default();
    if title.trim().is_empty() {
        return Err(reject("SUMMARY", "missing_title", "event has no SUMMARY"));
    }
    let mut currency: Option<String> = None;
    let mut tier: Option<Tier> = None;
    let mut category: Option<String> = None;
    if let Some(p) = prop("PRIORITY") {
        let n: u8 = p.value.trim().parse().map_err(|_| {
            reject(
                "PRIORITY",
                "bad_priority",
                format!("PRIORITY '{}' is not an integer 0–9", p.value),
            )
        })?;
        if n > 9 {
            return Err(reject(
                "PRIORITY",
                "bad_priority",
                format!("PRIORITY {n} is outside 0–9 (RFC 5545 §3.8.1.9)"),
            ));
        }
        tier = Tier::from_priority(n);
    }
    for p in ev.props.iter().filter(|p| p.name == "CATEGORIES") {
        for item in split_text_list(&p.value) {
            if is_currency(&item) && currency.is_none() {
                currency = Some(item.to_ascii_uppercase());
            } else if let Some(t) = Tier::parse(&item).filter(|_| item.len() > 2) {
                tier = Some(t);
            } else if category.is_none() {
                category = Some(item.to_lowercase());
            }
        }
    }
    let text_of = |name: &str| {
        prop(name)
            .map(|p| unescape_text(&p.value).trim().to_string())
            .filter(|s| !s.is_empty())
    };
    if let Some(c) = text_of(X_CURRENCY) {
        if !is_currency(&c) {
            return Err(reject(
                X_CURRENCY,
                "bad_currency",
                format!("'{c}' is not an ISO 4217 code"),
            ));
        }
        currency = Some(c.to_ascii_uppercase());
    }
    if let Some(t) = text_of(X_TIER) {
        tier = Some(Tier::parse(&t).ok_or_else(|| {
            reject(
                X_TIER,
                "bad_tier",
                format!("'{t}' is not high, medium or low"),
            )
        })?);
    }
    if let Some(c) = text_of(X_CATEGORY) {
        category = Some(c.to_lowercase());
    }
    let region = text_of(X_REGION);
    opts.rules.fill(Draft {
        title: &title,
        country: None,
        region: region.as_deref(),
        currency: &mut currency,
        tier: &mut tier,
        category: &mut category,
    });
    let currency = currency.ok_or_else(|| {
        reject(
            "currency",
            "missing_currency",
            format!("'{title}' has no currency: add CATEGORIES:USD, {X_CURRENCY}, or a title rule"),
        )
    })?;
    let tier = tier.unwrap_or(Tier::Medium);

    Ok(Labels {
        title,
        currency,
        tier,
        category,
        region,
    })
}

/// The event's occurrence starts: DTSTART alone, or the union of its
/// RRULE expansions over the span, plus its RDATEs; and whether it has
/// rules at all.
fn event_starts(
    ev: &Component,
    start: IcsTime,
    has_tzid: bool,
    zone: &EventZone,
    opts: &CalendarOptions,
    until: NaiveDateTime,
    notes: &mut Vec<String>,
) -> Result<(Vec<IcsTime>, bool), Reject> {
    // Occurrences as (local or UTC) start values: the union of every RRULE
    // (RFC 5545 deprecates more than one, but software still writes them).
    let rrules: Vec<String> = ev
        .props
        .iter()
        .filter(|p| p.name == "RRULE")
        .map(|p| p.value.trim().to_string())
        .collect();
    let mut starts: Vec<IcsTime> = if rrules.is_empty() {
        vec![start]
    } else {
        Vec::new()
    };
    let mut seen = std::collections::HashSet::new();
    for rule in &rrules {
        let upper = rule.to_ascii_uppercase();
        let bounded = upper.contains("COUNT=") || upper.contains("UNTIL=");
        let (from_l, to_l) = match opts.span {
            Some((a, b)) => (
                ms_to_naive(a - 2 * DAY_MS),
                ms_to_naive(b + 2 * DAY_MS).min(until),
            ),
            None if bounded => (NaiveDate::MIN.and_time(NaiveTime::MIN), until),
            None => {
                return Err(reject(
                    "RRULE",
                    "unbounded_rule",
                    "RRULE has no COUNT or UNTIL; give trades or --from/--to so it can be expanded over that span",
                ));
            }
        };
        let local0 = match start {
            IcsTime::Date(d) => d.and_time(NaiveTime::MIN),
            IcsTime::Utc(t) | IcsTime::Local(t) => t,
        };
        let Some(expandable) = rule_for_expander(rule, start, has_tzid, zone, notes)
            .map_err(|m| reject("RRULE", "bad_rule", m))?
        else {
            continue;
        };
        let occ = expand_local(
            local0,
            &expandable,
            from_l,
            to_l,
            opts.max_occurrences,
            MAX_RULE_STEPS,
        )
        .map_err(|m| reject("RRULE", "bad_rule", m))?;
        for t in occ {
            let time = match start {
                IcsTime::Date(_) => IcsTime::Date(t.date()),
                IcsTime::Utc(_) => IcsTime::Utc(t),
                IcsTime::Local(_) => IcsTime::Local(t),
            };
            if seen.insert(time) {
                starts.push(time);
            }
        }
    }
    for p in ev.props.iter().filter(|p| p.name == "RDATE") {
        let period = p
            .param("VALUE")
            .is_some_and(|v| v.eq_ignore_ascii_case("PERIOD"));
        for v in p.value.split(',') {
            // A PERIOD (start/end or start/duration, §3.3.9) occurs at its start.
            let (v, kind) = match v.split_once('/') {
                Some((first, _)) if period => (first, None),
                _ => (v, p.param("VALUE")),
            };
            starts.push(parse_ics_time(v, kind).map_err(|m| reject("RDATE", "bad_time", m))?);
        }
    }
    Ok((starts, !rrules.is_empty()))
}

/// The EXDATE values, as a set: a rule's 50 000 occurrences against as
/// many exclusions stay linear.
fn excluded_starts(ev: &Component) -> Result<std::collections::HashSet<IcsTime>, Reject> {
    let mut excluded = std::collections::HashSet::new();
    for p in ev.props.iter().filter(|p| p.name == "EXDATE") {
        for v in p.value.split(',') {
            excluded.insert(
                parse_ics_time(v, p.param("VALUE")).map_err(|m| reject("EXDATE", "bad_time", m))?,
            );
        }
    }
    Ok(excluded)
}

/// An occurrence's instant, end and all-day flag: a date covers its local
/// day in the calendar's zone (RFC 5545 §3.3.5 for gaps and overlaps).
fn instant_of(s: IcsTime, zone: &EventZone, opts: &CalendarOptions) -> (i64, i64, bool) {
    match s {
        IcsTime::Date(d) => {
            let a = opts
                .zone
                .to_utc(&d.and_time(NaiveTime::MIN), LocalPolicy::Rfc5545)
                .expect("RFC policy");
            let e = opts
                .zone
                .to_utc(
                    &(d + chrono::Days::new(1)).and_time(NaiveTime::MIN),
                    LocalPolicy::Rfc5545,
                )
                .expect("RFC policy");
            (a, e, true)
        }
        IcsTime::Utc(t) => (naive_to_ms(&t), naive_to_ms(&t), false),
        IcsTime::Local(t) => {
            let a = zone.to_utc(&t);
            (a, a, false)
        }
    }
}

fn resolve_tzid<'a>(
    tzid: &str,
    zones_raw: &HashMap<String, Vec<Observance>>,
    custom: &'a mut HashMap<String, Result<CustomZone, IcsProblem>>,
    until: NaiveDateTime,
) -> Result<EventZone<'a>, IcsProblem> {
    let name = tzid.trim_start_matches('/');
    if let Ok(tz) = name.parse::<chrono_tz::Tz>() {
        return Ok(EventZone::Named(Zone::Iana(tz)));
    }
    let Some(obs) = zones_raw.get(tzid) else {
        return Err(format!(
            "TZID '{tzid}' is neither an IANA zone name nor defined by a VTIMEZONE in this file"
        )
        .into());
    };
    let built = custom
        .entry(tzid.to_string())
        .or_insert_with(|| CustomZone::build(tzid, obs, until));
    match built {
        Ok(z) => Ok(EventZone::Custom(z)),
        Err(m) => Err(m.clone()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read_str(src: &str, opts: &CalendarOptions) -> (Vec<Release>, CalendarSummary) {
        let mut out = Vec::new();
        let mut s = CalendarSummary::default();
        read_bytes(src.as_bytes(), "t.ics", opts, &mut out, &mut s).unwrap();
        (out, s)
    }
    fn utc(s: &str) -> i64 {
        naive_to_ms(&NaiveDateTime::parse_from_str(s, "%Y-%m-%d %H:%M").unwrap())
    }
    fn cal(body: &str) -> String {
        format!("BEGIN:VCALENDAR\r\nVERSION:2.0\r\nPRODID:-//test//EN\r\n{body}END:VCALENDAR\r\n")
    }

    /// The same instant three ways, RFC 5545 §3.3.5 example: floating
    /// 19970714T133000 (read in New York), 19970714T173000Z, and
    /// TZID=America/New_York:19970714T133000 (EDT → 17:30Z).
    #[test]
    fn rfc5545_same_instant_three_ways() {
        let body = "BEGIN:VEVENT\r\nUID:a\r\nSUMMARY:A\r\nCATEGORIES:USD\r\nDTSTART:19970714T133000\r\nEND:VEVENT\r\n\
BEGIN:VEVENT\r\nUID:b\r\nSUMMARY:B\r\nCATEGORIES:USD\r\nDTSTART:19970714T173000Z\r\nEND:VEVENT\r\n\
BEGIN:VEVENT\r\nUID:c\r\nSUMMARY:C\r\nCATEGORIES:USD\r\nDTSTART;TZID=America/New_York:19970714T133000\r\nEND:VEVENT\r\n";
        let opts = CalendarOptions {
            zone: "America/New_York".parse().unwrap(),
            ..Default::default()
        };
        let (rs, s) = read_str(&cal(body), &opts);
        assert_eq!(s.log.rows_rejected, 0);
        assert!(rs.iter().all(|r| r.at == utc("1997-07-14 17:30")), "{rs:?}");
    }

    /// RFC 5545 §4 second example: TZID=America/New_York 19980312T083000 is
    /// 13:30Z (EST). Its VTIMEZONE covers only 1998-10 onwards, so the IANA
    /// name must win over the in-file definition.
    #[test]
    fn iana_name_wins_over_truncated_vtimezone() {
        let body = "BEGIN:VTIMEZONE\r\nTZID:America/New_York\r\nBEGIN:STANDARD\r\nDTSTART:19981025T020000\r\nTZOFFSETFROM:-0400\r\nTZOFFSETTO:-0500\r\nTZNAME:EST\r\nEND:STANDARD\r\nBEGIN:DAYLIGHT\r\nDTSTART:19990404T020000\r\nTZOFFSETFROM:-0500\r\nTZOFFSETTO:-0400\r\nTZNAME:EDT\r\nEND:DAYLIGHT\r\nEND:VTIMEZONE\r\n\
BEGIN:VEVENT\r\nUID:x\r\nSUMMARY:Board\r\nCATEGORIES:USD\r\nDTSTART;TZID=America/New_York:19980312T083000\r\nEND:VEVENT\r\n";
        let (rs, _) = read_str(&cal(body), &CalendarOptions::default());
        assert_eq!(rs[0].at, utc("1998-03-12 13:30"));
    }

    #[test]
    fn custom_vtimezone_and_priority_and_x_props() {
        let body = "BEGIN:VTIMEZONE\r\nTZID:Server Clock\r\nBEGIN:STANDARD\r\nDTSTART:20001029T030000\r\nRRULE:FREQ=YEARLY;BYMONTH=10;BYDAY=-1SU\r\nTZOFFSETFROM:+0300\r\nTZOFFSETTO:+0200\r\nEND:STANDARD\r\nBEGIN:DAYLIGHT\r\nDTSTART:20000326T020000\r\nRRULE:FREQ=YEARLY;BYMONTH=3;BYDAY=-1SU\r\nTZOFFSETFROM:+0200\r\nTZOFFSETTO:+0300\r\nEND:DAYLIGHT\r\nEND:VTIMEZONE\r\n\
BEGIN:VEVENT\r\nUID:y\r\nSUMMARY:Rate decision\r\nPRIORITY:2\r\nX-EVENTFENCE-CURRENCY:eur\r\nX-EVENTFENCE-CATEGORY:Rates\r\nDTSTART;TZID=Server Clock:20240606T151500\r\nEND:VEVENT\r\n\
BEGIN:VEVENT\r\nUID:z\r\nSUMMARY:Minor\r\nPRIORITY:7\r\nCATEGORIES:GBP,housing\r\nDTSTART:20240606T090000Z\r\nEND:VEVENT\r\n";
        let (rs, _) = read_str(&cal(body), &CalendarOptions::default());
        assert_eq!(rs[0].at, utc("2024-06-06 12:15"));
        assert_eq!(
            (
                rs[0].currency.as_str(),
                rs[0].tier,
                rs[0].category.as_deref()
            ),
            ("EUR", Tier::High, Some("rates"))
        );
        assert_eq!(
            (
                rs[1].currency.as_str(),
                rs[1].tier,
                rs[1].category.as_deref()
            ),
            ("GBP", Tier::Low, Some("housing"))
        );
    }

    #[test]
    fn rrule_expands_over_span_with_exdate_and_dst() {
        // First Friday 08:30 New York; EXDATE drops one; March and November
        // 2024 straddle the US changes (REFERENCES.md §2.2).
        let body = "BEGIN:VEVENT\r\nUID:jobs\r\nSUMMARY:Jobs\r\nCATEGORIES:USD,HIGH,employment\r\nDTSTART;TZID=America/New_York:20240105T083000\r\nRRULE:FREQ=MONTHLY;BYDAY=1FR\r\nEXDATE;TZID=America/New_York:20240202T083000\r\nEND:VEVENT\r\n";
        let opts = CalendarOptions {
            span: Some((utc("2024-01-01 00:00"), utc("2024-12-31 00:00"))),
            ..Default::default()
        };
        let (rs, s) = read_str(&cal(body), &opts);
        assert_eq!(rs.len(), 11);
        assert_eq!(s.recurrences_expanded, 10);
        assert_eq!(rs[0].at, utc("2024-01-05 13:30"));
        assert_eq!(rs[1].at, utc("2024-03-01 13:30"));
        assert_eq!(rs[2].at, utc("2024-04-05 12:30"));
        assert_eq!(rs[10].at, utc("2024-12-06 13:30"));
        assert!(
            rs.iter()
                .all(|r| r.tier == Tier::High && r.category.as_deref() == Some("employment"))
        );
        assert!(rs[0].id.starts_with("jobs/"));
        // Without a span an endless rule is refused, not expanded forever.
        let (rs, s) = read_str(&cal(body), &CalendarOptions::default());
        assert!(rs.is_empty());
        assert_eq!(s.log.rejected_by_reason.get("unbounded_rule"), Some(&1));
    }

    #[test]
    fn bad_events_are_counted_with_reasons() {
        let body = "BEGIN:VEVENT\r\nSUMMARY:No currency\r\nDTSTART:20240101T000000Z\r\nEND:VEVENT\r\n\
BEGIN:VEVENT\r\nSUMMARY:Offset\r\nCATEGORIES:USD\r\nDTSTART:19980119T230000-0800\r\nEND:VEVENT\r\n\
BEGIN:VEVENT\r\nSUMMARY:Prio\r\nCATEGORIES:USD\r\nPRIORITY:10\r\nDTSTART:20240101T000000Z\r\nEND:VEVENT\r\n\
BEGIN:VEVENT\r\nSUMMARY:Zone\r\nCATEGORIES:USD\r\nDTSTART;TZID=Nowhere:20240101T000000\r\nEND:VEVENT\r\n\
BEGIN:VEVENT\r\nSUMMARY:Off\r\nSTATUS:CANCELLED\r\nCATEGORIES:USD\r\nDTSTART:20240101T000000Z\r\nEND:VEVENT\r\n\
BEGIN:VEVENT\r\nSUMMARY:All day\r\nCATEGORIES:JPY\r\nDTSTART;VALUE=DATE:20240102\r\nEND:VEVENT\r\n";
        let opts = CalendarOptions {
            zone: "Asia/Tokyo".parse().unwrap(),
            ..Default::default()
        };
        let (rs, s) = read_str(&cal(body), &opts);
        assert_eq!(s.rows_read, 6);
        assert_eq!(s.log.rows_rejected, 5);
        for reason in [
            "missing_currency",
            "bad_time",
            "bad_priority",
            "unknown_zone",
            "cancelled",
        ] {
            assert_eq!(s.log.rejected_by_reason.get(reason), Some(&1), "{reason}");
        }
        assert_eq!(rs.len(), 1);
        assert!(rs[0].all_day);
        assert_eq!(
            (rs[0].at, rs[0].end),
            (utc("2024-01-01 15:00"), utc("2024-01-02 15:00"))
        );
        assert_eq!(s.log.rejections[0].row, 4);
    }

    #[test]
    fn truncated_file_is_an_error_naming_the_line() {
        let mut out = Vec::new();
        let mut s = CalendarSummary::default();
        let e = read_bytes(
            b"BEGIN:VCALENDAR\nBEGIN:VEVENT\nSUMMARY:x\n",
            "t.ics",
            &CalendarOptions::default(),
            &mut out,
            &mut s,
        )
        .unwrap_err();
        assert!(e.0.contains("line 2") && e.0.contains("truncated"), "{e}");
    }
}
