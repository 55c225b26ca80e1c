//! The tail figures' basis: per-trade returns when every trade's return on
//! equity is known, else amounts. Hand-worked case: four trades that each
//! return +10 % of the equity before them, from 1 000: P/L 100, 110, 121,
//! 133.1. On returns they are equal, so TCR = 1 at any p; on amounts the
//! largest is the latest, TCR at 25 % (k = 1) = 133.1 ÷ mean(100, 110, 121,
//! 133.1) = 133.1 ÷ 116.025 = 1.147166...

use serde_json::Value;
use std::process::Command;

const CAL: &str = "released_at,title,currency,tier\n2024-06-03T12:30:00Z,Far away,USD,high\n";

fn analyze(trades: &str, extra: &[&str]) -> (Value, std::path::PathBuf, tempfile::TempDir) {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("t.csv"), trades).unwrap();
    std::fs::write(dir.path().join("c.csv"), CAL).unwrap();
    let out = dir.path().join("out");
    let o = Command::new(env!("CARGO_BIN_EXE_eventfence"))
        .current_dir(dir.path())
        .args([
            "analyze",
            "--trades",
            "t.csv",
            "--calendar",
            "c.csv",
            "--placebo",
            "0",
            "--bootstrap",
            "0",
            "--tcr-p",
            "25",
            "--json",
            "--out",
        ])
        .arg(&out)
        .args(extra)
        .output()
        .unwrap();
    assert!(
        o.status.code() == Some(0) || o.status.code() == Some(3),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    (serde_json::from_slice(&o.stdout).unwrap(), out, dir)
}

fn rows(equity: bool) -> String {
    let mut s = String::from(if equity {
        "opened_at,closed_at,instrument,pnl,equity_before\n"
    } else {
        "opened_at,closed_at,instrument,pnl\n"
    });
    for (d, (pnl, eq)) in [
        (100.0, 1000.0),
        (110.0, 1100.0),
        (121.0, 1210.0),
        (133.1, 1331.0),
    ]
    .iter()
    .enumerate()
    {
        let day = 4 + d;
        s.push_str(&format!(
            "2024-03-0{day} 10:00,2024-03-0{day} 11:00,EURUSD,{pnl}"
        ));
        if equity {
            s.push_str(&format!(",{eq}"));
        }
        s.push('\n');
    }
    s
}

const AMOUNT_TCR: f64 = 133.1 / 116.025;

#[test]
fn compounding_measures_the_tail_on_returns() {
    let (j, out, _dir) = analyze(
        &rows(false),
        &["--sizing", "compounding", "--initial-equity", "1000"],
    );
    assert_eq!(j["tail"]["tcr_basis"], "return");
    let tcr = j["scenarios"]["baseline"]["tcr"].as_f64().unwrap();
    assert!((tcr - 1.0).abs() < 1e-12, "{tcr}");
    assert!((j["tail"]["baseline"]["tcr"].as_f64().unwrap() - 1.0).abs() < 1e-12);
    let csv = std::fs::read_to_string(out.join("tail.csv")).unwrap();
    assert!(csv.starts_with("rank,abs_return,exposed\n"), "{csv}");
    let first: f64 = csv
        .lines()
        .nth(1)
        .unwrap()
        .split(',')
        .nth(1)
        .unwrap()
        .parse()
        .unwrap();
    assert!((first - 0.1).abs() < 1e-12, "{first}");
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(
        html.contains("on per-trade returns"),
        "the report names the basis"
    );
}

#[test]
fn recorded_equity_gives_returns_and_amounts_otherwise() {
    let (j, _, _d) = analyze(&rows(true), &[]);
    assert_eq!(j["tail"]["tcr_basis"], "return");
    assert!((j["scenarios"]["baseline"]["tcr"].as_f64().unwrap() - 1.0).abs() < 1e-12);
    // Fixed sizing with only a starting equity: sizes need not follow it,
    // so the amounts stand.
    let (j, _, _d) = analyze(&rows(false), &["--initial-equity", "1000"]);
    assert_eq!(j["tail"]["tcr_basis"], "amount");
    let tcr = j["scenarios"]["baseline"]["tcr"].as_f64().unwrap();
    assert!((tcr - AMOUNT_TCR).abs() < 1e-12, "{tcr} vs {AMOUNT_TCR}");
}
