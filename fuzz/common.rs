// Shared by the fuzz targets: a per-process scratch file for importers that
// read from a path.
use std::path::PathBuf;

pub fn scratch(ext: &str, data: &[u8]) -> PathBuf {
    let dir = std::env::var_os("EVENTFENCE_FUZZ_DIR").map(PathBuf::from).unwrap_or_else(std::env::temp_dir);
    let p = dir.join(format!("eventfence-fuzz-{}.{ext}", std::process::id()));
    std::fs::write(&p, data).expect("scratch file");
    p
}
