//! Reading a tabular input file (CSV or Parquet) through polars and handing
//! out its cells one row at a time, whatever the column's storage type.
//!
//! CSV columns are read as text so that every cell reaches the importers'
//! own validation (a bad value becomes a row rejection, never a silent
//! null). Parquet columns keep their types: text, numbers, or timestamps.

use polars::prelude::*;
use std::path::Path;

/// A loaded table.
pub struct Table {
    df: DataFrame,
}

/// One cell, borrowed from a column.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Cell<'a> {
    Null,
    Str(&'a str),
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
    Str(StringChunked),
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
    pub fn get(&self, i: usize) -> Cell<'_> {
        match self {
            ColumnSource::Str(c) => match c.get(i) {
                Some(s) if !crate::timefmt::trim_fast(s).is_empty() => Cell::Str(s),
                _ => Cell::Null,
            },
            ColumnSource::Num(c) => c.get(i).map_or(Cell::Null, Cell::Num),
            ColumnSource::Time(c, div, TimeKind::Zoned(_)) => c.get(i).map_or(Cell::Null, |v| Cell::Instant(v.div_euclid(*div))),
            ColumnSource::Time(c, div, TimeKind::Naive) => c.get(i).map_or(Cell::Null, |v| Cell::Local(v.div_euclid(*div))),
            ColumnSource::Date(c) => c.get(i).map_or(Cell::Null, Cell::Date),
        }
    }

    /// What the column holds, in words for `check` (`zone`: the reader's
    /// zone, which applies to text and naive timestamps).
    pub fn describe(&self, zone: &str, epoch: Option<&str>) -> String {
        match self {
            ColumnSource::Str(_) => format!("text; local to {zone} unless a value carries an offset or Z"),
            ColumnSource::Num(_) => match epoch {
                Some(e) => format!("numbers read as {e}"),
                None => "numbers (refused as times without --time-format epoch-s|epoch-ms)".into(),
            },
            ColumnSource::Time(_, _, TimeKind::Zoned(tz)) => format!("timestamps with zone {tz}: instants, used as stored"),
            ColumnSource::Time(_, _, TimeKind::Naive) => format!("timestamps without a zone: local to {zone}"),
            ColumnSource::Date(_) => "dates without a time of day".into(),
        }
    }
}

/// Parquet by extension (`.parquet`, `.pq`); anything else is read as CSV.
pub fn is_parquet(path: &Path) -> bool {
    matches!(
        path.extension().and_then(|e| e.to_str()).map(|e| e.to_ascii_lowercase()).as_deref(),
        Some("parquet" | "pq")
    )
}

/// The rows of a Parquet file as (first row, rows) per row group, so that a
/// large file can be read one group at a time.
pub fn parquet_row_groups(path: &Path) -> Result<Vec<(usize, usize)>, String> {
    let file = std::fs::File::open(path).map_err(|e| e.to_string())?;
    let mut reader = ParquetReader::new(file);
    let meta = reader.get_metadata().map_err(|e| format!("not a readable Parquet file: {e}"))?;
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

impl Table {
    /// Rows `first..first + rows` of a Parquet file.
    pub fn read_parquet_rows(path: &Path, first: usize, rows: usize) -> Result<Table, String> {
        let file = std::fs::File::open(path).map_err(|e| e.to_string())?;
        let df = ParquetReader::new(file)
            .with_slice(Some((first, rows)))
            .finish()
            .map_err(|e| format!("not a readable Parquet file: {e}"))?;
        Ok(Table { df })
    }

    /// Reads a CSV (all columns as text) or Parquet file.
    pub fn read(path: &Path, delimiter: Option<u8>) -> Result<Table, String> {
        if is_parquet(path) {
            let file = std::fs::File::open(path).map_err(|e| e.to_string())?;
            let df = ParquetReader::new(file).finish().map_err(|e| format!("not a readable Parquet file: {e}"))?;
            return Ok(Table { df });
        }
        let mut head = vec![0u8; 64 * 1024];
        let n = {
            use std::io::Read;
            let mut f = std::fs::File::open(path).map_err(|e| e.to_string())?;
            f.read(&mut head).map_err(|e| e.to_string())?
        };
        head.truncate(n);
        if n == 0 {
            return Err("the file is empty (expected a header row)".into());
        }
        let sep = delimiter.unwrap_or_else(|| crate::csvchunks::sniff_delimiter(&head));
        let df = CsvReadOptions::default()
            .with_has_header(true)
            .with_infer_schema_length(Some(0))
            .map_parse_options(|p| p.with_separator(sep))
            .try_into_reader_with_file_path(Some(path.to_path_buf()))
            .and_then(|r| r.finish())
            .map_err(|e| format!("not readable as CSV with delimiter '{}': {e}", (sep as char).escape_default()))?;
        Ok(Table { df })
    }

    pub fn height(&self) -> usize {
        self.df.height()
    }

    /// Column names, byte-order mark and surrounding spaces removed.
    pub fn names(&self) -> Vec<String> {
        self.df.get_column_names().iter().map(|n| clean_name(n)).collect()
    }

    /// A column by name (after cleaning), ready for row access.
    pub fn column(&self, name: &str) -> Option<ColumnSource> {
        let want = clean_name(name);
        let col = self.df.columns().iter().find(|c| clean_name(c.name()) == want)?;
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
