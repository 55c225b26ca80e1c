//! Phase timings for profiling: with `EVENTFENCE_PHASES=1` in the
//! environment, each [`mark`] prints the wall time since the previous mark,
//! the resident memory and its peak so far (Linux) to stderr. Off by
//! default; never part of any output file.

use std::sync::Mutex;
use std::time::Instant;

static LAST: Mutex<Option<Instant>> = Mutex::new(None);

fn enabled() -> bool {
    static ON: std::sync::OnceLock<bool> = std::sync::OnceLock::new();
    *ON.get_or_init(|| std::env::var_os("EVENTFENCE_PHASES").is_some_and(|v| v != "0"))
}

/// Ends the phase called `name` (timed from the previous mark, or from the
/// first call).
pub fn mark(name: &str) {
    if !enabled() {
        return;
    }
    let now = Instant::now();
    let mut last = LAST.lock().unwrap_or_else(|e| e.into_inner());
    if let Some(t) = *last {
        let status = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
        let field = |key: &str| {
            status
                .lines()
                .find_map(|l| l.strip_prefix(key))
                .map_or(0, |v| {
                    v.trim().trim_end_matches(" kB").parse::<u64>().unwrap_or(0) / 1024
                })
        };
        eprintln!(
            "phase {name:<24} {:>8.3} s  rss {:>6} MiB  peak {:>6} MiB",
            (now - t).as_secs_f64(),
            field("VmRSS:"),
            field("VmHWM:")
        );
    }
    *last = Some(Instant::now());
}
