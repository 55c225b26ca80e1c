//! Memory budget: estimates what loading and analysing trade files will
//! take and refuses up front, with a message a trader can act on, rather
//! than being killed by the system halfway through a large input.
//!
//! The estimate is rows × [`BYTES_PER_TRADE`]; rows are counted from the
//! file: CSV size ÷ mean length of its first lines, Parquet row counts from
//! its footer.

use std::io::Read;
use std::path::{Path, PathBuf};

/// Peak memory per trade of `analyze` (import, exposure, three scenarios,
/// per-run figures), measured (docs/performance.md): 90 B on 10 million
/// CSV trades, 99 B from Parquet, 75 B on 82 million; rounded up with room.
pub const BYTES_PER_TRADE: u64 = 112;
/// Memory the program needs whatever the input (binary, thread stacks,
/// calendar, read blocks).
pub const FIXED_BYTES: u64 = 96 << 20;

#[derive(Debug, thiserror::Error)]
pub enum BudgetError {
    #[error(
        "trades {path}: about {rows} rows need about {need} of memory, more than the {limit} {basis}; split the file (by run or by date), or raise --max-memory if the machine has the room"
    )]
    TooLarge { path: String, rows: u64, need: String, limit: String, basis: &'static str },
    #[error("--max-memory '{0}': expected a size such as 512M, 8G or 8GiB")]
    BadSize(String),
    #[error("trades {path}: {message}")]
    Read { path: PathBuf, message: String },
}

/// Reads `8G`, `512M`, `1.5GiB`, `2000000000` (bytes).
pub fn parse_size(s: &str) -> Result<u64, BudgetError> {
    let t = s.trim();
    let split = t.find(|c: char| c.is_ascii_alphabetic()).unwrap_or(t.len());
    let (num, unit) = t.split_at(split);
    let v: f64 = num.trim().parse().map_err(|_| BudgetError::BadSize(s.into()))?;
    let mult = match unit.trim().to_ascii_lowercase().as_str() {
        "" | "b" => 1u64,
        "k" | "kb" | "kib" => 1 << 10,
        "m" | "mb" | "mib" => 1 << 20,
        "g" | "gb" | "gib" => 1 << 30,
        "t" | "tb" | "tib" => 1 << 40,
        _ => return Err(BudgetError::BadSize(s.into())),
    };
    if !(v.is_finite() && v > 0.0) {
        return Err(BudgetError::BadSize(s.into()));
    }
    Ok((v * mult as f64) as u64)
}

/// The memory the system says is available now (Linux `MemAvailable`).
pub fn available() -> Option<u64> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = text.lines().find(|l| l.starts_with("MemAvailable:"))?;
    let kb: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb * 1024)
}

/// Estimated data rows of one trade file.
pub fn estimate_rows(path: &Path) -> Result<u64, BudgetError> {
    let err = |e: String| BudgetError::Read { path: path.to_path_buf(), message: e };
    let size = std::fs::metadata(path).map_err(|e| err(e.to_string()))?.len();
    if crate::table::is_parquet(path) {
        // Parquet compresses; its footer holds the row count.
        use polars::prelude::*;
        let file = std::fs::File::open(path).map_err(|e| err(e.to_string()))?;
        return ParquetReader::new(file).num_rows().map(|n| n as u64).map_err(|e| err(format!("not a readable Parquet file: {e}")));
    }
    let mut head = Vec::with_capacity(256 * 1024);
    std::fs::File::open(path).and_then(|f| f.take(256 * 1024).read_to_end(&mut head)).map_err(|e| err(e.to_string()))?;
    let lines = memchr::memchr_iter(b'\n', &head).count().max(1) as u64;
    Ok(size * lines / head.len().max(1) as u64)
}

fn human(bytes: u64) -> String {
    let b = bytes as f64;
    if b >= (1u64 << 30) as f64 { format!("{:.1} GiB", b / (1u64 << 30) as f64) } else { format!("{:.0} MiB", b / (1u64 << 20) as f64) }
}

/// Refuses when the trade files would need more than `limit` bytes (or,
/// without a limit, more than the memory available now).
pub fn check(paths: &[PathBuf], limit: Option<u64>) -> Result<(), BudgetError> {
    let (limit, basis) = match limit {
        Some(l) => (l, "allowed by --max-memory"),
        None => match available() {
            Some(a) => (a, "available on this machine now"),
            None => return Ok(()),
        },
    };
    let mut rows = 0;
    for p in paths {
        rows += estimate_rows(p)?;
    }
    let need = FIXED_BYTES + rows * BYTES_PER_TRADE;
    if need > limit {
        let path = paths.iter().map(|p| p.display().to_string()).collect::<Vec<_>>().join(", ");
        return Err(BudgetError::TooLarge { path, rows, need: human(need), limit: human(limit), basis });
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sizes() {
        assert_eq!(parse_size("512M").unwrap(), 512 << 20);
        assert_eq!(parse_size("8GiB").unwrap(), 8 << 30);
        assert_eq!(parse_size("1.5g").unwrap(), 3 << 29);
        assert_eq!(parse_size("2000").unwrap(), 2000);
        assert!(parse_size("lots").is_err());
        assert!(parse_size("-1G").is_err());
    }

    #[test]
    fn rows_estimated_from_line_length() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("t.csv");
        let line = "2024-03-08 13:00,2024-03-08 14:00,EURUSD,10.5\n";
        std::fs::write(&p, line.repeat(100_000)).unwrap();
        let rows = estimate_rows(&p).unwrap();
        assert!((99_000..=101_000).contains(&rows), "{rows}");
        let need_more = check(std::slice::from_ref(&p), Some(FIXED_BYTES + 1000 * BYTES_PER_TRADE)).unwrap_err().to_string();
        assert!(need_more.contains(&format!("about {rows} rows")) && need_more.contains("--max-memory"), "{need_more}");
        assert!(check(&[p], Some(1 << 30)).is_ok());
    }
}
