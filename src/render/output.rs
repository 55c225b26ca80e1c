//! Writing output files: atomically (temp file in the same folder, then
//! rename, then the folder itself synced so the rename survives a crash),
//! and never over an input file.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::LazyLock;
use std::time::SystemTime;

/// When this process started, as far as it knows: `main` touches it first
/// thing ([`mark_process_start`]); a library caller's process marks it at
/// its first output folder, later than its real start, which only makes
/// the sweep below keep more.
static PROCESS_START: LazyLock<SystemTime> = LazyLock::new(SystemTime::now);

/// Records the process's start time for the temp-file sweep (call first
/// thing in `main`).
pub fn mark_process_start() {
    LazyLock::force(&PROCESS_START);
}

#[derive(Debug, thiserror::Error)]
pub enum OutputError {
    #[error("cannot write {path}: {source}")]
    Io {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("refusing to write {0}: it is one of the input files")]
    WouldOverwriteInput(PathBuf),
}

/// An output folder that knows the inputs it must not overwrite.
pub struct OutDir {
    pub dir: PathBuf,
    inputs: Vec<PathBuf>,
}

impl OutDir {
    /// Creates the folder if needed.
    pub fn new(dir: &Path, inputs: &[PathBuf]) -> Result<OutDir, OutputError> {
        std::fs::create_dir_all(dir).map_err(|source| OutputError::Io {
            path: dir.into(),
            source,
        })?;
        sweep_stale_temps(dir, *PROCESS_START);
        let inputs = inputs
            .iter()
            .filter_map(|p| std::fs::canonicalize(p).ok())
            .collect();
        Ok(OutDir {
            dir: dir.into(),
            inputs,
        })
    }

    /// Writes `name` in the folder atomically: readers see the old complete
    /// file or the new complete file, never a part.
    pub fn write(&self, name: &str, bytes: &[u8]) -> Result<PathBuf, OutputError> {
        let path = self.dir.join(name);
        if let Ok(canon) = std::fs::canonicalize(&path)
            && self.inputs.contains(&canon)
        {
            return Err(OutputError::WouldOverwriteInput(path));
        }
        let tmp = self.dir.join(format!(".{name}.tmp-{}", std::process::id()));
        let io = |source| OutputError::Io {
            path: path.clone(),
            source,
        };
        {
            let mut f = std::fs::File::create(&tmp).map_err(io)?;
            f.write_all(bytes).map_err(io)?;
            f.sync_all().map_err(io)?;
        }
        std::fs::rename(&tmp, &path).map_err(|source| {
            let _ = std::fs::remove_file(&tmp);
            OutputError::Io {
                path: path.clone(),
                source,
            }
        })?;
        sync_folder(&self.dir).map_err(|source| OutputError::Io {
            path: self.dir.clone(),
            source,
        })?;
        Ok(path)
    }
}

/// Syncs a folder, so that a rename into it is on disk (POSIX: the rename
/// is a change of the folder, not of the file). Elsewhere a no-op.
fn sync_folder(dir: &Path) -> std::io::Result<()> {
    #[cfg(unix)]
    {
        std::fs::File::open(dir)?.sync_all()
    }
    #[cfg(not(unix))]
    {
        let _ = dir;
        Ok(())
    }
}

/// Removes temp files a killed run left behind: only those last written
/// before `started` (this process's start) and, where the system says which
/// processes live (`/proc`), whose writer is gone. Another run writing into
/// the same folder right now keeps its temp file.
fn sweep_stale_temps(dir: &Path, started: SystemTime) {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return;
    };
    for e in entries.flatten() {
        let name = e.file_name().to_string_lossy().into_owned();
        let Some(pid) = temp_pid(&name) else {
            continue;
        };
        let older = e
            .metadata()
            .and_then(|m| m.modified())
            .is_ok_and(|t| t < started);
        if older && !another_writer_runs(pid) {
            let _ = std::fs::remove_file(e.path());
        }
    }
}

