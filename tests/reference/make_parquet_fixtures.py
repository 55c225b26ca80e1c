#!/usr/bin/env python3
"""Parquet trade lists as other tools write them, for tests/parquet_times.rs.

    pip install pandas==3.1.1 pyarrow==26.0.1
    python3 tests/reference/make_parquet_fixtures.py

Writes tests/fixtures/parquet/: one New York back-test of five trades as
  trades.csv               text, local New York times (the reference reading)
  naive_pandas.parquet     pandas datetime64 without a zone (local times)
  naive_pyarrow.parquet    pyarrow timestamp('ms') without a zone
  utc_pandas.parquet       pandas, zoned UTC (instants)
  ny_pyarrow.parquet       pyarrow timestamp('us', tz='America/New_York')
  epoch_ms.parquet         int64 epoch milliseconds (UTC instants)
  dates.parquet            date32 trade times (must be refused)
  epoch_out_of_range.parquet  int64 epoch ms, one far beyond year 9999
and calendar.csv (two USD releases at 08:30 New York time, written in UTC).

The local-to-UTC conversion is done here by pandas (tz_localize with the
IANA database that pandas ships), independently of eventfence.
"""
import os

import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "fixtures", "parquet")
os.makedirs(OUT, exist_ok=True)

# Local New York wall times. Releases: 2024-03-12 and 2024-12-11 at 08:30
# New York time (12:30Z under EDT, 13:30Z under EST; invented test releases
# at the publisher's usual 08:30 Eastern slot). With the default high window
# (15 min before, 30 after) trades A and C are exposed; B and D would be
# exposed only if their local times were misread as UTC.
rows = [
    ("2024-03-12 08:20:00", "2024-03-12 08:40:00", "EURUSD", 100.0),  # A exposed
    ("2024-03-12 12:20:00", "2024-03-12 12:40:00", "EURUSD", -50.0),  # B
    ("2024-12-11 08:25:00", "2024-12-11 09:05:00", "USDJPY", 75.0),  # C exposed
    ("2024-12-11 13:20:00", "2024-12-11 13:40:00", "USDJPY", 30.0),  # D
    ("2024-06-05 10:00:00", "2024-06-05 11:00:00", "EURUSD", 20.0),  # E
]
df = pd.DataFrame(rows, columns=["opened_at", "closed_at", "instrument", "pnl"])
df.to_csv(os.path.join(OUT, "trades.csv"), index=False)

naive = df.copy()
for c in ("opened_at", "closed_at"):
    naive[c] = pd.to_datetime(naive[c])
naive.to_parquet(os.path.join(OUT, "naive_pandas.parquet"), index=False)

table = pa.table({
    "opened_at": pa.array(naive["opened_at"].dt.as_unit("ms"), type=pa.timestamp("ms")),
    "closed_at": pa.array(naive["closed_at"].dt.as_unit("ms"), type=pa.timestamp("ms")),
    "instrument": df["instrument"],
    "pnl": df["pnl"],
})
pq.write_table(table, os.path.join(OUT, "naive_pyarrow.parquet"))

zoned = naive.copy()
for c in ("opened_at", "closed_at"):
    zoned[c] = zoned[c].dt.tz_localize("America/New_York").dt.tz_convert("UTC")
zoned.to_parquet(os.path.join(OUT, "utc_pandas.parquet"), index=False)

ny = pa.table({
    "opened_at": pa.array(zoned["opened_at"].dt.as_unit("us"), type=pa.timestamp("us", tz="UTC")).cast(pa.timestamp("us", tz="America/New_York")),
    "closed_at": pa.array(zoned["closed_at"].dt.as_unit("us"), type=pa.timestamp("us", tz="UTC")).cast(pa.timestamp("us", tz="America/New_York")),
    "instrument": df["instrument"],
    "pnl": df["pnl"],
})
pq.write_table(ny, os.path.join(OUT, "ny_pyarrow.parquet"))

epoch = pd.DataFrame({
    "opened_at": zoned["opened_at"].dt.as_unit("ms").astype("int64"),
    "closed_at": zoned["closed_at"].dt.as_unit("ms").astype("int64"),
    "instrument": df["instrument"],
    "pnl": df["pnl"],
})
epoch.to_parquet(os.path.join(OUT, "epoch_ms.parquet"), index=False)

far = epoch.copy()
far.loc[1, "opened_at"] = 10**18  # about year 31.7 million
far.loc[1, "closed_at"] = 10**18
far.to_parquet(os.path.join(OUT, "epoch_out_of_range.parquet"), index=False)

dates = pd.DataFrame({
    "opened_at": pd.to_datetime(df["opened_at"]).dt.date,
    "closed_at": pd.to_datetime(df["closed_at"]).dt.date,
    "instrument": df["instrument"],
    "pnl": df["pnl"],
})
pq.write_table(pa.Table.from_pandas(dates, preserve_index=False), os.path.join(OUT, "dates.parquet"))

with open(os.path.join(OUT, "calendar.csv"), "w") as f:
    f.write("released_at,title,currency,tier\n")
    f.write("2024-03-12T12:30:00Z,Consumer prices,USD,high\n")
    f.write("2024-12-11T13:30:00Z,Consumer prices,USD,high\n")
print("wrote", sorted(os.listdir(OUT)))
