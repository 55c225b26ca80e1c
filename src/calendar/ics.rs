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

use super::contentline::{ContentLine, parse_lines, split_text_list, unescape_text};
use super::rules::Draft;
use super::vtimezone::{CustomZone, Observance, expand_local};
use super::{CalendarError, CalendarOptions, CalendarRejection, CalendarSummary, Release, Tier, is_currency};
use crate::timefmt::{scan_date, scan_time};
use crate::zones::{DAY_MS, LocalPolicy, Zone, ms_to_naive, naive_to_ms};
use chrono::{NaiveDate, NaiveDateTime, NaiveTime};
use std::collections::HashMap;
use std::path::Path;

/// Our own iCalendar extension properties (documented in calendars/README.md).
pub const X_CURRENCY: &str = "X-EVENTFENCE-CURRENCY";
pub const X_TIER: &str = "X-EVENTFENCE-TIER";
pub const X_CATEGORY: &str = "X-EVENTFENCE-CATEGORY";
pub const X_REGION: &str = "X-EVENTFENCE-REGION";

/// A DTSTART/RDATE/EXDATE value as written.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
enum IcsTime {
    Date(NaiveDate),
    Utc(NaiveDateTime),
    Local(NaiveDateTime),
}

fn parse_ics_time(v: &str, value_param: Option<&str>) -> Result<IcsTime, String> {
    let v = v.trim();
    let b = v.as_bytes();
    let bad = || format!("'{v}' is not an RFC 5545 DATE (YYYYMMDD) or DATE-TIME (YYYYMMDDTHHMMSS[Z])");
    if b.len() < 8 || !b[..8].iter().all(u8::is_ascii_digit) {
        return Err(bad());
    }
    let (date, _) = scan_date(&b[..8]).ok_or_else(bad)?;
    if b.len() == 8 {
        return Ok(IcsTime::Date(date));
    }
    if value_param.is_some_and(|p| p.eq_ignore_ascii_case("DATE")) {
        return Err(bad());
    }
    if b[8] != b'T' || b.len() < 15 || !b[9..15].iter().all(u8::is_ascii_digit) {
        return Err(bad());
    }
    let (time, used) = scan_time(&b[9..15]).ok_or_else(bad)?;
    debug_assert_eq!(used, 6);
    let ndt = date.and_time(time);
    match &v[15..] {
        "" => Ok(IcsTime::Local(ndt)),
        "Z" => Ok(IcsTime::Utc(ndt)),
        _ => Err(format!(
            "'{v}': a UTC offset is not allowed in an RFC 5545 DATE-TIME (use Z or TZID=)"
        )),
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
            EventZone::Named(z) => z.to_utc(local, LocalPolicy::Rfc5545).expect("RFC policy never fails"),
            EventZone::Custom(c) => c.to_utc_rfc(local),
        }
    }
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
    let bytes = std::fs::read(path).map_err(|source| CalendarError::Io { path: path.into(), source })?;
    read_bytes(&bytes, &path.display().to_string(), opts, out, summary)
        .map_err(|message| CalendarError::Format { path: path.into(), message })
}

