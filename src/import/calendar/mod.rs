//! Release calendars: the `Release` record, importing ICS and CSV files,
//! title rules, and merging several files into one list (docs/method.md §1).
//!
//! Invariant: every calendar row or VEVENT read is either a release (possibly
//! expanded into many by RRULE), a merged duplicate, or a counted rejection.

pub mod contentline;
pub mod countries;
pub mod csv;
pub mod ics;
pub mod rules;
pub mod vtimezone;

use crate::import::table::{Source, Table};
use crate::import::zones::{LocalPolicy, Zone};
use serde::Serialize;
use std::collections::HashMap;
use std::path::{Path, PathBuf};

/// Release importance (RFC 5545's three-level PRIORITY scheme).
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Tier {
    /// Low importance.
    Low,
    /// Medium importance.
    Medium,
    /// High importance.
    High,
}

impl Tier {
    /// `high`, `medium`, `low` in any case (and `h`, `med`, `m`, `l`).
    pub fn parse(s: &str) -> Option<Tier> {
        match s.trim().to_ascii_lowercase().as_str() {
            // No numeric aliases: "1" means highest in RFC 5545 PRIORITY
            // but lowest on many 1–3 scales, so a number is refused.
            "high" | "h" => Some(Tier::High),
            "medium" | "med" | "m" => Some(Tier::Medium),
            "low" | "l" => Some(Tier::Low),
            _ => None,
        }
    }
    /// The lower-case name.
    pub fn as_str(self) -> &'static str {
        match self {
            Tier::High => "high",
            Tier::Medium => "medium",
            Tier::Low => "low",
        }
    }
    /// RFC 5545 §3.8.1.9: 1–4 high, 5 medium, 6–9 low; 0 = undefined.
    pub fn from_priority(p: u8) -> Option<Tier> {
        match p {
            1..=4 => Some(Tier::High),
            5 => Some(Tier::Medium),
            6..=9 => Some(Tier::Low),
            _ => None,
        }
    }
}

/// One economic release.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Release {
    /// Identifier: the file's `id`/`UID` (with the occurrence date for RRULE
    /// expansions), else `file:row`.
    pub id: String,
    /// Release instant, ms since epoch UTC. For an all-day release, the start
    /// of its local day.
    pub at: i64,
    /// End of an all-day release's local day (exclusive); equals `at` otherwise.
    pub end: i64,
    /// A release with a date but no time of day.
    pub all_day: bool,
    /// Title as written.
    pub title: String,
    /// ISO 4217 code, upper case.
    pub currency: String,
    /// Importance.
    pub tier: Tier,
    /// Category (a file's CATEGORIES or category column).
    pub category: Option<String>,
    /// Region or country, as written.
    pub region: Option<String>,
}

use crate::import::log::ImportLog;
/// A calendar row or event that was not imported (the shared import log's
/// rejection, one type for trades and calendars).
pub use crate::import::log::Rejection;

/// What was read from the calendar files.
#[derive(Debug, Clone, Default, Serialize)]
pub struct CalendarSummary {
    /// The files read, in order.
    pub files: Vec<String>,
    /// CSV rows plus ICS VEVENTs read.
    pub rows_read: usize,
    /// Releases after RRULE expansion and duplicate merging.
    pub releases: usize,
    /// Occurrences added by RRULE expansion beyond the first.
    pub recurrences_expanded: usize,
    /// Rows that repeated a release already read, merged into it.
    pub duplicates_merged: usize,
    /// Rows and events rejected: counts by reason and the first ones kept.
    #[serde(flatten)]
    pub log: ImportLog,
    /// ICS components not used (VTODO, VJOURNAL, VALARM, X- components…),
    /// passed over whatever they hold.
    pub components_skipped: usize,
    /// ICS occurrences replaced by a RECURRENCE-ID instance (moved or
    /// rescheduled) and removed by a cancelled instance.
    pub occurrences_moved: usize,
    /// Occurrences removed by a cancelled RECURRENCE-ID instance.
    pub occurrences_cancelled: usize,
    /// What was read leniently or guessed (a zone, an UNTIL's type), per file.
    pub notes: Vec<String>,
}

