//! Trade import: CSV and Parquet back-test trade lists, read through polars
//! into a columnar [`Trades`] table of UTC instants (SPEC §1).
//!
//! Columns are mapped by the user (`--map field=Column`, or a JSON mapping
//! file); times are parsed by [`crate::timefmt`] and resolved in the trades'
//! zone. Invariant: every data row is imported or rejected with its file,
//! row, field and reason — `rows_read = rows_imported + rows_rejected`.

use crate::table::{Cell, ColumnSource, Table};
use crate::timefmt::{TimeFormat, parse_stamp};
use crate::zones::{LocalPolicy, Zone, ZoneError};
use serde::Serialize;
use std::collections::{BTreeMap, HashMap};
use std::path::{Path, PathBuf};

/// Field names of SPEC §1, in the order the mapping lists them.
pub const FIELDS: &[&str] = &[
    "opened_at",
    "closed_at",
    "instrument",
    "pnl",
    "run",
    "side",
    "size",
    "entry_price",
    "exit_price",
    "fees",
    "equity_before",
    "pnl_pct",
];
const REQUIRED: &[&str] = &["opened_at", "closed_at", "instrument", "pnl"];

/// Imported trades, one entry per kept row in every column (input order).
#[derive(Debug, Clone, Default)]
pub struct Trades {
    /// Open and close instants, ms since epoch UTC.
    pub opened: Vec<i64>,
    pub closed: Vec<i64>,
    /// Index into `instruments`.
    pub instrument: Vec<u32>,
    pub instruments: Vec<String>,
    /// P/L in account currency, after costs.
    pub pnl: Vec<f64>,
    /// Index into `runs`; all 0 when the input has no runs.
    pub run: Vec<u32>,
    /// Run names; empty when the input has no runs.
    pub runs: Vec<String>,
    /// +1 long, −1 short, 0 unknown; `None` when the column is absent.
    pub side: Option<Vec<i8>>,
    pub size: Option<Vec<f64>>,
    pub entry_price: Option<Vec<f64>>,
    pub exit_price: Option<Vec<f64>>,
    pub fees: Option<Vec<f64>>,
    /// Account equity when the trade opened.
    pub equity_before: Option<Vec<f64>>,
    /// P/L as a percentage of equity at open.
    pub pnl_pct: Option<Vec<f64>>,
    /// Source file index (into `summary.files`) and data row (from 1).
    pub file: Vec<u16>,
    pub row: Vec<u32>,
}

impl Trades {
    pub fn len(&self) -> usize {
        self.pnl.len()
    }
    pub fn is_empty(&self) -> bool {
        self.pnl.is_empty()
    }
    pub fn has_runs(&self) -> bool {
        !self.runs.is_empty()
    }
    /// Earliest open and latest close, if any trade.
    pub fn span(&self) -> Option<(i64, i64)> {
        Some((*self.opened.iter().min()?, *self.closed.iter().max()?))
    }
}

/// One rejected input row.
#[derive(Debug, Clone, Serialize)]
pub struct Rejection {
    pub file: String,
    /// Data row, counting from 1 (the header is not counted).
    pub row: usize,
    pub field: String,
    pub reason: &'static str,
    pub message: String,
}

/// What the import read, kept, and rejected.
#[derive(Debug, Clone, Default, Serialize)]
pub struct TradeSummary {
    pub files: Vec<String>,
    pub rows_read: usize,
    pub rows_imported: usize,
    pub rows_rejected: usize,
    pub rejected_by_reason: BTreeMap<String, usize>,
    /// The first rejections (at most 1000), in input order.
    pub rejections: Vec<Rejection>,
}

/// Errors that stop a trade import.
#[derive(Debug, thiserror::Error)]
pub enum TradeError {
    #[error("trades {path}: {message}")]
    Read { path: PathBuf, message: String },
    #[error(
        "trades {path}: no column '{column}' for {field} (columns: {available}); map it with --map {field}=<column>"
    )]
    MissingColumn { path: PathBuf, field: String, column: String, available: String },
    #[error("{count} trade row(s) rejected, for example:\n{examples}\n(rerun with --skip-bad-rows to continue without them; reports then state what was skipped)")]
    Rejected { count: usize, examples: String },
    #[error("no trade files match '{0}'")]
    NoFiles(String),
    #[error("mapping: {0}")]
    Mapping(String),
}

