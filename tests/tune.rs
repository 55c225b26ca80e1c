//! `eventfence tune` on the demo: a non-empty frontier, and cells that agree
//! with `analyze` run at the same windows.

mod common;

use serde_json::Value;

fn demo(cmd: &str, extra: &[&str]) -> Value {
    let o = common::demo(cmd)
        .arg("--json")
        .args(extra)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    serde_json::from_slice(&o.stdout).unwrap()
}

fn close(a: &Value, b: &Value) -> bool {
    match (a.as_f64(), b.as_f64()) {
        (Some(x), Some(y)) => (x - y).abs() <= 1e-9 * y.abs().max(1.0),
        _ => a == b,
    }
}

/// Cells equal analyze at equal windows, under fixed and under compounding
/// sizing (tune once rebuilt its removed scenario from raw P/L, so its
/// compounding figures were fixed-sizing ones).
#[test]
fn tune_cells_match_analyze_and_frontier_is_not_empty() {
    for sizing in [
        &[][..],
        &["--sizing", "compounding", "--initial-equity", "100000"][..],
    ] {
        let mut flags = vec!["--pre", "0..30/15", "--post", "0..60/30"];
        flags.extend_from_slice(sizing);
        let t = demo("tune", &flags);
        let cells = t["cells"].as_array().unwrap();
        assert_eq!(cells.len(), 9);
        assert!(cells.iter().any(|c| c["frontier"] == true));
        for (pre, post) in [(15, 30), (0, 60), (30, 0)] {
            let c = cells
                .iter()
                .find(|c| c["pre_min"] == pre && c["post_min"] == post)
                .unwrap();
            let w = format!("{pre}/{post}");
            let (hw, mw) = (format!("high={w}"), format!("medium={w}"));
            let mut flags = vec![
                "--window",
                &hw,
                "--window",
                &mw,
                "--placebo",
                "0",
                "--bootstrap",
                "0",
            ];
            flags.extend_from_slice(sizing);
            let a = demo("analyze", &flags);
            let rem = &a["scenarios"]["removed"];
            let at = format!("{w} {sizing:?}");
            assert_eq!(c["trades_removed"], a["exposure"]["exposed_trades"], "{at}");
            assert!(
                close(&t["tcr_baseline"], &a["scenarios"]["baseline"]["tcr"]),
                "{at}: baseline tcr"
            );
            assert!(
                close(&c["tcr_after"], &rem["tcr"]),
                "{at}: tcr {} vs {}",
                c["tcr_after"],
                rem["tcr"]
            );
            assert!(
                close(&c["sharpe_after"], &rem["sharpe"]),
                "{at}: sharpe {} vs {}",
                c["sharpe_after"],
                rem["sharpe"]
            );
            assert!(
                close(&c["max_drawdown_after"], &rem["max_drawdown"]),
                "{at}: max dd {} vs {}",
                c["max_drawdown_after"],
                rem["max_drawdown"]
            );
            assert!(
                close(&c["share_of_net_removed"], &a["headline"]["share_of_net"]),
                "{at}: share"
            );
        }
    }
}
