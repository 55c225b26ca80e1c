"""eventfence from Python: the command line's engine, called in-process.

Find the back-test trades exposed to economic releases, attribute their
P/L, and recompute the strategy's figures without them. Each entry point
takes the same inputs and settings as the command of that name; settings
are keyword arguments named like the flags (``--trades-tz`` is
``trades_tz=``, ``--placebo 0`` is ``placebo=0``, a flag without a value is
``True``). Results carry the JSON the command prints (``.summary``, a dict)
and its tables as ``pyarrow.Table`` (``.to_pandas()``, or
``polars.from_arrow``).

Example (the repository's demo, run from its root)::

    import eventfence
    a = eventfence.analyze(
        "demo/trades.csv", ["calendars/demo-usd.ics", "calendars/demo-eur.csv",
        "calendars/demo-gbp-jpy.ics"], trades_tz="America/New_York+07:00",
        calendar_tz="Europe/Berlin", instrument_map_file="demo/instruments.json")
    print(a.headline)   # {'net': ..., 'exposed_pnl': ..., 'share_of_net': ...}

Back-test figures are not forecasts, release times must be checked against
the publisher, and nothing here is investment advice.
"""

from __future__ import annotations

import io
import json
import os
from typing import Any, Dict, List, Mapping, Optional, Sequence, Tuple

from ._native import VERSION as __version__
from ._native import EventfenceError
from ._native import rank_together as _rank_together
from ._native import run as _run

__all__ = [
    "analyze",
    "rank",
    "tune",
    "schedule",
    "merge_ranks",
    "Analysis",
    "Ranking",
    "Tuning",
    "Schedule",
    "EventfenceError",
]

# Flags whose output the Python results replace: refused, never ignored.
_REFUSED = {
    "json": "results always carry the JSON (.summary)",
    "format": "results come in every form: .summary (the JSON), .text, and the tables as Arrow"
    " (.runs, .cells, .windows; a schedule also as .csv and .ics)",
    "output": "write .csv or .ics of the result yourself",
    "trades_format": "the per-trade table is returned as Arrow (.trades)",
    "runs_format": "the per-run table is returned as Arrow (.runs)",
}


def _flags(settings: Mapping[str, Any]) -> List[str]:
    """Keyword settings as command-line flags (``pre=15`` -> ``--pre 15``)."""
    argv: List[str] = []
    for key, value in settings.items():
        if key in _REFUSED:
            raise EventfenceError(f"{key}=: not taken from Python; {_REFUSED[key]}")
        flag = "--" + key.replace("_", "-")
        if value is None or value is False:
            continue
        if value is True:
            argv.append(flag)
        elif isinstance(value, Mapping):
            argv += [flag, ",".join(f"{k}={v}" for k, v in value.items())]
        elif isinstance(value, (list, tuple)):
            for v in value:
                argv += [flag, os.fspath(v) if isinstance(v, os.PathLike) else str(v)]
        elif isinstance(value, os.PathLike):
            argv += [flag, os.fspath(value)]
        else:
            argv += [flag, str(value)]
    return argv


def _is_path(x: Any) -> bool:
    return isinstance(x, (str, os.PathLike))


def _capsule(table: Any) -> Any:
    """An Arrow C stream capsule of a pandas, polars or pyarrow table (or
    anything with ``__arrow_c_stream__``)."""
    if type(table).__module__.split(".")[0] == "pandas":
        import pyarrow as pa

        # The index is not a column of the trade list.
        table = pa.Table.from_pandas(table, preserve_index=False)
    stream = getattr(table, "__arrow_c_stream__", None)
    if stream is None:
        raise TypeError(
            f"{type(table).__name__} is neither a path nor a table: give a file path, "
            "a glob, or a pandas, polars or pyarrow table"
        )
    return stream()


def _inputs(
    value: Any, what: str
) -> Tuple[List[str], List[Tuple[str, Any]]]:
    """Paths and in-memory tables of one input. A dict maps names to tables
    (each one run when there is no run column, as one file per run)."""
    if value is None:
        return [], []
    if _is_path(value):
        return [os.fspath(value)], []
    if isinstance(value, Mapping):
        return [], [(str(name), _capsule(t)) for name, t in value.items()]
    if isinstance(value, (list, tuple)):
        paths = [os.fspath(v) for v in value if _is_path(v)]
        tables = [v for v in value if not _is_path(v)]
        return paths, [(f"{what} table {i + 1}", _capsule(t)) for i, t in enumerate(tables)]
    return [], [(f"{what} table", _capsule(value))]


