//! Reading a tabular input file (CSV or Parquet) through polars and handing
//! out its cells one row at a time, whatever the column's storage type.
//!
//! CSV columns are read as text so that every cell reaches the importers'
//! own validation (a bad value becomes a row rejection, never a silent
//! null). Parquet columns keep their types: text, numbers, or timestamps.

use polars::prelude::*;
use std::path::{Path, PathBuf};

/// A loaded table.
pub struct Table {
    df: DataFrame,
    /// Rows (from 0, ascending) that could not be cut into fields.
    problems: Vec<(usize, RowProblem)>,
}

/// Why a CSV record could not be read as a row.
#[derive(Debug, Clone)]
pub struct RowProblem {
    /// The column at fault, when one is.
    pub column: Option<String>,
    /// Reason code (snake case).
    pub reason: &'static str,
    /// What is wrong.
    pub message: String,
}

/// One cell, borrowed from a column.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Cell<'a> {
    /// Empty.
    Null,
    /// Text.
    Str(&'a str),
    /// A number.
    Num(f64),
    /// A zoned timestamp column's value, ms since epoch UTC.
    Instant(i64),
    /// A timestamp column without a zone: a wall-clock reading, as ms since
    /// 1970-01-01T00:00 on that clock (the reader's zone applies).
    Local(i64),
    /// A date column's value, days since 1970-01-01.
    Date(i32),
}

/// A column ready for row access.
pub enum ColumnSource {
    /// Text column.
    Str(StringChunked),
    /// Number column.
    Num(Float64Chunked),
    /// Physical i64 values and the divisor that turns them into ms; zoned
    /// columns hold instants, naive ones wall-clock readings.
    Time(Int64Chunked, i64, TimeKind),
    /// Days since the epoch.
    Date(Int32Chunked),
}

/// How a timestamp column's values are to be read.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum TimeKind {
    /// Stored with a zone (its name): instants, used as stored.
    Zoned(String),
    /// Stored without a zone: local times in the reader's zone.
    Naive,
}

impl ColumnSource {
    /// Cell of row i.
    pub fn get(&self, i: usize) -> Cell<'_> {
        match self {
            ColumnSource::Str(c) => match c.get(i) {
                Some(s) if !crate::import::timefmt::trim_fast(s).is_empty() => Cell::Str(s),
                _ => Cell::Null,
            },
            ColumnSource::Num(c) => c.get(i).map_or(Cell::Null, Cell::Num),
            ColumnSource::Time(c, div, TimeKind::Zoned(_)) => c
                .get(i)
                .map_or(Cell::Null, |v| Cell::Instant(v.div_euclid(*div))),
            ColumnSource::Time(c, div, TimeKind::Naive) => c
                .get(i)
                .map_or(Cell::Null, |v| Cell::Local(v.div_euclid(*div))),
            ColumnSource::Date(c) => c.get(i).map_or(Cell::Null, Cell::Date),
        }
    }

    /// What the column holds, in words for `check` (`zone`: the reader's
    /// zone, which applies to text and naive timestamps).
    pub fn describe(&self, zone: &str, epoch: Option<&str>) -> String {
        match self {
            ColumnSource::Str(_) => {
                format!("text; local to {zone} unless a value carries an offset or Z")
            }
            ColumnSource::Num(_) => match epoch {
                Some(e) => format!("numbers read as {e}"),
                None => "numbers (refused as times without --time-format epoch-s|epoch-ms)".into(),
            },
            ColumnSource::Time(_, _, TimeKind::Zoned(tz)) => {
                format!("timestamps with zone {tz}: instants, used as stored")
            }
            ColumnSource::Time(_, _, TimeKind::Naive) => {
                format!("timestamps without a zone: local to {zone}")
            }
            ColumnSource::Date(_) => "dates without a time of day".into(),
        }
    }
}

/// The two table formats the tool reads and writes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TableFormat {
    /// RFC 4180 text.
    Csv,
    /// Apache Parquet.
    Parquet,
}