/// Settings for reading trades.
#[derive(Debug, Clone)]
pub struct TradeOptions {
    pub zone: Zone,
    pub policy: LocalPolicy,
    pub time_format: TimeFormat,
    /// field → column name; unmapped fields use their own name.
    pub columns: HashMap<String, String>,
    pub delimiter: Option<u8>,
    pub skip_bad_rows: bool,
}

impl Default for TradeOptions {
    fn default() -> Self {
        TradeOptions {
            zone: Zone::Utc,
            policy: LocalPolicy::Error,
            time_format: TimeFormat::Auto,
            columns: HashMap::new(),
            delimiter: None,
            skip_bad_rows: false,
        }
    }
}

/// Parses `field=Column,field=Column` pairs (repeatable flag values).
pub fn parse_mapping(pairs: &[String], fields: &[&str]) -> Result<HashMap<String, String>, String> {
    let mut out = HashMap::new();
    for spec in pairs {
        for pair in spec.split(',').filter(|p| !p.trim().is_empty()) {
            let (f, c) = pair
                .split_once('=')
                .ok_or_else(|| format!("'{pair}' is not field=column"))?;
            let f = f.trim();
            if !fields.contains(&f) {
                return Err(format!("unknown field '{f}' in '{pair}'; fields are {}", fields.join(", ")));
            }
            out.insert(f.to_string(), c.trim().to_string());
        }
    }
    Ok(out)
}

/// Reads a JSON mapping file `{"field": "column", ...}`.
pub fn load_mapping_file(path: &Path, fields: &[&str]) -> Result<HashMap<String, String>, String> {
    let text = std::fs::read_to_string(path).map_err(|e| format!("{}: {e}", path.display()))?;
    let map: HashMap<String, String> =
        serde_json::from_str(&text).map_err(|e| format!("{}: {e} (expected {{\"field\": \"column\"}})", path.display()))?;
    if let Some(bad) = map.keys().find(|k| !fields.contains(&k.as_str())) {
        return Err(format!("{}: unknown field '{bad}'; fields are {}", path.display(), fields.join(", ")));
    }
    Ok(map)
}

/// Expands globs and plain paths into a file list.
pub fn expand_paths(specs: &[String]) -> Result<Vec<PathBuf>, TradeError> {
    let mut out = Vec::new();
    for s in specs {
        if s.contains(['*', '?', '[']) {
            let mut hits: Vec<PathBuf> = glob::glob(s)
                .map_err(|e| TradeError::Mapping(format!("bad glob '{s}': {e}")))?
                .filter_map(Result::ok)
                .collect();
            if hits.is_empty() {
                return Err(TradeError::NoFiles(s.clone()));
            }
            hits.sort();
            out.extend(hits);
        } else {
            out.push(PathBuf::from(s));
        }
    }
    Ok(out)
}

/// Reads all trade files. With several files and no `run` column, each file
/// becomes one run named by its file stem.
pub fn load(paths: &[PathBuf], opts: &TradeOptions) -> Result<(Trades, TradeSummary), TradeError> {
    let mut trades = Trades::default();
    let mut summary = TradeSummary::default();
    let mut instruments = Interner::default();
    let mut runs = Interner::default();
    let run_per_file = paths.len() > 1;
    for (fi, path) in paths.iter().enumerate() {
        let table = Table::read(path, opts.delimiter)
            .map_err(|message| TradeError::Read { path: path.clone(), message })?;
        summary.files.push(path.display().to_string());
        let file_run = run_per_file.then(|| {
            path.file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_default()
        });
        read_table(&table, path, fi as u16, file_run, opts, &mut trades, &mut summary, &mut instruments, &mut runs)?;
    }
    if summary.rows_rejected > 0 && !opts.skip_bad_rows {
        let examples = summary
            .rejections
            .iter()
            .take(20)
            .map(|r| format!("  {} row {}: {}: {}", r.file, r.row, r.field, r.message))
            .collect::<Vec<_>>()
            .join("\n");
        return Err(TradeError::Rejected { count: summary.rows_rejected, examples });
    }
    let mut inst: Vec<(String, u32)> = instruments.into_iter().collect();
    inst.sort_by_key(|x| x.1);
    trades.instruments = inst.into_iter().map(|x| x.0).collect();
    if !runs.is_empty() {
        let mut r: Vec<(String, u32)> = runs.into_iter().collect();
        r.sort_by_key(|x| x.1);
        trades.runs = r.into_iter().map(|x| x.0).collect();
    }
    Ok((trades, summary))
}

