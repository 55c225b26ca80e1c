//! P/L formation and the user's own columns: `pnl` summed from several
//! columns, `fees` deducted, `--keep` columns carried into trades.csv, and
//! every missing column named in one error. Hand-worked: trade 1 makes
//! 100 − 3.5 − 0.5 − |2| = 94; trade 2 makes −40 − 3.5 + 0 (empty swap)
//! − |−1| = −44.5; net 49.5.

use serde_json::Value;
use std::process::Command;

const TRADES: &str = "TradeRef,Entry time,Exit time,Symbol,Gross,Costs,Financing,Fee,Note\n\
101,2024-03-08 13:20,2024-03-08 13:40,EURUSD,100,-3.5,-0.5,2,first\n\
102,2024-03-11 09:00,2024-03-11 10:00,EURUSD,-40,-3.5,,-1,\"second, with comma\"\n";
const CAL: &str = "released_at,title,currency,tier\n2024-03-08T13:30:00Z,Jobs,USD,high\n";
const MAP: &str =
    "opened_at=Entry time,closed_at=Exit time,instrument=Symbol,pnl=Gross+Costs+Financing,fees=Fee";

fn run(dir: &std::path::Path, args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_eventfence"))
        .current_dir(dir)
        .args(args)
        .output()
        .unwrap()
}

#[test]
fn pnl_is_formed_from_the_columns_and_costs_are_deducted() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("t.csv"), TRADES).unwrap();
    std::fs::write(dir.path().join("c.csv"), CAL).unwrap();
    let o = run(
        dir.path(),
        &[
            "analyze",
            "--trades",
            "t.csv",
            "--calendar",
            "c.csv",
            "--map",
            MAP,
            "--keep",
            "TradeRef,Note",
            "--placebo",
            "0",
            "--bootstrap",
            "0",
            "--json",
            "--out",
            "out",
        ],
    );
    assert!(
        o.status.code() == Some(0) || o.status.code() == Some(3),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let j: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(
        j["inputs"]["trades"]["pnl_formed_as"],
        "Gross + Costs + Financing − |Fee|"
    );
    assert_eq!(j["scenarios"]["baseline"]["net"], 49.5);
    assert_eq!(j["exposure"]["exposed_pnl"], 94.0);
    let csv = std::fs::read_to_string(dir.path().join("out/trades.csv")).unwrap();
    let lines: Vec<&str> = csv.lines().collect();
    assert!(
        lines[0].ends_with(",minutes_from_nearest,TradeRef,Note"),
        "{}",
        lines[0]
    );
    assert!(
        lines[1].contains(",EURUSD,94,true,") && lines[1].ends_with(",101,first"),
        "{}",
        lines[1]
    );
    assert!(
        lines[2].contains(",EURUSD,-44.5,false,")
            && lines[2].ends_with(",102,\"second, with comma\""),
        "{}",
        lines[2]
    );
    let html = std::fs::read_to_string(dir.path().join("out/report.html")).unwrap();
    assert!(html.contains("Gross + Costs + Financing − |Fee|"));
    let o = run(dir.path(), &["check", "--trades", "t.csv", "--map", MAP]);
    assert!(
        String::from_utf8_lossy(&o.stdout)
            .contains("P/L per trade = Gross + Costs + Financing − |Fee|")
    );
    // rank and tune state it too.
    let o = run(
        dir.path(),
        &[
            "tune",
            "--trades",
            "t.csv",
            "--calendar",
            "c.csv",
            "--map",
            MAP,
            "--pre",
            "0..15/15",
            "--post",
            "0..30/30",
            "--json",
        ],
    );
    let j: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(j["pnl_formed_as"], "Gross + Costs + Financing − |Fee|");
    let with_runs = format!("{MAP},run=TradeRef");
    let o = run(
        dir.path(),
        &[
            "rank",
            "--trades",
            "t.csv",
            "--calendar",
            "c.csv",
            "--map",
            &with_runs,
        ],
    );
    assert!(
        String::from_utf8_lossy(&o.stdout)
            .contains("P/L per trade = Gross + Costs + Financing − |Fee|."),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
}

#[test]
fn every_missing_column_is_named_at_once() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("t.csv"), TRADES).unwrap();
    let o = run(
        dir.path(),
        &[
            "check",
            "--trades",
            "t.csv",
            "--map",
            "instrument=Sym,pnl=Gross+Costz",
            "--keep",
            "TradeRf",
        ],
    );
    assert_eq!(o.status.code(), Some(1));
    let e = String::from_utf8_lossy(&o.stderr);
    for part in [
        "'opened_at' for opened_at",
        "'closed_at' for closed_at",
        "'Sym' for instrument",
        "'Costz' for pnl",
        "'TradeRf' for --keep",
        "map them with --map opened_at=<column>",
    ] {
        assert!(e.contains(part), "{part} missing from: {e}");
    }
}
