//! Trade import: CSV and Parquet back-test trade lists, read through polars
//! into a columnar [`Trades`] table of UTC instants (docs/method.md §1).
//!
//! Columns are mapped by the user (`--map field=Column`, or a JSON mapping
//! file); times are parsed by [`crate::import::timefmt`] and resolved in the trades'
//! zone. Invariant: every data row is imported or rejected with its file,
//! row, field and reason — `rows_read = rows_imported + rows_rejected`.

use crate::import::csvchunks::{self, Parsed, Record, ScanError};
use crate::import::table::{Cell, ColumnSource, Source, Table};
use crate::import::timefmt::{Stamp, TimeFormat, parse_stamp, trim_fast};
use crate::import::zones::{DayOffsetCache, LocalPolicy, Zone, ZoneError};
use rayon::prelude::*;
use serde::Serialize;
use std::collections::{BTreeMap, HashMap};
use std::io::Read;
use std::path::{Path, PathBuf};

/// Field names of docs/method.md §1, in the order the mapping lists them.
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
    /// Close instants, ms since epoch UTC.
    pub closed: Vec<i64>,
    /// Index into `instruments`.
    pub instrument: Vec<u32>,
    /// Instrument names, numbered in order of first appearance.
    pub instruments: Vec<String>,
    /// P/L in account currency, after costs.
    pub pnl: Vec<f64>,
    /// Index into `runs`; all 0 when the input has no runs.
    pub run: Vec<u32>,
    /// Run names; empty when the input has no runs.
    pub runs: Vec<String>,
    /// +1 long, −1 short, 0 unknown; `None` when the column is absent.
    pub side: Option<Vec<i8>>,
    /// Position size, when mapped.
    pub size: Option<Vec<f64>>,
    /// Entry price, when mapped.
    pub entry_price: Option<Vec<f64>>,
    /// Exit price, when mapped.
    pub exit_price: Option<Vec<f64>>,
    /// Fees as written (already inside `pnl` when mapped into it).
    pub fees: Option<Vec<f64>>,
    /// Account equity when the trade opened.
    pub equity_before: Option<Vec<f64>>,
    /// P/L as a percentage of equity at open.
    pub pnl_pct: Option<Vec<f64>>,
    /// Source file index (into `summary.files`) and data row (from 1).
    pub file: Vec<u16>,
    /// Data row in its file, from 1.
    pub row: Vec<u32>,
    /// Columns named by `--keep`, as written, one vector per column.
    pub kept_names: Vec<String>,
    /// The `--keep` columns' values, one vector per column.
    pub kept: Vec<Vec<String>>,
}

impl Trades {
    /// Number of trades.
    pub fn len(&self) -> usize {
        self.pnl.len()
    }
    /// Whether there are no trades.
    pub fn is_empty(&self) -> bool {
        self.pnl.is_empty()
    }
    /// Whether the trades carry run names (an optimisation export).
    pub fn has_runs(&self) -> bool {
        !self.runs.is_empty()
    }
    /// Room for `n` more rows in the columns every input has.
    fn reserve(&mut self, n: usize) {
        self.opened.reserve(n);
        self.closed.reserve(n);
        self.pnl.reserve(n);
        self.instrument.reserve(n);
        self.run.reserve(n);
        self.file.reserve(n);
        self.row.reserve(n);
    }

    fn shrink_to_fit(&mut self) {
        self.opened.shrink_to_fit();
        self.closed.shrink_to_fit();
        self.pnl.shrink_to_fit();
        self.instrument.shrink_to_fit();
        self.run.shrink_to_fit();
        self.file.shrink_to_fit();
        self.row.shrink_to_fit();
        for v in [
            &mut self.size,
            &mut self.entry_price,
            &mut self.exit_price,
            &mut self.fees,
            &mut self.equity_before,
            &mut self.pnl_pct,
        ]
        .into_iter()
        .flatten()
        {
            v.shrink_to_fit();
        }
        if let Some(v) = self.side.as_mut() {
            v.shrink_to_fit();
        }
    }

    /// Only the trades of the named runs (`--run`), every column kept and
    /// run ids renumbered in the remaining runs' order; a name that is not
    /// a run of the input is an error naming the runs there are.
    pub fn only_runs(self, names: &[String]) -> Result<Trades, RunSelectionError> {
        let wanted: Vec<u32> = names
            .iter()
            .map(|n| {
                self.runs
                    .iter()
                    .position(|r| r == n.trim())
                    .map(|i| i as u32)
                    .ok_or_else(|| {
                        let mut all = self.runs.clone();
                        all.sort_by(|a, b| run_order(a, b));
                        if all.is_empty() {
                            RunSelectionError::NoRuns { name: n.clone() }
                        } else {
                            RunSelectionError::NoSuchRun {
                                name: n.clone(),
                                runs: all.join(", "),
                            }
                        }
                    })
            })
            .collect::<Result<_, _>>()?;
        let keep: Vec<usize> = (0..self.len())
            .filter(|&i| wanted.contains(&self.run[i]))
            .collect();
        let pick = |v: &[f64]| keep.iter().map(|&i| v[i]).collect::<Vec<f64>>();
        let mut runs_kept: Vec<u32> = wanted.clone();
        runs_kept.sort();
        runs_kept.dedup();
        let new_id = |r: u32| runs_kept.iter().position(|&x| x == r).expect("kept") as u32;
        // Instruments those runs trade, numbered by first appearance, as a
        // file holding only these runs would number them.
        let mut inst_map: Vec<Option<u32>> = vec![None; self.instruments.len()];
        let mut instruments = Vec::new();
        let instrument: Vec<u32> = keep
            .iter()
            .map(|&i| {
                let old = self.instrument[i] as usize;
                *inst_map[old].get_or_insert_with(|| {
                    instruments.push(self.instruments[old].clone());
                    (instruments.len() - 1) as u32
                })
            })
            .collect();
        Ok(Trades {
            opened: keep.iter().map(|&i| self.opened[i]).collect(),
            closed: keep.iter().map(|&i| self.closed[i]).collect(),
            instrument,
            pnl: pick(&self.pnl),
            run: keep.iter().map(|&i| new_id(self.run[i])).collect(),
            runs: runs_kept
                .iter()
                .map(|&r| self.runs[r as usize].clone())
                .collect(),
            side: self
                .side
                .as_ref()
                .map(|v| keep.iter().map(|&i| v[i]).collect()),
            size: self.size.as_deref().map(pick),
            entry_price: self.entry_price.as_deref().map(pick),
            exit_price: self.exit_price.as_deref().map(pick),
            fees: self.fees.as_deref().map(pick),
            equity_before: self.equity_before.as_deref().map(pick),
            pnl_pct: self.pnl_pct.as_deref().map(pick),
            file: keep.iter().map(|&i| self.file[i]).collect(),
            row: keep.iter().map(|&i| self.row[i]).collect(),
            kept: self
                .kept
                .iter()
                .map(|c| keep.iter().map(|&i| c[i].clone()).collect())
                .collect(),
            kept_names: self.kept_names,
            instruments,
        })
    }

    /// Earliest open and latest close, if any trade.
    pub fn span(&self) -> Option<(i64, i64)> {
        Some((*self.opened.iter().min()?, *self.closed.iter().max()?))
    }
}

pub use crate::import::log::Rejection;
use crate::import::log::{ImportLog, KEEP_REJECTIONS, RowError};