impl TableFormat {
    /// Parquet by extension (`.parquet`, `.pq`); anything else is read as CSV.
    pub fn of_path(path: &Path) -> TableFormat {
        match path
            .extension()
            .and_then(|e| e.to_str())
            .map(|e| e.to_ascii_lowercase())
            .as_deref()
        {
            Some("parquet" | "pq") => TableFormat::Parquet,
            _ => TableFormat::Csv,
        }
    }

    /// The extension written for this format (`csv`, `parquet`).
    pub fn extension(self) -> &'static str {
        match self {
            TableFormat::Csv => "csv",
            TableFormat::Parquet => "parquet",
        }
    }
}

/// A table file that cannot be read as a whole (the caller names the
/// file); row-level problems are [`RowProblem`]s instead.
#[derive(Debug, thiserror::Error)]
pub enum TableError {
    /// The file could not be read.
    #[error("{0}")]
    Io(#[from] std::io::Error),
    /// polars could not read the Parquet file.
    #[error("not a readable Parquet file: {0}")]
    Parquet(#[from] polars::error::PolarsError),
    /// The CSV file could not be scanned.
    #[error(transparent)]
    Csv(#[from] crate::import::csvchunks::ScanError),
    /// The columns read could not be put together as a table.
    #[error("{0}")]
    Frame(polars::error::PolarsError),
    /// A Parquet file given to a build without the `parquet` feature.
    #[error(
        "{0}: this build reads no Parquet (built without the `parquet` feature); convert the file to CSV"
    )]
    NoParquet(String),
}

/// The rows of a Parquet file as (first row, rows) per row group, so that a
/// large file can be read one group at a time.
pub fn parquet_row_groups(path: &Path) -> Result<Vec<(usize, usize)>, TableError> {
    parquet::row_groups(path)
}

/// Rows of a Parquet file from its footer (nothing decoded).
pub fn parquet_row_count(path: &Path) -> Result<usize, TableError> {
    parquet::row_count(path)
}

/// Every Parquet read, in one place: behind the `parquet` feature, which
/// the command line enables by default; without it each read says so.
#[cfg(feature = "parquet")]
mod parquet {
    use super::TableError;
    use polars::prelude::*;
    use std::path::Path;

    pub fn row_groups(path: &Path) -> Result<Vec<(usize, usize)>, TableError> {
        let file = std::fs::File::open(path)?;
        let mut reader = ParquetReader::new(file);
        let meta = reader.get_metadata()?;
        let mut first = 0;
        Ok(meta
            .row_groups
            .iter()
            .map(|g| {
                let span = (first, g.num_rows());
                first += g.num_rows();
                span
            })
            .collect())
    }

    pub fn row_count(path: &Path) -> Result<usize, TableError> {
        let file = std::fs::File::open(path)?;
        Ok(ParquetReader::new(file).num_rows()?)
    }

    /// The whole file, or `rows` rows from `first`.
    pub fn frame(path: &Path, slice: Option<(usize, usize)>) -> Result<DataFrame, TableError> {
        let file = std::fs::File::open(path)?;
        let mut reader = ParquetReader::new(file);
        if let Some((first, rows)) = slice {
            reader = reader.with_slice(Some((first, rows)));
        }
        Ok(reader.finish()?)
    }
}

#[cfg(not(feature = "parquet"))]
mod parquet {
    use super::TableError;
    use polars::prelude::DataFrame;
    use std::path::Path;

    pub fn row_groups(path: &Path) -> Result<Vec<(usize, usize)>, TableError> {
        Err(TableError::NoParquet(path.display().to_string()))
    }
    pub fn row_count(path: &Path) -> Result<usize, TableError> {
        Err(TableError::NoParquet(path.display().to_string()))
    }
    pub fn frame(path: &Path, _: Option<(usize, usize)>) -> Result<DataFrame, TableError> {
        Err(TableError::NoParquet(path.display().to_string()))
    }
}

/// Where a tabular input comes from: a file, or a table the caller already
/// holds in memory (the library's callers: the Python package hands over
/// Arrow tables). `name` stands in for the file name in every message.
#[derive(Debug, Clone)]
pub enum Source {
    /// A file, read by its extension (Parquet) or as delimited text.
    File(PathBuf),
    /// Bytes already read whole, such as standard input (`-`): delimited
    /// text, or for a calendar an iCalendar file (told by its first line).
    Bytes {
        /// How messages name it (`stdin`); with several trade inputs, also
        /// its run's name.
        name: String,
        /// The bytes.
        bytes: std::sync::Arc<[u8]>,
    },
    /// A table in memory; its columns keep their types as Parquet's do.
    Frame {
        /// How messages name it (for example `trades table 1`).
        name: String,
        /// The table.
        frame: DataFrame,
    },
}

impl Source {
    /// The file's path, or the table's name as a path, for messages.
    pub fn path(&self) -> PathBuf {
        match self {
            Source::File(p) => p.clone(),
            Source::Frame { name, .. } | Source::Bytes { name, .. } => PathBuf::from(name),
        }
    }