impl CalendarSummary {
    pub(crate) fn reject(&mut self, r: Rejection) {
        self.log.reject(r);
    }
}

/// Imported, merged calendar, sorted by instant.
#[derive(Debug, Clone, Default)]
pub struct Calendar {
    /// Releases, sorted by instant.
    pub releases: Vec<Release>,
    /// What was read, merged and rejected.
    pub summary: CalendarSummary,
}

/// Errors that stop a calendar import.
#[derive(Debug, thiserror::Error)]
#[allow(missing_docs)] // variant fields are named in each message
pub enum CalendarError {
    /// A file could not be read.
    #[error("cannot read calendar {path}: {source}")]
    Io {
        path: PathBuf,
        source: std::io::Error,
    },
    /// A file is not in a layout the importer reads.
    #[error("calendar {path}: {message}")]
    Format { path: PathBuf, message: String },
    #[error(
        "calendar {path}: column '{column}' for field {field} not found (columns: {available}); map it with --calendar-map {field}=<column>"
    )]
    /// A required or mapped column is absent.
    MissingColumn {
        path: PathBuf,
        field: String,
        column: String,
        available: String,
    },
    #[error(
        "{count} calendar row(s) rejected, for example:\n{examples}\n(rerun with --skip-bad-rows to continue without them)"
    )]
    /// Rows were rejected and skipping them was not asked for.
    Rejected { count: usize, examples: String },
    /// The title rules cannot be used.
    #[error("rules file {path}: {message}")]
    Rules { path: PathBuf, message: String },
}

/// Settings for reading calendars.
#[derive(Debug, Clone)]
pub struct CalendarOptions {
    /// Zone of times without an offset (CSV) and floating ICS times.
    pub zone: Zone,
    /// Whether the user named `zone` (`--calendar-tz`): then an ICS file's
    /// X-WR-TIMEZONE does not apply.
    pub zone_given: bool,
    /// DST policy for CSV local times (ICS always follows RFC 5545 §3.3.5).
    pub policy: LocalPolicy,
    /// CSV column mapping: field → column name.
    pub columns: HashMap<String, String>,
    /// CSV field separator; `None`: detected.
    pub delimiter: Option<u8>,
    /// Title patterns that fill currency, tier or category.
    pub rules: rules::TitleRules,
    /// RRULE expansion span [from, to] in ms; `None` means rules must end.
    pub span: Option<(i64, i64)>,
    /// Upper bound on occurrences one RRULE may produce.
    pub max_occurrences: usize,
    /// Import the good rows and report the bad ones instead of stopping.
    pub skip_bad_rows: bool,
    /// CSV layout of the file's own making (`--calendar-time-format`,
    /// `--tier-map`, `--untimed`).
    pub layout: csv::Layout,
}

impl Default for CalendarOptions {
    fn default() -> Self {
        CalendarOptions {
            zone: Zone::Utc,
            zone_given: false,
            policy: LocalPolicy::Error,
            columns: HashMap::new(),
            delimiter: None,
            rules: rules::TitleRules::default(),
            span: None,
            max_occurrences: 50_000,
            skip_bad_rows: false,
            layout: csv::Layout::default(),
        }
    }
}

/// Lower-cased title with punctuation dropped and spaces collapsed, for
/// duplicate detection.
pub fn normalise_title(t: &str) -> String {
    let mut out = String::with_capacity(t.len());
    for w in t
        .split(|c: char| !c.is_alphanumeric())
        .filter(|w| !w.is_empty())
    {
        if !out.is_empty() {
            out.push(' ');
        }
        out.push_str(&w.to_lowercase());
    }
    out
}

/// Reads and merges calendar files (ICS by `.ics`/`.ical` extension, else CSV).
pub fn load(paths: &[PathBuf], opts: &CalendarOptions) -> Result<Calendar, CalendarError> {
    load_sources(&Source::files(paths), opts)
}

