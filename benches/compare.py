#!/usr/bin/env python3
"""Benchmark: eventfence against the two peer implementations (pandas and
DuckDB) on the same files, side by side, with an agreement check.

    python3 benches/compare.py                      # 1 M trades x 20 k releases
    python3 benches/compare.py --trades 10000000 --releases 100000 --runs 1000 --years 10
    python3 benches/compare.py --scaling            # eventfence alone at 3 sizes of each input

Installs the peers' PyPI packages (../shared/peers/requirements.txt) and
GNU time if missing, generates the data with the shared generator, builds
the release binary, then runs, alternately and --reps times each:
  - `eventfence check --trades` (the floor: reading and parsing the trades),
  - `eventfence analyze --json` (import, exposure, attribution, three
    scenarios, per-run figures; no charts),
  - the same analyze on a Parquet copy of the trades (same rows; its
    figures must equal the CSV run's),
  - `eventfence rank` (per-run table),
  - analyze without and with its default chance tests (999 placebo
    calendars, 2,000 bootstrap resamples), `tune` on a 13 x 13 grid and
    `rank --placebo 99`, for the ratios of the evidence targets,
  - pandas_peer.py and duckdb_peer.py with --per-run and --releases-out.
Prints medians of wall time, peak RSS (from /usr/bin/time -v), the ratios
of the targets, and whether eventfence's figures equal the peers' (their own
check_agree.compare_outputs: integers equal, floats within 1e-6).
"""
from __future__ import annotations

import argparse
import csv
import json
import os
import statistics
import subprocess
import sys
import tempfile

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
PEERS = os.environ.get("PEERS", os.path.join(ROOT, "..", "shared", "peers"))
BIN = os.path.join(ROOT, "target", "release", "eventfence")


def sh(cmd, **kw):
    return subprocess.run(cmd, check=True, **kw)


def setup():
    try:
        import duckdb, pandas, pyarrow  # noqa: F401
    except ImportError:
        sh([sys.executable, "-m", "pip", "install", "-q", "-r", os.path.join(PEERS, "requirements.txt")])
    if not os.path.exists("/usr/bin/time"):
        sh(["apt-get", "install", "-y", "-qq", "time"], stdout=subprocess.DEVNULL)
    sh(["cargo", "build", "--release", "-q"], cwd=ROOT)


def timed(cmd, stdout_path=None):
    """Runs cmd under /usr/bin/time -v; returns (seconds, peak RSS bytes).
    Exit status 3 (completed, needs attention: the generated calendar leaves
    some trades unjudged, README) counts as a completed run."""
    with tempfile.NamedTemporaryFile("r", suffix=".time") as tf:
        out = open(stdout_path, "w") if stdout_path else subprocess.DEVNULL
        try:
            rc = subprocess.run(["/usr/bin/time", "-v", "-o", tf.name] + cmd, stdout=out,
                                stderr=subprocess.DEVNULL).returncode
            if rc not in (0, 3):
                raise subprocess.CalledProcessError(rc, cmd)
        finally:
            if stdout_path:
                out.close()
        text = tf.read()
    wall = rss = 0.0
    for line in text.splitlines():
        line = line.strip()
        if line.startswith("Elapsed (wall clock)"):
            parts = line.rsplit(" ", 1)[-1].split(":")
            wall = sum(float(p) * 60 ** i for i, p in enumerate(reversed(parts)))
        elif line.startswith("Maximum resident set size"):
            rss = float(line.rsplit(" ", 1)[-1]) * 1024
    return wall, rss


def ensure_data(n, m, runs, years, seed, parquet=False):
    d = f"/tmp/eventfence-data-{n}-{m}-{runs}-{years}-{seed}"
    have = os.path.exists(os.path.join(d, "trades.csv")) and (not parquet or os.path.exists(os.path.join(d, "trades.parquet")))
    if not have:
        cmd = [sys.executable, os.path.join(PEERS, "gen_data.py"), "--trades", str(n), "--releases", str(m),
               "--runs", str(runs), "--years", str(years), "--seed", str(seed), "--out", d]
        if parquet:
            cmd.append("--parquet")
        sh(cmd, stdout=subprocess.DEVNULL)
    return d


