#!/usr/bin/env python3
"""Reference values for eventfence's metrics, computed with general-purpose
libraries (numpy, pandas, scipy, empyrical-reloaded from PyPI), independently
of the Rust code. Run by hand when the fixture sets change:

    pip install numpy==2.4.6 pandas==3.1.1 scipy==1.17.1 empyrical-reloaded==0.7.1
    python3 tests/reference/make_metric_fixtures.py

Writes tests/fixtures/metric_sets/{a,b}.csv and
tests/fixtures/metric_reference.json. The Rust test
tests/metric_reference.rs compares to these within 1e-9 relative.

Definitions followed (docs/method.md §5): trades ordered by close, then open, then
input order; daily P/L on every weekday (pandas business days) from the
first open to the last close in UTC, a weekend close rolled forward to the
next business day; Sharpe = empyrical.sharpe_ratio (ddof 1, x sqrt 252);
Sortino = empyrical.sortino_ratio (downside deviation over all days, target
0); max drawdown of the cumulative P/L with the running peak starting at 0;
t = scipy.stats.ttest_1samp(pnl, 0).statistic.
"""
import json
import math
import os

import empyrical
import numpy as np
import pandas as pd
import scipy
import scipy.stats

HERE = os.path.dirname(os.path.abspath(__file__))
FIX = os.path.join(HERE, "..", "fixtures")


def set_a():
    # REFERENCES.md §4.5 trade list, one trade per weekday from Mon 2024-01-01.
    pnl = [250, -100, 75, -50, 400, -200, 125, 30, -80, 150]
    days = pd.bdate_range("2024-01-01", periods=10)
    opened = [d + pd.Timedelta(hours=10) for d in days]
    closed = [d + pd.Timedelta(hours=11) for d in days]
    return pd.DataFrame({"opened_at": opened, "closed_at": closed, "instrument": "EURUSD", "pnl": pnl})


def set_b():
    rng = np.random.default_rng(20261202)
    n = 300
    start = pd.Timestamp("2023-01-02")
    day = rng.integers(0, 360, n)
    minute = rng.integers(6 * 60, 21 * 60, n)
    opened = start + pd.to_timedelta(day, "D") + pd.to_timedelta(minute, "min")
    hold = rng.integers(0, 3000, n)  # some trades run over a weekend
    closed = opened + pd.to_timedelta(hold, "min")
    pnl = np.round(rng.standard_t(3, n) * 40 + 3, 2)
    df = pd.DataFrame({"opened_at": opened, "closed_at": closed, "instrument": "GBPUSD", "pnl": pnl})
    # Ties in close time to pin the ordering rule.
    df.loc[5, "closed_at"] = df.loc[6, "closed_at"]
    df.loc[5, "opened_at"] = df.loc[6, "closed_at"] - pd.Timedelta(minutes=30)
    return df


def figures(df, initial_equity=None):
    order = np.lexsort((np.arange(len(df)), df["opened_at"].values, df["closed_at"].values))
    d = df.iloc[order]
    pnl = d["pnl"].to_numpy(dtype=float)
    eq = np.concatenate([[0.0], np.cumsum(pnl)])
    peak = np.maximum.accumulate(eq)
    max_dd = float(np.max(peak - eq))
    wins, losses = pnl[pnl > 0], pnl[pnl < 0]
    close_day = d["closed_at"].apply(lambda t: pd.offsets.BDay().rollforward(t.normalize()))
    first = df["opened_at"].min().normalize()
    last = pd.offsets.BDay().rollforward(df["closed_at"].max().normalize())
    days = pd.bdate_range(first, last)
    daily = pd.Series(pnl, index=close_day.values).groupby(level=0).sum().reindex(days, fill_value=0.0)
    out = {
        "trades": int(len(pnl)),
        "net": float(pnl.sum()),
        "profit_factor": float(wins.sum() / abs(losses.sum())),
        "win_rate": float((pnl > 0).mean()),
        "max_drawdown": max_dd,
        "t_stat": float(scipy.stats.ttest_1samp(pnl, 0).statistic),
        "sharpe": float(empyrical.sharpe_ratio(daily, period="daily")),
        "sortino": float(empyrical.sortino_ratio(daily, required_return=0, period="daily")),
        "days": int(len(days)),
    }
    absd = np.sort(np.abs(pnl))[::-1]
    for p in (1, 2, 4, 10):
        k = min(max(math.ceil(len(pnl) * p / 100 - 1e-9), 1), len(pnl))
        out[f"tcr_{p}"] = float(absd[:k].mean() / np.abs(pnl).mean())
    if initial_equity is not None:
        start_eq = initial_equity + daily.cumsum().shift(1, fill_value=0.0)
        rets = daily / start_eq
        out["initial_equity"] = initial_equity
        out["sharpe_returns"] = float(empyrical.sharpe_ratio(rets, period="daily"))
        out["sortino_returns"] = float(empyrical.sortino_ratio(rets, required_return=0, period="daily"))
        eqv = initial_equity + eq
        pk = np.maximum.accumulate(eqv)
        out["max_drawdown_pct"] = float(np.max((pk - eqv) / pk))
    return out


def main():
    os.makedirs(os.path.join(FIX, "metric_sets"), exist_ok=True)
    ref = {
        "generated_by": "tests/reference/make_metric_fixtures.py",
        "libraries": {
            "numpy": np.__version__,
            "pandas": pd.__version__,
            "scipy": scipy.__version__,
            "empyrical-reloaded": empyrical.__version__,
        },
        "sets": {},
    }
    for name, df, eq0 in (("a", set_a(), None), ("b", set_b(), 100000.0)):
        path = os.path.join(FIX, "metric_sets", f"{name}.csv")
        out = df.copy()
        for c in ("opened_at", "closed_at"):
            out[c] = out[c].dt.strftime("%Y-%m-%dT%H:%M:%SZ")
        out.to_csv(path, index=False)
        ref["sets"][name] = figures(df, eq0)
    with open(os.path.join(FIX, "metric_reference.json"), "w") as f:
        json.dump(ref, f, indent=2, sort_keys=True)
        f.write("\n")


if __name__ == "__main__":
    main()