/// Reads and merges calendar files and in-memory tables (a table is read
/// with the CSV layout's columns, its cells typed as Parquet's are).
pub fn load_sources(sources: &[Source], opts: &CalendarOptions) -> Result<Calendar, CalendarError> {
    let mut summary = CalendarSummary::default();
    let mut releases = Vec::new();
    for source in sources {
        let path = source.path();
        summary.files.push(path.display().to_string());
        match source {
            Source::File(path) if is_ics(path) => {
                ics::read(path, opts, &mut releases, &mut summary)?
            }
            Source::File(path) => csv::read(path, opts, &mut releases, &mut summary)?,
            Source::Bytes { name, bytes } if looks_like_ics(bytes) => {
                ics::read_bytes(bytes, name, opts, &mut releases, &mut summary).map_err(
                    |message| CalendarError::Format {
                        path: path.clone(),
                        message: message.to_string(),
                    },
                )?
            }
            Source::Bytes { bytes, .. } => {
                let table =
                    Table::read_bytes(bytes.to_vec(), opts.delimiter).map_err(|message| {
                        CalendarError::Format {
                            path: path.clone(),
                            message: message.to_string(),
                        }
                    })?;
                csv::read_table(&table, &path, opts, &mut releases, &mut summary)?
            }
            Source::Frame { frame, .. } => csv::read_table(
                &Table::from_frame(frame.clone()),
                &path,
                opts,
                &mut releases,
                &mut summary,
            )?,
        }
    }
    if summary.log.rows_rejected > 0 && !opts.skip_bad_rows {
        let examples = summary
            .log
            .rejections
            .iter()
            .take(20)
            .map(|r| format!("  {} row {}: {}: {}", r.file, r.row, r.field, r.message))
            .collect::<Vec<_>>()
            .join("\n");
        return Err(CalendarError::Rejected {
            count: summary.log.rows_rejected,
            examples,
        });
    }
    let releases = merge_duplicates(releases, &mut summary);
    summary.releases = releases.len();
    Ok(Calendar { releases, summary })
}

/// Whether bytes without a file name (standard input) are an iCalendar
/// file: its first line, after a byte-order mark and blank space, is
/// `BEGIN:VCALENDAR` (RFC 5545 §3.4; names are case-insensitive, §2).
pub fn looks_like_ics(bytes: &[u8]) -> bool {
    let rest = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    let start = rest
        .iter()
        .position(|b| !b.is_ascii_whitespace())
        .unwrap_or(rest.len());
    rest[start..]
        .get(..15)
        .is_some_and(|head| head.eq_ignore_ascii_case(b"BEGIN:VCALENDAR"))
}

/// Whether a calendar file is read as iCalendar (by its extension).
pub fn is_ics(path: &Path) -> bool {
    matches!(
        path.extension()
            .and_then(|e| e.to_str())
            .map(|e| e.to_ascii_lowercase())
            .as_deref(),
        Some("ics" | "ical" | "ifb" | "icalendar")
    )
}

/// Sorts by instant and merges releases with the same instant, currency and
/// normalised title. The merged release keeps the first one's fields and the
/// higher tier.
fn merge_duplicates(mut rs: Vec<Release>, summary: &mut CalendarSummary) -> Vec<Release> {
    rs.sort_by(|a, b| a.at.cmp(&b.at).then_with(|| a.currency.cmp(&b.currency)));
    let mut out: Vec<Release> = Vec::with_capacity(rs.len());
    let mut seen: HashMap<(i64, String, String), usize> = HashMap::new();
    for r in rs {
        let key = (r.at, r.currency.clone(), normalise_title(&r.title));
        if let Some(&i) = seen.get(&key) {
            summary.duplicates_merged += 1;
            let kept = &mut out[i];
            kept.tier = kept.tier.max(r.tier);
            if kept.category.is_none() {
                kept.category = r.category;
            }
            continue;
        }
        seen.insert(key, out.len());
        out.push(r);
    }
    out
}

