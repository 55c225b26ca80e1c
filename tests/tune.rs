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

/// With `--pool` (all runs one account), cells equal analyze --pool at
/// equal windows, under fixed and under compounding sizing (tune once rebuilt its removed scenario from raw P/L, so its
/// compounding figures were fixed-sizing ones).
#[test]
fn tune_cells_match_analyze_and_frontier_is_not_empty() {
    for sizing in [
        &[][..],
        &["--sizing", "compounding", "--initial-equity", "100000"][..],
    ] {
        let mut flags = vec!["--pool", "--pre", "0..30/15", "--post", "0..60/30"];
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
                "--pool",
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

/// Median by linear interpolation between order statistics (numpy's
/// default `np.median`), written out here independently of the crate.
fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    let n = v.len();
    if n % 2 == 1 {
        v[n / 2]
    } else {
        (v[n / 2 - 1] + v[n / 2]) / 2.0
    }
}

/// Without `--pool` the demo's 50 runs are alternative accounts: each cell
/// gives medians over runs of each run's own figure, recomputed here from
/// analyze's per-run figures at the same windows.
#[test]
fn tune_cells_aggregate_per_run() {
    let t = demo("tune", &["--pre", "15..15/15", "--post", "0..30/30"]);
    assert_eq!(t["account_figures"], "per_run");
    assert_eq!(t["runs"], 50);
    for post in [0, 30] {
        let c = t["cells"]
            .as_array()
            .unwrap()
            .iter()
            .find(|c| c["post_min"] == post)
            .unwrap();
        let w = format!("15/{post}");
        let (hw, mw) = (format!("high={w}"), format!("medium={w}"));
        let a = demo(
            "analyze",
            &[
                "--window",
                &hw,
                "--window",
                &mw,
                "--placebo",
                "0",
                "--bootstrap",
                "0",
            ],
        );
        let runs = a["runs"].as_array().unwrap();
        let fig = |r: &Value, sc: &str, k: &str| r["scenarios"][sc][k].as_f64();
        let of =
            |f: &dyn Fn(&Value) -> Option<f64>| runs.iter().filter_map(f).collect::<Vec<f64>>();
        let reductions = of(&|r| Some(fig(r, "baseline", "tcr")? - fig(r, "removed", "tcr")?));
        let want = [
            (
                "tcr_baseline",
                median(of(&|r| fig(r, "baseline", "tcr"))),
                &t,
            ),
            ("tcr_after", median(of(&|r| fig(r, "removed", "tcr"))), c),
            ("tcr_reduction", median(reductions.clone()), c),
            (
                "sharpe_after",
                median(of(&|r| fig(r, "removed", "sharpe"))),
                c,
            ),
            (
                "max_drawdown_after",
                median(of(&|r| fig(r, "removed", "max_drawdown"))),
                c,
            ),
            (
                "runs_tcr_reduced",
                reductions.iter().filter(|&&d| d > 0.0).count() as f64 / reductions.len() as f64,
                c,
            ),
        ];
        for (key, value, from) in want {
            assert!(
                (from[key].as_f64().unwrap() - value).abs() <= 1e-9 * value.abs().max(1.0),
                "15/{post} {key}: {} vs {value}",
                from[key]
            );
        }
        assert_eq!(c["trades_removed"], a["exposure"]["exposed_trades"]);
    }
}

/// With --stress amount:15 each cell's stressed net is the baseline net
/// less 15 per trade the cell's windows expose (fixed sizing:
/// conservation), the baseline net being analyze's.
#[test]
fn tune_cells_report_the_stressed_net() {
    let o = common::demo("tune")
        .args([
            "--pre",
            "0..30/15",
            "--post",
            "0..60/30",
            "--stress",
            "amount:15",
            "--json",
        ])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let j: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let o = common::demo("analyze")
        .args([
            "--placebo",
            "0",
            "--bootstrap",
            "0",
            "--distortion-draws",
            "0",
            "--json",
        ])
        .output()
        .unwrap();
    let a: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let net = a["headline"]["net"].as_f64().unwrap();
    let cells = j["cells"].as_array().unwrap();
    assert_eq!(cells.len(), 9);
    for c in cells {
        let removed = c["trades_removed"].as_f64().unwrap();
        let stressed = c["net_stressed"].as_f64().unwrap();
        assert!((stressed - (net - 15.0 * removed)).abs() < 1e-6, "{c}");
    }
    // A cell equals analyze's stressed scenario at the same windows:
    // pre 15 / post 30 for every used tier (the demo's high tier default;
    // medium gets the same window in the cell).
    let cell = cells
        .iter()
        .find(|c| c["pre_min"] == 15 && c["post_min"] == 30)
        .unwrap();
    let o = common::demo("analyze")
        .args([
            "--placebo",
            "0",
            "--bootstrap",
            "0",
            "--distortion-draws",
            "0",
            "--json",
        ])
        .args([
            "--stress",
            "amount:15",
            "--window",
            "high=15/30",
            "--window",
            "medium=15/30",
        ])
        .output()
        .unwrap();
    let a: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let st = &a["scenarios"]["stressed"];
    assert!(close(&cell["net_stressed"], &st["net"]), "{cell} vs {st}");
    assert!(
        close(&cell["profit_factor_stressed"], &st["profit_factor"]),
        "{cell} vs {st}"
    );
    // Without --stress the field is absent.
    let o = common::demo("tune")
        .args(["--pre", "0..0/15", "--post", "0..0/30", "--json"])
        .output()
        .unwrap();
    let j: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert!(j["cells"][0].get("net_stressed").is_none());
}