def _call(command: str, trades: Any, calendar: Any, settings: Mapping[str, Any]) -> Dict[str, Any]:
    trade_paths, trade_tables = _inputs(trades, "trades")
    calendar_paths, calendar_tables = _inputs(calendar, "calendar")
    argv = _flags(settings)
    if trade_paths:
        argv = ["--trades", *trade_paths] + argv
    if calendar_paths:
        argv = ["--calendar", *calendar_paths] + argv
    return _run(command, argv, trade_tables, calendar_tables)


def _arrow(data: Optional[bytes], name: str) -> Any:
    """A file of the outcome as a pyarrow Table (Parquet or CSV by name)."""
    if data is None:
        return None
    import pyarrow as pa

    if name.endswith(".parquet"):
        import pyarrow.parquet as pq

        return pq.read_table(pa.BufferReader(data))
    import pyarrow.csv as pcsv

    return pcsv.read_csv(pa.BufferReader(data))


class _Result:
    """What one call produced: ``summary`` (the command's JSON as a dict),
    ``text`` (its terminal table), ``warnings``, ``charts`` (id -> SVG text)
    and ``files`` (name -> bytes, as ``out=`` writes them)."""

    def __init__(self, raw: Dict[str, Any]):
        self.summary: Dict[str, Any] = json.loads(raw["json"])
        self.text: str = raw["text"]
        self.warnings: List[str] = list(raw["warnings"])
        self.charts: Dict[str, str] = dict(raw["charts"])
        self.files: Dict[str, bytes] = dict(raw["files"])

    def table(self, name: str) -> Any:
        """The file ``name`` of the output folder (``releases.csv``, ...) as
        a pyarrow Table."""
        if name not in self.files:
            raise KeyError(f"{name}: the result has {sorted(self.files)}")
        return _arrow(self.files[name], name)

    def __repr__(self) -> str:
        return f"<{type(self).__name__}: {len(self.warnings)} warning(s)>"

    def __str__(self) -> str:
        return self.text


class Analysis(_Result):
    """The result of :func:`analyze`. ``trades``: every trade with its
    exposure; ``releases``: attribution per release; ``tail``: the sorted
    |P/L| curve; ``report_html``: the self-contained report."""

    @property
    def trades(self) -> Any:
        return self.table("trades.parquet")

    @property
    def releases(self) -> Any:
        return self.table("releases.csv")

    @property
    def tail(self) -> Any:
        return self.table("tail.csv")

    @property
    def report_html(self) -> str:
        return self.files["report.html"].decode()

    @property
    def headline(self) -> Dict[str, Any]:
        """The headline figures (net, exposed P/L and its shares), as in
        the command's summary.json."""
        return dict(self.summary["headline"])


class Ranking(_Result):
    """The result of :func:`rank`: ``runs``, one row per parameter set
    (also ``summary["runs"]``)."""

    @property
    def runs(self) -> Any:
        return self.table("runs.parquet")


class Tuning(_Result):
    """The result of :func:`tune`: ``cells``, one row per window pair."""

    @property
    def cells(self) -> Any:
        return self.table("grid.csv")


class Schedule(_Result):
    """The result of :func:`schedule`: ``windows`` (a table), ``summary``
    (the JSON list), and the same list as ``csv`` and ``ics`` text."""

    @property
    def windows(self) -> Any:
        return self.table("schedule.csv")

    @property
    def csv(self) -> str:
        return self.files["schedule.csv"].decode()

    @property
    def ics(self) -> str:
        return self.files["schedule.ics"].decode()


def analyze(trades: Any, calendar: Any, **settings: Any) -> Analysis:
    """Find the trades exposed to releases and recompute every figure
    without them (removed) and with their P/L capped: ``eventfence analyze``.

    ``trades``: a path, a glob, a list of them, a pandas / polars / pyarrow
    table, or a dict of run name -> table. ``calendar``: a path or list of
    paths (ICS or CSV), or a table in the CSV layout. ``settings``: the
    command's flags as keywords (``placebo=0``, ``window="high=15/30"``,
    ``pool=True``).

    Example::

        a = eventfence.analyze("demo/trades.csv", "calendars/demo-usd.ics",
                               trades_tz="America/New_York+07:00",
                               instrument_map="US500=USD", placebo=0, bootstrap=0)
        a.summary["scenarios"]   # the CLI's JSON
        a.trades.to_pandas()     # one row per trade, with its exposure
    """
    return Analysis(_call("analyze", trades, calendar, {**settings, "trades-format": "parquet"}))