/// ISO 4217 alphabetic codes of current currencies and the precious metals
/// (list recalled from memory of the ISO 4217 table, not checked against
/// the current amendment); used to tell a currency from a category word.
pub const ISO_4217: &[&str] = &[
    "AED", "AFN", "ALL", "AMD", "ANG", "AOA", "ARS", "AUD", "AWG", "AZN", "BAM", "BBD", "BDT",
    "BGN", "BHD", "BIF", "BMD", "BND", "BOB", "BRL", "BSD", "BTN", "BWP", "BYN", "BZD", "CAD",
    "CDF", "CHF", "CLP", "CNY", "COP", "CRC", "CUP", "CVE", "CZK", "DJF", "DKK", "DOP", "DZD",
    "EGP", "ERN", "ETB", "EUR", "FJD", "FKP", "GBP", "GEL", "GHS", "GIP", "GMD", "GNF", "GTQ",
    "GYD", "HKD", "HNL", "HTG", "HUF", "IDR", "ILS", "INR", "IQD", "IRR", "ISK", "JMD", "JOD",
    "JPY", "KES", "KGS", "KHR", "KMF", "KPW", "KRW", "KWD", "KYD", "KZT", "LAK", "LBP", "LKR",
    "LRD", "LSL", "LYD", "MAD", "MDL", "MGA", "MKD", "MMK", "MNT", "MOP", "MRU", "MUR", "MVR",
    "MWK", "MXN", "MYR", "MZN", "NAD", "NGN", "NIO", "NOK", "NPR", "NZD", "OMR", "PAB", "PEN",
    "PGK", "PHP", "PKR", "PLN", "PYG", "QAR", "RON", "RSD", "RUB", "RWF", "SAR", "SBD", "SCR",
    "SDG", "SEK", "SGD", "SHP", "SLE", "SOS", "SRD", "SSP", "STN", "SVC", "SYP", "SZL", "THB",
    "TJS", "TMT", "TND", "TOP", "TRY", "TTD", "TWD", "TZS", "UAH", "UGX", "USD", "UYU", "UZS",
    "VES", "VND", "VUV", "WST", "XAF", "XAG", "XAU", "XCD", "XOF", "XPD", "XPF", "XPT", "YER",
    "ZAR", "ZMW", "ZWL",
];

/// Whether `s` is an ISO 4217 code (case-insensitive).
pub fn is_currency(s: &str) -> bool {
    s.len() == 3
        && ISO_4217
            .binary_search(&s.to_ascii_uppercase().as_str())
            .is_ok()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn currency_list_is_sorted_for_binary_search() {
        assert!(ISO_4217.windows(2).all(|w| w[0] < w[1]));
        assert!(is_currency("usd") && is_currency("XAU") && !is_currency("CPI"));
    }

    #[test]
    fn tier_words_only() {
        assert_eq!(Tier::parse(" High "), Some(Tier::High));
        assert_eq!(Tier::parse("med"), Some(Tier::Medium));
        assert_eq!(Tier::parse("1"), None);
        assert_eq!(Tier::parse("3"), None);
    }

    #[test]
    fn priority_three_level_scheme() {
        // RFC 5545 §3.8.1.9 quote in ../shared/REFERENCES.md §1.7.
        assert_eq!(Tier::from_priority(1), Some(Tier::High));
        assert_eq!(Tier::from_priority(4), Some(Tier::High));
        assert_eq!(Tier::from_priority(5), Some(Tier::Medium));
        assert_eq!(Tier::from_priority(6), Some(Tier::Low));
        assert_eq!(Tier::from_priority(9), Some(Tier::Low));
        assert_eq!(Tier::from_priority(0), None);
    }

    #[test]
    fn duplicates_merge_on_instant_currency_and_title() {
        let r = |title: &str, tier| Release {
            id: title.into(),
            at: 1000,
            end: 1000,
            all_day: false,
            title: title.into(),
            currency: "USD".into(),
            tier,
            category: None,
            region: None,
        };
        let mut s = CalendarSummary::default();
        let out = merge_duplicates(
            vec![
                r("Jobs report", Tier::Medium),
                r("JOBS  report.", Tier::High),
                r("Jobs report, revised", Tier::Low),
            ],
            &mut s,
        );
        assert_eq!(out.len(), 2);
        assert_eq!(s.duplicates_merged, 1);
        assert_eq!(out[0].tier, Tier::High);
    }
}
