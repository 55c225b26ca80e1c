#!/usr/bin/env python3
"""Reference percentiles for eventfence's bootstrap, computed with numpy
(np.percentile, linear method) over a fixed set of resample indices, with
the statistics written out independently of the Rust code.

    pip install numpy==2.4.6
    python3 tests/reference/make_bootstrap_fixture.py

Writes tests/fixtures/bootstrap_reference.json: 40 trades (open/close
minutes, pnl, exposed flag), 200 resample index sets drawn by numpy, and the
2.5 % / 97.5 % percentiles of removed - baseline for net, profit factor,
max drawdown and the tail concentration ratio at 10 %.
"""
import json
import math
import os

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))


def max_dd(pnl):
    eq = np.concatenate([[0.0], np.cumsum(pnl)])
    return float(np.max(np.maximum.accumulate(eq) - eq))


def pf(pnl):
    loss = pnl[pnl < 0].sum()
    return None if loss == 0 else float(pnl[pnl > 0].sum() / abs(loss))


def tcr(pnl, p):
    if len(pnl) == 0 or np.abs(pnl).sum() == 0:
        return None
    k = min(max(math.ceil(len(pnl) * p / 100 - 1e-9), 1), len(pnl))
    a = np.sort(np.abs(pnl))[::-1]
    return float(a[:k].mean() / np.abs(pnl).mean())


def figures(idx, opened, closed, pnl, exposed):
    # close order, ties by open then index
    order = sorted(idx, key=lambda i: (closed[i], opened[i], i))
    base = np.array([pnl[i] for i in order])
    rem = np.array([pnl[i] for i in order if not exposed[i]])
    out = {}
    out["net"] = rem.sum() - base.sum()
    a, b = pf(base), pf(rem)
    out["profit_factor"] = None if a is None or b is None else b - a
    out["max_drawdown"] = max_dd(rem) - max_dd(base)
    a, b = tcr(base, 10), tcr(rem, 10)
    out["tcr"] = None if a is None or b is None else b - a
    return out


def main():
    rng = np.random.default_rng(7)
    n, B = 40, 200
    opened = (rng.integers(0, 30, n) * 1440 + rng.integers(0, 1440, n)).tolist()
    closed = [o + int(h) for o, h in zip(opened, rng.integers(0, 600, n))]
    pnl = np.round(rng.standard_t(3, n) * 50, 2).tolist()
    exposed = (rng.random(n) < 0.25).tolist()
    sets = rng.integers(0, n, (B, n)).tolist()
    reps = [figures(s, opened, closed, pnl, exposed) for s in sets]
    result = {}
    for f in ("net", "profit_factor", "max_drawdown", "tcr"):
        v = np.array([r[f] for r in reps if r[f] is not None], dtype=float)
        lo, hi = np.percentile(v, [2.5, 97.5])
        result[f] = {"low": float(lo), "high": float(hi), "replicates": int(len(v))}
    ref = {
        "generated_by": "tests/reference/make_bootstrap_fixture.py",
        "libraries": {"numpy": np.__version__},
        "opened_min": opened,
        "closed_min": closed,
        "pnl": pnl,
        "exposed": exposed,
        "sets": sets,
        "tcr_p": 10,
        "percentiles": result,
    }
    with open(os.path.join(HERE, "..", "fixtures", "bootstrap_reference.json"), "w") as f:
        json.dump(ref, f)
        f.write("\n")


if __name__ == "__main__":
    main()