/// Whether `pid` is another process that is running, where `/proc` tells
/// (Linux); where it cannot tell, the file's age alone decides. This
/// process's own old temp files cannot exist (they are newer than its start).
fn another_writer_runs(pid: u32) -> bool {
    pid != std::process::id()
        && Path::new("/proc/self").exists()
        && Path::new(&format!("/proc/{pid}")).exists()
}

/// The writer's PID of a `.NAME.tmp-PID` file, the shape of
/// [`OutDir::write`]'s temp files; `None` for any other name.
fn temp_pid(name: &str) -> Option<u32> {
    if !name.starts_with('.') {
        return None;
    }
    let (_, pid) = name.rsplit_once(".tmp-")?;
    // Digits only (`parse` alone would take a leading `+`).
    pid.bytes()
        .all(|b| b.is_ascii_digit())
        .then(|| pid.parse().ok())?
}

/// Writes to stdout, returning an error (not panicking) when the reader has
/// gone away; `main` treats a closed pipe as success.
pub fn stdout(text: &[u8]) -> std::io::Result<()> {
    let mut out = std::io::stdout().lock();
    out.write_all(text)?;
    out.flush()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn atomic_write_and_input_guard() {
        let dir = tempfile::tempdir().unwrap();
        let input = dir.path().join("trades.csv");
        std::fs::write(&input, "x").unwrap();
        let out = OutDir::new(dir.path(), std::slice::from_ref(&input)).unwrap();
        assert!(matches!(
            out.write("trades.csv", b"y"),
            Err(OutputError::WouldOverwriteInput(_))
        ));
        assert_eq!(std::fs::read_to_string(&input).unwrap(), "x");
        out.write("summary.json", b"{}").unwrap();
        out.write("summary.json", b"{\"a\":1}").unwrap();
        assert_eq!(
            std::fs::read_to_string(dir.path().join("summary.json")).unwrap(),
            "{\"a\":1}"
        );
        let leftovers: Vec<_> = std::fs::read_dir(dir.path())
            .unwrap()
            .filter_map(Result::ok)
            .filter(|e| e.file_name().to_string_lossy().contains(".tmp-"))
            .collect();
        assert!(leftovers.is_empty());
        assert_eq!(temp_pid(".trades.csv.tmp-42"), Some(42));
        assert_eq!(temp_pid("trades.csv"), None);
        assert_eq!(temp_pid(".x.tmp-abc"), None);
    }

    /// A temp file written before this process started, by a writer that is
    /// gone, is swept; one written since (another live run's) is kept, and
    /// so is one whose writer still runs.
    #[test]
    fn sweep_keeps_live_runs_temp_files() {
        let dir = tempfile::tempdir().unwrap();
        let started = SystemTime::now();
        let old = started - std::time::Duration::from_secs(3600);
        let make = |name: &str, when: SystemTime| {
            let path = dir.path().join(name);
            let f = std::fs::File::create(&path).unwrap();
            f.set_modified(when).unwrap();
            path
        };
        // PIDs above the kernel's largest (4 194 304) are never running.
        let killed = make(".summary.json.tmp-4999999", old);
        let live_new = make(
            ".trades.csv.tmp-4999998",
            started + std::time::Duration::from_secs(5),
        );
        let mut child = std::process::Command::new("sleep")
            .arg("30")
            .spawn()
            .unwrap();
        let live_old = make(&format!(".tail.csv.tmp-{}", child.id()), old);
        let not_ours = make(".notes.tmp-x", old);
        sweep_stale_temps(dir.path(), started);
        let running = Path::new("/proc/self").exists();
        child.kill().unwrap();
        child.wait().unwrap();
        assert!(!killed.exists(), "a dead writer's old temp file is swept");
        assert!(
            live_new.exists(),
            "a temp file newer than the process stays"
        );
        assert!(not_ours.exists(), "only our temp files' shape is swept");
        if running {
            assert!(live_old.exists(), "a running writer's temp file stays");
        }
    }
}
