"""Rank a run-partitioned Parquet dataset on a Dask cluster.

A large optimisation writes its trades as Parquet, one or more files per
parameter set (run). Each Dask partition then holds whole runs: every worker
figures its runs with `eventfence.rank`, and `eventfence.merge_ranks` ranks
all runs together by the same rule as the command line's `rank`, so the
result equals `eventfence rank` on the whole dataset.

    python examples/dask_rank.py DATASET_DIR CALENDAR... [--workers 2]

The same per-partition function runs under other engines: under Ray, map
`rank_partition` over `ray.data.read_parquet(...).map_batches(...,
batch_format="pandas")` grouped by run; under Spark, pass it to
`df.groupBy("run").applyInArrow(...)` with a pyarrow Table in and out. Only
the Dask form is tested here.
"""

from __future__ import annotations

import argparse
from typing import Any, Dict, List, Sequence

import eventfence


def rank_partition(trades: Any, calendar: Sequence[str], settings: Dict[str, Any]) -> List[Dict[str, Any]]:
    """One partition's runs, figured (and ranked among themselves only:
    `merge_ranks` ranks them again over all runs)."""
    result = eventfence.rank(trades, list(calendar), **settings)
    return result.summary["runs"]


def rank_dataset(
    dataset: str,
    calendar: Sequence[str],
    workers: int = 2,
    by: str = "sharpe",
    **settings: Any,
) -> List[Dict[str, Any]]:
    """Ranks every run of `dataset` (a folder or glob of Parquet files whose
    partitions hold whole runs) on a local Dask cluster of `workers`
    processes. `settings` are `eventfence.rank`'s keywords; the run column
    must be mapped (`map={"run": "run"}` when it is named `run`)."""
    import dask
    import dask.dataframe as dd
    from dask.distributed import Client, LocalCluster

    settings = {**settings, "by": by, "quiet": True}
    with LocalCluster(n_workers=workers, threads_per_worker=1, processes=True) as cluster, Client(cluster):
        frame = dd.read_parquet(dataset)
        parts = [dask.delayed(rank_partition)(p, calendar, settings) for p in frame.to_delayed()]
        figured = dask.compute(*parts)
    return eventfence.merge_ranks(figured, by=by)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("dataset")
    ap.add_argument("calendar", nargs="+")
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--by", default="sharpe")
    ap.add_argument("--trades-tz", default="UTC")
    a = ap.parse_args()
    rows = rank_dataset(a.dataset, a.calendar, a.workers, a.by, trades_tz=a.trades_tz, map={"run": "run"})
    for r in rows[:20]:
        print(f"{r['rank_removed']:>4} {r['rank_baseline']:>4} {r['run']:<12} {r['by_baseline']!s:>22} {r['by_removed']!s:>22}")


if __name__ == "__main__":
    main()