fn col(
    table: &Table,
    path: &Path,
    opts: &TradeOptions,
    field: &str,
) -> Result<Option<ColumnSource>, TradeError> {
    let name = opts.columns.get(field).map(String::as_str).unwrap_or(field);
    match table.column(name) {
        Some(c) => Ok(Some(c)),
        None if REQUIRED.contains(&field) || opts.columns.contains_key(field) => Err(TradeError::MissingColumn {
            path: path.to_path_buf(),
            field: field.to_string(),
            column: name.to_string(),
            available: table.names().join(", "),
        }),
        None => Ok(None),
    }
}

struct RowError {
    field: &'static str,
    reason: &'static str,
    message: String,
}

fn row_err(field: &'static str, reason: &'static str, message: impl Into<String>) -> RowError {
    RowError { field, reason, message: message.into() }
}

#[allow(clippy::too_many_arguments)]
fn read_table(
    table: &Table,
    path: &Path,
    file_index: u16,
    file_run: Option<String>,
    opts: &TradeOptions,
    trades: &mut Trades,
    summary: &mut TradeSummary,
    instruments: &mut Interner,
    runs: &mut Interner,
) -> Result<(), TradeError> {
    let opened = col(table, path, opts, "opened_at")?.expect("required");
    let closed = col(table, path, opts, "closed_at")?.expect("required");
    let instrument = col(table, path, opts, "instrument")?.expect("required");
    let pnl = col(table, path, opts, "pnl")?.expect("required");
    let run = col(table, path, opts, "run")?;
    let side = col(table, path, opts, "side")?;
    let optional: Vec<(&'static str, Option<ColumnSource>)> = ["size", "entry_price", "exit_price", "fees", "equity_before", "pnl_pct"]
        .into_iter()
        .map(|f| Ok((f, col(table, path, opts, f)?)))
        .collect::<Result<_, TradeError>>()?;
    // Optional columns present in any file exist for all rows (NaN elsewhere).
    let n_before = trades.len();
    let ensure = |v: &mut Option<Vec<f64>>, present: bool| {
        if present && v.is_none() {
            *v = Some(vec![f64::NAN; n_before]);
        }
    };
    for (f, c) in &optional {
        ensure(optional_slot(trades, f), c.is_some());
    }
    if side.is_some() && trades.side.is_none() {
        trades.side = Some(vec![0; n_before]);
    }
    let file_name = path.display().to_string();
    let file_run_id = file_run.map(|name| intern(runs, &name));
    let time = |c: &ColumnSource, i: usize, field: &'static str| -> Result<i64, RowError> {
        match c.get(i) {
            Cell::Null => Err(row_err(field, "missing_value", "empty")),
            Cell::Instant(ms) => Ok(ms),
            Cell::Num(v) => match opts.time_format {
                TimeFormat::EpochSeconds if v.is_finite() => Ok((v * 1000.0).round() as i64),
                TimeFormat::EpochMillis if v.is_finite() => Ok(v as i64),
                _ => Err(row_err(field, "bad_time", format!("number {v} where a time was expected; for epoch times give --time-format epoch-s or epoch-ms"))),
            },
            Cell::Str(s) => {
                let stamp = parse_stamp(s, &opts.time_format).map_err(|e| row_err(field, "bad_time", e.to_string()))?;
                stamp.resolve(&opts.zone, opts.policy).map_err(|e| match e {
                    ZoneError::Gap { .. } => row_err(field, "local_time_gap", e.to_string()),
                    ZoneError::Ambiguous { .. } => row_err(field, "local_time_ambiguous", e.to_string()),
                    other => row_err(field, "bad_time", other.to_string()),
                })
            }
        }
    };
    let number = |c: &ColumnSource, i: usize, field: &'static str, required: bool| -> Result<f64, RowError> {
        match c.get(i) {
            Cell::Null if required => Err(row_err(field, "missing_value", "empty")),
            Cell::Null => Ok(f64::NAN),
            Cell::Num(v) if v.is_finite() => Ok(v),
            Cell::Num(v) => Err(row_err(field, "non_finite", format!("{v} is not a finite number"))),
            Cell::Instant(_) => Err(row_err(field, "bad_number", "a time where a number was expected")),
            Cell::Str(s) => match parse_number(s) {
                Some(v) if v.is_finite() => Ok(v),
                Some(_) => Err(row_err(field, "non_finite", format!("'{s}' is not a finite number"))),
                None => Err(row_err(field, "bad_number", format!("'{}' is not a number", truncate(s)))),
            },
        }
    };
    for i in 0..table.height() {
        summary.rows_read += 1;
        let row = (|| -> Result<_, RowError> {
            let o = time(&opened, i, "opened_at")?;
            let c = time(&closed, i, "closed_at")?;
            if c < o {
                return Err(row_err("closed_at", "closed_before_opened", format!(
                    "closes at {} before it opens at {}", crate::zones::format_utc(c), crate::zones::format_utc(o)
                )));
            }
            let inst: std::borrow::Cow<str> = match instrument.get(i) {
                Cell::Str(s) if !s.trim().is_empty() => s.trim().into(),
                Cell::Num(v) => v.to_string().into(),
                _ => return Err(row_err("instrument", "missing_value", "empty")),
            };
            let p = number(&pnl, i, "pnl", true)?;
            let r = match &run {
                Some(rc) => match rc.get(i) {
                    Cell::Str(s) if !s.trim().is_empty() => Some(std::borrow::Cow::Borrowed(s.trim())),
                    Cell::Num(v) => Some(format_run_number(v).into()),
                    _ => return Err(row_err("run", "missing_value", "empty")),
                },
                None => None,
            };
            let sd = match &side {
                Some(sc) => Some(match sc.get(i) {
                    Cell::Null => 0,
                    Cell::Num(v) if v > 0.0 => 1,
                    Cell::Num(v) if v < 0.0 => -1,
                    Cell::Str(s) => parse_side(s).ok_or_else(|| {
                        row_err("side", "bad_side", format!("'{}' is not long/short, buy/sell or 1/-1", truncate(s)))
                    })?,
                    _ => return Err(row_err("side", "bad_side", "not long/short, buy/sell or 1/-1")),
                }),
                None => None,
            };
            let mut extras = [f64::NAN; 6];
            for (k, (f, c)) in optional.iter().enumerate() {
                if let Some(c) = c {
                    extras[k] = number(c, i, f, false)?;
                }
            }
            Ok((o, c, inst, p, r, sd, extras))
        })();
        match row {
            Ok((o, c, inst, p, r, sd, extras)) => {
                summary.rows_imported += 1;
                trades.opened.push(o);
                trades.closed.push(c);
                trades.instrument.push(intern(instruments, &inst));
                trades.pnl.push(p);
                trades.run.push(match (r, file_run_id) {
                    (Some(name), _) => intern(runs, &name),
                    (None, Some(id)) => id,
                    (None, None) => 0,
                });
                if let Some(v) = trades.side.as_mut() {
                    v.push(sd.unwrap_or(0));
                }
                for (k, (f, _)) in optional.iter().enumerate() {
                    if let Some(v) = optional_slot(trades, f) {
                        v.push(extras[k]);
                    }
                }
                trades.file.push(file_index);
                trades.row.push((i + 1) as u32);
            }
            Err(e) => {
                summary.rows_rejected += 1;
                *summary.rejected_by_reason.entry(e.reason.to_string()).or_default() += 1;
                if summary.rejections.len() < 1000 {
                    summary.rejections.push(Rejection {
                        file: file_name.clone(),
                        row: i + 1,
                        field: e.field.to_string(),
                        reason: e.reason,
                        message: e.message,
                    });
                }
            }
        }
    }
    Ok(())
}

