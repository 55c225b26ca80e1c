#!/usr/bin/env python3
"""Reference rank agreement for eventfence's distortion figures, computed
with scipy (spearmanr: Pearson correlation of average ranks; kendalltau:
tau-b) on generated pairs of figures, ties included.

    pip install numpy==2.4.6 scipy==1.17.1
    python3 tests/reference/make_rank_agreement_fixture.py

Writes tests/fixtures/rank_agreement_reference.json: several (x, y) sets
(runs' figure with every trade and without the exposed ones), each with
scipy's Spearman rho and Kendall tau-b.
"""
import json
import os

import numpy as np
from scipy import stats

HERE = os.path.dirname(os.path.abspath(__file__))


def case(name, x, y):
    rho = stats.spearmanr(x, y).statistic
    tau = stats.kendalltau(x, y, variant="b").statistic
    return {"name": name, "x": [float(v) for v in x], "y": [float(v) for v in y],
            "spearman_rho": float(rho), "kendall_tau_b": float(tau)}


def main():
    rng = np.random.default_rng(20261204)
    cases = []
    # 200 runs: removed figure = baseline + noise (a mild reordering).
    x = rng.normal(0.5, 0.4, 200)
    cases.append(case("noisy_200", x, x + rng.normal(0, 0.3, 200)))
    # 57 runs with ties: figures rounded to one decimal.
    x = np.round(rng.normal(1.0, 0.5, 57), 1)
    cases.append(case("ties_57", x, np.round(x + rng.normal(0, 0.4, 57), 1)))
    # 30 runs, order nearly reversed.
    x = rng.normal(0, 1, 30)
    cases.append(case("reversed_30", x, -x + rng.normal(0, 0.2, 30)))
    out = os.path.join(HERE, "..", "fixtures", "rank_agreement_reference.json")
    with open(out, "w") as f:
        json.dump({"source": "scipy " + __import__("scipy").__version__ + ", numpy " + np.__version__,
                   "cases": cases}, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