/// What the import read, kept, and rejected.
#[derive(Debug, Clone, Default, Serialize)]
pub struct TradeSummary {
    /// The files read, in order.
    pub files: Vec<String>,
    /// Data rows read (headers not counted).
    pub rows_read: usize,
    /// Rows imported as trades.
    pub rows_imported: usize,
    /// Rows rejected: counts by reason and the first ones kept.
    #[serde(flatten)]
    pub log: ImportLog,
    /// How each file's time columns were read (which zone rule applied).
    pub time_columns: Vec<TimeColumn>,
    /// How each trade's P/L was formed from the columns, in words
    /// (`Gross + Costs + Financing − |Fee|`).
    pub pnl_formed_as: String,
    /// The runs `--run` kept (empty: all); rows of other runs are imported
    /// and then left out of every figure.
    pub runs_selected: Vec<String>,
}

/// How one file's time column was read.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct TimeColumn {
    /// The file.
    pub file: String,
    /// The trade field (`opened_at` or `closed_at`).
    pub field: &'static str,
    /// The file's column that fed it.
    pub column: String,
    /// In words: text, zoned or naive timestamps, or epoch numbers, and the
    /// zone that applied.
    pub read_as: String,
}

/// Errors that stop a trade import.
#[derive(Debug, thiserror::Error)]
#[allow(missing_docs)] // variant fields are named in each message
pub enum TradeError {
    /// A file could not be read.
    #[error("trades {path}: {message}")]
    Read { path: PathBuf, message: String },
    /// Required or mapped columns are absent.
    #[error("trades {path}: no column {missing} (columns: {available}){hint}")]
    MissingColumns {
        path: PathBuf,
        missing: String,
        available: String,
        hint: String,
    },
    #[error(
        "{count} trade row(s) rejected, for example:\n{examples}\n(rerun with --skip-bad-rows to continue without them; reports then state what was skipped)"
    )]
    /// Rows were rejected and skipping them was not asked for.
    Rejected { count: usize, examples: String },
    /// A path pattern matched no file.
    #[error("no trade files match '{0}'")]
    NoFiles(String),
    /// The column mapping cannot be used.
    #[error("mapping: {0}")]
    Mapping(String),
}

/// Settings for reading trades.
#[derive(Debug, Clone)]
pub struct TradeOptions {
    /// Zone of timestamps without an offset.
    pub zone: Zone,
    /// What to do with local times in a DST gap or overlap.
    pub policy: LocalPolicy,
    /// How time text is read (`Auto` recognises the common forms).
    pub time_format: TimeFormat,
    /// field → column name; unmapped fields use their own name.
    pub columns: HashMap<String, String>,
    /// Field separator; `None`: detected, and the guess is shown.
    pub delimiter: Option<u8>,
    /// Import the good rows and report the bad ones instead of stopping.
    pub skip_bad_rows: bool,
    /// The user's own columns carried unchanged into the per-trade outputs
    /// (`--keep`).
    pub keep: Vec<String>,
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
            keep: Vec::new(),
        }
    }
}

/// `--run` named a run the input does not have.
#[derive(Debug, thiserror::Error)]
#[allow(missing_docs)] // variant fields are named in each message
pub enum RunSelectionError {
    /// A run was asked for but the trades have no runs.
    #[error("--run {name}: the trades have no runs (map a run column, or give one file per run)")]
    NoRuns { name: String },
    /// The named run is not among the trades' runs.
    #[error("--run {name}: no such run; runs are {runs}")]
    NoSuchRun { name: String, runs: String },
}

/// A column mapping (`--map`, `--map-file`, `--calendar-map`) that cannot
/// be used.
#[derive(Debug, thiserror::Error)]
#[allow(missing_docs)] // variant fields are named in each message
pub enum MappingError {
    /// A mapping entry that is not `field=column`.
    #[error("'{0}' is not field=column")]
    NotAPair(String),
    /// A mapping names a field the tool does not know.
    #[error("unknown field '{field}' in '{pair}'; fields are {fields}")]
    UnknownField {
        field: String,
        pair: String,
        fields: String,
    },
    /// A mapping file could not be read.
    #[error("{}: {source}", path.display())]
    Read {
        path: PathBuf,
        source: std::io::Error,
    },
    /// A mapping file is not a JSON object of strings.
    #[error("{}: {source} (expected {{\"field\": \"column\"}})", path.display())]
    Json {
        path: PathBuf,
        source: serde_json::Error,
    },
    /// A mapping file names a field the tool does not know.
    #[error("{}: unknown field '{field}'; fields are {fields}", path.display())]
    UnknownFieldInFile {
        path: PathBuf,
        field: String,
        fields: String,
    },
}

/// Parses `field=Column,field=Column` pairs (repeatable flag values).
pub fn parse_mapping(
    pairs: &[String],
    fields: &[&str],
) -> Result<HashMap<String, String>, MappingError> {
    let mut out = HashMap::new();
    for spec in pairs {
        for pair in spec.split(',').filter(|p| !p.trim().is_empty()) {
            let (f, c) = pair
                .split_once('=')
                .ok_or_else(|| MappingError::NotAPair(pair.to_string()))?;
            let f = f.trim();
            if !fields.contains(&f) {
                return Err(MappingError::UnknownField {
                    field: f.to_string(),
                    pair: pair.to_string(),
                    fields: fields.join(", "),
                });
            }
            out.insert(f.to_string(), c.trim().to_string());
        }
    }
    Ok(out)
}

