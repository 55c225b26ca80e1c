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

/// Hands the memory a finished phase freed back to the system. glibc keeps
/// the freed heap pages of a phase's many mid-sized buffers resident (the
/// placebo index, a class and currency at a time: about 270 MB at 10 M
/// trades), and the next phase's peak would stack on them. A no-op where
/// the allocator is not glibc's.
pub fn release_freed_memory() {
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    {
        unsafe extern "C" {
            fn malloc_trim(pad: usize) -> std::ffi::c_int;
        }
        // SAFETY: glibc's malloc_trim takes any pad and only returns free
        // memory to the system; it touches no live allocation.
        unsafe {
            malloc_trim(0);
        }
    }
}

/// Why a trade input is refused before it is read.
#[derive(Debug, thiserror::Error)]
#[allow(missing_docs)] // variant fields are named in each message
pub enum BudgetError {
    #[error(
        "trades {path}: about {rows} rows need about {need} of memory, more than the {limit} {basis}; split the file (by run or by date), or raise --max-memory if the machine has the room"
    )]
    /// The estimate is over the limit.
    TooLarge {
        path: String,
        rows: u64,
        need: String,
        limit: String,
        basis: &'static str,
    },
    /// A --max-memory value that is not a size.
    #[error("--max-memory '{0}': expected a size such as 512M, 8G or 8GiB")]
    BadSize(String),
    /// The file could not be measured.
    #[error("trades {path}: {message}")]
    Read { path: PathBuf, message: String },
}

