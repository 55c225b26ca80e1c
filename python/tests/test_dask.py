"""The distributed example: a run-partitioned Parquet dataset ranked on a
local Dask cluster with two worker processes equals the command line's
`rank` on the same files, figure for figure and rank for rank."""

import sys

import numpy as np
import pandas as pd

from conftest import CALENDARS, REPO, cli_json

sys.path.insert(0, str(REPO / "python" / "examples"))
import dask_rank  # noqa: E402


def generated_dataset(folder, runs=12, trades=250, seed=7):
    """Invented trades: `runs` parameter sets over 2021-2024 on the demo's
    instruments, fat-tailed P/L, one Parquet file per run, zoned times."""
    rng = np.random.default_rng(seed)
    start = pd.Timestamp("2021-01-04", tz="UTC").value // 10**6
    span = pd.Timestamp("2024-12-20", tz="UTC").value // 10**6 - start
    for k in range(runs):
        opened = np.sort(start + rng.integers(0, span, trades))
        held = rng.integers(5, 600, trades) * 60_000
        frame = pd.DataFrame(
            {
                "run": f"g{k + 1:02d}",
                "opened_at": pd.to_datetime(opened, unit="ms", utc=True),
                "closed_at": pd.to_datetime(opened + held, unit="ms", utc=True),
                "instrument": rng.choice(["EURUSD", "GBPUSD", "USDJPY", "US500"], trades),
                "pnl": np.round(rng.standard_t(3, trades) * 20 + 0.5, 2),
            }
        )
        frame.to_parquet(folder / f"run-{k + 1:02d}.parquet", index=False)


def test_dask_ranking_equals_the_cli(tmp_path):
    generated_dataset(tmp_path)
    settings = dict(calendar_tz="Europe/Berlin", instrument_map_file="demo/instruments.json",
                    map={"run": "run"}, placebo=19)
    rows = dask_rank.rank_dataset(str(tmp_path / "*.parquet"), CALENDARS, workers=2, by="sharpe", **settings)
    want = cli_json(
        "rank", "--trades", str(tmp_path / "*.parquet"), "--calendar", *CALENDARS,
        "--calendar-tz", "Europe/Berlin", "--instrument-map-file", "demo/instruments.json",
        "--map", "run=run", "--placebo", "19", "--by", "sharpe", "--json",
    )["runs"]
    assert len(rows) == len(want) == 12
    assert rows == want
    assert sorted(r["rank_baseline"] for r in rows) == list(range(1, 13))
