//! A run killed while writing its output folder leaves either the previous
//! complete files or none: never a half-written file under a real name.

mod common;

use std::process::Stdio;
use std::time::Duration;

#[test]
fn killed_run_leaves_old_complete_outputs() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    let cmd = || {
        let mut c = common::demo("analyze");
        c.args(["--placebo", "0", "--bootstrap", "0", "--out"])
            .arg(&out)
            .stdout(Stdio::null())
            .stderr(Stdio::null());
        c
    };
    assert!(cmd().status().unwrap().success());
    let before: Vec<(String, Vec<u8>)> =
        ["summary.json", "trades.csv", "releases.csv", "report.html"]
            .iter()
            .map(|n| (n.to_string(), std::fs::read(out.join(n)).unwrap()))
            .collect();
    // Kill reruns at different moments, some of them during the writes.
    for delay_ms in [5u64, 60, 150, 300, 450, 600, 800, 1100] {
        let mut child = cmd().spawn().unwrap();
        std::thread::sleep(Duration::from_millis(delay_ms));
        let _ = child.kill();
        let _ = child.wait();
        for (name, old) in &before {
            let now = std::fs::read(out.join(name)).unwrap();
            // Same inputs, so a completed rewrite is byte-identical except
            // for nothing: the outputs carry no timestamps.
            assert_eq!(
                &now, old,
                "{name} changed or is partial after a kill at {delay_ms} ms"
            );
        }
        serde_json::from_slice::<serde_json::Value>(
            &std::fs::read(out.join("summary.json")).unwrap(),
        )
        .unwrap();
    }
    // The next run sweeps any temp file a killed run left.
    assert!(cmd().status().unwrap().success());
    let temps: Vec<_> = std::fs::read_dir(&out)
        .unwrap()
        .flatten()
        .filter(|e| e.file_name().to_string_lossy().contains(".tmp-"))
        .collect();
    assert!(temps.is_empty());
}
