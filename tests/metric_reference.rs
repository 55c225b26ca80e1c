//! Metrics against reference values produced outside the project by
//! tests/reference/make_metric_fixtures.py with numpy 2.4.6, pandas 3.1.1,
//! scipy 1.17.1 and empyrical-reloaded 0.7.1 (versions recorded in the
//! fixture). The trade sets are read through the real importer.

use eventfence::analysis::metrics::{self, Context, Curve};
use eventfence::analysis::scenarios::close_order;
use eventfence::import::trades::{self, TradeOptions};
use eventfence::import::zones::Zone;
use std::path::PathBuf;

fn fixture(p: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures")
        .join(p)
}

fn assert_rel(name: &str, got: f64, want: f64) {
    let tol = 1e-9 * want.abs().max(1e-12);
    assert!(
        (got - want).abs() <= tol,
        "{name}: got {got}, reference {want}"
    );
}

#[test]
fn metrics_match_library_reference_values() {
    let reference: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(fixture("metric_reference.json")).unwrap())
            .unwrap();
    assert_eq!(reference["libraries"]["empyrical-reloaded"], "0.7.1");
    for (name, want) in reference["sets"].as_object().unwrap() {
        let (t, _) = trades::load(
            &[fixture(&format!("metric_sets/{name}.csv"))],
            &TradeOptions::default(),
        )
        .unwrap();
        let mut order: Vec<u32> = (0..t.len() as u32).collect();
        close_order(&mut order, &t.opened, &t.closed);
        let pick = |v: &[f64]| order.iter().map(|&i| v[i as usize]).collect::<Vec<_>>();
        let pnl = pick(&t.pnl);
        let curve = Curve {
            pnl: &pnl,
            trade: &order,
            opened: &t.opened,
            closed: &t.closed,
            tail: &[],
        };
        let mut ctx = Context {
            span: t.span().unwrap(),
            report_zone: Zone::Utc,
            initial_equity: None,
            tcr_p: 1.0,
        };
        let m = metrics::compute(&curve, &ctx);
        let w = |k: &str| want[k].as_f64().unwrap_or_else(|| panic!("{name}.{k}"));
        assert_eq!(m.trades as f64, w("trades"));
        assert_eq!(
            metrics::daily_series(&curve, &ctx).len() as f64,
            w("days"),
            "{name}: weekday count"
        );
        assert_rel("net", m.net, w("net"));
        assert_rel(
            "profit_factor",
            m.profit_factor.unwrap(),
            w("profit_factor"),
        );
        assert_rel("win_rate", m.win_rate.unwrap(), w("win_rate"));
        assert_rel("max_drawdown", m.max_drawdown.unwrap(), w("max_drawdown"));
        assert_rel("t_stat", m.t_stat.unwrap(), w("t_stat"));
        assert_rel("sharpe", m.sharpe.unwrap(), w("sharpe"));
        assert_rel("sortino", m.sortino.unwrap(), w("sortino"));
        for p in [1, 2, 4, 10] {
            assert_rel(
                &format!("tcr_{p}"),
                metrics::tcr(&pnl, p as f64).unwrap(),
                w(&format!("tcr_{p}")),
            );
        }
        if let Some(e0) = want["initial_equity"].as_f64() {
            ctx.initial_equity = Some(e0);
            let m = metrics::compute(&curve, &ctx);
            assert_rel("sharpe_returns", m.sharpe.unwrap(), w("sharpe_returns"));
            assert_rel("sortino_returns", m.sortino.unwrap(), w("sortino_returns"));
            assert_rel(
                "max_drawdown_pct",
                m.max_drawdown_pct.unwrap(),
                w("max_drawdown_pct"),
            );
        }
    }
}