/// Reads a JSON mapping file `{"field": "column", ...}`.
pub fn load_mapping_file(
    path: &Path,
    fields: &[&str],
) -> Result<HashMap<String, String>, MappingError> {
    let text = std::fs::read_to_string(path).map_err(|source| MappingError::Read {
        path: path.to_path_buf(),
        source,
    })?;
    let map: HashMap<String, String> =
        serde_json::from_str(&text).map_err(|source| MappingError::Json {
            path: path.to_path_buf(),
            source,
        })?;
    if let Some(bad) = map.keys().find(|k| !fields.contains(&k.as_str())) {
        return Err(MappingError::UnknownFieldInFile {
            path: path.to_path_buf(),
            field: bad.clone(),
            fields: fields.join(", "),
        });
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
/// becomes one run named by its file stem. CSV files are read in blocks on
/// every core ([`crate::import::csvchunks`]); Parquet through polars.
pub fn load(paths: &[PathBuf], opts: &TradeOptions) -> Result<(Trades, TradeSummary), TradeError> {
    load_sources(&Source::files(paths), opts)
}

/// Reads trade files and in-memory tables alike (a table is read as a
/// Parquet file is: typed columns); with several sources and no `run`
/// column, each becomes one run named by its file stem or table name.
pub fn load_sources(
    sources: &[Source],
    opts: &TradeOptions,
) -> Result<(Trades, TradeSummary), TradeError> {
    let mut sink = Sink::default();
    let run_per_file = sources.len() > 1;
    for (fi, source) in sources.iter().enumerate() {
        let path = source.path();
        sink.summary.files.push(path.display().to_string());
        let file_run = run_per_file.then(|| match source {
            Source::Frame { name, .. } | Source::Bytes { name, .. } => name.clone(),
            Source::File(_) => path
                .file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_default(),
        });
        sink.start_file(fi as u16, &path, file_run);
        match source {
            Source::Frame { frame, .. } => {
                let table = Table::from_frame(frame.clone());
                read_table(&table, &path, opts, &mut sink)?;
            }
            Source::File(path)
                if crate::import::table::TableFormat::of_path(path)
                    == crate::import::table::TableFormat::Parquet =>
            {
                read_parquet(path, opts, &mut sink)?
            }
            Source::File(path) => read_csv(path, opts, &mut sink)?,
            Source::Bytes { bytes, .. } if bytes.starts_with(b"PAR1") => {
                return Err(TradeError::Read {
                    path,
                    message: "Parquet is read from a file, not from standard input: name the file"
                        .into(),
                });
            }
            Source::Bytes { bytes, .. } => {
                let reader = std::io::Cursor::new(bytes.clone());
                read_delimited(
                    &path,
                    Box::new(reader),
                    &bytes[..bytes.len().min(64 * 1024)],
                    None,
                    opts,
                    &mut sink,
                )?
            }
        }
    }
    let Sink {
        mut trades,
        mut summary,
        instruments,
        runs,
        ..
    } = sink;
    trades.shrink_to_fit();
    trades.kept_names = opts.keep.clone();
    if !opts.keep.is_empty() && trades.kept.is_empty() {
        trades.kept = vec![Vec::new(); opts.keep.len()];
    }
    summary.pnl_formed_as = pnl_formation(opts, trades.fees.is_some());
    if summary.log.rows_rejected > 0 && !opts.skip_bad_rows {
        let examples = summary
            .log
            .rejections
            .iter()
            .take(20)
            .map(|r| format!("  {} row {}: {}: {}", r.file, r.row, r.field, r.message))
            .collect::<Vec<_>>()
            .join("\n");
        return Err(TradeError::Rejected {
            count: summary.log.rows_rejected,
            examples,
        });
    }
    trades.instruments = names_in_order(instruments);
    if !runs.is_empty() {
        trades.runs = names_in_order(runs);
    }
    Ok((trades, summary))
}

/// Run names in their one natural order, used by every listing, tie-break
/// and sort: numbers first, by value (2 before 10, 1.25 before 1.5), then
/// the other names with their digit runs compared by value (`p2` before
/// `p10`); ties by text.
pub fn run_order(a: &str, b: &str) -> std::cmp::Ordering {
    use std::cmp::Ordering;
    let number = |s: &str| s.trim().parse::<f64>().ok().filter(|v| v.is_finite());
    match (number(a), number(b)) {
        (Some(x), Some(y)) => x.total_cmp(&y),
        (Some(_), None) => Ordering::Less,
        (None, Some(_)) => Ordering::Greater,
        (None, None) => natural_text_order(a.as_bytes(), b.as_bytes()),
    }
    .then_with(|| a.cmp(b))
}

/// Text order with each run of ASCII digits compared by its value.
fn natural_text_order(mut a: &[u8], mut b: &[u8]) -> std::cmp::Ordering {
    use std::cmp::Ordering;
    let digits = |s: &[u8]| s.iter().take_while(|c| c.is_ascii_digit()).count();
    loop {
        match (a.first(), b.first()) {
            (None, None) => return Ordering::Equal,
            (None, Some(_)) => return Ordering::Less,
            (Some(_), None) => return Ordering::Greater,
            (Some(x), Some(y)) if x.is_ascii_digit() && y.is_ascii_digit() => {
                let (n, m) = (digits(a), digits(b));
                let strip = |s: &[u8]| -> usize { s.iter().take_while(|&&c| c == b'0').count() };
                let (da, db) = (&a[strip(&a[..n]).min(n)..n], &b[strip(&b[..m]).min(m)..m]);
                let o = da.len().cmp(&db.len()).then_with(|| da.cmp(db));
                if o != Ordering::Equal {
                    return o;
                }
                (a, b) = (&a[n..], &b[m..]);
            }
            (Some(x), Some(y)) => {
                if x != y {
                    return x.cmp(y);
                }
                (a, b) = (&a[1..], &b[1..]);
            }
        }
    }
}

/// A run's own random seed: `--seed` mixed with the run's name (FNV-1a,
/// then SplitMix64's finaliser), so a run draws the same stream whatever
/// the row order and however the runs are split across files.
pub fn run_seed(seed: u64, run: &str) -> u64 {
    use std::hash::Hasher;
    let mut h = Fnv::default();
    h.write(run.as_bytes());
    let mut z = seed ^ h.finish();
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

/// Each trade's place in `order` (a permutation of the trade indices, as
/// a close order is): entry i is the k with `order[k] == i`.
pub fn places_in(order: &[u32]) -> Vec<u32> {
    let mut place = vec![0u32; order.len()];
    for (k, &i) in order.iter().enumerate() {
        place[i as usize] = k as u32;
    }
    place
}

pub(crate) fn names_in_order(map: Interner) -> Vec<String> {
    let mut v: Vec<(String, u32)> = map.into_iter().collect();
    v.sort_by_key(|x| x.1);
    v.into_iter().map(|x| x.0).collect()
}

/// The source column of each field in [`FIELDS`] order, `None` when absent.
type Slots<C> = [Option<C>; 12];
const OPENED: usize = 0;
const CLOSED: usize = 1;
const INSTRUMENT: usize = 2;
const PNL: usize = 3;
const RUN: usize = 4;
const SIDE: usize = 5;
const FEES: usize = 9;
/// size, entry_price, exit_price, fees, equity_before, pnl_pct.
const EXTRAS: std::ops::Range<usize> = 6..12;

/// Finds every field's column by (mapped) name; required fields and
/// explicitly mapped ones must exist. `pnl` may name several columns joined
/// by `+` (summed, each sign as written). Returns the slots and the extra
/// columns: the P/L parts after the first, then the `--keep` columns.
/// Every missing column is named in one error.
fn slots<C>(
    names: &[String],
    path: &Path,
    opts: &TradeOptions,
    mut find: impl FnMut(&str) -> Option<C>,
) -> Result<(Slots<C>, Vec<C>), TradeError> {
    let mut out: Slots<C> = Default::default();
    let mut extra = Vec::new();
    let mut missing: Vec<(String, String)> = Vec::new();
    for (k, field) in FIELDS.iter().enumerate() {
        let name = opts
            .columns
            .get(*field)
            .map(String::as_str)
            .unwrap_or(field);
        let parts = pnl_parts(name);
        out[k] = find(if k == PNL { parts[0] } else { name });
        if k == PNL && out[k].is_some() {
            for part in &parts[1..] {
                match find(part) {
                    Some(c) => extra.push(c),
                    None => missing.push((field.to_string(), part.to_string())),
                }
            }
        }
        if out[k].is_none() && (REQUIRED.contains(field) || opts.columns.contains_key(*field)) {
            missing.push((
                field.to_string(),
                if k == PNL {
                    parts[0].to_string()
                } else {
                    name.to_string()
                },
            ));
        }
    }
    for name in &opts.keep {
        match find(name) {
            Some(c) => extra.push(c),
            None => missing.push(("--keep".into(), name.clone())),
        }
    }
    if !missing.is_empty() {
        return Err(TradeError::MissingColumns {
            path: path.to_path_buf(),
            missing: missing
                .iter()
                .map(|(f, c)| format!("'{c}' for {f}"))
                .collect::<Vec<_>>()
                .join(", "),
            available: names.join(", "),
            hint: {
                let maps: Vec<String> = missing
                    .iter()
                    .filter(|(f, _)| f != "--keep")
                    .map(|(f, _)| format!("--map {f}=<column>"))
                    .collect();
                match maps.len() {
                    0 => String::new(),
                    1 => format!("; map it with {}", maps[0]),
                    _ => format!("; map them with {}", maps.join(", ")),
                }
            },
        });
    }
    Ok((out, extra))
}

/// The columns a `pnl` mapping sums: `Gross+Costs+Financing` → three.
fn pnl_parts(name: &str) -> Vec<&str> {
    let parts: Vec<&str> = name
        .split('+')
        .map(str::trim)
        .filter(|p| !p.is_empty())
        .collect();
    if parts.len() > 1 { parts } else { vec![name] }
}

/// The P/L formation in words, for `check` and the reports.
fn pnl_formation(opts: &TradeOptions, fees_present: bool) -> String {
    let name = opts.columns.get("pnl").map(String::as_str).unwrap_or("pnl");
    let mut s = pnl_parts(name).join(" + ");
    if fees_present {
        s.push_str(&format!(
            " − |{}|",
            opts.columns
                .get("fees")
                .map(String::as_str)
                .unwrap_or("fees")
        ));
    }
    s
}

fn row_err(field: &'static str, reason: &'static str, message: impl Into<String>) -> RowError {
    RowError::new(field, reason, message.into())
}

/// One valid row; names borrow from the source until interned.
struct Row<'a> {
    opened: i64,
    closed: i64,
    instrument: std::borrow::Cow<'a, str>,
    pnl: f64,
    run: Option<RunName<'a>>,
    side: i8,
    extras: [f64; 6],
    /// `--keep` values, as written.
    kept: Vec<String>,
}

/// A run as a row gives it: text, or a number (a typed Parquet column),
/// named in text only when first met.
enum RunName<'a> {
    Text(&'a str),
    Number(f64),
}

/// Validates one row. `cell(k)` reads field `k` (a [`FIELDS`] index) of a
/// present column; `present` says which are. `decimal_comma`: numbers may
/// use a comma as decimal mark (files not delimited by commas).
fn parse_row<'a>(
    present: &[bool; 12],
    cell: impl Fn(usize) -> Result<Cell<'a>, RowError>,
    extra: impl Fn(usize) -> Result<Cell<'a>, RowError>,
    n_pnl_parts: usize,
    opts: &TradeOptions,
    decimal_comma: bool,
    cache: &mut DayOffsetCache,
) -> Result<Row<'a>, RowError> {
    let mut time = |k: usize| -> Result<i64, RowError> {
        let field = FIELDS[k];
        let out_of_range = |what: String| {
            row_err(
                field,
                "bad_time",
                format!("{what} is {}", crate::import::zones::YEARS_MESSAGE),
            )
        };
        let local = |ndt: chrono::NaiveDateTime, cache: &mut DayOffsetCache| {
            opts.zone
                .to_utc_cached(&ndt, opts.policy, cache)
                .map_err(|e| match e {
                    ZoneError::Gap { .. } => row_err(field, "local_time_gap", e.to_string()),
                    ZoneError::Ambiguous { .. } => {
                        row_err(field, "local_time_ambiguous", e.to_string())
                    }
                    other => row_err(field, "bad_time", other.to_string()),
                })
        };
        let ms = match cell(k)? {
            Cell::Null => return Err(row_err(field, "missing_value", "empty")),
            Cell::Instant(ms) => ms,
            Cell::Local(wall) => {
                if !crate::import::zones::in_accepted_years(wall) {
                    return Err(out_of_range(format!("timestamp {wall} ms")));
                }
                local(crate::import::zones::ms_to_naive(wall), cache)?
            }
            Cell::Date(_) => {
                return Err(row_err(
                    field,
                    "bad_time",
                    "a date without a time of day; trade times need one",
                ));
            }
            Cell::Num(v) => match opts.time_format {
                TimeFormat::EpochSeconds => crate::import::timefmt::epoch_seconds_to_ms(v)
                    .ok_or_else(|| out_of_range(format!("epoch seconds {v}")))?,
                TimeFormat::EpochMillis if v.is_finite() && v.fract() == 0.0 => v as i64,
                TimeFormat::EpochMillis => {
                    return Err(row_err(
                        field,
                        "bad_time",
                        format!("{v} is not whole epoch milliseconds"),
                    ));
                }
                _ => {
                    return Err(row_err(
                        field,
                        "bad_time",
                        format!(
                            "number {v} where a time was expected; for epoch times give --time-format epoch-s or epoch-ms"
                        ),
                    ));
                }
            },
            Cell::Str(s) => {
                let stamp = parse_stamp(s, &opts.time_format)
                    .map_err(|e| row_err(field, "bad_time", e.to_string()))?;
                match stamp {
                    Stamp::Instant(ms) => ms,
                    Stamp::Local(ndt) => local(ndt, cache)?,
                }
            }
        };
        if !crate::import::zones::in_accepted_years(ms) {
            return Err(out_of_range(format!("{ms} ms since 1970")));
        }
        Ok(ms)
    };
    let opened = time(OPENED)?;
    let closed = time(CLOSED)?;
    if closed < opened {
        return Err(row_err(
            "closed_at",
            "closed_before_opened",
            format!(
                "closes at {} before it opens at {}",
                crate::import::zones::format_utc(closed),
                crate::import::zones::format_utc(opened)
            ),
        ));
    }
    let number = |k: usize, required: bool| -> Result<f64, RowError> {
        let field = FIELDS[k];
        match cell(k)? {
            Cell::Null if required => Err(row_err(field, "missing_value", "empty")),
            Cell::Null => Ok(f64::NAN),
            Cell::Num(v) if v.is_finite() => Ok(v),
            Cell::Num(v) => Err(row_err(
                field,
                "non_finite",
                format!("{v} is not a finite number"),
            )),
            Cell::Instant(_) | Cell::Local(_) | Cell::Date(_) => Err(row_err(
                field,
                "bad_number",
                "a time where a number was expected",
            )),
            Cell::Str(s) => match crate::import::number::parse_number(s, decimal_comma) {
                Some(v) if v.is_finite() => Ok(v),
                Some(_) => Err(row_err(
                    field,
                    "non_finite",
                    format!("'{}' is not a finite number", truncate(s)),
                )),
                None => Err(row_err(
                    field,
                    "bad_number",
                    format!("'{}' is not a number", truncate(s)),
                )),
            },
        }
    };
    let instrument: std::borrow::Cow<str> = match cell(INSTRUMENT)? {
        Cell::Str(s) => trim_fast(s).into(),
        Cell::Num(v) => v.to_string().into(),
        _ => return Err(row_err("instrument", "missing_value", "empty")),
    };
    let mut pnl = number(PNL, true)?;
    // Further P/L columns (`pnl=Gross+Costs+Financing`): summed as
    // written; an empty one counts 0.
    for j in 0..n_pnl_parts {
        pnl += match extra(j)? {
            Cell::Null => 0.0,
            Cell::Num(v) if v.is_finite() => v,
            Cell::Str(s) => crate::import::number::parse_number(s, decimal_comma)
                .filter(|v| v.is_finite())
                .ok_or_else(|| {
                    row_err(
                        "pnl",
                        "bad_number",
                        format!("'{}' (an added P/L column) is not a number", truncate(s)),
                    )
                })?,
            _ => {
                return Err(row_err(
                    "pnl",
                    "bad_number",
                    "an added P/L column is not a finite number",
                ));
            }
        };
    }
    let run = if present[RUN] {
        Some(match cell(RUN)? {
            Cell::Str(s) => RunName::Text(trim_fast(s)),
            Cell::Num(v) => RunName::Number(v),
            _ => return Err(row_err("run", "missing_value", "empty")),
        })
    } else {
        None
    };
    let side = if present[SIDE] {
        match cell(SIDE)? {
            Cell::Null => 0,
            Cell::Num(v) if v > 0.0 => 1,
            Cell::Num(v) if v < 0.0 => -1,
            Cell::Str(s) => parse_side(s).ok_or_else(|| {
                row_err(
                    "side",
                    "bad_side",
                    format!("'{}' is not long/short, buy/sell or 1/-1", truncate(s)),
                )
            })?,
            _ => {
                return Err(row_err(
                    "side",
                    "bad_side",
                    "not long/short, buy/sell or 1/-1",
                ));
            }
        }
    } else {
        0
    };
    let mut extras = [f64::NAN; 6];
    for k in EXTRAS {
        if present[k] {
            extras[k - EXTRAS.start] = number(k, false)?;
        }
    }
    // Fees are a cost: positive amounts are subtracted, negative ones are
    // already signed (pnl − |fees| either way).
    let fees = extras[FEES - EXTRAS.start];
    if fees.is_finite() {
        pnl -= fees.abs();
    }
    let kept = (n_pnl_parts..n_pnl_parts + opts.keep.len())
        .map(|j| match extra(j) {
            Ok(Cell::Str(s)) => s.to_string(),
            Ok(Cell::Num(v)) => v.to_string(),
            Ok(Cell::Instant(ms)) => crate::import::zones::format_utc(ms),
            _ => String::new(),
        })
        .collect();
    Ok(Row {
        opened,
        closed,
        instrument,
        pnl,
        run,
        side,
        extras,
        kept,
    })
}

