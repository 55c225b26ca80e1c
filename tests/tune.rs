//! `eventfence tune` on the demo: a non-empty frontier, and cells that agree
//! with `analyze` run at the same windows.

mod common;

use serde_json::Value;

fn demo(cmd: &str, extra: &[&str]) -> Value {
    let o = common::demo(cmd).arg("--json").args(extra).output().unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    serde_json::from_slice(&o.stdout).unwrap()
}

fn close(a: &Value, b: &Value) -> bool {
    match (a.as_f64(), b.as_f64()) {
        (Some(x), Some(y)) => (x - y).abs() <= 1e-9 * y.abs().max(1.0),
        _ => a == b,
    }
}

#[test]
fn tune_cells_match_analyze_and_frontier_is_not_empty() {
    let t = demo("tune", &["--pre", "0..30/15", "--post", "0..60/30"]);
    let cells = t["cells"].as_array().unwrap();
    assert_eq!(cells.len(), 9);
    assert!(cells.iter().any(|c| c["frontier"] == true));
    for (pre, post) in [(15, 30), (0, 60), (30, 0)] {
        let c = cells.iter().find(|c| c["pre_min"] == pre && c["post_min"] == post).unwrap();
        let w = format!("{pre}/{post}");
        let a = demo("analyze", &["--window", &format!("high={w}"), "--window", &format!("medium={w}"), "--placebo", "0", "--bootstrap", "0"]);
        let rem = &a["scenarios"]["removed"];
        assert_eq!(c["trades_removed"], a["exposure"]["exposed_trades"], "{w}");
        assert!(close(&c["tcr_after"], &rem["tcr"]), "{w}: tcr {} vs {}", c["tcr_after"], rem["tcr"]);
        assert!(close(&c["sharpe_after"], &rem["sharpe"]), "{w}: sharpe");
        assert!(close(&c["max_drawdown_after"], &rem["max_drawdown"]), "{w}: max dd");
        assert!(close(&c["share_of_net_removed"], &a["headline"]["share_of_net"]), "{w}: share");
    }
}
