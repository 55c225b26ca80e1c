//! Every command keeps the README's exit statuses: 0 when the run completed
//! with nothing to flag, 3 when it completed but rows were skipped or
//! something needs attention (here: a skipped row; for schedule, a range
//! outside the calendar), 1 on an error.

use std::process::Command;

const CAL: &str = "released_at,title,currency,tier\n2024-03-04T13:30:00Z,Jobs,USD,high\n2024-03-04T09:00:00Z,Prices,EUR,high\n\
2024-03-15T13:30:00Z,Jobs,USD,high\n2024-03-15T09:00:00Z,Prices,EUR,high\n";
const CLEAN: &str = "run,opened_at,closed_at,instrument,pnl\np1,2024-03-04 13:20,2024-03-04 13:40,EURUSD,5\np1,2024-03-05 10:00,2024-03-05 11:00,EURUSD,-2\n\
p2,2024-03-06 10:00,2024-03-06 11:00,EURUSD,3\np2,2024-03-07 10:00,2024-03-07 11:00,EURUSD,-1\n";

fn status(args: &[&str], trades: &str) -> Option<i32> {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("t.csv"), trades).unwrap();
    std::fs::write(dir.path().join("c.csv"), CAL).unwrap();
    let o = Command::new(env!("CARGO_BIN_EXE_eventfence"))
        .current_dir(dir.path())
        .args(args)
        .output()
        .unwrap();
    o.status.code()
}

#[test]
fn each_command_exits_0_clean_3_with_warnings_1_on_error() {
    let damaged = format!("{CLEAN}p2,yesterday,2024-03-07 11:00,EURUSD,1\n");
    let common = ["--trades", "t.csv", "--calendar", "c.csv"];
    let commands: [(&str, &[&str]); 4] = [
        ("check", &[]),
        (
            "analyze",
            &["--placebo", "0", "--bootstrap", "0", "--quiet"],
        ),
        ("rank", &["--quiet"]),
        (
            "tune",
            &["--pre", "0..15/15", "--post", "0..30/30", "--quiet"],
        ),
    ];
    for (cmd, extra) in commands {
        let mut args = vec![cmd];
        args.extend_from_slice(&common);
        args.extend_from_slice(extra);
        assert_eq!(status(&args, CLEAN), Some(0), "{cmd} on clean input");
        let mut skip = args.clone();
        skip.push("--skip-bad-rows");
        assert_eq!(status(&skip, &damaged), Some(3), "{cmd} with a skipped row");
        assert_eq!(
            status(&args, &damaged),
            Some(if cmd == "check" { 3 } else { 1 }),
            "{cmd} stopping on a bad row"
        );
    }
    let sched = |from: &str, to: &str| {
        status(
            &[
                "schedule",
                "--calendar",
                "c.csv",
                "--currencies",
                "USD",
                "--from",
                from,
                "--to",
                to,
            ],
            CLEAN,
        )
    };
    assert_eq!(sched("2024-03-05", "2024-03-12"), Some(0));
    // A range past the calendar's last release: warned, status 3.
    assert_eq!(sched("2024-03-10", "2024-03-31"), Some(3));
}