def rank(trades: Any, calendar: Any, **settings: Any) -> Ranking:
    """Rank parameter sets before and after removing release-exposed trades:
    ``eventfence rank``. Inputs as for :func:`analyze`; the trades need
    runs (``map={"run": "Run"}``, or a dict of tables, one per run).

    Example::

        r = eventfence.rank("demo/trades.csv", "calendars/demo-usd.ics",
                            trades_tz="America/New_York+07:00",
                            instrument_map="US500=USD", by="sharpe")
        r.runs.to_pandas().head()
    """
    return Ranking(_call("rank", trades, calendar, {**settings, "runs-format": "parquet"}))


def tune(trades: Any, calendar: Any, **settings: Any) -> Tuning:
    """Sweep window lengths over a grid and mark the cost/benefit frontier:
    ``eventfence tune``.

    Example::

        t = eventfence.tune("demo/trades.csv", "calendars/demo-usd.ics",
                            trades_tz="America/New_York+07:00",
                            instrument_map="US500=USD", pre="0..60/15", post="0..120/30")
        [c for c in t.summary["cells"] if c["frontier"]]
    """
    return Tuning(_call("tune", trades, calendar, settings))


def schedule(calendar: Any, trades: Any = None, **settings: Any) -> Schedule:
    """The blackout windows a live strategy should obey: ``eventfence
    schedule``. Give ``instruments=`` or ``currencies=`` (or ``trades``), and
    ``next=DAYS`` or ``from_="YYYY-MM-DD", to="YYYY-MM-DD"``.

    Example::

        s = eventfence.schedule("calendars/demo-usd.ics", currencies="USD",
                                from_="2024-03-01", to="2024-03-31")
        s.windows.to_pandas()
    """
    if "from_" in settings:
        settings["from"] = settings.pop("from_")
    return Schedule(_call("schedule", trades, calendar, settings))


def merge_ranks(parts: Sequence[Any], by: str = "sharpe", top: int = 10) -> List[Dict[str, Any]]:
    """Ranks together the runs of several :func:`rank` results (for example
    one per partition of a distributed dataset, each holding whole runs), by
    the rule ``rank`` uses. Returns one dict per run, as in
    ``summary["runs"]``, with ``rank_baseline``, ``rank_removed`` and
    ``rank_shift`` over all runs (and ``in_top_baseline`` /
    ``in_top_removed`` for the top ``top``), ordered by ``rank_removed``.

    ``parts``: :class:`Ranking` results, or lists of run dicts.

    Example::

        parts = [eventfence.rank("demo/trades.csv", "calendars/demo-usd.ics",
                                 trades_tz="America/New_York+07:00",
                                 instrument_map="US500=USD", run=runs)
                 for runs in ("p01,p02,p03", "p04,p05")]
        rows = eventfence.merge_ranks(parts, by="sharpe")
    """
    rows: List[Dict[str, Any]] = []
    for p in parts:
        rows += list(p.summary["runs"] if isinstance(p, _Result) else p)
    names = [str(r["run"]) for r in rows]
    if len(set(names)) != len(names):
        raise EventfenceError("a run appears in more than one part: partitions must hold whole runs")
    baseline, removed = _rank_together(
        names, [r["by_baseline"] for r in rows], [r["by_removed"] for r in rows], by
    )
    for r, b, m in zip(rows, baseline, removed):
        r["rank_baseline"], r["rank_removed"], r["rank_shift"] = b, m, b - m
        r["in_top_baseline"], r["in_top_removed"] = b <= top, m <= top
    if any("rank_stressed" in r for r in rows):
        # With --stress every row carries its stressed figure.
        _, stressed = _rank_together(names, [r["by_baseline"] for r in rows],
                                     [r.get("by_stressed") for r in rows], by)
        for r, s in zip(rows, stressed):
            r["rank_stressed"] = s
    rows.sort(key=lambda r: r["rank_removed"])
    return rows