    /// Files as sources.
    pub fn files(paths: &[PathBuf]) -> Vec<Source> {
        paths.iter().cloned().map(Source::File).collect()
    }
}

impl Table {
    /// A table already in memory, cells kept as typed.
    pub fn from_frame(df: DataFrame) -> Table {
        Table {
            df,
            problems: Vec::new(),
        }
    }

    /// Rows `first..first + rows` of a Parquet file.
    pub fn read_parquet_rows(path: &Path, first: usize, rows: usize) -> Result<Table, TableError> {
        let df = parquet::frame(path, Some((first, rows)))?;
        Ok(Table {
            df,
            problems: Vec::new(),
        })
    }

    /// Reads a CSV (all columns as text) or Parquet file. CSV records are
    /// cut by the same RFC 4180 reader as trades ([`crate::import::csvchunks`]); a
    /// record that is malformed (a wrong field count, text after a closing
    /// quote, bytes that are not UTF-8) keeps its row with empty cells and
    /// is named in [`Table::row_problem`], so the caller rejects that row
    /// alone.
    pub fn read(path: &Path, delimiter: Option<u8>) -> Result<Table, TableError> {
        if TableFormat::of_path(path) == TableFormat::Parquet {
            let df = parquet::frame(path, None)?;
            return Ok(Table {
                df,
                problems: Vec::new(),
            });
        }
        Table::read_bytes(std::fs::read(path)?, delimiter)
    }

    /// Reads delimited text already in memory, as [`Table::read`] reads a
    /// CSV file.
    pub fn read_bytes(mut bytes: Vec<u8>, delimiter: Option<u8>) -> Result<Table, TableError> {
        use crate::import::csvchunks::{self, Parsed, Record, Records, ScanError};
        if bytes.is_empty() {
            return Err(ScanError::Empty.into());
        }
        let sep = delimiter
            .unwrap_or_else(|| csvchunks::sniff_delimiter(&bytes[..bytes.len().min(64 * 1024)]));
        let header = csvchunks::take_header(&mut bytes, sep)?;
        let width = header.names.len();
        let mut columns: Vec<Vec<Option<String>>> = vec![Vec::new(); width];
        let mut problems = Vec::new();
        let mut rec = Record::default();
        let mut records = Records::new(&bytes, sep);
        let mut row = 0usize;
        while let Some(parsed) = records.next_into(&mut rec) {
            let problem = match parsed {
                Parsed::Blank { .. } => continue,
                Parsed::Unclosed { column } => {
                    let name = header
                        .names
                        .get(column - 1)
                        .map_or(String::new(), |n| format!(" ({n})"));
                    return Err(ScanError::UnclosedQuote {
                        row: row + 1,
                        column: format!("{column}{name}"),
                    }
                    .into());
                }
                Parsed::Record { .. } => {
                    let n = rec.len();
                    let extra_empty = n > width
                        && (width..n)
                            .all(|k| rec.field(&bytes, k).iter().all(u8::is_ascii_whitespace));
                    if n < width || (n > width && !extra_empty) {
                        Some(RowProblem {
                            column: None,
                            reason: "field_count",
                            message: format!("{n} field(s) where the header has {width}"),
                        })
                    } else if let Some((k, a, b)) = rec.text_after_quote() {
                        let message = format!(
                            "column {}: text '{}' follows the closing quote of \"{}\"; a quoted field must end at its quote",
                            k + 1,
                            String::from_utf8_lossy(&bytes[a..b]),
                            String::from_utf8_lossy(rec.raw(&bytes, k))
                        );
                        Some(RowProblem {
                            column: Some(header.names[k].clone()),
                            reason: "bad_quote",
                            message,
                        })
                    } else {
                        (0..width).find_map(|k| {
                            std::str::from_utf8(&rec.field(&bytes, k))
                                .err()
                                .map(|e| RowProblem {
                                    column: Some(header.names[k].clone()),
                                    reason: "not_utf8",
                                    message: format!(
                                        "byte {} is not UTF-8 text; save the file as UTF-8",
                                        e.valid_up_to() + 1
                                    ),
                                })
                        })
                    }
                }
            };
            for (k, col) in columns.iter_mut().enumerate() {
                col.push(match problem {
                    Some(_) => None,
                    None => Some(String::from_utf8_lossy(&rec.field(&bytes, k)).into_owned()),
                });
            }
            if let Some(p) = problem {
                problems.push((row, p));
            }
            row += 1;
        }
        let cols: Vec<Column> = header
            .names
            .iter()
            .zip(columns)
            .map(|(name, values)| Column::new(name.as_str().into(), values))
            .collect();
        let df = DataFrame::new(row, cols).map_err(TableError::Frame)?;
        Ok(Table { df, problems })
    }