/// Rows of one block (or one whole table), with names interned locally so
/// that blocks can be parsed in parallel and merged in order.
#[derive(Default)]
struct Part {
    opened: Vec<i64>,
    closed: Vec<i64>,
    pnl: Vec<f64>,
    instrument: Vec<u32>,
    instrument_names: Interner,
    /// The last instrument and run seen, with their ids: rows often repeat
    /// them (a run's rows are usually together), and a comparison is cheaper
    /// than a hash lookup.
    last_instrument: Option<(String, u32)>,
    last_run: Option<(String, u32)>,
    /// The last numeric run (its bits) and its id.
    last_run_number: Option<(u64, u32)>,
    run: Vec<u32>,
    run_names: Interner,
    side: Vec<i8>,
    extras: [Vec<f64>; 6],
    /// `--keep` values, one vector per kept column.
    kept: Vec<Vec<String>>,
    /// Record index within the part, from 0.
    row: Vec<u32>,
    rows_read: usize,
    rejected: usize,
    by_reason: BTreeMap<&'static str, usize>,
    /// The first rejections, by record index within the part.
    rejections: Vec<(usize, RowError)>,
}

impl Part {
    /// Empties the part, keeping its buffers for the next block (fresh
    /// buffers for every block would cost a page fault per 4 KiB).
    fn clear(&mut self) {
        self.opened.clear();
        self.closed.clear();
        self.pnl.clear();
        self.instrument.clear();
        self.instrument_names.clear();
        self.last_instrument = None;
        self.last_run = None;
        self.last_run_number = None;
        self.run.clear();
        self.run_names.clear();
        self.side.clear();
        for e in &mut self.extras {
            e.clear();
        }
        self.kept.clear();
        self.row.clear();
        self.rows_read = 0;
        self.rejected = 0;
        self.by_reason.clear();
        self.rejections.clear();
    }