fn optional_slot<'a>(t: &'a mut Trades, field: &str) -> &'a mut Option<Vec<f64>> {
    match field {
        "size" => &mut t.size,
        "entry_price" => &mut t.entry_price,
        "exit_price" => &mut t.exit_price,
        "fees" => &mut t.fees,
        "equity_before" => &mut t.equity_before,
        "pnl_pct" => &mut t.pnl_pct,
        _ => unreachable!("not an optional numeric field: {field}"),
    }
}

/// FNV-1a: a fast hash for interning short codes (instrument and run
/// names), where SipHash's protection against crafted keys is not needed.
#[derive(Default, Clone, Copy)]
pub struct Fnv(u64);

impl std::hash::Hasher for Fnv {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        let mut h = if self.0 == 0 { 0xcbf2_9ce4_8422_2325 } else { self.0 };
        for &b in bytes {
            h = (h ^ b as u64).wrapping_mul(0x100_0000_01b3);
        }
        self.0 = h;
    }
}

type Interner = HashMap<String, u32, std::hash::BuildHasherDefault<Fnv>>;

fn intern(map: &mut Interner, s: &str) -> u32 {
    if let Some(&i) = map.get(s) {
        return i;
    }
    let i = map.len() as u32;
    map.insert(s.to_string(), i);
    i
}