    /// Why row `i` (from 0) could not be cut into fields, if it could not.
    pub fn row_problem(&self, i: usize) -> Option<&RowProblem> {
        self.problems
            .binary_search_by_key(&i, |p| p.0)
            .ok()
            .map(|k| &self.problems[k].1)
    }

    /// Rows in the table.
    pub fn height(&self) -> usize {
        self.df.height()
    }

    /// Column names, byte-order mark and surrounding spaces removed.
    pub fn names(&self) -> Vec<String> {
        self.df
            .get_column_names()
            .iter()
            .map(|n| clean_name(n))
            .collect()
    }

    /// A column by name (after cleaning), ready for row access.
    pub fn column(&self, name: &str) -> Option<ColumnSource> {
        let want = clean_name(name);
        let col = self
            .df
            .columns()
            .iter()
            .find(|c| clean_name(c.name()) == want)?;
        let s = col.as_materialized_series();
        match s.dtype() {
            DataType::String => Some(ColumnSource::Str(s.str().ok()?.clone())),
            DataType::Datetime(unit, zone) => {
                let div = match unit {
                    TimeUnit::Milliseconds => 1,
                    TimeUnit::Microseconds => 1_000,
                    TimeUnit::Nanoseconds => 1_000_000,
                };
                let kind = match zone {
                    Some(z) => TimeKind::Zoned(z.to_string()),
                    None => TimeKind::Naive,
                };
                let phys = s.to_physical_repr().into_owned();
                Some(ColumnSource::Time(phys.i64().ok()?.clone(), div, kind))
            }
            DataType::Date => {
                let phys = s.to_physical_repr().into_owned();
                Some(ColumnSource::Date(phys.i32().ok()?.clone()))
            }
            dt if dt.is_primitive_numeric() || dt == &DataType::Boolean => {
                let f = s.cast(&DataType::Float64).ok()?;
                Some(ColumnSource::Num(f.f64().ok()?.clone()))
            }
            _ => {
                // Anything else (dates, categoricals) is read through its text form.
                let text = s.cast(&DataType::String).ok()?;
                Some(ColumnSource::Str(text.str().ok()?.clone()))
            }
        }
    }
}

fn clean_name(n: &str) -> String {
    n.trim_start_matches('\u{feff}').trim().to_string()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn csv_cells_as_text_with_bom_and_quotes() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("t.csv");
        std::fs::write(&p, "\u{feff}name,\"note\"\r\nA,\"two\nlines\"\r\nB,\r\n").unwrap();
        let t = Table::read(&p, None).unwrap();
        assert_eq!(t.height(), 2);
        assert_eq!(t.names(), vec!["name", "note"]);
        let c = t.column("note").unwrap();
        assert_eq!(c.get(0), Cell::Str("two\nlines"));
        assert_eq!(c.get(1), Cell::Null);
    }
}
