"""Each entry point against the command line's JSON on the bundled demo:
the same engine, so the same figures, bit for bit."""

import eventfence
from conftest import CALENDARS, DEMO, DEMO_FLAGS, cli, cli_json


def test_analyze_equals_the_cli_summary():
    a = eventfence.analyze("demo/trades.csv", CALENDARS, placebo=99, bootstrap=200, **DEMO)
    want = cli_json(
        "analyze", "--trades", "demo/trades.csv", "--calendar", *CALENDARS, *DEMO_FLAGS,
        "--placebo", "99", "--bootstrap", "200", "--json",
    )
    assert a.summary == want
    # The headline the README prints is the CLI's.
    assert a.headline == want["headline"]


def test_analyze_tables_hold_the_trades_and_releases():
    a = eventfence.analyze("demo/trades.csv", CALENDARS, placebo=0, bootstrap=0, **DEMO)
    s = a.summary
    trades = a.trades
    assert trades.num_rows == s["exposure"]["trades"]
    exposed = trades.column("exposed").to_pylist()
    assert sum(1 for e in exposed if e) == s["exposure"]["exposed_trades"]
    assert abs(sum(trades.column("pnl").to_pylist()) - s["headline"]["net"]) < 1e-6
    assert a.releases.num_rows == len(s["attribution"]["by_release"])
    assert set(a.charts) >= {"tail", "equity"}
    assert a.charts["tail"].lstrip().startswith("<svg")
    assert "<html" in a.report_html
    # Same text the terminal shows (colour aside).
    assert a.text.splitlines()[0] == cli(
        "analyze", "--trades", "demo/trades.csv", "--calendar", *CALENDARS, *DEMO_FLAGS,
        "--placebo", "0", "--bootstrap", "0",
    ).splitlines()[0]


def test_rank_equals_the_cli():
    r = eventfence.rank("demo/trades.csv", CALENDARS, by="sharpe", **DEMO)
    want = cli_json(
        "rank", "--trades", "demo/trades.csv", "--calendar", *CALENDARS, *DEMO_FLAGS,
        "--by", "sharpe", "--json",
    )
    assert r.summary == want
    runs = r.runs.to_pylist()
    assert [x["run"] for x in runs] == [x["run"] for x in want["runs"]]
    assert [x["rank_removed"] for x in runs] == [x["rank_removed"] for x in want["runs"]]


def test_tune_equals_the_cli():
    t = eventfence.tune("demo/trades.csv", CALENDARS, pre="0..60/15", post="0..120/30", **DEMO)
    want = cli_json(
        "tune", "--trades", "demo/trades.csv", "--calendar", *CALENDARS, *DEMO_FLAGS,
        "--pre", "0..60/15", "--post", "0..120/30", "--json",
    )
    assert t.summary == want
    assert t.cells.num_rows == 5 * 5


def test_schedule_equals_the_cli():
    s = eventfence.schedule(
        "calendars/demo-usd.ics", currencies="USD", from_="2024-03-01", to="2024-03-31"
    )
    want = cli_json(
        "schedule", "--calendar", "calendars/demo-usd.ics", "--currencies", "USD",
        "--from", "2024-03-01", "--to", "2024-03-31", "--format", "json",
    )
    assert s.summary == want
    assert s.windows.num_rows == len(want["windows"])
    assert s.csv == cli(
        "schedule", "--calendar", "calendars/demo-usd.ics", "--currencies", "USD",
        "--from", "2024-03-01", "--to", "2024-03-31", "--format", "csv",
    )


def test_out_writes_the_cli_folder(tmp_path):
    eventfence.analyze("demo/trades.csv", CALENDARS, placebo=0, bootstrap=0, out=tmp_path, **DEMO)
    names = {p.name for p in tmp_path.iterdir()}
    assert {"summary.json", "report.html", "trades.parquet", "releases.csv", "tail.csv"} <= names


def test_rank_distortion_equals_scipy_on_the_demo():
    from scipy import stats

    r = eventfence.rank("demo/trades.csv", CALENDARS, by="sharpe", distortion_draws=19, **DEMO)
    rows = r.summary["runs"]
    d = r.summary["distortion"]
    x = [row["by_baseline"] for row in rows]
    y = [row["by_removed"] for row in rows]
    assert d["runs_compared"] == len(rows) == 50
    assert abs(d["spearman_rho"] - stats.spearmanr(x, y).statistic) < 1e-12
    assert abs(d["kendall_tau_b"] - stats.kendalltau(x, y, variant="b").statistic) < 1e-12
    top_b = {row["run"] for row in rows if row["rank_baseline"] <= 10}
    top_r = {row["run"] for row in rows if row["rank_removed"] <= 10}
    assert d["top_k"] == 10 and d["top_overlap"] == len(top_b & top_r)
    assert set(d["left_top"]) == top_b - top_r and set(d["entered_top"]) == top_r - top_b
    assert {row["run"] for row in rows if row["in_top_baseline"]} == top_b
    assert {row["run"] for row in rows if row["in_top_removed"]} == top_r
    runs_csv = r.runs.to_pylist()
    assert sum(x["in_top_baseline"] for x in runs_csv) == 10
    ref = d["random_removal"]
    assert ref["draws"] == 19 and 0.0 <= ref["share_rho_at_or_below"] <= 1.0


def test_series_add_up_to_the_exposed_pnl_on_the_demo():
    a = eventfence.analyze("demo/trades.csv", CALENDARS, placebo=0, bootstrap=0, **DEMO)
    series = a.summary["attribution"]["by_series"]
    releases = a.summary["attribution"]["by_release"]
    assert sum(s["releases_used"] for s in series) == len(releases)
    assert abs(sum(s["attributed_pnl"] for s in series) - a.headline["exposed_pnl"]) < 1e-6
    # Largest |attributed| first; each mean is its total over releases used.
    sizes = [abs(s["attributed_pnl"]) for s in series]
    assert sizes == sorted(sizes, reverse=True)
    for s in series:
        assert abs(s["mean_per_release"] * s["releases_used"] - s["attributed_pnl"]) < 1e-9
        assert s["trades"] <= sum(r["trades_touched"] for r in releases
                                  if r["currency"] == s["currency"])


def test_stressed_scenario_conserves_the_charge_on_the_demo():
    # Fixed sizing: stressed net = baseline net - the total charge; the
    # amount form charges every exposed trade the same.
    plain = eventfence.analyze("demo/trades.csv", CALENDARS, placebo=0, bootstrap=0, **DEMO)
    assert "stressed" not in plain.summary["scenarios"]
    for rule in ("amount:15", "per-size:7", "pct:20"):
        a = eventfence.analyze("demo/trades.csv", CALENDARS, placebo=0, bootstrap=0,
                               stress=rule, **DEMO)
        sc = a.summary["scenarios"]
        charge = a.summary["stress_charge"]
        assert abs(sc["stressed"]["net"] - (sc["baseline"]["net"] - charge)) < 1e-6, rule
        assert sc["stressed"]["trades"] == sc["baseline"]["trades"]
        assert all("stressed" in r["scenarios"] for r in a.summary["runs"])
        if rule == "amount:15":
            assert abs(charge - 15 * a.summary["exposure"]["exposed_trades"]) < 1e-9