    /// Room for `n` rows in the columns this source has.
    fn reserve(&mut self, n: usize, present: &[bool; 12]) {
        self.opened.reserve(n);
        self.closed.reserve(n);
        self.pnl.reserve(n);
        self.instrument.reserve(n);
        self.row.reserve(n);
        if present[RUN] {
            self.run.reserve(n);
        }
        if present[SIDE] {
            self.side.reserve(n);
        }
        for k in EXTRAS {
            if present[k] {
                self.extras[k - EXTRAS.start].reserve(n);
            }
        }
    }

    fn take(&mut self, index: usize, row: Result<Row<'_>, RowError>, present: &[bool; 12]) {
        self.rows_read += 1;
        match row {
            Ok(r) => {
                self.opened.push(r.opened);
                self.closed.push(r.closed);
                self.pnl.push(r.pnl);
                self.instrument.push(intern_cached(
                    &mut self.instrument_names,
                    &mut self.last_instrument,
                    &r.instrument,
                ));
                match r.run {
                    Some(RunName::Text(name)) => {
                        self.run
                            .push(intern_cached(&mut self.run_names, &mut self.last_run, name))
                    }
                    Some(RunName::Number(v)) => {
                        let id = match self.last_run_number {
                            Some((bits, id)) if bits == v.to_bits() => id,
                            _ => intern(&mut self.run_names, &format_run_number(v)),
                        };
                        self.last_run_number = Some((v.to_bits(), id));
                        self.run.push(id);
                    }
                    None => {}
                }
                if present[SIDE] {
                    self.side.push(r.side);
                }
                for k in EXTRAS {
                    if present[k] {
                        self.extras[k - EXTRAS.start].push(r.extras[k - EXTRAS.start]);
                    }
                }
                if !r.kept.is_empty() {
                    self.kept.resize_with(r.kept.len(), Vec::new);
                    for (column, value) in self.kept.iter_mut().zip(r.kept) {
                        column.push(value);
                    }
                }
                self.row.push(index as u32);
            }
            Err(e) => {
                self.rejected += 1;
                *self.by_reason.entry(e.reason).or_default() += 1;
                if self.rejections.len() < KEEP_REJECTIONS {
                    self.rejections.push((index, e));
                }
            }
        }
    }
}

/// The growing result of a load: parts are merged into it in file order.
#[derive(Default)]
struct Sink {
    trades: Trades,
    summary: TradeSummary,
    instruments: Interner,
    runs: Interner,
    file_index: u16,
    file_name: String,
    file_run: Option<u32>,
    file_run_name: Option<String>,
    /// Data rows of the current file merged so far.
    file_rows: usize,
}

impl Sink {
    fn start_file(&mut self, index: u16, path: &Path, run: Option<String>) {
        self.file_index = index;
        self.file_name = path.display().to_string();
        // Named as a run only once a part shows the file has no run column
        // (a file with one would otherwise add an empty run).
        self.file_run_name = run;
        self.file_run = None;
        self.file_rows = 0;
    }