/// Reads `8G`, `512M`, `1.5GiB`, `2000000000` (bytes).
pub fn parse_size(s: &str) -> Result<u64, BudgetError> {
    let t = s.trim();
    let split = t.find(|c: char| c.is_ascii_alphabetic()).unwrap_or(t.len());
    let (num, unit) = t.split_at(split);
    let v: f64 = num
        .trim()
        .parse()
        .map_err(|_| BudgetError::BadSize(s.into()))?;
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

/// The memory this process may still use now: the machine's
/// `MemAvailable`, or less when a control group (a container's limit) caps
/// it, and what that says.
pub fn available() -> Option<(u64, &'static str)> {
    let host = std::fs::read_to_string("/proc/meminfo")
        .ok()
        .and_then(|text| {
            let line = text.lines().find(|l| l.starts_with("MemAvailable:"))?;
            let kb: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
            Some(kb * 1024)
        });
    let group = std::fs::read_to_string("/proc/self/cgroup")
        .ok()
        .and_then(|t| cgroup_room(&t, Path::new("/sys/fs/cgroup")));
    match (host, group) {
        (Some(h), Some(g)) if g < h => {
            Some((g, "left under this container's memory limit (cgroup)"))
        }
        (Some(h), _) => Some((h, "available on this machine now")),
        (None, Some(g)) => Some((g, "left under this container's memory limit (cgroup)")),
        (None, None) => None,
    }
}

/// Room left under the tightest memory limit of this process's control
/// group and its ancestors: limit − usage, from cgroup v2 (`memory.max`,
/// `memory.current`) or v1 (`memory.limit_in_bytes`,
/// `memory.usage_in_bytes`). `proc_cgroup`: the text of /proc/self/cgroup;
/// `root`: where the hierarchies are mounted. `None` when no limit is set.
///
/// Written by hand: the crates that read cgroups manage them (create,
/// attach, set limits) and bring far more than these two files need.
pub fn cgroup_room(proc_cgroup: &str, root: &Path) -> Option<u64> {
    // v1 values this large mean "no limit" (a page-rounded i64::MAX).
    const UNLIMITED_V1: u64 = 1 << 62;
    let read = |p: PathBuf| -> Option<u64> { std::fs::read_to_string(p).ok()?.trim().parse().ok() };
    let mut best: Option<u64> = None;
    for line in proc_cgroup.lines() {
        let mut parts = line.splitn(3, ':');
        let (_, controllers, path) = (parts.next()?, parts.next()?, parts.next()?);
        let (base, limit_file, usage_file) = if controllers.is_empty() {
            (root.to_path_buf(), "memory.max", "memory.current")
        } else if controllers.split(',').any(|c| c == "memory") {
            (
                root.join("memory"),
                "memory.limit_in_bytes",
                "memory.usage_in_bytes",
            )
        } else {
            continue;
        };
        // From the process's own group up to the root (a container sees
        // its own group mounted as the root: then only the root is read).
        let mut rel = PathBuf::from(path.trim_start_matches('/'));
        loop {
            let dir = base.join(&rel);
            if let Some(limit) = read(dir.join(limit_file)).filter(|&l| l < UNLIMITED_V1) {
                let used = read(dir.join(usage_file)).unwrap_or(0);
                let room = limit.saturating_sub(used);
                best = Some(best.map_or(room, |b| b.min(room)));
            }
            if !rel.pop() {
                break;
            }
        }
    }
    best
}

/// Estimated data rows of one trade file.
pub fn estimate_rows(path: &Path) -> Result<u64, BudgetError> {
    let err = |e: String| BudgetError::Read {
        path: path.to_path_buf(),
        message: e,
    };
    let size = std::fs::metadata(path)
        .map_err(|e| err(e.to_string()))?
        .len();
    if crate::import::table::TableFormat::of_path(path)
        == crate::import::table::TableFormat::Parquet
    {
        // Parquet compresses; its footer holds the row count.
        return crate::import::table::parquet_row_count(path)
            .map(|n| n as u64)
            .map_err(|e| err(e.to_string()));
    }
    let mut head = Vec::with_capacity(256 * 1024);
    std::fs::File::open(path)
        .and_then(|f| f.take(256 * 1024).read_to_end(&mut head))
        .map_err(|e| err(e.to_string()))?;
    let lines = memchr::memchr_iter(b'\n', &head).count().max(1) as u64;
    Ok(size * lines / head.len().max(1) as u64)
}

fn human(bytes: u64) -> String {
    let b = bytes as f64;
    if b >= (1u64 << 30) as f64 {
        format!("{:.1} GiB", b / (1u64 << 30) as f64)
    } else {
        format!("{:.0} MiB", b / (1u64 << 20) as f64)
    }
}

/// Refuses when the trade files would need more than `limit` bytes (or,
/// without a limit, more than the memory available now).
pub fn check(paths: &[PathBuf], limit: Option<u64>) -> Result<(), BudgetError> {
    let (limit, basis) = match limit {
        Some(l) => (l, "allowed by --max-memory"),
        None => match available() {
            Some(a) => a,
            None => return Ok(()),
        },
    };
    let mut rows = 0;
    for p in paths {
        rows += estimate_rows(p)?;
    }
    let need = FIXED_BYTES + rows * BYTES_PER_TRADE;
    if need > limit {
        let path = paths
            .iter()
            .map(|p| p.display().to_string())
            .collect::<Vec<_>>()
            .join(", ");
        return Err(BudgetError::TooLarge {
            path,
            rows,
            need: human(need),
            limit: human(limit),
            basis,
        });
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

    /// Layouts of the kernel's cgroup documentation (Documentation/admin-
    /// guide/cgroup-v2.rst: `memory.max` holds bytes or "max"; cgroup-v1/
    /// memory.rst: `memory.limit_in_bytes`, unlimited as a huge value).
    #[test]
    fn container_limits_from_cgroup_v1_and_v2() {
        let dir = tempfile::tempdir().unwrap();
        let root = dir.path();
        let put = |rel: &str, text: &str| {
            let p = root.join(rel);
            std::fs::create_dir_all(p.parent().unwrap()).unwrap();
            std::fs::write(p, text).unwrap();
        };
        // v2: a 4 GiB limit on the parent, none on the leaf.
        put("memory.max", "max\n");
        put("box/memory.max", "4294967296\n");
        put("box/memory.current", "1073741824\n");
        put("box/job/memory.max", "max\n");
        put("box/job/memory.current", "1000\n");
        assert_eq!(cgroup_room("0::/box/job\n", root), Some(3 << 30));
        // v1: the leaf is tighter than the parent; the root is unlimited.
        put("memory/memory.limit_in_bytes", "9223372036854771712\n");
        put("memory/a/memory.limit_in_bytes", "8589934592\n");
        put("memory/a/b/memory.limit_in_bytes", "2147483648\n");
        put("memory/a/b/memory.usage_in_bytes", "536870912\n");
        assert_eq!(
            cgroup_room("4:memory:/a/b\n3:cpu:/\n", root),
            Some(1536 << 20)
        );
        assert_eq!(
            cgroup_room("4:cpuacct,memory:/a/b\n", root),
            Some(1536 << 20)
        );
        // No limit anywhere.
        assert_eq!(cgroup_room("4:memory:/\n", root), None);
        assert_eq!(cgroup_room("0::/\n", root), None);
        // The group's own path missing (a container's mount): its root counts.
        assert_eq!(cgroup_room("4:memory:/elsewhere\n", root), None);
    }

    #[test]
    fn rows_estimated_from_line_length() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("t.csv");
        let line = "2024-03-08 13:00,2024-03-08 14:00,EURUSD,10.5\n";
        std::fs::write(&p, line.repeat(100_000)).unwrap();
        let rows = estimate_rows(&p).unwrap();
        assert!((99_000..=101_000).contains(&rows), "{rows}");
        let need_more = check(
            std::slice::from_ref(&p),
            Some(FIXED_BYTES + 1000 * BYTES_PER_TRADE),
        )
        .unwrap_err()
        .to_string();
        assert!(
            need_more.contains(&format!("about {rows} rows")) && need_more.contains("--max-memory"),
            "{need_more}"
        );
        assert!(check(&[p], Some(1 << 30)).is_ok());
    }
}
