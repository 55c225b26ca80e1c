//! Every example printed by a subcommand's `--help` runs as pasted: the
//! lines are read from the help text itself (continuation backslashes
//! joined as a shell would), run in a scratch copy of the demo inputs, and
//! must finish without an error (0, or 3 for "finished, with warnings").
//! `analyze` gets 9 placebos and 9 resamples added, only to keep the debug
//! build's run short; the rest is exactly as printed.

mod common;

use std::path::Path;
use std::process::Command;

/// The example commands in a help text: a line starting `eventfence`, with
/// the lines its trailing backslashes continue.
fn examples(help: &str) -> Vec<Vec<String>> {
    let mut out = Vec::new();
    let mut lines = help.lines();
    while let Some(line) = lines.next() {
        let mut cmd = line.trim().to_string();
        if !cmd.starts_with("eventfence ") {
            continue;
        }
        while cmd.ends_with('\\') {
            cmd.pop();
            cmd.push(' ');
            cmd.push_str(lines.next().expect("a continued line").trim());
        }
        out.push(cmd.split_whitespace().map(str::to_string).collect());
    }
    out
}

fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        if e.file_type().unwrap().is_file() {
            std::fs::copy(e.path(), to.join(e.file_name())).unwrap();
        }
    }
}

#[test]
fn every_help_example_runs_on_the_demo() {
    let bin = env!("CARGO_BIN_EXE_eventfence");
    let root = common::root();
    let scratch = tempfile::tempdir().unwrap();
    copy_dir(&root.join("demo"), &scratch.path().join("demo"));
    copy_dir(&root.join("calendars"), &scratch.path().join("calendars"));
    let mut ran = 0;
    for sub in ["analyze", "check", "rank", "schedule", "tune"] {
        let help = Command::new(bin).args([sub, "--help"]).output().unwrap();
        let help = String::from_utf8(help.stdout).unwrap();
        let found = examples(&help);
        assert!(!found.is_empty(), "{sub} --help has no example:\n{help}");
        for args in found {
            assert_eq!(args[1], sub, "{args:?}");
            let o = Command::new(bin)
                .args(&args[1..])
                .args(if sub == "analyze" {
                    &["--placebo", "9", "--bootstrap", "9"][..]
                } else {
                    &[][..]
                })
                .current_dir(scratch.path())
                .output()
                .unwrap();
            assert!(
                matches!(o.status.code(), Some(0 | 3)),
                "{}: exit {:?}\n{}",
                args.join(" "),
                o.status.code(),
                String::from_utf8_lossy(&o.stderr)
            );
            ran += 1;
        }
    }
    assert_eq!(ran, 5);
}

/// A subcommand lists only flags that act there: `schedule` windows
/// releases but judges no trades, so it has no exposure rule, sizing or
/// pooling flags; `analyze` and `tune` have `--pool`, `rank` (always per
/// run) does not.
#[test]
fn help_lists_only_flags_that_act() {
    let help = |sub: &str| {
        let o = Command::new(env!("CARGO_BIN_EXE_eventfence"))
            .args([sub, "--help"])
            .output()
            .unwrap();
        String::from_utf8(o.stdout).unwrap()
    };
    let schedule = help("schedule");
    for flag in ["--rule <", "--sizing", "--pool", "--placebo"] {
        assert!(!schedule.contains(flag), "schedule lists {flag}");
    }
    assert!(help("analyze").contains("--rule <RULE>"));
    assert!(help("tune").contains("--pool"));
    assert!(!help("rank").contains("--pool"));
}