/// Reads iCalendar bytes; `file` names them in messages. Structural errors
/// (no VCALENDAR, unbalanced BEGIN/END) fail the whole file.
pub fn read_bytes(
    bytes: &[u8],
    file: &str,
    opts: &CalendarOptions,
    out: &mut Vec<Release>,
    summary: &mut CalendarSummary,
) -> Result<(), String> {
    let lines = parse_lines(bytes).map_err(|e| e.to_string())?;
    let mut stack: Vec<(String, usize)> = Vec::new();
    let mut events: Vec<Component> = Vec::new();
    let mut zones_raw: HashMap<String, Vec<Observance>> = HashMap::new();
    let mut cur_event: Option<Component> = None;
    let mut cur_tzid: Option<String> = None;
    let mut cur_obs: Option<Observance> = None;
    let mut saw_calendar = false;
    for l in lines {
        match l.name.as_str() {
            "BEGIN" => {
                let comp = l.value.trim().to_ascii_uppercase();
                match comp.as_str() {
                    "VCALENDAR" => saw_calendar = true,
                    "VEVENT" if stack.last().is_some_and(|s| s.0 == "VCALENDAR") => {
                        cur_event = Some(Component { line: l.line, props: Vec::new() })
                    }
                    "STANDARD" | "DAYLIGHT" if stack.last().is_some_and(|s| s.0 == "VTIMEZONE") => {
                        cur_obs = Some(Observance::default())
                    }
                    _ => {}
                }
                stack.push((comp, l.line));
            }
            "END" => {
                let comp = l.value.trim().to_ascii_uppercase();
                let Some((open, at)) = stack.pop() else {
                    return Err(format!("line {}: END:{comp} without a matching BEGIN", l.line));
                };
                if open != comp {
                    return Err(format!(
                        "line {}: END:{comp} closes BEGIN:{open} opened at line {at}; the file is malformed or truncated",
                        l.line
                    ));
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
                }
            }
        }
    }
    if let Some((open, at)) = stack.pop() {
        return Err(format!("BEGIN:{open} at line {at} has no END:{open}; the file looks truncated"));
    }
    if !saw_calendar {
        return Err("no BEGIN:VCALENDAR found; is this an iCalendar file?".into());
    }

    let until = opts
        .span
        .map(|s| ms_to_naive(s.1 + 2 * DAY_MS))
        .unwrap_or_else(|| NaiveDate::from_ymd_opt(2100, 1, 1).unwrap().and_time(NaiveTime::MIN));
    let mut custom: HashMap<String, Result<CustomZone, String>> = HashMap::new();
    for ev in events {
        summary.rows_read += 1;
        match event_releases(&ev, file, opts, &zones_raw, &mut custom, until) {
            Ok(EventOutcome::Releases(rs)) => {
                summary.recurrences_expanded += rs.len().saturating_sub(1);
                out.extend(rs);
            }
            Ok(EventOutcome::Cancelled) => summary.reject(CalendarRejection {
                file: file.into(),
                row: ev.line,
                field: "STATUS".into(),
                reason: "cancelled",
                message: "STATUS:CANCELLED; not a release".into(),
            }),
            Err((field, reason, message)) => summary.reject(CalendarRejection {
                file: file.into(),
                row: ev.line,
                field,
                reason,
                message,
            }),
        }
    }
    Ok(())
}