def to_peer_format(summary_path, work):
    """Writes eventfence's figures in the peers' file layout."""
    s = json.load(open(summary_path))
    e = s["exposure"]
    sc = s["scenarios"]  # run with --pool: the peers read all runs as one account
    peer = {
        "peer": "eventfence",
        "trades": e["trades"], "exposed_trades": e["exposed_trades"], "exposed_pnl": e["exposed_pnl"],
        "matches": e["matches"], "releases_used": e["releases_used"], "releases_touched": e["releases_touched"],
        "attributed_total": sum(r["attributed_pnl"] for r in s["attribution"]["by_release"]),
        "baseline": {k: sc["baseline"][k] for k in ("trades", "net", "max_drawdown")},
        "removed": {k: sc["removed"][k] for k in ("trades", "net", "max_drawdown")},
    }
    json.dump(peer, open(os.path.join(work, "eventfence.json"), "w"))
    with open(os.path.join(work, "eventfence_runs.csv"), "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(["run", "trades", "exposed_trades", "exposed_pnl", "net_baseline", "net_removed",
                    "max_drawdown_baseline", "max_drawdown_removed"])
        rows = s["runs"] or [{"run": "0", "trades": e["trades"], "exposed_trades": e["exposed_trades"],
                               "exposed_pnl": e["exposed_pnl"], "scenarios": sc}]
        for r in sorted(rows, key=lambda r: int(r["run"])):
            b, x = r["scenarios"]["baseline"], r["scenarios"]["removed"]
            w.writerow([r["run"], r["trades"], r["exposed_trades"], r["exposed_pnl"], b["net"], x["net"],
                        b["max_drawdown"], x["max_drawdown"]])
    with open(os.path.join(work, "eventfence_releases.csv"), "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(["id", "trades_touched", "attributed_pnl"])
        rel = s["attribution"]["by_release"]
        for r in sorted(rel, key=lambda r: int(r["id"]) if r["id"].isdigit() else r["id"]):
            w.writerow([r["id"], r["trades_touched"], r["attributed_pnl"]])


def compare(n, m, runs, years, reps, seed):
    d = ensure_data(n, m, runs, years, seed, parquet=True)
    trades, cal = os.path.join(d, "trades.csv"), os.path.join(d, "calendar.csv")
    trades_pq = os.path.join(d, "trades.parquet")
    work = tempfile.mkdtemp(prefix="ef-bench-")
    size = os.path.getsize(trades)
    jobs = {
        "floor (check)": lambda: timed([BIN, "check", "--trades", trades]),
        "eventfence analyze": lambda: timed([BIN, "analyze", "--quiet", "--trades", trades, "--calendar", cal,
                                             "--placebo", "0", "--bootstrap", "0", "--json", "--pool"],
                                            os.path.join(work, "summary.json")),
        "analyze (Parquet)": lambda: timed([BIN, "analyze", "--quiet", "--trades", trades_pq, "--calendar", cal,
                                            "--placebo", "0", "--bootstrap", "0", "--json", "--pool"],
                                           os.path.join(work, "summary_parquet.json")),
        # The peers compute no distortion reference: rank without its draws.
        "eventfence rank": lambda: timed([BIN, "rank", "--quiet", "--trades", trades, "--calendar", cal, "--top", "1",
                                          "--distortion-draws", "0"]),
        # The chance tests and the window grid against the plain analysis
        # (runs read as alternatives, the default; issue 18's ratios).
        "analyze, no evidence": lambda: timed([BIN, "analyze", "--quiet", "--trades", trades, "--calendar", cal,
                                               "--placebo", "0", "--bootstrap", "0", "--distortion-draws", "0",
                                               "--json"]),
        "analyze, defaults": lambda: timed([BIN, "analyze", "--quiet", "--trades", trades, "--calendar", cal,
                                            "--json"]),
        "tune 13 x 13": lambda: timed([BIN, "tune", "--quiet", "--trades", trades, "--calendar", cal,
                                       "--pre", "0..60/5", "--post", "0..180/15", "--json"]),
        "rank --placebo 99": lambda: timed([BIN, "rank", "--quiet", "--trades", trades, "--calendar", cal,
                                            "--top", "1", "--placebo", "99", "--distortion-draws", "0"]),
        "rank, defaults": lambda: timed([BIN, "rank", "--quiet", "--trades", trades, "--calendar", cal,
                                         "--top", "1"]),
    }
    for p in ("pandas", "duckdb"):
        jobs[f"{p} peer"] = (lambda p=p: timed([sys.executable, os.path.join(PEERS, f"{p}_peer.py"), "--trades", trades,
                                                "--calendar", cal, "--json", os.path.join(work, f"{p}.json"),
                                                "--per-run", os.path.join(work, f"{p}_runs.csv"),
                                                "--releases-out", os.path.join(work, f"{p}_releases.csv")]))
    results = {k: [] for k in jobs}
    for _ in range(reps):
        for k, job in jobs.items():
            results[k].append(job())
    med = {k: (statistics.median(t for t, _ in v), max(r for _, r in v)) for k, v in results.items()}
    print(f"\n{n:,} trades x {m:,} releases, {runs:,} runs; trades.csv {size / 1e6:.1f} MB; median of {reps}")
    print(f"{'job':<22}{'wall s':>9}{'peak RSS MiB':>15}")
    for k, (t, r) in med.items():
        print(f"{k:<22}{t:>9.2f}{r / 2**20:>15.0f}")
    ef, fl, rk = med["eventfence analyze"][0], med["floor (check)"][0], med["eventfence rank"][0]
    pd_t, dd_t = med["pandas peer"][0], med["duckdb peer"][0]
    fastest = min(pd_t, dd_t)
    print("ratios (target):")
    print(f"  analyze / fastest peer   {ef / fastest:.2f}  (<= 0.33)")
    print(f"  analyze / DuckDB peer    {ef / dd_t:.2f}  (<= 0.20)")
    print(f"  analyze / floor          {ef / fl:.2f}  (<= 2)")
    print(f"  peak RSS / CSV size      {med['eventfence analyze'][1] / size:.2f}  (<= 1.5)")
    print(f"  rank / fastest peer      {rk / fastest:.2f}  (<= 0.33; peers ran with --per-run)")
    print(f"  Parquet / CSV analyze    {med['analyze (Parquet)'][0] / ef:.2f}  (< 1)")
    plain = med["analyze, no evidence"][0]
    print(f"  defaults / no evidence   {med['analyze, defaults'][0] / plain:.2f}  (<= 5; 999 placebos, 2,000 resamples)")
    if n >= 10_000_000:
        print(f"  defaults, wall s         {med['analyze, defaults'][0]:.1f}  (<= 60 at 10 M x 100 k)")
    print(f"  tune 13x13 / no evidence {med['tune 13 x 13'][0] / plain:.2f}  (<= 3)")
    print(f"  rank --placebo 99 / rank {med['rank --placebo 99'][0] / rk:.2f}  (<= 3)")
    print(f"  rank (defaults: 199 distortion draws) / rank {med['rank, defaults'][0] / rk:.2f}")
    figures = lambda f: {k: v for k, v in json.load(open(os.path.join(work, f))).items() if k != "inputs"}
    same = figures("summary.json") == figures("summary_parquet.json")
    to_peer_format(os.path.join(work, "summary.json"), work)
    sys.path.insert(0, PEERS)
    import check_agree
    problems = check_agree.compare_outputs(work, names=("eventfence", "pandas")) + \
        check_agree.compare_outputs(work, names=("eventfence", "duckdb"))
    if not same:
        problems.append("the Parquet run's summary differs from the CSV run's")
    print("figures agree with both peers (and Parquet equals CSV)" if not problems else "DISAGREEMENT:\n  " + "\n  ".join(problems[:20]))
    return not problems


def scaling(reps):
    print("eventfence analyze alone (median wall s, peak RSS MiB)")
    for n, m in [(250_000, 20_000), (1_000_000, 20_000), (4_000_000, 20_000), (1_000_000, 5_000), (1_000_000, 80_000)]:
        d = ensure_data(n, m, 100, 5, 1)
        trades, cal = os.path.join(d, "trades.csv"), os.path.join(d, "calendar.csv")
        r = [timed([BIN, "analyze", "--quiet", "--trades", trades, "--calendar", cal, "--placebo", "0", "--bootstrap", "0",
                    "--json"]) for _ in range(reps)]
        f = [timed([BIN, "check", "--trades", trades]) for _ in range(reps)]
        print(f"  {n:>10,} trades x {m:>7,} releases: {statistics.median(t for t, _ in r):6.2f} s, "
              f"{max(x for _, x in r) / 2**20:6.0f} MiB; floor {statistics.median(t for t, _ in f):6.2f} s")


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--trades", type=int, default=1_000_000)
    ap.add_argument("--releases", type=int, default=20_000)
    ap.add_argument("--runs", type=int, default=100)
    ap.add_argument("--years", type=int, default=5)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--reps", type=int, default=3)
    ap.add_argument("--scaling", action="store_true")
    a = ap.parse_args()
    setup()
    if a.scaling:
        scaling(a.reps)
        return
    ok = compare(a.trades, a.releases, a.runs, a.years, a.reps, a.seed)
    sys.exit(0 if ok else 1)


if __name__ == "__main__":
    main()