    /// Appends a part's rows; the part is left empty for reuse.
    fn absorb(&mut self, part: &mut Part, present: &[bool; 12]) {
        let t = &mut self.trades;
        let (n_before, n) = (t.len(), part.pnl.len());
        // Local names enter the global list in local id order (the order
        // they first appear), so names are numbered by first appearance in
        // the file, whatever the hash map's layout.
        let local = |names: &Interner, global: &mut Interner| -> Vec<u32> {
            let mut by_id: Vec<&str> = vec![""; names.len()];
            for (name, &id) in names {
                by_id[id as usize] = name;
            }
            by_id.into_iter().map(|name| intern(global, name)).collect()
        };
        let inst = local(&part.instrument_names, &mut self.instruments);
        t.instrument
            .extend(part.instrument.iter().map(|&i| inst[i as usize]));
        if present[RUN] {
            let runs = local(&part.run_names, &mut self.runs);
            t.run.extend(part.run.iter().map(|&i| runs[i as usize]));
        } else {
            if self.file_run.is_none()
                && let Some(name) = &self.file_run_name
            {
                self.file_run = Some(intern(&mut self.runs, name));
            }
            t.run
                .extend(std::iter::repeat_n(self.file_run.unwrap_or(0), n));
        }
        t.opened.extend_from_slice(&part.opened);
        t.closed.extend_from_slice(&part.closed);
        t.pnl.extend_from_slice(&part.pnl);
        // An optional column present in any file exists for all rows
        // (0 / NaN where a file lacks it).
        if present[SIDE] || t.side.is_some() {
            let v = t.side.get_or_insert_with(|| vec![0; n_before]);
            if present[SIDE] {
                v.extend_from_slice(&part.side)
            } else {
                v.extend(std::iter::repeat_n(0, n))
            }
        }
        for (k, values) in EXTRAS.zip(&part.extras) {
            let slot = extra_slot(t, k);
            if present[k] || slot.is_some() {
                let v = slot.get_or_insert_with(|| vec![f64::NAN; n_before]);
                if present[k] {
                    v.extend_from_slice(values)
                } else {
                    v.extend(std::iter::repeat_n(f64::NAN, n))
                }
            }
        }
        if !part.kept.is_empty() || !t.kept.is_empty() {
            let width = part.kept.len().max(t.kept.len());
            t.kept.resize_with(width, || vec![String::new(); n_before]);
            for (k, column) in t.kept.iter_mut().enumerate() {
                match part.kept.get_mut(k) {
                    Some(values) if values.len() == n => column.append(values),
                    _ => column.extend(std::iter::repeat_n(String::new(), n)),
                }
            }
        }
        t.file.extend(std::iter::repeat_n(self.file_index, n));
        let base = self.file_rows;
        t.row
            .extend(part.row.iter().map(|&r| (base + r as usize + 1) as u32));

        let s = &mut self.summary;
        s.rows_read += part.rows_read;
        s.rows_imported += n;
        s.log.rows_rejected += part.rejected;
        for (reason, c) in std::mem::take(&mut part.by_reason) {
            *s.log
                .rejected_by_reason
                .entry(reason.to_string())
                .or_default() += c;
        }
        for (index, e) in part.rejections.drain(..) {
            if s.log.rejections.len() >= KEEP_REJECTIONS {
                break;
            }
            s.log
                .rejections
                .push(e.at(&self.file_name, base + index + 1));
        }
        self.file_rows += part.rows_read;
        part.clear();
    }
}

fn extra_slot(t: &mut Trades, k: usize) -> &mut Option<Vec<f64>> {
    match k {
        6 => &mut t.size,
        7 => &mut t.entry_price,
        8 => &mut t.exit_price,
        9 => &mut t.fees,
        10 => &mut t.equity_before,
        _ => &mut t.pnl_pct,
    }
}

/// A Parquet file, one row group at a time (so only one group's decoded
/// columns are held beside the imported ones), each group's rows parsed on
/// every core in pieces merged in order.
fn read_parquet(path: &Path, opts: &TradeOptions, sink: &mut Sink) -> Result<(), TradeError> {
    let err = |message: String| TradeError::Read {
        path: path.to_path_buf(),
        message,
    };
    let groups = crate::import::table::parquet_row_groups(path).map_err(|e| err(e.to_string()))?;
    sink.trades.reserve(groups.iter().map(|g| g.1).sum());
    // A file without row groups still has a schema: one empty read checks
    // the column mapping.
    for (first, rows) in if groups.is_empty() {
        vec![(0, 0)]
    } else {
        groups
    } {
        let table = Table::read_parquet_rows(path, first, rows).map_err(|e| err(e.to_string()))?;
        read_table(&table, path, opts, sink)?;
    }
    Ok(())
}

/// A polars-read table: its rows parsed in pieces on every core, merged in
/// order.
fn read_table(
    table: &Table,
    path: &Path,
    opts: &TradeOptions,
    sink: &mut Sink,
) -> Result<(), TradeError> {
    const PIECE: usize = 1 << 16;
    let names = table.names();
    let (sources, extra) = slots(&names, path, opts, |name| table.column(name))?;
    let n_pnl_parts = extra.len() - opts.keep.len();
    let present: [bool; 12] = std::array::from_fn(|k| sources[k].is_some());
    if sink.file_rows == 0 {
        let epoch = match opts.time_format {
            TimeFormat::EpochSeconds => Some("epoch seconds (--time-format epoch-s)"),
            TimeFormat::EpochMillis => Some("epoch milliseconds (--time-format epoch-ms)"),
            _ => None,
        };
        for k in [OPENED, CLOSED] {
            let source = sources[k].as_ref().expect("required columns are present");
            let column = opts
                .columns
                .get(FIELDS[k])
                .cloned()
                .unwrap_or_else(|| FIELDS[k].to_string());
            if matches!(source, ColumnSource::Date(_)) {
                return Err(TradeError::Read {
                    path: path.to_path_buf(),
                    message: format!(
                        "column '{column}' ({}) holds dates without a time of day; trade times need one",
                        FIELDS[k]
                    ),
                });
            }
            let read_as = source.describe(&format!("--trades-tz {}", opts.zone), epoch);
            sink.summary.time_columns.push(TimeColumn {
                file: sink.file_name.clone(),
                field: FIELDS[k],
                column,
                read_as,
            });
        }
    }
    let n = table.height();
    let parts: Vec<Part> = (0..n.div_ceil(PIECE))
        .into_par_iter()
        .map(|p| {
            let (lo, hi) = (p * PIECE, ((p + 1) * PIECE).min(n));
            let mut part = Part::default();
            part.reserve(hi - lo, &present);
            let mut cache = DayOffsetCache::default();
            for i in lo..hi {
                let row = parse_row(
                    &present,
                    |k| Ok(sources[k].as_ref().map_or(Cell::Null, |c| c.get(i))),
                    |j| Ok(extra[j].get(i)),
                    n_pnl_parts,
                    opts,
                    false,
                    &mut cache,
                );
                part.take(i - lo, row, &present);
            }
            part
        })
        .collect();
    for mut part in parts {
        sink.absorb(&mut part, &present);
    }
    Ok(())
}

/// A delimited text file, in blocks parsed on every core.
fn read_csv(path: &Path, opts: &TradeOptions, sink: &mut Sink) -> Result<(), TradeError> {
    let io = |e: std::io::Error| TradeError::Read {
        path: path.to_path_buf(),
        message: e.to_string(),
    };
    let mut head = Vec::with_capacity(64 * 1024);
    if opts.delimiter.is_none() {
        std::fs::File::open(path)
            .and_then(|f| f.take(64 * 1024).read_to_end(&mut head))
            .map_err(io)?;
    }
    let file = std::fs::File::open(path).map_err(io)?;
    // Room for the whole file (the memory budget's row estimate): the
    // columns then grow once instead of doubling (which can leave up to half
    // of each column as unused capacity on a large input).
    let rows = crate::import::budget::estimate_rows(path).ok();
    read_delimited(path, Box::new(file), &head, rows, opts, sink)
}