fn read_observance_prop(o: &mut Observance, l: &ContentLine) -> Result<(), String> {
    let off = |v: &str| {
        crate::zones::parse_offset(v.trim())
            .ok_or_else(|| format!("line {}: {} '{}' is not a UTC offset like -0500", l.line, l.name, v))
    };
    let local = |v: &str| match parse_ics_time(v, None) {
        Ok(IcsTime::Local(t)) => Ok(t),
        _ => Err(format!("line {}: {} '{}' must be a local DATE-TIME", l.line, l.name, v)),
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

enum EventOutcome {
    Releases(Vec<Release>),
    Cancelled,
}

type Reject = (String, &'static str, String);

fn reject(field: &str, reason: &'static str, message: impl Into<String>) -> Reject {
    (field.to_string(), reason, message.into())
}

fn event_releases(
    ev: &Component,
    file: &str,
    opts: &CalendarOptions,
    zones_raw: &HashMap<String, Vec<Observance>>,
    custom: &mut HashMap<String, Result<CustomZone, String>>,
    until: NaiveDateTime,
) -> Result<EventOutcome, Reject> {
    let prop = |name: &str| ev.props.iter().find(|p| p.name == name);
    if prop("STATUS").is_some_and(|p| p.value.trim().eq_ignore_ascii_case("CANCELLED")) {
        return Ok(EventOutcome::Cancelled);
    }
    let title = prop("SUMMARY").map(|p| unescape_text(&p.value)).unwrap_or_default();
    if title.trim().is_empty() {
        return Err(reject("SUMMARY", "missing_title", "event has no SUMMARY"));
    }
    let mut currency: Option<String> = None;
    let mut tier: Option<Tier> = None;
    let mut category: Option<String> = None;
    if let Some(p) = prop("PRIORITY") {
        let n: u8 = p.value.trim().parse().map_err(|_| {
            reject("PRIORITY", "bad_priority", format!("PRIORITY '{}' is not an integer 0–9", p.value))
        })?;
        if n > 9 {
            return Err(reject("PRIORITY", "bad_priority", format!("PRIORITY {n} is outside 0–9 (RFC 5545 §3.8.1.9)")));
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
    let text_of = |name: &str| prop(name).map(|p| unescape_text(&p.value).trim().to_string()).filter(|s| !s.is_empty());
    if let Some(c) = text_of(X_CURRENCY) {
        if !is_currency(&c) {
            return Err(reject(X_CURRENCY, "bad_currency", format!("'{c}' is not an ISO 4217 code")));
        }
        currency = Some(c.to_ascii_uppercase());
    }
    if let Some(t) = text_of(X_TIER) {
        tier = Some(Tier::parse(&t).ok_or_else(|| reject(X_TIER, "bad_tier", format!("'{t}' is not high, medium or low")))?);
    }
    if let Some(c) = text_of(X_CATEGORY) {
        category = Some(c.to_lowercase());
    }
    let region = text_of(X_REGION);
    opts.rules.fill(Draft { title: &title, currency: &mut currency, tier: &mut tier, category: &mut category });
    let currency = currency.ok_or_else(|| {
        reject("currency", "missing_currency", format!("'{title}' has no currency: add CATEGORIES:USD, {X_CURRENCY}, or a title rule"))
    })?;
    let tier = tier.unwrap_or(Tier::Medium);

    let dt = prop("DTSTART").ok_or_else(|| reject("DTSTART", "missing_time", "event has no DTSTART"))?;
    let start = parse_ics_time(&dt.value, dt.param("VALUE")).map_err(|m| reject("DTSTART", "bad_time", m))?;
    let zone = match (start, dt.param("TZID")) {
        (IcsTime::Utc(_), Some(_)) => {
            return Err(reject("DTSTART", "bad_time", "TZID must not be used with a UTC (Z) time (RFC 5545 §3.3.5)"));
        }
        (IcsTime::Local(_), Some(tzid)) => resolve_tzid(tzid, zones_raw, custom, until).map_err(|m| reject("DTSTART", "unknown_zone", m))?,
        _ => EventZone::Named(opts.zone),
    };
    // Occurrences as (local or UTC) start values.
    let rrule = prop("RRULE").map(|p| p.value.trim().to_string());
    let mut starts: Vec<IcsTime> = vec![start];
    if let Some(rule) = &rrule {
        let upper = rule.to_ascii_uppercase();
        let bounded = upper.contains("COUNT=") || upper.contains("UNTIL=");
        let (from_l, to_l) = match opts.span {
            Some((a, b)) => (ms_to_naive(a - 2 * DAY_MS), ms_to_naive(b + 2 * DAY_MS).min(until)),
            None if bounded => (NaiveDate::MIN.and_time(NaiveTime::MIN), until),
            None => {
                return Err(reject("RRULE", "unbounded_rule", "RRULE has no COUNT or UNTIL; give trades or --from/--to so it can be expanded over that span"));
            }
        };
        let local0 = match start {
            IcsTime::Date(d) => d.and_time(NaiveTime::MIN),
            IcsTime::Utc(t) | IcsTime::Local(t) => t,
        };
        let occ = expand_local(local0, rule, from_l, to_l, opts.max_occurrences, MAX_RULE_STEPS).map_err(|m| reject("RRULE", "bad_rule", m))?;
        starts = occ
            .into_iter()
            .map(|t| match start {
                IcsTime::Date(_) => IcsTime::Date(t.date()),
                IcsTime::Utc(_) => IcsTime::Utc(t),
                IcsTime::Local(_) => IcsTime::Local(t),
            })
            .collect();
    }
    for p in ev.props.iter().filter(|p| p.name == "RDATE") {
        for v in p.value.split(',') {
            starts.push(parse_ics_time(v, p.param("VALUE")).map_err(|m| reject("RDATE", "bad_time", m))?);
        }
    }
    // A set: a rule's 50 000 occurrences against as many EXDATEs stay linear.
    let mut excluded = std::collections::HashSet::new();
    for p in ev.props.iter().filter(|p| p.name == "EXDATE") {
        for v in p.value.split(',') {
            excluded.insert(parse_ics_time(v, p.param("VALUE")).map_err(|m| reject("EXDATE", "bad_time", m))?);
        }
    }
    let uid = prop("UID").map(|p| p.value.trim().to_string()).filter(|s| !s.is_empty());
    let recurring = starts.len() > 1 || rrule.is_some();
    let mut out = Vec::with_capacity(starts.len());
    for s in starts {
        if excluded.contains(&s) {
            continue;
        }
        let (at, end, all_day) = match s {
            IcsTime::Date(d) => {
                let a = opts.zone.to_utc(&d.and_time(NaiveTime::MIN), LocalPolicy::Rfc5545).expect("RFC policy");
                let e = opts.zone.to_utc(&(d + chrono::Days::new(1)).and_time(NaiveTime::MIN), LocalPolicy::Rfc5545).expect("RFC policy");
                (a, e, true)
            }
            IcsTime::Utc(t) => (naive_to_ms(&t), naive_to_ms(&t), false),
            IcsTime::Local(t) => {
                let a = zone.to_utc(&t);
                (a, a, false)
            }
        };
        let base = uid.clone().unwrap_or_else(|| format!("{file}:{}", ev.line));
        let id = if recurring { format!("{base}/{}", crate::zones::format_utc(at)) } else { base };
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

fn resolve_tzid<'a>(
    tzid: &str,
    zones_raw: &HashMap<String, Vec<Observance>>,
    custom: &'a mut HashMap<String, Result<CustomZone, String>>,
    until: NaiveDateTime,
) -> Result<EventZone<'a>, String> {
    let name = tzid.trim_start_matches('/');
    if let Ok(tz) = name.parse::<chrono_tz::Tz>() {
        return Ok(EventZone::Named(Zone::Iana(tz)));
    }
    let Some(obs) = zones_raw.get(tzid) else {
        return Err(format!("TZID '{tzid}' is neither an IANA zone name nor defined by a VTIMEZONE in this file"));
    };
    let built = custom.entry(tzid.to_string()).or_insert_with(|| CustomZone::build(tzid, obs, until));
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
        let opts = CalendarOptions { zone: "America/New_York".parse().unwrap(), ..Default::default() };
        let (rs, s) = read_str(&cal(body), &opts);
        assert_eq!(s.rows_rejected, 0);
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
        assert_eq!((rs[0].currency.as_str(), rs[0].tier, rs[0].category.as_deref()), ("EUR", Tier::High, Some("rates")));
        assert_eq!((rs[1].currency.as_str(), rs[1].tier, rs[1].category.as_deref()), ("GBP", Tier::Low, Some("housing")));
    }

    #[test]
    fn rrule_expands_over_span_with_exdate_and_dst() {
        // First Friday 08:30 New York; EXDATE drops one; March and November
        // 2024 straddle the US changes (REFERENCES.md §2.2).
        let body = "BEGIN:VEVENT\r\nUID:jobs\r\nSUMMARY:Jobs\r\nCATEGORIES:USD,HIGH,employment\r\nDTSTART;TZID=America/New_York:20240105T083000\r\nRRULE:FREQ=MONTHLY;BYDAY=1FR\r\nEXDATE;TZID=America/New_York:20240202T083000\r\nEND:VEVENT\r\n";
        let opts = CalendarOptions { span: Some((utc("2024-01-01 00:00"), utc("2024-12-31 00:00"))), ..Default::default() };
        let (rs, s) = read_str(&cal(body), &opts);
        assert_eq!(rs.len(), 11);
        assert_eq!(s.recurrences_expanded, 10);
        assert_eq!(rs[0].at, utc("2024-01-05 13:30"));
        assert_eq!(rs[1].at, utc("2024-03-01 13:30"));
        assert_eq!(rs[2].at, utc("2024-04-05 12:30"));
        assert_eq!(rs[10].at, utc("2024-12-06 13:30"));
        assert!(rs.iter().all(|r| r.tier == Tier::High && r.category.as_deref() == Some("employment")));
        assert!(rs[0].id.starts_with("jobs/"));
        // Without a span an endless rule is refused, not expanded forever.
        let (rs, s) = read_str(&cal(body), &CalendarOptions::default());
        assert!(rs.is_empty());
        assert_eq!(s.rejected_by_reason.get("unbounded_rule"), Some(&1));
    }

    #[test]
    fn bad_events_are_counted_with_reasons() {
        let body = "BEGIN:VEVENT\r\nSUMMARY:No currency\r\nDTSTART:20240101T000000Z\r\nEND:VEVENT\r\n\
BEGIN:VEVENT\r\nSUMMARY:Offset\r\nCATEGORIES:USD\r\nDTSTART:19980119T230000-0800\r\nEND:VEVENT\r\n\
BEGIN:VEVENT\r\nSUMMARY:Prio\r\nCATEGORIES:USD\r\nPRIORITY:10\r\nDTSTART:20240101T000000Z\r\nEND:VEVENT\r\n\
BEGIN:VEVENT\r\nSUMMARY:Zone\r\nCATEGORIES:USD\r\nDTSTART;TZID=Nowhere:20240101T000000\r\nEND:VEVENT\r\n\
BEGIN:VEVENT\r\nSUMMARY:Off\r\nSTATUS:CANCELLED\r\nCATEGORIES:USD\r\nDTSTART:20240101T000000Z\r\nEND:VEVENT\r\n\
BEGIN:VEVENT\r\nSUMMARY:All day\r\nCATEGORIES:JPY\r\nDTSTART;VALUE=DATE:20240102\r\nEND:VEVENT\r\n";
        let opts = CalendarOptions { zone: "Asia/Tokyo".parse().unwrap(), ..Default::default() };
        let (rs, s) = read_str(&cal(body), &opts);
        assert_eq!(s.rows_read, 6);
        assert_eq!(s.rows_rejected, 5);
        for reason in ["missing_currency", "bad_time", "bad_priority", "unknown_zone", "cancelled"] {
            assert_eq!(s.rejected_by_reason.get(reason), Some(&1), "{reason}");
        }
        assert_eq!(rs.len(), 1);
        assert!(rs[0].all_day);
        assert_eq!((rs[0].at, rs[0].end), (utc("2024-01-01 15:00"), utc("2024-01-02 15:00")));
        assert_eq!(s.rejections[0].row, 4);
    }

    #[test]
    fn truncated_file_is_an_error_naming_the_line() {
        let mut out = Vec::new();
        let mut s = CalendarSummary::default();
        let e = read_bytes(b"BEGIN:VCALENDAR\nBEGIN:VEVENT\nSUMMARY:x\n", "t.ics", &CalendarOptions::default(), &mut out, &mut s).unwrap_err();
        assert!(e.contains("line 2") && e.contains("truncated"), "{e}");
    }
}
