"""In-memory tables (pandas, polars, pyarrow, through the Arrow C stream
interface) give the same result as the file they were read from; only the
input's name differs."""

import pandas as pd
import polars as pl
import pyarrow as pa
import pyarrow.csv as pcsv
import pytest

import eventfence
from conftest import CALENDARS, DEMO

FAST = dict(placebo=49, bootstrap=100, **DEMO)


def without_inputs(summary):
    return {k: v for k, v in summary.items() if k != "inputs"}


@pytest.fixture(scope="module")
def from_file():
    import os
    from conftest import REPO

    os.chdir(REPO)
    return eventfence.analyze("demo/trades.csv", CALENDARS, **FAST)


@pytest.mark.parametrize(
    "reader",
    [pd.read_csv, pl.read_csv, pcsv.read_csv],
    ids=["pandas", "polars", "pyarrow"],
)
def test_trade_tables_equal_the_file(reader, from_file):
    table = reader("demo/trades.csv")
    got = eventfence.analyze(table, CALENDARS, **FAST)
    assert without_inputs(got.summary) == without_inputs(from_file.summary)
    assert got.summary["inputs"]["trades"]["files"] == ["trades table"]


def test_typed_times_are_instants_or_local_readings():
    # Naive timestamps are local to trades_tz, as text times are; zoned
    # ones are instants. Shifting the naive clock to UTC by hand and
    # stating UTC must give the same figures.
    df = pd.read_csv("demo/trades.csv")
    naive = df.assign(
        opened_at=pd.to_datetime(df.opened_at), closed_at=pd.to_datetime(df.closed_at)
    )
    local = eventfence.analyze(naive, CALENDARS, placebo=0, bootstrap=0, **DEMO)
    text = eventfence.analyze(df, CALENDARS, placebo=0, bootstrap=0, **DEMO)
    assert local.headline == text.headline
    # America/New_York+07:00 is New York time shifted seven hours on.
    as_utc = naive.copy()
    for c in ("opened_at", "closed_at"):
        as_utc[c] = (
            (naive[c] - pd.Timedelta(hours=7)).dt.tz_localize("America/New_York").dt.tz_convert("UTC")
        )
    zoned = eventfence.analyze(
        as_utc, CALENDARS, placebo=0, bootstrap=0,
        calendar_tz="Europe/Berlin", instrument_map_file="demo/instruments.json",
    )
    assert zoned.headline == text.headline


def test_a_dict_of_tables_is_one_run_each():
    df = pd.read_csv("demo/trades.csv")
    parts = {run: g.drop(columns="run") for run, g in df.groupby("run") if run in ("p01", "p02", "p03")}
    r = eventfence.rank(parts, CALENDARS, **DEMO)
    direct = eventfence.rank("demo/trades.csv", CALENDARS, run="p01,p02,p03", **DEMO)
    strip = lambda s: {k: v for k, v in s.items() if k not in ("warnings",)}
    assert [x["run"] for x in r.summary["runs"]] == [x["run"] for x in direct.summary["runs"]]
    assert r.summary["runs"] == direct.summary["runs"]
    assert strip(r.summary)["settings"] == strip(direct.summary)["settings"]


def test_a_calendar_table_equals_its_file():
    cal = [CALENDARS[0], pd.read_csv(CALENDARS[1]), CALENDARS[2]]
    got = eventfence.analyze("demo/trades.csv", cal, placebo=0, bootstrap=0, **DEMO)
    want = eventfence.analyze("demo/trades.csv", CALENDARS, placebo=0, bootstrap=0, **DEMO)
    assert got.headline == want.headline
    assert got.summary["attribution"] == want.summary["attribution"]
    assert got.summary["inputs"]["calendar"]["releases"] == want.summary["inputs"]["calendar"]["releases"]


def test_pyarrow_record_batch_reader_streams_in_batches():
    table = pcsv.read_csv("demo/trades.csv")
    reader = pa.RecordBatchReader.from_batches(table.schema, table.to_batches(max_chunksize=1000))
    got = eventfence.analyze(reader, CALENDARS, placebo=0, bootstrap=0, **DEMO)
    want = eventfence.analyze(table, CALENDARS, placebo=0, bootstrap=0, **DEMO)
    assert without_inputs(got.summary) == without_inputs(want.summary)