fn truncate(s: &str) -> String {
    s.chars().take(40).collect()
}

fn format_run_number(v: f64) -> String {
    if v.fract() == 0.0 && v.abs() < 1e15 { format!("{}", v as i64) } else { v.to_string() }
}

/// Reads a number written with an optional thousands separator (`1,234.5`
/// is not accepted in comma-delimited files since the field would split;
/// spaces and `_` are allowed) and an optional currency sign.
pub fn parse_number(s: &str) -> Option<f64> {
    let t = s.trim();
    if let Ok(v) = t.parse::<f64>() {
        return Some(v);
    }
    let cleaned: String = t.chars().filter(|c| !matches!(c, ' ' | '_' | '\u{a0}' | '$' | '€' | '£')).collect();
    cleaned.parse().ok()
}

/// long/buy/1 → +1, short/sell/-1 → −1.
pub fn parse_side(s: &str) -> Option<i8> {
    match s.trim().to_ascii_lowercase().as_str() {
        "long" | "buy" | "b" | "l" | "1" | "+1" => Some(1),
        "short" | "sell" | "s" | "-1" => Some(-1),
        "" => Some(0),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sides_and_numbers() {
        assert_eq!(parse_side("Buy"), Some(1));
        assert_eq!(parse_side("SHORT"), Some(-1));
        assert_eq!(parse_side("-1"), Some(-1));
        assert_eq!(parse_side("flat"), None);
        assert_eq!(parse_number(" 1 234.50 "), Some(1234.5));
        assert_eq!(parse_number("-$12.5"), Some(-12.5));
        assert_eq!(parse_number("abc"), None);
        assert!(parse_number("NaN").unwrap().is_nan());
    }

    #[test]
    fn mapping_pairs() {
        let m = parse_mapping(&["opened_at=Open Time, closed_at = Close Time".into(), "pnl=Profit".into()], FIELDS).unwrap();
        assert_eq!(m["opened_at"], "Open Time");
        assert_eq!(m["closed_at"], "Close Time");
        assert_eq!(m["pnl"], "Profit");
        assert!(parse_mapping(&["profit=P".into()], FIELDS).unwrap_err().contains("unknown field"));
    }
}