/// Delimited text from `input` (a file, or standard input's bytes) in
/// blocks parsed on every core; `head` is its start, for guessing the
/// delimiter when none is set; `rows` an estimate of its row count.
fn read_delimited(
    path: &Path,
    input: Box<dyn std::io::Read + Send>,
    head: &[u8],
    rows: Option<u64>,
    opts: &TradeOptions,
    sink: &mut Sink,
) -> Result<(), TradeError> {
    let err = |message: String| TradeError::Read {
        path: path.to_path_buf(),
        message,
    };
    let sep = opts
        .delimiter
        .unwrap_or_else(|| csvchunks::sniff_delimiter(head));
    let mut reader = csvchunks::BlockReader::from_reader(input, sep);
    let mut first = reader
        .next_block(None)
        .map_err(|e| err(e.to_string()))?
        .ok_or_else(|| err(ScanError::Empty.to_string()))?;
    let header = csvchunks::take_header(&mut first, sep).map_err(|e| err(e.to_string()))?;
    if let Some(rows) = rows {
        sink.trades.reserve((rows as f64 * 1.02) as usize);
    }
    let names = &header.names;
    one_column_header(names, sep).map_err(|e| err(e.to_string()))?;
    let (columns, extra) = slots(names, path, opts, |name| {
        names.iter().position(|n| n == name)
    })?;
    let present: [bool; 12] = std::array::from_fn(|k| columns[k].is_some());
    record_time_columns(sink, names, &columns, opts);
    parse_in_batches(
        &mut reader,
        first,
        sep,
        names,
        &columns,
        &extra,
        &present,
        opts,
        sink,
    )
    .map_err(|e| err(e.to_string()))
}

/// A header that is one column holding another common delimiter: the
/// file's separator was guessed wrong, said so with the flag to give.
fn one_column_header(names: &[String], sep: u8) -> Result<(), ScanError> {
    if let [only] = names
        && let Some(d) = [b',', b';', b'\t', b'|']
            .into_iter()
            .find(|&d| d != sep && only.as_bytes().contains(&d))
    {
        return Err(ScanError::OneColumnHeader {
            header: truncate(only).to_string(),
            used: (sep as char).escape_default().to_string(),
            likely: (d as char).escape_default().to_string(),
        });
    }
    Ok(())
}

/// How each time column is read, in words, for the import summary.
fn record_time_columns(
    sink: &mut Sink,
    names: &[String],
    columns: &Slots<usize>,
    opts: &TradeOptions,
) {
    for k in [OPENED, CLOSED] {
        let read_as = match &opts.time_format {
            TimeFormat::Auto => format!(
                "text; local to --trades-tz {} unless a value carries an offset or Z",
                opts.zone
            ),
            TimeFormat::EpochSeconds => "epoch seconds (--time-format epoch-s)".into(),
            TimeFormat::EpochMillis => "epoch milliseconds (--time-format epoch-ms)".into(),
            TimeFormat::Pattern(p) => format!(
                "text by --time-format '{p}'; local to --trades-tz {} unless the pattern reads an offset",
                opts.zone
            ),
        };
        sink.summary.time_columns.push(TimeColumn {
            file: sink.file_name.clone(),
            field: FIELDS[k],
            column: names[columns[k].expect("required")].clone(),
            read_as,
        });
    }
}

/// The blocks after the header, a batch (two per core) at a time, parsed in
/// parallel and absorbed in file order; buffers are reused across batches.
#[allow(clippy::too_many_arguments)]
fn parse_in_batches(
    reader: &mut csvchunks::BlockReader,
    first: Vec<u8>,
    sep: u8,
    names: &[String],
    columns: &Slots<usize>,
    extra: &[usize],
    present: &[bool; 12],
    opts: &TradeOptions,
    sink: &mut Sink,
) -> Result<(), ScanError> {
    let width = names.len();
    let batch = rayon::current_num_threads().max(1) * 2;
    let mut pending = vec![first];
    // Block buffers and parts are reused from batch to batch.
    let (mut spare_blocks, mut spare_parts): (Vec<Vec<u8>>, Vec<Part>) = (Vec::new(), Vec::new());
    loop {
        while pending.len() < batch {
            match reader.next_block(spare_blocks.pop()) {
                Ok(Some(b)) => pending.push(b),
                Ok(None) => break,
                Err(ScanError::RecordTooLong { mib, .. }) => {
                    return Err(ScanError::RecordTooLong {
                        row: sink.file_rows,
                        mib,
                    });
                }
                Err(e) => return Err(e),
            }
        }
        if pending.is_empty() {
            return Ok(());
        }
        let last_batch = pending.len() < batch;
        let n_blocks = pending.len();
        let fresh: Vec<Part> = (0..n_blocks)
            .map(|_| spare_parts.pop().unwrap_or_default())
            .collect();
        let parts: Vec<Result<Part, (usize, usize)>> = pending
            .par_iter()
            .zip(fresh)
            .enumerate()
            .map(|(b, (block, part))| {
                parse_block(
                    block,
                    part,
                    sep,
                    width,
                    columns,
                    extra,
                    present,
                    opts,
                    last_batch && b + 1 == n_blocks,
                )
            })
            .collect();
        spare_blocks.append(&mut pending);
        for p in parts {
            match p {
                Ok(mut part) => {
                    sink.absorb(&mut part, present);
                    spare_parts.push(part);
                }
                Err((rows_before, column)) => {
                    let row = sink.file_rows + rows_before + 1;
                    let name = names
                        .get(column - 1)
                        .map_or(String::new(), |n| format!(" ({n})"));
                    return Err(ScanError::UnclosedQuote {
                        row,
                        column: format!("{column}{name}"),
                    });
                }
            }
        }
        if last_batch {
            return Ok(());
        }
    }
}

/// Parses one block of whole records. An unclosed quote (only possible in
/// the file's last block) returns how many records came before it in the
/// block, and its column.
#[allow(clippy::too_many_arguments)]
fn parse_block(
    block: &[u8],
    mut part: Part,
    sep: u8,
    width: usize,
    columns: &Slots<usize>,
    extra: &[usize],
    present: &[bool; 12],
    opts: &TradeOptions,
    last_in_file: bool,
) -> Result<Part, (usize, usize)> {
    let n_pnl_parts = extra.len() - opts.keep.len();
    part.reserve(memchr::memchr_iter(b'\n', block).count() + 1, present);
    let mut cache = DayOffsetCache::default();
    let mut rec = Record::default();
    let mut records = csvchunks::Records::new(block, sep);
    let mut index = 0;
    while let Some(parsed) = records.next_into(&mut rec) {
        match parsed {
            Parsed::Blank { .. } => {}
            Parsed::Unclosed { column } => return Err((part.rows_read, column)),
            Parsed::Record { next: pos } => {
                let n = rec.len();
                let extra_empty = n > width
                    && (width..n).all(|k| rec.field(block, k).iter().all(u8::is_ascii_whitespace));
                if n < width || (n > width && !extra_empty) {
                    let hint = if n < width && last_in_file && pos >= block.len() {
                        "; is the file truncated?"
                    } else {
                        ""
                    };
                    let e = row_err(
                        "row",
                        "field_count",
                        format!("{n} field(s) where the header has {width}{hint}"),
                    );
                    part.take(index, Err(e), present);
                } else if let Some((k, a, b)) = rec.text_after_quote() {
                    let field = columns
                        .iter()
                        .position(|c| *c == Some(k))
                        .map_or("row", |f| FIELDS[f]);
                    let stray = String::from_utf8_lossy(&block[a..b]);
                    let text = String::from_utf8_lossy(rec.raw(block, k));
                    let e = row_err(
                        field,
                        "bad_quote",
                        format!(
                            "column {}: text '{}' follows the closing quote of \"{}\"; a quoted field must end at its quote",
                            k + 1,
                            truncate(&stray),
                            truncate(&text)
                        ),
                    );
                    part.take(index, Err(e), present);
                } else if !rec.has_escapes() {
                    // The common case: every field's text is its bytes.
                    let cell = |k: usize| {
                        columns[k]
                            .map_or(Ok(Cell::Null), |c| text_cell(rec.raw(block, c), FIELDS[k]))
                    };
                    let more = |j: usize| {
                        text_cell(
                            rec.raw(block, extra[j]),
                            if j < n_pnl_parts { "pnl" } else { "kept" },
                        )
                    };
                    let row = parse_row(
                        present,
                        cell,
                        more,
                        n_pnl_parts,
                        opts,
                        sep != b',',
                        &mut cache,
                    );
                    part.take(index, row, present);
                } else {
                    let cells: [std::borrow::Cow<[u8]>; 12] = std::array::from_fn(|k| {
                        columns[k].map_or(std::borrow::Cow::Borrowed(&b""[..]), |c| {
                            rec.field(block, c)
                        })
                    });
                    let more_cells: Vec<std::borrow::Cow<[u8]>> =
                        extra.iter().map(|&c| rec.field(block, c)).collect();
                    let more = |j: usize| {
                        text_cell(&more_cells[j], if j < n_pnl_parts { "pnl" } else { "kept" })
                    };
                    let row = parse_row(
                        present,
                        |k| text_cell(&cells[k], FIELDS[k]),
                        more,
                        n_pnl_parts,
                        opts,
                        sep != b',',
                        &mut cache,
                    );
                    part.take(index, row, present);
                }
                index += 1;
            }
        }
    }
    Ok(part)
}

