//! Writing output files: atomically (temp file in the same folder, then
//! rename), and never over an input file.

use std::io::Write;
use std::path::{Path, PathBuf};

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
        // Temp files left by a run that was killed mid-write: only ever ours.
        if let Ok(entries) = std::fs::read_dir(dir) {
            for e in entries.flatten() {
                let name = e.file_name().to_string_lossy().into_owned();
                if is_temp_name(&name) {
                    let _ = std::fs::remove_file(e.path());
                }
            }
        }
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
        Ok(path)
    }
}

/// `.NAME.tmp-PID`, the shape of [`OutDir::write`]'s temp files.
fn is_temp_name(name: &str) -> bool {
    name.starts_with('.')
        && name
            .rsplit_once(".tmp-")
            .is_some_and(|(_, pid)| !pid.is_empty() && pid.bytes().all(|b| b.is_ascii_digit()))
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
        // A killed run's temp file is swept by the next run.
        std::fs::write(dir.path().join(".summary.json.tmp-999999"), "{\"half").unwrap();
        OutDir::new(dir.path(), &[]).unwrap();
        assert!(!dir.path().join(".summary.json.tmp-999999").exists());
        assert!(
            is_temp_name(".trades.csv.tmp-42")
                && !is_temp_name("trades.csv")
                && !is_temp_name(".x.tmp-abc")
        );
    }
}