/// A CSV field as a cell: blank is missing, text must be UTF-8.
fn text_cell<'a>(bytes: &'a [u8], field: &'static str) -> Result<Cell<'a>, RowError> {
    if bytes.iter().all(u8::is_ascii_whitespace) {
        return Ok(Cell::Null);
    }
    if bytes.is_ascii() {
        // SAFETY: ASCII bytes are valid UTF-8 (the common case, checked in
        // one pass instead of the full decoder's per-call overhead).
        return Ok(Cell::Str(unsafe { std::str::from_utf8_unchecked(bytes) }));
    }
    std::str::from_utf8(bytes).map(Cell::Str).map_err(|e| {
        row_err(
            field,
            "not_utf8",
            format!(
                "byte {} is not UTF-8 text; save the file as UTF-8",
                e.valid_up_to() + 1
            ),
        )
    })
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
        let mut h = if self.0 == 0 {
            0xcbf2_9ce4_8422_2325
        } else {
            self.0
        };
        for &b in bytes {
            h = (h ^ b as u64).wrapping_mul(0x100_0000_01b3);
        }
        self.0 = h;
    }
}

pub(crate) type Interner = HashMap<String, u32, std::hash::BuildHasherDefault<Fnv>>;

pub(crate) fn intern(map: &mut Interner, s: &str) -> u32 {
    if let Some(&i) = map.get(s) {
        return i;
    }
    let i = map.len() as u32;
    map.insert(s.to_string(), i);
    i
}

/// [`intern`] behind a one-entry cache of the last name.
fn intern_cached(map: &mut Interner, last: &mut Option<(String, u32)>, s: &str) -> u32 {
    if let Some((name, id)) = last
        && name == s
    {
        return *id;
    }
    let id = intern(map, s);
    *last = Some((s.to_string(), id));
    id
}

fn truncate(s: &str) -> String {
    s.chars().take(40).collect()
}

fn format_run_number(v: f64) -> String {
    if v.fract() == 0.0 && v.abs() < 1e15 {
        format!("{}", v as i64)
    } else {
        v.to_string()
    }
}

/// A number by the rule of [`crate::import::number`], in a comma-delimited file.
pub fn parse_number(s: &str) -> Option<f64> {
    crate::import::number::parse_number(s, false)
}

/// long/buy/1 → +1, short/sell/-1 → −1.
pub fn parse_side(s: &str) -> Option<i8> {
    let t = s.trim();
    let is = |words: &[&str]| words.iter().any(|w| t.eq_ignore_ascii_case(w));
    if t.is_empty() {
        Some(0)
    } else if is(&["long", "buy", "b", "l", "1", "+1"]) {
        Some(1)
    } else if is(&["short", "sell", "s", "-1"]) {
        Some(-1)
    } else {
        None
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A trade's place is where the order lists it; placing twice gives the
    /// order back.
    #[test]
    fn places_invert_the_order() {
        let order = [2u32, 0, 3, 1];
        assert_eq!(places_in(&order), vec![1, 3, 0, 2]);
        assert_eq!(places_in(&places_in(&order)), order.to_vec());
        assert!(places_in(&[]).is_empty());
    }

    #[test]
    fn simple_decimals_read_as_the_standard_parser_does() {
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(21);
        let mut texts: Vec<String> = [
            "0",
            "-0",
            "+0",
            "5.",
            ".5",
            "-.5",
            "+.25",
            ".",
            "-",
            "",
            "1..2",
            "9007199254740993",
            "0.1",
            "-4.23",
            "123456789012345678.9",
            "00012.3400",
            "99999999999999999999",
            "9999999999999999999.9",
        ]
        .iter()
        .map(|s| s.to_string())
        .collect();
        for _ in 0..200_000 {
            let int_digits = rng.random_range(0..12);
            let frac_digits = rng.random_range(0..10);
            let digit =
                |r: &mut rand_chacha::ChaCha8Rng| char::from(b'0' + r.random_range(0..10u8));
            let mut t = String::new();
            if rng.random_range(0..3) == 0 {
                t.push('-');
            }
            (0..int_digits).for_each(|_| t.push(digit(&mut rng)));
            if rng.random_range(0..4) > 0 {
                t.push('.');
                (0..frac_digits).for_each(|_| t.push(digit(&mut rng)));
            }
            texts.push(t);
        }
        let mut fast = 0;
        for t in &texts {
            let std = t.parse::<f64>().ok();
            let ours = crate::import::number::parse_simple_decimal(t.as_bytes());
            if let Some(v) = ours {
                fast += 1;
                assert_eq!(Some(v.to_bits()), std.map(f64::to_bits), "{t}");
            }
        }
        assert!(fast > 150_000, "{fast}");
        assert_eq!(crate::import::timefmt::trim_fast(" a "), "a");
        assert_eq!(crate::import::timefmt::trim_fast("a\u{a0}"), "a");
        assert_eq!(crate::import::timefmt::trim_fast("ab"), "ab");
    }

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
    fn natural_run_order() {
        let mut names = vec![
            "p10", "b", "p2", "10", "2", "1.5", "1.25", "p02", "a7b", "a10b", "-3",
        ];
        names.sort_by(|a, b| run_order(a, b));
        assert_eq!(
            names,
            vec![
                "-3", "1.25", "1.5", "2", "10", "a7b", "a10b", "b", "p02", "p2", "p10"
            ]
        );
    }

    #[test]
    fn mapping_pairs() {
        let m = parse_mapping(
            &[
                "opened_at=Entered At, closed_at = Left At".into(),
                "pnl=Result".into(),
            ],
            FIELDS,
        )
        .unwrap();
        assert_eq!(m["opened_at"], "Entered At");
        assert_eq!(m["closed_at"], "Left At");
        assert_eq!(m["pnl"], "Result");
        assert!(
            parse_mapping(&["profit=P".into()], FIELDS)
                .unwrap_err()
                .to_string()
                .contains("unknown field")
        );
    }
}
